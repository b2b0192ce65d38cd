"""The modes of a cached result: stored as one float64 table and a participation matrix
(blobs of the entry, :mod:`eigengate.scan.encode`), built into
:class:`~eigengate.analysis.modes.Mode` objects only when something reads them; the
spectrum's summary figures are stored as they are."""

from __future__ import annotations

import math
import operator
import struct
from collections.abc import Sequence
from itertools import compress, starmap
from typing import TYPE_CHECKING, cast

from .lazy import LazyField

if TYPE_CHECKING:  # pragma: no cover - a warm re-check that builds no mode imports neither
    from ..analysis.modes import Spectrum

__all__ = ["CachedSpectrum", "StoredSearch", "mode_table", "blob_shape", "SPECTRUM_FIELDS",
           "MODE_GETTER", "MODE_COLUMNS"]


def blob_shape(shapes: list, index) -> tuple[int, int] | None:
    if type(index) is not int or not 0 <= index < len(shapes):
        raise ValueError(f"{index!r} is not a blob of the entry")
    return shapes[index]


_MODE_SCALARS = ("multiplicity", "geometric_multiplicity", "pair", "natural_frequency",
                 "damping_ratio", "time_constant", "uncertainty", "condition", "enclosure")
#: A mode as a row of float64 (exact for every field): index, eigenvalue and s as real and
#: imaginary parts, then the scalars above; MODE_GETTER reads them off a mode at once.
MODE_GETTER = operator.attrgetter("index", "eigenvalue.real", "eigenvalue.imag", "s.real",
                                  "s.imag", *_MODE_SCALARS)
MODE_COLUMNS = 5 + len(_MODE_SCALARS)
_MODE_ROW = struct.Struct(f"<{MODE_COLUMNS}d")


def mode_table(modes) -> tuple[bytes, list[float], int]:
    """The modes' table (a row per mode, MODE_GETTER's fields, float64 little-endian), and,
    read off its columns, what :class:`~eigengate.analysis.modes.Spectrum` derives from its
    modes: ``[spectral abscissa, spectral radius, min damping]`` (what a cache entry's
    summary holds) and the eigenvalue count, by the same definitions, in the same order
    (a test compares them with the spectrum's own)."""
    rows = list(map(MODE_GETTER, modes))
    table = b"".join(starmap(_MODE_ROW.pack, rows))
    if not rows:
        return b"", [-math.inf, 0.0, 1.0], 0
    # columns: 1, 2 eigenvalue, 3, 4 s (real, imaginary), 5 multiplicity, 7 pair, 9 ζ
    c = list(zip(*rows))
    figures = [max(c[3]), max(map(abs, map(complex, c[1], c[2]))),
               min(compress(c[9], c[4]), default=1.0)]  # ζ of the oscillatory modes
    return table, figures, sum(c[5]) + sum(compress(c[5], c[7]))


class _LazyModes(Sequence):
    """A tuple-like view of modes built on first use from their stored rows."""

    def __init__(self, blobs, rows: int, participation: int, states: tuple[str, ...],
                 count: int, pick: list[int] | None = None,
                 source: "_LazyModes | None" = None) -> None:
        self._blobs, self._rows, self._part, self._states = blobs, rows, participation, states
        self._count = count
        self._pick, self._source = pick, source
        self._built: tuple | None = None

    def _all(self) -> tuple:
        if self._built is None:
            if self._source is not None:
                assert self._pick is not None  # a picked view always has its picks
                every = self._source._all()
                self._built = tuple(every[i] for i in self._pick)
            else:
                from ..analysis.modes import Mode

                part = self._blobs.array(self._part)  # shapes checked by CachedSpectrum
                rows = self._blobs.array(self._rows)
                self._built = tuple(
                    Mode(index=int(r[0]), eigenvalue=complex(r[1], r[2]), s=complex(r[3], r[4]),
                         multiplicity=int(r[5]), geometric_multiplicity=int(r[6]),
                         pair=bool(r[7]), natural_frequency=r[8], damping_ratio=r[9],
                         time_constant=r[10], uncertainty=r[11], condition=r[12],
                         enclosure=r[13],
                         participation=part[k], states=self._states)
                    for k, r in enumerate(rows.tolist()))
        return self._built

    def subset(self, indices: list[int]) -> "_LazyModes":
        return _LazyModes(self._blobs, self._rows, self._part, self._states, self._count,
                          pick=list(indices), source=self)

    def __len__(self) -> int:
        return len(self._pick) if self._pick is not None else self._count

    def __getitem__(self, i):
        return self._all()[i]

    def __iter__(self):
        return iter(self._all())

    def __eq__(self, other) -> bool:
        return tuple(self) == tuple(other)

    def __hash__(self):  # pragma: no cover - not used as a key
        return id(self)


class StoredSearch:
    """What a sparse search covered, as a cached result keeps it: its description only (a
    cached result is never evaluated again)."""

    def __init__(self, text: str) -> None:
        self.text = text

    def coverage(self) -> str:
        return self.text


class CachedSpectrum:
    """Stands in for :class:`~eigengate.analysis.modes.Spectrum` when a result comes from the cache:
    the summary figures are stored, the modes are built only when something reads them."""

    def __init__(self, model, data: list, figures: list, blobs, shapes: list) -> None:
        """From the spectrum's record in an entry's rest and its figures in the summary
        (:mod:`eigengate.scan.encode`), checked."""
        self.model = model
        (self.infinite, self.norm, self.balanced, self.n_eigenvalues, count, coverage,
         rows, part) = data
        self.spectral_abscissa, self.spectral_radius, self.min_damping = figures
        self.search = None if coverage is None else StoredSearch(str(coverage))
        # The blobs are read when the modes are: check now that they fit, so a damaged
        # entry is analysed again instead of failing later.
        if type(count) is not int or blob_shape(shapes, rows) != (count, MODE_COLUMNS) or \
                blob_shape(shapes, part) not in ((count, len(model.states)), (0, 0)):
            raise ValueError("mode table or participation factors do not fit the model")
        self.modes = _LazyModes(blobs, rows, part, model.states, count)

    def eigenvalues(self) -> list[complex]:
        from ..analysis.modes import Spectrum

        return Spectrum.eigenvalues(cast(Spectrum, self))  # same logic, reading self.modes


#: What a cached spectrum holds; one built from its entry's summary has the model and the
#: three figures at once, the rest when first read (:mod:`eigengate.scan.summary`).
SPECTRUM_FIELDS = ("model", "infinite", "norm", "balanced", "spectral_abscissa",
                   "spectral_radius", "min_damping", "n_eigenvalues", "search", "modes")
for _name in SPECTRUM_FIELDS:
    setattr(CachedSpectrum, _name, LazyField(_name))
del _name
