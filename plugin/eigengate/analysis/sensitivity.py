"""First-order eigenvalue sensitivity: how much a change of the matrices moves one eigenvalue.

Public API::

    eigenpair(A, E=None, near=0j) -> EigenPair        # λ nearest ``near``, right/left vectors
    EigenPair.shift(dA, dE=None) -> complex           # δλ ≈ wᴴ(δA − λ δE)v / (wᴴ E v)
    directional(realise, h=STEP) -> (dA, dE)          # derivative of a realisation, by differences
    shares(shifts) -> list[float]                     # each shift's part of their sum

For a simple eigenvalue λ of the pencil ``(A, E)`` with right vector ``v`` (``A v = λ E v``) and
left vector ``w`` (``wᴴ A = λ wᴴ E``), a perturbation ``(δA, δE)`` moves it by
``δλ = wᴴ(δA − λ δE)v / (wᴴ E v) + O(‖δ‖²)`` (E = I for a standard model: ``wᴴ δA v / (wᴴ v)``);
Wilkinson, The Algebraic Eigenvalue Problem (1965) ch. 2, Golub & Van Loan, Matrix
Computations ch. 7 (the condition of a simple eigenvalue). The formula is linear in the
perturbation, so the shifts of several changes add up, and each change's *share* is the
projection of its shift on their sum (:func:`shares`; the shares add up to 1, one that moved
the eigenvalue the other way is negative). How a matrix depends on an input that enters it
non-linearly (a transfer function's coefficients through its realisation, a vector field's
parameter through its Jacobian) is found by central differences of the realisation
(:func:`directional`), which are exact, up to rounding, for inputs that enter linearly (plant
entries; a gain K of a loop closed as ``A − B K C``, whose change is ``δA = −B δK C``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable, Sequence

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["EigenPair", "eigenpair", "directional", "shares", "STEP"]

#: Relative step of the central differences of a realisation (error O(STEP²) for smooth
#: dependence; large enough that a Jacobian computed by differences itself stays clear of
#: its own noise).
STEP = 1e-4


@dataclass(frozen=True, eq=False)
class EigenPair:
    """A simple eigenvalue with its right and left vectors (``denom = wᴴ E v``)."""

    value: complex
    right: "np.ndarray"
    left: "np.ndarray"
    denom: complex
    E: "np.ndarray | None" = None

    @property
    def condition(self) -> float:
        """``‖w‖‖v‖ / |wᴴ E v|``: large when the first-order estimate is fragile."""
        import numpy as np

        d = abs(self.denom)
        return float(np.linalg.norm(self.left) * np.linalg.norm(self.right) / d) if d \
            else float("inf")

    def shift(self, dA: Any, dE: Any = None) -> complex:
        """The first-order move of the eigenvalue under ``(δA, δE)``."""
        import numpy as np

        w, v = self.left, self.right
        num = np.vdot(w, np.asarray(dA) @ v)
        if dE is not None:
            num -= self.value * np.vdot(w, np.asarray(dE) @ v)
        return complex(num / self.denom) if self.denom else complex("nan")


def eigenpair(A: Any, E: Any = None, near: complex = 0j) -> EigenPair:
    """The finite eigenvalue of ``(A, E)`` nearest ``near``, with its vectors (dense; ties by
    the larger imaginary part, so a pair gives its upper member)."""
    import numpy as np
    import scipy.linalg as sla

    a = np.asarray(A.toarray() if hasattr(A, "toarray") else A, dtype=float)
    e = None if E is None else np.asarray(E.toarray() if hasattr(E, "toarray") else E, float)
    vals, left, right = sla.eig(a, e, left=True, right=True)
    finite = np.isfinite(vals)
    if not finite.any():
        raise ValueError("the pencil has no finite eigenvalue")
    dist = np.where(finite, np.abs(np.where(finite, vals, 0) - near), np.inf)
    order = np.lexsort((-np.where(finite, vals, 0).imag, np.round(dist, 12)))
    k = int(order[0])
    v, w = right[:, k], left[:, k]
    denom = complex(np.vdot(w, (v if e is None else e @ v)))
    return EigenPair(complex(vals[k]), v, w, denom, e)


def directional(realise: Callable[[float], tuple[Any, Any]], h: float = STEP
                ) -> tuple["np.ndarray", "np.ndarray | None"]:
    """``d/dt (A(t), E(t))`` at ``t = 0`` by central differences with step ``h``, where
    ``realise(t)`` forms the matrices with an input moved ``t`` of the way from its value to
    its new one: the derivative is then the first-order change ``δA`` for the whole move."""
    import numpy as np

    (ap, ep), (am, em) = realise(h), realise(-h)
    da = (np.asarray(_dense(ap)) - np.asarray(_dense(am))) / (2 * h)
    de = None if ep is None or em is None else \
        (np.asarray(_dense(ep)) - np.asarray(_dense(em))) / (2 * h)
    return da, de


def _dense(m: Any) -> Any:
    return m.toarray() if hasattr(m, "toarray") else m


def shares(shifts: Sequence[complex]) -> list[float]:
    """Each shift's projection on their sum, as a fraction of it (they add up to 1); all
    zeros when the sum is zero."""
    total = complex(sum(shifts))
    size = abs(total) ** 2
    if not size:
        return [0.0] * len(shifts)
    return [float((s * total.conjugate()).real / size) for s in shifts]
