"""Frequency responses at many frequencies at once, and the batched searches built on them.

:class:`Resolvent` reduces ``(A, E)`` once (complex Schur, or QZ for a descriptor loop) and
then solves the triangular systems ``(λE − A)⁻¹ B`` for a whole block of frequencies in one
back-substitution: row ``i`` of every frequency's solution is one product of the triangular
factor's row with the rows already solved (a BLAS call above :data:`SMALL` states, an
elementwise sum below), so the Python-level work is one step per state, not one call per
frequency. Blocks are sized so the workspace stays below
:data:`CHUNK` complex entries, whatever the number of states.

The searches evaluate their function on arrays, so every step of every bracket costs one
batched response:

* :func:`bracketed_roots`: all brackets refined together by false position with the
  Anderson–Björck modification (Anderson & Björck, BIT 13, 1973; the Illinois method of
  Dowell & Jarratt, BIT 11, 1971, with a better weight; both cited from memory), with a bisection step whenever a
  bracket has not halved over four steps; the stopping rule is Brent's
  (``|b − a| < xtol + rtol·|x|``).
* :func:`local_maxima`: the largest value of a function on each of several intervals, by
  zooming onto the best of equally spaced samples (all intervals in one evaluation per
  round), then one parabola through the best sample and its neighbours.
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np

__all__ = ["CHUNK", "SLOW_STEPS", "Resolvent", "bracketed_roots", "local_maxima", "crossings",
           "peaks"]

#: Largest number of complex entries (states × inputs × frequencies) in one block.
CHUNK = 1 << 18
#: Up to this many states the back-substitution's row products are plain elementwise sums
#: (no BLAS call, whose threads cost more than they give on a few numbers).
SMALL = 12
#: A bracket that has not halved over this many steps is bisected.
SLOW_STEPS = 4

#: ``f(x, rows)``: values at the points ``x`` of the brackets (intervals) numbered ``rows``
#: (``x`` has one row per entry of ``rows``), so one function can serve brackets of
#: different quantities from one batched response.
RowFunction = Callable[[np.ndarray, np.ndarray], np.ndarray]


class Resolvent:
    """Frequency response ``C (λE − A)⁻¹ B + D`` after one complex Schur (QZ) reduction.

    ``λ = jω`` for continuous, ``e^{jωT}`` for discrete models. Each frequency then costs one
    triangular solve, O(n²), instead of a dense O(n³) solve, and all frequencies of a call are
    solved together (one back-substitution over the block).
    """

    def __init__(self, lt) -> None:
        import scipy.linalg as la

        self.dt = lt.sample_period
        self.D = lt.D.astype(complex)
        if lt.E is None:
            t, z = la.schur(lt.A, output="complex")
            self.T, self.S = t, None
            self.Bt, self.Ct = z.conj().T @ lt.B, lt.C @ z
        else:
            aa, bb, q, z = la.qz(lt.A, lt.E, output="complex")
            self.T, self.S = aa, bb
            self.Bt, self.Ct = q.conj().T @ lt.B, lt.C @ z
        self.Bt = np.asarray(self.Bt, dtype=complex)
        self.scale = max(1.0, float(np.max(np.abs(np.diag(self.T)), initial=0.0)))
        # the pieces of the back-substitution, as columns that broadcast over frequencies
        self._diag_t = np.diag(self.T)[:, None]
        self._diag_s = None if self.S is None else np.diag(self.S)[:, None]
        self._t_rows = [self.T[i, i + 1:, None] for i in range(self.T.shape[0])]
        self._s_rows = [] if self.S is None else \
            [self.S[i, i + 1:, None] for i in range(self.S.shape[0])]
        self._rhs = [complex(b[0]) if b.size == 1 else b for b in self.Bt]

    def eigenvalues(self) -> np.ndarray:
        """Eigenvalues of the reduced pencil (``diag T``, or ``diag T / diag S`` where
        ``diag S`` is nonzero): where the grid should look, not a modal analysis."""
        t = np.diag(self.T)
        if self.S is None:
            return t.copy()
        s = np.diag(self.S)
        keep = s != 0
        return t[keep] / s[keep]

    def __call__(self, omegas) -> np.ndarray:
        """Responses at ``omegas`` (rad/s), shape ``(len, p, m)``; NaN at a pole."""
        ws = np.asarray(omegas, dtype=float).ravel()
        n, (p, m) = self.T.shape[0], self.D.shape
        step = max(1, CHUNK // max(1, n * max(m, 1)))
        if ws.size <= step:
            return self._block(ws)
        out = np.empty((ws.size, p, m), dtype=complex)
        for start in range(0, ws.size, step):
            out[start:start + step] = self._block(ws[start:start + step])
        return out

    def lambdas(self, ws: np.ndarray) -> np.ndarray:
        """``jω`` (real part exactly 0) or ``e^{jωT}`` for each frequency."""
        return 1j * ws if self.dt is None else np.exp(1j * ws * self.dt)

    def _block(self, ws: np.ndarray) -> np.ndarray:
        k, n, (p, m) = ws.size, self.T.shape[0], self.D.shape
        if n == 0:
            return np.broadcast_to(self.D, (k, p, m)).copy()
        lam = self.lambdas(ws)
        d = lam - self._diag_t if self.S is None else lam * self._diag_s - self._diag_t
        bad = np.abs(d).min(axis=0) <= 1e-14 * self.scale  # on a pole (or next to it)
        d[:, bad] = 1.0
        if m > 1:  # column c·k + j of the (n, m·k) unknowns: input c at frequency j
            d, lam = np.tile(d, (1, m)), np.tile(lam, m)
        x = np.empty((n, m * k), dtype=complex)
        small = n <= SMALL
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            for i in range(n - 1, -1, -1):  # (λE − A) x = B, last row first
                r = self._rhs[i] if m == 1 else np.repeat(self.Bt[i], k)
                if i < n - 1:  # row i of T (and S) times the rows solved
                    tail = x[i + 1:]
                    r = r + ((self._t_rows[i] * tail).sum(axis=0) if small
                             else self.T[i, i + 1:] @ tail)
                    if self.S is not None:
                        r = r - lam * ((self._s_rows[i] * tail).sum(axis=0) if small
                                       else self.S[i, i + 1:] @ tail)
                x[i] = r / d[i]
            y = (self.Ct[:, :, None] * x).sum(axis=1) if small else self.Ct @ x
            h = y.reshape(p, m, k).transpose(2, 0, 1) + self.D
        h[bad] = np.nan
        return h

    def scalar(self, w: float) -> complex:  # a SISO loop at one frequency
        return complex(self(w)[0, 0, 0])

    def siso(self, omegas) -> np.ndarray:
        """The (1, 1) entry at ``omegas``: a SISO loop's response as a flat array."""
        return self(omegas)[:, 0, 0]


