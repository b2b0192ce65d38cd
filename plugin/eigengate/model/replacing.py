"""A changed copy of a model, made cheaply.

``dataclasses.replace`` reads every field and calls the frozen ``__init__``, which sets each of
a :class:`~eigengate.model.core.Model`'s thirty fields with ``object.__setattr__``: for a model
of a few states that costs about as much as a tenth of its modal analysis. A Model has no
``__post_init__`` and every field is an ``__init__`` argument, so copying its fields gives the
same model; :func:`replaced` does that, and leaves anything else to ``dataclasses.replace``.
"""

from __future__ import annotations

import functools
from typing import Any

from .core import Model

__all__ = ["replaced"]


@functools.lru_cache(maxsize=1)
def _field_names() -> frozenset[str]:
    import dataclasses

    return frozenset(f.name for f in dataclasses.fields(Model))


def replaced(model: Model, **changes: Any) -> Model:
    """``dataclasses.replace(model, **changes)``; a subclass of Model (the cache's lazily read
    one), or a name that is no field, goes through ``dataclasses.replace`` itself."""
    if type(model) is not Model or not _field_names().issuperset(changes):
        import dataclasses

        return dataclasses.replace(model, **changes)
    new = object.__new__(Model)
    fields = new.__dict__
    fields.update(model.__dict__)
    fields.update(changes)
    return new
