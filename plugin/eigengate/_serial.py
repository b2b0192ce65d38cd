"""Exact, JSON-safe round trip of check results, for the result cache.

Floats are written with ``repr`` precision (json does this), matrices as base64 of their
float64 bytes, so a result read back renders to the same bytes as the one computed. Modes are
rebuilt lazily: a warm re-check that only prints a summary never builds a Mode object.
Nothing here executes code from the data: unknown kinds are errors, which the cache treats as
a corrupt entry.
"""

from __future__ import annotations

import base64
import dataclasses
import datetime as _dt
import functools
import json
from collections.abc import Sequence
from typing import Any

import numpy as np

from . import requirements as _requirements
from .engine import ModelResult
from .equilibrium import Equilibrium
from .errors import ModelError
from .findings import Finding, ModeRow
from .known_modes import KnownMode
from .model import Model
from .modes import Mode, Spectrum
from .rules import Verdict
from .waivers import Waiver

__all__ = ["results_to_data", "results_from_data", "CachedSpectrum", "FORMAT"]

FORMAT = 2


def _arr(a) -> dict | None:
    if a is None:
        return None
    a = np.ascontiguousarray(a, dtype=np.float64)
    return {"shape": list(a.shape), "f64": base64.b64encode(a.tobytes()).decode("ascii")}


def _unarr(d):
    if d is None:
        return None
    raw = base64.b64decode(d["f64"], validate=True)
    return np.frombuffer(raw, dtype=np.float64).reshape(d["shape"]).copy()


def _c(z: complex) -> list[float]:
    return [z.real, z.imag]


def _uc(v) -> complex:
    return complex(float(v[0]), float(v[1]))


# ------------------------------------------------------------------ small records

@functools.lru_cache(maxsize=None)
def _req_classes() -> dict[str, type]:
    from . import loop_requirements as lr

    r = _requirements
    return {c.__name__: c for c in (r.Stability, r.MinDecayRate, r.MinDamping, r.MaxFrequency,
                                     r.PoleRegion, r.EquilibriumType, r.NoSaddle,
                                     r.DirectionCounts, lr.MinGainMargin, lr.MinPhaseMargin,
                                     lr.MinDelayMargin, lr.MaxSensitivityPeak, lr.MinDiskMargin,
                                     lr.NoSaddleInBox, lr.EquilibriumAt, lr.EquilibriumCount,
                                     lr.EquilibriaStable)}


#: Fields that need more than JSON's own types, per class: c complex, c? complex or None,
#: d? date or None, t tuple, t2 tuple of tuples, skip (filled in by the caller).
_SPECIAL = {
    "ModeRow": {"eigenvalue": "c", "s": "c", "top_states": "t2"},
    "KnownMode": {"eigenvalue": "c?", "states": "t"},
    "Waiver": {"expires": "d?", "paths": "t"},
    "Finding": {"modes": "skip", "before": "t"},  # before: () for every cached finding
    "Verdict": {"offending": "skip"},
}


@functools.lru_cache(maxsize=None)
def _codec(cls) -> tuple[tuple[str, ...], tuple[str | None, ...], bool]:
    names = tuple(f.name for f in dataclasses.fields(cls))
    special = _SPECIAL.get(cls.__name__, {})
    kinds = tuple(special.get(n) for n in names)
    return names, kinds, not special


def _record(obj) -> list:
    """A dataclass as a list of its field values in field order (positional: compact and
    fast to rebuild)."""
    names, kinds, plain = _codec(type(obj))
    if plain:
        return [getattr(obj, n) for n in names]
    out = []
    for n, k in zip(names, kinds):
        v = getattr(obj, n)
        if k is None:
            out.append(v)
        elif k == "skip":
            out.append(None)
        elif k in ("c", "c?"):
            out.append(None if v is None else [v.real, v.imag])
        elif k == "d?":
            out.append(None if v is None else v.isoformat())
        elif k == "t":
            out.append(list(v))
        else:  # t2
            out.append([list(x) for x in v])
    return out