def bracketed_roots(f: RowFunction, a: np.ndarray, b: np.ndarray, fa: np.ndarray,
                    fb: np.ndarray, xtol: np.ndarray, rtol: float = 1e-13,
                    maxiter: int = 200) -> np.ndarray:
    """Roots of ``f`` in the brackets ``[a_j, b_j]`` (``fa_j``, ``fb_j`` of opposite signs),
    all refined together; ``f(x, rows)`` gives the values at one point of each bracket in
    ``rows``.

    Each step is false position with the Anderson–Björck weight on an end kept twice in a
    row; it becomes bisection when the false-position point is not inside the bracket or
    the bracket has not halved over the last :data:`SLOW_STEPS` steps (so the width halves
    at least once every ``SLOW_STEPS + 1`` steps), and stays half a tolerance inside it, so a
    bracket whose end has converged closes on the next step (Brent's rule). Each root is the
    end of its final bracket with the smaller ``|f|``, the bracket narrower than
    ``xtol_j + rtol·max(|a_j|, |b_j|)`` (or ``f`` exactly 0 there). A NaN value moves the
    bracket's lower end, so a pole inside a bracket cannot stall it (callers check roots)."""
    a, b = np.array(a, dtype=float), np.array(b, dtype=float)
    fa, fb = np.array(fa, dtype=float), np.array(fb, dtype=float)
    xtol = np.broadcast_to(np.asarray(xtol, dtype=float), a.shape)
    kept = np.zeros(a.size, dtype=int)  # +1: b kept by the last step, −1: a kept
    history = [np.full(a.size, math.inf)] * SLOW_STEPS  # widths of the last steps
    for _ in range(maxiter):
        width = np.abs(b - a)
        tol = xtol + rtol * np.maximum(np.abs(a), np.abs(b))
        live = np.flatnonzero((width >= tol) & (fa != 0) & (fb != 0))
        if not live.size:
            break
        A, B, FA, FB = a[live], b[live], fa[live], fb[live]
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            x = B - FB * (B - A) / (FB - FA)
        lo, hi = np.minimum(A, B), np.maximum(A, B)
        slow = width[live] > 0.5 * history[0][live]
        x = np.where(~((x >= lo) & (x <= hi)) | slow, 0.5 * (A + B), x)
        step = np.minimum(0.5 * tol[live], 0.25 * width[live])  # half a tolerance inside
        x = np.clip(x, lo + step, hi - step)
        fx = np.asarray(f(x, live), dtype=float).reshape(x.shape)
        move_a = (np.sign(fx) == np.sign(FA)) | np.isnan(fx)
        k_new = np.where(move_a, 1, -1)
        again = k_new == kept[live]
        with np.errstate(invalid="ignore", divide="ignore"):  # Anderson–Björck weight
            weight = 1.0 - fx / np.where(move_a, FA, FB)
        weight = np.where(weight > 0, weight, 0.5)
        FB = np.where(move_a & again, weight * FB, FB)
        FA = np.where(~move_a & again, weight * FA, FA)
        a[live], fa[live] = np.where(move_a, x, A), np.where(move_a, fx, FA)
        b[live], fb[live] = np.where(move_a, B, x), np.where(move_a, FB, fx)
        kept[live] = k_new
        history = history[1:] + [width]
    return np.where(np.abs(fa) <= np.abs(fb), a, b)


