"""The corpus, part two: files hostile as files (encodings, YAML tags and aliases, nesting,
size), matrix files (.npz, .mat, .csv), links and special files, valid inputs that look
wrong, and the holes the gate-integrity review named (``NAMED_HOLES``)."""

from __future__ import annotations

import io
import os
import zipfile
from pathlib import Path

import numpy as np

from hostile_cases import CASES, DELETE, SS, TF, Case, add, add_doc, dump, put

GOOD = "model_format: 1\nname: {name}\nplant:\n  A: [[-1.0]]\nrequirements:\n  stable: true\n"
REF = "model_format: 1\nplant:\n  A: {{file: {file}{key}}}\nrequirements:\n  stable: true\n"


def ref(id: str, file: str, data: bytes | None, *fields: str, key: str | None = None,
        expect: str = "error", check=None) -> None:
    """A model whose plant.A is read from ``data/ID/FILE``."""
    rel = f"../data/{id}/{file}"
    keytext = "" if key is None else f", key: {key}"
    add(id, REF.format(file=rel, key=keytext), "plant.A", *fields, expect=expect,
        files={} if data is None else {f"data/{id}/{file}": data}, check=check)


def a_is(expected):
    def check(models):
        assert len(models) == 1
        np.testing.assert_array_equal(models[0].A, np.array(expected, dtype=float))
    return check


def holds(predicate):
    """A check that ``predicate(models)`` is true."""
    def check(models):
        assert predicate(models), models
    return check


def npz(**arrays) -> bytes:
    out = io.BytesIO()
    np.savez(out, **arrays)
    return out.getvalue()


def npy_header(shape: tuple, descr: str = "<f8") -> bytes:
    header = repr({"descr": descr, "fortran_order": False, "shape": shape}).encode()
    header += b" " * (63 - (len(header) + 10) % 64) + b"\n"
    return b"\x93NUMPY\x01\x00" + len(header).to_bytes(2, "little") + header


def zip_of(**members: bytes) -> bytes:
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as z:
        for name, data in members.items():
            z.writestr(name, data)
    return out.getvalue()


def mat(**variables) -> bytes:
    import scipy.io

    out = io.BytesIO()
    scipy.io.savemat(out, variables)
    return out.getvalue()


# --------------------------------------------------------------------------- the file as a file

BASE = dump(SS, "yaml")
add("empty", b"")
add("whitespace", b"  \n\t\n")
add("comments-only", b"# nothing here\n# at all\n")
add("nul-byte", BASE.encode() + b"\x00")
add("latin-1", BASE.replace("ss", "caf\xe9").encode("latin-1"))
add("utf-16", BASE.encode("utf-16"))
add("bom-utf8", b"\xef\xbb\xbf" + BASE.encode(), expect="model")
add("over-8-mib", "model_format: 1\ndescription: " + "x" * (8 * 1024 * 1024) + "\n")
add("long-line", "model_format: 1\ndescription: " + "y" * 2_000_000 +
    "\nplant: {A: [[-1.0]]}\nrequirements: {stable: true}\n", expect="model")
add("top-list", "- model_format: 1\n")
add("top-scalar", "42\n")
add("top-null", "~\n")
add("two-documents", BASE + "---\n" + BASE)
add("control-char", "model_format: 1\nname: a\x01b\nplant: {A: [[-1]]}\n", "U+0001", "line 2")
add("tabs", "model_format: 1\nplant:\n\tA: [[1]]\n")
add("unclosed-flow", "model_format: 1\nplant: {A: [[1, 2]\n")
add("duplicate-key", BASE + "name: again\n", "name")
add("int-key", "model_format: 1\n1: x\nplant: {A: [[-1]]}\n")
add("complex-key", "model_format: 1\n? [a, b]\n: x\nplant: {A: [[-1]]}\n")
for tag in ("!!python/object/apply:os.system ['true']", "!!python/name:os.system",
            "!!binary aGVsbG8=", "!!set {a, b}", "!custom 5", "!!python/tuple [1, 2]"):
    add(f"tag-{tag.split()[0].strip('!').replace('/', '-').replace(':', '-')}",
        f"model_format: 1\nname: {tag}\nplant: {{A: [[-1]]}}\n", "name", "tag")
add("alias-self", "model_format: 1\nplant: &p {A: [[-1]], B: *p}\n")
add("merge-scalar", "model_format: 1\nplant:\n  <<: 5\n  A: [[-1]]\n")
LAUGHS = "model_format: 1\na0: &a0 [lol, lol, lol, lol, lol, lol, lol, lol, lol, lol]\n" + "".join(
    f"a{i}: &a{i} [{', '.join([f'*a{i - 1}'] * 10)}]\n" for i in range(1, 9))
