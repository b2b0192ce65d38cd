"""Repository policy in [tool.eigengate]: discovery, validation, layering, selection."""

import textwrap
from pathlib import Path

import pytest

from eigengate.rules.patterns import glob_match
from eigengate.scan.config import ConfigError, find_config, load_config, parse_config
from eigengate.scan.engine import check_model, discover_model_files
from eigengate.model.core import from_arrays
from eigengate.rules.requirements import MinDamping, Stability


def pyproject(tmp_path: Path, body: str) -> Path:
    p = tmp_path / "pyproject.toml"
    p.write_text("[project]\nname = 'demo'\n\n" + textwrap.dedent(body), encoding="utf-8")
    return p


@pytest.mark.parametrize("path, pattern, hit", [
    ("models/a.yaml", "*.yaml", True),
    ("models/deep/a.yaml", "models/**/*.yaml", True),
    ("models/a.yaml", "models/**/*.yaml", True),
    ("models/a.toml", "models/**/*.yaml", False),
    ("other/models/a.yaml", "models/*.yaml", False),
    ("models/attic/x.yaml", "models/attic", True),
    ("models/attic/x.yaml", "models/attic/", True),
    ("models/b1.yaml", "models/b?.yaml", True),
    ("models/b12.yaml", "models/b?.yaml", False),
])
def test_globs(path, pattern, hit):
    assert glob_match(path, pattern) is hit


def test_discovery_reads_the_nearest_pyproject(tmp_path):
    pyproject(tmp_path, """\
        [tool.eigengate]
        include = ["models/**/*.yaml"]
        on_uncertain = "pass"
        [tool.eigengate.requirements]
        stable = true
        """)
    (tmp_path / "models" / "deep").mkdir(parents=True)
    assert find_config(tmp_path / "models" / "deep") == tmp_path / "pyproject.toml"
    cfg = load_config(start=tmp_path / "models" / "deep")
    assert cfg.root == tmp_path.resolve() and cfg.on_uncertain == "pass"
    assert cfg.requirements == ((Stability(),), ())


def test_layers_defaults_then_overrides_then_model(tmp_path):
    cfg = parse_config({
        "requirements": {"stable": True, "min_damping": 0.5},
        "overrides": [{"paths": ["models/mast/**"], "requirements": {"min_damping": 0.2}},
                      {"paths": ["models/mast/legacy.yaml"], "requirements": {"stable": False}}],
        "severity": {"EG103": "warning"},
    }, root=tmp_path)
    # s^2 + 0.4 s + 4: zeta = 0.1 (second-order standard form, common in control textbooks)
    osc = [[0, 1], [-4, -0.4]]
    plain = cfg.effective(from_arrays(osc, source="models/arm.yaml"))
    assert plain.requirements == (Stability(), MinDamping(0.5))
    mast = cfg.effective(from_arrays(osc, source="models/mast/sway.yaml"))
    assert mast.requirements == (Stability(), MinDamping(0.2))
    legacy = cfg.effective(from_arrays(osc, source="models/mast/legacy.yaml"))
    assert legacy.requirements == (MinDamping(0.2),)
    own = cfg.effective(from_arrays(osc, source="models/mast/sway.yaml",
                                    requirements=[MinDamping(0.05)]))
    assert own.requirements == (Stability(), MinDamping(0.05))
    result = check_model(from_arrays(osc, source="models/arm.yaml"), cfg)
    assert [(f.rule, f.severity) for f in result.findings] == [("EG103", "warning")]


def test_select_and_ignore_filter_rules(tmp_path):
    cfg = parse_config({"requirements": {"stable": True, "min_damping": 0.5},
                        "ignore": ["EG103"]}, root=tmp_path)
    model = cfg.effective(from_arrays([[0, 1], [-4, -0.4]], source="m.yaml"))
    assert model.requirements == (Stability(),)


@pytest.mark.parametrize("table, needle", [
    ({"inclde": ["*.yaml"]}, "inclde is not a known key (did you mean 'include'?)"),
    ({"include": ["*.yaml"], "exclude": [3]}, "exclude must be a list of non-empty strings, got [3]"),
    ({"on_uncertain": "maybe"}, "on_uncertain must be 'fail' or 'pass', got 'maybe'"),
    ({"severity": {"EG103": "loud"}}, "severity.EG103 must be one of error, warning, off, got 'loud'"),
    ({"severity": {"EG999": "off"}}, "severity.EG999 is not a known key"),
    ({"select": ["XX1"]}, "select names no rule: 'XX1'"),
    ({"requirements": {"min_damping": 2}}, "requirements.min_damping must be a non-negative number at most 1, got 2"),
    ({"overrides": [{"requirements": {}}]}, "overrides[0].paths is required"),
    ({"overrides": [{"paths": ["a"], "reqs": {}}]}, "overrides[0].reqs is not a known key"),
    ({"allow_python": "yes"}, "allow_python must be true or false, got 'yes'"),
])
def test_bad_values_name_file_key_and_value(tmp_path, table, needle):
    with pytest.raises(ConfigError) as info:
        parse_config(table, root=tmp_path, source="pyproject.toml")
    assert str(info.value).startswith("pyproject.toml: [tool.eigengate] ")
    assert needle in str(info.value)


def test_include_and_exclude_drive_discovery(tmp_path):
    pyproject(tmp_path, """\
        [tool.eigengate]
        include = ["models/**/*.yaml"]
        exclude = ["models/attic/**"]
        """)
    for rel in ("models/a.yaml", "models/attic/b.yaml", "models/c.toml", "ci/pipeline.yaml"):
        f = tmp_path / rel
        f.parent.mkdir(parents=True, exist_ok=True)
        f.write_text("model_format: 1\nplant: {A: [[-1]]}\n", encoding="utf-8")
    cfg = load_config(start=tmp_path)
    found = [p.relative_to(tmp_path).as_posix() for p in discover_model_files([tmp_path], cfg)]
    assert found == ["models/a.yaml"]


@pytest.mark.parametrize("table, key", [
    ({"include": "models/*.yaml"}, "include"),
    ({"exclude": "models/attic/**"}, "exclude"),
    ({"select": "EG1"}, "select"),
    ({"ignore": "EG104"}, "ignore"),
    ({"overrides": [{"paths": "models/mast/**"}]}, "overrides[0].paths"),
    ({"waivers": [{"rule": "EG103", "reason": "r", "paths": "models/x.yaml"}]},
     "waivers[0].paths"),
])
def test_a_single_string_where_a_list_is_expected_is_refused(tmp_path, table, key):
    """``include = "models/*.yaml"`` is a common slip: refused, naming pyproject.toml, the
    key, the string found and the list expected (every list-valued key alike)."""
    with pytest.raises(ConfigError) as info:
        parse_config(table, root=tmp_path, source="pyproject.toml")
    text = str(info.value)
    assert text.startswith(f"pyproject.toml: [tool.eigengate] {key} must be a list")
    value = next(iter(table.values()))
    found = value if isinstance(value, str) else value[0]["paths"]
    assert f"got the string {found!r}" in text
    assert f'["{found}"]' in text  # the spelling that works


def test_a_string_include_is_refused_when_read_from_the_file(tmp_path):
    pyproject(tmp_path, """\
        [tool.eigengate]
        include = "models/*.yaml"
        """)
    with pytest.raises(ConfigError, match=r"pyproject.toml: \[tool.eigengate\] include must "
                                          r"be a list"):
        load_config(start=tmp_path)
