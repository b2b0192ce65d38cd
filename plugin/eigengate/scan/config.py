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
    cluster = "tls://scheduler:8786"   # CLI: analyse on this Dask scheduler's workers
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
    # waiver_warning_days = 30        # (top level) report a waiver this close to its expiry

Requirement layers apply in order: repository defaults, each matching override, the model
file's own ``requirements:``; each layer replaces rules of the same id and may switch one off
with ``false``.

Nested policies (a sub-folder's own policy file) judge the files of their folder
(:meth:`Config.policy_for`, nearest wins); ``extend = true`` layers one on its parent. Their
globs are stored relative to the outermost policy's folder, which model sources are relative
to, and each keeps its own baseline next to it.
"""

from __future__ import annotations

from pathlib import Path
from collections.abc import Mapping

from ..rules.patterns import glob_any, glob_match
from .frozen import Frozen, factory
from .policy_values import (  # noqa: F401 (cluster_address and Layer re-exported)
    CLUSTER_SCHEMES, Layer, _drift, _layer, _policy, _quoted, _strings, _unknown,
    cluster_address)
from .nested_policy import DEFAULT_BASELINE, inherit_keys, local_glob, nest_keys
from .policyfiles import (  # noqa: F401 (ConfigError re-exported)
    ConfigError, find_config, find_top_config, policy_file, read_table)

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any, Sequence
    from ..model.core import Model
    from ..rules.requirements import Requirement
    from ..rules.waivers import Waiver
    from .overrides import Override

__all__ = ["Config", "ConfigError", "load_config", "find_config", "CONFIG_KEYS",
           "cluster_address"]

CONFIG_KEYS = ("include", "exclude", "on_uncertain", "require", "select", "ignore",
               "requirements", "severity", "overrides", "waivers", "allow_python", "baseline",
               "allowed_drift", "extend", "cluster", "waiver_warning_days")
OVERRIDE_KEYS = ("paths", "requirements", "on_uncertain", "require", "allowed_drift")
SEVERITIES = ("error", "warning", "off")
#: Where a policy's baseline is kept, relative to its folder, unless it says otherwise.


class Config(Frozen):
    """The effective repository policy (a frozen record, see :mod:`eigengate.scan.frozen`).

    Fields: ``root``; ``source`` (the policy file, None for the defaults); ``include`` and
    ``exclude`` globs; ``on_uncertain``, ``require``; rule ``select`` and ``ignore``
    prefixes; ``requirements`` (the policy's layer); ``severity`` (rule → level);
    ``overrides``; ``waivers``; ``allow_python``; ``waiver_warning_days`` (EG006: a waiver
    this close to its expiry is reported); ``baseline`` (repository-relative path of the
    baseline); ``allowed_drift``; ``cluster`` (a Dask scheduler's address, the command line's
    executor); ``digest`` (hash of the configuration table, part of every cache key);
    ``base`` (a nested policy's folder relative to ``root``, the outermost policy's folder,
    which model sources are relative to; its globs are stored relative to ``root``);
    ``inherited`` (requirement layers of the policies it extends). Not compared: ``_folders``
    (folder relative to root → the policy that governs it, shared by a tree of policies),
    ``_by_path`` (repository-relative path → its policy: policy_for's answers, as a scan
    asks for each file several times) and ``_pending`` (``(table, shown)`` of a requirements
    table read but not yet parsed, ``defer``: parsed by :meth:`complete`, at the latest when
    a model's layers are first asked for).
    """

    FIELDS = (
        ("root", Frozen.REQUIRED, True), ("source", None, True), ("include", (), True),
        ("exclude", (), True), ("on_uncertain", None, True), ("require", None, True),
        ("select", (), True), ("ignore", (), True), ("requirements", ((), ()), True),
        ("severity", factory(dict), True), ("overrides", (), True), ("waivers", (), True),
        ("allow_python", False, True), ("waiver_warning_days", 30, True),
        ("baseline", DEFAULT_BASELINE, True), ("allowed_drift", None, True),
        ("cluster", None, True), ("digest", "", True), ("base", "", True),
        ("inherited", (), True), ("_folders", factory(dict), False),
        ("_by_path", factory(dict), False), ("_pending", None, False))

    if TYPE_CHECKING:  # the fields, for type checkers
        root: Path
        source: str | None
        include: tuple[str, ...]
        exclude: tuple[str, ...]
        on_uncertain: str | None
        require: str | None
        select: tuple[str, ...]
        ignore: tuple[str, ...]
        requirements: Layer
        severity: Mapping[str, str]
        overrides: tuple["Override", ...]
        waivers: tuple["Waiver", ...]
        allow_python: bool
        waiver_warning_days: int
        baseline: str
        allowed_drift: Mapping[str, Any] | None
        cluster: str | None
        digest: str
        base: str
        inherited: tuple[Layer, ...]
        _folders: dict
        _by_path: dict
        _pending: Any

        def __init__(self, root: Path, **kwargs: Any) -> None: ...

    def complete(self) -> "Config":
        """Parse what loading deferred (the requirements table); ConfigError as loading
        without ``defer`` would have raised it."""
        pending = self._pending
        if pending is not None:
            table, shown = pending
            object.__setattr__(self, "requirements", _layer(table, shown, "requirements"))
            object.__setattr__(self, "_pending", None)
        return self

    # ------------------------------------------------------------------ nested policies
    def policy_for(self, rel: str) -> "Config":
        """The policy that judges repository-relative ``rel``: the nearest one at or above its
        folder (a folder with an eigengate.toml, or a pyproject.toml with [tool.eigengate])."""
        got = self._by_path.get(rel)
        if got is None:
            import posixpath

            got = self._by_path[rel] = self._folder_policy(posixpath.dirname(rel.strip("/")))
        return got

    def _folder_policy(self, folder: str) -> "Config":
        import posixpath

        memo = self._folders
        memo.setdefault(self.base, self)
        got = memo.get(folder)
        if got is not None:
            return got
        if folder in ("", ".") or folder == ".." or folder.startswith(("../", "/")):
            return memo.get("", self)
        parent = self._folder_policy(posixpath.dirname(folder))
        found = policy_file(self.root / folder)
        got = parent if found is None else _load_nested(found, self.root, folder, parent, memo)
        memo[folder] = got
        return got

    def policies(self) -> list["Config"]:
        """This policy and every nested one met so far, outermost first."""
        out = {id(self): self}
        for folder in sorted(self._folders):
            out.setdefault(id(self._folders[folder]), self._folders[folder])
        return list(out.values())

    def _own(self, rel: str) -> "Config | None":
        """The nested policy that judges ``rel`` when it is not this one."""
        cfg = self.policy_for(rel)
        return None if cfg is self else cfg

    # ------------------------------------------------------------------ selection
    def is_model_path(self, rel: str) -> bool:
        """Whether repository-relative ``rel`` is configured as a model file."""
        if (own := self._own(rel)) is not None:
            return own.is_model_path(rel)
        if self.is_excluded(rel):
            return False
        if self.include:
            return glob_any(rel, self.include)
        return True

    def rule_enabled(self, rule: str) -> bool:
        if self.severity.get(rule) == "off":
            return False
        if any(rule.startswith(p) for p in self.ignore):
            return False
        return not self.select or any(rule.startswith(p) for p in self.select)

    def severity_of(self, rule: str) -> str:
        from ..rules.catalogue import RULES

        known = RULES.get(rule)
        return self.severity.get(rule, known.severity if known is not None else "error")

    def is_excluded(self, rel: str) -> bool:
        """Whether repository-relative ``rel`` is left out on purpose (an exclude glob)."""
        if (own := self._own(rel)) is not None:
            return own.is_excluded(rel)
        return glob_any(rel, self.exclude)

    def suggest_include(self, rel: str) -> str:
        """A glob that would select model file ``rel``: an include pattern with the file's
        suffix (``models/**/*.yaml`` → ``models/**/*.yml``), else its folder's files of its
        suffix, else its own path."""
        import posixpath

        if (own := self._own(rel)) is not None:
            return own.suggest_include(rel)
        folder, name = posixpath.split(rel)
        suffix = posixpath.splitext(name)[1]
        for pattern in self.include:
            stem, dot, ext = pattern.rpartition(".")
            if dot and "/" not in ext and glob_match(rel, stem + suffix):
                return local_glob(stem + suffix, self.base)
        return local_glob(f"{folder}/*{suffix}" if folder else rel, self.base)

    @property
    def baseline_path(self) -> Path:
        return self.root / self.baseline

    def tolerances_for(self, result: Any):
        """Regression tolerances of a model: defaults, the policy's ``allowed_drift``, each
        matching override's, then the model file's own."""
        from ..baseline.tolerances import parse_tolerances

        model = result.model
        if (own := self._own(model.source)) is not None:
            return own.tolerances_for(result)
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
        if (own := self._own(rel)) is not None:
            return own.waivers_for(rel)
        if not self.waivers:
            return ()
        from ..rules.patterns import glob_match as match

        return tuple(w for w in self.waivers if any(match(rel, p) for p in w.paths))

    # ------------------------------------------------------------------ requirements
    def layers_for(self, rel: str) -> list[Layer]:
        if (own := self._own(rel)) is not None:
            return own.layers_for(rel)
        self.complete()
        return [*self.inherited, self.requirements] + [o.requirements for o in self.overrides if o.applies(rel)]

    def on_uncertain_for(self, rel: str) -> str | None:
        return self._policy_for(rel, "on_uncertain")

    def require_for(self, rel: str) -> str | None:
        """``"certified"`` where the policy requires certified verdicts for ``rel``."""
        return self._policy_for(rel, "require")

    def _policy_for(self, rel: str, key: str) -> str | None:
        if (own := self._own(rel)) is not None:
            return own._policy_for(rel, key)
        return self._own_value(rel, key)

    def effective(self, model: "Model") -> "Model":
        """``model`` with the repository layers applied below its own requirements."""
        from ..rules.requirements import apply_layers

        rel = model.source
        if (own := self._own(rel)) is not None:
            return own.effective(model)
        # this policy judges ``rel``: its own layers, values and rule switches, as
        # layers_for, _policy_for and rule_enabled give them (each would look for it again)
        self.complete()
        layers = [*self.inherited, self.requirements,
                  *[o.requirements for o in self.overrides if o.applies(rel)],
                  (model.requirements, model.disabled)]
        reqs = apply_layers(layers)
        if self.severity or self.ignore or self.select:  # else every rule is on
            reqs = tuple(r for r in reqs if self.rule_enabled(r.rule))
        return model.with_fields(
            requirements=reqs, disabled=(),
            on_uncertain=model.on_uncertain or self._own_value(rel, "on_uncertain"),
            require=model.require or self._own_value(rel, "require"))

    def _own_value(self, rel: str, key: str) -> str | None:
        """:meth:`_policy_for` of a ``rel`` this policy judges."""
        value = getattr(self, key)
        for o in self.overrides:
            if getattr(o, key) is not None and o.applies(rel):
                value = getattr(o, key)
        return value


def _load_nested(path: Path, root: Path, base: str, parent: "Config", memo: dict) -> "Config":
    table = read_table(path, f"{base}/{path.name}")
    return parse_config(table, root=root, source=f"{base}/{path.name}", base=base,
                        parent=parent, folders=memo)


def load_config(path: Path | None = None, *, start: Path | None = None,
                defer: bool = False, remember: bool = False) -> Config:
    """Read the configuration at ``path``, or discover it from ``start`` (default: cwd).

    Without a configuration file the root is the nearest folder with ``.git`` (or ``start``)
    and every default applies. ``defer``: leave the requirements table to
    :meth:`Config.complete` (a check answered by the report memo needs only the digest).
    ``remember``: the policy table is taken from, or kept in, the one remembered by the
    policy file's status (:mod:`eigengate.scan.policy_memo`).
    """
    if path is None:
        path = find_top_config(start or Path.cwd())
    if path is None:
        from ..load.loader import find_root

        base = (start or Path.cwd()).resolve()
        return parse_config({}, root=find_root(base / "_") if base.is_dir() else
                            find_root(base), source=None)  # the defaults, with their digest
    path = Path(path)
    return parse_config(read_table(path, str(path), remember=remember),
                        root=path.resolve().parent, source=path.name, defer=defer)


def parse_config(table: Mapping[str, Any], *, root: Path, source: str | None = "pyproject.toml",
                 base: str = "", parent: Config | None = None,
                 folders: dict | None = None, defer: bool = False) -> Config:
    """Validate a ``[tool.eigengate]`` table (already parsed); a nested policy names its
    folder ``base`` (relative to ``root``) and the ``parent`` policy above it, whose keys it
    inherits with ``extend = true``."""
    from ..rules.rule_ids import RULE_IDS as RULES  # the catalogue itself is not needed

    shown = source if source is not None else "pyproject.toml"  # None: the defaults

    if not isinstance(table, Mapping):
        raise ConfigError(shown, "", f"must be a table, got {table!r}")
    for key in table:
        if key not in CONFIG_KEYS:
            raise _unknown(key, CONFIG_KEYS, shown, "")
    kw: dict[str, Any] = {}
    for key in ("include", "exclude", "select", "ignore"):
        if key in table:
            kw[key] = _strings(table[key], shown, key)
    for key in ("select", "ignore"):
        for prefix in kw.get(key, ()):
            if not any(r.startswith(prefix) for r in RULES):
                raise ConfigError(shown, key, f"names no rule: {prefix!r}",
                                  "rule ids look like EG103; `eigengate rules` lists them")
    for key in ("on_uncertain", "require"):
        if key in table:
            kw[key] = _policy(table[key], shown, key)
    if "allow_python" in table:
        if not isinstance(table["allow_python"], bool):
            raise ConfigError(shown, "allow_python",
                              f"must be true or false, got {table['allow_python']!r}")
        kw["allow_python"] = table["allow_python"]
    if "waiver_warning_days" in table:
        days = table["waiver_warning_days"]
        if isinstance(days, bool) or not isinstance(days, int) or not 0 <= days <= 3660:
            raise ConfigError(shown, "waiver_warning_days",
                              f"must be a whole number of days from 0 to 3660, got {days!r}",
                              "0 reports no waiver before it expires; the default is 30")
        kw["waiver_warning_days"] = days
    if "requirements" in table and defer:
        kw["_pending"] = (table["requirements"], shown)
    elif "requirements" in table:
        kw["requirements"] = _layer(table["requirements"], shown, "requirements")
    if "severity" in table:
        sev = table["severity"]
        if not isinstance(sev, Mapping):
            raise ConfigError(shown, "severity", f"must be a table of rule = level, got {sev!r}")
        for rule, level in sev.items():
            if rule not in RULES:
                raise _unknown(rule, sorted(RULES), shown, "severity.")
            if level not in SEVERITIES:
                raise ConfigError(shown, f"severity.{rule}",
                                  f"must be one of {', '.join(SEVERITIES)}, got {level!r}")
        kw["severity"] = dict(sev)
    if "overrides" in table:
        items = table["overrides"]
        if not isinstance(items, list):
            raise ConfigError(shown, "overrides", "must be an array of tables "
                              f"([[tool.eigengate.overrides]]), got {items!r}")
        out = []
        for i, item in enumerate(items):
            where = f"overrides[{i}]."
            if not isinstance(item, Mapping):
                raise ConfigError(shown, f"overrides[{i}]", f"must be a table, got {item!r}")
            for key in item:
                if key not in OVERRIDE_KEYS:
                    raise _unknown(key, OVERRIDE_KEYS, shown, where)
            if "paths" not in item:
                raise ConfigError(shown, f"{where}paths", "is required (globs of the model "
                                  "files this override applies to)")
            if "allowed_drift" in item:
                _drift(item["allowed_drift"], shown, f"{where}allowed_drift")
            from .overrides import Override

            out.append(Override(
                allowed_drift=item.get("allowed_drift"),
                paths=_strings(item["paths"], shown, f"{where}paths"),
                requirements=_layer(item.get("requirements", {}), shown, f"{where}requirements"),
                on_uncertain=None if "on_uncertain" not in item else
                _policy(item["on_uncertain"], shown, f"{where}on_uncertain"),
                require=None if "require" not in item else
                _policy(item["require"], shown, f"{where}require")))
        kw["overrides"] = tuple(out)
    if "baseline" in table:
        value = table["baseline"]
        if not isinstance(value, str) or not value or value.startswith("/") or ".." in \
                Path(value).parts:
            raise ConfigError(shown, "baseline", f"must be a path inside the repository, got "
                              f"{value!r}", "for example \".eigengate/baseline.json\"")
        kw["baseline"] = value
    if "allowed_drift" in table:
        _drift(table["allowed_drift"], shown, "allowed_drift")
        kw["allowed_drift"] = table["allowed_drift"]
    if "waivers" in table:
        from ..errors import ModelError
        from ..rules.waivers import parse_waivers

        for i, item in enumerate(table["waivers"] if isinstance(table["waivers"], list) else ()):
            if isinstance(item, Mapping) and isinstance(item.get("paths"), str):
                _strings(item["paths"], shown, f"waivers[{i}].paths")
        try:
            kw["waivers"] = parse_waivers(table["waivers"], shown, "waivers", in_config=True)
        except ModelError as exc:
            raise ConfigError(shown, exc.field, exc.problem, exc.hint) from None
    if "cluster" in table:
        if base:
            raise ConfigError(shown, "cluster", "is a key of the repository's top policy only",
                              "name the scheduler in the outermost policy file")
        try:
            kw["cluster"] = cluster_address(table["cluster"])
        except ValueError as exc:
            raise ConfigError(shown, "cluster", str(exc),
                              'for example cluster = "tls://scheduler.internal:8786"') from None
    if "extend" in table and not isinstance(table["extend"], bool):
        raise ConfigError(shown, "extend", f"must be true or false, got {table['extend']!r}",
                          "true layers this policy on the one of the folder above")
    if base:
        nest_keys(kw, base, shown)
    outer = ""
    if table.get("extend") and parent is not None:
        inherit_keys(kw, parent)
        outer = parent.digest
    import json

    from .digests import hasher

    # the rule table is part of the key: results cached before a rule was added are not reused;
    # where the files are analysed is not (a cluster's results are a local run's)
    judged = {k: v for k, v in table.items() if k != "cluster"}
    digest = hasher()
    digest.update(json.dumps([judged, sorted(RULES), base, outer], sort_keys=True,
                             default=str).encode())
    kw["digest"] = digest.hexdigest()
    return Config(root=root, source=source, _folders={} if folders is None else folders, **kw)