add("billion-laughs", LAUGHS + "plant: {A: [[-1]]}\n", "10000000")
add("deep-flow", "model_format: 1\nplant: {A: " + "[" * 200 + "]" * 200 + "}\n", "64")
add("deep-block", "model_format: 1\n" + "".join("  " * i + f"k{i}:\n" for i in range(100)) +
    "  " * 100 + "x: 1\n")
add("anchor-merge-ok", "model_format: 1\nbase: &b {A: [[-1.0]]}\n", "base")
add("yaml-merge-valid", "model_format: 1\nplant:\n  <<: {A: [[-2.0]]}\nrequirements:\n"
    "  stable: true\n", expect="model", check=a_is([[-2.0]]))
add("date-name", "model_format: 1\nname: 2026-01-31\nplant: {A: [[-1.0]]}\n", expect="model",
    check=holds(lambda ms: ms[0].name == "2026-01-31"))
# YAML 1.2.2 core schema (10.3.2): 0x1F is an int, a signed hex "-0x1F" is a string
add("hex-int", "model_format: 1\nplant: {A: [[0x1F]]}\n", expect="model", check=a_is([[31]]))
add("hex-int-signed", "model_format: 1\nplant: {A: [[-0x1F]]}\n", "plant.A", "str")
add("unicode-name", "model_format: 1\nname: \"\u6e29\u5ba4 \u2014 bay \U0001F331\"\n"
    "plant: {A: [[-1.0]]}\n", expect="model")
add("json-nan", '{"model_format": 1, "plant": {"A": [[NaN]]}}', ext="json")
add("json-infinity", '{"model_format": 1, "plant": {"A": [[-Infinity]]}}', ext="json")
add("json-trailing-comma", '{"model_format": 1, "plant": {"A": [[1]],}}', ext="json")
add("json-comment", '// a model\n{"model_format": 1}', ext="json")
add("json-single-quotes", "{'model_format': 1}", ext="json")
add("json-duplicate", '{"model_format": 1, "plant": {"A": [[-1]], "A": [[1]]}}', "plant.A",
    ext="json")
add("json-top-list", '[{"model_format": 1}]', ext="json")
add("json-deep", '{"model_format": 1, "x": ' + "[" * 5000 + "]" * 5000 + "}", ext="json")
add("json-bom", "\ufeff" + dump(SS, "json"), ext="json", expect="model")
add("json-lone-surrogate", '{"model_format": 1, "name": "a\\ud800b", "plant": {"A": [[-1]]}}',
    "surrogate", ext="json")
add("json-surrogate-pair",
    '{"model_format": 1, "name": "\\ud83c\\udf31", "plant": {"A": [[-1]]}}', ext="json",
    expect="model", check=holds(lambda ms: ms[0].name == "\U0001F331"))
add("json-escape-name", '{"model_format": 1, "name": "a\\u0000b", "plant": {"A": [[-1]]}}',
    ext="json", expect="model")
add("toml-invalid", "model_format = 1\nplant = {A = [[1]]\n", ext="toml")
add("toml-duplicate", "model_format = 1\nmodel_format = 1\n", ext="toml")
add("toml-datetime-name", "model_format = 1\nname = 2026-01-31T10:00:00\n"
    "[plant]\nA = [[-1.0]]\n", ext="toml", expect="model")
add("toml-table-array-plant", "model_format = 1\n[[plant]]\nA = [[-1.0]]\n", "plant", ext="toml")
add("toml-deep-inline", "model_format = 1\nx = " + "[" * 100 + "]" * 100 + "\n", ext="toml")
add("unknown-suffix", BASE, ext="yamlx")

# --------------------------------------------------------------------------- matrix files

