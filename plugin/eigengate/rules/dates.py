"""The date waivers are judged on (its own module: a check answered by the report memo needs
it, and nothing else of the waivers)."""

from __future__ import annotations

import datetime as _dt
import os

from ..errors import ModelError

__all__ = ["today"]


def today() -> _dt.date:
    """The date waivers are judged on: ``EIGENGATE_TODAY`` (YYYY-MM-DD) when set, for
    reproducible runs and tests, else the local date."""
    value = os.environ.get("EIGENGATE_TODAY")
    if value:
        try:
            return _dt.date.fromisoformat(value)
        except ValueError:
            raise ModelError("EIGENGATE_TODAY", "", f"must be a date YYYY-MM-DD, got {value!r}") \
                from None
    return _dt.date.today()
