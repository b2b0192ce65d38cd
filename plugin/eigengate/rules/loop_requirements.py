"""Requirements beyond the eigenvalues: loop margins (EG301–EG305) and the equilibria of
nonlinear models (EG401–EG404), with the parsers of their model-file keys.

They are ordinary :class:`~eigengate.rules.requirements.Requirement` objects: ``check`` reads the
model behind the spectrum (``model.loop_parts`` for margins, ``model.nonlinear`` for
equilibria) and returns a :class:`~eigengate.rules.catalogue.Verdict`. Each names what it needs
(``needs``); a model without it (a margin target on a model without a loop, say) gets a
failing "cannot be evaluated" verdict (:mod:`eigengate.rules.applicability`), never a pass, and a
model file or a fixture call that asks for it is refused. A closed loop that is unstable
fails every margin requirement before any margin is quoted. Heavy modules are imported
inside ``check``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable, Mapping, Sequence

from .applicability import not_evaluable, why_not
from ..analysis.equilibrium import EQUILIBRIUM_TYPES, side
from ..errors import ModelError
from ..errors import counted
from .requirements import Requirement

__all__ = ["MinGainMargin", "MinPhaseMargin", "MinDelayMargin", "MaxSensitivityPeak",
           "MinDiskMargin", "NoSaddleInBox", "EquilibriumAt", "EquilibriumCount",
           "EquilibriaStable", "PARSERS", "LOOP_RULES", "SET_RULES", "POINT_RULES",
           "parse_loop_block", "LOOP_KEYS"]

#: Rules that need a loop (``model.loop_parts``).
LOOP_RULES = ("EG301", "EG302", "EG303", "EG304", "EG305")
#: Rules about the set of equilibria in the box (checked once per parameter set).
SET_RULES = ("EG401", "EG403", "EG404")
#: Rules about one given point of a vector field.
POINT_RULES = ("EG402",)
#: Keys of the ``loop:`` block.
LOOP_KEYS = ("at", "channel", "frequency_range")


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _w(x: float | None) -> str:
    return "none" if x is None else ("∞" if math.isinf(x) else f"{x:.4g} rad/s")


def _elsewhere(req: Requirement, threshold: Any, why: str):
    """A passing verdict of a point whose set-level requirement is judged on another."""
    return req._verdict(passed=True, uncertain=False, measured="n/a", threshold=threshold,
                        margin=None, offending=(), message=why)


class _LoopRequirement(Requirement):
    """Common path: no loop → cannot be evaluated; unstable closed loop → fail; else
    ``_measure``."""

    needs = "loop"

    def check(self, modes, spectrum, on_uncertain):
        model = spectrum.model
        parts = getattr(model, "loop_parts", None)
        if parts is None:
            return not_evaluable(self, why_not(self, model))
        bad = [m for m in spectrum.modes if side(m) >= 0]
        if bad:
            n_out = sum(m.count for m in bad if side(m) > 0)
            n_on = sum(m.count for m in bad if side(m) == 0)
            where = "outside the unit circle" if model.discrete else "in the right half-plane"
            text = (f"the closed loop is unstable ({counted(n_out, 'closed-loop pole')} {where}"
                    + (f", {n_on} on the stability boundary" if n_on else "") + ")"
                    if n_out else f"the closed loop is not asymptotically stable "
                    f"({counted(n_on, 'closed-loop pole')} on the stability boundary)")
            return self._verdict(passed=False, uncertain=False, measured="unstable",
                                 threshold=self._threshold(), margin=None,
                                 offending=tuple(bad), message=text + "; margins are not "
                                 "defined", suggestion="stabilise the loop first")
        return self._measure(parts.margins(stable=True), on_uncertain)  # (checked above)

    # subclasses define _threshold() and _measure(loop_margins, on_uncertain)
    def _threshold(self) -> Any:  # pragma: no cover - every subclass overrides it
        raise NotImplementedError

    def _measure(self, margins: Any, on_uncertain: str) -> Any:  # pragma: no cover
        raise NotImplementedError

    def _compare(self, value: float, at_least: bool, what: str, detail: str):
        threshold = self._threshold()
        margin = (value - threshold) if at_least else (threshold - value)
        passed = margin >= 0
        rel = "≥" if at_least else "≤"
        message = (f"{what} {_fmt(value)} {'' if passed else 'violates '}{rel} "
                   f"{_fmt(threshold)}" + (f" (margin {_fmt(margin)})" if math.isfinite(margin)
                                           else "") + f"; {detail}")
        return self._verdict(passed=passed, uncertain=False, measured=value,
                             threshold=threshold, margin=margin if math.isfinite(margin) else None,
                             offending=(), message=message,
                             suggestion=None if passed else f"passes with {self.info.key} "
                             f"{'≤' if at_least else '≥'} {_fmt(value)}")


@dataclass(frozen=True)
class MinGainMargin(_LoopRequirement):
    """Upper and lower gain margins, in dB, both at least ``db`` (worst channel)."""

    db: float
    rule = "EG301"

    def spec(self):
        return f"min_gain_margin_db: {_fmt(self.db)}"

    def _threshold(self):
        return self.db

    def _measure(self, lm, on_uncertain):
        rows = []
        for c in lm.channels:
            low = math.inf if c.lower_gain_margin_db is None else -c.lower_gain_margin_db
            rows.append((min(c.gain_margin_db, low), c))
        value, c = min(rows, key=lambda r: r[0])
        low = ("none" if c.lower_gain_margin is None else
               f"{_fmt(c.lower_gain_margin)} ({_fmt(c.lower_gain_margin_db)} dB) at "
               f"{_w(c.lower_gain_margin_frequency)}")
        detail = (f"channel {c.channel}: upper {_fmt(c.gain_margin)} "
                  f"({_fmt(c.gain_margin_db)} dB) at {_w(c.gain_margin_frequency)}, lower {low}")
        return self._compare(value, True, "gain margin (dB)", detail)


@dataclass(frozen=True)
class MinPhaseMargin(_LoopRequirement):
    """Phase margin (degrees, smallest |PM| over gain crossovers) at least ``deg``."""

    deg: float
    rule = "EG302"

    def spec(self):
        return f"min_phase_margin_deg: {_fmt(self.deg)}"

    def _threshold(self):
        return self.deg

    def _measure(self, lm, on_uncertain):
        value, c = min(((abs(c.phase_margin), c) for c in lm.channels), key=lambda r: r[0])
        detail = (f"channel {c.channel} at {_w(c.phase_margin_frequency)}; gain crossovers: "
                  + (", ".join(_w(x) for x in c.gain_crossovers) or "none"))
        return self._compare(value, True, "phase margin (deg)", detail)


@dataclass(frozen=True)
class MinDelayMargin(_LoopRequirement):
    """Delay margin (s), the least PM_i/ω_i over every gain crossover, at least ``seconds``."""

    seconds: float
    rule = "EG303"

    def spec(self):
        return f"min_delay_margin: {_fmt(self.seconds)}"

    def _threshold(self):
        return self.seconds

    def _measure(self, lm, on_uncertain):
        value, c = min(((c.delay_margin, c) for c in lm.channels), key=lambda r: r[0])
        detail = f"channel {c.channel}, gain crossover at {_w(c.delay_margin_frequency)}"
        return self._compare(value, True, "delay margin (s)", detail)


@dataclass(frozen=True)
class MaxSensitivityPeak(_LoopRequirement):
    """Sensitivity peak ``max_ω σ̄((I + L)⁻¹)`` at most ``peak``."""

    peak: float
    rule = "EG304"

    def spec(self):
        return f"max_sensitivity_peak: {_fmt(self.peak)}"

    def _threshold(self):
        return self.peak

    def _measure(self, lm, on_uncertain):
        detail = f"at {_w(lm.sensitivity_peak_frequency)}, loop broken at the {lm.at}"
        return self._compare(lm.sensitivity_peak, False, "sensitivity peak Ms", detail)


@dataclass(frozen=True)
class MinDiskMargin(_LoopRequirement):
    """Balanced disk margin α (all channels at once; Seiler, Packard & Gahinet 2020) ≥ ``alpha``."""

    alpha: float
    rule = "EG305"

    def spec(self):
        return f"min_disk_margin: {_fmt(self.alpha)}"

    def _threshold(self):
        return self.alpha

    def _measure(self, lm, on_uncertain):
        from ..analysis.margins import disk_gain_range, disk_phase

        lo, hi = disk_gain_range(lm.disk_margin)
        detail = (f"gains {_fmt(lo)}–{_fmt(hi)} and phase ±{_fmt(disk_phase(lm.disk_margin))}° "
                  f"guaranteed, critical at {_w(lm.disk_margin_frequency)}")
        if len(lm.channels) > 1:
            detail += "; loop-at-a-time: " + ", ".join(
                f"{c.channel} {_fmt(c.disk_margin)}" for c in lm.channels)
        return self._compare(lm.disk_margin, True, "disk margin α", detail)


# ------------------------------------------------------------------ equilibria

class _SetRequirement(Requirement):
    """Reads the equilibrium search of ``model.nonlinear`` (once per parameter set)."""

    needs = "equilibria box"

    def check(self, modes, spectrum, on_uncertain):
        info = getattr(spectrum.model, "nonlinear", None)
        if info is None or info.box is None:
            return not_evaluable(self, why_not(self, spectrum.model))
        if not info.carrier:
            return _elsewhere(self, self._threshold(), "checked once per parameter set, on "
                              f"{info.carrier_label!r}")
        search = info.search()
        if not search.equilibria and self.rule != "EG403":
            return self._verdict(passed=on_uncertain == "pass", uncertain=True,
                                 measured="none found", threshold=self._threshold(),
                                 margin=None, offending=(),
                                 message=f"no equilibrium found in the box: {search.describe()}; "
                                 "cannot confirm the requirement",
                                 suggestion="widen the box or add starts")
        return self._judge(search, on_uncertain)

    # subclasses define _threshold() and _judge(search, on_uncertain)


@dataclass(frozen=True)
class NoSaddleInBox(_SetRequirement):
    """No equilibrium in the box is a saddle."""

    rule = "EG401"

    def spec(self):
        return "no_saddle_in_box: true"

    def _threshold(self):
        return "no saddle"

    def _judge(self, search, on_uncertain):
        saddles = [e for e in search.equilibria if e.equilibrium.type == "saddle"]
        unsure = any(e.equilibrium.uncertain for e in search.equilibria)
        passed = not saddles and (not unsure or on_uncertain == "pass")
        text = (f"{counted(len(saddles), 'saddle')}: " + "; ".join(e.describe() for e in saddles)
                if saddles else f"no saddle among {search.summary()}")
        return self._verdict(passed=passed, uncertain=unsure, measured=len(saddles),
                             threshold=0, margin=None, offending=(), message=text)


@dataclass(frozen=True)
class EquilibriumCount(_SetRequirement):
    """Exactly ``count`` distinct equilibria in the box."""

    count: int
    rule = "EG403"

    def spec(self):
        return f"equilibrium_count: {self.count}"

    def _threshold(self):
        return self.count

    def _judge(self, search, on_uncertain):
        found = len(search.equilibria)
        ok = found == self.count
        # Multi-start root finding can miss an equilibrium but never invents one, so fewer
        # found than expected with failed starts is uncertain rather than a certain failure.
        unsure = not ok and found < self.count and search.failed > 0
        passed = ok or (unsure and on_uncertain == "pass")
        return self._verdict(passed=passed, uncertain=unsure, measured=found,
                             threshold=self.count, margin=None, offending=(),
                             message=f"expected {counted(self.count, 'equilibrium', 'equilibria')}, "
                             f"found {found}: "
                             f"{search.summary()}; {search.describe()}")


@dataclass(frozen=True)
class EquilibriaStable(_SetRequirement):
    """Every equilibrium in the box is asymptotically stable (all directions stable)."""

    rule = "EG404"

    def spec(self):
        return "equilibria_stable: true"

    def _threshold(self):
        return "all stable"

    def _judge(self, search, on_uncertain):
        bad = [e for e in search.equilibria
               if e.equilibrium.unstable or e.equilibrium.center]
        unsure = any(e.equilibrium.uncertain for e in search.equilibria)
        passed = not bad and (not unsure or on_uncertain == "pass")
        text = (f"{counted(len(bad), 'equilibrium', 'equilibria')} not asymptotically stable: "
                + "; ".join(e.describe() for e in bad) if bad
                else f"all asymptotically stable: {search.summary()}")
        return self._verdict(passed=passed, uncertain=unsure, measured=len(bad), threshold=0,
                             margin=None, offending=(), message=text)


@dataclass(frozen=True)
class EquilibriumAt(Requirement):
    """Each listed point ``x`` is an equilibrium (``f(x, u) ≈ 0``) of the listed type."""

    points: tuple[tuple[tuple[float, ...], str], ...]
    tolerance: float = 1e-6
    rule = "EG402"
    needs = "vector field"

    def spec(self):
        inner = ", ".join(f"{{x: {list(x)}, type: {t}}}" for x, t in self.points)
        return f"equilibrium_at: [{inner}]"

    def check(self, modes, spectrum, on_uncertain):
        info = getattr(spectrum.model, "nonlinear", None)
        if info is None:
            return not_evaluable(self, why_not(self, spectrum.model))
        if not info.carrier:
            return _elsewhere(self, self.spec(), "checked once per parameter set, on "
                              f"{info.carrier_label!r}")
        wrong, unsure, found = [], False, []
        for x, expected in self.points:
            try:
                pt = info.point(x)
            except ModelError as exc:  # f fails at the point: a failing verdict, not a crash
                wrong.append(f"x={list(x)}: {exc.problem}")
                continue
            found.append(pt.describe())
            if pt.residual > self.tolerance:
                wrong.append(f"x={list(x)} is no equilibrium: |f(x, u)| = {pt.residual:.3g} > "
                             f"{self.tolerance:g}")
            elif pt.equilibrium.type != expected:
                wrong.append(f"x={list(x)}: expected {expected}, found "
                             f"{pt.equilibrium.describe()}")
            unsure = unsure or pt.equilibrium.uncertain
        passed = not wrong and (not unsure or on_uncertain == "pass")
        message = "; ".join(wrong) if wrong else "as expected: " + "; ".join(found)
        return self._verdict(passed=passed, uncertain=unsure, measured=len(wrong), threshold=0,
                             margin=None, offending=(), message=message)


# ------------------------------------------------------------------ parsing

def _number(value: Any, source: str, fld: str, line: int | None, *, low: float = 0.0,
            high: float = math.inf, low_open: bool = True, what: str = "a number") -> float:
    ok = not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(value)
    ok = ok and (value > low if low_open else value >= low) and value <= high
    if not ok:
        rng = f"{'>' if low_open else '≥'} {low:g}" + (f" and ≤ {high:g}" if high < math.inf
                                                      else "")
        raise ModelError(source, fld, f"must be {what} {rng}, got {value!r}", line=line)
    return float(value)


def _flag(cls: type) -> Callable[..., Requirement | None]:
    def parse(value, source, fld, line):
        if not isinstance(value, bool):
            raise ModelError(source, fld, f"must be true or false, got {value!r}", line=line)
        return cls() if value else None
    return parse


def _count(value, source, fld, line):
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise ModelError(source, fld, f"must be a non-negative integer, got {value!r}", line=line)
    return EquilibriumCount(value)


def _equilibrium_at(value, source, fld, line):
    items = [value] if isinstance(value, Mapping) else value
    if not isinstance(items, list) or not items:
        raise ModelError(source, fld, "must be a mapping {x: [...], type: ...} or a non-empty "
                         f"list of them, got {value!r:.60}", line=line)
    points, tol = [], 1e-6
    for i, item in enumerate(items):
        where = f"{fld}[{i}]" if isinstance(value, list) else fld
        if not isinstance(item, Mapping):
            raise ModelError(source, where, f"must be a mapping, got {item!r:.60}", line=line)
        extra = set(item) - {"x", "type", "tolerance"}
        if extra:
            raise ModelError(source, f"{where}.{sorted(extra)[0]}", "is not a known field",
                             line=line, hint="known fields: x, type, tolerance")
        x = item.get("x")
        if not isinstance(x, list) or not x or not all(
                isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                for v in x):
            raise ModelError(source, f"{where}.x", f"must be a list of finite numbers (one per "
                             f"state), got {x!r:.60}", line=line)
        kind = item.get("type")
        if kind not in EQUILIBRIUM_TYPES:
            raise ModelError(source, f"{where}.type", f"must be one of "
                             f"{', '.join(EQUILIBRIUM_TYPES)}, got {kind!r}", line=line)
        if "tolerance" in item:
            tol = _number(item["tolerance"], source, f"{where}.tolerance", line)
        points.append((tuple(float(v) for v in x), kind))
    return EquilibriumAt(tuple(points), tol)


#: Parsers of the requirement keys defined here, in the form ``_reqparse._PARSERS`` takes.
PARSERS: dict[str, Callable[..., Requirement | None]] = {
    "min_gain_margin_db": lambda v, s, f, l: MinGainMargin(_number(v, s, f, l)),
    "min_phase_margin_deg": lambda v, s, f, l: MinPhaseMargin(_number(v, s, f, l, high=180.0)),
    "min_delay_margin": lambda v, s, f, l: MinDelayMargin(_number(v, s, f, l)),
    "max_sensitivity_peak": lambda v, s, f, l: MaxSensitivityPeak(
        _number(v, s, f, l, low=1.0, low_open=False)),
    "min_disk_margin": lambda v, s, f, l: MinDiskMargin(_number(v, s, f, l, high=2.0)),
    "no_saddle_in_box": _flag(NoSaddleInBox),
    "equilibrium_at": _equilibrium_at,
    "equilibrium_count": _count,
    "equilibria_stable": _flag(EquilibriaStable),
}


def parse_loop_block(value: Any, ctx: Any, channels: Mapping[str, Sequence[str]],
                     state_feedback: bool) -> dict[str, Any]:
    """Validate the ``loop:`` block; return ``LoopParts`` keyword arguments.

    ``ctx`` is the loader's context (``ctx.err(path, problem, hint)``); ``channels`` maps each
    break point to its channel names as ``{"plant_input": (...), "plant_output": (...)}``.
    """
    from ..analysis.margins import BREAK_POINTS

    if not isinstance(value, Mapping):
        raise ctx.err("loop", f"must be a mapping, got {value!r:.60}")
    for k in value:
        if k not in LOOP_KEYS:
            raise ctx.err(f"loop.{k}", "is not a field of loop", "known fields: "
                          + ", ".join(LOOP_KEYS))
    at = value.get("at", "plant_input")
    if at not in BREAK_POINTS:
        raise ctx.err("loop.at", f"must be one of {', '.join(BREAK_POINTS)}, got {at!r}")
    if at == "plant_output" and state_feedback:
        raise ctx.err("loop.at", "is plant_output, but state_gain feeds back states, not plant "
                      "outputs", "break the loop at plant_input")
    out: dict[str, Any] = {"at": at}
    if "channel" in value:
        ch = value["channel"]
        names = tuple(channels[at])
        if ch not in names:
            raise ctx.err("loop.channel", f"names {ch!r}, which is not a loop channel at the "
                          f"{at} (channels: {', '.join(names) or 'none'})")
        out["channel"] = ch
    if "frequency_range" in value:
        fr = value["frequency_range"]
        if not (isinstance(fr, list) and len(fr) == 2 and all(
                isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                and v > 0 for v in fr) and fr[0] < fr[1]):
            raise ctx.err("loop.frequency_range", "must be [low, high] in rad/s with "
                          f"0 < low < high, got {fr!r:.60}")
        out["omega_range"] = (float(fr[0]), float(fr[1]))
    return out
