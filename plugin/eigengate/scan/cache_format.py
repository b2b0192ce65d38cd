"""What names the result cache's files: its folder, its format number, a model file's name
in it. Kept apart from the cache itself so that a check answered by the report memo
(:mod:`eigengate.scan.report_memo`) imports nothing more."""

from __future__ import annotations

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time


if TYPE_CHECKING:  # pragma: no cover - the shape cache_name reads of a configuration
    from typing import Protocol

    class _Policies(Protocol):
        """What :func:`cache_name` reads of a :class:`~eigengate.scan.config.Config` (named
        by its shape, so that this module imports no configuration module)."""

        digest: str

        def policy_for(self, rel: str) -> "_Policies": ...

__all__ = ["CACHE_DIR", "FORMAT", "cache_name"]

CACHE_DIR = ".eigengate-cache"
FORMAT = 11  # 8: mode names; 9: results carry their pictures (plot data); 10: summaries;
#         11: the rest of the data one positional JSON text, blobs as bytes (scan.encode)


def cache_name(config: "_Policies", rel: str) -> str:
    """A model file's name in the cache: its path, qualified by the digest of the nested
    policy that judges it (so adding, changing or removing one is never served stale)."""
    policy = config.policy_for(rel)
    return rel if policy is config else f"{rel}\0{policy.digest}"

