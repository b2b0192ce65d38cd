"""The ``stability`` fixture: keyword and chained assertions on matrices, python-control
objects, eigengate models and model files; readable failure reports; non-model input."""

import pytest

from eigengate.pytest.assertions import NotAModelError, StabilityAssertionError, check, of

# s² + 0.4 s + 4 as x'' = -4x - 0.4x': ωn = 2, ζ = 0.4/(2·2) = 0.1, eigenvalues
# -ζωn ± jωn√(1-ζ²) = -0.2 ± 1.98997j (second-order standard form, common in control
# textbooks).
OSCILLATOR = "[[0.0, 1.0], [-4.0, -0.4]]"


def test_keyword_style_passes_and_fails_with_a_readable_report(project):
    project.write("tests/test_arm.py", f"""\
        import numpy as np

        OSC = np.array({OSCILLATOR})

        def test_decoupled_lags(stability):
            stability.check(np.diag([-1.0, -2.0]), stable=True, min_decay_rate=0.5)

        def test_sway_damping(stability):
            stability.check(OSC, stable=True, min_damping=0.3, states=["angle", "rate"])
        """)
    result = project.pytester.runpytest()
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines([
        ">*stability.check(OSC, stable=True, min_damping=0.3*",
        "E*StabilityAssertionError: 1 of 2 stability requirements not met by 2×2 matrix A",
        "E*FAIL  EG103 damping-ratio  [[]min_damping: 0.3[]]",
        # ζ = 0.1 against 0.3: margin 0.1 - 0.3 = -0.2 (standard form above)
        "E*1 mode violates damping ratio ≥ 0.3: worst 0.1 (margin -0.2)",
        "E*hint: passes with min_damping ≤ 0.1",
        "E*angle-rate mode",
        "E*EG103 damping-ratio 0.1 (threshold 0.3, margin -0.2)",
        # τ = 1/(ζωn) = 5 s; the two participation factors of a two-state oscillatory mode
        # have equal magnitude (standard modal-analysis result), so each state has half
        "E*eigenvalue -0.2±1.98997j · ωn 2 rad/s · ζ 0.1 · τ 5 s · states angle 0.50, rate 0.50",
        "E*detail: error bound * · condition number *",
        "E*checked: stable: true (this call), min_damping: 0.3 (this call)",
    ])
    text = result.stdout.str()
    assert "assertions.py" not in text  # helper frames are hidden
    assert "Traceback" not in text


def test_chain_style_on_python_control_objects(project):
    project.write("tests/test_tf.py", """\
        import control

        def test_well_damped_loop(stability):
            # 4/(s² + 2.4 s + 4): ζ = 2.4/(2·2) = 0.6 (second-order standard form)
            sys = control.tf([4.0], [1.0, 2.4, 4.0])
            stability.of(sys).is_stable().min_damping(0.5).equilibrium("stable-focus")

        def test_state_space_object(stability):
            sys = control.ss([[0.0, 1.0], [-4.0, -0.4]], [[0.0], [1.0]], [[1.0, 0.0]], [[0.0]])
            stability.of(sys).is_stable().min_damping(0.3)
        """)
    result = project.pytester.runpytest()
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines([
        ">*stability.of(sys).is_stable().min_damping(0.3)",
        "E*1 of 1 stability requirement not met by control.StateSpace (2 states)",
        "E*FAIL  EG103 damping-ratio  [[]min_damping: 0.3[]]",
        "E*checked: min_damping: 0.3 (.min_damping(0.3))",
    ])


