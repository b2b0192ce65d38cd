"""Matrix files: strict CSV numbers, and shapes checked from headers before any data is read.

A referenced matrix may hold at most MAX_STATES² entries (the largest state matrix a model may
have); ``.npz`` headers, the zip member's declared size and ``.mat`` headers are checked
against that before the data is decompressed. Sparse files stay sparse (tests/sparse/).
"""

import io
import zipfile

import numpy as np
import pytest

from eigengate.model import matrixfiles as _matrixfiles
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.model.core import MAX_STATES

MODEL = "model_format: 1\nplant: {{A: {{file: {name}}}}}\n"


def load_error(tmp_path, name: str) -> str:
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    path = tmp_path / "m.yaml"
    path.write_text(MODEL.format(name=name))
    with pytest.raises(ModelError) as info:
        load_models(path, tmp_path)
    message = str(info.value)
    assert message.startswith("m.yaml"), message
    assert "\n" not in message and "Traceback" not in message
    return message


@pytest.mark.parametrize("cell", [
    "1_0",          # Python's float() takes underscores
    "1_000.5",
    "１",           # fullwidth digit one: float() takes any Unicode decimal digit
    "٣",            # Arabic-Indic three
    "1 0",          # whitespace inside a number
    "inf", "-Infinity", "infinity", "nan", "NaN", "+nan",  # float() spellings of non-finite
    "0x10", "1e", "e3", "--1", "1.2.3", "", "1d3", "½",
])
def test_csv_cells_float_would_accept_or_that_are_not_numbers(tmp_path, cell):
    (tmp_path / "a.csv").write_text(f"1, 2\n# note\n3, {cell}\n", encoding="utf-8")
    message = load_error(tmp_path, "a.csv")
    assert "a.csv" in message and "row 2" in message and "line 3" in message, message
    assert "column 2" in message and repr(cell) in message, message


@pytest.mark.parametrize("cell, value", [
    ("1e3", 1000.0), ("-2.0E-3", -0.002), (".5", 0.5), ("5.", 5.0), ("+7", 7.0),
    ("  -0.25\t", -0.25),  # blanks around a cell are fine
])
def test_csv_plain_numbers(tmp_path, cell, value):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    (tmp_path / "a.csv").write_text(f"{cell}\n", encoding="utf-8")
    path = tmp_path / "m.yaml"
    path.write_text(MODEL.format(name="a.csv"))
    (model,) = load_models(path, tmp_path)
    assert model.A[0, 0] == value  # Python's float() as the reference for the plain forms


def test_csv_with_too_many_entries_stops_early(tmp_path, monkeypatch):
    monkeypatch.setattr(_matrixfiles, "MAX_MATRIX_ENTRIES", 6)
    (tmp_path / "a.csv").write_text("1, 2, 3\n4, 5, 6\n7, 8, 9\n")
    message = load_error(tmp_path, "a.csv")
    assert "more than 6 entries" in message and "row 3" in message, message


def npz_with_header(path, shape, dtype="<f8", payload=b"", declared=None):
    """An .npz whose A.npy claims ``shape`` but holds only ``payload`` after its header."""
    buf = io.BytesIO()
    np.lib.format.write_array_header_1_0(buf, {"descr": dtype, "fortran_order": False,
                                               "shape": shape})
    body = buf.getvalue() + payload
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("A.npy", body)
    if declared is not None:  # rewrite the declared uncompressed size in both headers
        raw = bytearray(path.read_bytes())
        size = len(body).to_bytes(4, "little")
        new = declared.to_bytes(4, "little")
        for at in (22, raw.rfind(b"PK\x01\x02") + 24):
            assert raw[at:at + 4] == size
            raw[at:at + 4] = new
        path.write_bytes(bytes(raw))


def test_npz_header_shape_refused_before_reading(tmp_path):
    n = MAX_STATES + 1
    npz_with_header(tmp_path / "big.npz", (n, n))  # no data at all: only the header is read
    message = load_error(tmp_path, "big.npz")
    assert f"{n}×{n}" in message and f"{MAX_STATES * MAX_STATES} entries" in message, message
    assert "plant.A" in message and "big.npz" in message


def test_npz_member_declared_size_refused(tmp_path, monkeypatch):
    monkeypatch.setattr(_matrixfiles, "MAX_MATRIX_FILE_BYTES", 1 << 20)
    npz_with_header(tmp_path / "lie.npz", (2, 2), payload=b"\0" * 32, declared=1 << 30)
    message = load_error(tmp_path, "lie.npz")
    assert "uncompressed" in message and str(1 << 30) in message, message


def test_npz_object_dtype_refused_from_header(tmp_path):
    npz_with_header(tmp_path / "obj.npz", (1,), dtype="|O")
    assert "pickled object data" in load_error(tmp_path, "obj.npz")


def test_npz_three_dimensional_refused_from_header(tmp_path):
    npz_with_header(tmp_path / "cube.npz", (2, 2, 2))
    assert "3 dimensions" in load_error(tmp_path, "cube.npz")


def test_large_sparse_mat_stays_sparse(tmp_path):
    """Issue 15: a 10⁵-state sparse .mat was made dense (80 GB) before any limit; it now
    stays sparse in the Model (the sparse search analyses it)."""
    import scipy.io
    import scipy.sparse

    n = 100_000  # dense, this would be 80 GB
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    scipy.io.savemat(tmp_path / "s.mat", {"A": -scipy.sparse.eye(n, format="csc")})
    path = tmp_path / "m.yaml"
    path.write_text(MODEL.format(name="s.mat"))
    (model,) = load_models(path, tmp_path)
    assert model.sparse and model.A.shape == (n, n) and model.A.nnz == n


def test_small_sparse_mat_still_reads(tmp_path):
    import scipy.io
    import scipy.sparse

    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    scipy.io.savemat(tmp_path / "s.mat", {"A": -scipy.sparse.eye(3, format="csc")})
    path = tmp_path / "m.yaml"
    path.write_text(MODEL.format(name="s.mat"))
    (model,) = load_models(path, tmp_path)
    assert model.A.tolist() == (-np.eye(3)).tolist()
