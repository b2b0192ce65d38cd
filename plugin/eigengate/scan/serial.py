"""Exact round trip of check results, for the result cache and the process pool: reading
back what :mod:`eigengate.scan.encode` wrote (its docstring has the layout).

A file's results are JSON-safe *data* (its summary) plus a list of *blobs*: the large items
(matrices, participation factors, mode rows, the line table) and, last, the rest of the data
as one JSON text, so that reading a cache pack decodes only what a report reads. Matrices
are float64 bytes, so a result read back renders to the same bytes as the one computed.
Blobs are read lazily: a warm re-check that only prints a summary never touches a matrix or
builds a Mode object. Nothing here executes code from the data: unknown kinds are errors,
which the cache treats as a corrupt entry.
"""

from __future__ import annotations

import functools
import json
from typing import TYPE_CHECKING, Any, cast

from .engine import ModelResult
from ..analysis.equilibrium import Equilibrium
from ..errors import ModelError
from ..analysis.naming import mode_name
from ..rules.findings import Finding, ModeRow
from ..rules.known_modes import KnownMode
from .cached_modes import CachedSpectrum, blob_shape
from .encode import ROW_COLUMNS, VERDICT_OFFENDING, Blobs, results_to_data
from .lazy import LazyField
from .pack import RawBlobs
from .records import REQUIREMENT_NAMES, pictures_from, requirement_classes, unrecord
from ..model.core import Model
from ..rules.catalogue import Verdict
from ..rules.waivers import Waiver

if TYPE_CHECKING:  # pragma: no cover - a warm re-check that builds no mode imports neither
    from ..analysis.modes import Spectrum

__all__ = ["results_to_data", "results_from_data", "CachedSpectrum", "CachedModel", "Blobs",
           "FORMAT", "fill_model", "result_parts", "findings_from", "summary_fields",
           "rest_of"]

from .cache_format import FORMAT  # noqa: E402 (re-exported)


# ------------------------------------------------------------------ model and results

_MATRICES = ("A", "B", "C", "D", "E")


def _array(ref: tuple):
    """A stored matrix: one float64 blob, or a sparse one as its CSR arrays."""
    blobs, index = ref
    if isinstance(index, list):  # ["csr", rows, cols, data, indices, indptr]
        import numpy as np
        import scipy.sparse as sparse

        _, rows, cols, data, indices, indptr = index
        return sparse.csr_matrix((blobs.array(data)[0], blobs.array(indices)[0].astype(np.int64),
                                  blobs.array(indptr)[0].astype(np.int64)), shape=(rows, cols))
    return blobs.array(index)


def _lines(ref: tuple) -> dict:
    """The line table: field paths joined by NUL and a 1×k table of their line numbers
    (int64), or (a path holding a NUL) a JSON text."""
    blobs, index = ref
    if type(index) is int:
        table = blobs.json(index)
        if type(table) is not dict:
            raise ValueError("line table is not a table")
        return table
    keys, values = index
    names = blobs.text(keys)
    numbers = blobs.ints(values)
    paths = names.split("\0") if numbers else []
    if len(paths) != len(numbers):
        raise ValueError("line table does not fit its line numbers")
    return dict(zip(paths, numbers))


def _requirements_of(records: list) -> tuple:
    classes = requirement_classes()
    return tuple(unrecord(classes[k], v) for k, v in records)


def _known_modes_of(records: list) -> tuple:
    return tuple(unrecord(KnownMode, k) for k in records)


#: How a model field kept in ``_stored`` is built on first read.
_LOADERS = {**{k: _array for k in _MATRICES}, "lines": _lines,
            "requirements": _requirements_of, "known_modes": _known_modes_of}


class CachedModel(Model):
    """A :class:`~eigengate.model.core.Model` rebuilt from the cache: its matrices and its line
    table are read from the blobs when first used (then kept), its requirements and known
    modes built from their records when first used, the other fields at once (or, for a
    model built from its summary, when one of them is first read). Reports, which print
    verdicts and findings, read none of the matrices."""

    LOADERS = _LOADERS

    @property
    def n_states(self) -> int:  # fill_model checked that A is n × n for n states
        return len(self.states)

    def line_of(self, field_path: str) -> int | None:
        # A top-level field's line is in the summary's lines (those without a "."), so the
        # line table is not read for it (pytest asks it of every item).
        top = self.__dict__.get("_top_lines")
        if top is not None and "." not in field_path:
            return top.get(field_path)
        return Model.line_of(self, field_path)