def test_matrices_models_and_model_files(project):
    project.standard_models()
    project.write("tests/data/lift_copy.yaml", project.LIFT)
    project.write("tests/test_sources.py", """\
        import numpy as np
        import eigengate

        def test_abcd(stability):
            A = np.array([[0.0, 1.0], [-2.0, -3.0]])   # poles -1, -2
            B, C, D = np.array([[0.0], [1.0]]), np.array([[1.0, 0.0]]), np.zeros((1, 1))
            stability.check(A, B, C, D, stable=True, equilibrium="stable-node")

        def test_model_object(stability):
            m = eigengate.from_arrays([[-3.0]], states=["temperature"])
            stability.of(m).is_stable().min_decay_rate(2.5)  # decay rate 3

        def test_file_relative_to_the_test(stability):
            stability.check("data/lift_copy.yaml")          # its own requirements

        def test_file_relative_to_rootdir(stability):
            stability.of("models/shuttle/drive_speed.yaml").is_stable().max_frequency(5.0)

        def test_one_operating_point(stability):
            stability.check("models/shuttle/drive_speed.yaml", operating_point="full-load",
                            min_decay_rate=2.0)

        def test_missing_file(stability):
            stability.check("models/nowhere.yaml", stable=True)
        """)
    result = project.pytester.runpytest("-rf")
    result.assert_outcomes(passed=4, failed=2)
    result.stdout.fnmatch_lines([
        # the full-load point has A = [[-1]]: decay rate 1 < 2
        "E*1 of 2 stability requirements not met by models/shuttle/drive_speed.yaml",
        "E*shuttle-drive-speed[[]full-load[]]: FAILED*",
        "E*EG102 decay-rate 1 1/s (threshold 2 1/s, margin -1)",
    ])
    result.stdout.fnmatch_lines(["E*models/nowhere.yaml: does not exist (stability.check() "
                                 "looked in *)"])


def test_file_requirements_come_with_the_file(project):
    project.standard_models()
    project.write("tests/test_sway.py", """\
        def test_sway(stability):
            stability.check("models/mast/sway.yaml")
        """)
    result = project.pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines([
        "E*1 of 2 stability requirements not met by models/mast/sway.yaml",
        "E*FAIL  EG103 damping-ratio  [[]min_damping: 0.3[]]  (line 14)",  # line of min_damping
        "E*states sway_rate *, sway_angle *",  # the sway pair lives in angle and rate
        "E*checked: stable: true (model file), min_damping: 0.3 (model file)",
    ])


def test_uncertain_verdict_says_so(project):
    project.write("tests/test_edge.py", f"""\
        def test_on_the_threshold(stability):
            # ζ is 0.1 up to rounding (standard form above): within its error bound of 0.1
            stability.check({OSCILLATOR}, min_damping=0.1)
        """)
    result = project.pytester.runpytest()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines([
        "E*within its numerical uncertainty*on_uncertain=fail policy",
        "E*note: numerically uncertain: a value lies within its error bound of the threshold",
    ])


def test_something_that_is_not_a_model(project):
    project.write("tests/test_wrong.py", """\
        def test_dict(stability):
            stability.check({"A": [[1.0]]}, stable=True)

        def test_number(stability):
            stability.of(3.5).is_stable()

        def test_bad_threshold(stability):
            stability.check([[-1.0]], min_damping=1.5)

        def test_nothing_to_check(stability):
            stability.check([[-1.0]])
        """)
    result = project.pytester.runpytest()
    result.assert_outcomes(failed=4)
    result.stdout.fnmatch_lines([
        "E*NotAModelError: stability.check() expected a model (*), got dict: "
        "{'A': [[][[]1.0[]][]]}",
        "E*NotAModelError: stability.of() expected a model (*), got float: 3.5 (wrap a "
        "one-state model as [[][[]a[]][]])",
        "E*stability.check(): min_damping=1.5: min_damping must be a non-negative number at "
        "most 1, got 1.5",
        "E*stability.check(): no requirement to check on 1×1 matrix A*",
    ])


def test_plain_api_without_pytest():
    # x' = -x: one real mode at -1 (no oscillation, so no damping requirement applies)
    results = check([[-1.0]], stable=True, min_decay_rate=0.5)
    assert results[0].passed
    with pytest.raises(StabilityAssertionError) as info:
        of([[0.0, 1.0], [-4.0, -0.4]]).is_stable().min_damping(0.3)
    assert isinstance(info.value, AssertionError)
    assert "EG103 damping-ratio 0.1 (threshold 0.3, margin -0.2)" in str(info.value)  # std form
    (record,) = info.value.records
    assert record["verdict"] == "fail" and record["findings"][0]["rule"] == "EG103"
    with pytest.raises(NotAModelError) as bad:
        check(object(), stable=True)
    assert bad.value.given is not None and isinstance(bad.value, TypeError)
