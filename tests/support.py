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


def run_main(*args, cwd=None, env=None):
    """``eigengate.cli.main(ARGS)`` in this process, in ``cwd`` with ``env`` added: the exit
    status and output as :func:`run_cli` gives them, without a new interpreter's start-up and
    imports. For tests about what a command prints or writes; the command line as a process
    (entry point, exit statuses, streams) keeps its tests with run_cli."""
    import contextlib
    import io

    from eigengate.cli import main

    full = {"EIGENGATE_TODAY": FIXED_TODAY, **(env or {})}
    saved_env = {key: os.environ.get(key) for key in full}
    saved_cwd = os.getcwd()
    out, err = io.StringIO(), io.StringIO()
    try:
        os.environ.update(full)
        os.chdir(cwd or saved_cwd)
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            status = main(list(map(str, args)))
    finally:
        os.chdir(saved_cwd)
        for key, value in saved_env.items():
            if value is None:
                os.environ.pop(key, None)
            else:
                os.environ[key] = value
    return subprocess.CompletedProcess(["eigengate", *args], status, out.getvalue(),
                                       err.getvalue())


#: A fixed identity and defaults for git in temporary repositories.
GIT_ID = ["-c", "user.name=Test Author", "-c", "user.email=author@example.invalid",
          "-c", "commit.gpgsign=false", "-c", "init.defaultBranch=main"]


def git(repo, *args) -> str:
    """Run git in ``repo`` (a real temporary repository); its standard output."""
    return subprocess.run(["git", *GIT_ID, *args], cwd=repo, check=True, capture_output=True,
                          text=True).stdout


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


def cruise_points(*rows) -> str:
    """A double integrator with state feedback u = -4 x - k2 x' at operating points
    ``(id_text, label, k2)``: s^2 + k2 s + 4, so wn = 2 and zeta = k2 / 4 (second-order
    standard form, common in control textbooks). ``id_text`` is ``""`` or ``"id: NAME, "``."""
    body = "".join(f"  - {{{ident}label: '{label}', feedback: {{state_gain: [[4, {k2}]]}}}}\n"
                   for ident, label, k2 in rows)
    return textwrap.dedent("""\
        model_format: 1
        name: cruise
        plant:
          states: [pos, vel]
          A: [[0, 1], [0, 0]]
          B: [[0], [1]]
        requirements:
          stable: true
        operating_points:
        """) + body


# A vector field whose damping coefficient lives in a second module that the field's module
# imports: x' = [x1, -4 x0 - c x1], so s^2 + c s + 4, wn = 2 and zeta = c / 4 (second-order
# standard form, common in control textbooks). Modules go to plantdyn/ (see boom_repo).
BOOM_FIELD = """\
    import numpy as np

    from plantdyn.coefficients import DAMPING


    def boom(x, u):
        return np.array([x[1], -4.0 * x[0] - DAMPING * x[1]])
    """
BOOM_MODEL = """\
    model_format: 1
    name: boom
    vector_field:
      function: plantdyn.arm:boom
      states: [angle, rate]
      at:
        - {label: rest, x: [0.0, 0.0]}
    requirements:
      min_damping: 0.08
    """
# Two real poles -2 and -6 (diagonal): stable, no oscillatory mode.
ROLL = """\
    model_format: 1
    name: roll
    plant:
      A: [[-2, 0], [0, -6]]
    requirements:
      stable: true
    """


def boom_files(root: Path, damping: float) -> None:
    """The vector-field model and its two modules (zeta = damping / 4) below ``root``."""
    write(root / "plantdyn" / "__init__.py", "")
    write(root / "plantdyn" / "arm.py", BOOM_FIELD)
    write(root / "plantdyn" / "coefficients.py", f"DAMPING = {damping}\n")
    write(root / "models" / "boom.yaml", BOOM_MODEL)


def entry_rest(items) -> list:
    """The rest of a cache entry's data (its last blob, a JSON text; scan.encode) from its
    blobs as a pack gives them: one segment and its flat index."""
    import json

    segment, index = items
    off, size = index[-4], index[-3]
    return json.loads(segment[off:off + size])


def with_rest(items, rest) -> tuple:
    """A cache entry's blobs (segment and index) with its last blob, the rest of its data,
    replaced by the JSON text of ``rest``."""
    import json

    segment, index = items
    text = json.dumps(rest).encode()
    off = index[-4]
    return segment[:off] + text, index[:-3] + [len(text)] + index[-2:]
