"""A file's check results encoded for the result cache and the process pool, once.

:func:`results_to_data` gives the file's *data* (JSON-safe: its summary, what the pack's head
keeps, :mod:`eigengate.scan.summary`) and its *blobs*, each already in the form the pack
stores, ``(bytes, [rows, columns])`` for a float64 matrix (little-endian) or ``(bytes,
None)`` for a UTF-8 text. The last blob is the *rest* of the data: one JSON text with what
the summary does not hold, so nothing is encoded twice and nothing is encoded again when
the pack is written. Per model (positional lists, in this order)::

    summary  [source, waivers, grid, findings, mode-row table, states or None, name, label,
              sample period, [spectral abscissa, spectral radius, min damping],
              lines of the top-level fields]
    rest     [model, spectrum, equilibrium, verdicts, pictures]
    model    [A, B, C, D, E, lines, structure, states or None (then in the summary),
              inputs, outputs, on_uncertain, require, disabled, requirements, known_modes,
              allowed_drift, nonlinear, point_id]
    spectrum [infinite, norm, balanced, eigenvalue count, mode count, search, mode table,
              participation]
    verdict  its record, with the offending modes' positions in place of the modes

A matrix is a blob index (or, sparse, ``["csr", rows, columns, data, indices, indptr]``);
``lines`` is ``[keys, values]``: a text of the field paths joined by NUL and a 1×k table
of their line numbers as int64 (or, for a path holding a NUL, the index of a JSON text of
the table). The mode table has a row per mode (:data:`eigengate.scan.cached_modes.MODE_COLUMNS`),
the participation matrix a row per mode. Nothing here executes code from the data.
"""

from __future__ import annotations

import array
import json
import operator
import sys
from typing import Any

from .cached_modes import MODE_COLUMNS, mode_table
from .records import REQUIREMENT_NAMES, record

__all__ = ["Blobs", "results_to_data", "ROW_COLUMNS", "TOP", "VERDICT_OFFENDING"]

_dumps = json.JSONEncoder(separators=(",", ":"), check_circular=False).encode
_LITTLE = sys.byteorder == "little"


_PAD = [b"\0" * k for k in range(8)]
_NDARRAY: Any = None  # numpy's array type, once an array was put


def _as_matrix(a):
    """``a`` as a C-ordered float64 matrix of this machine's (little-endian) order."""
    global _NDARRAY
    import numpy as np  # encoding only: results read back never import numpy

    _NDARRAY = np.ndarray
    a = np.ascontiguousarray(a, dtype="<f8")
    if a.ndim != 2:
        raise ValueError(f"blob arrays are matrices, got {a.ndim} dimensions")
    return a


class Blobs:
    """The blobs of one file's encoded results, in order, as one *segment* of bytes (each
    blob 8-byte aligned in it) and its flat index: offset in the segment, size, rows and
    columns per blob (-1, -1 for a text). ``items`` is the pair, what the pack stores of an
    entry (:func:`eigengate.scan.pack.write_pack`) and what a pool worker sends."""

    __slots__ = ("chunks", "index", "size")

    def __init__(self) -> None:
        self.chunks: list[bytes] = []
        self.index: list[int] = []
        self.size = 0

    @property
    def items(self) -> tuple[bytes, list[int]]:
        return b"".join(self.chunks), self.index

    def put_raw(self, raw: bytes, rows: int, cols: int) -> int:
        """A matrix of 8-byte numbers already as its little-endian bytes (rows × cols), or a
        text (-1, -1)."""
        size = len(raw)
        self.index += (self.size, size, rows, cols)
        self.chunks.append(raw)
        pad = -size % 8
        if pad:
            self.chunks.append(_PAD[pad])
        self.size += size + pad
        return len(self.index) // 4 - 1

    def put_array(self, a) -> int | None:
        """A float64 matrix (anything numpy reads as one)."""
        if a is None:
            return None
        if type(a) is not _NDARRAY or a.dtype.char != "d" or a.ndim != 2 or not _LITTLE:
            a = _as_matrix(a)
        rows, cols = a.shape
        return self.put_raw(a.tobytes(), rows, cols)  # C order, whatever a's layout

    def put_text(self, text: str) -> int:
        return self.put_raw(text.encode("utf-8"), -1, -1)

    def put_json(self, value) -> int:
        return self.put_text(_dumps(value))


# ------------------------------------------------------------------ model

_MATRICES = ("A", "B", "C", "D", "E")


def _put_matrix(blobs: Blobs, a):
    """A matrix into the blobs: dense as it is, sparse (A, E of a sparse model) as its CSR
    arrays, each a 1×k float64 blob (indices are exact in float64 below 2⁵³)."""
    if a is None or type(a) is _NDARRAY:
        return blobs.put_array(a)
    if type(a).__module__.startswith("scipy.sparse"):
        import numpy as np

        c = a.tocsr()
        return ["csr", int(c.shape[0]), int(c.shape[1])] + [
            blobs.put_array(np.asarray(x, dtype=np.float64).reshape(1, -1))
            for x in (c.data, c.indices, c.indptr)]
    return blobs.put_array(a)


def _put_lines(blobs: Blobs, lines: dict) -> list | int:
    keys = "\0".join(lines)
    try:
        numbers = array.array("q", lines.values())
    except (TypeError, OverflowError):
        numbers = None
    # (line numbers are ints, never bools: the loader counts them)
    if numbers is None or keys.count("\0") != max(0, len(lines) - 1) or (
            len(lines) == 1 and not keys):
        return blobs.put_json(dict(lines))  # a path holding a NUL (or empty), or odd lines
    if not _LITTLE:  # pragma: no cover - big-endian machines
        numbers.byteswap()
    return [blobs.put_text(keys), blobs.put_raw(numbers.tobytes(), 1, len(numbers))]


