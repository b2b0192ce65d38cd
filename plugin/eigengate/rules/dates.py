"""The date waivers are judged on (its own module: a check answered by the report memo needs
it, and nothing else of the waivers)."""

from __future__ import annotations

import os

from ..errors import ModelError

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    import datetime

__all__ = ["today", "today_iso"]


def today() -> "datetime.date":
    """The date waivers are judged on: ``EIGENGATE_TODAY`` (YYYY-MM-DD) when set, for
    reproducible runs and tests, else the local date."""
    import datetime as _dt

    value = os.environ.get("EIGENGATE_TODAY")
    if value:
        try:
            return _dt.date.fromisoformat(value)
        except ValueError:
            raise ModelError("EIGENGATE_TODAY", "", f"must be a date YYYY-MM-DD, got {value!r}") \
                from None
    return _dt.date.today()


def today_iso() -> str:
    """``today().isoformat()``; the local date without importing :mod:`datetime` (as
    ``datetime.date.today`` takes it: the local time of ``time.time()``)."""
    if os.environ.get("EIGENGATE_TODAY"):
        return today().isoformat()
    import time

    now = time.localtime()
    return f"{now.tm_year:04d}-{now.tm_mon:02d}-{now.tm_mday:02d}"
