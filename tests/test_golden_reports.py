"""The JSON, SARIF and HTML reports of example_repo/ are byte-for-byte the committed golden
files (tests/golden/). They were written before the package was reshaped into stage
subpackages and prove that the reshape changed no output.

When the output changes on purpose, regenerate them and review the diff:

    EIGENGATE_REGEN_GOLDEN=1 python -m pytest tests/test_golden_reports.py

Nothing in them depends on the machine: paths are repository-relative, waivers are judged on
the fixed date of tests/support.py (EIGENGATE_TODAY), and the only version text is the tool's
own version, so a version bump needs a regeneration too.
"""

import os
from pathlib import Path

import pytest

GOLDEN = Path(__file__).resolve().parent / "golden"
FORMATS = ("json", "sarif", "html")


@pytest.fixture(scope="module")
def reports(example_report):
    """The reports of the suite's one run of example_repo/ (conftest.example_report)."""
    return {f: (example_report / f"report.{f}").read_bytes() for f in FORMATS}


@pytest.mark.parametrize("fmt", FORMATS)
def test_report_matches_golden_file(reports, fmt):
    golden = GOLDEN / f"example_repo.{fmt}"
    if os.environ.get("EIGENGATE_REGEN_GOLDEN") == "1":
        golden.write_bytes(reports[fmt])
    assert reports[fmt] == golden.read_bytes(), (
        f"{golden.name} differs; if the change is intended: EIGENGATE_REGEN_GOLDEN=1 pytest "
        f"tests/test_golden_reports.py")
