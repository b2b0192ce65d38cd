"""A corpus of malformed and hostile model files, written into a temporary repository.

Each :class:`Case` is one input with its expected outcome: ``"error"`` (a ModelError whose
message names the file and, where there is one, the field) or ``"model"`` (a valid but nasty
input that must load into correct models). Files are generated rather than committed, so the
corpus reads as a list of intentions. Matrix files a case references live under ``data/ID/``
so that every case can share one repository.

The holes the gate-integrity review named are listed in ``NAMED_HOLES``.
"""

from __future__ import annotations

import copy
import io
import json
import math
import os
import struct
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np
import yaml


@dataclass(frozen=True)
class Case:
    """One hostile input. ``path`` is the model file, repository-relative; ``content`` its
    bytes (or None when ``make(repo, file)`` builds it: links, FIFOs); ``files`` extra files
    the model references; ``fields`` substrings the error message must hold; ``check`` a test
    of the models a ``"model"`` case gives."""

    id: str
    path: str
    content: bytes | None
    expect: str = "error"
    fields: tuple[str, ...] = ()
    files: dict[str, bytes] = field(default_factory=dict)
    make: Callable[[Path, Path], None] | None = None
    check: Callable[[list], None] | None = None

    def write(self, repo: Path) -> Path:
        for rel, data in self.files.items():
            target = repo / rel
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
        file = repo / self.path
        file.parent.mkdir(parents=True, exist_ok=True)
        if self.make is not None:
            self.make(repo, file)
        else:
            file.write_bytes(self.content or b"")
        return file


CASES: list[Case] = []


def add(id: str, text: str | bytes, *fields: str, ext: str = "yaml", expect: str = "error",
        files: dict[str, bytes] | None = None, check=None, make=None) -> None:
    content = text.encode("utf-8") if isinstance(text, str) else text
    CASES.append(Case(id, f"models/{id}.{ext}", content, expect, fields, files or {}, make,
                      check))


# --------------------------------------------------------------------------- documents

SS = {"model_format": 1, "name": "ss", "plant": {
    "A": [[0.0, 1.0], [-2.0, -0.3]], "B": [[0.0], [1.0]], "C": [[1.0, 0.0]],
    "states": ["pos", "vel"], "inputs": ["force"], "outputs": ["pos"]},
    "requirements": {"stable": True}}
LOOP = {**copy.deepcopy(SS), "feedback": {"output_gain": [[0.5]]}}
STATE_FB = {**copy.deepcopy(SS), "feedback": {"state_gain": [[1.0, 0.5]]}}
CTRL = {**copy.deepcopy(SS), "feedback": {"controller": {
    "A": [[0.0]], "B": [[1.0]], "C": [[0.2]], "D": [[1.0]]}}}
SO = {"model_format": 1, "name": "so", "plant": {"second_order": {
    "M": [[1.0, 0.0], [0.0, 2.0]], "D": [[0.1, 0.0], [0.0, 0.1]], "K": [[2.0, -1.0], [-1.0, 2.0]],
    "F": [[0.0], [1.0]], "Cq": [[1.0, 0.0]], "Cv": [[0.0, 1.0]]}},
    "requirements": {"stable": True}}
TF = {"model_format": 1, "name": "tf", "plant": {"num": [1.0], "den": [1.0, 3.0, 2.0]},
      "requirements": {"stable": True}}


def put(doc: dict, path: str, value: Any) -> dict:
    """A copy of ``doc`` with the dotted ``path`` set to ``value`` (``DELETE`` removes it)."""
    out = copy.deepcopy(doc)
    *parents, last = path.split(".")
    node = out
    for p in parents:
        node = node[int(p)] if isinstance(node, list) else node.setdefault(p, {})
    if value is DELETE:
        del node[last]
    else:
        node[last] = value
    return out


DELETE = object()


def toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) \
            else repr(v)
    if isinstance(v, (int, str)):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(f"TOML has no {type(v).__name__}")