def _unrecord(cls, values: list, **given):
    """Rebuild a dataclass from :func:`_record` data; ``given`` fields are taken as they are."""
    names, kinds, plain = _codec(cls)
    if len(values) != len(names):
        raise ValueError(f"{cls.__name__} record has {len(values)} fields, not {len(names)}")
    if plain:
        return cls(*values)
    args = []
    for n, k, v in zip(names, kinds, values):
        if k is None:
            args.append(v)
        elif k == "skip":
            args.append(given[n])
        elif k in ("c", "c?"):
            args.append(None if v is None else complex(float(v[0]), float(v[1])))
        elif k == "d?":
            args.append(None if v is None else _dt.date.fromisoformat(v))
        elif k == "t":
            args.append(tuple(v))
        else:
            args.append(tuple(tuple(x) for x in v))
    return cls(*args)


# ------------------------------------------------------------------ modes, lazily

_MODE_SCALARS = ("multiplicity", "geometric_multiplicity", "pair", "natural_frequency",
                 "damping_ratio", "time_constant", "uncertainty", "condition")


class _LazyModes(Sequence):
    """A tuple-like view of modes built on first use from their stored rows."""

    def __init__(self, rows: str, participation, states: tuple[str, ...], count: int,
                 pick: list[int] | None = None, source: "_LazyModes | None" = None) -> None:
        self._text, self._part, self._states = rows, participation, states
        self._count = count
        self._pick, self._source = pick, source
        self._built: tuple | None = None

    def _all(self) -> tuple:
        if self._built is None:
            if self._source is not None:
                every = self._source._all()
                self._built = tuple(every[i] for i in self._pick)
            else:
                part = _unarr(self._part)
                self._built = tuple(
                    Mode(index=r[0], eigenvalue=_uc(r[1]), s=_uc(r[2]),
                         participation=part[:, k], states=self._states,
                         **dict(zip(_MODE_SCALARS, r[3:])))
                    for k, r in enumerate(json.loads(self._text)))
        return self._built

    def subset(self, indices: list[int]) -> "_LazyModes":
        return _LazyModes(self._text, self._part, self._states, self._count, pick=list(indices),
                          source=self)

    def __len__(self) -> int:
        return len(self._pick) if self._pick is not None else self._count

    def __getitem__(self, i):
        return self._all()[i]

    def __iter__(self):
        return iter(self._all())

    def __eq__(self, other) -> bool:
        return tuple(self) == tuple(other)

    def __hash__(self):  # pragma: no cover - not used as a key
        return id(self)


class CachedSpectrum:
    """Stands in for :class:`~eigengate.modes.Spectrum` when a result comes from the cache:
    the summary figures are stored, the modes are built only when something reads them."""

    def __init__(self, model, data: dict) -> None:
        self.model = model
        self.infinite = data["infinite"]
        self.norm = data["norm"]
        self.balanced = data["balanced"]
        self.spectral_abscissa = data["abscissa"]
        self.spectral_radius = data["radius"]
        self.min_damping = data["min_damping"]
        self.n_eigenvalues = data["n_eigenvalues"]
        self.modes = _LazyModes(data["modes"], data["participation"], model.states,
                                data["n_modes"])

    def eigenvalues(self) -> list[complex]:
        return Spectrum.eigenvalues(self)  # same logic, reading self.modes


def _spectrum_data(sp) -> dict:
    modes = list(sp.modes)
    part = np.stack([m.participation for m in modes], axis=1) if modes else np.zeros((0, 0))
    return {
        "infinite": sp.infinite, "norm": sp.norm, "balanced": sp.balanced,
        "abscissa": sp.spectral_abscissa, "radius": sp.spectral_radius,
        "min_damping": sp.min_damping, "n_eigenvalues": sp.n_eigenvalues,
        # The mode rows are a JSON text inside the entry: decoding the cache then costs one
        # string per model, and the rows are parsed only when something reads the modes.
        "n_modes": len(modes),
        "modes": json.dumps([[m.index, _c(m.eigenvalue), _c(m.s)]
                             + [getattr(m, k) for k in _MODE_SCALARS] for m in modes],
                            separators=(",", ":")),
        "participation": _arr(part),
    }


