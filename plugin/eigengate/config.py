"""Repository policy: ``[tool.eigengate]`` in pyproject.toml (or a top-level ``eigengate.toml``).

One configuration drives the command line and the pytest collector, so both agree on every
verdict. Keys::

    include = ["models/**/*.yaml"]     # model files (default: any .yaml/.yml/.toml/.json
                                       #   file whose text has a model_format key)
    exclude = ["models/attic/**"]
    on_uncertain = "fail"              # default for models that do not say
    require = "certified"              # optional: verdicts only estimated count as uncertain
    select = ["EG1"]                   # rule ids or id prefixes to report (default: all)
    ignore = ["EG104"]
    allow_python = false               # CLI: may model files import project code (nonlinear)
    [tool.eigengate.requirements]      # defaults for every model
    stable = true
    [tool.eigengate.severity]          # per rule: "error" (default), "warning" or "off"
    EG104 = "warning"
    [[tool.eigengate.overrides]]       # per path: later entries win, the model file wins last
    paths = ["models/mast/**"]
    requirements = { min_damping = 0.2 }
    on_uncertain = "pass"
    baseline = ".eigengate/baseline.json"   # the accepted modes (eigengate baseline accept)
    [tool.eigengate.allowed_drift]     # regression tolerances (also per override, per model)
    damping = { abs = 0.01, rel = 0.05 }
    [[tool.eigengate.waivers]]         # accepted findings: rule, reason, optional expiry,
    rule = "EG103"                     #   model name and operating-point label
    paths = ["models/legacy/**"]
    reason = "legacy airframe, replaced in the next release"
    expires = 2027-06-30

Requirement layers apply in order: repository defaults, each matching override, the model
file's own ``requirements:``; each layer replaces rules of the same id and may switch one off
with ``false``.
"""

from __future__ import annotations

import difflib
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping, Sequence

from ._glob import glob_match
from .errors import EigengateError

if TYPE_CHECKING:  # pragma: no cover
    from .model import Model
    from .requirements import Requirement
    from .waivers import Waiver

__all__ = ["Config", "ConfigError", "Override", "load_config", "find_config", "CONFIG_KEYS"]

CONFIG_KEYS = ("include", "exclude", "on_uncertain", "require", "select", "ignore", "requirements",
               "severity", "overrides", "waivers", "allow_python", "baseline", "allowed_drift")
OVERRIDE_KEYS = ("paths", "requirements", "on_uncertain", "require", "allowed_drift")
SEVERITIES = ("error", "warning", "off")


class ConfigError(EigengateError, ValueError):
    """A configuration value is wrong: names the file, the key, the value and what is expected."""

    def __init__(self, source: str, key: str, problem: str, hint: str | None = None) -> None:
        self.source, self.key, self.problem, self.hint = source, key, problem, hint
        text = f"{source}: [tool.eigengate] {key} {problem}" if source.endswith(
            "pyproject.toml") else f"{source}: {key} {problem}"
        super().__init__(text + (f" ({hint})" if hint else ""))


Layer = tuple[tuple["Requirement", ...], tuple[str, ...]]


@dataclass(frozen=True)
class Override:
    """Requirements and policy for the model files matching ``paths``."""

    paths: tuple[str, ...]
    requirements: Layer = ((), ())
    on_uncertain: str | None = None
    allowed_drift: Mapping[str, Any] | None = None
    require: str | None = None

    def applies(self, rel: str) -> bool:
        return any(glob_match(rel, p) for p in self.paths)


