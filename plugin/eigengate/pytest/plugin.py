"""pytest wiring of eigengate: options, ini keys, markers, the ``stability`` fixture, the
model-file collector, the baseline comparison and accept step, the terminal summary and
JUnit figures.

Only wiring lives here; the assertions are :mod:`eigengate.pytest.assertions`, the items and the
baseline bookkeeping :mod:`eigengate.pytest.collector`, the summary and JUnit figures
:mod:`eigengate.pytest.summary`, and all call the engine the command line calls
(:mod:`eigengate.scan.engine`, :mod:`eigengate.scan.baseline_check`). Loading this module imports
neither numpy, scipy, python-control nor PyYAML: they load when a model is first built.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pytest

if TYPE_CHECKING:  # pragma: no cover
    from .assertions import Checker, Layer
    from .collector import BaselineRun, Selection
    from .cached import CollectCache
    from ..scan.config import Config

#: Suffixes of model files; the collector is imported only for files that have one.
MODEL_SUFFIXES = frozenset((".yaml", ".yml", ".toml", ".json"))

REQUIREMENTS_MARK = "stability_requirements"
EQUILIBRIUM_MARK = "expect_equilibrium"

_MARKERS = (
    f"{REQUIREMENTS_MARK}(**requirements): default stability requirements for every model "
    "checked through the `stability` fixture in this test, class or module; the closest "
    "marker wins key by key, the call itself wins over all. Keys as in a model file's "
    "requirements (stable, min_damping, ..., margins for a loop given with loop='open'); a "
    "key the model cannot be judged by is refused, never passed over. Example: "
    f"@pytest.mark.{REQUIREMENTS_MARK}(stable=True, min_damping=0.3)",
    f"{EQUILIBRIUM_MARK}(kind): the origin of every model checked through the `stability` "
    "fixture is of this type (saddle, stable-node, unstable-node, stable-focus, "
    "unstable-focus, center, degenerate, non-hyperbolic). Example: "
    f"@pytest.mark.{EQUILIBRIUM_MARK}('stable-node')",
)


class Settings:
    """Validated per-run settings (kept in ``config.stash``).

    The repository policy is read at configure time when a policy file exists (so a bad
    value stops the run with a usage error); without one, the defaults are built on first
    use, so a run that never meets a model pays nothing for them.
    """

    def __init__(self, policy_path: Path | None, start: Path, globs: tuple[str, ...],
                 collect: bool, accept: bool = False) -> None:
        self.start = start
        self.globs = globs
        self.collect = collect
        self.accept = accept
        self.policy_path = policy_path
        self._policy: "Config | None" = None
        self._selection: "Selection | None" = None
        self._baseline: "BaselineRun | None" = None
        self._results_cache: "CollectCache | None" = None
        if policy_path is not None:
            self._policy = _load_policy(policy_path, start)

    @property
    def policy(self) -> "Config":
        if self._policy is None:
            self._policy = _load_policy(None, self.start)
        return self._policy

    @property
    def selection(self) -> "Selection":
        if self._selection is None:
            from .collector import Selection

            self._selection = Selection(self.policy, self.globs)
        return self._selection

    @property
    def baseline(self) -> "BaselineRun":
        """This process's baseline state, made when a model file is first collected."""
        if self._baseline is None:
            from .collector import BaselineRun

            self._baseline = BaselineRun(lambda: self.policy, accept=self.accept)
        return self._baseline

    @property
    def results_cache(self) -> "CollectCache":
        """The result cache shared with the command line, opened when first used."""
        if self._results_cache is None:
            from .cached import CollectCache

            self._results_cache = CollectCache(self.policy)
        return self._results_cache

    @property
    def baseline_used(self) -> bool:
        return self._baseline is not None

    @property
    def may_collect(self) -> bool:
        """Whether any model file can be selected (beyond files named on the command line)."""
        return self.collect and (bool(self.globs) or (
            self._policy is not None and bool(self._policy.include)))


settings_key = pytest.StashKey[Settings]()
checker_key = pytest.StashKey["Checker"]()
layers_key = pytest.StashKey["tuple[Layer, ...]"]()