# ------------------------------------------------------------------ model and results

def _model_data(m) -> dict:
    classes = _req_classes()
    for r in m.requirements:
        if type(r).__name__ not in classes:  # pragma: no cover - a new class not listed
            raise TypeError(f"cannot cache requirement {type(r).__name__}")
    return {
        "name": m.name, "label": m.label, "source": m.source, "structure": m.structure,
        "A": _arr(m.A), "B": _arr(m.B), "C": _arr(m.C), "D": _arr(m.D), "E": _arr(m.E),
        "sample_period": m.sample_period, "states": list(m.states), "inputs": list(m.inputs),
        "outputs": list(m.outputs), "on_uncertain": m.on_uncertain,
        "disabled": list(m.disabled), "lines": dict(m.lines),
        "requirements": [[type(r).__name__, _record(r)] for r in m.requirements],
        "known_modes": [_record(k) for k in m.known_modes],
        "waivers": [_record(w) for w in m.waivers],
        "allowed_drift": m.allowed_drift,
    }


def _model_from(d: dict):

    classes = _req_classes()
    return Model(
        name=d["name"], label=d["label"], source=d["source"], structure=d["structure"],
        A=_unarr(d["A"]), B=_unarr(d["B"]), C=_unarr(d["C"]), D=_unarr(d["D"]),
        E=_unarr(d["E"]), sample_period=d["sample_period"], states=tuple(d["states"]),
        inputs=tuple(d["inputs"]), outputs=tuple(d["outputs"]),
        on_uncertain=d["on_uncertain"], disabled=tuple(d["disabled"]), lines=d["lines"],
        requirements=tuple(_unrecord(classes[k], v) for k, v in d["requirements"]),
        known_modes=tuple(_unrecord(KnownMode, k) for k in d["known_modes"]),
        waivers=tuple(_unrecord(Waiver, w) for w in d["waivers"]),
        allowed_drift=d["allowed_drift"])


def _finding_data(f) -> dict:
    return {"f": _record(f), "modes": [_record(r) for r in f.modes]}


def _finding_from(d: dict):

    return _unrecord(Finding, d["f"], modes=tuple(_unrecord(ModeRow, r) for r in d["modes"]))


def _verdict_data(v) -> dict:
    return {"v": _record(v), "offending": [m.index - 1 for m in v.offending]}


def _result_data(r) -> dict:
    return {"model": _model_data(r.model), "spectrum": _spectrum_data(r.spectrum),
            "equilibrium": _record(r.equilibrium),
            "verdicts": [_verdict_data(v) for v in r.verdicts],
            "findings": [_finding_data(f) for f in r.findings]}


def _result_from(d: dict):

    model = _model_from(d["model"])
    spectrum = CachedSpectrum(model, d["spectrum"])
    verdicts = [_unrecord(Verdict, v["v"], offending=spectrum.modes.subset(v["offending"]))
                for v in d["verdicts"]]
    return ModelResult(model=model, spectrum=spectrum,
                       equilibrium=_unrecord(Equilibrium, d["equilibrium"]),
                       verdicts=tuple(verdicts),
                       findings=tuple(_finding_from(f) for f in d["findings"]))


def results_to_data(source: str, results: Sequence, error) -> dict:
    """Data of one file's pre-waiver check: its model results, or its load error."""
    if error is not None:
        return {"source": source, "error": [error.source, error.field, error.problem,
                                             error.line, error.hint]}
    return {"source": source, "results": [_result_data(r) for r in results]}


def results_from_data(d: dict):
    """Inverse of :func:`results_to_data`: ``(source, results, error)``."""

    if "error" in d:
        src, fld, problem, line, hint = d["error"]
        return d["source"], (), ModelError(src, fld, problem, line=line, hint=hint)
    return d["source"], tuple(_result_from(r) for r in d["results"]), None
