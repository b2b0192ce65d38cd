"""The order of the modes of a spectrum: least stable first, on rounded keys.

Modes are sorted by the real part of s (largest first), then the imaginary part's size, then
the state that participates most, each figure rounded to 10 significant digits first, so that
round-off between runs (or between a fresh and a cached result) cannot reorder ties.
:func:`mode_order` gives that order from the real parts alone when no two of them can round
to the same key (the usual spectrum), without rounding any.
"""

from __future__ import annotations

import math
from typing import Callable

__all__ = ["sort_key", "mode_order"]


def _round_sig(x: float, digits: int = 10) -> float:
    if x == 0.0 or not math.isfinite(x):
        return x
    return round(x, digits - 1 - int(math.floor(math.log10(abs(x)))))


#: Real parts further apart than this relative gap (plus a tiny absolute one) cannot round
#: to the same 10 significant digits: each rounding moves a value by at most 5e-10 of it.
_APART = 2e-9
_APART_TINY = 1e-300


def mode_order(real: list[float], key: "Callable[[int], tuple]") -> list[int]:
    """``sorted(range(n), key=key)`` for the :func:`sort_key` ``key(j)`` of the modes whose
    ``s`` have the real parts ``real``: from the real parts alone when, largest first, each
    is further from the next than rounding to 10 digits can close (their rounded keys then
    differ, in the same order, and decide alone); by the keys otherwise."""
    order = sorted(range(len(real)), key=real.__getitem__, reverse=True)
    for a, b in zip(order, order[1:]):
        x, y = real[a], real[b]
        if not x - y > _APART * (abs(x) + abs(y)) + _APART_TINY:  # a nan fails too
            return sorted(range(len(real)), key=key)
    return order


def sort_key(row: dict, top: int | None = None) -> tuple:
    """Least stable (largest Re s) first, on rounded keys so round-off cannot reorder ties;
    ``top``: the index of the largest participation factor, when known."""
    if top is None:
        import numpy as np

        top = int(np.argmax(row["participation"]))
    return (-_round_sig(row["s"].real), _round_sig(abs(row["s"].imag)), top)