# ---------------------------------------------------------------------------- options
def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("eigengate", "eigengate: stability requirements of "
                                         "control-system models")
    group.addoption("--eigengate-config", dest="eigengate_config", metavar="FILE",
                    default=None,
                    help="repository policy file (a pyproject.toml with [tool.eigengate], or "
                         "an eigengate.toml); default: the ini key eigengate_config, else the "
                         "nearest one at or above the rootdir")
    group.addoption("--eigengate-models", dest="eigengate_models", metavar="GLOB",
                    action="append", default=[],
                    help="collect only model files matching GLOB (repository-relative, ** "
                         "for any folders; repeatable); narrows [tool.eigengate] include, or "
                         "supplies it; replaces the ini key eigengate_models")
    group.addoption("--eigengate-no-collect", dest="eigengate_no_collect",
                    action="store_true", default=False,
                    help="do not turn model files into test items (the stability fixture "
                         "and the markers keep working)")
    group.addoption("--eigengate-accept", dest="eigengate_accept", action="store_true",
                    default=False,
                    help="accept the collected models: write their modes into the baseline "
                         "([tool.eigengate] baseline, default .eigengate/baseline.json) "
                         "instead of comparing with it; stale entries are reported, not "
                         "removed (eigengate baseline accept removes them)")
    parser.addini("eigengate_config", type="string", default="",
                  help="eigengate: repository policy file, relative to the ini file")
    parser.addini("eigengate_models", type="linelist", default=[],
                  help="eigengate: globs of the model files to collect (narrow or supply "
                       "[tool.eigengate] include)")
    parser.addini("eigengate_collect", type="bool", default=True,
                  help="eigengate: turn selected model files into test items (default true)")


def _ini(config: pytest.Config, name: str) -> Any:
    try:
        return config.getini(name)
    except (ValueError, TypeError, pytest.UsageError) as exc:
        raise pytest.UsageError(f"eigengate: ini option {name}: {exc}") from None


def _globs(values: Any, where: str) -> tuple[str, ...]:
    out = []
    for value in values:
        if not isinstance(value, str) or not value.strip():
            raise pytest.UsageError(f"eigengate: {where} {value!r}: a glob must be a non-empty "
                                    "string, e.g. models/**/*.yaml")
        value = value.strip()
        if value.startswith("/") or "\\" in value or (len(value) > 1 and value[1] == ":"):
            raise pytest.UsageError(f"eigengate: {where} {value!r}: globs are relative to the "
                                    "repository root and use '/', e.g. models/**/*.yaml")
        out.append(value)
    return tuple(out)


def _load_policy(path: Path | None, start: Path) -> "Config":
    from ..scan.config import ConfigError, load_config

    try:
        return load_config(path, start=start)
    except ConfigError as exc:
        raise pytest.UsageError(f"eigengate: {exc}") from None


def _settings(config: pytest.Config) -> Settings:
    from ..scan.config import find_top_config

    collect = _ini(config, "eigengate_collect")
    ini_models = _ini(config, "eigengate_models")
    ini_path = _ini(config, "eigengate_config")
    if not isinstance(ini_path, str):
        raise pytest.UsageError(f"eigengate: ini option eigengate_config: expected a file "
                                f"path, got {ini_path!r}")
    cli_models = _globs(config.option.eigengate_models or (), "--eigengate-models")
    globs = cli_models or _globs(ini_models, "ini option eigengate_models:")
    path: Path | None = None
    if config.option.eigengate_config:
        given = config.option.eigengate_config
        path = config.invocation_params.dir / given
        where = f"--eigengate-config {given!r}"
    elif ini_path.strip():
        given = ini_path.strip()
        path = (config.inipath.parent if config.inipath else config.rootpath) / given
        where = f"ini option eigengate_config = {given!r}"
    if path is not None and not path.is_file():
        raise pytest.UsageError(f"eigengate: {where}: no such file (expected a pyproject.toml "
                                "with [tool.eigengate] or an eigengate.toml)")
    if path is None:  # the outermost policy: nested ones judge their own folders
        path = find_top_config(config.rootpath)
    collect = bool(collect) and not config.option.eigengate_no_collect
    accept = bool(config.option.eigengate_accept)
    if accept and not collect:
        why = "--eigengate-no-collect" if config.option.eigengate_no_collect else \
            "ini option eigengate_collect = false"
        raise pytest.UsageError(f"eigengate: --eigengate-accept accepts the collected model "
                                f"files, but {why} turns collection off; drop one of them")
    return Settings(path, config.rootpath, globs, collect=collect, accept=accept)


def _baseline_or_usage_error(config: pytest.Config, s: Settings) -> None:
    """Read the baseline now (it is kept), so a broken one stops the run as a usage error."""
    error = s.baseline.read()[1]
    if error is not None:
        raise pytest.UsageError(f"eigengate: {_baseline_error(error, config)}")


