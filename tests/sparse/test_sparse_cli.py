"""The command line end to end on a sparse model file (issue 15): a 3,600-state heat plate
stored with scipy.sparse.save_npz passes by the sparse search, an unstable one fails with
the search named, and the cached re-check prints the same bytes.

Sources: the five-point Laplacian's rightmost eigenvalue −(8/h²)·sin²(πh/2) (LeVeque, Finite
Difference Methods, 2007, from memory); scipy.sparse.save_npz (reference library).
"""

import math
import os
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from support import run_cli

PLUGIN = str(Path(__file__).resolve().parents[2] / "plugin")


def heat(m):
    t = sp.diags([1.0, -2.0, 1.0], [-1, 0, 1], shape=(m, m))
    eye = sp.identity(m)
    return ((sp.kron(t, eye) + sp.kron(eye, t)) * (m + 1) ** 2).tocsr()


def model_dir(tmp_path, shift):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    m = 60
    sp.save_npz(tmp_path / "plate.npz", (heat(m) + shift * sp.identity(m * m)).tocsr())
    np.savez(tmp_path / "io.npz", B=np.ones((m * m, 1)))
    (tmp_path / "plate.yaml").write_text(
        "model_format: 1\nname: plate\nplant:\n  A: {file: plate.npz}\n"
        "  B: {file: io.npz, key: B}\nrequirements:\n  stable: true\n  min_decay_rate: 5\n")
    return tmp_path


def check(path):
    env = {"PYTHONPATH": PLUGIN + os.pathsep + os.environ.get("PYTHONPATH", "")}
    return run_cli("check", "--no-baseline", str(path), cwd=path, env=env, timeout=120)


def test_sparse_model_file_passes_by_search_and_is_cached_byte_identical(tmp_path):
    path = model_dir(tmp_path, 0.0)
    first = check(path)
    assert first.returncode == 0, first.stdout + first.stderr
    assert "found of 3600 by a sparse search" in first.stdout, first.stdout
    rightmost = -8 * 61**2 * math.sin(math.pi / 122) ** 2  # ≈ −19.73
    assert f"{rightmost:.6g}" in first.stdout
    again = check(path)
    assert again.returncode == 0 and again.stdout == first.stdout


def test_unstable_sparse_model_fails_with_the_search_named(tmp_path):
    out = check(model_dir(tmp_path, 30.0))  # rightmost ≈ +10.3
    assert out.returncode == 1, out.stdout + out.stderr
    assert "EG101" in out.stdout and "Traceback" not in out.stderr


def test_second_order_model_from_sparse_files_is_certified_and_cached(tmp_path):
    # a 1,600-coordinate spring chain (3,200 states) with Rayleigh damping: M, D, K symmetric
    # positive definite, so stability is certified by structure (inertia counts)
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    n = 1600
    K = sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(n, n)).tocsr()
    M = sp.diags(np.linspace(1.0, 2.0, n)).tocsr()
    for name, mat in (("mass", M), ("stiffness", K), ("damping", 0.01 * K + 0.001 * M)):
        sp.save_npz(tmp_path / f"{name}.npz", mat.tocsr())
    (tmp_path / "chain.yaml").write_text(
        "model_format: 1\nname: chain\nplant:\n  second_order:\n    M: {file: mass.npz}\n"
        "    K: {file: stiffness.npz}\n    D: {file: damping.npz}\n"
        "requirements:\n  stable: true\n")
    first = check(tmp_path)
    assert first.returncode == 0, first.stdout + first.stderr
    assert "found of 3200 by a sparse search" in first.stdout, first.stdout
    again = check(tmp_path)
    assert again.returncode == 0 and again.stdout == first.stdout
    env = {"PYTHONPATH": PLUGIN + os.pathsep + os.environ.get("PYTHONPATH", "")}
    out = run_cli("check", "--no-baseline", "--format", "json", str(tmp_path), cwd=tmp_path,
                  env=env, timeout=120)
    assert '"certified"' in out.stdout and "second-order structure" in out.stdout