def dump(doc: dict, ext: str) -> str:
    """``doc`` as YAML, TOML (inline tables) or JSON text."""
    if ext == "yaml":
        return yaml.safe_dump(doc, sort_keys=False, default_flow_style=None)
    if ext == "json":
        return json.dumps(doc, indent=1, allow_nan=False)
    return "".join(f"{json.dumps(k)} = {toml_value(v)}\n" for k, v in doc.items())


def representable(value: Any, ext: str) -> bool:
    text = json.dumps(value, default=str)
    if ext == "json":
        return "NaN" not in text and "Infinity" not in text
    if ext == "toml":
        return "null" not in text
    return True


_ROTATION = ("yaml", "toml", "json")


def add_doc(id: str, doc: dict, *fields: str, expect: str = "error", check=None,
            files: dict[str, bytes] | None = None) -> None:
    """A document written in the next format of the rotation that can represent it."""
    start = len(CASES) % 3
    for k in range(3):
        ext = _ROTATION[(start + k) % 3]
        if representable(doc, ext):
            return add(id, dump(doc, ext), *fields, ext=ext, expect=expect, check=check,
                       files=files)
    raise AssertionError(id)


# --------------------------------------------------------------------------- every matrix field

BAD_MATRICES = [  # (tag, value, words the message must hold besides the field)
    ("text", "fast", ()),
    ("bool", True, ()),
    ("text-entry", [[1.0, "x"]], ("'x'",)),
    ("nan", [[float("nan")]], ("nan",)),
    ("inf", [[float("inf")]], ("inf",)),
    ("ragged", [[1.0], [1.0, 2.0]], ("equal length",)),
    ("flat", [1.0, 2.0], ()),
    ("3d", [[[1.0]]], ()),
    ("null-entry", [[None]], ()),
    ("mapping", {"rows": 2}, ("'rows'",)),
    ("wrong-shape", [[1.0, 2.0, 3.0]] * 3, ()),
]
# A wrong-sized A is caught where it first disagrees (B's rows): give A a non-square shape.
NOT_SQUARE = ("wrong-shape", [[1.0, 2.0, 3.0]], ("square",))
MATRIX_FIELDS = [
    (SS, "plant.A"), (SS, "plant.B"), (SS, "plant.C"), (SS, "plant.D"), (SS, "plant.E"),
    (STATE_FB, "feedback.state_gain"), (LOOP, "feedback.output_gain"),
    (CTRL, "feedback.controller.A"), (CTRL, "feedback.controller.B"),
    (CTRL, "feedback.controller.C"), (CTRL, "feedback.controller.D"),
    (SO, "plant.second_order.M"), (SO, "plant.second_order.D"), (SO, "plant.second_order.K"),
    (SO, "plant.second_order.F"), (SO, "plant.second_order.Cq"), (SO, "plant.second_order.Cv"),
]
for base, where in MATRIX_FIELDS:
    for tag, value, words in BAD_MATRICES:
        if where.endswith((".A", ".M")) and tag == "wrong-shape":
            tag, value, words = NOT_SQUARE
        add_doc(f"m-{where.replace('.', '-')}-{tag}", put(base, where, value), where, *words)
for where in ("plant.num", "plant.den"):
    for tag, value, _ in BAD_MATRICES[:5] + [("4d", [[[[1.0]]]], ()), ("mapping", {"r": 2}, ())]:
        add_doc(f"tf-{where.split('.')[1]}-{tag}", put(TF, where, value), where)

# --------------------------------------------------------------------------- scalar fields

