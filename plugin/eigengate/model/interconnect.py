"""Realise transfer functions and close feedback loops, in plain numpy.

Everything here works on bare arrays and raises :class:`InterconnectError` (a ``ValueError``)
with a message that reads after a field name ("is improper: ..."); the loader adds the file
and the field. The same algebra serves continuous (``s``) and discrete (``z``) models.

Closed loops keep the plant's inputs and outputs as the loop's external signals: a
closed-loop input ``r`` is added at the plant input (``u = u_feedback + r``) and the
closed-loop outputs are the plant outputs ``y``. Margin and response code can then use the
closed-loop ``B, C, D`` directly.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

__all__ = ["InterconnectError", "ILL_POSED_COND", "tf_siso", "tf_mimo", "observable_part",
           "state_feedback", "output_feedback", "dynamic_feedback"]

#: Condition number of ``I + K D`` above which an algebraic loop is called ill-posed.
ILL_POSED_COND = 1e12

Arrays = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


class InterconnectError(ValueError):
    """A transfer function cannot be realised or a loop cannot be closed."""


def _poly(coeffs: Sequence[float] | np.ndarray) -> np.ndarray:
    c = np.atleast_1d(np.asarray(coeffs, dtype=float)).ravel()
    nz = np.flatnonzero(c)
    return c[nz[0]:] if nz.size else np.zeros(0)


def _proper(num: np.ndarray, den: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Strip leading zeros, check properness, make ``den`` monic; return (num, den)."""
    for what, given in (("numerator", num), ("denominator", den)):
        if np.size(given) == 0:  # [] is no polynomial at all; a zero one is written [0]
            raise InterconnectError(f"has a {what} with no coefficients (write [0] for a "
                                    "zero entry)")
    n = _poly(num)
    d = _poly(den)
    if d.size == 0:
        raise InterconnectError("has a zero denominator")
    if n.size > d.size:
        raise InterconnectError(f"is improper: numerator degree {n.size - 1} exceeds "
                                f"denominator degree {d.size - 1}")
    return n / d[0], d / d[0]


def _companion(den: np.ndarray, nums: list[np.ndarray]) -> Arrays:
    # Controllable canonical form of a single-input system sharing the monic ``den``:
    # A has -a1..-an in its first row and ones on the subdiagonal, B = e1, and each output
    # row holds the numerator minus its feedthrough times ``den``.
    order = den.size - 1
    a = np.zeros((order, order))
    if order:
        a[0, :] = -den[1:]
        a[1:, :-1] = np.eye(order - 1)
    b = np.zeros((order, 1))
    if order:
        b[0, 0] = 1.0
    c = np.zeros((len(nums), order))
    d = np.zeros((len(nums), 1))
    for i, num in enumerate(nums):
        padded = np.concatenate([np.zeros(order + 1 - num.size), num])
        d[i, 0] = padded[0]
        c[i, :] = (padded - padded[0] * den)[1:]
    return a, b, c, d


def tf_siso(num: Sequence[float], den: Sequence[float]) -> Arrays:
    """Realise ``num/den`` (descending powers of s or z) in controllable canonical form.

    Parameters
    ----------
    num, den
        Coefficient sequences; leading zeros are ignored, ``den`` is normalised by its leading
        coefficient.

    Returns
    -------
    tuple of numpy.ndarray
        ``(A, B, C, D)`` with ``deg den`` states (0 for a static gain).

    Raises
    ------
    InterconnectError
        When ``den`` is zero or ``num`` has a higher degree than ``den``.
    """
    n, d = _proper(np.asarray(num, dtype=float), np.asarray(den, dtype=float))
    return _companion(d, [n])