def local_maxima(fun: RowFunction, a: np.ndarray, b: np.ndarray, points: int = 65,
                 rel: float = 2e-4) -> tuple[np.ndarray, np.ndarray]:
    """Largest value of ``fun`` on each interval ``[a_j, b_j]`` and where it is attained.

    Each round samples every interval at ``points`` equally spaced points (one call
    ``fun(x, rows)`` for all, ``x`` of shape ``(len(rows), points)``), keeps the best sample
    and narrows its interval to the two samples beside it, until every interval is
    narrower than ``rel·b``; then a parabola through the best sample and its neighbours
    gives the last point (kept only when it is larger). A local search, like any bounded
    one: it finds a maximum of a function that is unimodal on the interval, and the best
    sample otherwise. NaN values count as −∞."""
    a, b = np.array(a, dtype=float), np.array(b, dtype=float)
    t = np.linspace(0.0, 1.0, points)
    rows = np.arange(a.size)
    best_x, best_v = a.copy(), np.full(a.size, -math.inf)
    while True:
        xs = a[:, None] + (b - a)[:, None] * t
        vs = np.asarray(fun(xs, rows), dtype=float).reshape(xs.shape)
        vs = np.where(np.isnan(vs), -math.inf, vs)
        i = np.argmax(vs, axis=1)
        better = vs[rows, i] > best_v
        best_x[better], best_v[better] = xs[rows, i][better], vs[rows, i][better]
        if np.all(b - a <= rel * np.abs(b)):
            break
        a, b = xs[rows, np.maximum(i - 1, 0)], xs[rows, np.minimum(i + 1, points - 1)]
    inner = (i > 0) & (i < points - 1)
    if np.any(inner):
        j = rows[inner]
        v0, v1, v2 = vs[j, i[j] - 1], vs[j, i[j]], vs[j, i[j] + 1]
        h = xs[j, 1] - xs[j, 0]
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            curv = v0 - 2.0 * v1 + v2
            x = xs[j, i[j]] + 0.5 * h * (v0 - v2) / curv
        ok = (curv < 0) & (np.abs(x - xs[j, i[j]]) < h)
        if np.any(ok):
            j, x = j[ok], x[ok]
            v = np.asarray(fun(x[:, None], j), dtype=float).reshape(x.shape)
            better = v > best_v[j]
            best_x[j[better]], best_v[j[better]] = x[better], v[better]
    return best_x, best_v


