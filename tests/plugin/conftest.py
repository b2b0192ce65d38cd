"""Shared set-up of the plugin tests: small repositories built with pytester.

pytester's in-process runs forget the modules first imported inside them (except eigengate's
own, which tests/conftest.py keeps), and numpy refuses to be imported twice in one process,
so the heavy libraries (and the eigengate modules that hold classes the runs compare against)
are imported once here, before any run. hypothesis is
among them because its pytest plugin imports it in every run, and pytest would rewrite its
asserts each time.
"""

import textwrap

import control  # noqa: F401
import hypothesis  # noqa: F401
import numpy  # noqa: F401
import pytest
import scipy.linalg  # noqa: F401
import yaml  # noqa: F401

import eigengate.pytest.assertions  # noqa: F401
import eigengate.pytest.collector  # noqa: F401
import eigengate.scan.engine  # noqa: F401
import eigengate.load.loader  # noqa: F401

INI = """\
[tool.pytest.ini_options]
testpaths = ["tests", "models"]
addopts = ["--strict-markers", "-p", "no:cacheprovider"]
filterwarnings = ["error"]
"""

# The example repository's invented company (Tallowmere Works): the mast sway damper after a
# retune (damper gain 0.9), a drive speed loop at three payloads, a lift axis.
SWAY = """\
model_format: 1
name: mast-sway-damper
plant:
  states: [sway_angle, sway_rate, damper_force]
  inputs: [damper_cmd]
  A: [[0.0, 1.0, 0.0],
      [-9.0, -0.1, 1.0],
      [0.0, 0.0, -20.0]]
  B: [[0.0], [0.0], [20.0]]
feedback:
  state_gain: [[0.0, 0.9, 0.0]]
requirements:
  stable: true
  min_damping: 0.3
"""

DRIVE = """\
model_format: 1
name: shuttle-drive-speed
requirements:
  stable: true
operating_points:
  - label: empty
    plant: {states: [speed], A: [[-4.0]]}
  - label: half-load
    plant: {states: [speed], A: [[-2.0]]}
  - label: full-load
    plant: {states: [speed], A: [[-1.0]]}
"""

LIFT = """\
model_format: 1
name: shuttle-lift-axis
plant:
  states: [position, velocity]
  A: [[0.0, 1.0], [-2.0, -3.0]]
requirements:
  stable: true
  equilibrium: stable-node
"""

BROKEN = """\
model_format: 1
name: broken
plant:
  A: [[1, 2, 3], [4, 5, 6]]
"""


class Project:
    """A temporary repository: pyproject.toml (pytest ini and optional [tool.eigengate]),
    model files and test files."""

    SWAY, DRIVE, LIFT, BROKEN = SWAY, DRIVE, LIFT, BROKEN

    def __init__(self, pytester: pytest.Pytester) -> None:
        self.pytester = pytester
        self.path = pytester.path
        for folder in (".git", "tests", "models"):  # testpaths must exist
            (self.path / folder).mkdir(exist_ok=True)

    def pyproject(self, eigengate: str | None = None, ini: str = INI) -> None:
        text = ini
        if eigengate is not None:
            text += "\n[tool.eigengate]\n" + textwrap.dedent(eigengate)
        (self.path / "pyproject.toml").write_text(text, encoding="utf-8")

    def write(self, rel: str, text: str) -> None:
        path = self.path / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(textwrap.dedent(text), encoding="utf-8")

    def models(self, **files: str) -> None:
        for rel, text in files.items():
            self.write(rel, text)

    def standard_models(self) -> None:
        self.write("models/mast/sway.yaml", SWAY)
        self.write("models/shuttle/drive_speed.yaml", DRIVE)
        self.write("models/shuttle/lift_axis.yaml", LIFT)


@pytest.fixture
def project(pytester: pytest.Pytester) -> Project:
    p = Project(pytester)
    p.pyproject()
    return p
