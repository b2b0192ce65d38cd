"""The pytest plugin's reporter: JUnit figures and the terminal summary of failing models."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Callable

import pytest


if TYPE_CHECKING:  # pragma: no cover
    from .collector import BaselineTally


class Reporter:
    """Gathers the records carried by reports (on the controller under xdist): JUnit suite
    properties and the terminal summary of failing models."""

    def __init__(self, config: pytest.Config, settings: Any,
                 baseline_error: Callable[[Any, pytest.Config], str]) -> None:
        self.config = config
        self.settings = settings  # the plugin's per-run Settings (given, so no import goes up)
        self._baseline_error = baseline_error
        self.failing: list[tuple[str, dict[str, Any]]] = []
        self._tally: "BaselineTally | None" = None

    @property
    def tally(self) -> "BaselineTally":
        if self._tally is None:
            from .collector import BaselineTally

            self._tally = BaselineTally()
        return self._tally

    def _xml(self):
        # The LogXML object pytest's own record_testsuite_property fixture writes to; hooks
        # cannot request a fixture, so it is looked up under the same stash key.
        junitxml = self.config.pluginmanager.getplugin("junitxml")
        key = getattr(junitxml, "xml_key", None)
        return None if key is None else self.config.stash.get(key, None)

    def pytest_runtest_logreport(self, report: pytest.TestReport) -> None:
        data = getattr(report, "eigengate", None)
        if not data:
            return
        records = data["records"]
        for r in records:
            if r["verdict"] != "pass":
                self.failing.append((report.nodeid, r))
            if "baseline" in r:
                self.tally.add(report.nodeid, r)
        xml = self._xml()
        if xml is None:
            return
        for i, r in enumerate(records, 1):
            key = report.nodeid if data["collected"] else f"{report.nodeid}:check{i}"
            figures = {"verdict": r["verdict"], "spectral_abscissa": r["spectral_abscissa"],
                       "min_damping": r["min_damping"]}
            if not data["collected"]:
                figures = {"model": r["model"], **figures}
            if r["discrete"]:
                figures["spectral_radius"] = r["spectral_radius"]
            for name, value in figures.items():
                if value is None:
                    continue
                text = f"{value:.6g}" if isinstance(value, float) else str(value)
                xml.add_global_property(f"eigengate:{key}:{name}", text)

    @pytest.hookimpl(optionalhook=True)
    def pytest_testnodedown(self, node, error) -> None:
        """pytest-xdist: a worker is done; what its accept step wrote comes with it."""
        data = getattr(node, "workeroutput", {}).get("eigengate_baseline")
        if data:
            self.tally.add_write(data["written"], data["error"])

    @pytest.hookimpl(trylast=True)  # after this process's own accept step wrote
    def pytest_sessionfinish(self, session: pytest.Session) -> None:
        if self._tally is not None and self._tally.write_errors:
            session.exitstatus = pytest.ExitCode.USAGE_ERROR  # the accept step failed

    def pytest_terminal_summary(self, terminalreporter) -> None:
        self._failing_summary(terminalreporter)
        if self._tally:
            lines = self._baseline_lines()
            if lines:
                terminalreporter.write_sep("=", "eigengate: baseline")
                for line in lines:
                    terminalreporter.write_line(line)

    def _baseline_lines(self) -> list[str]:
        config, option = self.config, self.config.option
        s = self.settings
        baseline, error = s.baseline.read()
        if error is not None:
            return [f"baseline not read: {self._baseline_error(error, config)}"]
        # the paths and eigengate options as given, for the commands the summary prints
        paths = list(config.args) if config.args_source == pytest.Config.ArgsSource.ARGS \
            else []
        options = [f"--eigengate-models={g}" for g in option.eigengate_models or ()]
        if option.eigengate_config:
            options.insert(0, f"--eigengate-config={option.eigengate_config}")
        return self.tally.lines(baseline, s.policy, paths=paths, options=options,
                                config_flag=option.eigengate_config,
                                here=config.invocation_params.dir)

    def _failing_summary(self, terminalreporter) -> None:
        if not self.failing:
            return
        tr = terminalreporter

        def regressed_only(r: dict) -> bool:
            errors = [f for f in r["findings"] if f["severity"] == "error"]
            return bool(errors) and all(f["requirement"] == "baseline" for f in errors)

        ordered = sorted(self.failing, key=lambda t: t[0])
        for title, group in (
                ("eigengate: models failing their requirements",
                 [t for t in ordered if not regressed_only(t[1])]),
                ("eigengate: models that meet their requirements but regressed from the "
                 "baseline", [t for t in ordered if regressed_only(t[1])])):
            if group:
                tr.write_sep("=", title)
            for nodeid, r in group:
                self._failing_model(tr, nodeid, r)

    @staticmethod
    def _failing_model(tr, nodeid: str, r: dict) -> None:
        where = r["source"] if not r["line"] else f"{r['source']}:{r['line']}"
        what = r["model"] if r["source"].startswith("<") else f"{where}: {r['model']}"
        tr.write_line(f"{what}  ({nodeid})")
        for f in r["findings"]:
            if f["severity"] != "error":
                continue
            head = f"{f['rule']} {f['name']}"
            if f["requirement"] and f["rule"] != "EG001":
                head += f" [{f['requirement']}]"
            tr.write_line(f"  {head}: {f['message']}")
            for line in f["table"]:
                tr.write_line(line)
        for line in r.get("modes", ()):
            tr.write_line(line)
