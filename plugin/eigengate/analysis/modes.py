"""Modal analysis: eigenvalues, clusters, damping, frequency, participation and uncertainty.

This is the only module that decomposes a matrix. Every requirement reads the :class:`Mode`
objects built here, so every verdict sees the same cleaned spectrum:

* the matrix is diagonally balanced when that lowers its norm (eigenvalues unchanged,
  accuracy better);
* each eigenvalue gets an a posteriori error bound from its residual and left vector, and,
  for standard models up to :data:`~eigengate.analysis.bounds.ENCLOSE_LIMIT` states, a certified
  enclosure (see :mod:`eigengate.analysis.bounds`);
* eigenvalues closer than their bounds are one *cluster*: a double or defective eigenvalue that
  LAPACK splits by about √eps (or into a spurious complex pair) is reported once, with its
  multiplicity, at the cluster mean, and a cluster whose imaginary part is within its bound is
  real. The mean of a cluster is far better conditioned than its members;
* discrete models keep their z-plane eigenvalue and get the s-plane equivalent ``s = log(z)/T``
  (a negative real z has ``log z = ln|z| + iπ``: an oscillation at the Nyquist frequency);
* descriptor models use the generalized problem; infinite eigenvalues are counted apart.

Modes are sorted least-stable first on rounded keys, so the order does not depend on the order
LAPACK returned, nor on the sign of the imaginary parts.
"""

from __future__ import annotations

import cmath
import collections
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, cast

from ..errors import ModelError
from ..model.core import Model
from . import small_modes
from .bounds import (ENCLOSE_LIMIT, FIGURE_FLOOR, MAX_BLOCK, TOUCH, cap_defective, cluster_radius,
                     components, enclose, estimate, hoelder, map_to_s, sweep_order, touching,
                     touching_small)
from .mode_order import _round_sig, mode_order, sort_key  # noqa: F401 (re-exported)
from .multiplicity import SVD_RANK_LIMIT, geometric_multiplicity, vector_rank  # noqa: F401
from .small_lapack import SMALL_ORDER, small_eig, small_lapack  # noqa: F401 (SMALL_ORDER: public)

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["Mode", "ModeFigures", "Spectrum", "analyse", "vector_rank", "sort_key"]

#: Safety factor on the backward-error scale n·eps·‖A‖ of the Hölder-type bounds of defective
#: eigenvalues (the first-order bounds come from residuals: :mod:`eigengate.analysis.bounds`).
BOUND_FACTOR = 4.0
#: Eigenvalues within this many times the sum of their error bounds are one cluster.
CLUSTER_FACTOR = 4.0


class ModeFigures:
    """Figures derived from ``s``, ``multiplicity`` and ``pair``, shared by every record of a
    mode (the analysed :class:`Mode`, a baseline's stored mode)."""

    s: complex
    multiplicity: int
    pair: bool

    @property
    def decay_rate(self) -> float:
        """``-Re(s)`` in 1/s: positive for a decaying mode."""
        return -self.s.real

    @property
    def oscillatory(self) -> bool:
        return self.s.imag != 0.0

    @property
    def count(self) -> int:
        """Number of eigenvalues this mode stands for (a pair counts twice)."""
        return self.multiplicity * (2 if self.pair else 1)