@dataclass(frozen=True)
class Config:
    """The effective repository policy."""

    root: Path
    source: str | None = None
    include: tuple[str, ...] = ()
    exclude: tuple[str, ...] = ()
    on_uncertain: str | None = None
    require: str | None = None
    select: tuple[str, ...] = ()
    ignore: tuple[str, ...] = ()
    requirements: Layer = ((), ())
    severity: Mapping[str, str] = field(default_factory=dict)
    overrides: tuple[Override, ...] = ()
    waivers: tuple["Waiver", ...] = ()
    allow_python: bool = False
    baseline: str = ".eigengate/baseline.json"  # repository-relative path of the baseline
    allowed_drift: Mapping[str, Any] | None = None
    digest: str = ""  # hash of the configuration table, part of every cache key

    # ------------------------------------------------------------------ selection
    def is_model_path(self, rel: str) -> bool:
        """Whether repository-relative ``rel`` is configured as a model file."""
        if any(glob_match(rel, p) for p in self.exclude):
            return False
        if self.include:
            return any(glob_match(rel, p) for p in self.include)
        return True

    def rule_enabled(self, rule: str) -> bool:
        if self.severity.get(rule) == "off":
            return False
        if any(rule.startswith(p) for p in self.ignore):
            return False
        return not self.select or any(rule.startswith(p) for p in self.select)

    def severity_of(self, rule: str) -> str:
        return self.severity.get(rule, "error")

    @property
    def baseline_path(self) -> Path:
        return self.root / self.baseline

    def tolerances_for(self, result: Any):
        """Regression tolerances of a model: defaults, the policy's ``allowed_drift``, each
        matching override's, then the model file's own."""
        from .regressions import parse_tolerances

        model = result.model
        tol = None
        layers = [(self.source or "pyproject.toml", "allowed_drift.", self.allowed_drift)]
        layers += [(self.source or "pyproject.toml", f"overrides[{i}].allowed_drift.",
                    o.allowed_drift) for i, o in enumerate(self.overrides)
                   if o.allowed_drift is not None and o.applies(model.source)]
        layers.append((model.source, "allowed_drift.", model.allowed_drift))
        for source, prefix, value in layers:
            if value is not None:
                tol = parse_tolerances(value, source, prefix, base=tol)
        return tol

    def waivers_for(self, rel: str) -> tuple["Waiver", ...]:
        if not self.waivers:
            return ()
        from ._glob import glob_match as match

        return tuple(w for w in self.waivers if any(match(rel, p) for p in w.paths))

    # ------------------------------------------------------------------ requirements
    def layers_for(self, rel: str) -> list[Layer]:
        return [self.requirements] + [o.requirements for o in self.overrides if o.applies(rel)]

    def on_uncertain_for(self, rel: str) -> str | None:
        return self._policy_for(rel, "on_uncertain")

    def require_for(self, rel: str) -> str | None:
        """``"certified"`` where the policy requires certified verdicts for ``rel``."""
        return self._policy_for(rel, "require")

    def _policy_for(self, rel: str, key: str) -> str | None:
        value = getattr(self, key)
        for o in self.overrides:
            if getattr(o, key) is not None and o.applies(rel):
                value = getattr(o, key)
        return value

    def effective(self, model: "Model") -> "Model":
        """``model`` with the repository layers applied below its own requirements."""
        from dataclasses import replace

        from .requirements import apply_layers

        layers = self.layers_for(model.source) + [(model.requirements, model.disabled)]
        reqs = tuple(r for r in apply_layers(layers) if self.rule_enabled(r.rule))
        return replace(model, requirements=reqs, disabled=(),
                       on_uncertain=model.on_uncertain or self.on_uncertain_for(model.source),
                       require=model.require or self.require_for(model.source))


def find_config(start: Path) -> Path | None:
    """Nearest pyproject.toml with a ``[tool.eigengate]`` table, or eigengate.toml, at or above
    ``start``."""
    start = start.resolve()
    for folder in (start, *start.parents) if start.is_dir() else (start.parent,
                                                                  *start.parent.parents):
        own = folder / "eigengate.toml"
        if own.is_file():
            return own
        py = folder / "pyproject.toml"
        if py.is_file():
            try:
                text = py.read_text(encoding="utf-8")
            except (OSError, UnicodeDecodeError):
                continue
            if "tool.eigengate" in text:
                return py
    return None


def _toml_loads(text: str):
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover - exercised on Python 3.10
        import tomli as tomllib
    return tomllib.loads(text)


def load_config(path: Path | None = None, *, start: Path | None = None) -> Config:
    """Read the configuration at ``path``, or discover it from ``start`` (default: cwd).

    Without a configuration file the root is the nearest folder with ``.git`` (or ``start``)
    and every default applies.
    """
    if path is None:
        path = find_config(start or Path.cwd())
    if path is None:
        from .loader import find_root

        base = (start or Path.cwd()).resolve()
        return Config(root=find_root(base / "_") if base.is_dir() else find_root(base))
    path = Path(path)
    shown = path.name
    try:
        table = _toml_loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ConfigError(str(path), "", "does not exist") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(str(path), "", f"cannot be read: {exc}") from None
    except ValueError as exc:  # tomllib.TOMLDecodeError
        raise ConfigError(str(path), "", f"is not valid TOML: {exc}") from None
    if path.name == "pyproject.toml":
        table = table.get("tool", {}).get("eigengate", {})
    return parse_config(table, root=path.resolve().parent, source=shown)