def _baseline_error(exc: Any, config: pytest.Config) -> str:
    """A BaselineError's text with the file relative to the invocation folder."""
    from .collector import shown_path

    where = shown_path(Path(exc.path), config.invocation_params.dir)
    where += "" if exc.line is None else f":{exc.line}"
    return f"{where}: {exc.problem}" + (f" ({exc.hint})" if exc.hint else "")


def _may_collect_models(config: pytest.Config, s: Settings) -> bool:
    """Whether this run may collect model files: a policy file, model globs, or a model file
    named on the command line (the cases where reading the policy costs nothing extra)."""
    if not s.collect:
        return False
    if s.policy_path is not None or s.globs:
        return True
    return any(Path(str(arg).split("::", 1)[0]).suffix in MODEL_SUFFIXES
               for arg in config.args)


def pytest_configure(config: pytest.Config) -> None:
    for line in _MARKERS:
        config.addinivalue_line("markers", line)
    s = config.stash[settings_key] = _settings(config)
    # A broken baseline stops the run here, on the xdist controller before any worker starts
    # (a worker's usage error would read as a crash); otherwise at first use.
    if _may_collect_models(config, s) and s.policy.baseline_path.is_file():
        _baseline_or_usage_error(config, s)
    from .summary import Reporter

    config.pluginmanager.register(Reporter(config, s, _baseline_error), "eigengate-reporter")


def pytest_report_header(config: pytest.Config) -> str | None:
    s = config.stash.get(settings_key, None)
    if s is None or (s.policy_path is None and not s.accept):
        return None
    lines = []
    if s.policy_path is not None:
        files = ", ".join(s.globs or s.policy.include) or "none (no include globs)"
        if not s.collect:
            files = "not collected"
        lines.append(f"eigengate: policy {s.policy.source or 'defaults'}; model files: {files}")
    if s.accept:
        lines.append(f"eigengate: accepting the collected models into {s.policy.baseline}")
    return "\n".join(lines)


# ---------------------------------------------------------------------------- collector
def pytest_collect_file(file_path: Path, parent: pytest.Collector) -> pytest.Collector | None:
    if file_path.suffix not in MODEL_SUFFIXES:
        return None
    s = parent.config.stash.get(settings_key, None)
    if s is None or not s.collect:
        return None
    named = parent.session.isinitpath(file_path)
    if not (named or (s.may_collect and s.selection.wants(file_path))):
        return None
    from .collector import ModelFile

    return ModelFile.from_parent(parent, path=file_path, policy=s.policy, baseline=s.baseline,
                                 cache=s.results_cache)


@pytest.hookimpl(wrapper=True)
def pytest_collection(session: pytest.Session):
    """Collect with the cyclic garbage collector paused, and when model files were collected,
    move what collection made (the items, their models and cached results, all alive until
    the session ends) out of its sight for good (``gc.freeze``): otherwise every full
    collection while thousands of model items run scans them all again (measured: a third
    of a warm session of 2,000 model files)."""
    import gc

    was = gc.isenabled()
    gc.disable()
    try:
        return (yield)
    finally:
        s = session.config.stash.get(settings_key, None)
        if was:
            if s is not None and s._results_cache is not None:  # model files were collected
                gc.freeze()
            gc.enable()


def pytest_collection_finish(session: pytest.Session) -> None:
    s = session.config.stash.get(settings_key, None)
    # A model file was collected: first use. Not on an xdist worker, where a usage error
    # reads as a crash: there each model item fails with the baseline's error instead.
    if s is not None and s.baseline_used and not hasattr(session.config, "workerinput"):
        _baseline_or_usage_error(session.config, s)


def pytest_sessionfinish(session: pytest.Session) -> None:
    """Accepting: this process writes the entries of the models it checked, once (under
    xdist each worker writes its own, under the file's lock)."""
    config = session.config
    s = config.stash.get(settings_key, None)
    if s is not None and s._results_cache is not None:
        s._results_cache.save()
    if s is None or not s.accept or not s.baseline_used:
        return
    from ..baseline.store import BaselineError

    written, error = None, None
    try:
        written = s.baseline.write()
    except BaselineError as exc:
        error = _baseline_error(exc, config)
    workeroutput = getattr(config, "workeroutput", None)  # set on pytest-xdist workers
    if workeroutput is not None:
        workeroutput["eigengate_baseline"] = {"written": written, "error": error}
        return
    reporter: Any = config.pluginmanager.get_plugin("eigengate-reporter")
    reporter.tally.add_write(written, error)