@dataclass(frozen=True, eq=False)
class Mode(ModeFigures):
    """One mode: a real eigenvalue or a complex-conjugate pair, with its multiplicity.

    ``eigenvalue`` is in the model's own plane (s for continuous, z for discrete models;
    the member with non-negative imaginary part for a pair); ``s`` is its continuous-time
    equivalent. ``time_constant`` is ``-1/Re(s)``: negative for a growing mode (its
    e-folding growth time), infinite on the boundary. ``damping_ratio`` is ``-Re(s)/|s|``
    (1 for a stable real mode, -1 for an unstable one, 0 for ``s = 0``).
    ``uncertainty`` bounds the error of ``s`` (rad/s): the smaller of the first-order
    estimate and the certified ``enclosure`` (the radius of an s-plane disc about ``s`` that
    holds exactly this mode's eigenvalues; inf where none was computed or it could not
    separate them).
    """

    index: int
    eigenvalue: complex
    s: complex
    multiplicity: int
    geometric_multiplicity: int
    pair: bool
    natural_frequency: float
    damping_ratio: float
    time_constant: float
    uncertainty: float
    condition: float
    participation: "np.ndarray"
    states: tuple[str, ...]
    enclosure: float = math.inf

    @property
    def defective(self) -> bool:
        return self.geometric_multiplicity < self.multiplicity

    @property
    def damped_frequency(self) -> float:
        return abs(self.s.imag)

    def top_states(self, k: int = 3, min_factor: float = 0.05) -> list[tuple[str, float]]:
        """The ``k`` states with the largest participation factors (at least ``min_factor``)."""
        import numpy as np

        order = np.argsort(-self.participation, kind="stable")[:k]
        picked = [(self.states[i], float(self.participation[i])) for i in order
                  if self.participation[i] >= min_factor]
        return picked or [(self.states[order[0]], float(self.participation[order[0]]))]

    def describe(self) -> str:
        """``-0.5±2j (ζ=0.243, ωn=2.06 rad/s, τ=2 s)`` style one-liner."""
        ev = _fmt_complex(self.eigenvalue, self.pair)
        tau = "∞" if math.isinf(self.time_constant) else f"{self.time_constant:.4g} s"
        text = (f"{ev} (ζ={self.damping_ratio:.3g}, ωn={self.natural_frequency:.4g} rad/s, "
                f"τ={tau})")
        if self.multiplicity > 1:
            kind = "defective" if self.defective else "semisimple"
            text += f" ×{self.multiplicity} {kind}"
        return text


@dataclass(frozen=True, eq=False)
class Spectrum:
    """All modes of one model (and operating point), least stable first."""

    model: Model
    modes: tuple[Mode, ...]
    infinite: int
    norm: float
    balanced: bool
    #: None for a complete spectrum; for the modes an iterative search found, what it
    #: covered (:class:`eigengate.analysis.sparse_modes.Search`): the spectrum is partial.
    search: Any = None

    @property
    def partial(self) -> bool:
        """Whether only the modes an iterative search found are here."""
        return self.search is not None

    @property
    def spectral_abscissa(self) -> float:
        """Largest real part of the s-plane eigenvalues (continuous-time equivalent)."""
        return max((m.s.real for m in self.modes), default=-math.inf)

    @property
    def spectral_radius(self) -> float:
        """Largest ``|z|`` (discrete models) or ``|s|`` (continuous models)."""
        return max((abs(m.eigenvalue) for m in self.modes), default=0.0)

    @property
    def n_eigenvalues(self) -> int:
        """Number of finite eigenvalues, with multiplicity and conjugates."""
        return sum(m.count for m in self.modes)

    @property
    def min_damping(self) -> float:
        """Smallest damping ratio among oscillatory modes (1.0 when there is none)."""
        return min((m.damping_ratio for m in self.modes if m.oscillatory), default=1.0)

    def eigenvalues(self) -> list[complex]:
        """Every finite eigenvalue with multiplicity, conjugates included, in mode order."""
        out: list[complex] = []
        for m in self.modes:
            for _ in range(m.multiplicity):
                out.append(m.eigenvalue)
                if m.pair:
                    out.append(m.eigenvalue.conjugate())
        return out


def _fmt_complex(z: complex, pair: bool) -> str:
    if z.imag == 0.0:
        return f"{z.real:.6g}"
    sign = "±" if pair else ("+" if z.imag >= 0 else "-")
    return f"{z.real:.6g}{sign}{abs(z.imag):.6g}j"


