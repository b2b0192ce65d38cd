"""Loading the plugin costs almost nothing: no numpy, scipy, python-control or PyYAML until a
model is actually built (the start-up time itself is measured by
benchmarks/bench_plugin_startup.py)."""

import json

import pytest

HEAVY = ("numpy", "scipy", "control", "yaml")

CONFTEST = f"""\
import json, sys

def pytest_collection_finish(session):
    with open("loaded.json", "w") as fh:
        json.dump({{"plugin": session.config.pluginmanager.has_plugin("eigengate"),
                   "heavy": sorted(m for m in {HEAVY!r} if m in sys.modules)}}, fh)
"""


@pytest.mark.parametrize("policy", [None, 'include = ["models/**/*.yaml"]\n'
                                          "[tool.eigengate.requirements]\nstable = true\n"],
                         ids=["no-policy", "policy-without-model-files"])
def test_collect_only_imports_nothing_heavy(project, policy):
    project.pyproject(policy)
    project.write("tests/conftest.py", CONFTEST)
    project.write("tests/test_plain.py", "def test_plain():\n    pass\n")
    result = project.pytester.runpytest_subprocess("--collect-only", "-q")
    assert result.ret == 0, result.stdout.str() + result.stderr.str()
    loaded = json.loads((project.path / "loaded.json").read_text(encoding="utf-8"))
    assert loaded == {"plugin": True, "heavy": []}