def tf_mimo(nums: Sequence[Sequence[Sequence[float]]],
            dens: Sequence[Sequence[Sequence[float]]]) -> Arrays:
    """Minimal realisation of a transfer-function matrix ``nums[i][j] / dens[i][j]``.

    Each column is realised in controllable form over the product of its distinct
    denominators (equal monic denominators counted once; zero entries ignored), the columns
    are stacked block-diagonally, and the unobservable part is removed with an orthogonal
    staircase (:func:`observable_part`). The result is controllable and observable, hence
    minimal.

    Raises
    ------
    InterconnectError
        With ``entry (i,j)`` (1-based) in the message for a zero denominator or an improper
        entry, or when the rows have unequal lengths.
    """
    p = len(nums)
    m = len(nums[0]) if p else 0
    if any(len(row) != m for row in nums) or len(dens) != p or any(len(r) != m for r in dens):
        raise InterconnectError(f"must be a rectangular matrix of entries with num and den of "
                                f"the same shape, got {p} rows of lengths "
                                f"{[len(r) for r in nums]} and den {[len(r) for r in dens]}")
    blocks: list[Arrays] = []
    for j in range(m):
        column: list[tuple[np.ndarray, np.ndarray]] = []
        for i in range(p):
            try:
                column.append(_proper(np.asarray(nums[i][j], float), np.asarray(dens[i][j], float)))
            except InterconnectError as exc:
                raise InterconnectError(f"entry ({i + 1},{j + 1}) {exc}") from None
        distinct: list[np.ndarray] = []
        for num, den in column:
            if num.size and not any(_same(den, q) for q in distinct):
                distinct.append(den)
        common = np.array([1.0])
        for q in distinct:
            common = np.convolve(common, q)
        col_nums = []
        for num, den in column:
            if not num.size:
                col_nums.append(np.zeros(1))
                continue
            # num/den = num·(common/den)/common: multiply by the other distinct factors.
            scaled = num
            skipped = False
            for q in distinct:
                if not skipped and _same(q, den):
                    skipped = True
                    continue
                scaled = np.convolve(scaled, q)
            col_nums.append(scaled)
        blocks.append(_companion(common, col_nums))
    a = _blockdiag([blk[0] for blk in blocks])
    b = _blockdiag([blk[1] for blk in blocks])
    c = np.hstack([blk[2] for blk in blocks]) if blocks else np.zeros((p, 0))
    d = np.hstack([blk[3] for blk in blocks]) if blocks else np.zeros((p, 0))
    return observable_part(a, b, c, d)


def _same(x: np.ndarray, y: np.ndarray) -> bool:
    return x.size == y.size and bool(np.allclose(x, y, rtol=1e-12, atol=1e-14))


def _blockdiag(mats: list[np.ndarray]) -> np.ndarray:
    rows = sum(x.shape[0] for x in mats)
    cols = sum(x.shape[1] for x in mats)
    out = np.zeros((rows, cols))
    r = c = 0
    for x in mats:
        out[r:r + x.shape[0], c:c + x.shape[1]] = x
        r += x.shape[0]
        c += x.shape[1]
    return out


def observable_part(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray,
                    tol: float | None = None) -> Arrays:
    """Remove the unobservable states of ``(A, B, C, D)`` with an orthogonal staircase.

    This is the controllability staircase applied to the dual pair ``(Aᵀ, Cᵀ)``: at each
    step an SVD of the current coupling block splits off the directions it reaches, until the
    block has numerical rank zero. The reached directions span the observable subspace ``V``;
    the result is ``(VᵀAV, VᵀB, CV, D)``, which has the same transfer function. No powers of
    ``A`` are formed, so this stays accurate where an observability matrix would not.
    """
    n = a.shape[0]
    if n == 0:
        return a, b, c, d
    scale = max(1.0, np.linalg.norm(a, 1), np.linalg.norm(c, 1))
    tol = tol if tol is not None else 10 * n * np.finfo(float).eps * scale
    at = a.T.copy()
    z = np.eye(n)
    coupling = c.T.copy()  # n × p, rows are the not-yet-reached coordinates
    done = 0
    while done < n:
        u, s, _ = np.linalg.svd(coupling, full_matrices=True)
        rank = int(np.sum(s > tol))
        if rank == 0:
            break
        t = np.eye(n)
        t[done:, done:] = u
        at = t.T @ at @ t
        z = z @ t
        done += rank
        coupling = at[done:, done - rank:done]
    v = z[:, :done]
    return v.T @ a @ v, v.T @ b, c @ v, d


def _well_posed(m: np.ndarray, what: str) -> np.ndarray:
    cond = np.linalg.cond(m) if m.size else 1.0
    if not np.isfinite(cond) or cond > ILL_POSED_COND:
        raise InterconnectError(f"makes an ill-posed loop: I + {what} is singular "
                                f"(condition number {cond:.3g} > {ILL_POSED_COND:.0e})")
    return np.linalg.inv(m)