def _model_rest(m, blobs: Blobs, with_states: bool) -> list:
    for r in m.requirements:  # (names only: a plain model imports no loop or range classes)
        if type(r).__name__ not in REQUIREMENT_NAMES:  # pragma: no cover - a new class not listed
            raise TypeError(f"cannot cache requirement {type(r).__name__}")
    return [_put_matrix(blobs, m.A), _put_matrix(blobs, m.B), _put_matrix(blobs, m.C),
            _put_matrix(blobs, m.D), _put_matrix(blobs, m.E), _put_lines(blobs, m.lines),
            m.structure, list(m.states) if with_states else None, list(m.inputs),
            list(m.outputs), m.on_uncertain, m.require, list(m.disabled),
            [[type(r).__name__, record(r)] for r in m.requirements],
            [record(k) for k in m.known_modes], m.allowed_drift, _field_data(m.nonlinear),
            m.point_id]


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


# ------------------------------------------------------------------ spectrum

def _spectrum_data(sp, n_states: int, blobs: Blobs) -> tuple[list, list]:
    """A spectrum's record in the rest and its figures for the summary."""
    modes = sp.modes
    k = len(modes)
    table, figures, count = mode_table(modes)
    rows = blobs.put_raw(table, k, MODE_COLUMNS)
    if k:
        part = _participation([m.participation for m in modes])
        if part.shape != (k * n_states,):
            raise ValueError("participation factors do not fit the model's states")
        part_blob = blobs.put_raw(part.tobytes(), k, n_states)
    else:
        part_blob = blobs.put_raw(b"", 0, 0)
    return [sp.infinite, sp.norm, sp.balanced, count, k,
            None if getattr(sp, "search", None) is None else sp.search.coverage(), rows,
            part_blob], figures


def _participation(factors: list):
    """The modes' participation factors end to end, float64 of this machine's order."""
    import numpy as np

    part = np.concatenate(factors)
    if part.dtype.char != "d" or not _LITTLE:
        part = part.astype("<f8")
    return part


# ------------------------------------------------------------------ findings and verdicts

#: A finding's mode row as float64: index, eigenvalue and s (real, imaginary), pair,
#: multiplicity, defective, ζ, ωn, τ, bound, κ, then up to TOP participating states as
#: (position in the model's states, factor) after their count.
TOP = 3
ROW_COLUMNS = 14 + 2 * TOP


def _row_values(r, position: dict[str, int]) -> list[float] | None:
    if len(r.top_states) > TOP or any(n not in position for n, _ in r.top_states):
        return None
    out = [r.index, r.eigenvalue.real, r.eigenvalue.imag, r.s.real, r.s.imag, r.pair,
           r.multiplicity, r.defective, r.damping_ratio, r.natural_frequency, r.time_constant,
           r.uncertainty, r.condition, len(r.top_states)]
    for n, p in r.top_states:
        out += [position[n], p]
    return out + [0.0] * (ROW_COLUMNS - len(out))


def _findings_data(findings, states: tuple[str, ...], blobs: Blobs) -> tuple[list, int | None]:
    """The findings' records, their mode rows in one float64 table (a finding refers to its
    ``[first, count]``), or as records where a row does not fit the table."""
    if not findings:
        return [], None
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


#: Where a verdict's record holds its offending modes' positions.
VERDICT_OFFENDING = 9
_VERDICT_FIELDS = ("rule", "name", "requirement", "passed", "uncertain", "measured",
                   "threshold", "margin", "unit", "offending", "message", "suggestion",
                   "decided_by", "figure")
_verdict_values = operator.attrgetter(*_VERDICT_FIELDS)


def _verdict_rest(v) -> list:
    """:func:`~eigengate.scan.records.record` of a verdict (its fields in order; the plain
    ones read at once), the offending modes' positions in their place."""
    out = list(_verdict_values(v))
    out[VERDICT_OFFENDING] = [m.index - 1 for m in out[VERDICT_OFFENDING]]
    if out[13] is not None:
        out[13] = record(out[13])
    return out


def verdict_fields() -> tuple[str, ...]:
    """The verdict fields :func:`_verdict_rest` reads, in order (a test checks them against
    the class)."""
    return _VERDICT_FIELDS


def results_to_data(source: str, results, error) -> tuple[dict, Blobs]:
    """Data (the summary) and blobs (the rest last) of one file's pre-waiver check: its
    model results, or its load error (then no blobs)."""
    blobs = Blobs()
    if error is not None:
        return {"source": source, "error": [error.source, error.field, error.problem,
                                             error.line, error.hint]}, blobs
    summaries = []
    rest = []
    for r in results:
        m = r.model
        findings, rows = _findings_data(r.findings, m.states, blobs)
        spectrum, figures = _spectrum_data(r.spectrum, len(m.states), blobs)
        summaries.append([m.source, [record(w) for w in m.waivers],
                          None if m.grid is None else [[k, v] for k, v in m.grid],
                          findings, rows, list(m.states) if findings else None, m.name,
                          m.label, m.sample_period, figures,
                          {k: v for k, v in m.lines.items() if "." not in k}])
        rest.append([_model_rest(m, blobs, not findings), spectrum, record(r.equilibrium),
                     [_verdict_rest(v) for v in r.verdicts],
                     [[type(p).__name__, record(p)] for p in r.pictures]])
    blobs.put_text(_dumps(rest))
    return {"source": source, "results": summaries}, blobs
