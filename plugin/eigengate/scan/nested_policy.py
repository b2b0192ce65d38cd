"""What a nested policy (a ``pyproject.toml`` or ``eigengate.toml`` in a folder below the root)
changes of the keys it sets: its globs and baseline made relative to the root, and with
``extend = true`` what it leaves unset taken from its parent. Kept apart from
:mod:`eigengate.scan.config`, which builds the policies."""

from __future__ import annotations

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any

__all__ = ["DEFAULT_BASELINE", "local_glob", "nest_keys", "inherit_keys"]

DEFAULT_BASELINE = ".eigengate/baseline.json"


def _rebase(pattern: str, base: str) -> str:
    """A glob of a nested policy (relative to its folder ``base``) relative to the root."""
    if not base:
        return pattern
    pattern = pattern.strip("/")
    if "/" not in pattern:  # a bare name matches in any folder below the policy's
        pattern = "**/" + pattern
    return f"{base}/{pattern}"


def local_glob(pattern: str, base: str) -> str:
    """A glob relative to the root as the nested policy at ``base`` writes it."""
    return pattern[len(base) + 1:] if base and pattern.startswith(base + "/") else pattern


def nest_keys(kw: dict[str, Any], base: str, source: str) -> None:
    """A nested policy's globs and baseline, made relative to the root."""
    from dataclasses import replace

    for key in ("include", "exclude"):
        if key in kw:
            kw[key] = tuple(_rebase(p, base) for p in kw[key])
    kw["overrides"] = tuple(replace(o, paths=tuple(_rebase(p, base) for p in o.paths))
                            for o in kw.get("overrides", ()))
    kw["waivers"] = tuple(replace(w, paths=tuple(_rebase(p, base) for p in w.paths))
                          for w in kw.get("waivers", ()))
    kw["baseline"] = f"{base}/{kw.get('baseline', DEFAULT_BASELINE)}"
    kw["base"] = base


def inherit_keys(kw: dict[str, Any], parent: Any) -> None:
    """``extend = true``: what the policy does not set comes from its parent; requirements
    and overrides layer on the parent's (a :class:`~eigengate.scan.config.Config`); include,
    exclude, waivers and baseline stay its own."""
    for key in ("on_uncertain", "require", "select", "ignore", "allow_python", "allowed_drift",
                "waiver_warning_days"):
        kw.setdefault(key, getattr(parent, key))
    kw["severity"] = {**parent.severity, **kw.get("severity", {})}
    kw["overrides"] = parent.overrides + tuple(kw.get("overrides", ()))
    kw["inherited"] = parent.inherited + (parent.complete().requirements,)
