"""Names of modes the way engineers talk about them: from the states that take part most.

Public API::

    dominant_states(top_states) -> tuple[str, ...]
    mode_name(top_states) -> str          # "sway mode: sway_rate, sway_angle"

``top_states`` are ``(state, participation factor)`` pairs (``Mode.top_states``, or a baseline
mode's ``states``). The dominant states are those whose factor, rounded to :data:`DIGITS`
decimals, is at least :data:`SHARE` of the largest, ordered by rounded factor (largest first)
and then by name, so that round-off between runs (or between a fresh result and a cached or
baseline one, which keep 4 significant digits) cannot reorder or swap them. The stem of the
name is the longest run of name words (split at ``_``, ``.``, ``-``, blanks and lower→upper
case changes) that every dominant state starts with; without one, the two leading states joined by a
hyphen (``angle-rate mode: angle, rate``); a single dominant state names it alone.
"""

from __future__ import annotations

import re
from typing import Iterable

__all__ = ["dominant_states", "mode_name", "DIGITS", "SHARE"]

#: Decimals the participation factors are compared at (they are fractions of 1).
DIGITS = 2
#: A state is dominant when its factor is at least this share of the largest.
SHARE = 0.5
#: At most this many states name a mode.
MOST = 3

_WORD = re.compile(r"[A-Z]?[a-z0-9]+|[A-Z]+(?![a-z])|[^\W_]+")


def dominant_states(top_states: Iterable[tuple[str, float]]) -> tuple[str, ...]:
    """The states that name a mode, in their deterministic order (see the module text)."""
    ranked = sorted(((round(float(p), DIGITS), str(n)) for n, p in top_states),
                    key=lambda t: (-t[0], t[1]))
    if not ranked:
        return ()
    top = ranked[0][0]
    return tuple(n for p, n in ranked if p >= SHARE * top)[:MOST]


def _words(name: str) -> list[str]:
    return [w.lower() for w in _WORD.findall(name.replace(".", " ").replace("-", " "))]


def mode_name(top_states: Iterable[tuple[str, float]]) -> str:
    """``"<stem> mode: <state>, <state>"``; empty when no state is known."""
    names = dominant_states(top_states)
    if not names:
        return ""
    words = [_words(n) for n in names]
    stem: list[str] = []
    for group in zip(*words):
        if len(set(group)) != 1:
            break
        stem.append(group[0])
    if len(names) == 1:
        head = names[0]
    elif not stem:  # no common word: the two leading states, as "angle-rate"
        head = "-".join(names[:2])
    else:
        head = " ".join(stem)
    return f"{head} mode: {', '.join(names)}"
