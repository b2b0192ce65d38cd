"""A loaded model's inputs: the numeric fields of its file, and the matrices they make.

Public API::

    ModelInputs.linear(doc, ctx) / ModelInputs.field(point, ctx)    # built by the loader
    ModelInputs.records() -> tuple[InputBlock, ...]
    ModelInputs.line_of(block, index) -> int | None
    ModelInputs.realise({block: array}) -> (A, E)
    loader.inputs_by_title(path, root=None, *, allow_python=False) -> {title: ModelInputs}

The loader attaches one to every model it builds (``Model.file_inputs``) and keeps only references
to what it read (the operating point's merged document and its load context): nothing is
computed until a baseline is written (:meth:`records`) or a regression is explained
(:meth:`realise`, :meth:`line_of`). :meth:`realise` forms the closed-loop ``A`` (and ``E``) again
with some blocks replaced, through the loader's own code (transfer functions realised, loops
closed, vector fields linearised at the same point), so a sensitivity computed from it is
that of the matrices the model is analysed with. A result that comes back from the cache or a
worker process has no inputs; :func:`eigengate.load.loader.inputs_by_title` reads its file again.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import Any, Callable

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from ..baseline.inputs import InputBlock

__all__ = ["ModelInputs"]

_SS = ("A", "B", "C", "D", "E")
_SECOND_ORDER = ("M", "D", "K", "F", "Cq", "Cv")


class ModelInputs:
    """The input blocks of one model (see the module text)."""

    def __init__(self, kind: str, ctx: Any, doc: Mapping[str, Any] | None = None,
                 point: Any = None, form: Callable[[Any, Any], tuple[Any, Any]] | None = None
                 ) -> None:
        self.kind, self._ctx, self._doc, self._point = kind, ctx, doc, point
        self._form = form  # (doc, ctx) -> (A, E): the loader's own closed-loop formation
        self._blocks: dict[str, tuple[tuple, Any, str | None]] | None = None

    @classmethod
    def linear(cls, doc: Mapping[str, Any], ctx: Any,
               form: Callable[[Any, Any], tuple[Any, Any]]) -> "ModelInputs":
        return cls("linear", ctx, doc=doc, form=form)

    @classmethod
    def field(cls, point: Any, ctx: Any) -> "ModelInputs":
        return cls("field", ctx, point=point)

    # ------------------------------------------------------------------ the blocks

    def _context(self) -> Any:
        return dataclasses.replace(self._ctx, refs=[])

    def blocks(self) -> dict[str, tuple[tuple, Any, str | None]]:
        """``{name: (path in the document, array, referenced file)}``, read once."""
        if self._blocks is not None:
            return self._blocks
        out: dict[str, tuple[tuple, Any, str | None]] = {}
        if self.kind == "field":
            vf = self._point.field
            for k in sorted(vf.parameters):
                out[f"vector_field.parameters.{k}"] = (("parameters", k),
                                                       float(vf.parameters[k]), None)
        else:
            ctx = self._context()
            doc = self._doc or {}
            systems = [("plant", doc.get("plant"))]
            fb = doc.get("feedback")
            if isinstance(fb, Mapping):
                for k in ("state_gain", "output_gain"):
                    if k in fb:
                        out.update(self._matrix(("feedback", k), fb[k], ctx))
                systems.append(("feedback.controller", fb.get("controller")))
            for where, block in systems:
                if isinstance(block, Mapping):
                    out.update(self._system(tuple(where.split(".")), block, ctx))
        self._blocks = out
        return out

    def _matrix(self, path: tuple, value: Any, ctx: Any) -> dict:
        from ..model.matrixfiles import is_reference
        from .context import _matrix

        name = ".".join(path)
        if value is None:
            return {}
        from ..model.core import as_matrix, is_sparse

        arr = _matrix(value, ctx, name)
        if not is_sparse(arr):
            arr = as_matrix(arr, ctx.source, ctx.prefix + name, line=ctx.line(name))
        file = ctx.refs[-1] if is_reference(value) and ctx.refs else None
        return {name: (path, arr, file)}

    def _system(self, path: tuple, block: Mapping[str, Any], ctx: Any) -> dict:
        import numpy as np

        out: dict = {}
        base = ".".join(path)
        for k in _SS:
            if k in block:
                out.update(self._matrix(path + (k,), block[k], ctx))
        so = block.get("second_order")
        if isinstance(so, Mapping):  # M q'' + D q' + K q = F u: its matrices are inputs too
            for k in _SECOND_ORDER:
                if k in so:
                    out.update(self._matrix(path + ("second_order", k), so[k], ctx))
        for k in ("num", "den"):
            value = block.get(k)
            if value is None:
                continue
            if isinstance(value, list) and any(isinstance(v, list) for v in value):
                for i, row in enumerate(value):
                    for j, c in enumerate(row if isinstance(row, list) else ()):
                        out[f"{base}.{k}[{i}][{j}]"] = (path + (k, i, j),
                                                        np.asarray(c, dtype=float), None)
            else:
                out[f"{base}.{k}"] = (path + (k,), np.atleast_1d(np.asarray(value, float)),
                                      None)
        return out

    def records(self) -> tuple[InputBlock, ...]:
        """The baseline records of the blocks, sorted by name."""
        return tuple(_record(name, arr, file) for name, (_, arr, file)
                     in sorted(self.blocks().items()))

    def line_of(self, block: str, index: int | None) -> int | None:
        """The line of ``block``'s entry at flat position ``index`` (its row's line for an
        inline matrix written one row a line), else of the block."""
        entry = self.blocks().get(block)
        if entry is None:
            return None
        path, arr, _ = entry
        dotted = ".".join(map(str, path))
        if self.kind == "field":
            dotted = "vector_field." + dotted
        lines = self._ctx.lines
        shape: tuple[int, ...] = tuple(getattr(arr, "shape", ()))
        if index is not None and len(shape) == 2 and shape[1]:
            row = lines.get(f"{dotted}.{index // shape[1]}")
            if row is not None:
                return row
        return self._ctx.line(dotted)

    # ------------------------------------------------------------------ realisation

    def realise(self, values: Mapping[str, Any]) -> tuple[Any, Any]:
        """``(A, E)`` of the model with the blocks in ``values`` replaced (arrays of their
        shapes); E is None for a standard model."""
        import numpy as np

        blocks = self.blocks()
        if self.kind == "field":
            from ..analysis.nonlinear import jacobians

            p = self._point
            params = dict(p.field.parameters)
            for name, v in values.items():
                params[blocks[name][0][1]] = float(np.asarray(v).reshape(()))
            a, _, _ = jacobians(dataclasses.replace(p.field, parameters=params), p.x, p.u)
            return a, None
        assert self._form is not None  # a linear model's inputs always carry it
        doc = _copy(self._doc)
        for name, (path, arr, file) in blocks.items():
            if name in values or file is not None:  # files read once, not once per call
                v = values.get(name, arr)
                _put(doc, path, v if getattr(v, "ndim", 2) == 2 or file is not None
                     else np.asarray(v).tolist())
        a, e = self._form(doc, self._context())
        return a, e


def _record(name: str, arr: Any, file: str | None) -> InputBlock:
    from ..baseline.inputs import InputBlock, block_of  # (only for a baseline's records)
    from ..model.core import is_sparse

    if is_sparse(arr):  # a digest of the sparse structure; never the values
        import hashlib

        h = hashlib.sha256()
        for part in (arr.data, arr.indices, arr.indptr):
            h.update(part.tobytes())
        return InputBlock(name, tuple(arr.shape), h.hexdigest()[:16], None, file)
    return block_of(name, arr, file)


def _copy(doc: Any) -> Any:
    if isinstance(doc, Mapping):
        return {k: _copy(v) for k, v in doc.items()}
    if isinstance(doc, list):
        return [_copy(v) for v in doc]
    return doc


def _put(doc: Any, path: tuple, value: Any) -> None:
    for k in path[:-1]:
        doc = doc[k]
    doc[path[-1]] = value

