"""Small repositories for the report tests, checked by the real engine.

The models are invented: a lightly damped oscillator (s² + 0.4 s + 4, ζ = 0.1: second-order
standard form, common in control textbooks), a sampled positioner, a three-state model with a
defective double eigenvalue and an unstable mode, a saddle, and a file that does not load.
"""

import textwrap
from pathlib import Path

import pytest
from support import oscillator

MODELS = {
    "osc.yaml": oscillator(),  # ζ = 0.1 < 0.3: EG103 (see support.oscillator)
    "sampled.yaml": """\
        model_format: 1
        name: sampled
        domain: discrete
        sample_period: 0.1
        plant:
          states: [pos, vel]
          A: [[0.9, 0.1], [-0.3, 0.85]]
        requirements:
          stable: true
          min_damping: 0.2
          min_decay_rate: 0.5
        """,
    "three.yaml": """\
        model_format: 1
        name: three
        plant:
          states: [carriage, belt, motor]
          A: [[-1, 1, 0], [0, -1, 0], [0, 0, 0.5]]
        requirements:
          pole_region: {min_decay_rate: 0.2, min_damping: 0.5, max_frequency: 3}
        """,
    "saddle.yaml": """\
        model_format: 1
        name: saddle
        plant:
          states: [tilt, drift]
          A: [[1, 0.5], [0, -2]]
        requirements:
          no_saddle: true
        """,
    "fine.yaml": """\
        model_format: 1
        name: fine
        plant:
          A: [[-1, 0, 0], [0, -1, 0], [0, 0, -3]]
        requirements:
          stable: true
        """,
    "broken.yaml": """\
        model_format: 1
        plant:
          A: [[1, 2]]
        """,
}


def write_repo(root: Path, models: dict = MODELS) -> Path:
    (root / ".git").mkdir(exist_ok=True)
    for name, text in models.items():
        path = root / "models" / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(textwrap.dedent(text), encoding="utf-8")
    return root


@pytest.fixture
def mpl():
    return pytest.importorskip("matplotlib")


@pytest.fixture
def make_repo(tmp_path):
    """``make_repo(models)`` writes the given model files (name → YAML text; default: all of
    MODELS) into a fresh repository and returns its root."""
    return lambda models=MODELS: write_repo(tmp_path, models)


@pytest.fixture
def repo_root(tmp_path):
    return write_repo(tmp_path)


@pytest.fixture
def repo_results(repo_root):
    from eigengate.scan.engine import check_paths

    return check_paths([repo_root / "models"], root=repo_root)


@pytest.fixture
def by_name(repo_results):
    return {r.model.name: r for fr in repo_results for r in fr.results}


@pytest.fixture(scope="module")
def shared_results(tmp_path_factory):
    """The same repository checked once per test module, for tests that only read it."""
    from eigengate.scan.engine import check_paths

    root = write_repo(tmp_path_factory.mktemp("repo"))
    return check_paths([root / "models"], root=root)
