"""Results of the real engine on small model files, shared by the report-writer tests.

The damped oscillator s² + 0.4s + 4 has ζ = 0.1 and ωn = 2 rad/s (second-order standard form
s² + 2ζωn s + ωn², common in control textbooks), so `min_damping: 0.3` fails (EG103) with the
mode s = -ζωn ± jωn√(1-ζ²) = -0.2 ± 1.98997j.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from support import oscillator

from eigengate.scan.config import parse_config
from eigengate.scan.engine import check_file

FILES = {
    # EG103: ζ = 0.1 < 0.3 (see the module docstring).
    "models/osc.yaml": oscillator(),
    # EG001: A is not square.
    "models/broken.yaml": """\
model_format: 1
plant:
  A: [[1, 2, 3]]
""",
    # Two operating points; in 'storm' the closed loop pole is -0.8 - 0.5 = -1.3 > -3 (EG102).
    "models/fan.json": """\
{"model_format": 1, "name": "fan",
 "plant": {"states": ["fan_speed"], "inputs": ["v"], "outputs": ["w"],
           "A": [[-2.0]], "B": [[1.0]], "C": [[1.0]]},
 "feedback": {"output_gain": [[0.5]]},
 "requirements": {"stable": true, "min_decay_rate": 2.0},
 "operating_points": [{"label": "still air"},
                      {"label": "storm", "plant": {"A": [[-0.8]]}}]}
""",
    # A pure integrator: s = 0, τ = ∞ (on the boundary, not asymptotically stable: EG101);
    # checked with EG101 made a warning by the repository policy.
    "models/drift.yaml": """\
model_format: 1
name: drift
plant:
  states: [position]
  A: [[0.0]]
requirements:
  stable: true
""",
    # Deadbeat discrete model: z = 0, so s = -∞ and the spectral abscissa is -∞.
    "models/deadbeat.yaml": """\
model_format: 1
name: deadbeat
domain: discrete
sample_period: 0.5
plant:
  A: [[0.0]]
requirements:
  stable: true
""",
    # The oscillator again, with EG103 waived and an expired waiver (EG002); the name has a
    # pipe for the Markdown escaping.
    "models/arm.yaml": """\
model_format: 1
name: "arm | wrist"
plant:
  states: [angle, rate]
  A: [[0, 1], [-4, -0.4]]
requirements:
  min_damping: 0.3
  stable: true
waivers:
  - {rule: EG103, reason: "retune pending, see review"}
  - {rule: EG101, reason: "old", expires: 2000-01-01}
""",
}


def build(root: Path) -> list:
    """Write FILES below ``root`` and check them, in a fixed order."""
    (root / "pyproject.toml").write_text("[project]\nname = 'sample'\n", encoding="utf-8")
    warn = parse_config({"severity": {"EG101": "warning"}}, root=root)
    out = []
    for rel, text in FILES.items():
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
        out.append(check_file(path, root=root, config=warn if "drift" in rel else None))
    return out


@pytest.fixture(scope="module")
def repo(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("repo")


@pytest.fixture(scope="module")
def results(repo: Path) -> list:
    return build(repo)


def by_source(results: list, source: str):
    return next(fr for fr in results if fr.source == source)
