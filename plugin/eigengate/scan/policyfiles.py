"""Policy files: where they are (``eigengate.toml``, or a ``pyproject.toml`` with a
``[tool.eigengate]`` table), the outermost one at or above a folder, and reading their table."""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import EigengateError

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any

__all__ = ["ConfigError", "find_config", "find_top_config", "policy_file", "read_table"]


class ConfigError(EigengateError, ValueError):
    """A configuration value is wrong: names the file, the key, the value and what is expected."""

    def __init__(self, source: str, key: str, problem: str, hint: str | None = None) -> None:
        self.source, self.key, self.problem, self.hint = source, key, problem, hint
        text = f"{source}: [tool.eigengate] {key} {problem}" if source.endswith(
            "pyproject.toml") else f"{source}: {key} {problem}"
        super().__init__(text + (f" ({hint})" if hint else ""))


def find_config(start: Path) -> Path | None:
    """Nearest pyproject.toml with a ``[tool.eigengate]`` table, or eigengate.toml, at or above
    ``start``."""
    start = start.resolve()
    for folder in (start, *start.parents) if start.is_dir() else (start.parent,
                                                                  *start.parent.parents):
        found = policy_file(folder)
        if found is not None:
            return found
    return None


def find_top_config(start: Path) -> Path | None:
    """The outermost policy file at or above ``start``, up to the folder holding ``.git``:
    the one whose folder every model source is relative to (nested policies below it judge
    their own folders)."""
    top = find_config(start)
    folder = None if top is None else top.parent
    while folder is not None and not (folder / ".git").exists() and folder.parent != folder:
        folder = folder.parent
        top = policy_file(folder) or top
    return top


def policy_file(folder: Path) -> Path | None:
    """The policy file of ``folder``: eigengate.toml, or a pyproject.toml that has a
    [tool.eigengate] table."""
    own = folder / "eigengate.toml"
    if own.is_file():
        return own
    py = folder / "pyproject.toml"
    if py.is_file():
        try:
            raw = py.read_bytes()
        except OSError:
            return None
        if b"tool.eigengate" in raw:  # even when not UTF-8: load_config says what is wrong,
            return py                 # rather than the policy being ignored without a word
    return None


def _toml_loads(text: str):
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover - exercised on Python 3.10
        import tomli as tomllib
    return tomllib.loads(text)


def read_table(path: Path, shown: str, *, remember: bool = False) -> Any:
    """The eigengate table of policy file ``path`` (``shown`` in messages). ``remember``:
    take it from, or keep it in, the table remembered by the file's status
    (:mod:`eigengate.scan.policy_memo`)."""
    if remember:
        import os

        from .policy_memo import keep, recall

        real = os.path.realpath(path)
        try:
            st: os.stat_result | None = os.stat(real)  # before it is read
        except OSError:
            st = None
        table = recall(real, st)
        if table is not None:
            return table
        table = read_table(path, shown)
        keep(real, st, table)
        return table
    try:
        table = _toml_loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ConfigError(shown, "", "does not exist") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(shown, "", f"cannot be read: {exc}") from None
    except ValueError as exc:  # tomllib.TOMLDecodeError
        raise ConfigError(shown, "", f"is not valid TOML: {exc}") from None
    if path.name == "pyproject.toml":
        table = table.get("tool", {}).get("eigengate", {})
    return table
