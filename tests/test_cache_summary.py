"""Cached results read in two steps (eigengate.scan.summary): a warm scan builds each result
from its entry's summary and decodes the rest only when something reads it. The reference is
the same scan without the cache (fresh analysis): whatever is read, in whatever order, it
must be what the fresh scan gives; a quiet report of passing files decodes no whole data;
and whole data that fails its checks when read is replaced by a fresh analysis."""

import dataclasses
import shutil
from pathlib import Path

import numpy as np
import pytest

from eigengate.reports.text import render_results
from eigengate.scan.cache import read_pack, write_pack
from eigengate.scan.config import load_config
from eigengate.scan.runner import scan
from eigengate.scan.summary import CachedResult
from support import entry_rest, with_rest

EXAMPLE = Path(__file__).resolve().parent.parent / "example_repo"
_SPECTRUM = ("infinite", "norm", "balanced", "spectral_abscissa", "spectral_radius",
             "min_damping", "n_eigenvalues")


@pytest.fixture(scope="module")
def repo(tmp_path_factory):
    root = tmp_path_factory.mktemp("summary") / "repo"
    shutil.copytree(EXAMPLE, root, ignore=shutil.ignore_patterns(".eigengate-cache"))
    scan([root], load_config(start=root), jobs=1)  # fills the cache
    return root


def _scans(root):
    config = load_config(start=root)
    warm = scan([root], config, jobs=1)
    fresh = scan([root], config, jobs=1, use_cache=False)
    return warm, fresh


def _same(a, b, what):
    if isinstance(b, np.ndarray):
        assert np.array_equal(a, b) and a.shape == b.shape, what
    elif type(b).__module__.startswith("scipy.sparse"):
        assert (a != b).nnz == 0 and a.shape == b.shape, what
    else:
        assert a == b, what


def _model_fields(m):
    return [f.name for f in dataclasses.fields(m)
            if f.name not in ("loop_parts", "nonlinear", "file_inputs", "parameters")]


def _read_all(r, fresh, order):
    """Every field of cached result ``r``, read in ``order``, against ``fresh``."""
    steps = {
        "model": lambda: [_same(getattr(r.model, n), getattr(fresh.model, n), n)
                          for n in _model_fields(fresh.model)],
        "spectrum": lambda: [_same(getattr(r.spectrum, n), getattr(fresh.spectrum, n), n)
                             for n in _SPECTRUM],
        "modes": lambda: _same([(m.index, m.eigenvalue, m.damping_ratio) for m in r.spectrum.modes],
                               [(m.index, m.eigenvalue, m.damping_ratio)
                                for m in fresh.spectrum.modes], "modes"),
        "verdicts": lambda: _same([(v.rule, v.passed, v.message, [m.index for m in v.offending])
                                   for v in r.verdicts],
                                  [(v.rule, v.passed, v.message, [m.index for m in v.offending])
                                   for v in fresh.verdicts], "verdicts"),
        "rest": lambda: [_same(getattr(r, n), getattr(fresh, n), n)
                         for n in ("equilibrium", "findings")]
        + [_same(repr(r.pictures), repr(fresh.pictures), "pictures")],  # NaN ≠ NaN: by repr
        "lines": lambda: [_same(r.model.line_of(p), fresh.model.line_of(p), p)
                          for p in ("requirements", "plant", "plant.A", "nowhere", "plant.A.0")],
    }
    for step in order:
        steps[step]()


@pytest.mark.parametrize("order", [
    ("model", "spectrum", "modes", "verdicts", "rest", "lines"),
    ("lines", "verdicts", "rest", "spectrum", "modes", "model"),
    ("modes", "rest", "model", "lines", "spectrum", "verdicts"),
])
def test_what_is_read_is_what_a_fresh_scan_gives(repo, order):
    warm, fresh = _scans(repo)  # each order on results not read before
    assert warm.cache_hits == len(warm.files) and warm.analysed == 0
    lazy = 0
    for a, b in zip(warm.files, fresh.files):
        assert (a.source, a.error is None, len(a.results)) == (b.source, b.error is None,
                                                              len(b.results))
        assert [f.message for f in a.findings] == [f.message for f in b.findings]
        for ra, rb in zip(a.results, b.results):
            lazy += isinstance(ra, CachedResult)
            _read_all(ra, rb, order)
    assert lazy > 5  # the example repository's models came from summaries


def test_a_quiet_report_of_passing_files_decodes_no_whole_data(repo):
    warm, fresh = _scans(repo)
    assert render_results(warm.files, verbose=False) == render_results(fresh.files,
                                                                       verbose=False)
    # (a grid's table reads every point's figures, and a waiver applied copies its result:
    # those are read whole)
    passing = [r for fr in warm.files for r in fr.results
               if not fr.findings and r.model.__dict__["grid"] is None and not r.waived]
    assert len(passing) > 3
    for r in passing:  # neither the model's record nor the result's parts were decoded
        assert "_stored" not in r.model.__dict__ and "verdicts" not in r.__dict__
        assert "modes" not in r.spectrum.__dict__
    assert render_results(warm.files) == render_results(fresh.files)  # now they are


def test_damaged_whole_data_is_analysed_again_when_read(repo, tmp_path):
    root = tmp_path / "repo"
    shutil.copytree(repo, root)
    for pack in (root / ".eigengate-cache").rglob("*.pack"):
        read = read_pack(pack.read_bytes())
        blobs = {}
        for key, entry in read.head["entries"].items():
            items = read.items(*entry["blobs"])
            rest = entry_rest(items)  # per model [model, spectrum, equilibrium, verdicts,
            for r in rest:            # pictures] (scan.encode)
                r[3] = "damaged"
                r[0][7] = 7  # the model's states
            blobs[key] = with_rest(items, rest)
        pack.write_bytes(write_pack(read.head, blobs))
    warm, fresh = _scans(root)
    assert warm.analysed == 0  # the summaries are whole: every file served
    for a, b in zip(warm.files, fresh.files):
        for ra, rb in zip(a.results, b.results):
            _read_all(ra, rb, ("verdicts", "model", "spectrum", "modes", "rest"))