def _strings(value: Any, source: str, key: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
        raise ConfigError(source, key, f"must be a list of non-empty strings, got {value!r}")
    return tuple(value)


def _unknown(key: str, allowed: Sequence[str], source: str, where: str) -> ConfigError:
    close = difflib.get_close_matches(key, allowed, n=1)
    hint = f"did you mean {close[0]!r}?" if close else "known keys: " + ", ".join(allowed)
    return ConfigError(source, f"{where}{key}", "is not a known key", hint)


def _policy(value: Any, source: str, key: str) -> str:
    allowed = ("certified", "estimated") if key.endswith("require") else ("fail", "pass")
    if value not in allowed:
        raise ConfigError(source, key, f"must be '{allowed[0]}' or '{allowed[1]}', got {value!r}")
    return value


def _layer(value: Any, source: str, key: str) -> Layer:
    from ._reqparse import parse_requirement_layer
    from .errors import ModelError

    try:
        return parse_requirement_layer(value, source, f"{key}.", {})
    except ModelError as exc:
        raise ConfigError(source, exc.field, exc.problem, exc.hint) from None


def _drift(value: Any, source: str, key: str) -> None:
    from .errors import ModelError
    from .regressions import parse_tolerances

    try:
        parse_tolerances(value, source, f"{key}.")
    except ModelError as exc:
        raise ConfigError(source, exc.field, exc.problem, exc.hint) from None


def parse_config(table: Mapping[str, Any], *, root: Path, source: str = "pyproject.toml") -> Config:
    """Validate a ``[tool.eigengate]`` table (already parsed)."""
    from .rules import RULES

    if not isinstance(table, Mapping):
        raise ConfigError(source, "", f"must be a table, got {table!r}")
    for key in table:
        if key not in CONFIG_KEYS:
            raise _unknown(key, CONFIG_KEYS, source, "")
    kw: dict[str, Any] = {}
    for key in ("include", "exclude", "select", "ignore"):
        if key in table:
            kw[key] = _strings(table[key], source, key)
    for key in ("select", "ignore"):
        for prefix in kw.get(key, ()):
            if not any(r.startswith(prefix) for r in RULES):
                raise ConfigError(source, key, f"names no rule: {prefix!r}",
                                  "rule ids look like EG103; `eigengate rules` lists them")
    for key in ("on_uncertain", "require"):
        if key in table:
            kw[key] = _policy(table[key], source, key)
    if "allow_python" in table:
        if not isinstance(table["allow_python"], bool):
            raise ConfigError(source, "allow_python",
                              f"must be true or false, got {table['allow_python']!r}")
        kw["allow_python"] = table["allow_python"]
    if "requirements" in table:
        kw["requirements"] = _layer(table["requirements"], source, "requirements")
    if "severity" in table:
        sev = table["severity"]
        if not isinstance(sev, Mapping):
            raise ConfigError(source, "severity", f"must be a table of rule = level, got {sev!r}")
        for rule, level in sev.items():
            if rule not in RULES:
                raise _unknown(rule, sorted(RULES), source, "severity.")
            if level not in SEVERITIES:
                raise ConfigError(source, f"severity.{rule}",
                                  f"must be one of {', '.join(SEVERITIES)}, got {level!r}")
        kw["severity"] = dict(sev)
    if "overrides" in table:
        items = table["overrides"]
        if not isinstance(items, list):
            raise ConfigError(source, "overrides", "must be an array of tables "
                              f"([[tool.eigengate.overrides]]), got {items!r}")
        out = []
        for i, item in enumerate(items):
            where = f"overrides[{i}]."
            if not isinstance(item, Mapping):
                raise ConfigError(source, f"overrides[{i}]", f"must be a table, got {item!r}")
            for key in item:
                if key not in OVERRIDE_KEYS:
                    raise _unknown(key, OVERRIDE_KEYS, source, where)
            if "paths" not in item:
                raise ConfigError(source, f"{where}paths", "is required (globs of the model "
                                  "files this override applies to)")
            if "allowed_drift" in item:
                _drift(item["allowed_drift"], source, f"{where}allowed_drift")
            out.append(Override(
                allowed_drift=item.get("allowed_drift"),
                paths=_strings(item["paths"], source, f"{where}paths"),
                requirements=_layer(item.get("requirements", {}), source, f"{where}requirements"),
                on_uncertain=None if "on_uncertain" not in item else
                _policy(item["on_uncertain"], source, f"{where}on_uncertain"),
                require=None if "require" not in item else
                _policy(item["require"], source, f"{where}require")))
        kw["overrides"] = tuple(out)
    if "baseline" in table:
        value = table["baseline"]
        if not isinstance(value, str) or not value or value.startswith("/") or ".." in \
                Path(value).parts:
            raise ConfigError(source, "baseline", f"must be a path inside the repository, got "
                              f"{value!r}", "for example \".eigengate/baseline.json\"")
        kw["baseline"] = value
    if "allowed_drift" in table:
        _drift(table["allowed_drift"], source, "allowed_drift")
        kw["allowed_drift"] = table["allowed_drift"]
    if "waivers" in table:
        from .errors import ModelError
        from .waivers import parse_waivers

        try:
            kw["waivers"] = parse_waivers(table["waivers"], source, "waivers", in_config=True)
        except ModelError as exc:
            raise ConfigError(source, exc.field, exc.problem, exc.hint) from None
    import hashlib
    import json

    kw["digest"] = hashlib.sha256(json.dumps(table, sort_keys=True, default=str)
                                  .encode()).hexdigest()
    return Config(root=root, source=source, **kw)