SCALARS = [  # (id, document, fields)
    ("format-missing", put(SS, "model_format", DELETE), ("model_format",)),
    ("format-2", put(SS, "model_format", 2), ("model_format",)),
    ("format-text", put(SS, "model_format", "1"), ("model_format",)),
    ("format-bool", put(SS, "model_format", True), ("model_format",)),
    ("format-null", put(SS, "model_format", None), ("model_format",)),
    ("unknown-top", put(SS, "requirement", {"stable": True}), ("requirement", "requirements")),
    ("name-number", put(SS, "name", 5), ("name",)),
    ("name-empty", put(SS, "name", "  "), ("name",)),
    ("name-list", put(SS, "name", ["a"]), ("name",)),
    ("description-number", put(SS, "description", 5), ("description",)),
    ("domain-typo", put(SS, "domain", "discret"), ("domain", "discrete")),
    ("domain-number", put(SS, "domain", 1), ("domain",)),
    ("discrete-no-period", put(SS, "domain", "discrete"), ("sample_period",)),
    ("period-continuous", put(SS, "sample_period", 0.1), ("sample_period",)),
    ("period-negative", put(put(SS, "domain", "discrete"), "sample_period", -0.1),
     ("sample_period", "-0.1")),
    ("period-zero", put(put(SS, "domain", "discrete"), "sample_period", 0), ("sample_period",)),
    ("period-nan", put(put(SS, "domain", "discrete"), "sample_period", float("nan")),
     ("sample_period",)),
    ("period-inf", put(put(SS, "domain", "discrete"), "sample_period", float("inf")),
     ("sample_period",)),
    ("period-text", put(put(SS, "domain", "discrete"), "sample_period", "10ms"),
     ("sample_period",)),
    ("period-bool", put(put(SS, "domain", "discrete"), "sample_period", True),
     ("sample_period",)),
    ("on-uncertain-maybe", put(SS, "on_uncertain", "maybe"), ("on_uncertain",)),
    ("on-uncertain-bool", put(SS, "on_uncertain", False), ("on_uncertain",)),
    ("plant-missing", put(SS, "plant", DELETE), ("plant",)),
    ("plant-list", put(SS, "plant", [1, 2]), ("plant",)),
    ("plant-empty", put(SS, "plant", {}), ("plant",)),
    ("plant-unknown", put(SS, "plant.F", [[1.0]]), ("plant.F",)),
    ("plant-both-forms", put(SS, "plant.num", [1.0]), ("plant.num",)),
    ("plant-b-without-a", put(SS, "plant.A", DELETE), ("plant.A",)),
    ("states-count", put(SS, "plant.states", ["pos"]), ("plant.states",)),
    ("states-duplicate", put(SS, "plant.states", ["pos", "pos"]), ("plant.states", "'pos'")),
    ("states-number", put(SS, "plant.states", [1, 2]), ("plant.states",)),
    ("states-empty-name", put(SS, "plant.states", ["pos", ""]), ("plant.states",)),
    ("inputs-text", put(SS, "plant.inputs", "force"), ("plant.inputs",)),
    ("outputs-count", put(SS, "plant.outputs", ["a", "b"]), ("plant.outputs",)),
    ("a-empty", put(SS, "plant", {"A": []}), ("plant.A",)),
    ("a-not-square", put(SS, "plant", {"A": [[1.0, 2.0]]}), ("plant.A", "square")),
    ("e-singular-shape", put(SS, "plant.E", [[1.0]]), ("plant.E",)),
    ("so-m-singular", put(SO, "plant.second_order.M", [[1.0, 1.0], [1.0, 1.0]]),
     ("plant.second_order.M", "singular")),
    ("so-k-missing", put(SO, "plant.second_order.K", DELETE), ("plant.second_order.K",)),
    ("so-unknown", put(SO, "plant.second_order.G", [[1.0]]), ("plant.second_order.G",)),
    ("so-not-mapping", put(SO, "plant.second_order", [1.0]), ("plant.second_order",)),
    ("so-with-a", put(SO, "plant.A", [[1.0]]), ("plant.A", "second_order")),
    ("so-coordinates", put(SO, "plant.second_order.coordinates", ["x"]),
     ("plant.second_order.coordinates",)),
    ("tf-improper", put(TF, "plant.num", [1.0, 2.0, 3.0, 4.0]), ("plant.num",)),
    ("tf-den-zero", put(TF, "plant.den", [0.0, 0.0]), ("plant.den",)),
    ("tf-den-empty", put(TF, "plant.den", []), ("plant.den",)),
    ("tf-static-plant", put(TF, "plant.den", [2.0]), ("plant.den",)),
    ("tf-num-missing", put(TF, "plant.num", DELETE), ("plant.num",)),
    ("tf-mimo-den-shape", put(put(TF, "plant.num", [[[1.0], [2.0]]]), "plant.den",
                              [[[1.0, 1.0]]]), ("plant.den",)),
    ("tf-mimo-row-scalar", put(put(TF, "plant.num", [[[1.0]], 2.0]), "plant.den", [1.0, 1.0]),
     ("plant.num",)),
    ("feedback-none", put(SS, "feedback", {}), ("feedback",)),
    ("feedback-two-kinds", put(LOOP, "feedback.state_gain", [[1.0, 0.0]]), ("feedback",)),
    ("feedback-unknown", put(LOOP, "feedback.gain", [[1.0]]), ("feedback.gain",)),
    ("feedback-input-unknown", put(LOOP, "feedback.inputs", ["torque"]),
     ("feedback.inputs", "'torque'")),
    ("feedback-input-twice", put(LOOP, "feedback.inputs", ["force", "force"]),
     ("feedback.inputs",)),
    ("feedback-outputs-state-gain", put(STATE_FB, "feedback.outputs", ["pos"]),
     ("feedback.outputs",)),
    ("feedback-text", put(SS, "feedback", "pid"), ("feedback",)),
    ("controller-e", put(CTRL, "feedback.controller.E", [[1.0]]), ("feedback.controller.E",)),
    ("controller-domain", put(CTRL, "feedback.controller.domain", "discrete"),
     ("feedback.controller.domain",)),
    ("controller-states-clash", put(CTRL, "feedback.controller.states", ["pos"]),
     ("feedback.controller.states", "'pos'")),
    ("controller-wrong-columns", put(CTRL, "feedback.controller.B", [[1.0, 2.0]]),
     ("feedback.controller.D", "1×2")),
    ("output-feedback-ill-posed", put(put(LOOP, "plant.D", [[-2.0]]), "feedback.output_gain",
                                      [[0.5]]), ("feedback.output_gain",)),
]
for id, doc, fields in SCALARS:
    add_doc(id, doc, *fields)