def _decompose(model: Model):
    """Return eigenvalues, right vectors, left vectors (as columns), E-weighted left vectors,
    the norm the bounds scale with, the number of infinite eigenvalues, whether the matrix
    was balanced, and the matrix (or finite pencil part) the eigenpairs belong to."""
    import numpy as np

    A, E = model.A, model.E
    n = A.shape[0]
    if E is None:
        norm_a = float(np.linalg.norm(A, 1))
        balanced = False
        work = A
        small = small_lapack(A)
        if n > 1 and norm_a > 0:
            if small is not None:  # matrix_balance's own LAPACK call, without its wrapper
                bal = small[0](A, scale=1, permute=0, overwrite_a=0)[0]
            else:
                import scipy.linalg as la

                bal, _ = la.matrix_balance(A, permute=False, separate=True)
            if np.linalg.norm(bal, 1) < 0.9 * norm_a:
                work, balanced = bal, True
        if small is not None:
            lam, vl, vr = small_eig(work, small)
        else:
            import scipy.linalg as la

            lam, vl, vr = la.eig(work, left=True, right=True, check_finite=False)
        # Participation factors are invariant under diagonal scaling, and the error bounds
        # belong to the matrix LAPACK actually saw, so everything stays in balanced coordinates.
        return lam, vr, vl, vl, float(np.linalg.norm(work, "fro")), 0, balanced, work
    import scipy.linalg as la

    norm_a = float(np.linalg.norm(A, "fro"))
    norm_e = float(np.linalg.norm(E, "fro"))
    ab, vl, vr = la.eig(A, E, left=True, right=True, homogeneous_eigvals=True,
                        check_finite=False)
    alpha, beta = ab[0], ab[1]
    eps = np.finfo(float).eps
    tiny = 100.0 * n * eps
    scale_a = max(norm_a, 1e-300)
    scale_e = max(norm_e, 1e-300)
    if np.any((np.abs(alpha) <= tiny * scale_a) & (np.abs(beta) <= tiny * scale_e)):
        raise ModelError(model.source, "plant.E", "makes a singular pencil: det(A - λE) is "
                         "zero for every λ, so the model has no well-defined modes",
                         line=model.line_of("plant.E"),
                         hint="check for a state that appears in no equation")
    finite = np.abs(beta) > tiny * scale_e * np.maximum(np.abs(alpha) / scale_a, 1.0)
    if not finite.any():
        # Nothing to classify or check: a verdict on no modes would pass vacuously.
        raise ModelError(model.source, "plant.E", f"gives no finite eigenvalues: all {n} "
                         "eigenvalues of the pencil (A, E) are infinite, so the model has no "
                         "dynamic mode to check", line=model.line_of("plant.E"),
                         hint="E is zero or nilpotent: check that the differential equations "
                         "are in E")
    lam = alpha[finite] / beta[finite]
    vr, vl = vr[:, finite], vl[:, finite]
    ew = E.conj().T @ vl  # E^H w: with it, w^H E v plays the role of w^H v
    return lam, vr, vl, ew, norm_a + norm_e, int((~finite).sum()), False, A


