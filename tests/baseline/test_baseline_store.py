"""The baseline store: deterministic text, strict reading, atomic and concurrent writes."""

import json
import math
import multiprocessing
import os
import re
from pathlib import Path

import numpy as np
import pytest

from eigengate import from_arrays
from eigengate.baseline.store import (DEFAULT_PATH, Baseline, BaselineError, BaselineMode, Entry,
                                baseline_entry_from, fmt_float, merge_write, write_atomic)
from eigengate.scan.engine import analyse_model


def _result(A, *, name="pitch", label=None, source="models/pitch.yaml", states=None, T=None):
    A = np.asarray(A, dtype=float)
    n = A.shape[0]
    return analyse_model(from_arrays(A, np.zeros((n, 1)), np.zeros((1, n)), np.zeros((1, 1)),
                                     name=name, label=label, source=source, states=states,
                                     sample_period=T))


def _osc(zeta, wn):
    # Second-order standard form s^2 + 2 zeta wn s + wn^2 (common in control textbooks).
    return [[0.0, 1.0], [-wn * wn, -2.0 * zeta * wn]]


def _blockdiag(*blocks):
    from scipy.linalg import block_diag

    return block_diag(*[np.atleast_2d(b) for b in blocks])


@pytest.fixture
def entries():
    return [
        baseline_entry_from(_result(_blockdiag(_osc(0.2, 2.0), [[-3.0]]),
                                    states=["pitch angle", "pitch rate", "actuator"])),
        baseline_entry_from(_result(_blockdiag(_osc(0.05, 7.0), [[-1.0, 1.0], [0.0, -1.0]]),
                                    name="mast", label="storm", source="models/mast.yaml",
                                    states=["x", "v", "θ", "ω"])),
        # discrete, with a deadbeat pole (s = -inf) and a negative real pole (Nyquist)
        baseline_entry_from(_result(np.diag([0.0, 0.5, -0.4]), name="loop",
                                    source="models/digital/loop.yaml", T=0.01)),
        baseline_entry_from(_result([[0.0, 1.0], [0.0, 0.0]], name="integrators",
                                    source="models/a.yaml")),
    ]


def _key_orders(text):
    orders = []
    json.loads(text, object_pairs_hook=lambda kv: orders.append([k for k, _ in kv]) or dict(kv))
    return orders


def test_dump_is_deterministic_and_round_trips(entries):
    b = Baseline().updated(entries)
    text = b.dump()
    assert text == Baseline().updated(reversed(entries)).dump()  # order of acceptance is moot
    assert text.endswith("}\n") and not text.endswith("\n\n")
    back = Baseline.loads(text, "baseline.json")
    assert back == b and back.dump() == text
    for e in entries:
        assert back.entry(*e.key) == e
    # valid JSON, every object's keys sorted (json's own reader as the reference)
    assert all(keys == sorted(keys) for keys in _key_orders(text))
    # 2-space indentation and one mode per line
    lines = text.splitlines()
    assert all((len(x) - len(x.lstrip(" "))) % 2 == 0 for x in lines)
    mode_lines = [x for x in lines if x.lstrip().startswith('{"condition"')]
    assert len(mode_lines) == sum(len(e.modes) for e in entries)
    assert '"format_version": 1' in lines[1]


def test_non_finite_values_are_quoted_strings(entries):
    text = Baseline().updated(entries).dump()
    json.loads(text, parse_constant=lambda c: pytest.fail(f"bare {c} in the file"))
    loop = Baseline.loads(text).entry("models/digital/loop.yaml", "loop")
    deadbeat = [m for m in loop.modes if m.eigenvalue == 0]
    assert deadbeat and math.isinf(deadbeat[0].s.real) and deadbeat[0].s.real < 0
    integ = Baseline.loads(text).entry("models/a.yaml", "integrators")
    assert integ.modes[0].time_constant == math.inf and integ.modes[0].defective


def test_float_format_has_fixed_precision():
    # Python's own float formatting (format(x, ".12g")) is the reference.
    for x in (0.1, 1 / 3, 2.0, -0.0, 1e-7, 123456.789012345, -2.5e20):
        text = fmt_float(x)
        assert text == ("0" if x == 0 else format(x, ".12g"))
        assert float(text) == float(format(x, ".12g"))
    assert fmt_float(math.inf) == '"inf"' and fmt_float(-math.inf) == '"-inf"'


