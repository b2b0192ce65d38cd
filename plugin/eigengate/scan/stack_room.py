"""Run a call with room on the interpreter's frame stack, so that deep calls inside it (a lazy
``import numpy`` halfway down a scan, say) do not map and unmap memory over and over.

CPython 3.11 and later keep the frames of Python functions in chunks of 16 KiB that it maps
when a call does not fit in the current one and unmaps as soon as the call returns below it.
A call path that goes back and forth across such a boundary pays a fresh mapping, its page
faults and an unmapping each time: the import of numpy, which a check makes deep in the scan,
did so about a thousand times (measured with ``strace -c``: 1,074 to 1,750 ``munmap`` calls
in a cold check of one file, depending only on how deep the console script's own frames
happened to be, against 15 for a script importing numpy at its top), which cost 35 to 50 ms
of a 160 ms run.

:func:`roomy_call` calls ``fn`` from a frame that asks for a large value stack: CPython puts
that frame at the start of a chunk of 128 KiB of its own, and ``fn`` and everything it calls
(about 9,000 slots, hundreds of frames deep) fit in the rest of it, where no boundary is
crossed. The chunk is mapped once and stays until ``fn`` returns. Elsewhere (an interpreter
whose code objects cannot be rebuilt so, or that keeps frames otherwise) the frame is an
ordinary one: only the speed differs, never the result.
"""

from __future__ import annotations

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any, Callable

__all__ = ["roomy_call"]

#: Slots of value stack the calling frame asks for: with the frame's own few and CPython's
#: reserve of 1,000 slots more than 64 KiB, so its chunk is 128 KiB, about 72 KiB of it
#: left for the call below.
_SLOTS = 7200


def _call(fn: Callable[..., Any], args: tuple, kwargs: dict) -> Any:
    return fn(*args, **kwargs)


try:
    _call.__code__ = _call.__code__.replace(co_stacksize=_SLOTS)
except (AttributeError, TypeError, ValueError):  # pragma: no cover - another interpreter
    pass


def roomy_call(fn: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
    """``fn(*args, **kwargs)``, from a frame with room below it (see the module docstring)."""
    return _call(fn, args, kwargs)