def analyse(model: Model) -> Spectrum:
    """Compute the modes of ``model``: every eigenvalue (LAPACK).

    A sparse model (:attr:`~eigengate.model.core.Model.sparse`) is made dense here when
    the dense limit allows; its partial spectrum from the sparse search comes from
    :func:`eigengate.analysis.sparse_modes.analyse_sparse` (``spectrum_of`` picks).

    Parameters
    ----------
    model
        A validated :class:`~eigengate.model.core.Model`.

    Returns
    -------
    Spectrum
        Modes least stable first, with damping, frequency, time constant, participation
        factors (Pérez-Arriaga, Verghese & Schweppe 1982, magnitude form normalised to sum 1
        per mode), condition numbers and error bounds.
    """
    import numpy as np


    if model.sparse:  # the dense analysis of a sparse model
        import dataclasses

        from ..model.core import dense_limit

        if model.n_states > dense_limit():
            raise ModelError(model.source, "plant.A", f"has {model.n_states} states, more "
                             f"than the dense analysis's limit of {dense_limit()} here",
                             line=model.line_of("plant.A"),
                             hint="use the sparse search (eigengate.analyse_sparse)")
        sparse_a, sparse_e = cast(Any, model.A), cast(Any, model.E)
        model = dataclasses.replace(model, A=sparse_a.toarray(),
                                    E=None if sparse_e is None else sparse_e.toarray())
    n = model.n_states
    small = small_lapack(model.A) if model.E is None else None
    if small is not None:  # a small standard model: the same arithmetic, fewer numpy calls
        lam, vr, vl, both, norm, balanced, work, absw = small_modes.decompose(model.A, small)
        infinite = 0
    else:
        lam, vr, vl, ew, norm, infinite, balanced, work = _decompose(model)
    lams = lam.tolist()
    if not (all(map(cmath.isfinite, lams)) and math.isfinite(norm)):  # never from inf/nan
        raise ModelError(model.source, "plant.A", "has eigenvalues beyond the range of double "
                         "precision", line=model.line_of("plant.A"), hint="rescale the units")
    eps = 2.0 ** -52  # float64 machine epsilon
    # Defective eigenvalues: the Hölder-type scale of the QR/QZ backward error n·eps·‖A‖.
    base = BOUND_FACTOR * n * eps * max(norm, 2.2250738585072014e-308)
    if small is not None:
        deltas, kappas, rhos, ewc = small_modes.bounds(work, absw, lam, vr, vl, both, norm,
                                                         base)
        sweep = sweep_order(lam.real.tolist())
        labels = None if rhos is None else touching_small(lams, rhos, TOUCH, sweep)
        near = touching_small(lams, deltas, CLUSTER_FACTOR, sweep)
        clusters = None if near == list(range(n)) else _groups(near)  # None: no cluster
    else:
        # A posteriori bounds from the residuals A v - λ v (descriptor: A v - λ E v) and the
        # left vectors; κ_i = ‖w‖‖v‖/|w^H v| (w^H E v for descriptor models) alongside.
        delta, kappa, residual = estimate(work, model.E, lam, vr, vl, ew)
        cap_defective(lam, delta, base, norm, n)
        rho = labels = None
        if model.E is None and n <= ENCLOSE_LIMIT:
            rho = enclose(work, lam, vr, vl, residual)
            labels = None if rho is None else components(lam, rho)
        ewc = ew.conj()
        deltas, kappas = delta.tolist(), kappa.tolist()
        rhos = None if rho is None else rho.tolist()
        clusters = _clusters(lam, delta)
    n = len(lams)  # the finite eigenvalues (a descriptor model may have fewer than states)

    # Participation p_ki = |v_ki · conj((E^H w)_ki)|, normalised to sum 1 per eigenvalue.
    raw = np.abs(vr * ewc)
    sums = np.add.reduce(raw, axis=0)  # raw.sum(axis=0)
    if 0.0 in sums.tolist():
        sums[sums == 0] = 1.0
    part = raw / sums

    tops = part.argmax(axis=0).tolist()
    # the discs' component sizes, unless each disc is alone in its own (the usual spectrum)
    sizes = None if labels is None or labels == list(range(len(labels))) else \
        collections.Counter(labels)
    columns = part.T  # columns[i]: part[:, i], the same view
    todo: list[list[int]] = []  # the clusters the loop below makes modes of
    if clusters is None and sizes is None and model.sample_period is None:
        rows, keys = _simple_modes(lams, deltas, kappas, None if labels is None else rhos,
                                   columns, tops, model.states)
    else:
        rows, keys = [], []
        todo = [[i] for i in range(n)] if clusters is None else clusters
    states = model.states
    for members in todo:
        single = len(members) == 1
        if single:  # the common case: no numpy calls per eigenvalue
            i = members[0]
            centre, err, geometric = lams[i], deltas[i], 1
            kap, top = kappas[i], tops[i]
        else:
            vals = lam[members]
            centre = complex(vals.mean())
            geometric = geometric_multiplicity(model, centre, vr[:, members], len(members), norm)
            # The cluster stands for each member: its bound covers the spread and every
            # member's own bound, and, when defective, the Hölder-type sensitivity of the
            # largest Jordan block the multiplicities allow (rotated or triangular alike).
            err = max(float(np.max(np.abs(vals - centre))), max(deltas[i] for i in members))
            if geometric < len(members):
                block = min(len(members) - geometric + 1, MAX_BLOCK)
                err = max(err, hoelder(base, norm, block)
                          * (1.0 if model.E is None else 1.0 + abs(centre)))
            kap, weights = max(kappas[i] for i in members), part[:, members].mean(axis=1)
            top = int(np.argmax(weights))
        if abs(centre.imag) <= err:
            centre = complex(centre.real, 0.0)
        elif centre.imag < 0:
            continue  # the conjugate cluster stands for this one
        if not single:
            ring = cluster_radius(lams, rhos, labels, members, centre, sizes)
        elif labels is None or (sizes is not None and sizes[labels[i]] != 1):
            ring = math.inf  # cluster_radius of one disc: none, or not alone in its component
        else:
            ring = (abs(lams[i] - centre) + rhos[i]) * _WIDEN
        mode = _mode(0, states, _mode_fields(model, centre, err, len(members), geometric, kap,
                                             columns[i] if single else weights, ring))
        rows.append(mode)
        keys.append(top)
    # Least stable (largest Re s) first, on rounded keys so round-off cannot reorder ties.
    order = mode_order([m.s.real for m in rows],
                       lambda j: sort_key(rows[j].__dict__, keys[j]))
    modes = tuple([rows[j] for j in order])
    for k, mode in enumerate(modes, 1):
        mode.__dict__["index"] = k  # its place in the order (the first key of its fields)
    spectrum = object.__new__(Spectrum)  # Spectrum(...) without the frozen __init__'s cost
    spectrum.__dict__.update(model=model, modes=modes, infinite=infinite, norm=norm,
                             balanced=balanced, search=None)
    return spectrum


