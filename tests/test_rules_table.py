"""The rule table: stable ids, names, model-file keys and units (configuration, waivers and
every report name them, so they are a contract), and what `eigengate explain` shows."""

from __future__ import annotations

import re

import pytest
import yaml

from eigengate.rules.catalogue import RULES, Verdict, explain_rule, rule_by_key

#: id → (name, key, unit): the published contract; changing one breaks users' configuration
CONTRACT = {
    "EG001": ("invalid-model", "", ""),
    "EG002": ("expired-waiver", "waivers", ""),
    "EG003": ("unused-waiver", "waivers", ""),
    "EG004": ("unselected-model-file", "include", ""),
    "EG005": ("no-requirement", "requirements", ""),
    "EG006": ("expiring-waiver", "waivers", ""),
    "EG101": ("asymptotic-stability", "stable", "1/s"),
    "EG102": ("decay-rate", "min_decay_rate", "1/s"),
    "EG103": ("damping-ratio", "min_damping", ""),
    "EG104": ("natural-frequency", "max_frequency", "rad/s"),
    "EG105": ("pole-region", "pole_region", "rad/s"),
    "EG106": ("equilibrium-type", "equilibrium", ""),
    "EG107": ("no-saddle", "no_saddle", ""),
    "EG108": ("direction-counts", "directions", ""),
    "EG109": ("known-modes", "known_modes", ""),
    "EG110": ("stability-radius", "min_stability_radius", ""),
    "EG111": ("transient-growth", "max_transient_growth", ""),
    "EG112": ("pseudospectral-abscissa", "max_pseudospectral_abscissa", "1/s"),
    "EG113": ("robust-over-range", "robust", ""),
    "EG201": ("crossed-into-instability", "allowed_drift", "1/s"),
    "EG202": ("decay-rate-regressed", "allowed_drift", "1/s"),
    "EG203": ("damping-regressed", "allowed_drift", ""),
    "EG204": ("equilibrium-type-changed", "allowed_drift", ""),
    "EG205": ("frequency-shifted", "allowed_drift", "rad/s"),
    "EG206": ("mode-appeared", "allowed_drift", ""),
    "EG207": ("mode-disappeared", "allowed_drift", ""),
    "EG208": ("new-model", "", ""),
    "EG209": ("stale-baseline-entry", "", ""),
    "EG210": ("baseline-unreadable", "", ""),
    "EG211": ("stability-radius-shrank", "allowed_drift", ""),
    "EG212": ("transient-growth-rose", "allowed_drift", ""),
    "EG213": ("pseudospectral-abscissa-rose", "allowed_drift", "1/s"),
    "EG301": ("gain-margin", "min_gain_margin_db", "dB"),
    "EG302": ("phase-margin", "min_phase_margin_deg", "deg"),
    "EG303": ("delay-margin", "min_delay_margin", "s"),
    "EG304": ("sensitivity-peak", "max_sensitivity_peak", ""),
    "EG305": ("disk-margin", "min_disk_margin", ""),
    "EG401": ("no-saddle-in-box", "no_saddle_in_box", ""),
    "EG402": ("equilibrium-at", "equilibrium_at", ""),
    "EG403": ("equilibrium-count", "equilibrium_count", ""),
    "EG404": ("equilibria-stable", "equilibria_stable", ""),
}


def test_the_rule_contract():
    assert {r.id: (r.name, r.key, r.unit) for r in RULES.values()} == CONTRACT
    assert all(rid == r.id for rid, r in RULES.items())


@pytest.mark.parametrize("rid", sorted(CONTRACT))
def test_summaries_are_plain_sentences(rid):
    text = RULES[rid].summary
    # a sentence: capital then lower-case letters, ends with a full stop, no shouting
    assert re.match(r"^[A-Z][a-z ]", text) and text.endswith(".") and "XX" not in text
    assert not re.search(r"\b[A-Z]{5,}\b", text.replace("SARIF", ""))


def test_summaries_state_the_criterion():
    # each summary names what it checks (common-practice definitions)
    s = {rid: RULES[rid].summary for rid in RULES}
    assert "Re(s) < 0 (Hurwitz) or |z| < 1 (Schur)" in s["EG101"]
    assert "-Re(s) ≥ α" in s["EG102"] and "ζ = -Re(s)/|s| ≥ ζmin" in s["EG103"]
    assert "ωn = |s| ≤ ωmax" in s["EG104"] and "2 / max over ω of σ̄(S − T)" in s["EG305"]


