"""Regenerate the matrix files of the example repository (invented data).

Run from example_repo/: ``python tools/make_matrices.py``. The output is deterministic.
"""

from pathlib import Path

import numpy as np
import scipy.io
import scipy.linalg as la

HERE = Path(__file__).resolve().parents[1]


def zoh(a, b, t):
    """Exact zero-order-hold discretisation of x' = a x + b u."""
    n, m = b.shape
    big = la.expm(np.block([[a, b], [np.zeros((m, n + m))]]) * t)
    return big[:n, :n], big[:n, n:]


def inverter_current():
    # Inverter output filter: inductor current and capacitor voltage, with a damping resistor.
    L, C, R, Rd = 1.2e-3, 15e-6, 0.08, 3.0
    a = np.array([[-R / L, -1 / L], [1 / C, -1 / (Rd * C)]])
    b = np.array([[1 / L], [0.0]])
    ad, bd = zoh(a, b, 50e-6)
    np.savez(HERE / "models/inverter/filter.npz", A=ad, B=bd, C=np.array([[1.0, 0.0]]))


def dc_link():
    # DC link: capacitor voltage and the source inductor current, sparse for the .mat demo.
    import scipy.sparse as sp

    a = sp.csr_matrix(np.array([[-5.0, 400.0], [-2.5, -12.0]]))
    scipy.io.savemat(HERE / "models/inverter/dc_link.mat",
                     {"A": a, "B": np.array([[0.0], [8.0]]), "C": np.array([[1.0, 0.0]])})


if __name__ == "__main__":
    inverter_current()
    dc_link()
