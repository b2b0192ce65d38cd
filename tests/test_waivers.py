"""Waivers in process: what a waiver covers, what it never covers, the findings it reports
and every message of a malformed waiver (file, field, what was found, what was expected).
The expiry day boundary is in test_gate_boundaries.py."""

from __future__ import annotations

import datetime as dt

import pytest

from eigengate.errors import ModelError
from eigengate.rules.findings import Finding
from eigengate.rules.waivers import Waiver, parse_waivers, split_waived, today, waiver_findings

ON = dt.date(2026, 12, 1)


def finding(rule="EG103", label=None, model="arm", source="models/arm.yaml"):
    return Finding(rule=rule, name="damping-ratio", severity="error", source=source, line=3,
                   model=model, label=label, message="ζ too low")


def waiver(**kw):
    return Waiver(**{"rule": "EG103", "reason": "accepted", "origin": "models/arm.yaml:9",
                     "source": "models/arm.yaml", "line": 9, **kw})


@pytest.mark.parametrize("w, f, covered", [
    (waiver(), finding(), True),
    (waiver(rule="EG102"), finding(), False),
    (waiver(label="cruise"), finding(label="cruise"), True),
    (waiver(label="cruise"), finding(label="hover"), False),
    (waiver(label="cruise"), finding(label=None), False),
    (waiver(), finding(label="hover"), True),            # no label: every operating point
    (waiver(model="arm"), finding(model="arm"), True),
    (waiver(model="arm"), finding(model="mast"), False),
    (waiver(), finding(model="mast"), True),
    (waiver(paths=("models/*.yaml",)), finding(), True),
    (waiver(paths=("other/*.yaml",)), finding(), False),
    (waiver(paths=("other/*.yaml", "models/")), finding(), True)])  # any of the globs
def test_what_a_waiver_covers(w, f, covered):
    assert w.covers(f) is covered


@pytest.mark.parametrize("rule", ["EG001", "EG002", "EG003"])
def test_invalid_models_and_waiver_findings_are_never_waived(rule):
    # a waiver naming these rules parses (they are rule ids) but waives nothing
    kept, waived = split_waived([finding(rule=rule)], [waiver(rule=rule)], ON)
    assert kept == [finding(rule=rule)] and waived == []


def test_split_keeps_order_and_uses_the_first_live_waiver():
    first, second = waiver(reason="first"), waiver(reason="second")
    expired = waiver(reason="old", expires=dt.date(2026, 1, 1))
    fs = [finding(rule="EG101"), finding(), finding(rule="EG104")]
    kept, waived = split_waived(fs, [expired, first, second], ON)
    assert kept == [fs[0], fs[2]]
    ((f, w),) = waived
    assert w is first and f == Finding(**{**fs[1].__dict__, "waived": "first",
                                          "waiver_note": "no expiry (models/arm.yaml:9)"})


def test_waiver_findings_in_full():
    used, unused = waiver(reason="used"), waiver(rule="EG101", reason="gone", label="hover")
    expired = waiver(rule="EG104", reason="late", expires=dt.date(2026, 11, 30), model="mast")
    out = waiver_findings([used, unused, expired], [used], ON, model="arm")
    assert out == [
        Finding(rule="EG003", name="unused-waiver", severity="warning",
                source="models/arm.yaml", line=9, model="arm", label="hover",
                message="waiver of EG101 matched no finding (reason given: gone); remove it "
                        "if the problem is gone", requirement="waiver of EG101",
                waiver_note="no expiry (models/arm.yaml:9)"),
        Finding(rule="EG002", name="expired-waiver", severity="error",
                source="models/arm.yaml", line=9, model="mast", label=None,
                message="waiver of EG104 expired on 2026-11-30 (reason given: late); the "
                        "finding it covered is reported again", requirement="waiver of EG104",
                waiver_note="expired on 2026-11-30 (models/arm.yaml:9)")]
    # the model's name is the default only: no model given, none named
    assert waiver_findings([unused], [], ON)[0].model == ""


def test_parse_a_model_file_waiver_in_full():
    raw = [{"rule": "EG103", "reason": "  retune in review  ", "expires": dt.date(2027, 3, 31),
            "label": "cruise"},
           {"rule": "EG101", "reason": "boundary mode", "expires": dt.datetime(2027, 1, 2, 3)}]
    a, b = parse_waivers(raw, "models/arm.yaml", lines={"waivers": 7, "waivers.0": 8})
    assert a == Waiver(rule="EG103", reason="retune in review", origin="models/arm.yaml:8",
                       source="models/arm.yaml", line=8, expires=dt.date(2027, 3, 31),
                       label="cruise")
    assert (b.line, b.origin, b.expires) == (7, "models/arm.yaml:7", dt.date(2027, 1, 2))
    (c,) = parse_waivers([{"rule": "EG101", "reason": "x", "expires": None}], "m.yaml")
    assert (c.line, c.origin, c.expires, c.paths, c.model) == (None, "m.yaml waivers[0]", None,
                                                              (), None)


