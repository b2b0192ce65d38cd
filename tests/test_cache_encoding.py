"""The result cache's encoding (eigengate.scan.encode, read back by eigengate.scan.serial and
eigengate.scan.summary) over generated models: what its shortcuts compute is what the general
definitions give (the spectrum's own properties, the records of eigengate.scan.records), a
file's results read back are the ones encoded, and a check's reports are the same bytes
without the cache, cold, warm and partly warm (some files edited)."""

import dataclasses
import json
import math
import random

import numpy as np
import pytest

from eigengate.load.loader import load_models_with_refs
from eigengate.rules.catalogue import Verdict
from eigengate.scan.cache import read_pack
from eigengate.scan.cached_modes import MODE_COLUMNS, MODE_GETTER, mode_table
from eigengate.scan.config import load_config
from eigengate.scan.encode import VERDICT_OFFENDING, _verdict_rest, results_to_data, verdict_fields
from eigengate.scan.engine import analyse_model
from eigengate.scan.records import record
from eigengate.scan.serial import results_from_data
from support import run_main, write

PYPROJECT = '[tool.eigengate]\ninclude = ["models/*.yaml"]\n'


def _matrix(rng: random.Random, n: int) -> list[list[float]]:
    """A generated n×n matrix: random entries, or a block with a repeated eigenvalue
    (a Jordan block), or a rotation-like block (a complex pair of chosen damping)."""
    kind = rng.choice(["random", "jordan", "pair", "diagonal"])
    a = [[round(rng.gauss(0, 1), 6) for _ in range(n)] for _ in range(n)]
    if kind == "jordan":
        lam = round(rng.uniform(-2, 0.5), 3)
        a = [[lam if i == j else (1.0 if j == i + 1 else 0.0) for j in range(n)]
             for i in range(n)]
    elif kind == "pair" and n >= 2:
        sigma, omega = round(rng.uniform(-1, 0.2), 3), round(rng.uniform(0.1, 5), 3)
        a = [[0.0] * n for _ in range(n)]
        a[0][0], a[0][1], a[1][0], a[1][1] = sigma, omega, -omega, sigma
        for i in range(2, n):
            a[i][i] = round(rng.uniform(-3, 0), 3)
    elif kind == "diagonal":
        a = [[round(rng.uniform(-3, 0.3), 3) if i == j else 0.0 for j in range(n)]
             for i in range(n)]
    return a


def _model_text(rng: random.Random, i: int) -> str:
    n = rng.randint(1, 7)
    rows = "\n".join(f"    - [{', '.join(repr(v) for v in row)}]" for row in _matrix(rng, n))
    text = f"model_format: 1\nname: gen-{i}\n"
    if rng.random() < 0.3:
        text += f"domain: discrete\nsample_period: {rng.choice([0.01, 0.5, 2.0])}\n"
    text += f"plant:\n  A:\n{rows}\n"
    if rng.random() < 0.5:
        text += f"  B: [{', '.join('[' + repr(round(rng.gauss(0, 1), 4)) + ']' for _ in range(n))}]\n"
    text += "requirements:\n  stable: true\n"
    if rng.random() < 0.7:
        text += f"  min_damping: {rng.choice([0.05, 0.3, 0.7])}\n"
    return text


def _generated(root, count: int, seed: int):
    rng = random.Random(seed)
    write(root / "pyproject.toml", PYPROJECT)
    for i in range(count):
        write(root / "models" / f"g{i:03d}.yaml", _model_text(rng, i))
    return rng


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    """Generated models, loaded and analysed."""
    root = tmp_path_factory.mktemp("encoding")
    _generated(root, 60, seed=20261203)
    config = load_config(start=root)
    out = []
    for path in sorted((root / "models").glob("*.yaml")):
        models, _ = load_models_with_refs(path, root=root)
        out.append(tuple(analyse_model(m, config) for m in models))
    return out


