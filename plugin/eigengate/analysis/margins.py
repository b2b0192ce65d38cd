"""Loop margins from state space: gain, phase and delay margins, sensitivity peak, disk margins.

A closed loop formed by the loader keeps its plant and controller apart (:class:`LoopParts`),
so the loop can be broken at the plant input or output. The loop transfer ``L`` at the break
point is built *in state space* and evaluated on the imaginary axis (``s = jω``) or the unit
circle (``z = e^{jωT}``, up to the Nyquist frequency ``π/T``) through one Schur (or QZ)
reduction and triangular solves, a block of frequencies at once
(:mod:`eigengate.analysis.freqresp`): no polynomial transfer function is ever formed,
because the coefficients of a high-order or lightly damped loop do not determine its poles
(or its frequency response near them) to working accuracy.

Conventions: negative feedback, closed-loop poles are the zeros of ``det(I + L)``. Crossovers
are found by root finding (every bracket at once, to Brent's tolerances) between points of an
adaptively refined log grid that includes the open-loop pole frequencies; gain margins are the factors ``k`` at which the loop
``k·L`` gains a pole on the stability boundary, confirmed by the closed-loop eigenvalues on
either side. Disk margins follow Seiler, Packard & Gahinet, "An Introduction to Disk
Margins", IEEE Control Systems Magazine, 2020 (balanced disk, σ = 0): ``α = 2 / max_ω σ̄(S − T)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .freqresp import Resolvent, crossings, peaks

__all__ = ["BREAK_POINTS", "LoopParts", "LoopTransfer", "Resolvent", "ChannelMargins",
           "LoopMargins", "loop_transfer", "channel_loop", "unstable_poles", "siso_margins",
           "loop_margins", "disk_gain_range", "disk_phase"]

BREAK_POINTS = ("plant_input", "plant_output")
#: Largest number of frequency points after refinement; refinement splits an interval when
#: log|L| changes by more than STEP_LOG_GAIN, or the phase by more than STEP_PHASE (rad),
#: over it.
MAX_POINTS, STEP_LOG_GAIN, STEP_PHASE = 40000, 0.05, 0.1
#: An interval is split into ``ceil(max(Δlog|L|/STEP_LOG_GAIN, Δphase/STEP_PHASE))`` equal
#: parts (in log ω) per round, at most SPLIT_MAX.
SPLIT_MAX = 16
#: Intervals narrower than this (relative) are not split: next to a pole on the axis the
#: change never falls below the steps, and a point closer than this tells nothing new.
MIN_WIDTH = 1e-10


@dataclass(frozen=True, eq=False)
class LoopParts:
    """Plant and controller of a closed loop, kept apart so the loop can be broken.

    The plant is restricted to the driven inputs (``B``, ``D`` columns) and the measured
    signals (``C``, ``D`` rows; the states for state feedback). The controller reads the
    negated measurements and drives the plant inputs (``u = -K y``); a static gain has an
    empty ``Ac``. ``at``, ``channel`` and ``omega_range`` come from the ``loop:`` block.
    """

    kind: str
    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    D: np.ndarray
    E: np.ndarray | None
    Ac: np.ndarray
    Bc: np.ndarray
    Cc: np.ndarray
    Dc: np.ndarray
    inputs: tuple[str, ...]
    outputs: tuple[str, ...]
    sample_period: float | None = None
    at: str = "plant_input"
    channel: str | None = None
    omega_range: tuple[float, float] | None = None
    _memo: dict = field(default_factory=dict, repr=False, compare=False)

    def margins(self, stable: bool = False) -> "LoopMargins":
        """:func:`loop_margins` of this loop, computed once. ``stable=True`` says the caller
        has found every closed-loop pole strictly inside the stability region (a margin
        requirement checks the model's own spectrum, which is this closed loop, with its
        error bounds), so the closed loop is not decomposed a second time."""
        if "margins" not in self._memo:
            self._memo["margins"] = loop_margins(self, stable)
        return self._memo["margins"]


@dataclass(frozen=True, eq=False)
class LoopTransfer:
    """``L`` at a break point in state space (square: one row and column per channel)."""

    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    D: np.ndarray
    E: np.ndarray | None
    sample_period: float | None
    channels: tuple[str, ...]
    at: str = "plant_input"


def loop_transfer(parts: LoopParts, at: str | None = None) -> LoopTransfer:
    """The loop transfer at ``at`` (default ``parts.at``): ``K P`` at the plant input,
    ``P K`` at the plant output, plant states first."""
    at, a, b, c, d, e = at or parts.at, parts.A, parts.B, parts.C, parts.D, parts.E
    ac, bc, cc, dc = parts.Ac, parts.Bc, parts.Cc, parts.Dc
    n, nc = a.shape[0], ac.shape[0]
    if at == "plant_input":  # u → plant → y → controller → (the signal fed back as -u)
        A = np.block([[a, np.zeros((n, nc))], [bc @ c, ac]])
        B = np.vstack([b, bc @ d])
        C = np.hstack([dc @ c, cc])
        D = dc @ d
        names = parts.inputs
    elif at == "plant_output":  # e → controller → plant → y
        A = np.block([[a, b @ cc], [np.zeros((nc, n)), ac]])
        B = np.vstack([b @ dc, bc])
        C = np.hstack([c, d @ cc])
        D = d @ dc
        names = parts.outputs
    else:
        raise ValueError(f"break point must be one of {', '.join(BREAK_POINTS)}, got {at!r}")
    E = None if e is None else np.block([[e, np.zeros((n, nc))], [np.zeros((nc, n)), np.eye(nc)]])
    return LoopTransfer(A, B, C, D, E, parts.sample_period, tuple(names), at)


def channel_loop(lt: LoopTransfer, i: int) -> LoopTransfer:
    """SISO loop of channel ``i`` with every other channel closed (loop-at-a-time)."""
    o = [j for j in range(lt.D.shape[0]) if j != i]
    if not o:
        return lt
    m = np.linalg.inv(np.eye(len(o)) + lt.D[np.ix_(o, o)])
    bo, co = lt.B[:, o], lt.C[o, :]
    A = lt.A - bo @ m @ co
    B = lt.B[:, [i]] - bo @ m @ lt.D[np.ix_(o, [i])]
    C = lt.C[[i], :] - lt.D[np.ix_([i], o)] @ m @ co
    D = lt.D[np.ix_([i], [i])] - lt.D[np.ix_([i], o)] @ m @ lt.D[np.ix_(o, [i])]
    return LoopTransfer(A, B, C, D, lt.E, lt.sample_period, (lt.channels[i],), lt.at)


def unstable_poles(lt: LoopTransfer, k: float = 1.0) -> int:
    """Closed-loop poles of ``k·L`` in negative feedback outside the stability region
    (with multiplicity; via :func:`eigengate.analysis.modes.analyse`); -1 when ``I + kD`` is singular."""
    from .equilibrium import side
    from ..model.core import from_arrays
    from .modes import analyse

    f = np.eye(lt.D.shape[0]) + k * lt.D
    if np.linalg.cond(f) > 1e12:
        return -1
    a_cl = lt.A - k * lt.B @ np.linalg.solve(f, lt.C)
    spectrum = analyse(from_arrays(a_cl, E=lt.E, sample_period=lt.sample_period))
    return sum(m.count for m in spectrum.modes if side(m) > 0)


@dataclass(frozen=True)
class ChannelMargins:
    """Classical and disk margins of one SISO loop (one channel, the others closed).

    Gain margins are factors: the loop tolerates gains in ``(lower_gain_margin,
    gain_margin)``; ``lower_gain_margin`` is None when there is no lower limit and
    ``gain_margin`` is ``inf`` when there is no upper one. Phase margin in degrees (``inf``
    without gain crossover), delay margin in seconds, frequencies in rad/s.
    """

    channel: str
    gain_margin: float
    gain_margin_frequency: float | None
    lower_gain_margin: float | None
    lower_gain_margin_frequency: float | None
    phase_margin: float
    phase_margin_frequency: float | None
    delay_margin: float
    delay_margin_frequency: float | None
    sensitivity_peak: float
    sensitivity_peak_frequency: float
    disk_margin: float
    disk_margin_frequency: float
    phase_crossovers: tuple[float, ...] = ()
    gain_crossovers: tuple[float, ...] = ()
    phase_margins: tuple[float, ...] = ()

    @property
    def gain_margin_db(self) -> float:
        return 20.0 * math.log10(self.gain_margin)  # inf stays inf

    @property
    def lower_gain_margin_db(self) -> float | None:
        """``20·log10(lower factor)``: negative, the gain reduction tolerated."""
        return None if self.lower_gain_margin is None else 20.0 * math.log10(self.lower_gain_margin)


@dataclass(frozen=True, eq=False)
class LoopMargins:
    """Margins of a loop broken at ``at``: per channel, and all channels at once.

    ``unstable`` counts the closed-loop poles outside the stability region; margins are only
    computed (``channels`` not empty) when it is 0. The multi-loop disk margin
    ``2 / max σ̄(S − T)`` covers simultaneous, possibly coupled, variations in every channel
    (for independent variations it is a conservative bound).
    """

    at: str
    unstable: int
    channels: tuple[ChannelMargins, ...] = ()
    sensitivity_peak: float = math.nan
    sensitivity_peak_frequency: float = math.nan
    disk_margin: float = math.nan
    disk_margin_frequency: float = math.nan

    def channel(self, name: str) -> ChannelMargins:
        return next(c for c in self.channels if c.channel == name)


def disk_gain_range(alpha: float) -> tuple[float, float]:
    """Gains guaranteed by a balanced disk margin α: ``(1−α/2)/(1+α/2)`` to ``(1+α/2)/(1−α/2)``."""
    a = alpha / 2
    return (0.0, math.inf) if alpha >= 2.0 else ((1 - a) / (1 + a), (1 + a) / (1 - a))


def disk_phase(alpha: float) -> float:
    """Phase variation (degrees, ±) guaranteed by a balanced disk margin α: ``2·atan(α/2)``."""
    return math.degrees(2.0 * math.atan(alpha / 2.0))


# ------------------------------------------------------------------ frequency grid

def _poles_s(lt: LoopTransfer, res: Resolvent) -> list[complex]:
    """Open-loop poles as s-plane values (``ln(z)/T`` for discrete loops), to place the grid.

    A standard loop's are the diagonal of the Resolvent's own Schur form (no second
    decomposition); a descriptor loop's come from the modal analysis, which tells infinite
    eigenvalues apart. Deadbeat poles (z = 0) have no frequency and are left out."""
    if lt.E is not None:
        from ..model.core import from_arrays
        from .modes import analyse

        spectrum = analyse(from_arrays(lt.A, E=lt.E, sample_period=lt.sample_period))
        return [m.s for m in spectrum.modes]
    lam = res.eigenvalues()
    if lt.sample_period is None:
        return [complex(x) for x in lam]
    keep = np.abs(lam) > 1e-14 * res.scale
    with np.errstate(divide="ignore"):
        s = np.log(lam[keep].astype(complex)) / lt.sample_period
    return [complex(x) for x in s]


def _widen(res: Resolvent, lo: float, hi: float, nyq: float) -> tuple[float, float]:
    """The grid's ends moved out by decades while a crossover may lie beyond them (the
    candidate ends of all twelve steps evaluated in one batch)."""
    los = [lo]
    for _ in range(12):
        los.append(los[-1] / 10.0)
    his = [hi]
    for _ in range(12):
        his.append(min(his[-1] * 10.0, nyq))
    mags = np.abs(res.siso(np.array(los + [x * 10 for x in los] + his)))
    low, up, top = mags[:13], mags[13:26], mags[26:]
    for k in range(12):  # a crossover may lie below lo when |L| rises with ω
        # (above 1, it falls towards 1 below; below 1, a peak may lie there), or falling
        # while below 1, steeply enough to reach 1 within the widening (low·(low/up)^12
        # ≥ 1; below every mode |L| ~ c·ω^k, and an integrator's rises through 1 there)
        if not (low[k] < up[k] or up[k] < low[k] < 1.0 and low[k] ** 13 >= up[k] ** 12):
            break
        lo = los[k + 1]
    for k in range(12):
        if hi >= nyq or not top[k] > 1.0:
            break
        hi = his[k + 1]
    return lo, hi


def _grid(lt: LoopTransfer, res: Resolvent, omega_range: tuple[float, float] | None
          ) -> tuple[np.ndarray, np.ndarray]:
    """Adaptively refined grid and the response on it (finite points only)."""
    poles = _poles_s(lt, res)
    nyq = math.pi / lt.sample_period if lt.sample_period else math.inf
    wn = [abs(s) for s in poles if 0 < abs(s) < math.inf]
    lo = min(wn, default=1.0) / 1e3
    hi = min(max(wn, default=1.0) * 1e3, nyq)
    if omega_range is not None:
        lo, hi = omega_range[0], min(omega_range[1], nyq)
    else:  # widen while a crossover may lie beyond an end
        lo, hi = _widen(res, lo, hi, nyq)
    pts = [np.geomspace(lo, hi, max(50, int(40 * math.log10(hi / lo)) + 1))]
    offsets = np.array([-8, -4, -2, -1, -0.5, -0.25, 0, 0.25, 0.5, 1, 2, 4, 8])
    for p in poles:  # lightly damped resonances: points across the half-power band
        wd = abs(p.imag)
        if wd > 0 and math.isfinite(wd) and math.isfinite(p.real):
            zeta = max(abs(p.real) / max(abs(p), 1e-300), 1e-6)
            pts.append(wd * (1.0 + zeta * offsets))
    w = np.unique(np.concatenate(pts))
    w = w[(w >= lo) & (w <= hi) & (w > 0)]
    if math.isfinite(nyq) and (omega_range is None or omega_range[1] >= nyq):
        w = np.unique(np.append(w, nyq))
    h = res(w)
    for _ in range(12):
        ok = np.all(np.isfinite(h), axis=(1, 2))
        w, h = w[ok], h[ok]
        if w.size >= MAX_POINTS:
            break
        with np.errstate(divide="ignore"):
            lg = np.log(np.maximum(np.abs(h), 1e-300))
        dl = np.max(np.abs(np.diff(lg, axis=0)), axis=(1, 2))
        dp = np.max(np.abs(np.angle(h[1:] / np.where(h[:-1] == 0, 1, h[:-1]))), axis=(1, 2))
        # split each coarse interval into as many log-equal parts as its change asks for
        need = np.ceil(np.maximum(dl / STEP_LOG_GAIN, dp / STEP_PHASE))
        split = np.flatnonzero((need > 1) & (w[1:] > w[:-1] * (1.0 + MIN_WIDTH)))
        if not split.size:
            break
        parts = np.minimum(need[split], SPLIT_MAX).astype(int)
        keep = np.cumsum(parts - 1) <= MAX_POINTS - w.size  # the first ones, within the cap
        split, parts = split[keep], parts[keep]
        if not split.size:
            break
        new = parts - 1
        at, q = np.repeat(split, new), np.repeat(parts, new)
        t = np.arange(at.size) - np.repeat(np.cumsum(new) - new, new) + 1  # 1..q−1 per group
        mid = w[at] * (w[at + 1] / w[at]) ** (t / q)
        w2 = np.concatenate([w, mid])
        order = np.argsort(w2, kind="stable")
        w, h = w2[order], np.concatenate([h, res(mid)])[order]
    return w, h


# ------------------------------------------------------------------ margins

def siso_margins(lt: LoopTransfer, omega_range: tuple[float, float] | None = None
                 ) -> ChannelMargins:
    """Classical and disk margins of a SISO loop whose closed loop is stable."""
    if lt.D.shape != (1, 1):
        raise ValueError(f"siso_margins needs a 1×1 loop, got {lt.D.shape[0]}×{lt.D.shape[1]}")
    res = Resolvent(lt)
    w, h3 = _grid(lt, res, omega_range)
    h = h3[:, 0, 0]
    mag, ph = np.abs(h), np.angle(-h)  # ph = phase + 180°, wrapped to (-180°, 180°]
    ell = res.siso
    gains, phases = crossings(ell, w, [
        (lambda val: _log_gain(np.abs(val)), _log_gain(mag), lambda i: True),
        (lambda val: np.angle(-val), ph, lambda i: abs(ph[i]) < 2 and abs(ph[i + 1]) < 2)])
    # Ends of the axis: L(0) (and L at Nyquist, discrete) is real; negative means a crossing.
    ends = [0.0] + ([math.pi / lt.sample_period] if lt.sample_period else [])
    at = ell(np.array(gains + phases + ends))
    at_gains, at_ends = at[:len(gains)], at[len(gains) + len(phases):]
    keep = [i for i, val in enumerate(at_gains) if abs(abs(val) - 1) < 1e-6]
    gains = [gains[i] for i in keep]  # a root at a pole on the axis is no crossover
    pms = [math.degrees(np.angle(-at_gains[i])) for i in keep]
    keep = [i for i, val in enumerate(at[len(gains):len(gains) + len(phases)])
            if np.isfinite(val) and abs(np.angle(-val)) < 1e-6]
    at_phases = [at[len(gains) + i] for i in keep]
    phases = [phases[i] for i in keep]
    for x, val in zip(ends, at_ends):
        if np.isfinite(val) and val.real < 0 and x not in phases:
            phases.append(x)
            at_phases.append(val)
    # (gain factor that puts a closed-loop pole on the boundary, frequency)
    gain_cands = [(1.0 / abs(val), x) for x, val in zip(phases, at_phases) if abs(val) > 0]
    if lt.sample_period is None and lt.D[0, 0] < 0:
        gain_cands.append((-1.0 / lt.D[0, 0], math.inf))
    upper, lower = _gain_limits(lt, gain_cands)
    pm, pm_w, dm, dm_w = math.inf, None, math.inf, None
    if pms:
        i = int(np.argmin(np.abs(pms)))
        pm, pm_w = pms[i], gains[i]
        dm, dm_w = min((math.radians(p % 360.0) / x if x > 0 else math.inf, x)
                       for p, x in zip(pms, gains))
    d = complex(lt.D[0, 0])  # L(j∞) of a continuous loop: the suprema may lie there
    cont = lt.sample_period is None
    (ms, ms_w), (peak, dk_w) = peaks(ell, w, [
        (lambda val: 1.0 / np.abs(1.0 + val), 1.0 / np.abs(1.0 + h),
         1.0 / abs(1.0 + d) if cont else 0.0),
        (lambda val: np.abs((1 - val) / (1 + val)), np.abs((1.0 - h) / (1.0 + h)),  # |S − T|
         abs((1 - d) / (1 + d)) if cont else 0.0)])
    return ChannelMargins(
        lt.channels[0] if lt.channels else "u1", upper[0], upper[1], lower[0], lower[1],
        pm, pm_w, dm, dm_w, ms, ms_w, 2.0 / peak if peak > 0 else math.inf, dk_w,
        tuple(sorted(phases)), tuple(gains), tuple(pms))


def _log_gain(mag: np.ndarray) -> np.ndarray:
    """``ln |L|`` with zeros held at ln 1e-300 (so a gain root never lands on ``-inf``)."""
    with np.errstate(divide="ignore"):
        return np.log(np.maximum(mag, 1e-300))


def _gain_limits(lt: LoopTransfer, crossings: list[tuple[float, float]]):
    """Nearest crossing gains above and below 1 across which stability is actually lost.

    Stability of ``k·L`` can only change where ``-1/k`` lies on the Nyquist curve, i.e. at the
    crossing gains; each candidate is confirmed by the closed-loop eigenvalues just beyond it
    (a tangent crossing loses nothing)."""
    ks = sorted({k for k, _ in crossings if math.isfinite(k) and k > 0})
    freq = {k: x for k, x in crossings}

    def first_lost(cands: list[float], step: float):
        for i, k in enumerate(cands):  # probe halfway (in log) to the next candidate
            probe = math.sqrt(k * cands[i + 1]) if i + 1 < len(cands) else step * k
            if unstable_poles(lt, probe) != 0:
                return k, freq[k]
        return None

    upper = first_lost([k for k in ks if k > 1.0], 2.0) or (math.inf, None)
    lower = first_lost([k for k in reversed(ks) if k < 1.0], 0.5) or (None, None)
    return upper, lower


def loop_margins(parts: LoopParts, stable: bool = False) -> LoopMargins:
    """Margins of the loop in ``parts`` broken at ``parts.at``; ``stable=True`` skips the
    count of closed-loop poles outside the stability region (the caller has made it).

    Returns
    -------
    LoopMargins
        With ``unstable > 0`` and no channels when the closed loop is unstable; otherwise
        loop-at-a-time margins of every channel (or of ``parts.channel``), the sensitivity
        peak ``max σ̄((I + L)⁻¹)`` and the multi-loop disk margin.
    """
    lt = loop_transfer(parts)
    unstable = 0 if stable else unstable_poles(lt)
    if unstable != 0:
        return LoopMargins(at=lt.at, unstable=unstable if unstable > 0 else 1)
    p = lt.D.shape[0]
    picked = range(p) if parts.channel is None else [lt.channels.index(parts.channel)]
    channels = tuple(siso_margins(channel_loop(lt, i), parts.omega_range) for i in picked)
    if p == 1:
        c = channels[0]
        return LoopMargins(lt.at, 0, channels, c.sensitivity_peak, c.sensitivity_peak_frequency,
                           c.disk_margin, c.disk_margin_frequency)
    res = Resolvent(lt)
    w, h = _grid(lt, res, parts.omega_range)

    def sv(ell: np.ndarray, which: str) -> np.ndarray:  # σ̄ of S or S − T = S − L S
        s = np.linalg.inv(np.eye(p) + ell)
        return np.linalg.svd(s if which == "S" else s - ell @ s, compute_uv=False)[..., 0]

    def of(which: str):  # σ̄ at the points; NaN where L is not finite (a pole)
        def q(ell: np.ndarray) -> np.ndarray:
            ok = np.all(np.isfinite(ell), axis=(1, 2))
            out = np.full(ok.size, math.nan)
            if np.any(ok):
                out[ok] = sv(ell[ok], which)
            return out
        return q

    end = lt.D if lt.sample_period is None else None  # L(j∞) = D for continuous loops
    (ms, ms_w), (st, st_w) = peaks(res, w, [
        (of(which), sv(h, which), 0.0 if end is None else float(sv(end, which)))
        for which in ("S", "S-T")])
    return LoopMargins(lt.at, 0, channels, ms, ms_w, 2.0 / st if st > 0 else math.inf, st_w)