ref("npz-ok", "a.npz", npz(A=np.array([[-1.5]])), expect="model", check=a_is([[-1.5]]))
ref("npz-pickle", "a.npz", npz(A=np.array([{"x": 1}], dtype=object)), "pickle")
ref("npz-truncated", "a.npz", npz(A=np.eye(3))[:-40])
ref("npz-not-zip", "a.npz", b"this is not a zip archive\n")
ref("npz-empty-zip", "a.npz", zip_of())
ref("npz-no-key", "a.npz", npz(A=np.eye(2), B=np.ones((2, 1))), ".key")
ref("npz-wrong-key", "a.npz", npz(A=np.eye(2)), ".key", key="Q")
ref("npz-key-number", "a.npz", npz(A=np.eye(2)), ".key", key="5")
ref("npz-3d", "a.npz", npz(A=np.zeros((2, 2, 2))), "3 dimensions")
ref("npz-complex", "a.npz", npz(A=np.array([[1 + 1j]])), "complex")
ref("npz-text", "a.npz", npz(A=np.array([["a"]])), "dtype")
ref("npz-bool", "a.npz", npz(A=np.array([[True]])), "dtype")
ref("npz-nan", "a.npz", npz(A=np.array([[np.nan]])), "nan")
ref("npz-empty-array", "a.npz", npz(A=np.zeros((0, 0))), "empty")
ref("npz-bad-member", "a.npz", zip_of(**{"A.npy": b"\x93NUMPY garbage"}))
ref("npz-header-lies", "a.npz", zip_of(**{"A.npy": npy_header((3, 3)) + b"\x00" * 8}))
ref("npz-too-many-states", "a.npz", npz(A=np.zeros((4001, 1))), "4001×1")
ref("npz-int", "a.npz", npz(A=np.array([[-3]], dtype=np.int64)), expect="model",
    check=a_is([[-3]]))
ref("mat-ok", "a.mat", mat(A=np.array([[-2.0]])), expect="model", check=a_is([[-2.0]]))
ref("mat-garbage", "a.mat", b"MATLAB 5.0 MAT-file, but then nothing sensible" + b"\x01" * 100)
ref("mat-hdf5", "a.mat", b"MATLAB 7.3 MAT-file".ljust(116) + b"\x00" * 12 + b"\x00\x02IM" +
    b"\x89HDF\r\n\x1a\n" + b"\x00" * 400)
ref("mat-empty", "a.mat", b"")
ref("mat-cell", "a.mat", mat(A=np.array([[1.0], "text"], dtype=object)))
ref("mat-struct", "a.mat", mat(A={"x": 1.0}))
ref("mat-char", "a.mat", mat(A="hello"))
ref("mat-sparse-ok", "a.mat", None, expect="model", check=a_is([[-1.0, 0.0], [0.0, -2.0]]))
ref("mat-two-vars", "a.mat", mat(A=np.eye(1), B=np.eye(1)), ".key")
ref("csv-ok", "a.csv", b"# a comment\n-1.0, 0\n0, -2.0\n", expect="model",
    check=a_is([[-1.0, 0.0], [0.0, -2.0]]))
ref("csv-bom", "a.csv", b"\xef\xbb\xbf-1.0\n", expect="model", check=a_is([[-1.0]]))
ref("csv-empty", "a.csv", b"")
ref("csv-comments-only", "a.csv", b"# only\n# comments\n")
ref("csv-ragged", "a.csv", b"1,2\n3\n")
ref("csv-text", "a.csv", b"1,fast\n2,3\n", "fast")
ref("csv-nan", "a.csv", b"nan\n", "nan")
ref("csv-inf", "a.csv", b"-inf\n", "inf")
ref("csv-overflow", "a.csv", b"1e999\n", "inf")
ref("csv-semicolons", "a.csv", b"1;2\n3;4\n")
ref("csv-latin-1", "a.csv", "1,2 # caf\xe9\n".encode("latin-1"))
ref("csv-nul", "a.csv", b"1,\x002\n")
ref("csv-key", "a.csv", b"-1\n", ".key", key="A")
ref("ref-missing", "missing.npz", None, ".file")
ref("ref-unknown-type", "a.txt", b"1\n", ".file")
add("ref-absolute", "model_format: 1\nplant:\n  A: {file: /etc/passwd}\n", "plant.A.file")
add("ref-escape", "model_format: 1\nplant:\n  A: {file: ../../../../../../etc/passwd}\n",
    "plant.A.file", "outside")
add("ref-empty-name", "model_format: 1\nplant:\n  A: {file: ''}\n", "plant.A.file")
add("ref-name-number", "model_format: 1\nplant:\n  A: {file: 5}\n", "plant.A.file")
add("ref-unknown-key", "model_format: 1\nplant:\n  A: {file: a.npz, sheet: 2}\n", "plant.A")
add("ref-folder", "model_format: 1\nplant:\n  A: {file: ../data}\n", "plant.A.file")


def _sparse_mat(repo: Path, file: Path) -> None:
    import scipy.sparse

    (repo / "data/mat-sparse-ok").mkdir(parents=True, exist_ok=True)
    (repo / "data/mat-sparse-ok/a.mat").write_bytes(
        mat(A=scipy.sparse.csc_matrix(np.diag([-1.0, -2.0]))))
    file.write_text(REF.format(file="../data/mat-sparse-ok/a.mat", key=""))