def test_mode_table_figures_are_the_spectrums_own(analysed):
    # reference: the properties of eigengate.analysis.modes.Spectrum, which define them
    kinds = set()
    for results in analysed:
        for r in results:
            sp = r.spectrum
            table, figures, count = mode_table(sp.modes)
            assert figures == [sp.spectral_abscissa, sp.spectral_radius, sp.min_damping]
            assert count == sp.n_eigenvalues
            rows = np.frombuffer(table, dtype="<f8").reshape(-1, MODE_COLUMNS)
            # reference: numpy's own float64 conversion of the same fields
            assert np.array_equal(rows, np.array([MODE_GETTER(m) for m in sp.modes],
                                                 dtype=np.float64).reshape(-1, MODE_COLUMNS))
            kinds.add((any(m.pair for m in sp.modes), sp.min_damping < 1.0,
                       any(m.multiplicity > 1 for m in sp.modes)))
    assert (True, True, False) in kinds and (False, False, False) in kinds
    assert mode_table(()) == (b"", [-math.inf, 0.0, 1.0], 0)  # Spectrum's defaults


def test_verdict_records_are_the_general_records(analysed):
    # reference: eigengate.scan.records.record, field by field
    assert verdict_fields() == tuple(f.name for f in dataclasses.fields(Verdict))
    seen = 0
    for results in analysed:
        for r in results:
            for v in r.verdicts:
                fast, general = _verdict_rest(v), record(v)
                assert fast[VERDICT_OFFENDING] == [m.index - 1 for m in v.offending]
                fast[VERDICT_OFFENDING] = None
                assert fast == general
                seen += bool(v.offending)
    assert seen > 3


def _fields(r) -> list:
    m = r.model
    return [m.name, m.states, m.sample_period, m.lines, m.A.tolist(),
            None if m.B is None else m.B.tolist(), r.spectrum.spectral_abscissa,
            r.spectrum.n_eigenvalues, [(x.index, x.eigenvalue, x.s, x.multiplicity,
                                        x.damping_ratio, x.participation.tolist())
                                       for x in r.spectrum.modes],
            [(v.rule, v.passed, v.measured, v.message, [x.index for x in v.offending])
             for v in r.verdicts], r.findings, r.equilibrium]


def test_results_read_back_are_the_ones_encoded(analysed):
    for results in analysed:
        data, blobs = results_to_data(results[0].model.source, results, None)
        _, back, error = results_from_data(json.loads(json.dumps(data)), blobs)
        assert error is None
        assert [_fields(r) for r in back] == [_fields(r) for r in results]


@pytest.mark.parametrize("lines", [{}, {"a\0b": 3, "c": 4}, {"": 1}, {"x": 1, "x.y": 2}])
def test_odd_line_tables_round_trip(analysed, lines):
    r = analysed[0][0]
    model = dataclasses.replace(r.model, lines=lines)
    data, blobs = results_to_data(model.source, [dataclasses.replace(r, model=model)], None)
    _, (back,), _ = results_from_data(data, blobs)
    assert back.model.lines == lines


def _reports(root, *extra) -> list[str]:
    return [run_main("check", "-q", "-j", "1", *extra, "--format", fmt, cwd=root).stdout
            for fmt in ("json", "text")]


def test_reports_are_the_same_cold_warm_and_partly_warm(tmp_path):
    root = tmp_path / "repo"
    rng = _generated(root, 40, seed=7)
    fresh = _reports(root, "--no-cache")
    assert '"passed": false' in fresh[0] and '"passed": true' in fresh[0]
    assert _reports(root) == fresh  # cold: analysed and stored
    assert _reports(root) == fresh  # warm: every file from the cache
    for i in rng.sample(range(40), 5):  # partly warm: these analysed again, the rest read
        write(root / "models" / f"g{i:03d}.yaml", _model_text(rng, 100 + i))
    edited = _reports(root)
    assert edited == _reports(root, "--no-cache") and edited != fresh
    assert _reports(root) == edited
    packs = list(root.glob(".eigengate-cache/**/*.pack"))
    assert len(packs) == 1 and len(read_pack(packs[0].read_bytes()).head["entries"]) >= 40
