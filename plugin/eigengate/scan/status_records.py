"""A file's status record, as the result cache and the report memo keep it: ``[size,
modification time, change time, inode, value]`` (the value a key, a hash, or what its content
said), answered only for a file whose status is still the one recorded."""

from __future__ import annotations

import os

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any

__all__ = ["RACY_NS", "signature", "is_record", "record_value"]

#: A file changed this soon before a check began could change again within the same
#: timestamp tick without its status showing it: its status is not recorded.
RACY_NS = 2_000_000_000


def signature(st: os.stat_result) -> list[int]:
    """What of a file's status its record holds."""
    return [st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino]


def is_record(row: Any) -> bool:
    """Whether ``row`` has the shape of a status record."""
    return type(row) is list and len(row) == 5 and type(row[4]) is str


def record_value(row: Any, st: os.stat_result | None) -> str | None:
    """The value of status record ``row`` when ``st`` is the status it recorded, else None
    (compared field by field: a no-change check asks this of every file)."""
    if st is not None and type(row) is list and len(row) == 5 and row[0] == st.st_size \
            and row[1] == st.st_mtime_ns and row[2] == st.st_ctime_ns \
            and row[3] == st.st_ino and type(row[4]) is str:
        return row[4]
    return None
