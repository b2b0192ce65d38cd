"""The models a set of changed files touches, for a pre-commit hook that is handed every
changed file (``eigengate check --changed-files``).

Public API::

    changed_scope(changed, config, *, use_cache=True) -> ChangeScope

* A changed **policy** (an ``eigengate.toml``, the configuration's own ``pyproject.toml``, or
  any ``pyproject.toml`` with a ``[tool.eigengate]`` table) changes how every model is
  judged: the whole repository is checked.
* A changed **model file** is checked.
* Any other changed file (a ``.npz``/``.mat``/``.csv`` matrix file, a vector-field module,
  a file that was deleted) checks the model files that depend on it: those whose last
  analysis referenced it (the result cache records every referenced file), and, with or
  without a cache, those a cheap scan finds: a model file whose text names the changed
  file's base name (how references are written), and, for a changed ``.py`` file, every
  model file with a ``vector_field`` block (its module may import the changed one). The scan
  errs on the side of checking more, never less.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import TYPE_CHECKING, Sequence

if TYPE_CHECKING:  # pragma: no cover
    from .config import Config

__all__ = ["ChangeScope", "changed_scope", "POLICY_FILES"]

POLICY_FILES = ("pyproject.toml", "eigengate.toml")
#: A model file larger than this is not scanned for references but checked anyway.
_SCAN_BYTES = 16 << 20


@dataclass(frozen=True)
class ChangeScope:
    """What to check for a set of changed files: model file paths, or everything."""

    paths: tuple[str, ...]
    everything: bool
    dependents: tuple[str, ...] = ()  # model files checked because a file they use changed


def _is_policy(full: str, config: "Config") -> bool:
    name = os.path.basename(full)
    if name == "eigengate.toml":
        return True
    if name != "pyproject.toml":
        return False
    if os.path.realpath(full) == os.path.realpath(os.path.join(config.root, name)):
        return True  # the configuration's own file, even when its table was just removed
    try:
        with open(full, "rb") as fh:
            return b"tool.eigengate" in fh.read(_SCAN_BYTES)
    except OSError:
        return False


def changed_scope(changed: Sequence[str | os.PathLike[str]], config: "Config", *,
                  use_cache: bool = True) -> ChangeScope:
    """The model files to check when ``changed`` (paths as given: existing or deleted) changed;
    see the module docstring."""
    from .discovery import find_model_files

    root = os.path.realpath(config.root)
    models: list[str] = []
    others: set[str] = set()
    for p in changed:
        full = os.fspath(p)
        if _is_policy(full, config):
            return ChangeScope((os.fspath(config.root),), True)
        if os.path.isfile(full):
            found = find_model_files([full], config, filter_named=True)
            if found:
                models.append(full)
                continue
        rel = os.path.relpath(os.path.realpath(full), root).replace(os.sep, "/")
        if not rel.startswith("../") and rel != "..":
            others.add(rel)
    if not others:
        return ChangeScope(tuple(models), False)
    cache = None
    if use_cache:
        from .cache import ResultCache

        cache = ResultCache(config.root, config.digest)
    names = {os.path.basename(o).encode("utf-8", "surrogateescape") for o in others
             if not o.endswith(".py")}
    python = any(o.endswith(".py") for o in others)
    chosen = {os.path.realpath(m) for m in models}
    dependents: list[str] = []
    for f in find_model_files([config.root], config):
        if os.path.realpath(f.path) in chosen:
            continue
        content = _content(f)
        if content is None:  # unreadable or too large to scan: check it rather than guess
            dependents.append(f.path)
            continue
        recorded = cache.references(f.rel, content) if cache is not None else None
        if others.intersection(recorded or ()) or (python and b"vector_field" in content) \
                or any(n in content for n in names):
            dependents.append(f.path)
    return ChangeScope(tuple(models + dependents), False, tuple(dependents))


def _content(found) -> bytes | None:
    if found.content is not None:
        return found.content
    try:
        if os.path.getsize(found.path) > _SCAN_BYTES:
            return None
        with open(found.path, "rb") as fh:
            return fh.read()
    except OSError:
        return None
