"""Suite-wide set-up: pytester, hypothesis profiles, and a fixed date for waivers.

hypothesis: the ``ci`` profile (chosen when ``CI`` is set to a true value, as CI services do,
or with ``EIGENGATE_HYPOTHESIS_PROFILE=ci``) derandomises every property test, so a CI run
is the same run every time, keeps no example database and prints the blob that reproduces a
failure; the ``dev`` profile explores new random examples on each run and prints the blob too.
Per-test ``@settings(max_examples=...)`` keep their own counts under both.

Waivers are judged on ``EIGENGATE_TODAY``; every test runs with it set to
:data:`support.FIXED_TODAY` (subprocesses inherit it), so no test depends on the calendar.
A test of another date sets its own.

pytester's in-process runs take ``sys.modules`` back to what it was before them, forgetting
the modules first imported inside them. For eigengate's own modules that leaves two copies
of one class in the process: a module imported before the run may keep a class of a module
the run imported (``scan.records.requirement_classes`` caches the requirement classes, among
them ``rules.robust_range``'s, which only a model with ``robust:`` imports), and a later test
imports that module again and gets a new class, which compares unequal to the kept one.
Which test meets this depends on what ran before it on the same xdist worker. So the
snapshots here keep every ``eigengate`` module a run imported.
"""

import os
import shutil
from pathlib import Path

import pytest
from _pytest import pytester as _pytester
from hypothesis import HealthCheck, settings
from support import FIXED_TODAY, run_cli

pytest_plugins = ["pytester"]


class _KeepingEigengate(_pytester.SysModulesSnapshot):
    """pytester's snapshot of ``sys.modules``, which on restoring also keeps the ``eigengate``
    modules imported since it was taken."""

    def __init__(self, preserve=None) -> None:
        super().__init__(preserve=lambda name: name.split(".")[0] == "eigengate"
                         or (preserve is not None and preserve(name)))


# pytester looks the class up when it takes a snapshot (before a run and for the fixture)
_pytester.SysModulesSnapshot = _KeepingEigengate  # type: ignore[misc]

settings.register_profile("dev", deadline=None, print_blob=True)
settings.register_profile("ci", deadline=None, print_blob=True, derandomize=True,
                          database=None, max_examples=100,
                          suppress_health_check=[HealthCheck.too_slow])


def hypothesis_profile(env=os.environ) -> str:
    """The profile name: ``EIGENGATE_HYPOTHESIS_PROFILE``, else ``ci`` when ``CI`` is true."""
    chosen = env.get("EIGENGATE_HYPOTHESIS_PROFILE")
    if chosen:
        return chosen
    return "ci" if env.get("CI", "").strip().lower() in ("1", "true", "yes") else "dev"


settings.load_profile(hypothesis_profile())


@pytest.fixture(autouse=True)
def _fixed_waiver_date(monkeypatch):
    monkeypatch.setenv("EIGENGATE_TODAY", FIXED_TODAY)


#: The report formats the shared run of example_repo/ writes (``report.FORMAT`` beside ``repo``).
EXAMPLE_FORMATS = ("json", "sarif", "junit", "markdown", "annotations", "html")


@pytest.fixture(scope="session")
def example_report(tmp_path_factory):
    """A copy of example_repo/ checked once by the command line (``--no-cache -q``), for the
    tests that only read what it wrote: its reports ``report.json``, ``report.sarif`` and
    ``report.html``, its pictures as SVG files (``repo/figs``) and its pole maps
    (``repo/maps``), in the folder returned. The reports do not depend on the picture
    options (the command line writes them from the same results)."""
    here = Path(__file__).resolve().parents[1]
    work = tmp_path_factory.mktemp("example")
    shutil.copytree(here / "example_repo", work / "repo",
                    ignore=shutil.ignore_patterns("__pycache__", ".eigengate-cache"))
    reports = [a for f in EXAMPLE_FORMATS for a in ("-o", f"{f}:{work / f'report.{f}'}")]
    out = run_cli("check", ".", "--no-cache", "-q", *reports, "--figures", "figs",
                  "--figure-format", "svg", "--pole-maps", "maps", cwd=work / "repo")
    assert out.returncode == 1, out.stderr  # the example repository has failing models
    return work
