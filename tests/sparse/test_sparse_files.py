"""Sparse matrix files (issue 15): scipy.sparse.save_npz archives, Matrix Market files and
sparse .mat files read sparse, with shapes, stored-entry counts and memory needs checked
from their headers before any data is read; hostile headers refused; the dense limit from
physical memory, with a message naming the sparse route.

Sources: the save_npz layout and Matrix Market reading are scipy's (scipy.sparse.save_npz,
scipy.io.mminfo/mmread, reference library); the MAT-file level 5 element layout (array
flags with nzmax) is MathWorks' published "MAT-File Format" (from memory); the dense
memory arithmetic is common practice (8 bytes per float64 entry).
"""

import io
import struct
import tracemalloc
import zipfile

import numpy as np
import pytest
import scipy.io
import scipy.sparse as sp

from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.model import core, limits
from eigengate.model.core import SPARSE_THRESHOLD, from_arrays
from eigengate.model.matrixfiles import load_reference

MODEL = "model_format: 1\nplant: {{A: {{file: {name}}}{extra}}}\n"


def repo(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    return tmp_path


def load(tmp_path, name, extra=""):
    path = repo(tmp_path) / "m.yaml"
    path.write_text(MODEL.format(name=name, extra=extra))
    return load_models(path, tmp_path)


def load_error(tmp_path, name, extra="") -> str:
    with pytest.raises(ModelError) as info:
        load(tmp_path, name, extra)
    message = str(info.value)
    assert message.startswith("m.yaml") and "plant.A" in message, message
    assert "\n" not in message and "Traceback" not in message
    return message


def stable_matrix(n, seed=3):
    """A sparse matrix with a negative diagonal (common practice: a random test matrix)."""
    rng = np.random.default_rng(seed)
    m = sp.random(n, n, density=3.0 / n, random_state=rng, format="csr")
    return (m - sp.identity(n) * 5.0).tocsr()


@pytest.mark.parametrize("fmt", ["csr", "csc", "coo"])
def test_save_npz_reads_sparse_and_exact(tmp_path, fmt):
    a = stable_matrix(40).asformat(fmt)
    sp.save_npz(tmp_path / "a.npz", a)
    (model,) = load(tmp_path, "a.npz", ", sparse: true")
    assert model.sparse and sp.issparse(model.A)
    assert abs(model.A - a.tocsr()).max() == 0.0  # exact round trip (scipy reference)


def test_small_sparse_file_becomes_dense_unless_asked(tmp_path):
    sp.save_npz(tmp_path / "a.npz", stable_matrix(30))
    (model,) = load(tmp_path, "a.npz")
    assert not model.sparse and isinstance(model.A, np.ndarray)
    assert 30 <= SPARSE_THRESHOLD


def test_matrix_market_coordinate_symmetric_and_array(tmp_path):
    a = stable_matrix(30)
    scipy.io.mmwrite(str(tmp_path / "g.mtx"), a)
    s = (a + a.T).tocsr()
    scipy.io.mmwrite(str(tmp_path / "s.mtx"), s, symmetry="symmetric")
    scipy.io.mmwrite(str(tmp_path / "d.mtx"), a.toarray())  # array (dense) format
    for name, want in (("g.mtx", a), ("s.mtx", s)):
        (model,) = load(tmp_path, name, ", sparse: true")
        assert model.sparse and abs(model.A - want).max() < 1e-15 * abs(want).max()
    (model,) = load(tmp_path, "d.mtx")
    assert np.allclose(model.A, a.toarray(), rtol=1e-15, atol=0)


def test_sparse_mat_compressed_and_plain(tmp_path):
    a = stable_matrix(40)
    scipy.io.savemat(tmp_path / "c.mat", {"A": a.tocsc()}, do_compression=True)
    scipy.io.savemat(tmp_path / "p.mat", {"A": a.tocsc()})
    for name in ("c.mat", "p.mat"):
        (model,) = load(tmp_path, name, ", sparse: true")
        assert model.sparse and abs(model.A - a).max() == 0.0


def test_reading_through_a_callable_matches_the_filesystem(tmp_path):
    a = stable_matrix(25)
    sp.save_npz(tmp_path / "a.npz", a)
    scipy.io.mmwrite(str(tmp_path / "a.mtx"), a)
    for name in ("a.npz", "a.mtx"):
        m, rel = load_reference({"file": name}, source="m.yaml", field="plant.A", line=1,
                                base_dir=".", root=tmp_path,
                                read=lambda r: (tmp_path / r).read_bytes())
        assert rel == name and abs(m - a).max() < 1e-15 * abs(a).max()


def test_large_sparse_file_is_never_made_dense(tmp_path):
    """Issue 15: a 10⁵-state sparse matrix took 74 GB dense; read now, it costs a few MB."""
    n = 100_000
    sp.save_npz(tmp_path / "big.npz", -sp.identity(n, format="csr"))
    tracemalloc.start()
    (model,) = load(tmp_path, "big.npz")
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert model.sparse and model.n_states == n
    assert peak < 64 << 20, peak  # dense it would be 8·n² = 8e10 bytes


# ------------------------------------------------------------------ hostile headers

def npz_member(zf, name, shape, dtype="<f8", payload=b""):
    """A .npy member whose header declares ``shape`` (payload may be short: a lie)."""
    header = {"descr": dtype, "fortran_order": False, "shape": shape}
    buf = io.BytesIO()
    np.lib.format.write_array_header_1_0(buf, header)
    zf.writestr(name + ".npy", buf.getvalue() + payload)


def save_npz_like(path, shape, nnz, fmt=b"csr", indptr=None):
    with zipfile.ZipFile(path, "w") as zf:
        buf = io.BytesIO()
        np.save(buf, np.array(fmt))
        zf.writestr("format.npy", buf.getvalue())
        buf = io.BytesIO()
        np.save(buf, np.array(shape, dtype=np.int64))
        zf.writestr("shape.npy", buf.getvalue())
        npz_member(zf, "data", (nnz,))
        npz_member(zf, "indices", (nnz,), "<i4")
        npz_member(zf, "indptr", (shape[0] + 1 if indptr is None else indptr,), "<i4")


def test_save_npz_huge_declared_sizes_refused_from_headers(tmp_path):
    # no data at all in the members: only the headers can have been read
    save_npz_like(tmp_path / "rows.npz", (10**9, 10**9), 10)
    assert "rows or columns" in load_error(tmp_path, "rows.npz")
    save_npz_like(tmp_path / "nnz.npz", (1000, 1000), 10**12)
    message = load_error(tmp_path, "nnz.npz")
    assert str(10**12) in message and "memory" in message, message
    save_npz_like(tmp_path / "ptr.npz", (1000, 1000), 10, indptr=7)
    assert "'indptr' array has 7 entries" in load_error(tmp_path, "ptr.npz")
    save_npz_like(tmp_path / "dia.npz", (10, 10), 1, fmt=b"dia")
    assert "'dia'" in load_error(tmp_path, "dia.npz")


def test_save_npz_malformed_structure_and_key_refused(tmp_path):
    a = stable_matrix(20)
    bad = sp.csr_matrix((a.data, a.indices.copy(), a.indptr), shape=a.shape)
    bad.indices[3] = 999  # a column outside the matrix
    np.savez(tmp_path / "bad.npz", data=bad.data, indices=bad.indices, indptr=bad.indptr,
             format=np.array(b"csr"), shape=np.array(a.shape))
    assert "malformed" in load_error(tmp_path, "bad.npz", ", sparse: true")
    sp.save_npz(tmp_path / "a.npz", a)
    message = load_error(tmp_path, "a.npz, key: data")
    assert "one sparse matrix" in message, message


def test_matrix_market_hostile_and_malformed(tmp_path):
    (tmp_path / "huge.mtx").write_text(
        "%%MatrixMarket matrix coordinate real general\n10000000 10000000 1000000000000\n")
    message = load_error(tmp_path, "huge.mtx")
    assert "1000000000000" in message and "memory" in message, message
    (tmp_path / "dense.mtx").write_text(
        "%%MatrixMarket matrix array real general\n100000 100000\n1\n")
    assert "entries" in load_error(tmp_path, "dense.mtx")
    (tmp_path / "cplx.mtx").write_text(
        "%%MatrixMarket matrix coordinate complex general\n2 2 1\n1 1 1 0\n")
    assert "complex entries" in load_error(tmp_path, "cplx.mtx")
    (tmp_path / "short.mtx").write_text(
        "%%MatrixMarket matrix coordinate real general\n3 3 5\n1 1 1\n")
    assert "not a readable Matrix Market file" in load_error(tmp_path, "short.mtx")
    (tmp_path / "nan.mtx").write_text(
        "%%MatrixMarket matrix coordinate real general\n30 30 1\n1 1 nan\n")
    assert "finite" in load_error(tmp_path, "nan.mtx", ", sparse: true")


def test_sparse_mat_hostile_nzmax_refused_from_element_header(tmp_path):
    scipy.io.savemat(tmp_path / "a.mat", {"A": stable_matrix(30).tocsc()})
    raw = bytearray((tmp_path / "a.mat").read_bytes())
    # level 5: 128-byte header, miMATRIX tag, array flags tag (miUINT32, 8), flags, nzmax
    at = 128 + 8
    assert struct.unpack_from("<II", raw, at) == (6, 8)
    struct.pack_into("<I", raw, at + 12, 2**31 - 1)
    (tmp_path / "a.mat").write_bytes(bytes(raw))
    message = load_error(tmp_path, "a.mat")
    assert str(2**31 - 1) in message and "memory" in message, message


# ------------------------------------------------------------------ the dense limit

def test_dense_limit_from_physical_memory(monkeypatch):
    monkeypatch.setattr(limits, "physical_memory", lambda: 8 << 30)
    # a quarter of 8 GiB over 12 dense copies of 8 bytes an entry (common practice)
    assert limits.dense_state_limit(10**9) == int(np.sqrt((2 << 30) / 96))
    assert limits.dense_state_limit(4000) == 4000
    monkeypatch.setattr(limits, "physical_memory", lambda: 96 * 50 * 50 * 4)
    assert core.dense_limit() == 50
    with pytest.raises(ModelError) as info:
        from_arrays(-np.eye(51))
    text = str(info.value)
    assert "51 states" in text and "limit of 50" in text and "sparse" in text, text
    model = from_arrays(-sp.identity(51, format="csr"), sparse=True)  # the sparse route
    assert model.sparse