# ---------------------------------------------------------------------------- markers, fixture
def _marker_layers(item: pytest.Item) -> "tuple[Layer, ...]":
    """The item's requirement markers as layers, general first (module, class, function)."""
    from .assertions import RequirementArgumentError, parse_layer

    out = []
    for node in item.listchain():
        for mark in node.own_markers:
            if mark.name not in (REQUIREMENTS_MARK, EQUILIBRIUM_MARK):
                continue
            kind = type(node).__name__.lower()
            kind = {"function": "test"}.get(kind, kind)
            where = f"@pytest.mark.{mark.name} on {kind} {node.name}"
            if mark.name == REQUIREMENTS_MARK:
                if mark.args:
                    raise RequirementArgumentError(
                        where, "", mark.args, problem="takes keyword arguments only "
                        f"(stable=True, min_damping=0.3), got positional {mark.args!r}")
                mapping = dict(mark.kwargs)
            else:
                if len(mark.args) != 1 or mark.kwargs:
                    raise RequirementArgumentError(
                        where, "", mark.args, problem="takes one equilibrium type, e.g. "
                        f"@pytest.mark.{EQUILIBRIUM_MARK}('stable-node'), got args "
                        f"{mark.args!r} kwargs {mark.kwargs!r}")
                mapping = {"equilibrium": mark.args[0]}
            out.append(parse_layer(mapping, where, f"@{mark.name} on {kind} {node.name}"))
    return tuple(out)


@pytest.hookimpl(tryfirst=True)
def pytest_runtest_setup(item: pytest.Item) -> None:
    if item.get_closest_marker(REQUIREMENTS_MARK) is None and \
            item.get_closest_marker(EQUILIBRIUM_MARK) is None:
        return
    from .assertions import RequirementArgumentError

    try:
        item.stash[layers_key] = _marker_layers(item)
        return
    except RequirementArgumentError as exc:
        message = str(exc)
    pytest.fail(message, pytrace=False)  # outside the except: no "during handling" chain


@pytest.fixture
def stability(request: pytest.FixtureRequest) -> "Checker":
    """Assert stability requirements on any model a test builds.

    ``stability.check(A, stable=True, min_damping=0.3)`` or
    ``stability.of(sys).is_stable().min_damping(0.3).equilibrium("stable-node")``; models are
    numpy matrices (A, or A, B, C, D), python-control objects, eigengate Models or model file
    paths (relative to the test file, then the rootdir). The test's
    ``@pytest.mark.stability_requirements`` and ``@pytest.mark.expect_equilibrium`` markers
    are defaults for every model checked here.
    """
    from .assertions import Checker

    node = request.node
    s = request.config.stash[settings_key]
    layers = node.stash.get(layers_key, None)
    if layers is None:
        layers = _marker_layers(node)
    checker = Checker(defaults=layers, search=(request.path.parent, request.config.rootpath),
                      config=s.policy)
    node.stash[checker_key] = checker
    return checker


@pytest.hookimpl(wrapper=True)
def pytest_runtest_call(item: pytest.Item):
    result = yield
    checker = item.stash.get(checker_key, None)
    if checker is not None:
        from .assertions import StabilityAssertionError

        try:
            checker.finish()
            return result
        except StabilityAssertionError as exc:
            message = str(exc)
        # Raised after the test returned: the message says where, pluggy's frames would not.
        pytest.fail(message, pytrace=False)
    return result


@pytest.hookimpl(wrapper=True)
def pytest_runtest_makereport(item: pytest.Item, call: pytest.CallInfo):
    report = yield
    records = None
    collector: Any = sys.modules.get("eigengate.pytest.collector")  # not imported: no model items
    collected = collector is not None and isinstance(
        item, (collector.ModelItem, collector.InvalidModelItem))
    if collected and isinstance(item, collector.ModelItem) and call.when == "call":
        record = item.record()
        records = [record] if record else None
    elif collected and isinstance(item, collector.InvalidModelItem) and call.when == "setup":
        records = [item.record()]
    elif not collected and call.when == "call":
        checker = item.stash.get(checker_key, None)
        if checker is not None and checker.records:
            records = list(checker.records)
    if records:
        # plain JSON-like data, so pytest-xdist carries it from the workers
        report.eigengate = {"collected": collected, "records": records}
    return report