def test_round_off_noise_does_not_change_the_file(entries):
    A = _blockdiag(_osc(0.2, 2.0), [[-3.0]])
    states = ["pitch angle", "pitch rate", "actuator"]
    stored = Baseline().updated([baseline_entry_from(_result(A, states=states))])
    rng = np.random.default_rng(7)
    for _ in range(5):  # relative perturbations at the level of LAPACK round-off
        noisy = A * (1 + 1e-14 * rng.standard_normal(A.shape))
        again = stored.updated([baseline_entry_from(_result(noisy, states=states))])
        assert again.dump() == stored.dump()
    # a real retune does change it
    moved = stored.updated([baseline_entry_from(_result(_blockdiag(_osc(0.21, 2.0), [[-3.0]]),
                                                        states=states))])
    assert moved.dump() != stored.dump()


def test_missing_file_is_an_empty_baseline(tmp_path):
    b = Baseline.load(tmp_path / "nowhere" / "baseline.json")
    assert len(b) == 0 and b.keys() == [] and b.dump().count("\n") == 4
    assert DEFAULT_PATH == ".eigengate/baseline.json"


# ------------------------------------------------------------------ corrupt files

@pytest.fixture
def text(entries):
    return Baseline().updated(entries).dump()


def _line_with(text, fragment, nth=0):
    return [i for i, x in enumerate(text.splitlines(), 1) if fragment in x][nth]


def _raises(text, *fragments, line=None):
    with pytest.raises(BaselineError) as info:
        Baseline.loads(text, "repo/.eigengate/baseline.json")
    msg = str(info.value)
    assert isinstance(info.value, ValueError)
    assert msg.startswith("repo/.eigengate/baseline.json" + (f":{line}:" if line else ""))
    for f in fragments:
        assert f in msg, msg
    return info.value


def test_invalid_json_names_the_line(text):
    n = _line_with(text, '"written_by"')
    broken = "\n".join(x.rstrip(",") if i == n - 1 else x
                       for i, x in enumerate(text.splitlines(), 1))
    _raises(broken, "is not valid JSON", line=n)


def test_merge_conflict_markers_get_a_hint(text):
    lines = text.splitlines()
    lines[5:5] = ["<<<<<<< HEAD", "=======", ">>>>>>> retune"]
    _raises("\n".join(lines), "merge-conflict markers", line=6)


def test_duplicate_key_is_refused_with_its_line(text):
    n = _line_with(text, '"pair": true')
    lines = text.splitlines()
    lines[n - 1] = lines[n - 1].replace('"pair": true', '"pair": true, "pair": false', 1)
    _raises("\n".join(lines), "'pair' twice", line=n)


def test_newer_format_version_is_refused(text):
    err = _raises(text.replace('"format_version": 1', '"format_version": 2', 1),
                  "written by a newer eigengate", "format_version 1", line=2)
    assert "upgrade" in err.hint


@pytest.mark.parametrize("old, new, fragments", [
    ('"multiplicity": 1', '"multiplicity": "one"', ("multiplicity", "must be an integer")),
    ('"pair": true', '"pair": 1', ("pair", "true or false")),
    ('"condition": ', '"conditon": ', ("conditon", "is not a field of a baseline mode")),
    ('"equilibrium": "stable-focus"', '"equilibrium": "calm"', ("equilibrium type",)),
    ('"eigenvalue": [', '"eigenvalue": [0, ', ("[real, imaginary]",)),
])
def test_wrong_fields_name_entry_and_line(text, old, new, fragments):
    n = _line_with(text, old)
    lines = text.splitlines()
    lines[n - 1] = lines[n - 1].replace(old, new, 1)
    err = _raises("\n".join(lines), *fragments, line=n)
    assert re.search(r"entry '[^']+' of 'models/[^']+'", str(err))


def test_missing_field_names_the_mode_line(text):
    n = _line_with(text, '"condition": ')
    lines = text.splitlines()
    lines[n - 1] = re.sub(r'"condition": [^,]+, ', "", lines[n - 1], count=1)
    _raises("\n".join(lines), "missing the field 'condition'", line=n)


@pytest.mark.parametrize("bad, fragment", [
    ("[]", "must hold a JSON object"),
    ('{"format_version": 1}', "missing the field 'models'"),
    ('{"format_version": "1", "models": {}}', "must be 1"),
    ('{"format_version": 1, "models": {}, "extra": 0}', "extra is not a field"),
    ('{"format_version": 1, "models": {"a.yaml": {}}}', "non-empty object"),
    ('{"format_version": 1, "models": {}, "x": NaN}', "NaN"),
])
def test_structural_problems(bad, fragment):
    _raises(bad, fragment)


def test_unreadable_bytes(tmp_path):
    p = tmp_path / "baseline.json"
    p.write_bytes(b'{"format_version": 1, "models": {"\xff": {}}}')
    with pytest.raises(BaselineError, match="not UTF-8"):
        Baseline.load(p)


# ------------------------------------------------------------------ writing

def test_write_atomic_replaces_whole_file(tmp_path):
    p = tmp_path / "b.json"
    write_atomic(p, "one\n")
    write_atomic(p, "two\n")
    assert p.read_text() == "two\n" and [x.name for x in tmp_path.iterdir()] == ["b.json"]