# --------------------------------------------------------------------------- blocks

BLOCKS = [
    ("req-list", put(SS, "requirements", ["stable"]), ("requirements",)),
    ("req-unknown", put(SS, "requirements.min_dampng", 0.2), ("requirements.min_dampng",)),
    ("req-stable-text", put(SS, "requirements.stable", "yes please"), ("requirements.stable",)),
    ("req-damping-above-one", put(SS, "requirements.min_damping", 2.0),
     ("requirements.min_damping",)),
    ("req-damping-negative", put(SS, "requirements.min_damping", -0.1),
     ("requirements.min_damping",)),
    ("req-damping-nan", put(SS, "requirements.min_damping", float("nan")),
     ("requirements.min_damping",)),
    ("req-damping-bool", put(SS, "requirements.min_damping", True),
     ("requirements.min_damping",)),
    ("req-decay-text", put(SS, "requirements.min_decay_rate", "fast"),
     ("requirements.min_decay_rate",)),
    ("req-decay-inf", put(SS, "requirements.min_decay_rate", float("inf")),
     ("requirements.min_decay_rate",)),
    ("req-frequency-zero", put(SS, "requirements.max_frequency", 0),
     ("requirements.max_frequency",)),
    ("req-region-number", put(SS, "requirements.pole_region", 5), ("requirements.pole_region",)),
    ("req-region-unknown", put(SS, "requirements.pole_region", {"radius": 1.0}),
     ("requirements.pole_region",)),
    ("req-equilibrium-unknown", put(SS, "requirements.equilibrium", "whirlpool"),
     ("requirements.equilibrium",)),
    ("req-directions-empty", put(SS, "requirements.directions", {}),
     ("requirements.directions",)),
    ("req-directions-negative", put(SS, "requirements.directions", {"stable": -1}),
     ("requirements.directions",)),
    ("req-margin-no-loop", put(SS, "requirements.min_gain_margin_db", 6),
     ("requirements.min_gain_margin_db",)),
    ("req-margin-text", put(LOOP, "requirements.min_phase_margin_deg", "lots"),
     ("requirements.min_phase_margin_deg",)),
    ("known-text", put(SS, "known_modes", "integrator"), ("known_modes",)),
    ("known-count-zero", put(SS, "known_modes", [{"count": 0}]), ("known_modes",)),
    ("known-count-bool", put(SS, "known_modes", [{"count": True}]), ("known_modes",)),
    ("known-eigenvalue-text", put(SS, "known_modes", [{"eigenvalue": "zero", "count": 1}]),
     ("known_modes",)),
    ("known-unknown-state", put(SS, "known_modes", [{"states": ["heading"], "count": 1}]),
     ("known_modes", "heading")),
    ("known-unknown-key", put(SS, "known_modes", [{"count": 1, "why": "x"}]), ("known_modes",)),
    ("points-empty", put(SS, "operating_points", []), ("operating_points",)),
    ("points-text", put(SS, "operating_points", "hover"), ("operating_points",)),
    ("points-no-label", put(SS, "operating_points", [{}]), ("operating_points[0].label",)),
    ("points-label-number", put(SS, "operating_points", [{"label": 30}]),
     ("operating_points[0]", "label")),
    ("points-label-twice", put(SS, "operating_points", [{"label": "a"}, {"label": "a"}]),
     ("operating_points[1]", "label")),
    ("points-unknown-key", put(SS, "operating_points", [{"label": "a", "domain": "discrete"}]),
     ("operating_points[0]", "domain")),
    ("points-bad-matrix", put(SS, "operating_points", [{"label": "storm", "plant": {
        "A": [[1.0, 2.0]]}}]), ("operating_points[0] (label 'storm').plant.A",)),
    ("points-item-list", put(SS, "operating_points", [[1]]), ("operating_points[0] must",)),
    ("waivers-text", put(SS, "waivers", "all"), ("waivers",)),
    ("waivers-no-reason", put(SS, "waivers", [{"rule": "EG103"}]), ("waivers[0]", "reason")),
    ("waivers-bad-date", put(SS, "waivers", [{"rule": "EG103", "reason": "r",
                                              "expires": "tomorrow"}]), ("waivers[0]", "expires")),
    ("waivers-bad-rule", put(SS, "waivers", [{"rule": "EG999", "reason": "r"}]),
     ("waivers[0]", "rule")),
    ("waivers-unknown-label", put(put(SS, "operating_points", [{"label": "a"}]), "waivers",
                                  [{"rule": "EG103", "reason": "r", "label": "b"}]),
     ("waivers[0].label",)),
    ("loop-no-feedback", put(SS, "loop", {"at": "plant_input"}), ("loop",)),
    ("loop-at-unknown", put(LOOP, "loop", {"at": "middle"}), ("loop.at",)),
    ("loop-channel-unknown", put(LOOP, "loop", {"channel": "torque"}), ("loop.channel",)),
    ("loop-range-reversed", put(LOOP, "loop", {"frequency_range": [10.0, 1.0]}),
     ("loop.frequency_range",)),
    ("loop-range-negative", put(LOOP, "loop", {"frequency_range": [-1.0, 5.0]}),
     ("loop.frequency_range",)),
    ("loop-unknown-key", put(LOOP, "loop", {"where": "input"}), ("loop.where",)),
    ("loop-state-gain-output", put(STATE_FB, "loop", {"at": "plant_output"}), ("loop.at",)),
    ("drift-negative", put(SS, "allowed_drift", {"damping": {"abs": -1.0}}),
     ("allowed_drift.damping",)),
    ("drift-unknown", put(SS, "allowed_drift", {"speed": {"abs": 1.0}}), ("allowed_drift",)),
    ("drift-gate-nan", put(SS, "allowed_drift", {"match_gate": float("nan")}),
     ("allowed_drift.match_gate",)),
    ("drift-text", put(SS, "allowed_drift", "some"), ("allowed_drift",)),
]
for id, doc, fields in BLOCKS:
    add_doc(id, doc, *fields)

