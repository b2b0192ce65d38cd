"""Files analysed stage by stage (``scan.engine.analyse_files``, the scan's batches, the pool's
chunks) give what file by file gives: the same records, in order, each file's error its own;
and a pool worker that dies mid-scan loses and duplicates nothing (its chunks are analysed by
the parent). The reference is the file-by-file path of the same code (common practice: a
batched loop must equal the loop it regroups)."""

import json
import os
import signal
from pathlib import Path

import pytest

from support import lift_axis, oscillator, write

_UNSTABLE = """\
model_format: 1
name: drift
plant:
  A: [[0.4, 1.0], [0.0, -3.0]]
requirements:
  stable: true
"""

_BAD_REQUIREMENT = """\
model_format: 1
name: odd
plant:
  A: [[-1.0]]
requirements:
  min_damping: high
"""

_POINTS = """\
model_format: 1
name: two-points
operating_points:
  - label: slow
    plant:
      A: [[-0.5, 2.0], [-2.0, -0.5]]
  - label: fast
    plant:
      A: [[-5.0, 0.0], [0.0, -7.0]]
requirements:
  stable: true
  min_damping: 0.1
"""


def _repository(root: Path, copies: int = 8) -> Path:
    (root / ".git").mkdir(parents=True)
    write(root / "pyproject.toml", '[tool.eigengate]\ninclude = ["models/*.yaml"]\n'
                                   "allow_python = true\n")
    for i in range(copies):
        write(root / "models" / f"a{i}_osc.yaml", oscillator(f"osc{i}", 0.05 * i))
        write(root / "models" / f"b{i}_lift.yaml", lift_axis(1.0 + 0.3 * i))
    write(root / "models" / "c_drift.yaml", _UNSTABLE)
    write(root / "models" / "d_broken.yaml", "model_format: 1\nname: [\n")
    write(root / "models" / "e_odd.yaml", _BAD_REQUIREMENT)
    write(root / "models" / "f_points.yaml", _POINTS)
    write(root / "models" / "g_missing.yaml", "model_format: 1\nname: gone\nplant:\n"
                                              "  A: {file: nowhere.npy}\n")
    return root


def _record(item) -> str:
    from eigengate.scan.serial import results_to_data

    source, results, error, refs = item
    data, blobs = results_to_data(source, results, error)
    segment, index = blobs.items
    shown = [segment.hex(), index]
    return json.dumps([data, shown, refs, None if error is None else str(error)],
                      sort_keys=True)


def test_stage_by_stage_equals_file_by_file(tmp_path):
    from eigengate.scan.config import load_config
    from eigengate.scan.engine import analyse_file, analyse_files

    root = _repository(tmp_path / "repo")
    config = load_config(start=root)
    paths = sorted(str(p) for p in (root / "models").glob("*.yaml"))
    rels = [os.path.relpath(p, root) for p in paths]
    one_by_one = [_record(analyse_file(p, root, config, r)) for p, r in zip(paths, rels)]
    together = [_record(x) for x in analyse_files(list(zip(paths, rels)), root, config)]
    assert together == one_by_one
    # the mix is what it claims: errors of loading and of requirements among good files
    errors = [x for x in analyse_files([(p, None) for p in paths], root, config) if x[2]]
    assert {Path(e[0]).name for e in errors} == {"d_broken.yaml", "e_odd.yaml",
                                                 "g_missing.yaml"}
    assert [_record(x) for x in analyse_files([(p, None) for p in paths], root, config)] \
        == one_by_one  # discovery's names or the file's own: the same


@pytest.mark.parametrize("batch", [1, 3, 32])
def test_scan_in_batches_gives_the_file_by_file_report(tmp_path, monkeypatch, batch):
    from eigengate.scan import runner
    from eigengate.scan.config import load_config

    root = _repository(tmp_path / "repo")
    config = load_config(start=root)
    monkeypatch.setattr(runner, "BATCH", 1)
    single = runner.scan([root], config, use_cache=False, jobs=1)
    monkeypatch.setattr(runner, "BATCH", batch)
    seen: list[int] = []
    batched = runner.scan([root], config, use_cache=True, jobs=1,
                          progress=lambda done, total: seen.append(done))
    assert [fr.source for fr in batched.files] == [fr.source for fr in single.files]
    assert [fr.findings for fr in batched.files] == [fr.findings for fr in single.files]
    assert seen == sorted(seen) and seen[-1] == len(single.files)
    again = runner.scan([root], config, use_cache=True, jobs=1)  # from the cache written
    assert again.cache_hits == len(single.files) - 3  # the three errors are not cached
    assert [fr.findings for fr in again.files] == [fr.findings for fr in single.files]


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
def test_a_pool_worker_that_dies_loses_and_duplicates_nothing(tmp_path):
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    root = _repository(tmp_path / "repo", copies=12)
    log = tmp_path / "analysed.txt"
    # a vector field whose module kills any process but this one (a pool worker) on import
    write(root / "dynamics" / "__init__.py", "")
    write(root / "dynamics" / "fatal.py", f"""\
import os, signal
with open({str(log)!r}, "a") as fh:
    fh.write(f"{{os.getpid()}}\\n")
if os.getpid() != {os.getpid()}:
    os.kill(os.getpid(), signal.SIGKILL)

def field(x, u):
    return [x[1], -4.0 * x[0] - 0.8 * x[1]]
""")
    write(root / "models" / "a0_fatal.yaml", """\
model_format: 1
name: fatal-field
vector_field:
  function: dynamics.fatal:field
  states: [angle, rate]
  at: [{label: rest, x: [0.0, 0.0]}]
requirements: {stable: true, min_damping: 0.1}
""")
    config = load_config(start=root)
    pooled = scan([root], config, use_cache=False, jobs=2)
    pids = log.read_text().split()
    assert str(os.getpid()) in pids and len(set(pids)) >= 2  # the worker died, then here
    single = scan([root], config, use_cache=False, jobs=1)
    sources = [fr.source for fr in pooled.files]
    assert sources == [fr.source for fr in single.files] and len(set(sources)) == len(sources)
    assert [fr.findings for fr in pooled.files] == [fr.findings for fr in single.files]
    fatal = next(fr for fr in pooled.files if fr.source.endswith("a0_fatal.yaml"))
    assert fatal.error is None and fatal.results  # analysed here, not lost


@pytest.mark.parametrize("budget", [0, 64 << 20])
def test_a_file_is_read_once_and_analysed_from_the_bytes_of_its_key(tmp_path, monkeypatch,
                                                                    budget):
    import collections

    import eigengate.model.formats as formats
    from eigengate.scan import runner
    from eigengate.scan.config import load_config

    root = _repository(tmp_path / "repo")
    config = load_config(start=root)
    reference = runner.scan([root], config, use_cache=False, jobs=1)
    reads: collections.Counter = collections.Counter()
    real = formats.read_regular

    def counted(path, *args, **kwargs):
        reads[os.fspath(path)] += 1
        return real(path, *args, **kwargs)

    monkeypatch.setattr(formats, "read_regular", counted)
    monkeypatch.setattr(runner, "READ_BUDGET", budget)
    cold = runner.scan([root], config, use_cache=True, jobs=1)
    assert [fr.findings for fr in cold.files] == [fr.findings for fr in reference.files]
    models = {k: n for k, n in reads.items() if k.endswith(".yaml")}
    readable = [k for k in models if not k.endswith(("d_broken.yaml", "e_odd.yaml",
                                                     "g_missing.yaml"))]
    # once for its key, and (without a budget) once more to be analysed
    assert readable and all(models[k] == (2 if budget == 0 else 1) for k in readable), models
