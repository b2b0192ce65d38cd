"""Exact round trip of check results, for the result cache and the process pool.

A file's results become JSON-safe *data* plus a list of *blobs*: the large items (matrices,
participation factors, mode rows, the line table) kept out of the JSON, so that reading a
cache pack decodes only what a report reads. Matrices are float64 bytes, so a result read
back renders to the same bytes as the one computed. Blobs are read lazily: a warm re-check
that only prints a summary never touches a matrix or builds a Mode object. Nothing here
executes code from the data: unknown kinds are errors, which the cache treats as a corrupt
entry.
"""

from __future__ import annotations

import functools
import json
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any, cast

from .engine import ModelResult
from ..analysis.equilibrium import Equilibrium
from ..errors import ModelError
from ..analysis.naming import mode_name
from ..rules.findings import Finding, ModeRow
from ..rules.known_modes import KnownMode
from .cached_modes import CachedSpectrum, blob_shape, spectrum_data
from .lazy import LazyField
from .records import REQUIREMENT_NAMES, pictures_from, record, requirement_classes, unrecord
from ..model.core import Model
from ..rules.catalogue import Verdict
from ..rules.waivers import Waiver

if TYPE_CHECKING:  # pragma: no cover - a warm re-check that builds no mode imports neither
    from ..analysis.modes import Spectrum

__all__ = ["results_to_data", "results_from_data", "CachedSpectrum", "CachedModel", "Blobs",
           "FORMAT", "fill_model", "result_parts", "findings_from"]

from .cache_format import FORMAT  # noqa: E402 (re-exported)


class Blobs:
    """The large items of one file's encoded results, by index: float64 matrices, and JSON
    texts of other values. Encoding appends to ``items``; decoding reads them back by index
    (``shapes`` has None for a text). The cache's reader (:class:`eigengate.scan.cache.PackBlobs`)
    serves the same three methods from the bytes of a pack."""

    def __init__(self, items: list | None = None) -> None:
        self.items: list = [] if items is None else items

    def put_array(self, a) -> int | None:
        import numpy as np  # encoding only: results read back never import numpy

        if a is None:
            return None
        self.items.append(np.ascontiguousarray(a, dtype=np.float64))
        return len(self.items) - 1

    def put_json(self, value) -> int:
        self.items.append(json.dumps(value, separators=(",", ":")))
        return len(self.items) - 1

    def shapes(self) -> list[tuple[int, int] | None]:
        return [None if isinstance(a, str) else a.shape for a in self.items]

    def array(self, i: int):
        a = self.items[i]
        if isinstance(a, str):
            raise ValueError(f"blob {i} is not an array")
        return a

    def rows(self, i: int) -> list[list[float]]:  # as the cache's readers give them
        return self.array(i).tolist()

    def json(self, i: int):
        text = self.items[i]
        if not isinstance(text, str):
            raise ValueError(f"blob {i} is not a text")
        return json.loads(text)


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


def _put_matrix(blobs: Blobs, a):
    """A matrix into the blobs: dense as it is, sparse (A, E of a sparse model) as its CSR
    arrays, each a 1×k float64 blob (indices are exact in float64 below 2⁵³)."""
    if type(a).__module__.startswith("scipy.sparse"):
        import numpy as np

        c = a.tocsr()
        return ["csr", int(c.shape[0]), int(c.shape[1])] + [
            blobs.put_array(np.asarray(x, dtype=np.float64).reshape(1, -1))
            for x in (c.data, c.indices, c.indptr)]
    return blobs.put_array(a)


def _text(ref: tuple):
    blobs, index = ref
    return blobs.json(index)


def _requirements_of(records: list) -> tuple:
    classes = requirement_classes()
    return tuple(unrecord(classes[k], v) for k, v in records)


def _known_modes_of(records: list) -> tuple:
    return tuple(unrecord(KnownMode, k) for k in records)


#: How a model field kept in ``_stored`` is built on first read.
_LOADERS = {**{k: _array for k in _MATRICES}, "lines": _text,
            "requirements": _requirements_of, "known_modes": _known_modes_of}


class CachedModel(Model):
    """A :class:`~eigengate.model.core.Model` rebuilt from the cache: its matrices and its line
    table are read from the blobs when first used (then kept), its requirements and known
    modes built from their records when first used, the other fields at once (or, for a
    model built from its summary, when one of them is first read). Reports, which print
    verdicts and findings, read none of the matrices."""

    LOADERS = _LOADERS

    @property
    def n_states(self) -> int:  # _model_from checked that A is n × n for n states
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


