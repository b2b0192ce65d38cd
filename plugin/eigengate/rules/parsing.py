"""Parsing of the ``requirements:`` mapping and the ``known_modes:`` list of model files and
of the repository policy; every bad value is a :class:`~eigengate.errors.ModelError`."""

from __future__ import annotations

import math
from typing import Any, Callable, Iterable, Mapping, Sequence

from ..analysis.equilibrium import EQUILIBRIUM_TYPES
from ..errors import ModelError
from ..model.formats import suggest
from .known_modes import KnownMode
from .origin_requirements import DirectionCounts, EquilibriumType, NoSaddle
from .requirements import MaxFrequency, MinDamping, MinDecayRate, PoleRegion, Requirement, Stability
from .catalogue import rule_by_key

__all__ = ["REQUIREMENT_KEYS", "parse_requirements", "parse_requirement_layer",
           "parse_known_modes"]

def _positive(value: Any, source: str, fld: str, line: int | None, *, allow_zero: bool = False,
              upper: float | None = None) -> float:
    ok = not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(value)
    if ok:
        ok = value >= 0 if allow_zero else value > 0
    if ok and upper is not None:
        ok = value <= upper
    if not ok:
        want = "a non-negative number" if allow_zero else "a positive number"
        if upper is not None:
            want += f" at most {upper:g}"
        raise ModelError(source, fld, f"must be {want}, got {value!r}", line=line)
    return float(value)


def _unknown(key: str, allowed: Iterable[str], source: str, fld: str, line: int | None) -> ModelError:
    allowed = sorted(allowed)
    close = suggest(key, allowed)
    hint = f"did you mean {close!r}?" if close else "allowed: " + ", ".join(allowed)
    return ModelError(source, fld, f"is not a known field (got {key!r})", line=line, hint=hint)


def _mapping(value: Any, source: str, fld: str, line: int | None) -> Mapping[str, Any]:
    if not isinstance(value, Mapping):
        raise ModelError(source, fld, f"must be a mapping, got {type(value).__name__} {value!r:.60}",
                         line=line)
    return value


def _region(value, source, fld, line):
    value = _mapping(value, source, fld, line)
    keys = {"min_decay_rate": "alpha", "min_damping": "zeta", "max_frequency": "omega"}
    kw = {}
    for k, v in value.items():
        if k not in keys:
            raise _unknown(k, keys, source, f"{fld}.{k}", line)
        kw[keys[k]] = _positive(v, source, f"{fld}.{k}", line, allow_zero=k != "max_frequency",
                                upper=1.0 if k == "min_damping" else None)
    if not kw:
        raise ModelError(source, fld, "must set at least one of " + ", ".join(keys) + ", got {}",
                         line=line)
    return PoleRegion(**kw)


def _stable(value, source, fld, line):
    if value is True:
        return Stability()
    if value == "marginal":
        return Stability(allow_marginal=True)
    if value is False:
        return None
    raise ModelError(source, fld, f"must be true, false or 'marginal', got {value!r}", line=line)


def _equilibrium(value, source, fld, line):
    if value not in EQUILIBRIUM_TYPES:
        close = suggest(str(value), EQUILIBRIUM_TYPES)
        raise ModelError(source, fld, f"must be one of {', '.join(EQUILIBRIUM_TYPES)}, got "
                         f"{value!r}", line=line,
                         hint=f"did you mean {close!r}?" if close else None)
    return EquilibriumType(value)


def _no_saddle(value, source, fld, line):
    if not isinstance(value, bool):
        raise ModelError(source, fld, f"must be true or false, got {value!r}", line=line)
    return NoSaddle() if value else None


def _directions(value, source, fld, line):
    value = _mapping(value, source, fld, line)
    kw = {}
    for k, v in value.items():
        if k not in ("stable", "unstable", "center"):
            raise _unknown(k, ("stable", "unstable", "center"), source, f"{fld}.{k}", line)
        if isinstance(v, bool) or not isinstance(v, int) or v < 0:
            raise ModelError(source, f"{fld}.{k}", f"must be a non-negative integer, got {v!r}",
                             line=line)
        kw[k] = v
    if not kw:
        raise ModelError(source, fld, "must set at least one of stable, unstable, center, got {}",
                         line=line)
    return DirectionCounts(**kw)