def test_parse_a_policy_waiver_in_full():
    (w,) = parse_waivers([{"rule": "EG103", "reason": "policy", "paths": "models/*.yaml",
                           "model": "arm"}], "pyproject.toml", "tool.eigengate.waivers",
                         in_config=True)
    assert (w.paths, w.model, w.origin) == (("models/*.yaml",), "arm",
                                            "pyproject.toml tool.eigengate.waivers[0]")
    (w,) = parse_waivers([{"rule": "EG103", "reason": "p", "paths": ["a/", "b/*.json"]}],
                         "pyproject.toml", in_config=True)
    assert w.paths == ("a/", "b/*.json") and w.model is None


def _error(raw, *, in_config=False, lines=None):
    with pytest.raises(ModelError) as e:
        parse_waivers(raw, "models/arm.yaml",
                      lines={"waivers": 4, "waivers.1": 6} if lines is None else lines,
                      in_config=in_config)
    err = e.value
    return err.source, err.field, err.problem, err.line, err.hint


OK = {"rule": "EG103", "reason": "fine"}


@pytest.mark.parametrize("raw, in_config, expected", [
    ({"rule": "EG103"}, False,
     ("waivers", "must be a list of waivers, got dict", 4, None)),
    ([OK, "EG103"], False,
     ("waivers[1]", "must be a mapping, got 'EG103'", 6, None)),
    ([OK, {**OK, "reasn": "x"}], False,
     ("waivers[1].reasn", "is not a field of a waiver", 6, "did you mean 'reason'?")),
    ([OK, {**OK, "zzz": 1}], False,
     ("waivers[1].zzz", "is not a field of a waiver", 6,
      "known fields: rule, reason, expires, label")),
    ([OK, {**OK, "paths": ["a/"]}], False,  # policy fields are not model-file fields
     ("waivers[1].paths", "is not a field of a waiver", 6, "known fields: rule, reason, "
      "expires, label")),
    ([OK, {"rule": "EG13", "reason": "x"}], False,
     ("waivers[1].rule", "must name a rule id such as EG103, got 'EG13'", 6,
      "did you mean 'EG213'?")),  # difflib's closest id (EG103, EG113, EG213 tie on ratio)
    ([OK, {"rule": "nothing-like", "reason": "x"}], False,
     ("waivers[1].rule", "must name a rule id such as EG103, got 'nothing-like'", 6,
      "`eigengate rules` lists them")),
    ([OK, {"rule": "EG103", "reason": "  "}], False,
     ("waivers[1].reason", "is required: say why the finding is accepted (got '  ')", 6, None)),
    ([OK, {"rule": "EG103"}], False,
     ("waivers[1].reason", "is required: say why the finding is accepted (got None)", 6, None)),
    ([OK, {**OK, "expires": "31.03.2027"}], False,
     ("waivers[1].expires", "must be a date YYYY-MM-DD, got '31.03.2027'", 6, None)),
    ([OK, {**OK, "expires": 20270331}], False,
     ("waivers[1].expires", "must be a date YYYY-MM-DD, got 20270331", 6, None)),
    ([OK, {**OK, "label": 3}], False,
     ("waivers[1].label", "must be an operating-point label, got 3", 6, None)),
    ([{**OK, "paths": ["a/"]}, OK], True,
     ("waivers[1].paths", "is required: globs of the model files it applies to (got None)", 6,
      None)),
    ([{**OK, "paths": ["a/"]}, {**OK, "paths": []}], True,
     ("waivers[1].paths", "is required: globs of the model files it applies to (got [])", 6,
      None)),
    ([{**OK, "paths": ["a/"]}, {**OK, "paths": ["a/", 3]}], True,
     ("waivers[1].paths", "is required: globs of the model files it applies to (got "
      "['a/', 3])", 6, None)),
    ([{**OK, "paths": ["a/"]}, {**OK, "paths": ["a/"], "model": 1}], True,
     ("waivers[1].model", "must be a model name, got 1", 6, None))])
def test_malformed_waivers_are_named_exactly(raw, in_config, expected):
    assert _error(raw, in_config=in_config) == ("models/arm.yaml", *expected)


def test_a_malformed_waiver_without_its_own_line_gets_the_list_line():
    assert _error([OK, {"rule": "EG103"}], lines={"waivers": 4})[3] == 4
    assert _error([OK, {"rule": "EG103"}], lines={})[3] is None
    assert _error("x", lines={"waivers": 4, "waivers.0": 5})[3] == 4


def test_today_rejects_a_malformed_date_naming_the_variable(monkeypatch):
    monkeypatch.setenv("EIGENGATE_TODAY", "soon")
    with pytest.raises(ModelError) as e:
        today()
    assert (e.value.source, e.value.field, e.value.problem) == (
        "EIGENGATE_TODAY", "", "must be a date YYYY-MM-DD, got 'soon'")
    monkeypatch.setenv("EIGENGATE_TODAY", "")  # empty: the calendar
    assert today() in (dt.date.today(), dt.date.today() - dt.timedelta(days=1))
