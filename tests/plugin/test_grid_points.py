"""``eigengate.points(path)``: tests parametrised over a model file's points, with readable
ids (run with pytester; docs/grids.md)."""

import numpy as np


def _grid(project):
    # closed loop s² + (load + 1) s + 1.5 speed: ζ = (load + 1) / (2 √(1.5 speed)) (second-
    # order standard form): 0.41 at speed=1, load=0, 0.29 at speed=2, load=0 (the one point
    # below 0.3), 0.43 at speed=2, load=0.5
    speeds, loads = (1.0, 2.0), (0.0, 0.5, 1.0)
    a = np.array([[[[0.0, 1.0], [-s, -l]] for l in loads] for s in speeds])
    k = np.array([[[[0.5 * s, 1.0]] for _ in loads] for s in speeds])
    (project.path / "models").mkdir(exist_ok=True)
    np.savez(project.path / "models" / "grid.npz", A=a, K=k)
    project.write("models/hoist.yaml", """\
        model_format: 1
        name: hoist
        plant: {states: [x, v], inputs: [u], B: [[0], [1]]}
        feedback: {inputs: [u]}
        requirements: {stable: true}
        grid:
          axes: {speed: [1, 2], load: [0, 0.5, 1]}
          matrices:
            plant.A: {file: grid.npz, key: A}
            feedback.state_gain: {file: grid.npz, key: K}
        """)


def test_points_parametrise_a_test_with_the_coordinates_as_ids(project):
    _grid(project)
    project.pyproject('include = ["models/**/*.yaml"]\n')
    project.write("tests/test_hoist.py", """\
        import eigengate
        import pytest

        @pytest.mark.parametrize("model", eigengate.points("models/hoist.yaml"))
        def test_damping(model, stability):
            stability.check(model, min_damping=0.3)
        """)
    result = project.pytester.runpytest("tests", "-v")
    result.assert_outcomes(passed=5, failed=1)
    result.stdout.fnmatch_lines(["*test_damping[[]speed=1,load=0[]] PASSED*",
                                 "*test_damping[[]speed=2,load=0[]] FAILED*",
                                 "*test_damping[[]speed=2,load=0.5[]] PASSED*"])


def test_points_of_operating_points_and_of_a_single_model(project):
    project.standard_models()
    project.write("tests/test_points.py", """\
        import eigengate
        import pytest

        @pytest.mark.parametrize("model", eigengate.points("../models/shuttle/drive_speed.yaml"))
        def test_drive(model):
            assert model.name == "shuttle-drive-speed"

        @pytest.mark.parametrize("model", eigengate.points("../models/mast/sway.yaml"))
        def test_sway(model):
            assert model.label is None
        """)
    result = project.pytester.runpytest("tests", "-v")
    result.assert_outcomes(passed=4)
    result.stdout.fnmatch_lines(["*test_drive[[]half-load[]] PASSED*",
                                 "*test_sway[[]mast-sway-damper[]] PASSED*"])


def test_a_bad_file_is_a_collection_error_naming_it(project):
    project.write("models/bad.yaml", "model_format: 1\nname: bad\ngrid: {axes: {}}\n")
    project.write("tests/test_bad.py", """\
        import eigengate
        import pytest

        @pytest.mark.parametrize("model", eigengate.points("models/bad.yaml"))
        def test_x(model):
            pass
        """)
    result = project.pytester.runpytest("tests")
    result.assert_outcomes(errors=1)
    result.stdout.fnmatch_lines(["*models/bad.yaml*grid.axes declares no scheduling variable*"])
