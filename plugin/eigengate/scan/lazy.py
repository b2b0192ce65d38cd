"""Fields of cached objects built on first read (:mod:`eigengate.scan.serial`,
:mod:`eigengate.scan.summary`)."""

from __future__ import annotations

__all__ = ["LazyField"]


class LazyField:
    """A field read from its object's ``__dict__``. One not there yet is built from what the
    object's ``_stored`` keeps for it by its class's ``LOADERS`` (then kept); when the object
    has no ``_stored`` (a cached result, model or spectrum built from its entry's summary),
    its ``_fill`` sets its fields from the whole record first. A plain (non-data)
    descriptor: a field once in ``__dict__`` is read without calling it, and unlike
    ``functools.cached_property`` no lock is taken on a first read."""

    __slots__ = ("name",)

    def __init__(self, name: str) -> None:
        self.name = name

    def __get__(self, obj, owner=None):
        if obj is None:
            return self
        fields = obj.__dict__
        try:
            return fields[self.name]
        except KeyError:
            pass
        if "_stored" not in fields:
            fields["_fill"](obj)  # sets every field, or _stored for the ones read later
            if self.name in fields:
                return fields[self.name]
        value = fields[self.name] = type(obj).LOADERS[self.name](fields["_stored"][self.name])
        return value