# ------------------------------------------------------------------ searches on L

def _batched(response, specs: list, kinds: np.ndarray):
    """``f(x, rows)`` for the batched searches: one ``response`` (L at the points) for all
    rows, then each row's quantity (``specs[k][0]``, a function of L) where ``kinds`` is k."""
    def f(x: np.ndarray, rows: np.ndarray) -> np.ndarray:
        flat = x.ravel()
        ell = response(flat)
        which = np.repeat(kinds[rows], flat.size // max(rows.size, 1))
        out = np.empty(flat.size)
        with np.errstate(divide="ignore", invalid="ignore"):
            for k, spec in enumerate(specs):
                sel = which == k
                if np.any(sel):
                    out[sel] = spec[0](ell[sel])
        return out.reshape(x.shape)
    return f


def crossings(response, w: np.ndarray, specs: list) -> list[list[float]]:
    """Roots of several quantities on one grid, every bracket refined at once: ``specs``
    holds ``(quantity of L, its grid values v, valid(i))``; a root lies between grid points
    where ``v`` changes sign and ``valid`` holds (or on a grid point where ``v`` is 0).
    Brent's tolerances: 1e-14·ω absolute, 1e-13 relative."""
    outs, idx, kinds = [], [], []
    for k, (_q, v, valid) in enumerate(specs):
        outs.append([float(w[i]) for i in np.flatnonzero(v == 0)])
        here = [i for i in np.flatnonzero(np.sign(v[:-1]) * np.sign(v[1:]) < 0) if valid(i)]
        idx += here
        kinds += [k] * len(here)
    if idx:
        i, kind = np.array(idx, dtype=int), np.array(kinds, dtype=int)
        fa = np.array([specs[k][1][j] for k, j in zip(kinds, idx)])
        fb = np.array([specs[k][1][j + 1] for k, j in zip(kinds, idx)])
        roots = bracketed_roots(_batched(response, specs, kind), w[i], w[i + 1], fa, fb,
                                xtol=1e-14 * w[i])
        for k, x in zip(kinds, roots):
            outs[k].append(float(x))
    return [sorted(o) for o in outs]


def peaks(response, w: np.ndarray, specs: list) -> list[tuple[float, float]]:
    """Maxima of several quantities of L: ``specs`` holds ``(quantity of L, its grid values
    v, at_end)``. Each is the largest of its grid maximum, its value at ω = 0, ``at_end``
    (its limit at ω → ∞, continuous, or value at Nyquist, discrete, on the grid) and
    bounded local searches around its three largest grid values (all of them run
    together, one response per round)."""
    found, a, b, kinds = [], [], [], []
    at_zero = response(np.zeros(1))
    with np.errstate(divide="ignore", invalid="ignore"):
        for k, (q, v, at_end) in enumerate(specs):
            best_w, best_v = float(w[int(np.argmax(v))]), float(np.max(v))
            zero = float(np.asarray(q(at_zero))[0])
            if np.isfinite(zero) and zero > best_v:
                best_w, best_v = 0.0, zero
            if at_end > best_v:  # a supremum approached from below as ω → ∞
                best_w, best_v = math.inf, float(at_end)
            found.append([best_v, best_w])
            for i in np.argsort(-v)[:3]:
                lo, hi = w[max(i - 1, 0)], w[min(i + 1, w.size - 1)]
                if hi > lo:
                    a.append(lo)
                    b.append(hi)
                    kinds.append(k)
    if kinds:
        kind = np.array(kinds, dtype=int)
        xs, vs = local_maxima(_batched(response, specs, kind), np.array(a), np.array(b))
        for k, x, val in zip(kinds, xs, vs):
            if val > found[k][0]:
                found[k] = [float(val), float(x)]
    return [(v, x) for v, x in found]
