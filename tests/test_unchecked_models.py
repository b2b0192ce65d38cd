"""Models that nobody checks never look like models that passed: model files the include
patterns miss are reported (EG004), and a model with no requirement at all is a finding
(EG005), in every report format; the summary says how many model files were found and how
many checked."""

import json

import pytest
# the checks run in this process (support.run_main): their output is the subject here
from support import run_main, write

import eigengate.scan.cache as cache_mod
from eigengate.scan.config import load_config
from eigengate.scan.runner import scan

# x' = 0.5 x: the eigenvalue +0.5 is in the right half-plane (Hurwitz criterion: unstable).
UNSTABLE_NO_REQUIREMENT = """\
    model_format: 1
    name: drifter
    plant:
      A: [[0.5]]
    """
# x' = -x: eigenvalue -1 (Hurwitz: stable).
STABLE = """\
    model_format: 1
    name: {name}
    plant:
      A: [[-1.0]]
    requirements:
      stable: true
    """


@pytest.fixture
def repo(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", """\
        [tool.eigengate]
        include = ["models/**/*.yaml"]
        exclude = ["models/attic/**"]
        """)
    write(tmp_path / "models" / "a.yaml", STABLE.format(name="a"))
    write(tmp_path / "models" / "b.yml", STABLE.format(name="b"))      # .yml beside .yaml
    write(tmp_path / "newfolder" / "c.yaml", STABLE.format(name="c"))  # a folder not listed
    write(tmp_path / "models" / "attic" / "old.yaml", STABLE.format(name="old"))  # excluded
    write(tmp_path / "ci" / "pipeline.yaml", "steps: [build, test]\n")  # not a model file
    return tmp_path


def test_model_files_the_include_patterns_miss_are_reported_with_a_pattern(repo):
    out = run_main("check", cwd=repo)
    assert out.returncode == 0, out.stdout + out.stderr  # a warning by default
    text = out.stdout
    assert text.count("EG004 unselected-model-file") == 2
    assert "models/b.yml" in text and '"models/**/*.yml"' in text
    assert "newfolder/c.yaml" in text and '"newfolder/*.yaml"' in text
    assert "attic" not in text and "pipeline" not in text  # excluded on purpose; no model
    assert "3 model files found, 1 checked" in text


def test_unselected_model_files_in_json_sarif_junit_and_markdown(repo):
    out = run_main("check", "--format", "json", "-o", "sarif:r.sarif", "-o", "junit:r.xml",
                  "-o", "markdown:r.md", cwd=repo)
    assert out.returncode == 0, out.stderr
    rows = [f for fr in json.loads(out.stdout)["files"] for f in fr["findings"]
            if f["rule"] == "EG004"]
    assert sorted(f["source"] for f in rows) == ["models/b.yml", "newfolder/c.yaml"]
    assert {f["severity"] for f in rows} == {"warning"}
    sarif = json.loads((repo / "r.sarif").read_text())
    uris = sorted(r["locations"][0]["physicalLocation"]["artifactLocation"]["uri"]
                  for r in sarif["runs"][0]["results"] if r["ruleId"] == "EG004")
    assert uris == ["models/b.yml", "newfolder/c.yaml"]
    assert (repo / "r.xml").read_text().count("EG004") >= 2
    assert (repo / "r.md").read_text().count("EG004") >= 2


@pytest.mark.parametrize("level, code, count", [("error", 1, 2), ("off", 0, 0)])
def test_the_unselected_rule_is_configurable_like_the_others(repo, level, code, count):
    with open(repo / "pyproject.toml", "a", encoding="utf-8") as fh:
        fh.write(f'[tool.eigengate.severity]\nEG004 = "{level}"\n')
    out = run_main("check", cwd=repo)
    assert out.returncode == code, out.stdout + out.stderr
    assert out.stdout.count("EG004 unselected-model-file") == count


def test_a_model_with_no_requirement_is_never_ok(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "models" / "drifter.yaml", UNSTABLE_NO_REQUIREMENT)
    out = run_main("check", cwd=tmp_path)
    assert out.returncode == 1, out.stdout + out.stderr
    assert "drifter: ok" not in out.stdout
    assert "EG005 no-requirement" in out.stdout
    data = json.loads(run_main("check", "--format", "json", cwd=tmp_path).stdout)
    (finding,) = [f for fr in data["files"] for m in fr["models"] for f in m["findings"]]
    assert (finding["rule"], finding["severity"]) == ("EG005", "error")


def test_a_policy_requirement_is_a_check(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", "[tool.eigengate.requirements]\nstable = true\n")
    write(tmp_path / "models" / "drifter.yaml", UNSTABLE_NO_REQUIREMENT)
    out = run_main("check", cwd=tmp_path)
    assert out.returncode == 1
    assert "EG101 asymptotic-stability" in out.stdout and "EG005" not in out.stdout


def test_nothing_checked_as_a_warning_is_still_not_called_ok(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", '[tool.eigengate.severity]\nEG005 = "warning"\n')
    write(tmp_path / "models" / "drifter.yaml", UNSTABLE_NO_REQUIREMENT)
    out = run_main("check", cwd=tmp_path)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "drifter: unchecked" in out.stdout and "EG005 no-requirement" in out.stdout


def test_a_warm_scan_does_not_read_unselected_or_plain_files_again(repo, monkeypatch):
    monkeypatch.setattr(cache_mod, "_RACY_NS", 0)  # the files were written just now
    config = load_config(start=repo)
    first = scan([repo], config, jobs=1)
    assert sorted(f.source for f in first.policy if f.rule == "EG004") == [
        "models/b.yml", "newfolder/c.yaml"]

    def no_read(*args, **kwargs):
        raise AssertionError(f"read a file the cache knows unchanged: {args[0]}")

    monkeypatch.setattr("eigengate.scan.discovery._sniff", no_read)
    monkeypatch.setattr("eigengate.scan.runner.open", no_read, raising=False)
    again = scan([repo], config, jobs=1)
    assert [f.source for f in again.policy] == [f.source for f in first.policy]
    assert again.cache_hits == 1 and again.analysed == 0