def _simple_modes(lams: list[complex], deltas: list[float], kappas: list[float],
                  rhos: list[float] | None, columns: "np.ndarray", tops: list[int],
                  states: tuple[str, ...]) -> tuple[list[Mode], list[int]]:
    """The modes (unordered) and their top states of a continuous spectrum with no cluster
    and each enclosure disc alone in its component (``rhos``; None for no enclosure), as
    :func:`analyse`'s loop builds them with :func:`_mode_fields` and :func:`_mode`: the
    same arithmetic inline (``s`` is the centre, finite), each field dict made once, in the
    same key order."""
    new, inf = object.__new__, math.inf
    rows, keys = [], []
    for i, centre in enumerate(lams):
        err = deltas[i]
        if abs(centre.imag) <= err:
            centre = complex(centre.real, 0.0)
        elif centre.imag < 0:
            continue  # the conjugate stands for this one
        ring = inf if rhos is None else (abs(lams[i] - centre) + rhos[i]) * _WIDEN
        re = centre.real
        wn = abs(centre)
        floor = _FLOOR * wn  # the rounding of s itself (re is finite)
        err_s, ring_s = floor if floor > err else err, ring + floor
        if wn == 0.0:
            zeta, tau = 0.0, inf
        else:
            zeta = -re / wn + 0.0  # + 0.0 turns -0.0 into 0.0
            tau = inf if re == 0.0 else -1.0 / re
        mode = new(Mode)
        object.__setattr__(mode, "__dict__", {
            "index": 0, "eigenvalue": centre, "s": centre, "multiplicity": 1,
            "geometric_multiplicity": 1, "pair": centre.imag != 0.0, "natural_frequency": wn,
            "damping_ratio": zeta, "time_constant": tau,
            "uncertainty": ring_s if ring_s < err_s else err_s, "condition": kappas[i],
            "participation": columns[i], "enclosure": ring_s, "states": states})
        rows.append(mode)
        keys.append(tops[i])
    return rows, keys


