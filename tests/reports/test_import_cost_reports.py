"""The report writers load no numerical library when imported."""

import subprocess
import sys


def test_report_modules_import_light():
    code = ("import sys, eigengate.reports.json, eigengate.reports.sarif, eigengate.reports.junit, "
            "eigengate.reports.markdown, eigengate.reports.annotations; "
            "print(sorted(m for m in ('numpy', 'scipy', 'control', 'yaml') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