_PARSERS: dict[str, Callable[..., Requirement | None]] = {
    "stable": _stable,
    "min_decay_rate": lambda v, s, f, l: MinDecayRate(_positive(v, s, f, l, allow_zero=True)),
    "min_damping": lambda v, s, f, l: MinDamping(_positive(v, s, f, l, allow_zero=True, upper=1.0)),
    "max_frequency": lambda v, s, f, l: MaxFrequency(_positive(v, s, f, l)),
    "pole_region": _region,
    "equilibrium": _equilibrium,
    "no_saddle": _no_saddle,
    "directions": _directions,
}

#: Keys parsed where they are defined, by the module's ``PARSERS``, in its order: margin and
#: equilibrium keys (EG301-EG305, EG401-EG404), robustness keys (EG110-EG112). The module is
#: imported when a file first uses one of them (a model without them never imports it;
#: ``tests/test_requirements_parse.py`` checks these lists against the modules).
DEFERRED_KEYS = {
    ".loop_requirements": ("min_gain_margin_db", "min_phase_margin_deg", "min_delay_margin",
                           "max_sensitivity_peak", "min_disk_margin", "no_saddle_in_box",
                           "equilibrium_at", "equilibrium_count", "equilibria_stable"),
    ".robustness": ("min_stability_radius", "max_transient_growth",
                    "max_pseudospectral_abscissa"),
}


def _deferred(module: str, key: str) -> Callable[..., Requirement | None]:
    def parse(*args: Any) -> Requirement | None:
        import importlib

        real = importlib.import_module(module, __package__).PARSERS[key]
        _PARSERS[key] = real  # from now on, directly
        return real(*args)

    return parse


for _module, _keys in DEFERRED_KEYS.items():
    for _key in _keys:
        _PARSERS[_key] = _deferred(_module, _key)


def _robust(value, source, fld, line):
    """``robust: {stable: true, min_damping: 0.2, samples: 9}``: eigenvalue requirements over
    the declared parameter ranges (EG113)."""
    from .robust_range import INNER_KEYS, RobustOverRange

    value = _mapping(value, source, fld, line)
    inner, samples = [], None
    for k, v in value.items():
        where = f"{fld}.{k}"
        if k == "samples":
            if isinstance(v, bool) or not isinstance(v, int) or not 2 <= v <= 101:
                raise ModelError(source, where, f"must be a whole number from 2 to 101 (grid "
                                 f"points per parameter inside the box), got {v!r}", line=line)
            samples = v
        elif k in INNER_KEYS:
            req = _PARSERS[k](v, source, where, line)
            if req is not None:
                inner.append(req)
        elif k in _PARSERS:
            raise ModelError(source, where, f"is not evaluated over a parameter range (got "
                             f"{k!r}); robust takes the eigenvalue requirements "
                             + ", ".join(INNER_KEYS), line=line,
                             hint=f"put {k} under requirements: (it is checked at the nominal "
                             "values)")
        else:
            raise _unknown(str(k), (*INNER_KEYS, "samples"), source, where, line)
    if not inner:
        raise ModelError(source, fld, "must set at least one of " + ", ".join(INNER_KEYS)
                         + f", got {dict(value)!r:.60}", line=line)
    return RobustOverRange(tuple(sorted(inner, key=lambda r: r.rule)), samples)


_PARSERS["robust"] = _robust

#: Keys accepted under ``requirements:`` in a model file.
REQUIREMENT_KEYS = tuple(_PARSERS)


def parse_requirement_layer(raw: Any, source: str, prefix: str = "requirements.",
                            lines: Mapping[str, int] | None = None
                            ) -> tuple[tuple[Requirement, ...], tuple[str, ...]]:
    """Validate a ``requirements:`` mapping; return (requirements by rule id, rule ids
    switched off with ``false``).

    A layer of plain values (``{stable: true, min_damping: 0.05}``, most model files) is
    parsed once per process: what it gives depends on its keys and values only (source,
    prefix and lines name a bad value, and a layer that fails is never kept), and both
    tuples and the frozen requirements in them are immutable, so models share them."""
    key = _layer_key(raw)
    if key is None:
        return _parse_layer(raw, source, prefix, lines)
    found = _LAYERS.get(key)
    if found is None:
        found = _parse_layer(raw, source, prefix, lines)
        if len(_LAYERS) >= _MAX_LAYERS:
            _LAYERS.clear()
        _LAYERS[key] = found
    return found


#: Parsed layers by :func:`_layer_key`; emptied when it holds :data:`_MAX_LAYERS`.
_LAYERS: dict[tuple, tuple[tuple[Requirement, ...], tuple[str, ...]]] = {}
_MAX_LAYERS = 512
_PLAIN_VALUES = frozenset((bool, int, float, str))


