"""Margin requirements in model files: loop block, verdicts, unstable loops, bad input."""

import math

import pytest

from eigengate.scan.engine import check_model
from eigengate.errors import ModelError
from eigengate.load.loader import load_document
from eigengate.rules.loop_requirements import MinPhaseMargin
from eigengate.model.core import from_arrays
from eigengate.analysis.modes import analyse

# An invented greenhouse shade-motor loop: the classic K/(s(s+1)(s+2)) shape.
BASE = {
    "model_format": 1, "name": "shade-motor",
    "plant": {"num": [1.0], "den": [1.0, 3.0, 2.0, 0.0], "inputs": ["motor_voltage"],
              "outputs": ["shade_position"]},
    "feedback": {"output_gain": [[1.0]]},
}


def verdicts(doc):
    (model,) = load_document(doc)
    return {v.rule: v for v in check_model(model).verdicts}


def test_margin_requirements_from_a_model_file():
    doc = dict(BASE, requirements={"min_gain_margin_db": 6, "min_phase_margin_deg": 60,
                                   "min_delay_margin": 0.5, "max_sensitivity_peak": 2.0,
                                   "min_disk_margin": 0.5})
    v = verdicts(doc)
    assert v["EG301"].passed and v["EG301"].measured == pytest.approx(15.563, abs=1e-3)
    assert v["EG301"].unit == "dB"
    assert not v["EG302"].passed and v["EG302"].margin == pytest.approx(53.41 - 60, abs=0.01)
    assert "53.41" in v["EG302"].message and v["EG302"].suggestion
    assert v["EG303"].passed and v["EG304"].passed and v["EG305"].passed


def test_unstable_closed_loop_fails_before_any_margin():
    doc = dict(BASE, feedback={"output_gain": [[8.0]]},  # Routh: unstable for K > 6
               requirements={"min_gain_margin_db": 6, "min_phase_margin_deg": 30})
    v = verdicts(doc)
    for rule in ("EG301", "EG302"):
        assert not v[rule].passed and v[rule].measured == "unstable"
        assert "closed loop is unstable (2 closed-loop poles in the right half-plane" \
            in v[rule].message


def test_loop_block_break_point_and_channel():
    doc = dict(BASE, loop={"at": "plant_output", "channel": "shade_position",
                           "frequency_range": [0.01, 100.0]},
               requirements={"min_gain_margin_db": 6})
    (model,) = load_document(doc)
    assert model.loop_parts.at == "plant_output"
    assert model.loop_parts.margins().channels[0].gain_margin == pytest.approx(6.0)


@pytest.mark.parametrize("change, field, words", [
    ({"loop": {"at": "plant_middle"}}, "loop.at", "must be one of plant_input, plant_output"),
    ({"loop": {"channel": "fan"}}, "loop.channel", "not a loop channel"),
    ({"loop": {"frequency_range": [10, 1]}}, "loop.frequency_range", "0 < low < high"),
    ({"loop": {"span": 1}}, "loop.span", "is not a field of loop"),
    ({"feedback": None, "loop": {}}, "loop", "no feedback block"),
    ({"feedback": None, "requirements": {"min_phase_margin_deg": 45}},
     "requirements.min_phase_margin_deg", "needs a closed loop"),
    ({"requirements": {"min_disk_margin": 3}}, "requirements.min_disk_margin", "≤ 2"),
    ({"feedback": {"state_gain": [[1.0, 1.0, 1.0]]}, "loop": {"at": "plant_output"}},
     "loop.at", "state_gain feeds back states"),
])
def test_bad_loop_input_is_a_clear_model_error(change, field, words):
    doc = {k: v for k, v in {**BASE, **change}.items() if v is not None}
    with pytest.raises(ModelError) as info:
        load_document(doc, source="shade.yaml")
    assert info.value.field == field and words in str(info.value)
    assert info.value.source == "shade.yaml"


def test_margin_requirement_on_a_model_without_loop_fails_as_not_evaluated():
    # a margin target (a repository-wide one, say) on a model with no loop is never a pass
    from eigengate.rules.requirements import evaluate

    spectrum = analyse(from_arrays([[-1.0]]))
    direct = MinPhaseMargin(45.0).check(spectrum.modes, spectrum, "fail")
    (v,) = evaluate(spectrum, [MinPhaseMargin(45.0)])
    for verdict in (direct, v):
        assert not verdict.passed and verdict.measured == "not evaluated"
        assert "cannot be evaluated" in verdict.message and "no feedback" in verdict.message


def test_state_feedback_loop_breaks_at_the_plant_input():
    # x' = x + u with u = -3x: L(s) = 3/(s - 1), stable for gains above 1/3 (lower GM 1/3).
    doc = {"model_format": 1, "plant": {"A": [[1.0]], "B": [[1.0]]},
           "feedback": {"state_gain": [[3.0]]}, "requirements": {"min_gain_margin_db": 6}}
    v = verdicts(doc)["EG301"]
    assert v.measured == pytest.approx(-20 * math.log10(1 / 3), rel=1e-9)
    assert "lower 0.3333" in v.message


def test_dynamic_controller_loop():
    # PI controller (s + 1)/s around 1/((s+2)(s+3)): compare with python-control on L = K P.
    control = pytest.importorskip("control")
    doc = {"model_format": 1, "plant": {"num": [1.0], "den": [1.0, 5.0, 6.0]},
           "feedback": {"controller": {"num": [4.0, 4.0], "den": [1.0, 0.0]}},
           "requirements": {"min_phase_margin_deg": 10}}
    (model,) = load_document(doc)
    ours = model.loop_parts.margins().channels[0]
    loop = control.tf([4.0, 4.0], [1.0, 0.0]) * control.tf([1.0], [1.0, 5.0, 6.0])
    gm, pm, _, _, wgc, _ = control.stability_margins(loop)
    assert ours.phase_margin == pytest.approx(pm, abs=1e-6)
    assert ours.phase_margin_frequency == pytest.approx(wgc, rel=1e-8)
    assert math.isinf(ours.gain_margin) and math.isinf(gm)
