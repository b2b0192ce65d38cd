"""Limits of what a model file may hold, and the integer checks that both document parsers
(YAML in :mod:`eigengate.model.yaml_core`, JSON and TOML in :mod:`eigengate.model.formats`)
share: below both, so neither imports the other."""

from __future__ import annotations

import functools

__all__ = ["MAX_NESTING", "MAX_VALUES", "MAX_INT_DIGITS", "FLOAT_MAX", "int_problem",
           "DENSE_COPIES", "MAX_SPARSE_STATES", "physical_memory", "memory_budget",
           "dense_state_limit", "sparse_entry_limit",
           "int_value", "MAX_MATRIX_FILE_BYTES", "MAX_MATRIX_ENTRIES"]

#: Largest referenced matrix file read, in bytes (a dense 4000×4000 float64 matrix is 128 MB).
MAX_MATRIX_FILE_BYTES = 256 * 1024 * 1024
#: Most entries a referenced matrix may hold: the largest state matrix a model may have
#: (model.MAX_STATES squared). Checked from file headers before any data is read.
MAX_MATRIX_ENTRIES = 4000 * 4000
#: Deepest nesting of lists and mappings accepted; parsers recurse, so this bounds the stack.
MAX_NESTING = 64
#: Most values a YAML document may expand to through aliases (stops "billion laughs" files).
MAX_VALUES = 10_000_000

#: Integers longer than this (in digits) are checked against the largest float (about 1.8e308):
#: the ints of a model file become floats. Python refuses strings of more than 4300 digits.
MAX_INT_DIGITS = 308


def int_problem(value: int | None, digits: int) -> str | None:
    """Why an integer cannot become a float (None: it can); ``value`` None when too long to
    convert at all."""
    if value is None or abs(value) > FLOAT_MAX:
        return (f"is an integer with {digits} digits, too large for a floating-point number "
                "(the largest is about 1.8e308)")
    return None


FLOAT_MAX = 1.7976931348623157e308


def int_value(value: str) -> int | None:
    """A core-schema int's value; None when it has more digits than any float could hold."""
    body = value.lstrip("+-")
    if len(body) > MAX_INT_DIGITS + 2:
        return None
    if body.startswith(("0o", "0x")):
        return int(body[2:], 8 if body[1] == "o" else 16)
    return int(value)


# ---------------------------------------------------------------- memory-derived limits

#: Dense float64 n×n copies the dense modal analysis holds at its peak: the matrix and its
#: balanced copy (1 each), right and left eigenvectors, the residual and the E-weighted left
#: vectors (complex: 2 each), participation factors (1), LAPACK's Hessenberg/Schur work (2).
DENSE_COPIES = 12
#: Share of the machine's physical memory a single model may plan to use.
MEMORY_FRACTION = 0.25
#: Bytes a stored nonzero of a sparse matrix costs while it is read and converted: the
#: triplet (two 8-byte indices and the value) plus the compressed copy (value, 4-byte index).
SPARSE_ENTRY_BYTES = 36
#: Most states of a sparse model (its index arrays stay 32-bit; 10⁷ is far past what the
#: shift-invert search of :mod:`eigengate.analysis.sparse_modes` does in minutes).
MAX_SPARSE_STATES = 10_000_000


def physical_memory() -> int:
    """Physical memory of the machine in bytes (8 GiB when the system does not say)."""
    return _physical_memory()


@functools.lru_cache(maxsize=1)
def _physical_memory() -> int:
    """:func:`physical_memory`, asked of the system once per process (it does not change
    while the process runs; tests replace :func:`physical_memory` itself)."""
    import os

    try:
        pages, size = os.sysconf("SC_PHYS_PAGES"), os.sysconf("SC_PAGE_SIZE")
    except (AttributeError, ValueError, OSError):  # pragma: no cover - not POSIX
        return 8 << 30
    return int(pages) * int(size) if pages > 0 and size > 0 else 8 << 30


def memory_budget() -> int:
    """Bytes one model may plan to use: :data:`MEMORY_FRACTION` of physical memory."""
    return int(MEMORY_FRACTION * physical_memory())


def dense_state_limit(cap: int) -> int:
    """Most states the dense analysis takes here: ``cap`` (the time limit) or fewer, so that
    :data:`DENSE_COPIES` dense float64 copies of n×n fit in :func:`memory_budget`."""
    import math

    return max(1, min(cap, math.isqrt(memory_budget() // (8 * DENSE_COPIES))))


def sparse_entry_limit() -> int:
    """Most stored nonzeros a sparse matrix may declare here (memory budget)."""
    return max(1, memory_budget() // SPARSE_ENTRY_BYTES)
