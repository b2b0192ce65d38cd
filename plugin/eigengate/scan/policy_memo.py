"""The repository policy's table remembered by its file's status, so that a check of an
unchanged repository need not parse TOML (nor import the TOML reader: a tenth of a check
answered by the report memo).

After a check reads the top-level policy file (``pyproject.toml`` or ``eigengate.toml``)
whose status (size, modification and change times, inode) is two seconds old or more, and
whose table holds only strings, numbers, booleans, arrays and tables (what JSON holds
exactly), the table is kept in the result cache's folder, when there is one, under that
status. The next check that finds the file with the same status takes the table from there.
The file is checked like the report memo (a checksum; a damaged one is ignored and written
again), and a status that differs in any field means the file is parsed as usual: the
trust is the report memo's own (see :mod:`eigengate.scan.report_memo`).
"""

from __future__ import annotations

import os
import time

from . import status_records
from .cache_format import CACHE_DIR, FORMAT
from .checked_json import read_checked, write_checked
from .status_records import signature

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any

__all__ = ["recall", "keep"]

_MAGIC = b"eigengate policy table\n"
#: The remembered table of a policy file larger than this is not kept.
MAX_BYTES = 1 << 20


def _where(path: str) -> str:
    return os.path.join(os.path.dirname(path), CACHE_DIR, f"v{FORMAT}", "policy.table")


def recall(path: str, st: os.stat_result | None) -> dict | None:
    """The table kept for the policy file at ``path`` (absolute, links resolved) when
    ``st`` is the status it was kept with; None otherwise."""
    if st is None:
        return None
    kept = read_checked(_where(path), _MAGIC, MAX_BYTES)
    if type(kept) is not dict or kept.get("path") != path \
            or kept.get("status") != signature(st) or type(kept.get("table")) is not dict:
        return None
    return kept["table"]


def keep(path: str, st: os.stat_result | None, table: Any) -> None:
    """Keep ``table``, read from the policy file at ``path`` with status ``st`` (taken
    before it was read), when the cache folder exists, the status can be trusted and JSON
    holds the table exactly; failures are ignored (what is kept is optional)."""
    if st is None or type(table) is not dict or not _plain(table):
        return
    if max(st.st_mtime_ns, st.st_ctime_ns) >= time.time_ns() - status_records.RACY_NS:
        return  # changed too recently: a change within the same tick would not show
    if not os.path.isdir(os.path.join(os.path.dirname(path), CACHE_DIR)):
        return  # no cache in use here: nothing is written for it
    record = {"path": path, "status": signature(st), "table": table}
    if read_checked(_where(path), _MAGIC, MAX_BYTES) != record:
        write_checked(_where(path), _MAGIC, MAX_BYTES, record)


def _plain(value: Any) -> bool:
    """Whether JSON gives ``value`` back exactly: no dates or times (which TOML has)."""
    kind = type(value)
    if kind in (str, int, float, bool):
        return True
    if kind is list:
        return all(_plain(v) for v in value)
    if kind is dict:
        return all(type(k) is str and _plain(v) for k, v in value.items())
    return False
