"""Checks of a policy's values (lists of globs, levels, requirement layers, drift tolerances,
a cluster address): each a ConfigError naming the file, the key, what was found and what
was expected."""

from __future__ import annotations


from .policyfiles import ConfigError

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any, Sequence
    from ..rules.requirements import Requirement

__all__ = ["cluster_address", "CLUSTER_SCHEMES"]

Layer = tuple[tuple["Requirement", ...], tuple[str, ...]]

#: The Dask comm schemes an address may name.
CLUSTER_SCHEMES = ("tcp", "tls", "ws", "wss", "ucx")


def cluster_address(value: Any) -> str:
    """``value`` checked as a Dask scheduler address (``tcp://host:8786``); ValueError with
    what is wrong otherwise."""
    import re

    if not isinstance(value, str) or not re.fullmatch(
            r"(?:%s)://[^\s/]+" % "|".join(CLUSTER_SCHEMES), value):
        raise ValueError(f"must be a Dask scheduler address SCHEME://HOST:PORT with SCHEME "
                         f"one of {', '.join(CLUSTER_SCHEMES)}, got {value!r}")
    return value


def _strings(value: Any, source: str, key: str) -> tuple[str, ...]:
    if isinstance(value, str):  # `include = "models/*.yaml"`: a list was meant
        raise ConfigError(source, key, f"must be a list of strings, got the string {value!r}",
                          f"write {key.rsplit('.', 1)[-1]} = [{_quoted(value)}]")
    if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
        raise ConfigError(source, key, f"must be a list of non-empty strings, got {value!r}")
    return tuple(value)


def _quoted(value: str) -> str:
    import json

    return json.dumps(value, ensure_ascii=False)


def _unknown(key: str, allowed: Sequence[str], source: str, where: str) -> ConfigError:
    import difflib  # only for a mistake: not on every run

    close = difflib.get_close_matches(key, allowed, n=1)
    hint = f"did you mean {close[0]!r}?" if close else "known keys: " + ", ".join(allowed)
    return ConfigError(source, f"{where}{key}", "is not a known key", hint)


def _policy(value: Any, source: str, key: str) -> str:
    allowed = ("certified", "estimated") if key.endswith("require") else ("fail", "pass")
    if value not in allowed:
        raise ConfigError(source, key, f"must be '{allowed[0]}' or '{allowed[1]}', got {value!r}")
    return value


def _layer(value: Any, source: str, key: str) -> Layer:
    from ..rules.parsing import parse_requirement_layer
    from ..errors import ModelError

    try:
        return parse_requirement_layer(value, source, f"{key}.", {})
    except ModelError as exc:
        raise ConfigError(source, exc.field, exc.problem, exc.hint) from None


def _drift(value: Any, source: str, key: str) -> None:
    from ..errors import ModelError
    from ..baseline.tolerances import parse_tolerances

    try:
        parse_tolerances(value, source, f"{key}.")
    except ModelError as exc:
        raise ConfigError(source, exc.field, exc.problem, exc.hint) from None