def _link_out(target: str):
    def make(repo: Path, file: Path) -> None:
        (repo / "data").mkdir(exist_ok=True)
        link = repo / "data" / f"{file.stem}.csv"
        if not link.is_symlink():
            link.symlink_to(target)
        file.write_text(REF.format(file=f"../data/{file.stem}.csv", key=""))
    return make


def _replace(id: str, **changes) -> None:
    i = next(i for i, c in enumerate(CASES) if c.id == id)
    CASES[i] = Case(**{**CASES[i].__dict__, **changes})


_replace("mat-sparse-ok", make=_sparse_mat)
add("ref-link-outside", b"", "plant.A.file", "outside", make=_link_out("/etc/hostname"))
add("model-is-folder", b"", make=lambda repo, file: file.mkdir())

# --------------------------------------------------------------------------- valid but nasty

add_doc("nasty-exponent-floats", put(SS, "plant.A", [[0.0, 1.0], [-2e0, -3e-1]]),
        expect="model", check=a_is([[0.0, 1.0], [-2.0, -0.3]]))
add("nasty-exponent-no-dot", "model_format: 1\nplant: {A: [[-1e3]]}\n", expect="model",
    check=a_is([[-1000.0]]))
add("nasty-plus-sign", "model_format: 1\nplant: {A: [[+1, -2], [.5, -3.]]}\n", expect="model",
    check=a_is([[1, -2], [0.5, -3]]))
add("nasty-scalar-a", "model_format: 1\nplant: {A: -4}\n", expect="model", check=a_is([[-4]]))
add("nasty-identity-e", "model_format: 1\nplant: {A: [[-1.0]], E: [[1.0]]}\n", expect="model",
    check=holds(lambda ms: ms[0].E is None))
# entries of subnormal scale or near the largest float are refused: the eigenvalue
# computation has no digits there, or overflows (the numeric limits of model.core)
add("nasty-subnormal", "model_format: 1\nplant: {A: [[-5e-324]]}\n", "plant.A", "too small")
add("nasty-max-float", "model_format: 1\nplant: {A: [[-1.7976931348623157e308]]}\n",
    "plant.A", "magnitude")
add("nasty-crlf", dump(SS, "yaml").replace("\n", "\r\n"), expect="model")
add("nasty-long-description", dump(put(SS, "description", "z" * 100_000), "yaml"),
    expect="model")
add_doc("nasty-many-points", put(SS, "operating_points", [{"label": f"p{i}"}
                                                          for i in range(200)]),
        expect="model", check=holds(lambda ms: len(ms) == 200))
add_doc("nasty-tf-leading-zeros", put(TF, "plant.num", [0.0, 0.0, 1.0]), expect="model",
        check=holds(lambda ms: ms[0].n_states == 2))

# --------------------------------------------------------------------------- named holes

NAMED_HOLES = {
    # YAML 1.2 core schema numbers (issue 11, item 10)
    "yaml12-exponent-dot": "4.0e9 read as a number",
    "yaml12-exponent-negative": "-2.0e3 read as a number",
    "yaml12-leading-zero": "017 is 17 in YAML 1.2, not octal 15",
    "yaml12-sexagesimal": "1:30 is text in YAML 1.2, not 90",
    "yaml12-underscore": "1_000 is text in YAML 1.2",
    # CSV cells
    "csv-underscore": "1_0 in a CSV cell is not a number",
    # huge integers, TOML dotted keys
    "yaml-huge-int": "an integer with hundreds of digits",
    "json-huge-int": "an integer with hundreds of digits",
    "toml-huge-int": "an integer with hundreds of digits",
    "toml-dotted-deep": "nesting by TOML dotted keys",
    # files that are not plain files, names that are not UTF-8
    "symlink-loop": "a symlink loop matched as a model",
    "fifo": "a FIFO matched as a model",
    "non-utf8-name": "a file name that is not valid UTF-8",
    "model-link-outside": "a model file linked to a file outside the repository",
    # matrix headers
    "npz-huge-header": "an .npy header claiming a huge shape",
    "npz-zip-bomb": "compressed zeros far past the state limit",
    "mat-sparse-huge": "a sparse .mat of 10⁵ states (issue 15: stays sparse, never made dense)",
    # fields
    "tf-num-empty": "a numerator with no coefficients",
    "e-all-zero": "an all-zero E has no finite modes",
    "vf-module-outside": "a vector-field module that is not a file of the repository",
    "escape-in-name": "terminal escape sequences and workflow commands in a model name",
    "json-escape-name": "a NUL character in a model name reaches the output",
    "nasty-max-float": "-1.7976931348623157e308 read as a number (YAML 1.2 float)",
}
add("yaml12-exponent-dot", "model_format: 1\nplant: {A: [[-4.0e9]]}\n", expect="model",
    check=a_is([[-4.0e9]]))
