"""Mode names from the dominant participating states: the words engineers use, the same in
every run, in fresh, cached and accepted results alike."""

from __future__ import annotations

import numpy as np

from eigengate import from_arrays
from eigengate.analysis.naming import dominant_states, mode_name
from eigengate.baseline.store import baseline_entry_from
from eigengate.rules.findings import ModeRow
from eigengate.scan.engine import analyse_model


def test_a_common_word_names_the_mode():
    assert mode_name([("sway_rate", 0.5), ("sway_angle", 0.5)]) == \
        "sway mode: sway_angle, sway_rate"
    assert mode_name([("pitchRate", 0.6), ("pitchAngle", 0.4)]) == \
        "pitch mode: pitchRate, pitchAngle"
    assert mode_name([("boom.lift.angle", 0.55), ("boom.lift.rate", 0.45)]) == \
        "boom lift mode: boom.lift.angle, boom.lift.rate"
    # 0.3 is below half of 0.7: one dominant state names the mode alone
    assert mode_name([("boom.lift.angle", 0.7), ("boom.lift.rate", 0.3)]) == \
        "boom.lift.angle mode: boom.lift.angle"


def test_without_a_common_word_the_leading_states_name_it():
    assert mode_name([("angle", 0.5), ("rate", 0.5)]) == "angle-rate mode: angle, rate"
    assert mode_name([("theta", 0.9), ("omega", 0.1)]) == "theta mode: theta"
    assert mode_name([]) == ""


def test_round_off_cannot_reorder_the_states():
    # factors equal to two decimals are ordered by name, whichever is larger in the last bits
    a = dominant_states([("yaw", 0.5 + 1e-9), ("roll", 0.5 - 1e-9)])
    b = dominant_states([("yaw", 0.5 - 1e-9), ("roll", 0.5 + 1e-9)])
    assert a == b == ("roll", "yaw")
    # the baseline keeps 4 significant digits: the name is the same from either
    assert mode_name([("yaw", 0.49999), ("roll", 0.50001)]) == \
        mode_name([("yaw", 0.5), ("roll", 0.5)])


def test_rows_fresh_and_accepted_carry_the_same_name():
    # a lightly damped sway pair beside a fast trolley mode (invented gantry)
    A = np.array([[0.0, 1.0, 0.0], [-4.0, -0.4, 0.0], [0.0, 0.0, -20.0]])
    r = analyse_model(from_arrays(A, states=["sway_angle", "sway_rate", "trolley_speed"]))
    rows = [ModeRow.of(m) for m in r.spectrum.modes]
    assert [x.name for x in rows] == ["sway mode: sway_angle, sway_rate",
                                      "trolley_speed mode: trolley_speed"]
    entry = baseline_entry_from(r)
    assert [m.row(i + 1).name for i, m in enumerate(entry.modes)] == [x.name for x in rows]