def _model_data(m, blobs: Blobs) -> dict:
    classes = requirement_classes()
    for r in m.requirements:
        if type(r).__name__ not in classes:  # pragma: no cover - a new class not listed
            raise TypeError(f"cannot cache requirement {type(r).__name__}")
    out: dict[str, Any] = {k: _put_matrix(blobs, getattr(m, k)) for k in _MATRICES}
    out.update({
        "name": m.name, "label": m.label, "source": m.source, "structure": m.structure,
        "sample_period": m.sample_period, "states": list(m.states), "inputs": list(m.inputs),
        "outputs": list(m.outputs), "on_uncertain": m.on_uncertain, "require": m.require,
        "disabled": list(m.disabled), "lines": blobs.put_json(dict(m.lines)),
        "top_lines": {k: v for k, v in m.lines.items() if "." not in k},
        "requirements": [[type(r).__name__, record(r)] for r in m.requirements],
        "known_modes": [record(k) for k in m.known_modes],
        "waivers": [record(w) for w in m.waivers],
        "allowed_drift": m.allowed_drift,
        "nonlinear": _field_data(m.nonlinear), "point_id": m.point_id,
        "grid": None if m.grid is None else [[k, v] for k, v in m.grid],
    })
    return out


# A linearised model's vector field is code and is not stored; what the reports read of it
# (the operating point, the box, and the equilibria found in it) is.

def _field_data(info) -> dict | None:
    if info is None:
        return None
    search = info.shared.get("search")
    return {
        "x": list(info.x), "u": list(info.u), "carrier": info.carrier,
        "carrier_label": info.carrier_label,
        "box": None if info.box is None else [list(info.box[0]), list(info.box[1]),
                                              list(info.box[2]), info.box[3], info.box[4]],
        "search": None if search is None else {
            "equilibria": [[list(e.x), e.residual, record(e.equilibrium),
                            [[z.real, z.imag] for z in e.eigenvalues]]
                           for e in search.equilibria],
            "counts": [search.starts, search.converged, search.failed, search.outside],
            "errors": list(search.errors)},
    }


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


def _model_from(d: dict, blobs, shapes: list) -> CachedModel:
    m = object.__new__(CachedModel)
    fill_model(m, d, blobs, shapes)
    return m


def fill_model(m: CachedModel, d: dict, blobs, shapes: list) -> None:
    """Set the fields of cached model ``m`` from its record ``d``, checked; ValueError,
    KeyError, TypeError or IndexError when the record is damaged (nothing set then)."""
    classes = REQUIREMENT_NAMES  # the classes themselves are imported when first read
    if not all(type(r) is list and len(r) == 2 and r[0] in classes for r in d["requirements"]) \
            or type(d["known_modes"]) is not list:
        raise ValueError("model requirements are not records of known classes")
    fields: dict[str, Any] = {}
    stored = {"requirements": d["requirements"], "known_modes": d["known_modes"]}
    for k in (*_MATRICES, "lines"):
        index = d[k]
        if index is None and k != "A":
            fields[k] = None
            continue
        # read later: check now that it is there, and of its kind
        if isinstance(index, list) and k != "lines":
            if len(index) != 6 or index[0] != "csr" or type(index[1]) is not int \
                    or type(index[2]) is not int or any(
                        blob_shape(shapes, i) is None for i in index[3:]):
                raise ValueError(f"model field {k} is not a sparse matrix record")
        elif (blob_shape(shapes, index) is None) != (k == "lines"):
            raise ValueError(f"model field {k} is not a blob of its kind")
        stored[k] = (blobs, index)
    n = len(d["states"])
    a = d["A"]
    if (tuple(a[1:3]) if isinstance(a, list) else shapes[a]) != (n, n):
        raise ValueError("model matrix A does not fit its states")
    fields.update(
        name=d["name"], label=d["label"], source=d["source"],
        structure=d["structure"], sample_period=d["sample_period"],
        states=tuple(d["states"]), inputs=tuple(d["inputs"]), outputs=tuple(d["outputs"]),
        on_uncertain=d["on_uncertain"], require=d["require"], disabled=tuple(d["disabled"]),
        waivers=tuple(unrecord(Waiver, w) for w in d["waivers"]),
        allowed_drift=d["allowed_drift"], loop_parts=None, parameters=None, file_inputs=None,
        nonlinear=_field_from(d["nonlinear"]), point_id=d.get("point_id"),
        grid=None if d.get("grid") is None else tuple((str(k), float(v)) for k, v in d["grid"]))
    m.__dict__.update(fields, _stored=stored)


