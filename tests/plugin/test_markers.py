"""Markers: default requirements on a test, class or module (closest wins key by key), the
expected equilibrium, strict-marker registration and errors for bad marker arguments."""

from textwrap import dedent

# x'' = -4x - 0.4x' (s² + 0.4 s + 4): ζ = 0.1 (second-order standard form, common in control
# textbooks); x' = diag(1, -1) x: a saddle (real eigenvalues of opposite sign, common
# phase-plane classification).
MODELS = """\
OSC = [[0.0, 1.0], [-4.0, -0.4]]
SADDLE = [[1.0, 0.0], [0.0, -1.0]]
NODE = [[-1.0, 0.0], [0.0, -2.0]]
"""


def test_closest_marker_wins_key_by_key(project):
    project.write("tests/test_layers.py", MODELS + dedent("""\
        import pytest

        pytestmark = pytest.mark.stability_requirements(stable=True, min_damping=0.05)

        def test_module_defaults(stability):
            stability.check(OSC)                     # ζ 0.1 ≥ 0.05, stable

        def test_module_stable_applies(stability):
            stability.check(SADDLE)                  # stable: true from the module

        @pytest.mark.stability_requirements(min_damping=0.3)
        class TestRetunedSway:
            def test_class_threshold(self, stability):
                stability.check(OSC)                 # ζ 0.1 < 0.3 from the class

            @pytest.mark.stability_requirements(min_damping=0.08)
            def test_function_wins(self, stability):
                stability.check(OSC)                 # 0.08 from the function

            def test_call_wins(self, stability):
                stability.check(OSC, min_damping=0.01)

            def test_switch_off(self, stability):
                stability.check(SADDLE, stable=False, min_damping=0.01)
        """))
    result = project.pytester.runpytest("-v")
    result.assert_outcomes(passed=4, failed=2)
    result.stdout.fnmatch_lines([
        "*test_module_defaults PASSED*",
        "*test_module_stable_applies FAILED*",
        "*TestRetunedSway::test_class_threshold FAILED*",
        "*TestRetunedSway::test_function_wins PASSED*",
        "*TestRetunedSway::test_call_wins PASSED*",
        "*TestRetunedSway::test_switch_off PASSED*",
    ])
    result.stdout.fnmatch_lines([
        "E*checked: stable: true (@stability_requirements on module test_layers.py)*",
    ])
    result.stdout.fnmatch_lines([
        "E*checked: stable: true (@stability_requirements on module test_layers.py), "
        "min_damping: 0.3 (@stability_requirements on class TestRetunedSway)",
    ])


def test_expected_equilibrium(project):
    project.write("tests/test_kind.py", MODELS + dedent("""\
        import pytest

        @pytest.mark.expect_equilibrium("stable-node")
        def test_node(stability):
            stability.check(NODE)

        @pytest.mark.expect_equilibrium("stable-node")
        def test_saddle(stability):
            stability.of(SADDLE).no_saddle()
        """))
    result = project.pytester.runpytest()
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines([
        # the chain's own step fails first: the saddle has 1 stable and 1 unstable direction
        "E*FAIL  EG107 no-saddle  [[]no_saddle: true[]]",
        "E*saddle: saddle (1 stable, 1 unstable, 0 center directions)",
    ])


def test_chain_restates_defaults_and_the_rest_is_checked_on_return(project):
    project.write("tests/test_chain.py", MODELS + dedent("""\
        import pytest

        @pytest.mark.stability_requirements(stable=True, min_damping=0.3)
        def test_restated(stability):
            stability.of(OSC).min_damping(0.05)      # replaces 0.3; stable checked on return

        @pytest.mark.stability_requirements(stable=True, min_damping=0.3)
        def test_left_to_the_marker(stability):
            stability.of(OSC).is_stable()
        """))
    result = project.pytester.runpytest()
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines([
        "stability.of() at tests/test_chain.py:12: requirements the chain did not state, "
        "checked when the test returned:",
        "1 of 1 stability requirement not met by 2×2 matrix A",
        "  checked: min_damping: 0.3 (@stability_requirements on test test_left_to_the_marker)",
    ])
    assert "_multicall" not in result.stdout.str()  # no hook-machinery frames


def test_markers_are_registered_for_strict_markers(project):
    project.write("tests/test_plain.py", """\
        import pytest

        @pytest.mark.stability_requirements(stable=True)
        @pytest.mark.expect_equilibrium("stable-node")
        def test_marked():
            pass
        """)
    result = project.pytester.runpytest("--strict-markers")
    result.assert_outcomes(passed=1)
    markers = project.pytester.runpytest("--markers")
    markers.stdout.fnmatch_lines([
        "@pytest.mark.stability_requirements(**requirements): default stability requirements*"
        "Example: @pytest.mark.stability_requirements(stable=True, min_damping=0.3)",
        "@pytest.mark.expect_equilibrium(kind): *Example: "
        "@pytest.mark.expect_equilibrium('stable-node')",
    ])


def test_bad_marker_arguments_name_marker_key_and_value(project):
    project.write("tests/test_bad.py", """\
        import pytest

        @pytest.mark.stability_requirements(min_damping=1.5)
        def test_too_much(stability):
            pass

        @pytest.mark.stability_requirements(min_dampign=0.3)
        def test_typo():                     # checked even without the fixture
            pass

        @pytest.mark.expect_equilibrium("stabel-node")
        def test_kind(stability):
            pass

        @pytest.mark.stability_requirements(0.3)
        def test_positional(stability):
            pass

        def test_unmarked(stability):
            pass
        """)
    result = project.pytester.runpytest()
    result.assert_outcomes(passed=1, errors=4)
    result.stdout.fnmatch_lines_random([
        "@pytest.mark.stability_requirements on test test_too_much: min_damping=1.5: "
        "min_damping must be a non-negative number at most 1, got 1.5",
        "@pytest.mark.stability_requirements on test test_typo: min_dampign=0.3: min_dampign "
        "is not a known field (got 'min_dampign') (did you mean 'min_damping'?)",
        "@pytest.mark.expect_equilibrium on test test_kind: equilibrium='stabel-node': "
        "equilibrium must be one of *, got 'stabel-node' (did you mean 'stable-node'?)",
        "@pytest.mark.stability_requirements on test test_positional: takes keyword arguments "
        "only (stable=True, min_damping=0.3), got positional (0.3,)",
    ])
    assert "Traceback" not in result.stdout.str()