for _f in Model.__dataclass_fields__:
    setattr(CachedModel, _f, LazyField(_f))
del _f


def _field_from(d: dict | None):
    if d is None:
        return None
    from ..analysis.nonlinear import EquilibriumSearch, FoundEquilibrium

    shared = {}
    if d["search"] is not None:
        found = tuple(FoundEquilibrium(tuple(x), residual, unrecord(Equilibrium, eq),
                                       tuple(complex(float(a), float(b)) for a, b in ev))
                      for x, residual, eq, ev in d["search"]["equilibria"])
        starts, converged, failed, outside = d["search"]["counts"]
        shared["search"] = EquilibriumSearch(found, starts, converged, failed, outside,
                                             tuple(d["search"]["errors"]))
    box = d["box"]
    return _cached_field_class()(
        field=None, x=tuple(d["x"]), u=tuple(d["u"]), carrier=d["carrier"],
        carrier_label=d["carrier_label"],
        box=None if box is None else (tuple(box[0]), tuple(box[1]), tuple(box[2]), box[3],
                                      box[4]),
        shared=shared)


@functools.lru_cache(maxsize=None)
def _cached_field_class():
    from ..analysis.nonlinear import FieldPoint  # imported when a cached model has a vector field

    class CachedFieldPoint(FieldPoint):
        """A :class:`~eigengate.analysis.nonlinear.FieldPoint` from the cache: no vector field, only
        the search it had run (a cached result is never analysed again)."""

        def search(self):
            return self.shared.get("search")

    return CachedFieldPoint


def summary_fields(s: list) -> dict[str, Any]:
    """The model fields that summary record ``s`` holds (its states only when it has
    findings), checked; raises what a damaged record raises."""
    (source, waivers, grid, _, _, states, name, label, period, _, top_lines) = s
    if type(source) is not str or type(waivers) is not list or type(top_lines) is not dict:
        raise ValueError("cached summary is not a model record")
    out = dict(source=source, waivers=tuple([unrecord(Waiver, w) for w in waivers]),
               grid=None if grid is None else tuple([(str(a), float(v)) for a, v in grid]),
               name=name, label=label, sample_period=period, _top_lines=top_lines)
    if states is not None:
        out["states"] = tuple(states)
    return out


def fill_model(m: CachedModel, d: list, blobs, shapes: list) -> None:
    """Set the fields of cached model ``m`` (its summary's fields already set) from its
    record ``d`` in the entry's rest, checked; ValueError, KeyError, TypeError or
    IndexError when the record is damaged (nothing set then)."""
    (a, b, c, dd, e, lines, structure, states, inputs, outputs, on_uncertain, require,
     disabled, requirements, known_modes, allowed_drift, nonlinear, point_id) = d
    classes = REQUIREMENT_NAMES  # the classes themselves are imported when first read
    if not all(type(r) is list and len(r) == 2 and r[0] in classes for r in requirements) \
            or type(known_modes) is not list:
        raise ValueError("model requirements are not records of known classes")
    fields: dict[str, Any] = {}
    stored = {"requirements": requirements, "known_modes": known_modes}
    for k, index in zip(_MATRICES, (a, b, c, dd, e)):
        if index is None and k != "A":
            fields[k] = None
            continue
        # read later: check now that it is there, and of its kind
        if isinstance(index, list):
            if len(index) != 6 or index[0] != "csr" or type(index[1]) is not int \
                    or type(index[2]) is not int or any(
                        blob_shape(shapes, i) is None for i in index[3:]):
                raise ValueError(f"model field {k} is not a sparse matrix record")
        elif blob_shape(shapes, index) is None:
            raise ValueError(f"model field {k} is not a blob of its kind")
        stored[k] = (blobs, index)
    if type(lines) is int:
        if blob_shape(shapes, lines) is not None:
            raise ValueError("model line table is not a text")
    elif type(lines) is not list or len(lines) != 2 or blob_shape(shapes, lines[0]) is not None \
            or (blob_shape(shapes, lines[1]) or (0, 0))[0] != 1:
        raise ValueError("model line table is not a text and its numbers")
    stored["lines"] = (blobs, lines)
    if states is None:
        states = m.__dict__["states"]  # in the summary
    elif type(states) is not list:
        raise ValueError("model states are not a list")
    n = len(states)
    if (tuple(a[1:3]) if isinstance(a, list) else shapes[a]) != (n, n):
        raise ValueError("model matrix A does not fit its states")
    fields.update(
        structure=structure, states=tuple(states), inputs=tuple(inputs),
        outputs=tuple(outputs), on_uncertain=on_uncertain, require=require,
        disabled=tuple(disabled), allowed_drift=allowed_drift, loop_parts=None,
        parameters=None, file_inputs=None, nonlinear=_field_from(nonlinear),
        point_id=point_id)
    m.__dict__.update(fields, _stored=stored)


