"""Cause attribution: which inputs changed since a model was accepted, and how much each moved
the mode that regressed.

Public API::

    attribute(entry, source, before, after) -> tuple[Cause, ...]
    MAX_RANKED, AGREEMENT

``entry`` is the baseline entry (its :class:`~eigengate.baseline.inputs.InputBlock` records),
``source`` the current model's inputs (:class:`~eigengate.baseline.inputs.InputSource`, None when
they could not be read), ``before`` and ``after`` the regressed mode as accepted and as it is.
The changed inputs come from :func:`~eigengate.baseline.inputs.diff_inputs`. When every change is
an entry whose old value the baseline kept, the accepted model's matrices are formed again
(the changed blocks set back to their old values), the mode's eigenvalue and vectors are taken
there, and each changed entry gets the first-order shift of its full change
(:mod:`eigengate.analysis.sensitivity`; the derivative of the realisation by central
differences). When a block changed as a whole (values not kept, a new shape), the entries that
can be ranked are ranked at the current model instead, and the note says so. The sum of the
first-order shifts is checked against the actual move: beyond :data:`AGREEMENT` (relative) the
note says the change is too large for a first-order account, and the ranking is a guide only.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

from ..rules.findings import Cause
from .inputs import InputChange, diff_inputs

__all__ = ["attribute", "MAX_RANKED", "AGREEMENT", "NOT_RECORDED"]

#: At most this many changed numbers are ranked (each costs two realisations of the model);
#: further ones are listed without a share.
MAX_RANKED = 48
#: The first-order total agrees with the actual move when within this fraction of it.
AGREEMENT = 0.1
#: The note of an entry accepted before inputs were recorded.
NOT_RECORDED = "inputs not recorded in the baseline; accept again to record them"
#: Changes listed in full; further ones are counted.
MAX_LISTED = 8


def _g(x: float | None) -> str:
    return "?" if x is None else f"{x:.6g}"


def _z(z: complex) -> str:
    if abs(z.imag) <= 1e-12 * max(1.0, abs(z.real)):
        return f"{z.real:+.3g}"
    return f"{z.real:+.3g}{z.imag:+.3g}j"


def _ev(z: complex, pair: bool) -> str:
    return f"{z.real:.3g}±{abs(z.imag):.3g}j" if pair else f"{z.real:.3g}"


def _change_text(c: InputChange) -> str:
    where = f" (file {c.file})" if c.file else ""
    if c.index is None:
        return f"{c.input}{where} changed: {c.why}"
    return f"{c.input}{where} {_g(c.before)} → {_g(c.after)}"


def attribute(entry: Any, source: Any, before: Any, after: Any) -> tuple[Cause, ...]:
    """The causes of a regressed mode, the largest first (see the module text)."""
    if not entry.inputs:
        return (Cause(NOT_RECORDED),)
    if source is None:
        return (Cause("the model's inputs could not be read again to compare them"),)
    changes = diff_inputs(entry.inputs, source.records())
    if not changes:
        return (Cause("no recorded input changed: the move comes from something the baseline "
                      "does not record (a vector field's code, a changed eigengate)"),)

    def line(c: InputChange) -> int | None:
        return source.line_of(c.block, c.index)

    ranked: list[tuple[InputChange, complex]] = []
    notes: list[str] = []
    try:
        ranked, notes = _rank(changes, source, before, after)
    except Exception as exc:  # noqa: BLE001 - an explanation never breaks the comparison
        notes = [f"the changes could not be ranked ({type(exc).__name__}: {exc})"]
    causes: list[Cause] = []
    shown = {id(c) for c, _ in ranked}
    if ranked:
        from ..analysis.sensitivity import shares

        parts = shares([s for _, s in ranked])
        order = sorted(range(len(ranked)), key=lambda i: (-round(abs(ranked[i][1]), 12),
                                                         ranked[i][0].input))
        for k, i in enumerate(order):
            c, s = ranked[i]
            share = parts[i]
            if k == 0:
                text = (f"mode {_ev(before.eigenvalue, before.pair)} → "
                        f"{_ev(after.eigenvalue, after.pair)}: {100 * share:.0f} % of the "
                        f"first-order shift comes from {_change_text(c)}")
            else:
                text = f"{100 * share:.0f} % from {_change_text(c)}"
            causes.append(Cause(text, c.input, c.before, c.after, share, s, line(c), c.file))
    rest = [c for c in changes if id(c) not in shown]
    for c in rest[:MAX_LISTED]:
        causes.append(Cause(("changed, not ranked: " if ranked else "") + _change_text(c),
                            c.input, c.before, c.after, None, None, line(c), c.file))
    if len(rest) > MAX_LISTED:
        causes.append(Cause(f"and {len(rest) - MAX_LISTED} more changed numbers"))
    causes += [Cause(n) for n in notes]
    return tuple(causes)


def _rank(changes: Sequence[InputChange], source: Any, before: Any, after: Any
          ) -> tuple[list[tuple[InputChange, complex]], list[str]]:
    """First-order shifts of the rankable changes, and the notes on them."""
    import numpy as np

    from ..analysis.sensitivity import directional, eigenpair

    if before.multiplicity > 1 or before.defective or after.multiplicity > 1 or after.defective:
        return [], ["the mode is repeated or defective: first-order shares do not apply"]
    entries = [c for c in changes if c.index is not None][:MAX_RANKED]
    if not entries:
        return [], []
    blocks = source.blocks()
    now = {name: np.array(arr, dtype=float) for name, (_, arr, _) in blocks.items()
           if name in {c.block for c in entries}}
    whole = any(c.index is None for c in changes)
    base = {k: v.copy() for k, v in now.items()}
    notes = []
    if not whole:  # back to the accepted model: every change is an entry with its old value
        for c in entries:
            base[c.block].reshape(-1)[c.index] = c.before
        target = complex(before.eigenvalue)
    else:
        target = complex(after.eigenvalue)
        notes.append("ranked at the current model: a block changed as a whole, so the "
                     "accepted model cannot be formed again")
    a0, e0 = source.realise(base)
    pair = eigenpair(a0, e0, near=target)
    sign = -1.0 if whole else 1.0  # at the current model the entries move back
    shifts = []
    for c in entries:
        assert c.before is not None and c.after is not None  # an entry change has both
        step = (c.after - c.before) * sign

        def moved(t: float, c: InputChange = c, step: float = step) -> tuple[Any, Any]:
            vals = dict(base)
            arr = base[c.block].copy()
            arr.reshape(-1)[c.index] += t * step
            vals[c.block] = arr
            return source.realise(vals)

        da, de = directional(moved)
        shifts.append((c, sign * pair.shift(da, de)))
    predicted = sum(s for _, s in shifts)
    actual = complex(after.eigenvalue) - complex(before.eigenvalue)
    gap = abs(predicted - actual)
    scale = max(abs(actual), 1e-12 * max(1.0, abs(complex(after.eigenvalue))))
    if len(entries) < len([c for c in changes if c.index is not None]):
        notes.append(f"only the first {len(entries)} changed numbers were ranked")
    if math.isfinite(gap) and gap <= AGREEMENT * scale:
        notes.append(f"first-order total {_z(predicted)} vs actual move {_z(actual)} "
                     f"({100 * gap / scale:.0f} % apart)")
    else:
        notes.append(f"first-order total {_z(predicted)} differs from the actual move "
                     f"{_z(actual)} by {100 * gap / scale:.0f} %: the change is too large "
                     "for a first-order account, so the shares are a guide only")
    return shifts, notes
