"""Shared test support: the command line as a subprocess, and the textbook models several
test modules use (each with its outside source)."""

import os
import subprocess
import sys
import textwrap
from pathlib import Path


#: The date every test judges waivers on (``EIGENGATE_TODAY``), so that no test depends on the
#: calendar: the example repository's policy waiver expires on 2027-06-30.
FIXED_TODAY = "2026-12-01"


def cli_env(**extra: str) -> dict:
    """The environment of a subprocess under test: UTF-8 output, waivers judged on FIXED_TODAY."""
    return {**os.environ, "PYTHONIOENCODING": "utf-8", "EIGENGATE_TODAY": FIXED_TODAY, **extra}


def run_cli(*args, cwd=None, env=None, timeout=180):
    """``python -m eigengate ARGS`` in ``cwd``; waivers are judged on a fixed date."""
    full = cli_env(**(env or {}))
    return subprocess.run([sys.executable, "-m", "eigengate", *args], capture_output=True,
                          text=True, cwd=cwd, env=full, timeout=timeout)


def write(path: Path, text: str) -> Path:
    """Write dedented ``text`` to ``path``, making its folders."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def oscillator(name: str = "osc", min_damping: float | None = 0.3) -> str:
    """s² + 0.4 s + 4: ζ = 0.4 / (2·2) = 0.1, ωn = 2, poles -0.2 ± 1.98997j (second-order
    standard form, common in control textbooks); fails ``min_damping`` 0.3 (EG103). With
    ``min_damping=None`` the file states no requirements (a policy supplies them)."""
    text = textwrap.dedent(f"""\
        model_format: 1
        name: {name}
        plant:
          states: [angle, rate]
          A: [[0, 1], [-4, -0.4]]
        """)
    if min_damping is not None:
        text += f"requirements:\n  stable: true\n  min_damping: {min_damping}\n"
    return text


def lift_axis(gain_rate: float) -> str:
    """Lift axis in state feedback: closed loop s² + (0.8 + 2.5 k2) s + 2.5·3.2.

    k2 = 2.08 gives s² + 6 s + 8 = (s + 2)(s + 4), a stable node; k2 = 1.2 gives s² + 3.8 s + 8,
    the pair -1.9 ± 2.09523j with ωn = √8 = 2.828 and ζ = 3.8 / (2√8) = 0.672 (second-order
    standard form, common in control textbooks).
    """
    return textwrap.dedent(f"""\
        model_format: 1
        name: lift
        plant:
          states: [pos, vel]
          A: [[0, 1], [0, -0.8]]
          B: [[0], [2.5]]
        feedback:
          state_gain: [[3.2, {gain_rate}]]
        requirements:
          stable: true
        """)