# Vector fields: the repository of the corpus allows Python; the module is its own file.
VF_MODULE = b'''\
import math


def pendulum(x, u, g):
    return [x[1], -g * math.sin(x[0]) - 0.5 * x[1]]


def raises(x, u, g):
    raise RuntimeError("boom")


def wrong_length(x, u, g):
    return [0.0]


def not_finite(x, u, g):
    return [float("nan"), 0.0]


NOT_A_FUNCTION = 3
'''
VF = {"model_format": 1, "name": "vf", "vector_field": {
    "function": "hostile_vf:pendulum", "states": ["angle", "rate"],
    "parameters": {"g": 9.81}, "at": [{"label": "down", "x": [0.0, 0.0]}]},
    "requirements": {"stable": True}}
VF_FILES = {"hostile_vf.py": VF_MODULE}
VECTOR_FIELDS = [
    ("vf-function-missing", put(VF, "vector_field.function", DELETE), ("vector_field.function",)),
    ("vf-function-form", put(VF, "vector_field.function", "pendulum"), ("vector_field.function",)),
    ("vf-module-missing", put(VF, "vector_field.function", "no_such_module_here:f"),
     ("vector_field.function", "no_such_module_here")),
    ("vf-not-callable", put(VF, "vector_field.function", "hostile_vf:NOT_A_FUNCTION"),
     ("vector_field.function",)),
    ("vf-raises", put(VF, "vector_field.function", "hostile_vf:raises"), ("vector_field",)),
    ("vf-wrong-length", put(VF, "vector_field.function", "hostile_vf:wrong_length"),
     ("vector_field",)),
    ("vf-not-finite", put(VF, "vector_field.function", "hostile_vf:not_finite"),
     ("vector_field",)),
    ("vf-states-text", put(VF, "vector_field.states", "angle"), ("vector_field.states",)),
    ("vf-at-empty", put(VF, "vector_field.at", []), ("vector_field.at",)),
    ("vf-at-x-short", put(VF, "vector_field.at", [{"label": "down", "x": [0.0]}]),
     ("vector_field.at[0].x",)),
    ("vf-at-x-nan", put(VF, "vector_field.at", [{"label": "down", "x": [float("nan"), 0.0]}]),
     ("vector_field.at[0].x",)),
    ("vf-param-text", put(VF, "vector_field.parameters", {"g": "earth"}),
     ("vector_field.parameters.g",)),
    ("vf-unknown-key", put(VF, "vector_field.solver", "rk4"), ("vector_field.solver",)),
    ("vf-with-plant", put(VF, "plant", {"A": [[1.0]]}), ("plant",)),
    ("vf-discrete", put(put(VF, "domain", "discrete"), "sample_period", 0.1), ("domain",)),
    ("vf-box-reversed", put(put(VF, "vector_field.at", DELETE), "vector_field.equilibria",
                            {"box": {"angle": [1.0, -1.0], "rate": [-1.0, 1.0]}}),
     ("vector_field.equilibria.box.angle",)),
    ("vf-starts-huge", put(put(VF, "vector_field.at", DELETE), "vector_field.equilibria",
                           {"box": {"angle": [-1.0, 1.0], "rate": [-1.0, 1.0]},
                            "starts": 10 ** 9}), ("vector_field.equilibria.starts",)),
]
VECTOR_FIELDS.append(("vf-ok", VF, ()))
for id, doc, fields in VECTOR_FIELDS:
    add_doc(id, doc, *fields, files=VF_FILES, expect="model" if id == "vf-ok" else "error")