def test_rule_by_key():
    assert rule_by_key("min_damping").id == "EG103"
    assert rule_by_key("stable").id == "EG101"
    assert rule_by_key("waivers").id == "EG002"  # the first rule with that key
    with pytest.raises(KeyError) as e:
        rule_by_key("min_dampnig")
    assert e.value.args == ("min_dampnig",)


def _keys(doc):
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield k
            yield from _keys(v)
    elif isinstance(doc, list):
        for v in doc:
            yield from _keys(v)


@pytest.mark.parametrize("rid", sorted(CONTRACT))
def test_every_rule_explains_itself_with_a_valid_example(rid):
    rule = RULES[rid]
    text = explain_rule(rule)
    lines = text.splitlines()
    assert lines[:4] == [f"{rule.id} {rule.name}", "", rule.summary, ""]
    if rule.key:
        unit = f" (unit: {rule.unit})" if rule.unit else ""
        where = "policy key" if rid == "EG004" else "model-file key"  # include: policy only
        assert lines[4] == f"{where}: {rule.key}{unit}"
    else:
        assert "model-file key" not in text
    i = lines.index("example:")
    assert lines[i - 1] == ""
    example = "\n".join(x[2:] for x in lines[i + 1:-2])
    assert all(x.startswith("  ") for x in lines[i + 1:-2])
    if rid in ("EG208", "EG209", "EG210"):  # baseline bookkeeping: nothing to write
        assert example == ""
        return
    if rid == "EG004":  # the example is a policy table (TOML), not a model file
        try:
            import tomllib
        except ImportError:  # Python 3.10
            import tomli as tomllib

        doc = tomllib.loads(example)["tool"]["eigengate"]
    else:
        doc = yaml.safe_load(example)  # the example is YAML a model file could hold
    assert isinstance(doc, dict)
    if rule.key:
        assert rule.key in set(_keys(doc)), example
    default, other = (("a warning", "an error") if rule.severity == "warning"
                      else ("an error", "a warning"))
    assert lines[-2:] == ["", f"A failing rule is {default} by default; [tool.eigengate.severity] "
                          f"can make it {other} or switch it off, and a waiver (with a "
                          "reason) can accept one finding."]


def test_regression_examples_show_the_default_tolerances():
    text = explain_rule(RULES["EG202"])
    doc = yaml.safe_load("\n".join(x[2:] for x in text.split("example:\n")[1].splitlines()[:-2]))
    assert doc == {"allowed_drift": {"decay_rate": {"abs": 1.0e-6, "rel": 0.05},
                                     "damping": {"abs": 0.005, "rel": 0.05},
                                     "frequency": {"rel": 0.05}}}


def test_verdict_is_compared_by_identity():
    kw = dict(rule="EG103", name="damping-ratio", requirement="min_damping: 0.3", passed=True,
              uncertain=False, measured=0.5, threshold=0.3, margin=0.2, unit="", offending=(),
              message="ok")
    a, b = Verdict(**kw), Verdict(**kw)
    assert a != b and a == a and a.suggestion is None


@pytest.mark.parametrize("uncertain, given, expected", [
    (False, "", "estimated"), (True, "", "uncertain"),
    (False, "certified", "certified"), (True, "certified", "certified")])
def test_a_verdict_says_how_it_was_decided_by_default(uncertain, given, expected):
    # A verdict that does not say is decided by the first-order estimate, or is uncertain;
    # one that says keeps what it says (rules.catalogue.Verdict).
    from eigengate.rules.catalogue import Verdict

    v = Verdict(rule="EG101", name="asymptotic-stability", requirement="stable: true",
                passed=True, uncertain=uncertain, measured=-1.0, threshold=0.0, margin=1.0,
                unit="1/s", offending=(), message="", decided_by=given)
    assert v.decided_by == expected


def test_the_rule_ids_list_matches_the_catalogue():
    # the policy's digest and checks use the list without importing the catalogue
    from eigengate.rules.rule_ids import RULE_IDS

    assert RULE_IDS == tuple(sorted(RULES))