def _row_of(r: list, states: tuple[str, ...]) -> ModeRow:
    i, er, ei, sr, si, pair, mult, defective, zeta, wn, tau, bound, kappa, k, *top = r
    row = object.__new__(ModeRow)
    row.__dict__.update(
        index=int(i), eigenvalue=complex(er, ei), s=complex(sr, si), pair=bool(pair),
        multiplicity=int(mult), defective=bool(defective), damping_ratio=zeta,
        natural_frequency=wn, time_constant=tau, uncertainty=bound, condition=kappa,
        top_states=tuple([(states[int(top[j])], top[j + 1]) for j in range(0, 2 * int(k), 2)]))
    row.__dict__["name"] = mode_name(row.top_states)
    return row


def findings_from(items: list, table: int | None, states: tuple[str, ...], blobs) -> tuple:
    if not items and table is None:
        return ()
    rows: list = []
    if table is not None:
        shape = blob_shape(blobs.shapes(), table)
        if shape is None or shape[1] != ROW_COLUMNS:
            raise ValueError("finding mode rows have the wrong width")
        rows = blobs.rows(table)  # no numpy: a warm re-check renders these
    out = []
    for d in items:
        if "rows" in d:
            first, count = d["rows"]
            if not 0 <= first <= first + count <= len(rows):
                raise ValueError("finding mode rows outside their table")
            modes = tuple(_row_of(r, states) for r in rows[first:first + count])
        else:
            modes = tuple(unrecord(ModeRow, r) for r in d["modes"])
        out.append(unrecord(Finding, d["f"], modes=modes))
    return tuple(out)


def result_parts(model, s: list, d: list, blobs, shapes: list) -> dict[str, Any]:
    """The spectrum, equilibrium, verdicts and pictures of a result (summary record ``s``,
    rest record ``d``) for its (cached) ``model``, checked."""
    _, sp, equilibrium, verdicts, pictures = d
    spectrum = CachedSpectrum(model, sp, s[9], blobs, shapes)
    out = []
    for v in verdicts:
        offending = v[VERDICT_OFFENDING]
        if type(offending) is not list:
            raise ValueError("verdict offending modes are not a list")
        out.append(unrecord(Verdict, v, offending=spectrum.modes.subset(offending)))
    return {"spectrum": cast("Spectrum", spectrum), "verdicts": tuple(out),
            "equilibrium": unrecord(Equilibrium, equilibrium),
            "pictures": pictures_from(pictures)}


def rest_of(blobs, shapes: list, count: int) -> list:
    """The rest records of an entry's ``count`` models: its last blob, a JSON text;
    ValueError when it is not there or does not fit."""
    if not shapes or shapes[-1] is not None:
        raise ValueError("cached entry has no rest")
    rest = blobs.json(len(shapes) - 1)
    if type(rest) is not list or len(rest) != count or \
            not all(type(r) is list and len(r) == 5 for r in rest):
        raise ValueError("cached data does not fit its summary")
    return rest


def results_from_data(d: dict, blobs):
    """Inverse of :func:`results_to_data`: ``(source, results, error)``, every field read
    and checked at once. ``blobs`` is a :class:`Blobs` or anything with the reading
    methods of :class:`~eigengate.scan.pack.BlobReader`."""
    if "error" in d:
        src, fld, problem, line, hint = d["error"]
        return d["source"], (), ModelError(src, fld, problem, line=line, hint=hint)
    if isinstance(blobs, Blobs):
        blobs = RawBlobs(blobs.items)
    shapes = blobs.shapes()
    summaries = d["results"]
    out = []
    for s, r in zip(summaries, rest_of(blobs, shapes, len(summaries))):
        model = object.__new__(CachedModel)
        model.__dict__.update(summary_fields(s))
        fill_model(model, r[0], blobs, shapes)
        # CachedSpectrum stands in for a Spectrum: the same attributes (duck typing)
        out.append(ModelResult(model=model, **result_parts(model, s, r, blobs, shapes),
                               findings=findings_from(s[3], s[4], model.states, blobs)))
    return d["source"], tuple(out), None
