"""``robust:``: eigenvalue requirements over the declared ranges of uncertain parameters (EG113).

The inner requirements (``stable``, ``min_decay_rate``, ``min_damping``, ``max_frequency``,
``pole_region``) are the ordinary ones; each becomes a margin of the eigenvalues with its
boundaries (:class:`eigengate.analysis.parametric.Check`), the box is searched
(:func:`eigengate.analysis.parametric.search`), and at the worst point found for each, the
model is analysed in full and the ordinary requirement judges it, with its own error bounds.

How the verdict is decided (``decided_by``): a failure found at some parameter values is a
counterexample, decided as the inner verdict at that point is (certified when its enclosures
decide it). A pass is at best ``estimated``, never ``certified``: the boundary points come from
floating-point eigenvalue problems, not enclosures, and a pass over several parameters rests on a
sampled interior, which the message and the figure's notes say (``require: certified`` thus
makes such a pass uncertain). An uncertain inner verdict at a worst point makes the robust
verdict uncertain.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Callable, Sequence

from ..errors import ModelError
from .catalogue import Figure, Verdict
from .requirements import (MaxFrequency, MinDamping, MinDecayRate, PoleRegion, Requirement,
                           Stability, region_distance)

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

    from ..analysis.parametric import Check

__all__ = ["RobustOverRange", "INNER_KEYS"]

#: Requirement keys allowed inside ``robust:``.
INNER_KEYS = ("stable", "min_decay_rate", "min_damping", "max_frequency", "pole_region")


def _fmt(x: float) -> str:
    return f"{x:.10g}"


@dataclass(frozen=True)
class RobustOverRange(Requirement):
    """Every inner requirement holds for every parameter value in the declared box."""

    inner: tuple[Requirement, ...]
    samples: int | None = None  # interior grid points per parameter (several parameters)
    rule = "EG113"
    needs = "parameters"

    def spec(self) -> str:
        extra = [f"samples: {self.samples}"] if self.samples else []
        return "robust: {" + ", ".join([r.spec() for r in self.inner] + extra) + "}"

    def check(self, modes, spectrum, on_uncertain):
        from ..analysis import parametric as pm

        model = spectrum.model
        box = model.parameters
        discrete = box.discrete
        checks = [_check(r, model.sample_period) for r in self.inner]
        try:
            found = pm.search(box, checks, self.samples)
        except ModelError as exc:  # the loop is ill-posed somewhere in the box, say
            return self._failed(f"the model cannot be formed everywhere in the box: "
                                f"{exc.problem}")
        rows = []
        for req, worst in zip(self.inner, found.worst):
            try:
                a, e = box.build(worst.at)
            except ModelError as exc:
                return self._failed(f"the model cannot be formed at {_at(box, worst.at)}: "
                                    f"{exc.problem}")
            rows.append((req, worst, _judge(req, replace(model, A=a, E=e, parameters=None),
                                            on_uncertain)))
        return self._combine(box, rows, found.evaluations, on_uncertain, discrete)

    def _failed(self, why: str) -> Verdict:
        return self._verdict(passed=False, uncertain=False, measured="not evaluated",
                             threshold="every parameter value", margin=None, offending=(),
                             message=why + "; a requirement that cannot be evaluated fails",
                             decided_by="estimated")

    def _combine(self, box: Any, rows: list, evaluations: int, on_uncertain: str,
                 discrete: bool) -> Verdict:
        failing = [(r, w, v) for r, w, v in rows if not v.passed and not v.uncertain]
        unsure = [(r, w, v) for r, w, v in rows if v.uncertain]
        passed = not failing and (not unsure or on_uncertain == "pass")
        proven = all(w.proven for _, w, _ in rows)
        deciding = failing or unsure or [min(rows, key=lambda t: (_scaled(t[2]), t[0].rule))]
        req, worst, verdict = deciding[0]
        if failing:
            decided = "certified" if any(v.decided_by == "certified" for *_, v in failing) \
                else "estimated"
        elif unsure:
            decided = "uncertain"
        else:
            decided = "estimated"
        parts = [_row_text(box, r, w, v) for r, w, v in rows]
        ranges = ", ".join(f"{n} in [{_fmt(lo)}, {_fmt(hi)}]"
                           for n, lo, hi in zip(box.names, box.low, box.high))
        how = "; ".join(dict.fromkeys(n for _, w, _ in rows for n in w.notes))
        if passed and not proven:
            how += "; the pass rests on sampled points, so it is not proven for the whole box"
        message = (f"over {ranges} ({evaluations} parameter points): " + "; ".join(parts)
                   + f" [{how}]")
        margin = verdict.margin
        value = margin if margin is not None else worst.margin
        lower = 0.0 if passed and proven else -math.inf
        figure = Figure(name="robust_margin", value=float(value), lower=lower,
                        upper=float(value), unit=verdict.unit, at=tuple(worst.at),
                        at_label=", ".join(box.names),
                        method="guardian maps (bialternate sum/product, Kronecker sum) on "
                               "exact intervals; grid and local minimisation inside the box",
                        notes=tuple(dict.fromkeys(n for _, w, _ in rows for n in w.notes)))
        return self._verdict(passed=passed, uncertain=bool(unsure), measured=verdict.measured,
                             threshold=verdict.threshold, margin=margin, unit=verdict.unit,
                             offending=(), message=message, decided_by=decided,
                             figure=figure,
                             suggestion=None if passed else
                             f"at {_at(box, worst.at)}: {verdict.suggestion or verdict.message}")


def _scaled(v: Verdict) -> float:
    """A margin comparable across requirements: relative to its threshold's size."""
    if v.margin is None:
        return math.inf
    t = v.threshold if isinstance(v.threshold, (int, float)) else 0.0
    return v.margin / max(abs(t), 1.0)


