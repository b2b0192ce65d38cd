"""Validation of the `requirements:` and `known_modes:` blocks: every bad value is a clear error."""

import pytest

from eigengate.rules.parsing import parse_known_modes, parse_requirement_layer, parse_requirements
from eigengate.errors import ModelError
from eigengate.rules.known_modes import KnownMode
from eigengate.rules.origin_requirements import DirectionCounts, EquilibriumType
from eigengate.rules.requirements import MinDamping, PoleRegion, Stability, apply_layers


def parse(raw):
    return parse_requirements(raw, "models/arm.yaml", "requirements.", {"requirements": 7})


def test_every_key_parses_in_rule_order():
    reqs = parse({"min_damping": 0.3, "stable": True, "directions": {"unstable": 0},
                  "pole_region": {"min_damping": 0.2, "max_frequency": 40},
                  "equilibrium": "stable-focus", "no_saddle": True, "max_frequency": 10,
                  "min_decay_rate": 0.5})
    assert [r.rule for r in reqs] == sorted(r.rule for r in reqs)
    assert Stability() in reqs and MinDamping(0.3) in reqs
    assert PoleRegion(zeta=0.2, omega=40.0) in reqs
    assert EquilibriumType("stable-focus") in reqs and DirectionCounts(unstable=0) in reqs


def test_false_switches_a_requirement_off():
    assert parse({"stable": False, "no_saddle": False}) == ()
    assert parse({"stable": "marginal"}) == (Stability(allow_marginal=True),)
    reqs, off = parse_requirement_layer({"stable": False, "min_damping": 0.2}, "m.yaml")
    assert off == ("EG101",) and reqs == (MinDamping(0.2),)


def test_layers_merge_rule_by_rule_and_switch_offs_win():
    policy = (Stability(), MinDamping(0.5))
    model = (MinDamping(0.2),)
    assert apply_layers([(policy, ()), (model, ())]) == (Stability(), MinDamping(0.2))
    assert apply_layers([(policy, ()), (model, ("EG101",))]) == (MinDamping(0.2),)
    # a later layer can switch a rule back on
    assert apply_layers([((), ("EG101",)), ((Stability(),), ())]) == (Stability(),)


@pytest.mark.parametrize("raw, field, found", [
    ({"min_dampng": 0.3}, "requirements.min_dampng", "did you mean 'min_damping'"),
    ({"min_damping": 1.5}, "requirements.min_damping", "at most 1"),
    ({"min_damping": "high"}, "requirements.min_damping", "'high'"),
    ({"min_decay_rate": -1}, "requirements.min_decay_rate", "-1"),
    ({"max_frequency": 0}, "requirements.max_frequency", "positive"),
    ({"stable": "yes"}, "requirements.stable", "'yes'"),
    ({"equilibrium": "stable-nod"}, "requirements.equilibrium", "did you mean 'stable-node'"),
    ({"pole_region": {}}, "requirements.pole_region", "at least one"),
    ({"pole_region": {"damping": 0.2}}, "requirements.pole_region.damping", "did you mean"),
    ({"directions": {"stable": -1}}, "requirements.directions.stable", "non-negative integer"),
    ({"no_saddle": "true"}, "requirements.no_saddle", "'true'"),
    ([1, 2], "requirements", "mapping"),
])
def test_bad_requirement_values_name_file_field_and_value(raw, field, found):
    with pytest.raises(ModelError) as info:
        parse(raw)
    text = str(info.value)
    assert text.startswith("models/arm.yaml:7: ")
    assert field in text and found in text


def test_known_modes_parse_and_check_state_names():
    got = parse_known_modes([{"count": 2, "eigenvalue": 0, "reason": "rigid body"},
                             {"states": ["cart"], "count": 1}, {"eigenvalue": [0, 2]}],
                            "m.yaml", "known_modes", {}, states=["cart", "pole"])
    assert got[0] == KnownMode(count=2, eigenvalue=0j, reason="rigid body")
    assert got[1].states == ("cart",) and got[2].eigenvalue == 2j
    with pytest.raises(ModelError, match=r"known_modes\[0\].states names no state.*'crat'.*did you mean 'cart'"):
        parse_known_modes([{"states": ["crat"]}], "m.yaml", "known_modes", {}, states=["cart"])
    with pytest.raises(ModelError, match=r"known_modes\[0\].count must be a positive integer, got 0"):
        parse_known_modes([{"count": 0}], "m.yaml", "known_modes", {})
    with pytest.raises(ModelError, match=r"known_modes must be a list"):
        parse_known_modes({"count": 1}, "m.yaml", "known_modes", {})


def test_deferred_requirement_keys_are_the_modules_own():
    # the keys parsed by modules imported on first use are listed, in order, without
    # importing them; the list must be what the modules define (common practice: a
    # registry kept by hand is checked against its source)
    import importlib

    from eigengate.rules import parsing

    for module, keys in parsing.DEFERRED_KEYS.items():
        real = importlib.import_module(module, "eigengate.rules").PARSERS
        assert tuple(real) == keys, module
    assert parsing.REQUIREMENT_KEYS[:8] == ("stable", "min_decay_rate", "min_damping",
                                            "max_frequency", "pole_region", "equilibrium",
                                            "no_saddle", "directions")
    assert parsing.REQUIREMENT_KEYS[8:] == (*parsing.DEFERRED_KEYS[".loop_requirements"],
                                            *parsing.DEFERRED_KEYS[".robustness"], "robust")


def test_a_plain_model_imports_no_margin_or_robustness_rules(tmp_path):
    import subprocess
    import sys

    from support import cli_env, oscillator, write

    (tmp_path / ".git").mkdir()
    write(tmp_path / "m.yaml", oscillator("arm"))
    probe = ("import sys\nfrom eigengate.cli import main\nmain(sys.argv[1:])\n"
             "print(sorted(m for m in sys.modules if m in {'eigengate.rules.loop_requirements',"
             " 'eigengate.rules.robustness', 'eigengate.analysis.parametric',"
             " 'eigengate.baseline.inputs', 'eigengate.rules.grid_summary'}))\n")
    for flags in (["--no-cache"], []):  # the cache's records name the classes, not import them
        out = subprocess.run([sys.executable, "-c", probe, "check", "-q", *flags,
                              str(tmp_path / "m.yaml")], capture_output=True, text=True,
                             cwd=tmp_path, env=cli_env())
        assert out.stdout.strip().splitlines()[-1] == "[]", out.stdout + out.stderr
    write(tmp_path / "m.yaml", oscillator("arm") + "  min_gain_margin_db: 6\n")
    again = subprocess.run([sys.executable, "-c", probe, "check", "-q", "--no-cache",
                            str(tmp_path / "m.yaml")], capture_output=True, text=True,
                           cwd=tmp_path, env=cli_env())
    assert "eigengate.rules.loop_requirements" in again.stdout  # used: imported


def test_the_origin_requirements_are_still_read_from_their_old_module():
    """EG106-EG108 moved to ``rules.origin_requirements`` (issue 16's module split); code that
    imported them from ``rules.requirements`` gets the same classes, and a name that never
    was there is still an AttributeError."""
    import eigengate
    from eigengate.rules import origin_requirements, requirements

    for name in ("EquilibriumType", "NoSaddle", "DirectionCounts", "origin"):
        assert getattr(requirements, name) is getattr(origin_requirements, name)
    assert eigengate.DirectionCounts is origin_requirements.DirectionCounts
    with pytest.raises(AttributeError):
        requirements.NoSuchRequirement  # noqa: B018
