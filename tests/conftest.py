"""Suite-wide set-up: pytester, hypothesis profiles, and a fixed date for waivers.

hypothesis: the ``ci`` profile (chosen when ``CI`` is set to a true value, as CI services do,
or with ``EIGENGATE_HYPOTHESIS_PROFILE=ci``) derandomises every property test, so a CI run
is the same run every time, keeps no example database and prints the blob that reproduces a
failure; the ``dev`` profile explores new random examples on each run and prints the blob too.
Per-test ``@settings(max_examples=...)`` keep their own counts under both.

Waivers are judged on ``EIGENGATE_TODAY``; every test runs with it set to
:data:`support.FIXED_TODAY` (subprocesses inherit it), so no test depends on the calendar.
A test of another date sets its own.
"""

import os

import pytest
from hypothesis import HealthCheck, settings
from support import FIXED_TODAY

pytest_plugins = ["pytester"]

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