def test_merge_write_summary_and_no_churn(tmp_path, entries):
    path = tmp_path / ".eigengate" / "baseline.json"
    s = merge_write(path, entries[:2])
    assert s.written and set(s.added) == {e.key for e in entries[:2]}
    assert (path.parent / "README").is_file() and "*.lock" in (path.parent / ".gitignore"
                                                               ).read_text()
    before = path.read_bytes()
    mtime = path.stat().st_mtime_ns
    s = merge_write(path, entries[:2])
    assert not s.written and set(s.unchanged) == {e.key for e in entries[:2]}
    assert path.read_bytes() == before and path.stat().st_mtime_ns == mtime
    s = merge_write(path, entries[2:], removed_keys=[entries[0].key])
    assert s.removed == (entries[0].key,) and len(Baseline.load(path)) == 3
    assert sorted(os.listdir(path.parent)) == [".gitignore", "README", "baseline.json"]


def test_merge_write_leaves_a_corrupt_baseline_alone(tmp_path, entries):
    path = tmp_path / "baseline.json"
    path.write_text('{"format_version": 1, "models": {', encoding="utf-8")
    with pytest.raises(BaselineError, match="baseline.json:1"):
        merge_write(path, entries)
    assert path.read_text(encoding="utf-8") == '{"format_version": 1, "models": {'
    assert not (tmp_path / "baseline.json.lock").exists()


# ------------------------------------------------------------------ concurrency

ROUNDS, PER_ROUND = 30, 3


def _entry(worker, i):
    mode = BaselineMode(eigenvalue=complex(-1 - i, 0), s=complex(-1 - i, 0), multiplicity=1,
                        pair=False, defective=False, damping_ratio=1.0,
                        natural_frequency=1.0 + i, time_constant=1 / (1 + i),
                        uncertainty=1e-15, condition=1.0, states=(("x", 1.0),))
    return Entry(source=f"models/w{worker}.yaml", title=f"m{i}", domain="continuous",
                 sample_period=None, modes=(mode,), spectral_abscissa=-1.0 - i,
                 spectral_radius=1.0 + i, min_damping=1.0, equilibrium="stable-node",
                 stable=1, unstable=0, center=0, written_by="test")


def _writer(path, worker, barrier):
    for r in range(ROUNDS):
        barrier.wait()
        new = [_entry(worker, r * PER_ROUND + k) for k in range(PER_ROUND)]
        # each round also drops one of this worker's entries from the round before
        gone = [(f"models/w{worker}.yaml", f"m{(r - 1) * PER_ROUND}")] if r else []
        merge_write(path, new, gone)


def _reader(path, stop, errors):
    import time

    while not stop.is_set():
        try:
            Baseline.load(path)
        except BaselineError:
            errors.value += 1
        time.sleep(0.0005)


def test_concurrent_accepting_loses_nothing(tmp_path):
    # Two real processes accept disjoint sets at the same moments (a barrier per round), the
    # way pytest-xdist workers would; a third keeps reading and must never see a torn file.
    ctx = multiprocessing.get_context("fork" if "fork" in
                                      multiprocessing.get_all_start_methods() else "spawn")
    path = tmp_path / ".eigengate" / "baseline.json"
    barrier, stop, errors = ctx.Barrier(2), ctx.Event(), ctx.Value("i", 0)
    reader = ctx.Process(target=_reader, args=(path, stop, errors))
    writers = [ctx.Process(target=_writer, args=(path, w, barrier)) for w in (1, 2)]
    reader.start()
    for p in writers:
        p.start()
    for p in writers:
        p.join(120)
        assert p.exitcode == 0
    stop.set()
    reader.join(30)
    assert errors.value == 0
    keys = set(Baseline.load(path).keys())
    expected = {(f"models/w{w}.yaml", f"m{i}") for w in (1, 2) for i in range(ROUNDS * PER_ROUND)
                if not (i % PER_ROUND == 0 and i < (ROUNDS - 1) * PER_ROUND)}
    assert keys == expected
    assert sorted(os.listdir(path.parent)) == [".gitignore", "README", "baseline.json"]


def test_baseline_renamed_moves_entries(entries):
    b = Baseline().updated(entries).renamed({"models/pitch.yaml": "models/axes/pitch.yaml"})
    assert b.entry("models/axes/pitch.yaml", "pitch") is not None
    assert b.entry("models/pitch.yaml", "pitch") is None


def test_entry_name_and_label(entries):
    mast = entries[1]
    assert (mast.title, mast.name, mast.label) == ("mast[storm]", "mast", "storm")
    assert (entries[0].name, entries[0].label) == ("pitch", None)
    assert Path(DEFAULT_PATH).name == "baseline.json"
