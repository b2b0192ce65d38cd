"""Plot data of a loop's frequency response: the Bode and Nyquist curves of each channel with
the crossovers, the margins and the disk a balanced disk margin keeps the curve out of.

Everything here is computed from the public functions of :mod:`eigengate.analysis.margins`
(the loop transfer, the loop-at-a-time channel loops, their state-space frequency response and
the margins already found for the verdicts), so a picture marks exactly the margins the rules
judged. The reports only draw these records.

The disk (Blight, Dailey & Gangsaas 1994; Seiler, Packard & Gahinet, "An Introduction to Disk
Margins", IEEE Control Systems Magazine 2020, balanced case σ = 0): a loop with disk margin α
stays stable for every multiplicative factor ``f = (1 + δα/2)/(1 − δα/2)``, ``|δ| ≤ 1``.
Stability is lost where ``f·L(jω) = −1``, so the Nyquist curve of L keeps out of the set
``{−1/f}``; for σ = 0 that set is ``−D(α)``, the disk through ``−(1−a)/(1+a)`` and
``−(1+a)/(1−a)`` on the real axis (``a = α/2``): centre ``−(1+a²)/(1−a²)``, radius
``2a/(1−a²)``. Its boundary is the Apollonius circle ``|1 − L| / |1 + L| = 1/a``, i.e.
``|S − T| = 2/α``, which the curve touches at the disk-margin frequency. For α = 2 the set
is the half-plane ``Re L ≤ 0``; for α > 2 it is the outside of the disk with centre
``(1+a²)/(a²−1)`` and radius ``2a/(a²−1)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

__all__ = ["LoopCurve", "loop_curves", "exclusion_disk", "CURVE_POINTS", "BATCH_ORDER"]

#: Log-spaced frequencies of a curve, before the points added at resonances and crossovers.
CURVE_POINTS = 200
#: How far (a factor) the curve extends beyond the outermost crossover or pole frequency.
SPAN = 30.0


@dataclass(frozen=True)
class LoopCurve:
    """The frequency response of one channel's loop (the other channels closed) and its marks.

    ``omega`` in rad/s (increasing); ``magnitude_db`` = 20·log10|L|; ``phase_deg`` the
    unwrapped phase; ``real``/``imag`` the Nyquist curve for ω ≥ 0 (its mirror image is the
    curve for ω < 0). ``gain_crossovers``/``phase_crossovers`` are the margins' frequencies,
    with the phase (unwrapped branch) and the magnitude there. A margin is NaN (and its
    frequency NaN) when it does not exist; ``gain_margin_db`` is inf without phase crossover.
    ``pm_reference_deg`` is the −180° line (of the phase's branch) the phase margin is
    measured from. ``disk_kind`` is ``disk``, ``half-plane`` or ``outside``
    (:func:`exclusion_disk`); ``disk_touch`` is L at the disk-margin frequency.
    """

    channel: str
    at: str
    sample_period: float | None
    omega: tuple[float, ...]
    magnitude_db: tuple[float, ...]
    phase_deg: tuple[float, ...]
    real: tuple[float, ...]
    imag: tuple[float, ...]
    gain_crossovers: tuple[float, ...]
    gain_crossover_phase_deg: tuple[float, ...]
    phase_crossovers: tuple[float, ...]
    phase_crossover_magnitude_db: tuple[float, ...]
    gain_margin_db: float
    gain_margin_frequency: float
    lower_gain_margin_db: float
    lower_gain_margin_frequency: float
    phase_margin_deg: float
    phase_margin_frequency: float
    pm_reference_deg: float
    delay_margin: float
    disk_margin: float
    disk_margin_frequency: float
    disk_kind: str
    disk_center: float
    disk_radius: float
    disk_touch: tuple[float, ...]


def exclusion_disk(alpha: float) -> tuple[str, float, float]:
    """``(kind, centre, radius)`` of the set of the Nyquist plane a balanced disk margin α
    keeps ``L`` out of: ``disk`` (α < 2), ``half-plane`` (α = 2: ``Re L ≤ 0``; centre and
    radius NaN) or ``outside`` (α > 2: everything outside the given disk)."""
    a = alpha / 2.0
    if not math.isfinite(alpha) or alpha < 0:
        return "none", math.nan, math.nan
    if abs(1.0 - a * a) <= 1e-12:
        return "half-plane", math.nan, math.nan
    c, r = -(1 + a * a) / (1 - a * a), 2 * a / abs(1 - a * a)
    return ("disk", c, r) if a < 1 else ("outside", c, r)


def _nan(x: float | None) -> float:
    return math.nan if x is None else float(x)


def _grid(lt: Any, marks: list[float], omega_range: tuple[float, float] | None):
    """Log grid over the crossovers and the loop's pole frequencies, points across each
    lightly damped resonance, and the marks themselves."""
    import numpy as np

    from ..model.core import from_arrays
    from .modes import analyse

    spectrum = analyse(from_arrays(lt.A, E=lt.E, sample_period=lt.sample_period))
    nyq = math.pi / lt.sample_period if lt.sample_period else math.inf
    wn = [m.natural_frequency for m in spectrum.modes if 0 < m.natural_frequency < math.inf]
    known = [w for w in marks + wn if 0 < w < math.inf]
    if omega_range is not None:
        lo, hi = omega_range[0], min(omega_range[1], nyq)
    else:
        lo = min(known, default=1.0) / SPAN
        hi = min(max(known, default=1.0) * SPAN, nyq)
    pts = [np.geomspace(lo, hi, CURVE_POINTS)]
    offsets = np.array([-4, -2, -1, -0.5, -0.25, 0, 0.25, 0.5, 1, 2, 4])
    for m in spectrum.modes:
        wd = abs(m.s.imag)
        if wd > 0 and math.isfinite(wd):
            zeta = max(abs(m.s.real) / max(abs(m.s), 1e-300), 1e-6)
            if zeta < 0.3:
                pts.append(wd * (1.0 + zeta * offsets))
    pts.append(np.array([w for w in marks if 0 < w < math.inf]))
    w = np.unique(np.concatenate(pts))
    return w[(w >= lo) & (w <= hi)]


def _branch(value_deg: float, near_deg: float) -> float:
    """``value_deg`` shifted by a multiple of 360° to lie nearest ``near_deg``."""
    return value_deg + 360.0 * round((near_deg - value_deg) / 360.0)


#: Loops up to this order are evaluated at every frequency in one batched dense solve
#: (a few hundred small solves at once); larger ones through the margins' Schur resolvent.
BATCH_ORDER = 64


def _response(lt: Any, omegas: Any) -> Any:
    """``L`` of a SISO loop at ``omegas`` (rad/s): NaN at a pole on the axis."""
    import numpy as np

    from .margins import Resolvent

    w = np.atleast_1d(np.asarray(omegas, dtype=float))
    n = lt.A.shape[0]
    if n == 0:
        return np.full(w.shape, complex(lt.D[0, 0]))
    if n <= BATCH_ORDER:
        lam = 1j * w if lt.sample_period is None else np.exp(1j * w * lt.sample_period)
        e = np.eye(n) if lt.E is None else lt.E
        m = lam[:, None, None] * e[None] - lt.A[None]
        try:
            x = np.linalg.solve(m, np.broadcast_to(lt.B.astype(complex), (w.size,) + lt.B.shape))
        except np.linalg.LinAlgError:  # exactly singular somewhere: a pole on the axis
            pass
        else:
            return (lt.C @ x)[:, 0, 0] + lt.D[0, 0]
    return Resolvent(lt)(w)[:, 0, 0]


def _channel_curve(lt: Any, cm: Any, at: str, omega_range) -> LoopCurve:
    import numpy as np

    def finite(xs):
        return [float(x) for x in xs if x is not None and 0 < x < math.inf]

    marks = finite(cm.gain_crossovers) + finite(cm.phase_crossovers) + finite(
        [cm.disk_margin_frequency, cm.sensitivity_peak_frequency])
    w = _grid(lt, marks, omega_range)
    h = _response(lt, w)
    ok = np.isfinite(h) & (np.abs(h) > 0)
    w, h = w[ok], h[ok]
    mag = 20.0 * np.log10(np.abs(h))
    phase = np.degrees(np.unwrap(np.angle(h)))
    if phase.size and phase[0] > 0.0:  # the first point's branch: (-360°, 0°]
        phase = phase - 360.0 * math.ceil(phase[0] / 360.0)

    def value(x: float) -> complex:
        return complex(_response(lt, [x])[0])

    def phase_at(x: float) -> float:
        raw = math.degrees(np.angle(value(x)))
        return _branch(raw, float(np.interp(x, w, phase)) if w.size else raw)

    gx = finite(cm.gain_crossovers)
    px = finite(cm.phase_crossovers)
    pm_w = _nan(cm.phase_margin_frequency)
    pm_ref = math.nan  # the -180° line of the branch: the phase there minus the margin
    if math.isfinite(pm_w) and pm_w > 0 and math.isfinite(cm.phase_margin):
        pm_ref = phase_at(pm_w) - cm.phase_margin
    kind, centre, radius = exclusion_disk(cm.disk_margin)
    dw = cm.disk_margin_frequency
    touch: tuple[float, ...] = ()
    if dw is not None and math.isfinite(dw):
        z = value(float(dw))
        if np.isfinite(z):
            touch = (float(z.real), float(z.imag))
    return LoopCurve(
        channel=cm.channel, at=at, sample_period=lt.sample_period,
        omega=tuple(float(x) for x in w), magnitude_db=tuple(float(x) for x in mag),
        phase_deg=tuple(float(x) for x in phase), real=tuple(float(x) for x in h.real),
        imag=tuple(float(x) for x in h.imag),
        gain_crossovers=tuple(gx), gain_crossover_phase_deg=tuple(phase_at(x) for x in gx),
        phase_crossovers=tuple(px),
        phase_crossover_magnitude_db=tuple(20 * math.log10(abs(value(x))) for x in px),
        gain_margin_db=cm.gain_margin_db, gain_margin_frequency=_nan(cm.gain_margin_frequency),
        lower_gain_margin_db=_nan(cm.lower_gain_margin_db),
        lower_gain_margin_frequency=_nan(cm.lower_gain_margin_frequency),
        phase_margin_deg=float(cm.phase_margin), phase_margin_frequency=pm_w,
        pm_reference_deg=pm_ref, delay_margin=float(cm.delay_margin),
        disk_margin=float(cm.disk_margin), disk_margin_frequency=_nan(dw),
        disk_kind=kind, disk_center=centre, disk_radius=radius, disk_touch=touch)


def loop_curves(parts: Any) -> tuple[LoopCurve, ...]:
    """One :class:`LoopCurve` per channel the margins were computed for (none when the
    closed loop is unstable: margins, and so their marks, are not defined)."""
    from .margins import channel_loop, loop_transfer

    lm = parts.margins()
    if lm.unstable != 0 or not lm.channels:
        return ()
    lt = loop_transfer(parts)
    out = []
    for cm in lm.channels:
        i = lt.channels.index(cm.channel) if cm.channel in lt.channels else 0
        out.append(_channel_curve(channel_loop(lt, i), cm, lt.at, parts.omega_range))
    return tuple(out)