def _at(box: Any, at: Sequence[float]) -> str:
    return ", ".join(f"{n}={_fmt(x)}" for n, x in zip(box.names, at))


def _row_text(box: Any, req: Requirement, worst: Any, v: Verdict) -> str:
    state = "uncertain" if v.uncertain else "holds" if v.passed else "fails"
    text = f"{req.spec()} {state}, worst at {_at(box, worst.at)}: {v.message}"
    if worst.crossings:
        shown = worst.crossings[:4]
        more = f" and {len(worst.crossings) - 4} more" if len(worst.crossings) > 4 else ""
        text += "; boundary at " + "; ".join(_at(box, c) for c in shown) + more
    return text


def _judge(req: Requirement, model: Any, on_uncertain: str) -> Verdict:
    from ..analysis.modes import analyse

    spectrum = analyse(model)
    return req.check(spectrum.modes, spectrum, on_uncertain)


def _check(req: Requirement, period: float | None) -> "Check":
    """The search's view of an inner requirement: a margin of the eigenvalues (z-plane for a
    discrete model, mapped by s = ln(z)/T) in the units of the requirement's own margin, and
    the boundaries where it can change sign."""
    import numpy as np

    from ..analysis.parametric import Boundary, Check

    def s_of(lam: "np.ndarray") -> "np.ndarray":
        if period is None:
            return lam
        with np.errstate(divide="ignore"):
            return np.log(lam.astype(complex)) / period

    def over(fn: Callable[["np.ndarray"], "np.ndarray"], empty: float = math.inf
             ) -> Callable[["np.ndarray"], float]:
        def margin(lam: "np.ndarray") -> float:
            v = fn(lam)
            return float(v.min()) if v.size else empty
        return margin

    if isinstance(req, Stability):
        if period is not None:
            return Check(lambda lam: float(1 - np.abs(lam).max()), (Boundary("circle", 1.0),))
        return Check(lambda lam: float(-lam.real.max()), (Boundary("abscissa", 0.0),))
    if isinstance(req, MinDecayRate):
        alpha = req.alpha
        bound = Boundary("circle", math.exp(-alpha * period)) if period is not None \
            else Boundary("abscissa", alpha)
        return Check(over(lambda lam: -s_of(lam).real - alpha), (bound,))
    if isinstance(req, MinDamping):
        zeta = req.zeta

        def damping(lam: "np.ndarray") -> "np.ndarray":
            s = s_of(lam)
            s = s[np.isfinite(s) & (np.abs(s.imag) > 1e-12 * np.abs(s)) & (np.abs(s) > 0)]
            return -s.real / np.abs(s) - zeta

        exact = period is None and zeta < 1.0
        return Check(over(damping), (Boundary("sector", zeta),) if exact else None,
                     sample_unstable=True)
    if isinstance(req, MaxFrequency):
        omega = req.omega

        def freq(lam: "np.ndarray") -> "np.ndarray":
            s = s_of(lam)
            return omega - np.abs(s[np.isfinite(s)])

        return Check(over(freq), (Boundary("circle", omega),) if period is None else None)
    if isinstance(req, PoleRegion):
        a, z, w = req.alpha, req.zeta, req.omega
        bounds: tuple[Boundary, ...] | None
        region = over(lambda lam: np.array([region_distance(complex(x), a, z, w)
                                            for x in s_of(lam)]))
        if period is not None:
            bounds = None if (z is not None or w is not None) else \
                (Boundary("circle", math.exp(-(a or 0.0) * period)),)
        elif z is not None and z >= 1.0:
            bounds = None
        else:
            bounds = tuple(b for b in (
                Boundary("abscissa", a) if a is not None else None,
                Boundary("sector", z) if z is not None else None,
                Boundary("circle", w) if w is not None else None) if b is not None)
        return Check(region, bounds)
    raise TypeError(f"{type(req).__name__} is not evaluated over a parameter range")
