"""pytest-xdist with two workers: items run on the workers, the figures travel on the reports
to the controller, which prints the summary and writes the JUnit properties."""

from junitparser import JUnitXml

TESTS = """\
def test_damped(stability):
    # 4/(s² + 2.4 s + 4): ζ = 0.6 (second-order standard form, common in control textbooks)
    stability.of([[0.0, 1.0], [-4.0, -2.4]]).is_stable().min_damping(0.5)

def test_light(stability):
    # s² + 0.4 s + 4: ζ = 0.1 (same standard form)
    stability.check([[0.0, 1.0], [-4.0, -0.4]], min_damping=0.3, states=["angle", "rate"])
"""


def test_two_workers_end_to_end(project):
    project.pyproject('include = ["models/**/*.yaml"]\n')
    project.standard_models()
    project.write("models/broken.yaml", project.BROKEN)
    project.write("tests/test_loops.py", TESTS)
    result = project.pytester.runpytest_subprocess("-n", "2", "--junitxml=report.xml")
    result.assert_outcomes(passed=5, failed=2, errors=1)
    result.stdout.fnmatch_lines(["created: 2/2 workers", "*"])
    result.stdout.fnmatch_lines([
        "*= eigengate: models failing their requirements =*",
        "models/broken.yaml:4: broken  (models/broken.yaml::broken)",
        "*EG001 invalid-model: models/broken.yaml:4: plant.A must be square, got 2×3",
        "models/mast/sway.yaml:14: mast-sway-damper  (models/mast/sway.yaml::mast-sway-damper)",
        "  EG103 damping-ratio [[]min_damping: 0.3[]]: 1 mode violates damping ratio ≥ 0.3*",
        "    sway mode",
        # the sway file's closed-loop pair (numpy.linalg.eigvals of A - BK, see test_junit.py)
        "*eigenvalue -0.512815±3.02882j *sway_rate *sway_angle *",
        "2×2 matrix A  (tests/test_loops.py::test_light)",
        # ζ = 0.1 from the standard form above: the pair -ζωn ± jωn√(1-ζ²) = -0.2 ± 1.98997j
        "*eigenvalue -0.2±1.98997j · ωn 2 rad/s · ζ 0.1 *angle *rate *",
    ])
    suite = next(iter(JUnitXml.fromfile(str(project.path / "report.xml"))))
    props = {p.name: p.value for p in suite.properties()}
    assert props["eigengate:models/mast/sway.yaml::mast-sway-damper:verdict"] == "fail"
    assert props["eigengate:tests/test_loops.py::test_damped:check1:verdict"] == "pass"
    assert props["eigengate:tests/test_loops.py::test_light:check1:verdict"] == "fail"
