"""Mutation testing of the gate's deciding modules with mutmut 3 (not part of the normal run).

    python tests/mutation/run_mutmut.py waivers          # one module
    python tests/mutation/run_mutmut.py                  # all seven, one after the other
    python tests/mutation/run_mutmut.py margins _grid siso_margins   # only those functions' mutants
    python tests/mutation/run_mutmut.py freqresp Resolvent._block   # a method's mutants
    python tests/mutation/run_mutmut.py margins x__grid__mutmut_7   # one mutant, by its name
    EG_MUTMUT_LIMIT=600 python tests/mutation/run_mutmut.py modes   # stop after 600 s

mutmut 3 mutates the files below ``src/`` of the folder it runs in, and tests must import the
mutated copy. This repository keeps the package in ``plugin/``, so each run gets a work folder
``.mutmut/<module>/`` (git-ignored) holding ``src`` (a link to ``plugin``), ``tests`` (a link),
``example_repo`` and a pyproject.toml whose ``[tool.mutmut]`` mutates that one module and runs
the narrowest in-process tests covering it. Tests that run the command line as a subprocess
cannot see the mutants, so they are not selected. mutmut runs one worker at the lowest CPU
priority with its per-mutant timeout (15 × the test time + 1 s), and BLAS on one thread (a
threaded BLAS spinning against the other jobs of a small machine made the margins tests about
ten times slower).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

#: module → its file below the package
PATHS = {
    "rules": "rules/catalogue.py",
    "waivers": "rules/waivers.py",
    "regressions": "baseline/regressions.py",
    "modes": "analysis/modes.py",
    "bounds": "analysis/bounds.py",
    "margins": "analysis/margins.py",
    "freqresp": "analysis/freqresp.py",
}

#: module → the in-process tests that exercise it (the narrowest selection that covers it)
SELECTION = {
    "rules": ["tests/test_rules_table.py", "tests/reports/test_sarif.py",
              "tests/baseline/test_regressions.py::test_every_regression_rule_is_registered"],
    "waivers": ["tests/test_gate_boundaries.py", "tests/test_waivers.py"],
    "regressions": ["tests/baseline/test_regressions.py", "tests/baseline/test_regression_findings.py",
                    "tests/test_gate_boundaries.py"],
    "modes": ["tests/test_gate_boundaries.py", "tests/test_mode_records.py",
              "tests/test_modes_reference.py", "tests/test_modes_mutation.py"],
    "bounds": ["tests/test_modes_reference.py", "tests/test_bounds_corpus.py",
               "tests/test_modes_mutation.py"],
    "margins": ["tests/test_gate_boundaries.py", "tests/margins/test_margins_reference.py",
                "tests/margins/test_margins_mutation.py", "tests/margins/test_margins_loop_paths.py",
                "tests/margins/test_margin_pitfalls.py", "tests/margins/test_loop_requirements.py",
                "tests/margins/test_freqresp.py"],
    "freqresp": ["tests/margins/test_freqresp.py", "tests/margins/test_margins_mutation.py",
                 "tests/margins/test_margins_reference.py", "tests/margins/test_margins_loop_paths.py",
                 "tests/margins/test_margin_pitfalls.py"],
}


def run(module: str, mutmut: Path, functions: list[str] | None = None) -> int:
    work = ROOT / ".mutmut" / module
    shutil.rmtree(work, ignore_errors=True)
    work.mkdir(parents=True)
    for name, target in (("src", "plugin"), ("tests", "tests"), ("example_repo", "example_repo")):
        (work / name).symlink_to(ROOT / target, target_is_directory=True)
    tests = [t for t in SELECTION[module] if (ROOT / t.split("::")[0]).exists()]
    pyproject = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    pyproject += (
        "\n[tool.mutmut]\n"
        'source_paths = ["src/eigengate"]\n'
        f'only_mutate = ["src/eigengate/{PATHS[module]}"]\n'
        f"pytest_add_cli_args_test_selection = {tests!r}\n"
        'pytest_add_cli_args = ["-p", "no:cacheprovider", "-p", "no:xdist", "-q"]\n'
        'also_copy = ["example_repo"]\n')
    (work / "pyproject.toml").write_text(pyproject, encoding="utf-8")
    env = {**os.environ, "CI": "true"}  # derandomised hypothesis: the same run every time
    env.update({v: "1" for v in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")})
    dotted = "eigengate." + PATHS[module][:-3].replace("/", ".")
    # mutmut names a function's mutants x_NAME__mutmut_N, a method's xǁCLASSǁNAME__mutmut_N
    names = [f"{dotted}.{f}" if "__mutmut_" in f else  # a mutant's own name
             f"{dotted}.x{'ǁ' + f.replace('.', 'ǁ') if '.' in f else '_' + f}__mutmut_*"
             for f in functions or ()]
    limit = os.environ.get("EG_MUTMUT_LIMIT")  # seconds; what was run by then is kept
    cmd = ["nice", "-n", "19", str(mutmut), "run", "--max-children", "1", *names]
    if limit:
        cmd = ["timeout", "--signal=INT", limit, *cmd]
    rc = subprocess.call(cmd, cwd=work, env=env)
    subprocess.call([str(mutmut), "results", "--all", "true"], cwd=work, env=env,
                    stdout=open(work / "results.txt", "w"))
    return rc


def main(argv: list[str]) -> int:
    mutmut = Path(sys.executable).with_name("mutmut")
    if len(argv) > 1:  # one module and some of its functions
        return run(argv[0], mutmut, argv[1:])
    modules = argv or list(SELECTION)
    return max(run(m, mutmut) for m in modules)


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
