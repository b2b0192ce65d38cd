"""Positional records of the small frozen dataclasses of a result (verdicts, findings, mode
rows, requirements, waivers, known modes, equilibria), for the result cache: a list of the
field values in field order, with complex numbers, dates and tuples in JSON's types.

A record is rebuilt without the frozen ``__init__`` (which sets each field through
``object.__setattr__``): its values were the fields of such an instance when they were
written, and none of these classes has a ``__post_init__``. A class named in the data is
looked up only among the requirement classes listed here.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import functools

from ..rules.catalogue import Figure

__all__ = ["record", "unrecord", "requirement_classes", "pictures_from", "REQUIREMENT_NAMES"]

#: The names of :func:`requirement_classes`, known without importing the classes (a warm
#: re-check checks a cached model's records against them; tests check they agree).
REQUIREMENT_NAMES = frozenset((
    "Stability", "MinDecayRate", "MinDamping", "MaxFrequency", "PoleRegion", "EquilibriumType",
    "NoSaddle", "DirectionCounts", "MinGainMargin", "MinPhaseMargin", "MinDelayMargin",
    "MaxSensitivityPeak", "MinDiskMargin", "NoSaddleInBox", "EquilibriumAt", "EquilibriumCount",
    "EquilibriaStable", "MinStabilityRadius", "MaxTransientGrowth", "MaxPseudospectralAbscissa",
    "RobustOverRange"))


@functools.lru_cache(maxsize=None)
def requirement_classes() -> dict[str, type]:
    """The requirement classes a cached model may hold, by class name."""
    from ..rules import loop_requirements as lr
    from ..rules import origin_requirements as o
    from ..rules import requirements as r
    from ..rules import robustness as rb
    from ..rules.robust_range import RobustOverRange

    return {c.__name__: c for c in (r.Stability, r.MinDecayRate, r.MinDamping, r.MaxFrequency,
                                     r.PoleRegion, o.EquilibriumType, o.NoSaddle,
                                     o.DirectionCounts, lr.MinGainMargin, lr.MinPhaseMargin,
                                     lr.MinDelayMargin, lr.MaxSensitivityPeak, lr.MinDiskMargin,
                                     lr.NoSaddleInBox, lr.EquilibriumAt, lr.EquilibriumCount,
                                     lr.EquilibriaStable, rb.MinStabilityRadius,
                                     rb.MaxTransientGrowth, rb.MaxPseudospectralAbscissa,
                                     RobustOverRange)}


#: Fields that need more than JSON's own types, per class: c complex, c? complex or None,
#: d? date or None, t tuple, t2 tuple of tuples, t2? that or None, f? a Figure or None,
#: reqs nested requirements (as [class name, record]), skip (filled in by the caller).
_SPECIAL = {
    "ModeRow": {"eigenvalue": "c", "s": "c", "top_states": "t2"},
    "KnownMode": {"eigenvalue": "c?", "states": "t"},
    "Waiver": {"expires": "d?", "paths": "t"},
    # before and cause: () for every cached finding (regressions are judged after the cache)
    "Finding": {"modes": "skip", "before": "t", "figure": "f?", "cause": "t"},
    "Verdict": {"offending": "skip", "figure": "f?"},
    "Figure": {"at": "t", "notes": "t", "curve": "t2", "grid": "t2"},
    "MinStabilityRadius": {"B": "t2?", "C": "t2?"},
    "RobustOverRange": {"inner": "reqs"},
    # plot data of a result (eigengate.rules.pictures)
    "LoopCurve": {k: "t" for k in (
        "omega", "magnitude_db", "phase_deg", "real", "imag", "gain_crossovers",
        "gain_crossover_phase_deg", "phase_crossovers", "phase_crossover_magnitude_db",
        "disk_touch")},
    "FieldGrid": {"states": "t", "box": "t", "xs": "t", "ys": "t", "dx": "t2", "dy": "t2",
                  "equilibria": "t2", "types": "t", "point": "t"},
}


@functools.lru_cache(maxsize=None)
def _picture_classes() -> dict[str, type]:
    from ..analysis.field_grid import FieldGrid
    from ..analysis.loop_curves import LoopCurve

    return {"LoopCurve": LoopCurve, "FieldGrid": FieldGrid}


def pictures_from(items) -> tuple:
    """A result's plot data from its records (``[[class name, record], ...]``)."""
    if items == []:  # the common case: no classes to import
        return ()
    return _named_records(items, _picture_classes(), "pictures")


def _named_records(items, classes: dict[str, type], what: str) -> tuple:
    """Instances from ``[[class name, record], ...]``, each class one of ``classes``."""
    if type(items) is not list or not all(type(x) is list and len(x) == 2 and x[0] in classes
                                          for x in items):
        raise ValueError(f"{what} are not records of known classes")
    return tuple(unrecord(classes[name], rec) for name, rec in items)


def _complex_or_none(v) -> complex | None:
    return None if v is None else complex(float(v[0]), float(v[1]))


def _date_or_none(v):
    return None if v is None else _dt.date.fromisoformat(v)


def _tuple2(v) -> tuple:
    return tuple(tuple(x) for x in v)


def _tuple2_or_none(v) -> tuple | None:
    return None if v is None else _tuple2(v)


def _figure_or_none(v) -> Figure | None:
    return None if v is None else unrecord(Figure, v)


def _requirements_from(v) -> tuple:
    return _named_records(v, requirement_classes(), "inner requirements")


_SKIP = object()
#: How each special kind is read back.
_DECODE = {"c": _complex_or_none, "c?": _complex_or_none, "d?": _date_or_none, "t": tuple,
           "t2": _tuple2, "t2?": _tuple2_or_none, "f?": _figure_or_none, "reqs": _requirements_from,
           "skip": _SKIP}


@functools.lru_cache(maxsize=None)
def _codec(cls: type) -> tuple[tuple[str, ...], tuple[str | None, ...], bool, tuple]:
    """Field names, their special kinds, whether there are none, and the decoders of the
    special fields as ``(position, decoder)``."""
    names = tuple(f.name for f in dataclasses.fields(cls))
    special = _SPECIAL.get(cls.__name__, {})
    kinds = tuple(special.get(n) for n in names)
    decoders = tuple((i, _DECODE[k]) for i, k in enumerate(kinds) if k is not None)
    return names, kinds, not special, decoders


def record(obj) -> list:
    """A dataclass as a list of its field values in field order (positional: compact and
    fast to rebuild)."""
    cls: type = type(obj)
    names, kinds, plain, _ = _codec(cls)
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
        elif k == "f?":
            out.append(None if v is None else record(v))
        elif k == "reqs":
            out.append([[type(r).__name__, record(r)] for r in v])
        elif v is None:  # t2?
            out.append(None)
        else:  # t2, t2?
            out.append([list(x) for x in v])
    return out


def unrecord(cls, values: list, **given):
    """Rebuild a dataclass from :func:`record` data; ``given`` fields are taken as they are.

    The instance is filled in directly rather than through the frozen ``__init__`` (which sets
    each field with ``object.__setattr__``): the values were the fields of such an instance
    when they were written, and none of these classes has a ``__post_init__``."""
    names, _, plain, decoders = _codec(cls)
    if len(values) != len(names):
        raise ValueError(f"{cls.__name__} record has {len(values)} fields, not {len(names)}")
    if not plain:
        values = list(values)
        for i, decode in decoders:
            values[i] = given[names[i]] if decode is _SKIP else decode(values[i])
    obj = object.__new__(cls)
    obj.__dict__.update(zip(names, values))
    return obj
