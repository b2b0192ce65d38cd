"""Validation of the `requirements:` and `known_modes:` blocks: every bad value is a clear error."""

import pytest

from eigengate.rules.parsing import parse_known_modes, parse_requirement_layer, parse_requirements
from eigengate.errors import ModelError
from eigengate.rules.known_modes import KnownMode
from eigengate.rules.requirements import (
    DirectionCounts, EquilibriumType, MinDamping, PoleRegion, Stability, apply_layers,
)


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
