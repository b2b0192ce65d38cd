"""Cached results read in two steps: a short summary first, the rest when it is read.

A cache entry keeps a file's results (:mod:`eigengate.scan.serial`) twice over: its whole data
as one JSON text blob of the entry, decoded only when something reads it, and a *summary* in
the pack's head, decoded with the head. The summary holds what applying waivers, counting and
listing findings read: per model its source, waivers, grid coordinates and findings (and its
states when it has findings, which name the states of their mode rows). A no-change check
whose report lists findings and counts (``check -q``) so decodes the summaries and nothing
else; a report that reads verdicts or figures decodes a file's data when it first reads one.

A result read back this way is a :class:`CachedResult` holding a
:class:`~eigengate.scan.serial.CachedModel`: the same fields as a result read back whole,
each built on first read. The data is checked when it is decoded, as a whole entry is when it
is read; when it fails its checks, the file is analysed again (the ``reload`` the caller
gives) and the fresh result's fields stand in for the damaged ones.
"""

from __future__ import annotations

from typing import Any, Callable

from ..rules.results import ModelResult
from ..rules.waivers import Waiver
from .records import unrecord
from .cached_modes import SPECTRUM_FIELDS, CachedSpectrum
from .lazy import LazyField
from .serial import CachedModel, fill_model, findings_from, result_parts, results_from_data

__all__ = ["summary_of", "results_from_summary", "CachedResult"]

#: What a damaged record raises while it is read back.
DAMAGE = (KeyError, TypeError, ValueError, IndexError, AttributeError)


def summary_of(data: dict) -> dict:
    """The summary of a file's data (:func:`eigengate.scan.serial.results_to_data`): per
    model ``[source, waivers, grid, findings, mode-row table, states or None, name, label,
    sample period, [spectral abscissa, spectral radius, min damping], the lines of its
    top-level fields]``; a load error's data is its own summary."""
    if "error" in data:
        return data
    out = []
    for r in data["results"]:
        m, sp = r["model"], r["spectrum"]
        out.append([m["source"], m["waivers"], m["grid"], r["findings"], r["rows"],
                    m["states"] if r["findings"] else None, m["name"], m["label"],
                    m["sample_period"], [sp["abscissa"], sp["radius"], sp["min_damping"]],
                    m["top_lines"]])
    return {"source": data["source"], "results": out}


class _Entry:
    """One file's cached data, decoded and checked on first use, shared by its results."""

    __slots__ = ("blobs", "shapes", "_full", "_reload", "_data", "_fresh", "count")

    def __init__(self, blobs, full: Callable[[], Any], reload, count: int) -> None:
        self.blobs = blobs
        self.shapes: list = []
        self._full, self._reload, self.count = full, reload, count
        self._data: list | None = None
        self._fresh: tuple | None = None

    def data(self, k: int) -> dict:
        if self._data is None:
            results = self._full()["results"]
            if type(results) is not list or len(results) != self.count:
                raise ValueError("cached data does not fit its summary")
            self._data, self.shapes = results, self.blobs.shapes()
        d = self._data[k]
        if type(d) is not dict:
            raise ValueError("cached result is not a record")
        return d

    def fresh(self, k: int) -> ModelResult:
        """Result ``k`` analysed again (the cached data failed its checks)."""
        if self._fresh is None:
            results = None if self._reload is None else self._reload()
            if results is None or len(results) != self.count:
                from ..errors import EigengateError

                raise EigengateError("a result cache entry is damaged and its file no longer "
                                     "gives the same models; run again with --no-cache")
            self._fresh = tuple(results)
        return self._fresh[k]

    def fill_model(self, m: CachedModel) -> None:
        k = m.__dict__["_k"]
        try:
            fill_model(m, self.data(k)["model"], self.blobs, self.shapes)
        except DAMAGE:
            _take(m, self.fresh(k).model)

    def fill_result(self, r: "CachedResult") -> None:
        k = r.__dict__["_k"]
        try:
            parts = result_parts(r.model, self.data(k), self.blobs, self.shapes)
        except DAMAGE:
            fresh = self.fresh(k)
            _take(r.model, fresh.model)
            parts = {n: getattr(fresh, n) for n in _PARTS}
        # the spectrum built from the summary stays, with every field now
        sp = r.__dict__["spectrum"]
        sp.__dict__.update({n: getattr(parts["spectrum"], n, None) for n in SPECTRUM_FIELDS})
        parts["spectrum"] = sp
        r.__dict__.update(parts)


def _take(m: Any, fresh) -> None:
    """Give cached model ``m`` the fields of ``fresh`` (its file analysed again)."""
    m.__dict__.update({n: getattr(fresh, n) for n in type(fresh).__dataclass_fields__},
                      _stored={})


_PARTS = ("spectrum", "equilibrium", "verdicts", "pictures")


class CachedResult(ModelResult):
    """A :class:`~eigengate.rules.results.ModelResult` from a cache entry's summary: model
    (its fields read lazily) and findings at once, spectrum, equilibrium, verdicts and
    pictures when first read."""


for _n in _PARTS:
    setattr(CachedResult, _n, LazyField(_n))
del _n


def results_from_summary(summary: dict, blobs, full: Callable[[], Any],
                         reload: Callable[[], Any] | None = None):
    """``(source, results, error)`` from an entry's summary, its blobs and ``full`` (which
    decodes its whole data); ``reload`` analyses the file again, for data that fails its
    checks when it is read. Raises what a damaged summary raises (see ``DAMAGE``)."""
    if "error" in summary:
        return results_from_data(summary, blobs)
    items = summary["results"]
    if type(items) is not list or not items:
        raise ValueError("cached summary has no results")
    entry = _Entry(blobs, full, reload, len(items))
    out = []
    for k, (source, waivers, grid, findings, rows, states, name, label, period,
            (abscissa, radius, damping), top_lines) in enumerate(items):
        if type(source) is not str or type(waivers) is not list or type(top_lines) is not dict:
            raise ValueError("cached summary is not a model record")
        m = object.__new__(CachedModel)
        fields = m.__dict__
        fields.update(source=source, waivers=tuple([unrecord(Waiver, w) for w in waivers]),
                      grid=None if grid is None else tuple([(str(a), float(v))
                                                            for a, v in grid]),
                      name=name, label=label, sample_period=period, _top_lines=top_lines,
                      _fill=entry.fill_model, _k=k)
        named: tuple[str, ...] = ()
        if states is not None:
            named = fields["states"] = tuple(states)
        r = object.__new__(CachedResult)
        sp = object.__new__(CachedSpectrum)
        sp.__dict__.update(model=m, spectral_abscissa=abscissa, spectral_radius=radius,
                           min_damping=damping, _fill=lambda _, r=r: entry.fill_result(r))
        r.__dict__.update(model=m, spectrum=sp,
                          findings=findings_from(findings, rows, named, blobs),
                          _fill=entry.fill_result, _k=k)
        out.append(r)
    return summary["source"], tuple(out), None
