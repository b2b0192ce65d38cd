"""What every part of the model-file loader shares: the key sets of format 1, the load
context (source, lines, domain, collected references), key and mapping checks, and the
``requirements:``/``known_modes:`` blocks of a file or operating point."""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from collections.abc import Mapping
from typing import Any, Callable

from ..model.formats import suggest
from ..model.core import as_matrix, is_sparse
from ..errors import ModelError

#: Versions of ``model_format`` this loader reads.
FORMAT_VERSIONS = (1,)
TOP_KEYS = ("model_format", "name", "description", "domain", "sample_period", "plant",
            "feedback", "requirements", "known_modes", "on_uncertain", "require",
            "operating_points", "grid",
            "waivers", "loop", "vector_field", "allowed_drift", "parameters")
POINT_KEYS = ("label", "id", "plant", "feedback", "requirements", "known_modes", "on_uncertain",
              "require", "loop", "allowed_drift")
SS_KEYS = ("A", "B", "C", "D", "E", "states", "inputs", "outputs", "sparse")
#: A second-order plant (``plant.second_order``; its own keys in model.second_order).
SO_PLANT_KEYS = ("second_order", "inputs", "outputs", "sparse")
TF_KEYS = ("num", "den", "states", "inputs", "outputs")
FEEDBACK_KEYS = ("state_gain", "output_gain", "controller", "inputs", "outputs")
FEEDBACK_KINDS = ("state_gain", "output_gain", "controller")
CONTROLLER_SS_KEYS = ("A", "B", "C", "D", "states", "domain", "sample_period")
CONTROLLER_TF_KEYS = ("num", "den", "states", "domain", "sample_period")
DOMAINS = ("continuous", "discrete")


@dataclass
class _Ctx:
    """Where the fields being read come from, so every error names file, field and line."""

    source: str
    root: Path | None
    base_dir: Path | None
    lines: dict[str, int]  # unprefixed dotted paths → lines for this operating point
    refs: list[str]
    prefix: str = ""  # "operating_points[1] (label 'v=30')." for a point
    sample_period: float | None = None
    domain: str = "continuous"
    waivers: tuple = ()
    read: Callable[[str], bytes] | None = None  # matrix files through this, not the filesystem
    allow_python: bool = False  # may a vector_field block import project code
    python_root: Path | None = None  # import it from here instead of root (a revision's tree)

    def line(self, path: str) -> int | None:
        parts = path.split(".")
        while parts:
            found = self.lines.get(".".join(parts))
            if found is not None:
                return found
            parts.pop()
        return None

    def err(self, path: str, problem: str, hint: str | None = None) -> ModelError:
        return ModelError(self.source, self.prefix + path, problem, line=self.line(path),
                          hint=hint)

    def prefixed_lines(self) -> dict[str, int]:
        if not self.prefix:
            return dict(self.lines)
        return {self.prefix + k: v for k, v in self.lines.items()}


def _check_keys(block: Mapping[str, Any], allowed: tuple[str, ...], ctx: _Ctx, path: str,
                what: str) -> None:
    for key in block:
        if key not in allowed:
            close = suggest(str(key), allowed)
            where = f"{path}.{key}" if path else str(key)
            raise ctx.err(where, f"is not a field of {what}",
                          f"did you mean {close!r}?" if close
                          else "known fields: " + ", ".join(allowed))


def _matrix(value: Any, ctx: _Ctx, path: str) -> Any:
    """Inline value as is (from_arrays converts it); a file reference loaded and checked."""
    if value is None or type(value) is list:  # inline: no reference (a mapping) to load
        return value
    from ..model.matrixfiles import is_reference, load_reference

    if value is None or not is_reference(value):
        return value
    arr, rel = load_reference(value, source=ctx.source, field=ctx.prefix + path,
                              line=ctx.line(path), base_dir=ctx.base_dir, root=ctx.root,
                              read=ctx.read)
    ctx.refs.append(rel)
    if is_sparse(arr):  # from_arrays checks it, and keeps A and E sparse when large
        return arr
    return as_matrix(arr, ctx.source, ctx.prefix + path, line=ctx.line(path))


def _mapping(value: Any, ctx: _Ctx, path: str) -> dict[str, Any]:
    if not isinstance(value, Mapping):
        raise ctx.err(path, f"must be a mapping, got {_kind(value)} {value!r:.60}")
    return dict(value)


def _kind(value: Any) -> str:
    if value is None:
        return "null"
    return {list: "a list", str: "a string", bool: "a boolean", int: "a number",
            float: "a number"}.get(type(value), type(value).__name__)


def _requirements(doc: Mapping[str, Any], ctx: _Ctx, states: list[str]
                  ) -> tuple[tuple, tuple[str, ...], tuple]:
    from ..rules import parsing as _reqparse

    lines = ctx.prefixed_lines() if ctx.prefix else ctx.lines  # only read
    requirements: tuple = ()
    disabled: tuple[str, ...] = ()
    known: tuple = ()
    if "requirements" in doc:
        requirements, disabled = _reqparse.parse_requirement_layer(
            doc["requirements"], ctx.source, ctx.prefix + "requirements.", lines)
    if "known_modes" in doc:
        known = _reqparse.parse_known_modes(doc["known_modes"], ctx.source,
                                            ctx.prefix + "known_modes", lines, states)
    return requirements, disabled, known


_POINT_ID = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.:=+-]{0,63}$")


_NUMBER = re.compile(r"(?<![A-Za-z_\d.])[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def label_shape(label: str) -> str:
    """A label with every number (not part of a name) replaced by ``#`` and blanks collapsed:
    ``'v=30, k2=2.5'`` → ``'v=#, k2=#'``; a retune that changes only the numbers keeps the
    shape."""
    return " ".join(_NUMBER.sub("#", label).split())


def point_identity(point: Mapping[str, Any], index: int, ctx: _Ctx, ids: dict[str, int]
                   ) -> str | None:
    """The ``id`` of the operating point at ``index`` (checked: unique, letters, digits and
    ``_.:=+-``, at most 64 characters), or None when it has none (its identity is then its
    position and the shape of its label, see :func:`label_shape`)."""
    if "id" not in point:
        return None
    ident = point["id"]
    if isinstance(ident, bool) or not isinstance(ident, (str, int)) \
            or not _POINT_ID.match(str(ident)):
        raise ctx.err("id", f"must be a short name of letters, digits and _.:=+- (not starting "
                      f"with one of .:=+-), got {ident!r:.60}", "for example id: cruise-high")
    ident = str(ident)
    if ident in ids:
        raise ctx.err("id", f"is {ident!r}, already used by point {ids[ident]}",
                      "ids must be unique in the file")
    ids[ident] = index
    return ident


def check_waiver_labels(ctx: _Ctx, labels: list[str]) -> None:
    """Refuse a waiver of the file whose ``label`` names none of its points' ``labels``."""
    known = set(labels)
    for i, w in enumerate(ctx.waivers):
        if w.label is not None and w.label not in known:
            close = suggest(w.label, labels)
            raise ctx.err(f"waivers[{i}].label", f"names no operating point (got {w.label!r})",
                          f"did you mean {close!r}?" if close else
                          "labels: " + ", ".join(labels[:20]))
