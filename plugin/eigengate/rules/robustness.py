"""Requirements on how robust a stable model is (EG110–EG112), with the parsers of their keys.

The figures come from :mod:`eigengate.analysis.robustness` as brackets ``[lower, upper]`` that
hold the true value (the methods' tolerances and the rounding of the last digits included):

* ``min_stability_radius`` (EG110): the distance to instability, complex and unstructured by
  default, for perturbations ``A + BΔC`` with ``structure: {B, C}``, and for real ``Δ`` with
  ``real: true``;
* ``max_transient_growth`` (EG111): the peak of ``‖e^{At}‖₂`` (discrete ``‖A^k‖₂``) and its
  time;
* ``max_pseudospectral_abscissa`` (EG112): the ε-pseudospectral abscissa (discrete: radius).

A verdict is decided when the whole bracket lies on one side of the threshold; when the
threshold lies inside it, the verdict is uncertain and follows ``on_uncertain``. Decided
verdicts are ``estimated``, never ``certified``: the level-set tests behind the brackets are
eigenvalue computations in floating point, not enclosures that hold in exact arithmetic, so
``require: certified`` treats them as uncertain. A model that is not asymptotically stable
fails each of them before any figure is computed (its radius is 0, its transient unbounded),
and a model these methods do not apply to (a descriptor model with a singular E, a
structure of the wrong shape, a model larger than :data:`MAX_STATES`) gets a failing "cannot
be evaluated" verdict, never a pass.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable, Mapping, Sequence

from ..analysis.equilibrium import side
from ..errors import ModelError
from ..errors import counted
from .applicability import not_evaluable
from .catalogue import Figure, Verdict
from .requirements import Requirement

__all__ = ["MinStabilityRadius", "MaxTransientGrowth", "MaxPseudospectralAbscissa",
           "PARSERS", "MAX_STATES", "FIGURE_NAMES"]

#: Largest model the dense methods are run on (each step solves a 2n × 2n eigenvalue
#: problem); a larger one is not evaluated, and says so.
MAX_STATES = 2000
#: Figures the baseline stores, by requirement (the key of :class:`Figure` names).
FIGURE_NAMES = ("stability_radius", "structured_stability_radius", "real_stability_radius",
                "transient_growth", "pseudospectral_abscissa")
#: Points of the transient curve kept for the report's plot (models up to CURVE_STATES).
CURVE_POINTS = 64
CURVE_STATES = 60

Matrix = tuple[tuple[float, ...], ...]


def _fmt(x: float) -> str:
    return "∞" if math.isinf(x) and x > 0 else f"{x:.6g}"


def _shape(m: Matrix) -> tuple[int, int]:
    return (len(m), len(m[0]) if m else 0)


class _RobustRequirement(Requirement):
    """Common path: too large → not evaluated; not asymptotically stable → fail;
    ``NotApplicable`` from the analysis → not evaluated; else ``_measure``."""

    #: the figure's words and its verdict direction (True: value must be ≥ threshold)
    what = ""
    at_least = True

    def unfit(self, model: Any) -> str | None:
        """Why ``model`` cannot be judged by this requirement, None when it can."""
        if model.n_states > MAX_STATES:
            return (f"the model has {model.n_states} states, more than the {MAX_STATES} the "
                    "dense methods are run on")
        return None

    def _threshold(self) -> float:  # pragma: no cover - overridden
        raise NotImplementedError

    def _measure(self, model: Any, spectrum: Any) -> tuple[Any, str, Mapping[str, Any]]:
        raise NotImplementedError  # pragma: no cover

    def _unstable_value(self) -> float:  # pragma: no cover - overridden
        raise NotImplementedError

    def check(self, modes, spectrum, on_uncertain):
        from ..analysis.robustness import NotApplicable

        model = spectrum.model
        why = self.unfit(model)
        if why is not None:
            return not_evaluable(self, why)
        bad = [m for m in spectrum.modes if side(m) >= 0]
        if bad:
            where = "outside the unit circle" if model.discrete else "in the right half-plane"
            n_out = sum(m.count for m in bad if side(m) > 0)
            text = (f"the model is unstable ({counted(n_out, 'eigenvalue')} {where})" if n_out else
                    "the model is not asymptotically stable (eigenvalues on or within their "
                    "uncertainty of the stability boundary)")
            value = self._unstable_value()
            return self._verdict(passed=False, uncertain=False, measured=value,
                                 threshold=self._threshold(), margin=None, offending=tuple(bad),
                                 message=f"{text}: {self.what} is {_fmt(value)}",
                                 suggestion="stabilise the model first",
                                 figure=Figure(self.figure_name(), value, value, value,
                                               unit=self._unit(model),
                                               method="the model is not asymptotically stable"))
        try:
            bracket, at_text, extra = self._measure(model, spectrum)
        except NotApplicable as exc:
            return not_evaluable(self, str(exc))
        return self._judge(bracket, at_text, extra, model, on_uncertain)

    def figure_name(self) -> str:  # pragma: no cover - overridden
        raise NotImplementedError

    def _unit(self, model: Any) -> str:
        return self.info.unit

    def _judge(self, b: Any, at_text: str, extra: Mapping[str, Any], model: Any,
               on_uncertain: str) -> Verdict:
        """The verdict of a bracket ``b`` against the threshold."""
        t = self._threshold()
        lo, hi = (b.lower, b.upper)
        if self.at_least:
            sure_pass, sure_fail, margin = lo >= t, hi < t, b.value - t
        else:
            sure_pass, sure_fail, margin = hi <= t, lo > t, t - b.value
        uncertain = not (sure_pass or sure_fail)
        passed = sure_pass or (uncertain and on_uncertain == "pass")
        unit = self._unit(model)
        u = f" {unit}" if unit else ""
        rel = "≥" if self.at_least else "≤"
        bracket = (f"[{_fmt(lo)}, {_fmt(hi)}]" if lo != hi else "exact to rounding")
        head = f"{self.what} {_fmt(b.value)}{u} (bracket {bracket}{at_text})"
        if uncertain:
            message = (f"{head}: the threshold {_fmt(t)} lies within the bracket, so the "
                       f"verdict is not decided; {'passed' if passed else 'failed'} by the "
                       f"on_uncertain={on_uncertain} policy")
        else:
            message = (f"{head} {'' if passed else 'violates '}{rel} {_fmt(t)}"
                       + (f" (margin {_fmt(margin)})" if math.isfinite(margin) else ""))
        notes = tuple(getattr(b, "notes", ()))
        if notes:
            message += "; " + "; ".join(notes)
        fig = Figure(self.figure_name(), float(b.value), float(lo), float(hi), unit=unit,
                     at=tuple(float(x) for x in b.at), at_label=extra.get("at_label", ""),
                     method=b.method, notes=notes, curve=extra.get("curve", ()),
                     grid=extra.get("grid", ()))
        key = self.info.key
        return self._verdict(passed=passed, uncertain=uncertain, measured=float(b.value),
                             threshold=t, margin=margin if math.isfinite(margin) else None,
                             offending=(), message=message, unit=unit, figure=fig,
                             decided_by="uncertain" if uncertain else "estimated",
                             suggestion=None if passed else
                             f"passes with {key} {'≤' if self.at_least else '≥'} "
                             f"{_fmt(lo if self.at_least else hi)}")


def _arrays(model: Any) -> dict[str, Any]:
    return dict(E=model.E, sample_period=model.sample_period)


def _frequency_text(b: Any, model: Any) -> str:
    if not b.at:
        return ""
    w = b.at[0]
    return f", at ω = {_fmt(abs(w))} rad/s" if math.isfinite(w) else ", at ω = ∞"


@dataclass(frozen=True)
class MinStabilityRadius(_RobustRequirement):
    """Distance to instability at least ``radius`` (complex unstructured by default)."""

    radius: float
    B: Matrix | None = None
    C: Matrix | None = None
    real: bool = False
    rule = "EG110"
    what = "stability radius"
    at_least = True

    def spec(self) -> str:
        if self.B is None and not self.real:
            return f"min_stability_radius: {_fmt(self.radius)}"
        parts = [f"min: {_fmt(self.radius)}"]
        if self.B is not None and self.C is not None:
            (p, q), (r, s) = _shape(self.B), _shape(self.C)
            parts.append(f"structure: {{B: {p}×{q}, C: {r}×{s}}}")
        if self.real:
            parts.append("real: true")
        return "min_stability_radius: {" + ", ".join(parts) + "}"

    def figure_name(self) -> str:
        return "real_stability_radius" if self.real else \
            "structured_stability_radius" if self.B is not None else "stability_radius"

    def _threshold(self) -> float:
        return self.radius

    def _unstable_value(self) -> float:
        return 0.0

    def unfit(self, model):
        why = super().unfit(model)
        if why is not None or self.B is None or self.C is None:
            return why
        n = model.n_states
        (p, q), (r, s) = _shape(self.B), _shape(self.C)
        if p != n:
            return f"structure.B has {p} rows, but the model has {n} states"
        if s != n:
            return f"structure.C has {s} columns, but the model has {n} states"
        return None

    def _measure(self, model: Any, spectrum: Any) -> tuple[Any, str, Mapping[str, Any]]:
        import numpy as np

        from ..analysis import robustness as rb

        kw = _arrays(model)
        if self.B is not None:
            kw.update(B=np.array(self.B, dtype=float), C=np.array(self.C, dtype=float))
        f = rb.real_stability_radius if self.real else rb.stability_radius
        b = f(np.asarray(model.A, dtype=float), **kw)
        return b, _frequency_text(b, model), {"at_label": "ω (rad/s)"}


@dataclass(frozen=True)
class MaxTransientGrowth(_RobustRequirement):
    """Peak amplification max ‖e^{At}‖₂ (discrete max ‖A^k‖₂) at most ``growth``."""

    growth: float
    rule = "EG111"
    what = "transient growth"
    at_least = False

    def spec(self) -> str:
        return f"max_transient_growth: {_fmt(self.growth)}"

    def figure_name(self) -> str:
        return "transient_growth"

    def _threshold(self) -> float:
        return self.growth

    def _unstable_value(self) -> float:
        return math.inf

    def _measure(self, model: Any, spectrum: Any) -> tuple[Any, str, Mapping[str, Any]]:
        import numpy as np

        from ..analysis import growth as gr

        A = np.asarray(model.A, dtype=float)
        b = gr.transient_growth(A, **_arrays(model))
        t = b.at[0] if b.at else 0.0
        if model.discrete:
            at = f", at step k = {int(round(t))}"
            label = "k (steps)"
        else:
            at = f", at t = {_fmt(t)} s"
            label = "t (s)"
        curve: tuple[tuple[float, float], ...] = ()
        if model.n_states <= CURVE_STATES:
            curve = _growth_curve(gr, A, model, t, spectrum)
        return b, at, {"at_label": label, "curve": curve}


def _growth_curve(gr: Any, A: Any, model: Any, t_peak: float, spectrum: Any
                  ) -> tuple[tuple[float, float], ...]:
    """``(t, ‖e^{At}‖)`` on a span that shows the peak and most of the decay."""
    import numpy as np

    rate = min((m.decay_rate for m in spectrum.modes), default=0.0)  # the slowest mode
    if model.discrete:
        radius = spectrum.spectral_radius
        decay = -math.log(radius) if 0 < radius < 1 else 1.0
        span = max(3.0 * t_peak, 4.6 / decay if decay > 0 else 10.0, 8.0)
        steps = np.unique(np.round(np.linspace(0, min(span, 10_000), CURVE_POINTS)))
        times = steps.astype(float)
    else:
        span = max(3.0 * t_peak, 4.6 / rate if rate > 0 else 10.0 * max(t_peak, 1.0))
        times = np.linspace(0.0, span, CURVE_POINTS)
    values = gr.growth_curve(A, times, E=model.E, sample_period=model.sample_period)
    return tuple((float(x), float(y)) for x, y in zip(times, values))


#: Points per side of the σ_min grid kept for the report's pseudospectral level curves, and
#: the largest model it is computed for.
GRID_POINTS = 56
GRID_STATES = 30


def _sigma_grid(ps: Any, model: Any, spectrum: Any) -> tuple[tuple[float, ...], ...]:
    """σ_min(A − zI) on a box about the eigenvalues (z-plane for a discrete model), wide
    enough for the level curves ε = 10⁻¹ … 10⁻⁴ near them."""
    import numpy as np

    zs = [complex(m.eigenvalue) for m in spectrum.modes if math.isfinite(abs(m.eigenvalue))]
    if not zs:
        return ()
    re = [z.real for z in zs]
    im = [abs(z.imag) for z in zs]
    scale = max(max(abs(z) for z in zs), 1e-3)
    pad = max(0.6 * (max(re) - min(re)), 0.6 * max(im), 0.3 * scale, 0.2)
    xs = np.linspace(min(re) - pad, max(re) + pad, GRID_POINTS)
    ys = np.linspace(-(max(im) + pad), max(im) + pad, GRID_POINTS)
    values = ps.sigma_min_grid(np.asarray(model.A, dtype=float), xs, ys, E=model.E)
    return (tuple(map(float, xs)), tuple(map(float, ys)),
            *(tuple(map(float, row)) for row in values))


@dataclass(frozen=True)
class MaxPseudospectralAbscissa(_RobustRequirement):
    """ε-pseudospectral abscissa (discrete: radius) at most ``maximum``."""

    epsilon: float
    maximum: float
    rule = "EG112"
    what = "pseudospectral abscissa"
    at_least = False

    def spec(self) -> str:
        return (f"max_pseudospectral_abscissa: {{epsilon: {_fmt(self.epsilon)}, "
                f"max: {_fmt(self.maximum)}}}")

    def figure_name(self) -> str:
        return "pseudospectral_abscissa"

    def _unit(self, model):
        return "" if model.discrete else "1/s"

    def _threshold(self) -> float:
        return self.maximum

    def _unstable_value(self) -> float:
        return math.inf

    def _measure(self, model: Any, spectrum: Any) -> tuple[Any, str, Mapping[str, Any]]:
        import numpy as np

        from ..analysis import pseudospectra as ps

        b = ps.pseudospectral_abscissa(np.asarray(model.A, dtype=float), self.epsilon,
                                       **_arrays(model))
        where = ""
        if len(b.at) == 2:
            where = f", at z = {_fmt(b.at[0])}{'+' if b.at[1] >= 0 else '−'}" \
                    f"{_fmt(abs(b.at[1]))}j"
        extra: dict[str, Any] = {"at_label": "z"}
        if model.n_states <= GRID_STATES:
            extra["grid"] = _sigma_grid(ps, model, spectrum)
        return b, f" for ε = {_fmt(self.epsilon)}{where}", extra

    def _judge(self, b, at_text, extra, model, on_uncertain):
        v = super()._judge(b, at_text, extra, model, on_uncertain)
        if not model.discrete:
            return v
        from dataclasses import replace

        return replace(v, message=v.message.replace("pseudospectral abscissa",
                                                     "pseudospectral radius", 1))


# ------------------------------------------------------------------ parsing

def _number(value: Any, source: str, fld: str, line: int | None, *, low: float,
            low_open: bool, what: str) -> float:
    ok = not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(value)
    if not ok or not (value > low if low_open else value >= low):
        raise ModelError(source, fld, f"must be {what}, got {value!r}", line=line)
    return float(value)


def _matrix(value: Any, source: str, fld: str, line: int | None) -> Matrix:
    from ..model.core import as_matrix

    if isinstance(value, (str, Mapping)):
        raise ModelError(source, fld, f"must be a matrix written inline (a list of rows), got "
                         f"{value!r:.60}", line=line)
    arr = as_matrix(value, source, fld, line=line)
    return tuple(tuple(float(x) for x in row) for row in arr)


def _radius(value, source, fld, line):
    if not isinstance(value, Mapping):
        return MinStabilityRadius(_number(value, source, fld, line, low=0.0, low_open=True,
                                          what="a positive number (the smallest distance to "
                                          "instability), or {min: R, structure: {B, C}, "
                                          "real: true}"))
    known = ("min", "structure", "real")
    for k in value:
        if k not in known:
            raise ModelError(source, f"{fld}.{k}", "is not a known field", line=line,
                             hint="known fields: " + ", ".join(known))
    if "min" not in value:
        raise ModelError(source, f"{fld}.min", "is missing: give the smallest radius allowed",
                         line=line)
    r = _number(value["min"], source, f"{fld}.min", line, low=0.0, low_open=True,
                what="a positive number")
    real = value.get("real", False)
    if not isinstance(real, bool):
        raise ModelError(source, f"{fld}.real", f"must be true or false, got {real!r}",
                         line=line)
    B = C = None
    if "structure" in value:
        s = value["structure"]
        if not isinstance(s, Mapping) or set(s) != {"B", "C"}:
            raise ModelError(source, f"{fld}.structure", "must be a mapping with exactly B and "
                             f"C (perturbations A + BΔC), got {s!r:.60}", line=line)
        B = _matrix(s["B"], source, f"{fld}.structure.B", line)
        C = _matrix(s["C"], source, f"{fld}.structure.C", line)
    return MinStabilityRadius(r, B, C, real)


def _growth(value, source, fld, line):
    return MaxTransientGrowth(_number(
        value, source, fld, line, low=1.0, low_open=False,
        what="a number ≥ 1 (the largest allowed max ‖e^{At}‖; it is 1 at t = 0 for every "
        "model)"))


def _abscissa(value, source, fld, line):
    if not isinstance(value, Mapping):
        raise ModelError(source, fld, f"must be a mapping {{epsilon: ε, max: a}}, got "
                         f"{value!r:.60}", line=line)
    for k in value:
        if k not in ("epsilon", "max"):
            raise ModelError(source, f"{fld}.{k}", "is not a known field", line=line,
                             hint="known fields: epsilon, max")
    for k in ("epsilon", "max"):
        if k not in value:
            raise ModelError(source, f"{fld}.{k}", "is missing", line=line,
                             hint="for example {epsilon: 0.01, max: -0.1}")
    eps = _number(value["epsilon"], source, f"{fld}.epsilon", line, low=0.0, low_open=True,
                  what="a positive number (the size of the perturbations)")
    a = value["max"]
    if isinstance(a, bool) or not isinstance(a, (int, float)) or not math.isfinite(a):
        raise ModelError(source, f"{fld}.max", f"must be a finite number (1/s; discrete: the "
                         f"largest radius), got {a!r}", line=line)
    return MaxPseudospectralAbscissa(eps, float(a))


#: Parsers of the requirement keys defined here, in the form ``parsing._PARSERS`` takes.
PARSERS: dict[str, Callable[..., Requirement | None]] = {
    "min_stability_radius": _radius,
    "max_transient_growth": _growth,
    "max_pseudospectral_abscissa": _abscissa,
}


def figures_of(verdicts: Sequence[Verdict]) -> dict[str, float]:
    """The baseline figures among ``verdicts``: ``{name: value}`` (pseudospectral abscissae
    keyed with their ε)."""
    out: dict[str, float] = {}
    for v in verdicts:
        f = v.figure
        if f is None or f.name not in FIGURE_NAMES or not math.isfinite(f.value):
            continue
        key = f.name
        if f.name == "pseudospectral_abscissa":
            key = f"{f.name}@{_eps_of(v.requirement)}"
        out[key] = f.value
    return out


def _eps_of(spec: str) -> str:
    head = spec.split("epsilon: ", 1)[-1]
    return head.split(",", 1)[0].strip()
