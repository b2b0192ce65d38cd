"""Match the modes of a model to the modes it had before (a baseline entry or a git revision).

Public API::

    match_modes(before, after, *, gate=DEFAULT_GATE, floor_fraction=FLOOR_FRACTION) -> list[Match]
    scaled_distance(s1, s2, floor) -> float

Both sides are sequences of mode-like objects with ``s`` (the s-plane eigenvalue, also for
discrete models, so the distance means the same thing everywhere), ``pair`` and
``multiplicity``: :class:`~eigengate.analysis.modes.Mode` and :class:`~eigengate.baseline.store.BaselineMode`
both qualify.

How it matches:

* A conjugate pair is one unit, represented by its upper member, so the two halves of a pair
  always move together. A mode of multiplicity k is k units (a double eigenvalue that splits in
  two is matched to both halves).
* The cost of matching two units is the scaled distance
  ``|s1 - s2| / max(|s1|, |s2|, floor)`` with ``floor = floor_fraction · max|s|`` over both
  spectra: relative for fast modes, absolute (in units of the floor) for slow ones, so a slow
  mode crossing the imaginary axis still counts as the same mode moving.
* The assignment minimises the total cost over all units at once
  (``scipy.optimize.linear_sum_assignment``), with the *gate*: leaving a unit unmatched costs
  ``gate / 2``, so two units are matched only when their distance is at most ``gate``; otherwise
  one mode disappeared and another appeared. Units left over when the model order changed are
  reported the same way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

__all__ = ["Match", "match_modes", "scaled_distance", "DEFAULT_GATE", "FLOOR_FRACTION"]

#: Largest scaled distance at which two modes are still the same mode moved: 1.5 keeps a pair
#: and a real mode of the same ωn together (their distance is at most √2), the usual way a
#: retune turns an oscillation into two real modes, while a fast real mode jumping to its
#: mirror image across the imaginary axis (distance 2) is not taken for the same mode.
DEFAULT_GATE = 1.5
#: The distance floor as a fraction of the largest |s| of both spectra.
FLOOR_FRACTION = 0.05


@dataclass(frozen=True, eq=False)
class Match:
    """One matched mode (both sides), a disappeared one (``after`` None) or an appeared one
    (``before`` None). ``count`` is how many units (eigenvalues, or pairs) the match stands
    for; indices are 0-based positions in the sequences given."""

    before: Any | None
    after: Any | None
    before_index: int | None
    after_index: int | None
    distance: float
    count: int = 1

    @property
    def kind(self) -> str:
        """``"matched"``, ``"appeared"`` or ``"disappeared"``."""
        if self.before is None:
            return "appeared"
        return "disappeared" if self.after is None else "matched"


def scaled_distance(s1: complex, s2: complex, floor: float) -> float:
    """``|s1 - s2| / max(|s1|, |s2|, floor)``: 0 for equal eigenvalues (infinite ones too, the
    deadbeat modes of discrete models), infinite between a finite and an infinite one."""
    if s1 == s2:
        return 0.0
    if not (math.isfinite(abs(s1)) and math.isfinite(abs(s2))):
        return math.inf
    return abs(s1 - s2) / max(abs(s1), abs(s2), floor)


def _distances(before, after, floor: float):
    """:func:`scaled_distance` of every pair, as a matrix (before × after), to the last bit:
    magnitudes through ``hypot``, as Python's ``abs`` of a complex number takes them (numpy's
    complex ``abs`` can differ in the last bit, which decides exact ties)."""
    import numpy as np

    def size(z):
        return np.hypot(z.real, z.imag)

    b, a = before[:, None], after[None, :]
    size_b, size_a = size(b), size(a)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        dist = size(b - a) / np.maximum(np.maximum(size_b, size_a), floor)
    dist = np.where(np.isfinite(size_b) & np.isfinite(size_a), dist, np.inf)
    return np.where(b == a, 0.0, dist)


def _units(modes: Sequence[Any]) -> list[tuple[int, complex]]:
    out: list[tuple[int, complex]] = []
    for i, m in enumerate(modes):
        s = complex(m.s)
        s = s.conjugate() if s.imag < 0 else s  # a pair is represented by its upper member
        out.extend([(i, s)] * max(1, int(m.multiplicity)))
    return out


def match_modes(before: Sequence[Any], after: Sequence[Any], *, gate: float = DEFAULT_GATE,
                floor_fraction: float = FLOOR_FRACTION) -> list[Match]:
    """Pair the modes of ``before`` with those of ``after``; see the module docstring.

    Parameters
    ----------
    before, after
        Mode-like objects (``s``, ``pair``, ``multiplicity``).
    gate
        Largest scaled distance of a match.
    floor_fraction
        The distance floor relative to the largest finite |s| of both sides.

    Returns
    -------
    list of Match
        Matches by after-mode position, then disappeared modes, then appeared ones; a mode
        whose units went different ways appears in several entries (``count`` each).
    """
    import numpy as np
    from scipy.optimize import linear_sum_assignment

    bu, au = _units(before), _units(after)
    n, m = len(bu), len(au)
    sizes = [abs(s) for _, s in bu + au if math.isfinite(abs(s))]
    floor = max(floor_fraction * max(sizes, default=0.0), 1e-300)
    pairs: dict[tuple[int, int], list[float]] = {}
    gone: dict[int, int] = {}
    new: dict[int, int] = {}
    if n and m:
        dist = _distances(np.array([s for _, s in bu]), np.array([s for _, s in au]), floor)
        # Augmented square problem: column m+i leaves before-unit i unmatched, row n+j leaves
        # after-unit j unmatched (gate/2 each), and the dummy-dummy block costs nothing.
        cost = np.full((n + m, m + n), np.inf)
        cost[:n, :m] = np.where(dist <= gate, dist, np.inf)
        cost[np.arange(n), m + np.arange(n)] = gate / 2.0
        cost[n + np.arange(m), np.arange(m)] = gate / 2.0
        cost[n:, m:] = 0.0
        rows, cols = linear_sum_assignment(cost)
        for r, c in zip(rows.tolist(), cols.tolist()):
            if r < n and c < m:
                pairs.setdefault((bu[r][0], au[c][0]), []).append(float(dist[r, c]))
            elif r < n:
                gone[bu[r][0]] = gone.get(bu[r][0], 0) + 1
            elif c < m:
                new[au[c][0]] = new.get(au[c][0], 0) + 1
    else:
        for i, _ in bu:
            gone[i] = gone.get(i, 0) + 1
        for j, _ in au:
            new[j] = new.get(j, 0) + 1
    out = [Match(before[i], after[j], i, j, max(d), len(d))
           for (i, j), d in sorted(pairs.items(), key=lambda kv: (kv[0][1], kv[0][0]))]
    out += [Match(before[i], None, i, None, math.inf, k) for i, k in sorted(gone.items())]
    out += [Match(None, after[j], None, j, math.inf, k) for j, k in sorted(new.items())]
    return out