#: A finding's mode row as float64: index, eigenvalue and s (real, imaginary), pair,
#: multiplicity, defective, ζ, ωn, τ, bound, κ, then up to _TOP participating states as
#: (position in the model's states, factor) after their count.
_TOP = 3
_ROW_COLUMNS = 14 + 2 * _TOP


def _row_values(r: ModeRow, position: dict[str, int]) -> list[float] | None:
    if len(r.top_states) > _TOP or any(n not in position for n, _ in r.top_states):
        return None
    out = [r.index, r.eigenvalue.real, r.eigenvalue.imag, r.s.real, r.s.imag, r.pair,
           r.multiplicity, r.defective, r.damping_ratio, r.natural_frequency, r.time_constant,
           r.uncertainty, r.condition, len(r.top_states)]
    for n, p in r.top_states:
        out += [position[n], p]
    return out + [0.0] * (_ROW_COLUMNS - len(out))


def _findings_data(findings, states: tuple[str, ...], blobs: Blobs) -> tuple[list, int | None]:
    """The findings' records, their mode rows in one float64 table (a finding refers to its
    ``[first, count]``), or as records where a row does not fit the table."""
    position = {n: i for i, n in enumerate(states)}
    table: list[list[float]] = []
    out = []
    for f in findings:
        rows = [_row_values(r, position) for r in f.modes]
        if any(r is None for r in rows):
            out.append({"f": record(f), "modes": [record(r) for r in f.modes]})
        else:
            out.append({"f": record(f), "rows": [len(table), len(rows)]})
            table.extend(rows)  # type: ignore[arg-type]
    if not table:
        return out, None
    return out, blobs.put_array(table)


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
    rows: list = []
    if table is not None:
        shape = blob_shape(blobs.shapes(), table)
        if shape is None or shape[1] != _ROW_COLUMNS:
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


def _verdict_data(v) -> dict:
    return {"v": record(v), "offending": [m.index - 1 for m in v.offending]}


def _result_data(r, blobs: Blobs) -> dict:
    findings, rows = _findings_data(r.findings, r.model.states, blobs)
    return {"model": _model_data(r.model, blobs), "spectrum": spectrum_data(r.spectrum, blobs),
            "equilibrium": record(r.equilibrium),
            "verdicts": [_verdict_data(v) for v in r.verdicts],
            "findings": findings, "rows": rows,
            "pictures": [[type(p).__name__, record(p)] for p in r.pictures]}


def _result_from(d: dict, blobs, shapes: list):
    model = _model_from(d["model"], blobs, shapes)
    # CachedSpectrum stands in for a Spectrum: the same attributes, read lazily (duck typing)
    return ModelResult(model=model, **result_parts(model, d, blobs, shapes),
                       findings=findings_from(d["findings"], d["rows"], model.states, blobs))


def result_parts(model, d: dict, blobs, shapes: list) -> dict[str, Any]:
    """The spectrum, equilibrium, verdicts and pictures of a result's record ``d`` for its
    (cached) ``model``, checked."""
    spectrum = CachedSpectrum(model, d["spectrum"], blobs, shapes)
    verdicts = [unrecord(Verdict, v["v"], offending=spectrum.modes.subset(v["offending"]))
                for v in d["verdicts"]]
    return {"spectrum": cast("Spectrum", spectrum), "verdicts": tuple(verdicts),
            "equilibrium": unrecord(Equilibrium, d["equilibrium"]),
            "pictures": pictures_from(d["pictures"])}


def results_to_data(source: str, results: Sequence, error) -> tuple[dict, Blobs]:
    """Data and blobs of one file's pre-waiver check: its model results, or its load error."""
    blobs = Blobs()
    if error is not None:
        return {"source": source, "error": [error.source, error.field, error.problem,
                                             error.line, error.hint]}, blobs
    return {"source": source, "results": [_result_data(r, blobs) for r in results]}, blobs


def results_from_data(d: dict, blobs):
    """Inverse of :func:`results_to_data`: ``(source, results, error)``. ``blobs`` is a
    :class:`Blobs` or anything with its ``shapes``, ``array`` and ``json`` methods."""
    if "error" in d:
        src, fld, problem, line, hint = d["error"]
        return d["source"], (), ModelError(src, fld, problem, line=line, hint=hint)
    shapes = blobs.shapes()
    return d["source"], tuple([_result_from(r, blobs, shapes) for r in d["results"]]), None
