"""Tallowmere Works (invented): stability checks written as tests, next to the collected
model files. Run from example_repo/: ``pytest``."""

import eigengate
import numpy as np
import pytest

pytestmark = pytest.mark.stability_requirements(stable=True, min_damping=0.2)


def lift_axis(k_pos: float, k_vel: float) -> np.ndarray:
    """Closed-loop lift axis: s^2 + (0.8 + 2.5 k_vel) s + 2.5 k_pos."""
    a = np.array([[0.0, 1.0], [0.0, -0.8]])
    b = np.array([[0.0], [2.5]])
    return a - b @ np.array([[k_pos, k_vel]])


@pytest.mark.expect_equilibrium("stable-node")
def test_lift_axis_gains_give_a_stable_node(stability):
    # k = (3.2, 2.08): s^2 + 6 s + 8 = (s + 2)(s + 4), a stable node (common practice).
    stability.check(lift_axis(3.2, 2.08), states=["lift_pos", "lift_vel"], min_decay_rate=1.0)


@pytest.mark.parametrize("k_vel", [1.6, 2.0, 2.4])
def test_lift_axis_retune_range_keeps_damping(stability, k_vel):
    # zeta = (0.8 + 2.5 k_vel) / (2 sqrt(8)) >= 0.5 on this range (second-order standard form).
    stability.of(lift_axis(3.2, k_vel)).is_stable().min_damping(0.5)


class TestMastDamper:
    pytestmark = pytest.mark.stability_requirements(min_damping=0.3)

    def test_model_file_meets_its_spec(self, stability):
        # The committed model file; fails while the retune of this change is in place.
        stability.check("../models/mast/sway.yaml")


@pytest.mark.parametrize("model", eigengate.points("../models/conveyor/belt_tension.yaml"))
def test_belt_tension_grid_decays(model, stability):
    # One test per grid point (ids like speed=1.5,load=800): the file's own requirements
    # and, for every point, a decay rate of 0.5 1/s (tension settles within ~8 s).
    stability.check(model, min_decay_rate=0.5)