add("yaml12-exponent-negative", "model_format: 1\nplant: {A: [[-2.0e3]]}\n", expect="model",
    check=a_is([[-2.0e3]]))
add("yaml12-leading-zero", "model_format: 1\nplant: {A: [[-017]]}\n", expect="model",
    check=a_is([[-17]]))
add("yaml12-sexagesimal", "model_format: 1\nplant: {A: [[-1:30]]}\n", "plant.A")
add("yaml12-underscore", "model_format: 1\nplant: {A: [[-1_000]]}\n", "plant.A")
ref("csv-underscore", "a.csv", b"1_0\n", "1_0")
HUGE = "9" * 400
add("yaml-huge-int", f"model_format: 1\nplant: {{A: [[-{HUGE}]]}}\n", "plant.A")
add("json-huge-int", f'{{"model_format": 1, "plant": {{"A": [[-{HUGE}]]}}}}', "plant.A",
    ext="json")
add("toml-huge-int", f"model_format = 1\n[plant]\nA = [[-{HUGE}]]\n", ext="toml")
add("toml-dotted-deep", "model_format = 1\n" + ".".join(f"k{i}" for i in range(5000)) + " = 1\n",
    ext="toml")


def _loop_link(repo: Path, file: Path) -> None:
    file.symlink_to(file.name)


def _fifo(repo: Path, file: Path) -> None:
    os.mkfifo(file)


def _model_link_out(repo: Path, file: Path) -> None:
    outside = repo.parent / f"{repo.name}-outside.yaml"
    outside.write_text(GOOD.format(name="secret-outside"))
    file.symlink_to(outside)


add("symlink-loop", b"", make=_loop_link)
add("fifo", b"", make=_fifo)
CASES.append(Case("non-utf8-name", "models/caf\udce9.yaml", GOOD.format(name="cafe").encode(),
                  expect="error", fields=("caf\\xe9", "UTF-8")))
add("model-link-outside", b"", "outside", make=_model_link_out)
ref("npz-huge-header", "a.npz", zip_of(**{"A.npy": npy_header((10 ** 6, 10 ** 6))}), "states")


def _zip_bomb() -> bytes:
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as z, z.open("A.npy", "w") as member:
        member.write(npy_header((6000, 6000)))
        block = bytes(1 << 22)
        for _ in range(6000 * 6000 * 8 // len(block)):
            member.write(block)
    return out.getvalue()


ref("npz-zip-bomb", "a.npz", b"", "uncompressed")
_replace("npz-zip-bomb", files={}, make=lambda repo, file: (
    (repo / "data/npz-zip-bomb").mkdir(parents=True, exist_ok=True),
    (repo / "data/npz-zip-bomb/a.npz").write_bytes(_zip_bomb()),
    file.write_text(REF.format(file="../data/npz-zip-bomb/a.npz", key=""))))


def _sparse_huge(repo: Path, file: Path) -> None:
    import scipy.sparse

    (repo / "data/mat-sparse-huge").mkdir(parents=True, exist_ok=True)
    (repo / "data/mat-sparse-huge/a.mat").write_bytes(
        mat(A=scipy.sparse.eye(100_000, format="csc")))
    file.write_text(REF.format(file="../data/mat-sparse-huge/a.mat", key=""))


add("mat-sparse-huge", b"", expect="model", make=_sparse_huge,
    check=holds(lambda models: models[0].sparse and models[0].A.nnz == 100_000))
add_doc("tf-num-empty", put(TF, "plant.num", []), "plant.num")
add_doc("e-all-zero", put(SS, "plant.E", [[0.0, 0.0], [0.0, 0.0]]), "plant.E")
add_doc("vf-module-outside", put(put(SS, "plant", DELETE), "vector_field", {
    "function": "os.path:join", "states": ["a"], "at": [{"label": "o", "x": [0.0]}]}),
    "vector_field.function", "repository")
add("escape-in-name", "model_format: 1\nname: \"evil\\e[31m\\n::error::injected\"\n"
    "plant: {A: [[-1.0]]}\nrequirements: {stable: true}\n", expect="model")

IDS = [c.id for c in CASES]
assert len(IDS) == len(set(IDS)), [i for i in IDS if IDS.count(i) > 1]
assert set(NAMED_HOLES) <= set(IDS), set(NAMED_HOLES) - set(IDS)
