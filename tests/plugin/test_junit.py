"""JUnit XML: key figures per item as suite-level properties, in a file that stays valid
xunit2 (no <properties> inside a <testcase>)."""

import xml.etree.ElementTree as ET

import numpy as np
from junitparser import JUnitXml

TEST = """\
def test_oscillator(stability):
    stability.check([[0.0, 1.0], [-4.0, -0.4]], stable=True)
"""


def reference_figures(A):
    """Spectral abscissa and smallest damping ratio of oscillatory modes, from numpy's
    eigenvalues (numpy.linalg.eigvals as the reference; ζ = -Re λ / |λ|)."""
    lam = np.linalg.eigvals(np.asarray(A, dtype=float))
    osc = [z for z in lam if abs(z.imag) > 0]
    return max(lam.real), min((-z.real / abs(z) for z in osc), default=1.0)


def test_figures_are_suite_properties_and_the_file_is_xunit2(project):
    project.pyproject('include = ["models/**/*.yaml"]\n')
    project.standard_models()
    project.write("tests/test_osc.py", TEST)
    result = project.pytester.runpytest("--junitxml=report.xml", "-o", "junit_family=xunit2")
    result.assert_outcomes(passed=5, failed=1)
    path = project.path / "report.xml"

    suite = next(iter(JUnitXml.fromfile(str(path))))
    props = {p.name: p.value for p in suite.properties()}
    sway = "eigengate:models/mast/sway.yaml::mast-sway-damper"
    assert props[f"{sway}:verdict"] == "fail"
    # closed loop A - B K of the sway file (conftest.py), K = [0, 0.9, 0]
    a_cl = np.array([[0.0, 1.0, 0.0], [-9.0, -0.1, 1.0], [0.0, -18.0, -20.0]])
    abscissa, zeta = reference_figures(a_cl)
    assert np.isclose(float(props[f"{sway}:spectral_abscissa"]), abscissa, rtol=1e-5)
    assert np.isclose(float(props[f"{sway}:min_damping"]), zeta, rtol=1e-5)
    point = "eigengate:models/shuttle/drive_speed.yaml::shuttle-drive-speed[full-load]"
    assert props[f"{point}:verdict"] == "pass"
    assert float(props[f"{point}:spectral_abscissa"]) == -1.0  # A = [[-1]]: its eigenvalue
    check = "eigengate:tests/test_osc.py::test_oscillator:check1"
    assert props[f"{check}:model"] == "2×2 matrix A"
    # s² + 0.4 s + 4: Re λ = -ζωn = -0.2 (second-order standard form)
    assert np.isclose(float(props[f"{check}:spectral_abscissa"]), -0.2)

    root = ET.parse(path).getroot()
    assert root.tag == "testsuites"
    for case in root.iter("testcase"):
        assert case.find("properties") is None, case.attrib
    suite_el = root.find("testsuite")
    assert suite_el[0].tag == "properties"  # xunit2: properties come first in a testsuite
    assert {c.tag for c in suite_el} <= {"properties", "testcase", "system-out", "system-err"}

