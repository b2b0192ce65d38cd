"""What a baseline keeps of a model's inputs, and what changed since.

Public API::

    InputBlock(name, shape, digest, values=None, file=None)
    block_of(name, array, file=None) -> InputBlock
    InputChange(block, index, before, after, file)      # .input: "feedback.state_gain[0][1]"
    diff_inputs(before, after) -> tuple[InputChange, ...]
    InputSource                                         # protocol of Model.file_inputs
    MAX_RECORDED

An input block is one numeric field of the model file as the loader read it: a matrix
(``plant.A``, ``feedback.state_gain``, ``feedback.controller.B``), a transfer function's
coefficients (``plant.num``, ``plant.den[0][1]``) or a vector field's parameter
(``vector_field.parameters.k``); a matrix read from a referenced file is the block of the field
that references it, with the file's path. Every block keeps a digest of its shape and values
(written at :data:`~eigengate.baseline.fileformat.DIGITS` significant digits, as the baseline
writes numbers), and, when it has at most :data:`MAX_RECORDED` numbers, the values themselves,
so a later run can say which entries changed, from what to what. A larger block keeps its
digest only: a change is reported for the block as a whole.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import Any, Iterable, Mapping, Protocol, Sequence

__all__ = ["InputBlock", "InputChange", "InputSource", "block_of", "diff_inputs",
           "MAX_RECORDED", "entry_label"]

#: Blocks with at most this many numbers keep their values in the baseline (a 20×20 matrix);
#: larger ones keep a digest only.
MAX_RECORDED = 400
DIGITS = 12  # fileformat.DIGITS (not imported: fileformat imports this module)


@dataclass(frozen=True)
class InputBlock:
    """One numeric input of a model as accepted."""

    name: str
    shape: tuple[int, ...]
    digest: str
    values: tuple[float, ...] | None = None  # row-major; None above MAX_RECORDED numbers
    file: str | None = None  # the referenced file the values were read from

    @property
    def size(self) -> int:
        n = 1
        for d in self.shape:
            n *= d
        return n


def _text(x: float) -> str:
    t = format(float(x), f".{DIGITS}g")
    return "0" if t == "-0" else t


def block_of(name: str, array: Any, file: str | None = None) -> InputBlock:
    """The record of ``array`` (anything numpy turns into a float array; a scalar is shape
    ``()``), rounded as the baseline file writes numbers."""
    import numpy as np

    arr = np.asarray(array, dtype=float)
    flat = [float(_text(x)) + 0.0 for x in arr.ravel().tolist()]
    shape = tuple(int(d) for d in arr.shape)
    h = hashlib.sha256(("x".join(map(str, shape)) + ":" + ",".join(map(_text, flat)))
                       .encode("ascii"))
    return InputBlock(name=name, shape=shape, digest=h.hexdigest()[:16],
                      values=tuple(flat) if len(flat) <= MAX_RECORDED else None, file=file)


def entry_label(name: str, shape: Sequence[int], index: int) -> str:
    """``plant.A[1][0]`` for flat position ``index`` of a block of ``shape``; the bare name for
    a scalar."""
    if not shape:
        return name
    out, rest = [], index
    for d in reversed(shape):
        out.append(rest % d)
        rest //= d
    return name + "".join(f"[{i}]" for i in reversed(out))


@dataclass(frozen=True)
class InputChange:
    """One changed input: an entry of a block (``index`` its flat position), or the whole
    block (``index`` None: shapes differ, values not recorded, block added or removed)."""

    block: str
    index: int | None
    before: float | None
    after: float | None
    shape: tuple[int, ...] = ()
    file: str | None = None
    why: str = ""  # for a whole-block change: what is known

    @property
    def input(self) -> str:
        return self.block if self.index is None else entry_label(self.block, self.shape,
                                                                 self.index)


def diff_inputs(before: Iterable[InputBlock], after: Iterable[InputBlock]
                ) -> tuple[InputChange, ...]:
    """Every input that differs between two records, by block name and then entry."""
    b = {x.name: x for x in before}
    a = {x.name: x for x in after}
    out: list[InputChange] = []
    for name in sorted(set(b) | set(a)):
        x, y = b.get(name), a.get(name)
        if x is not None and y is not None and x.digest == y.digest:
            continue
        file = (y or x).file if (y or x) is not None else None  # type: ignore[union-attr]
        if x is None or y is None:
            out.append(InputChange(name, None, None, None, file=file, why="added" if x is None
                                   else "removed"))
            continue
        if x.shape != y.shape:
            out.append(InputChange(name, None, None, None, file=file, why=(
                f"shape {_shape(x.shape)} → {_shape(y.shape)}")))
            continue
        if x.values is None or y.values is None:
            out.append(InputChange(name, None, None, None, shape=y.shape, file=file, why=(
                f"values not recorded ({x.size} numbers, above the {MAX_RECORDED} kept)")))
            continue
        changed = [i for i, (p, q) in enumerate(zip(x.values, y.values)) if p != q]
        if not changed:  # the digests differ by rounding only
            continue
        out += [InputChange(name, i, x.values[i], y.values[i], shape=y.shape, file=file)
                for i in changed]
    return tuple(out)


def _shape(shape: tuple[int, ...]) -> str:
    return "×".join(map(str, shape)) or "scalar"


class InputSource(Protocol):
    """What a model's ``file_inputs`` provides (:class:`eigengate.load.inputs.ModelInputs`)."""

    def records(self) -> tuple[InputBlock, ...]: ...

    def blocks(self) -> Mapping[str, tuple[tuple, Any, str | None]]: ...

    def line_of(self, block: str, index: int | None) -> int | None: ...

    def realise(self, values: Mapping[str, Any]) -> tuple[Any, Any]: ...