def _close(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray,
           cm: np.ndarray, dm: np.ndarray, inputs: Sequence[int],
           ac: np.ndarray, bc: np.ndarray, cc: np.ndarray, dc: np.ndarray,
           what: str) -> Arrays:
    # General negative feedback of a controller (ac, bc, cc, dc) whose input is -(measured
    # signals cm x + dm u) and whose output drives the plant inputs ``inputs``; u = S u_c + r.
    # With M = (I + Dc Dm S)^-1, solving the algebraic loop for u_c gives
    #   u_c = M (Cc xc - Dc Cm x - Dc Dm r).
    sel = np.zeros((b.shape[1], len(inputs)))
    sel[list(inputs), range(len(inputs))] = 1.0
    dms = dm @ sel
    mm = _well_posed(np.eye(len(inputs)) + dc @ dms, what)
    bs, ds = b @ sel, d @ sel
    gx, gc, gr = -mm @ dc @ cm, mm @ cc, -mm @ dc @ dm  # u_c = gx x + gc xc + gr r
    nc = ac.shape[0]
    a_cl = np.block([[a + bs @ gx, bs @ gc],
                     [-bc @ (cm + dms @ gx), ac - bc @ dms @ gc]]) if nc else a + bs @ gx
    b_cl = np.vstack([b + bs @ gr, -bc @ (dm + dms @ gr)]) if nc else b + bs @ gr
    c_cl = np.hstack([c + ds @ gx, ds @ gc]) if nc else c + ds @ gx
    d_cl = d + ds @ gr
    return a_cl, b_cl, c_cl, d_cl


def state_feedback(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray,
                   k: np.ndarray, inputs: Sequence[int]) -> Arrays:
    """Close ``u[inputs] = -K x + r``: ``A_cl = A - B_s K``, ``C_cl = C - D_s K``.

    ``K`` is ``len(inputs) × n``; ``B_s``/``D_s`` are the columns of ``B``/``D`` for the driven
    inputs. ``B_cl = B`` and ``D_cl = D`` (the reference enters at every plant input).
    """
    n = a.shape[0]
    empty = np.zeros((0, 0))
    return _close(a, b, c, d, np.eye(n), np.zeros((n, b.shape[1])), inputs,
                  empty, np.zeros((0, n)), np.zeros((len(inputs), 0)), k, "K·0")


def output_feedback(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray,
                    k: np.ndarray, inputs: Sequence[int], outputs: Sequence[int]) -> Arrays:
    """Close ``u[inputs] = -K y[outputs] + r`` with feedthrough handled.

    With ``D_ss`` the block of ``D`` from driven inputs to measured outputs,
    ``A_cl = A - B_s (I + K D_ss)⁻¹ K C_m``.

    Raises
    ------
    InterconnectError
        When ``I + K D_ss`` is singular (condition number above :data:`ILL_POSED_COND`).
    """
    out = list(outputs)
    return _close(a, b, c, d, c[out, :], d[out, :], inputs, np.zeros((0, 0)),
                  np.zeros((0, len(out))), np.zeros((len(inputs), 0)), k, "K·D")


def dynamic_feedback(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray,
                     ac: np.ndarray, bc: np.ndarray, cc: np.ndarray, dc: np.ndarray,
                     inputs: Sequence[int], outputs: Sequence[int]) -> Arrays:
    """Close a dynamic controller in negative feedback: it reads ``-y[outputs]`` and drives
    ``u[inputs]``.

    With ``M = (I + Dc D)⁻¹`` (``D`` restricted to driven inputs and measured outputs)::

        A_cl = [[A - B M Dc C,        B M Cc        ],
                [-Bc (C - D M Dc C),  Ac - Bc D M Cc]]

    States are the plant's followed by the controller's.

    Raises
    ------
    InterconnectError
        When ``I + Dc D`` is singular.
    """
    out = list(outputs)
    return _close(a, b, c, d, c[out, :], d[out, :], inputs, ac, bc, cc, dc, "Dc·D")
