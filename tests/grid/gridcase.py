"""A gain-scheduled oscillator on a grid, for the grid tests.

Plant x'' = -(speed) x - (load) x' + u under state feedback u = -[k1, k2] x: the closed loop is
s² + (load + k2) s + (speed + k1), so ωn² = speed + k1 and 2ζωn = load + k2 (second-order
standard form, common in control textbooks). The gains are scheduled on speed only.
"""

import textwrap
from pathlib import Path

import numpy as np

SPEEDS = (1.0, 2.0, 3.0, 4.0)
LOADS = (0.0, 0.5, 1.0)


def gains(speed: float) -> tuple[float, float]:
    return 0.5 * speed, 1.0


def stacks(speeds=SPEEDS, loads=LOADS, retune=None):
    """A (speeds, loads, 2, 2), B (…, 2, 1), K (…, 1, 2); ``retune`` = ((i, j), k2) changes
    one point's rate gain."""
    a = np.zeros((len(speeds), len(loads), 2, 2))
    b = np.zeros((len(speeds), len(loads), 2, 1))
    k = np.zeros((len(speeds), len(loads), 1, 2))
    for i, s in enumerate(speeds):
        for j, l in enumerate(loads):
            a[i, j] = [[0.0, 1.0], [-s, -l]]
            b[i, j] = [[0.0], [1.0]]
            k[i, j] = [gains(s)]
    if retune is not None:
        (i, j), k2 = retune
        k[i, j, 0, 1] = k2
    return a, b, k


def expected_damping(speed: float, load: float, k2: float | None = None) -> float:
    k1, k2_ = gains(speed)
    k2 = k2_ if k2 is None else k2
    return (load + k2) / (2 * np.sqrt(speed + k1))


def model_text(matrices: str, *, requirements: str = "min_damping: 0.2", regions: str = "",
               axes: str = "{speed: [1, 2, 3, 4], load: [0, 0.5, 1]}", extra: str = "") -> str:
    text = f"""\
model_format: 1
name: hoist
plant:
  states: [x, v]
  inputs: [u]
  outputs: [x]
  C: [[1, 0]]
feedback:
  inputs: [u]
requirements:
  {requirements}
grid:
  axes: {axes}
  matrices:
{textwrap.indent(textwrap.dedent(matrices).strip(), "    ")}
"""
    if regions:
        text += "  regions:\n" + textwrap.indent(textwrap.dedent(regions).strip(), "    ") + "\n"
    return text + extra


STACKED = """\
plant.A: {file: grid.npz, key: A}
plant.B: {file: grid.npz, key: B}
feedback.state_gain: {file: grid.npz, key: K}
"""


def stacked_repo(root: Path, retune=None, speeds=SPEEDS, loads=LOADS, **kw) -> Path:
    """A repository with models/hoist.yaml and its stack models/grid.npz."""
    (root / ".git").mkdir(parents=True, exist_ok=True)
    (root / "models").mkdir(exist_ok=True)
    a, b, k = stacks(speeds, loads, retune)
    np.savez(root / "models" / "grid.npz", A=a, B=b, K=k)
    if "axes" not in kw:
        kw["axes"] = ("{speed: [" + ", ".join(f"{s:g}" for s in speeds) + "], load: ["
                      + ", ".join(f"{l:g}" for l in loads) + "]}")
    path = root / "models" / "hoist.yaml"
    path.write_text(model_text(STACKED, **kw), encoding="utf-8")
    return path