def _mode(index: int, states: tuple[str, ...], row: dict) -> Mode:
    """``Mode(index=index, states=states, **row)``, filled in directly rather than through
    the frozen ``__init__`` (one ``object.__setattr__`` per field), as
    :func:`eigengate.scan.records.unrecord` rebuilds one: the same instance (Mode has no
    ``__post_init__``), at a fifth of the cost."""
    mode = object.__new__(Mode)
    fields = mode.__dict__
    fields["index"] = index
    fields.update(row)
    fields["states"] = states
    return mode


def _clusters(lam: "np.ndarray", delta: "np.ndarray") -> list[list[int]]:
    """Group eigenvalues closer than CLUSTER_FACTOR·(δi+δj), by sweeping along the real axis."""
    return _groups(touching(lam, delta, CLUSTER_FACTOR))


def _groups(labels: list[int]) -> list[list[int]]:
    """The members of each component label, ascending, in the order of their labels."""
    if labels == list(range(len(labels))):  # the usual spectrum: no cluster
        return [[i] for i in labels]
    groups: dict[int, list[int]] = {}
    for i, root in enumerate(labels):
        groups.setdefault(root, []).append(i)
    return [sorted(g) for _, g in sorted(groups.items())]


#: ``FIGURE_FLOOR · eps``: the relative rounding floor of s, as :func:`_mode_fields` scales it.
_FLOOR = FIGURE_FLOOR * 2.0 ** -52
#: :func:`~eigengate.analysis.bounds.cluster_radius`'s widening of a radius for its rounding.
_WIDEN = 1.0 + 4.0 * 2.0 ** -53


def _mode_fields(model: Model, centre: complex, err: float, multiplicity: int, geometric: int,
                 kappa: float, participation: "np.ndarray", ring: float = math.inf) -> dict:
    pair = centre.imag != 0.0
    if model.sample_period is None:
        s, err_s, ring_s = centre, err, ring
    else:
        T = model.sample_period
        r = abs(centre)
        ring_s = map_to_s(ring, centre, T)
        if r <= err:  # deadbeat: z = 0 decays in one step
            centre, s, err_s, ring_s = 0j, complex(-math.inf, 0.0), 0.0, math.inf
        else:
            s = complex(math.log(r) / T, math.atan2(centre.imag, centre.real) / T)
            if centre.imag == 0.0 and centre.real < 0:
                s = complex(s.real, math.pi / T)
            err_s = err / r / T  # not err/(r·T): r·T may underflow
    re = s.real
    wn = abs(s)
    if math.isfinite(re):  # rounding of s itself (and of the figures derived from it)
        floor = _FLOOR * wn
        err_s, ring_s = floor if floor > err_s else err_s, ring_s + floor  # max(err_s, floor)
    if math.isinf(re):
        zeta, tau = 1.0, 0.0
    elif wn == 0.0:
        zeta, tau = 0.0, math.inf
    else:
        zeta = -re / wn + 0.0  # + 0.0 turns -0.0 into 0.0
        tau = math.inf if re == 0.0 else -1.0 / re
    return {"eigenvalue": centre, "s": s, "multiplicity": multiplicity,
            "geometric_multiplicity": geometric, "pair": pair, "natural_frequency": wn,
            "damping_ratio": zeta, "time_constant": tau,
            "uncertainty": ring_s if ring_s < err_s else err_s,  # min(err_s, ring_s)
            "condition": kappa, "participation": participation, "enclosure": ring_s}
