"""Cached results read in two steps: a short summary first, the rest when it is read.

A cache entry keeps a file's results (:mod:`eigengate.scan.encode`) in two parts: a
*summary* in the pack's head, decoded with the head, and the *rest* as one JSON text blob of
the entry, decoded only when something reads it. The summary holds what applying waivers,
counting and listing findings read: per model its source, waivers, grid coordinates and
findings (and its states when it has findings, which name the states of their mode rows).
A no-change check whose report lists findings and counts (``check -q``) so decodes the
summaries and nothing else; a report that reads verdicts or figures decodes a file's rest
when it first reads one.

A result read back this way is a :class:`CachedResult` holding a
:class:`~eigengate.scan.serial.CachedModel`: the same fields as a result read back whole,
each built on first read. The data is checked when it is decoded, as a whole entry is when it
is read; when it fails its checks, the file is analysed again (the ``reload`` the caller
gives) and the fresh result's fields stand in for the damaged ones.
"""

from __future__ import annotations

from typing import Any, Callable

from ..rules.results import ModelResult
from .cached_modes import SPECTRUM_FIELDS, CachedSpectrum
from .lazy import LazyField
from .serial import (CachedModel, fill_model, findings_from, rest_of, result_parts,
                     results_from_data, summary_fields)

__all__ = ["summary_of", "results_from_summary", "CachedResult"]

#: What a damaged record raises while it is read back.
DAMAGE = (KeyError, TypeError, ValueError, IndexError, AttributeError)


def summary_of(data: dict) -> dict:
    """The summary of a file's data (:func:`eigengate.scan.encode.results_to_data`): the
    data is its summary (its rest is the last of its blobs)."""
    return data


class _Entry:
    """One file's cached rest, decoded and checked on first use, shared by its results."""

    __slots__ = ("blobs", "shapes", "summaries", "_reload", "_rest", "_fresh", "count")

    def __init__(self, blobs, summaries: list, reload) -> None:
        self.blobs = blobs
        self.shapes: list = []
        self.summaries, self._reload, self.count = summaries, reload, len(summaries)
        self._rest: list | None = None
        self._fresh: tuple | None = None

    def rest(self, k: int) -> list:
        if self._rest is None:
            shapes = self.blobs.shapes()
            self._rest, self.shapes = rest_of(self.blobs, shapes, self.count), shapes
        return self._rest[k]

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
            fill_model(m, self.rest(k)[0], self.blobs, self.shapes)
        except DAMAGE:
            _take(m, self.fresh(k).model)

    def fill_result(self, r: "CachedResult") -> None:
        k = r.__dict__["_k"]
        try:
            parts = result_parts(r.model, self.summaries[k], self.rest(k), self.blobs,
                                 self.shapes)
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


def results_from_summary(summary: dict, blobs, full: Any = None,
                         reload: Callable[[], Any] | None = None):
    """``(source, results, error)`` from an entry's summary and its blobs (its rest the
    last); ``full`` is not read (the rest is in the blobs; kept for callers that give the
    whole data); ``reload`` analyses the file again, for data that fails its checks when
    it is read. Raises what a damaged summary raises (see ``DAMAGE``)."""
    if "error" in summary:
        return results_from_data(summary, blobs)
    items = summary["results"]
    if type(items) is not list or not items:
        raise ValueError("cached summary has no results")
    entry = _Entry(blobs, items, reload)
    out = []
    for k, s in enumerate(items):
        fields = summary_fields(s)
        findings, rows, (abscissa, radius, damping) = s[3], s[4], s[9]
        m = object.__new__(CachedModel)
        m.__dict__.update(fields, _fill=entry.fill_model, _k=k)
        r = object.__new__(CachedResult)
        sp = object.__new__(CachedSpectrum)
        sp.__dict__.update(model=m, spectral_abscissa=abscissa, spectral_radius=radius,
                           min_damping=damping, _fill=lambda _, r=r: entry.fill_result(r))
        r.__dict__.update(model=m, spectrum=sp,
                          findings=findings_from(findings, rows, fields.get("states", ()),
                                                 blobs),
                          _fill=entry.fill_result, _k=k)
        out.append(r)
    return summary["source"], tuple(out), None
