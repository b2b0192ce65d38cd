"""A frozen record without :mod:`dataclasses`: for the policy, which a check answered by the
report memo builds and which must therefore not pull in ``dataclasses`` (and ``inspect``,
``ast`` and ``dis`` with it: a tenth of such a check's time)."""

from __future__ import annotations

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any, Callable, ClassVar


__all__ = ["Frozen", "factory"]


class factory:  # noqa: N801 - used like dataclasses.field(default_factory=...)
    """A default made afresh for every record (a dict, say)."""

    __slots__ = ("make",)

    def __init__(self, make: Callable[[], Any]) -> None:
        self.make = make


class Frozen:
    """Fields in ``FIELDS`` order as ``(name, default, compared)``, a default being a value,
    :class:`factory`, or ``Frozen.REQUIRED``; keyword or positional construction, equality
    and hash over the compared fields, a repr of those, and no assignment afterwards
    (``object.__setattr__`` for what a record completes itself)."""

    REQUIRED: ClassVar[object] = object()
    FIELDS: ClassVar[tuple[tuple[str, Any, bool], ...]] = ()

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        cls = type(self)
        fields = cls.FIELDS
        if len(args) > len(fields):
            raise TypeError(f"{cls.__name__} takes at most {len(fields)} positional arguments")
        given = dict(zip((f[0] for f in fields), args))
        for name in kwargs:
            if name in given:
                raise TypeError(f"{cls.__name__} got multiple values for {name!r}")
        given.update(kwargs)
        setter = object.__setattr__
        for name, default, _ in fields:
            if name in given:
                setter(self, name, given.pop(name))
            elif default is Frozen.REQUIRED:
                raise TypeError(f"{cls.__name__} needs {name!r}")
            else:
                setter(self, name, default.make() if type(default) is factory else default)
        if given:
            raise TypeError(f"{cls.__name__} has no field {next(iter(given))!r}")

    def __setattr__(self, name: str, value: Any) -> None:
        raise AttributeError(f"cannot assign to field {name!r} of a frozen "
                             f"{type(self).__name__}")

    def __delattr__(self, name: str) -> None:
        raise AttributeError(f"cannot delete field {name!r} of a frozen {type(self).__name__}")

    def _compared(self) -> tuple:
        return tuple(getattr(self, name) for name, _, compared in self.FIELDS if compared)

    def __eq__(self, other: object) -> bool:
        if type(other) is not type(self):
            return NotImplemented
        return self._compared() == other._compared()  # type: ignore[attr-defined]

    def __hash__(self) -> int:
        return hash(self._compared())

    def __repr__(self) -> str:
        shown = ", ".join(f"{name}={getattr(self, name)!r}" for name, _, compared in self.FIELDS
                          if compared)
        return f"{type(self).__name__}({shown})"
