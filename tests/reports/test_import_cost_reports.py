"""The report writers load no numerical library when imported."""

import subprocess
import sys


def test_report_modules_import_light():
    code = ("import sys, eigengate.report_json, eigengate.report_sarif, eigengate.report_junit, "
            "eigengate.report_markdown, eigengate.report_annotations; "
            "print(sorted(m for m in ('numpy', 'scipy', 'control', 'yaml') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