def _layer_key(raw: Any) -> tuple | None:
    """A key that tells apart every two layers that could parse differently: each entry's
    key, the exact type of its value and the value; None for a layer that is not a dict of
    plain values (it is parsed every time). A float zero is never keyed (0.0 and -0.0 are
    equal keys, and a requirement keeps its value's sign), nor is NaN, which equals
    nothing."""
    if type(raw) is not dict:
        return None
    key = []
    for k, v in raw.items():
        kind = type(v)
        if kind not in _PLAIN_VALUES or kind is float and (v == 0.0 or v != v):
            return None
        key.append((k, kind, v))
    return tuple(key)


def _parse_layer(raw: Any, source: str, prefix: str, lines: Mapping[str, int] | None
                 ) -> tuple[tuple[Requirement, ...], tuple[str, ...]]:
    lines = lines or {}
    base = prefix.rstrip(".")
    raw = _mapping(raw, source, base, lines.get(base))
    out, off = [], []
    for key, value in raw.items():
        fld = prefix + str(key)
        line = lines.get(fld, lines.get(base))
        if key not in _PARSERS:
            raise _unknown(str(key), _PARSERS, source, fld, line)
        # false switches any requirement off (and a repository default of the same rule)
        req = None if value is False else _PARSERS[key](value, source, fld, line)
        if req is None:
            off.append(rule_by_key(key).id)
        else:
            out.append(req)
    return tuple(sorted(out, key=lambda r: r.rule)), tuple(sorted(off))


def parse_requirements(raw: Any, source: str, prefix: str = "requirements.",
                       lines: Mapping[str, int] | None = None) -> tuple[Requirement, ...]:
    """Validate a ``requirements:`` mapping; return the requirements sorted by rule id."""
    return parse_requirement_layer(raw, source, prefix, lines)[0]


def _eigenvalue(value: Any, source: str, fld: str, line: int | None) -> complex:
    if isinstance(value, bool):
        pass
    elif isinstance(value, (int, float)) and math.isfinite(value):
        return complex(value)
    elif isinstance(value, (list, tuple)) and len(value) == 2 and all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
            for v in value):
        return complex(value[0], value[1])
    raise ModelError(source, fld, f"must be a real number or [real, imaginary], got {value!r}",
                     line=line)


def parse_known_modes(raw: Any, source: str, prefix: str = "known_modes",
                      lines: Mapping[str, int] | None = None,
                      states: Sequence[str] | None = None) -> tuple[KnownMode, ...]:
    """Validate the ``known_modes:`` list of a model file.

    ``states`` (the model's state names), when given, is used to check ``states`` entries.
    """
    lines = lines or {}
    base = prefix.rstrip(".")
    if not isinstance(raw, list):
        raise ModelError(source, base, f"must be a list of mappings, got {type(raw).__name__}",
                         line=lines.get(base))
    allowed = ("count", "eigenvalue", "tolerance", "states", "reason")
    out = []
    for i, item in enumerate(raw):
        fld = f"{base}[{i}]"
        line = lines.get(f"{base}.{i}", lines.get(base))
        item = _mapping(item, source, fld, line)
        for k in item:
            if k not in allowed:
                raise _unknown(str(k), allowed, source, f"{fld}.{k}", line)
        count = item.get("count", 1)
        if isinstance(count, bool) or not isinstance(count, int) or count < 1:
            raise ModelError(source, f"{fld}.count", f"must be a positive integer, got {count!r}",
                             line=line)
        ev = item.get("eigenvalue")
        ev = None if ev is None else _eigenvalue(ev, source, f"{fld}.eigenvalue", line)
        tol = _positive(item.get("tolerance", 1e-8), source, f"{fld}.tolerance", line)
        names = item.get("states", [])
        if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
            raise ModelError(source, f"{fld}.states", f"must be a list of state names, got "
                             f"{names!r}", line=line)
        if states is not None:
            for n in names:
                if n not in states:
                    close = suggest(n, states)
                    raise ModelError(source, f"{fld}.states", f"names no state of the model "
                                     f"(got {n!r})", line=line,
                                     hint=f"did you mean {close!r}?" if close else None)
        reason = item.get("reason", "")
        if not isinstance(reason, str):
            raise ModelError(source, f"{fld}.reason", f"must be text, got {reason!r}", line=line)
        out.append(KnownMode(count=count, eigenvalue=ev, tolerance=tol, states=tuple(names),
                             reason=reason))
    return tuple(out)
