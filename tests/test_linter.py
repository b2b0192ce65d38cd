"""The linter end to end as a real subprocess on temporary repositories: policy, waivers,
cache, process pool, commands."""

import json
import textwrap

import numpy as np
import pytest
from support import entry_rest, oscillator, run_cli, run_main, with_rest, write


def _make_repo(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", """\
        [project]
        name = "demo"

        [tool.eigengate]
        include = ["models/**/*.yaml"]
        [tool.eigengate.requirements]
        stable = true
        min_damping = 0.3
        [[tool.eigengate.overrides]]
        paths = ["models/flex/**"]
        requirements = { min_damping = 0.05 }
        """)
    write(tmp_path / "models" / "arm.yaml", oscillator("arm", None))
    write(tmp_path / "models" / "flex" / "panel.yaml", oscillator("panel", None))
    write(tmp_path / "ci" / "pipeline.yaml", "steps: [build, test]\n")
    return tmp_path


@pytest.fixture
def repo(tmp_path):
    return _make_repo(tmp_path)


@pytest.fixture(scope="module")
def no_cache_stdout(tmp_path_factory):
    """``check --no-cache`` of a repository equal to ``repo``, run once for the module (the
    output names files relative to the repository, so it stands for every copy)."""
    return run_cli("check", "--no-cache", cwd=_make_repo(tmp_path_factory.mktemp("r"))).stdout


def test_policy_defaults_and_overrides_apply(repo):
    out = run_main("check", cwd=repo)
    assert out.returncode == 1, out.stderr
    assert "arm: FAILED" in out.stdout and "EG103 damping-ratio" in out.stdout
    assert "panel: ok" in out.stdout  # the override lowers the threshold to 0.05
    assert "pipeline.yaml" not in out.stdout  # not selected by include


def test_waiver_in_model_file_accepts_the_finding_and_expiry_brings_it_back(repo):
    write(repo / "models" / "arm.yaml", oscillator("arm", None) + textwrap.dedent("""\
        waivers:
          - rule: EG103
            reason: arm retune scheduled, tracked in review
            expires: 2027-01-31
        """))
    out = run_main("check", cwd=repo)
    assert out.returncode == 0, out.stdout
    assert "waived  EG103" in out.stdout and "arm retune scheduled" in out.stdout
    late = run_main("check", cwd=repo, env={"EIGENGATE_TODAY": "2027-02-01"})
    assert late.returncode == 1
    assert "EG002 expired-waiver" in late.stdout and "EG103 damping-ratio" in late.stdout


def test_unused_and_invalid_waivers(repo):
    write(repo / "models" / "flex" / "panel.yaml", oscillator("panel", None) + textwrap.dedent("""\
        waivers:
          - {rule: EG101, reason: not needed any more}
        """))
    out = run_main("check", cwd=repo)
    assert "EG003 unused-waiver" in out.stdout
    write(repo / "models" / "flex" / "panel.yaml", oscillator("panel", None) + textwrap.dedent("""\
        waivers:
          - {rule: EG103}
        """))
    out = run_main("check", cwd=repo)
    assert "models/flex/panel.yaml" in out.stdout
    assert "waivers[0].reason is required" in out.stdout


def test_policy_waiver_and_its_unused_report(repo):
    with open(repo / "pyproject.toml", "a", encoding="utf-8") as fh:
        fh.write(textwrap.dedent("""\
            [[tool.eigengate.waivers]]
            rule = "EG103"
            paths = ["models/arm.yaml"]
            reason = "accepted for the demonstrator build"
            [[tool.eigengate.waivers]]
            rule = "EG104"
            paths = ["models/**"]
            reason = "stale"
            """))
    out = run_main("check", cwd=repo)
    assert out.returncode == 0, out.stdout
    assert "accepted for the demonstrator build" in out.stdout
    assert "EG003 unused-waiver" in out.stdout and "pyproject.toml" in out.stdout


def test_bad_configuration_is_a_usage_error(repo):
    text = (repo / "pyproject.toml").read_text(encoding="utf-8")
    (repo / "pyproject.toml").write_text(text.replace("min_damping = 0.3", "min_damping = 3"),
                                         encoding="utf-8")
    out = run_main("check", cwd=repo)
    assert out.returncode == 2
    assert "pyproject.toml: [tool.eigengate] requirements.min_damping" in out.stderr
    assert "got 3" in out.stderr and "Traceback" not in out.stderr


def test_cache_hit_and_invalidation_when_a_referenced_npz_changes(repo):
    np.savez(repo / "models" / "plant.npz", A=np.array([[0.0, 1.0], [-4.0, -0.4]]))
    write(repo / "models" / "ref.yaml", """\
        model_format: 1
        name: ref
        plant:
          A: {file: plant.npz, key: A}
        """)
    first = run_cli("check", cwd=repo)
    cache = repo / ".eigengate-cache"
    assert (cache / "CACHEDIR.TAG").read_text().startswith("Signature: 8a477f597d28d172789f06886806bc55")
    assert (cache / ".gitignore").is_file() and (cache / "README").is_file()
    again = run_cli("check", cwd=repo)
    assert again.stdout == first.stdout
    assert "ref: FAILED" in first.stdout
    # retune the referenced matrix: zeta = 4/(2*2) = 1 (second-order standard form)
    np.savez(repo / "models" / "plant.npz", A=np.array([[0.0, 1.0], [-4.0, -4.0]]))
    changed = run_cli("check", cwd=repo)
    assert "ref: ok" in changed.stdout


def _packs(repo):
    packs = sorted((repo / ".eigengate-cache").rglob("*.pack"))
    assert packs, "the check wrote no cache pack"
    return packs


def _rewrite_heads(repo, change, summary=None):
    """Rewrite every pack with each entry's rest of the data (its last blob, read when a
    report reads beyond the entry's summary; per model ``[model, spectrum, equilibrium,
    verdicts, pictures]``, scan.encode) replaced by what ``change`` returns for it and
    ``summary`` applied to its summary (in the head), with a correct checksum, so only the
    reader's own checks of the entries stand between it and them."""
    from eigengate.scan.cache import read_pack, write_pack

    for pack in _packs(repo):
        read = read_pack(pack.read_bytes())
        blobs = {}
        for key, entry in read.head["entries"].items():
            items = read.items(*entry["blobs"])
            items = with_rest(items, change(entry_rest(items)))
            if summary is not None:
                summary(entry["summary"])
            blobs[key] = items
        pack.write_bytes(write_pack(read.head, blobs))


@pytest.mark.parametrize("damage", ["garbage", "truncated", "flipped byte", "empty",
                                    "nonsense results", "bad blob spans", "wrong shapes",
                                    "nonsense summary", "summary rows outside"])
def test_corrupt_cache_is_ignored_and_rebuilt(repo, damage, no_cache_stdout):
    from eigengate.scan.cache import read_pack

    first = run_cli("check", cwd=repo).stdout
    for pack in _packs(repo):
        raw = pack.read_bytes()
        if damage == "garbage":
            pack.write_bytes(b'{"salt": "x", "entries": {broken')
        elif damage == "truncated":
            pack.write_bytes(raw[:len(raw) // 2])
        elif damage == "flipped byte":  # in the body: only the checksum can tell
            pack.write_bytes(raw[:-9] + bytes([raw[-9] ^ 0x10]) + raw[-8:])
        elif damage == "empty":
            pack.write_bytes(b"")
    if damage == "nonsense results":
        _rewrite_heads(repo, lambda rest: "nonsense")
    elif damage == "bad blob spans":  # the first model's matrix A
        _rewrite_heads(repo, lambda rest: [[[10**6] + rest[0][0][1:]] + rest[0][1:]]
                       + rest[1:])
    elif damage == "wrong shapes":  # the first model's mode table
        _rewrite_heads(repo, lambda rest: [
            [rest[0][0], rest[0][1][:6] + ["x"] + rest[0][1][7:]] + rest[0][2:]] + rest[1:])
    elif damage == "nonsense summary":
        _rewrite_heads(repo, lambda rest: rest,
                       lambda s: s.__setitem__("results", "nonsense"))
    elif damage == "summary rows outside":  # findings' mode rows: a table of the blobs
        _rewrite_heads(repo, lambda rest: rest,
                       lambda s: [r.__setitem__(4, 10**6) for r in s["results"]])
    again = run_cli("check", cwd=repo)
    assert again.stdout == first and "Traceback" not in again.stderr
    # a report that reads every field (the text report reads only what it prints, so damage
    # elsewhere is found when something reads it): the same as without the cache
    whole = run_cli("check", "--format", "json", cwd=repo)
    assert whole.stdout == run_cli("check", "--format", "json", "--no-cache", cwd=repo).stdout
    for pack in _packs(repo):  # rebuilt: a whole pack again, its data whole too
        read = read_pack(pack.read_bytes())
        assert read.head["entries"]
        for entry in read.head["entries"].values():
            rest = entry_rest(read.items(*entry["blobs"]))
            count = entry["blobs"][1]
            assert all(0 <= r[0][0] < count and 0 <= r[1][6] < count for r in rest)
            assert all(s[4] is None or 0 <= s[4] < count for s in entry["summary"]["results"])
    assert no_cache_stdout == first
    # and what was rebuilt is served whole: every entry a hit, its matrices readable
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    config = load_config(start=repo)
    served, fresh = scan([repo], config, jobs=1), scan([repo], config, jobs=1, use_cache=False)
    assert served.cache_hits == len(served.files) == 2 and served.analysed == 0
    for a, b in zip(served.files, fresh.files):
        for ra, rb in zip(a.results, b.results):
            _assert_same_model(ra.model, rb.model)
            assert [m.participation.tolist() for m in ra.spectrum.modes] == \
                [m.participation.tolist() for m in rb.spectrum.modes]


def _assert_same_model(cached, fresh):
    """Every field a cached model keeps (all but the loop parts and the vector field, which
    are code or only needed for analysis, and the file's inputs, read again when a baseline
    needs them) is the fresh model's."""
    import dataclasses

    for f in dataclasses.fields(fresh):
        if f.name in ("loop_parts", "nonlinear", "file_inputs"):
            continue
        a, b = getattr(cached, f.name), getattr(fresh, f.name)
        if isinstance(b, np.ndarray):
            assert np.array_equal(a, b) and a.shape == b.shape, f.name
        else:
            assert a == b, f.name


def test_jobs_two_gives_the_same_findings_as_jobs_one(repo):
    rng = np.random.default_rng(5)
    for i in range(24):  # enough files for the pool to be used
        a = rng.normal(size=(5, 5)) - 1.5 * np.eye(5)
        write(repo / "models" / "gen" / f"m{i:02d}.yaml",
              f"model_format: 1\nname: gen{i:02d}\nplant:\n  A: {a.round(4).tolist()}\n")
    one = run_cli("check", "--no-cache", "--jobs", "1", "--format", "json", cwd=repo)
    two = run_cli("check", "--no-cache", "--jobs", "2", "--format", "json", cwd=repo)
    assert one.returncode == two.returncode
    assert one.stdout == two.stdout


def test_only_model_files_skips_other_yaml(repo):
    out = run_main("check", "--only-model-files", "ci/pipeline.yaml", "models/arm.yaml",
                   cwd=repo)
    assert "ci/pipeline.yaml\n" not in out.stdout and "EG001" not in out.stdout
    assert "arm: FAILED" in out.stdout


def test_show_rules_and_explain(repo):
    out = run_cli("show", "models/arm.yaml", cwd=repo)
    assert out.returncode == 1
    assert "origin: stable-focus" in out.stdout and "-0.2±1.98997j" in out.stdout
    assert "FAIL  EG103 damping-ratio" in out.stdout
    rules = run_cli("rules", cwd=repo)
    assert rules.returncode == 0 and "EG105  pole-region" in rules.stdout
    explain = run_cli("explain", "EG105", cwd=repo)
    assert "pole_region" in explain.stdout and "min_damping" in explain.stdout
    bad = run_cli("explain", "EG1O3", cwd=repo)
    assert bad.returncode == 2 and "did you mean" in bad.stderr


def test_every_report_from_the_cache_has_the_same_bytes_as_from_a_fresh_analysis(
        tmp_path, example_report):
    # The example repository has every kind of model (descriptor, discrete, closed loops
    # with margins, operating points, a vector field) and a baseline; the HTML report reads
    # the matrices and the modes (pole maps, phase portraits), which the cache serves lazily.
    import shutil
    from pathlib import Path

    example = Path(__file__).resolve().parents[1] / "example_repo"
    repo = tmp_path / "repo"
    shutil.copytree(example, repo, ignore=shutil.ignore_patterns(".eigengate-cache",
                                                                "__pycache__"))
    formats = ["json", "sarif", "junit", "markdown", "annotations", "html"]

    def reports(tag, *extra):
        args = [a for f in formats for a in ("--output", f"{f}:{tmp_path / tag}.{f}")]
        out = run_cli("check", ".", *extra, *args, cwd=repo)  # "." as in the shared run
        assert out.returncode == 1 and "Traceback" not in out.stderr, out.stderr
        return [out.stdout] + [(tmp_path / f"{tag}.{f}").read_bytes() for f in formats]

    # fresh: the suite's one --no-cache run of example_repo/ (conftest.example_report; its
    # -q and picture options change no report file), and the text report in this process
    text = run_main("check", ".", "--no-cache", cwd=repo)
    assert text.returncode == 1 and not (repo / ".eigengate-cache").exists(), text.stderr
    fresh = [text.stdout] + [(example_report / f"report.{f}").read_bytes() for f in formats]
    cold = reports("cold")  # analyses and writes the cache
    warm = reports("warm")  # every result from the cache
    assert len(list((repo / ".eigengate-cache").rglob("*.pack"))) == 1  # one configuration
    for name, a, b, c in zip(["text"] + formats, fresh, cold, warm):
        assert a == b == c, f"{name} report differs when served from the cache"
    # and, in the same process, every model served by the cache is the fresh one, field by
    # field, and so is every spectrum's mode list
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    config = load_config(start=repo)
    served, fresh = scan([repo], config, jobs=1), scan([repo], config, jobs=1, use_cache=False)
    assert served.analysed == 0 and served.cache_hits == len(served.files) > 10
    for a, b in zip(served.files, fresh.files):
        assert a.findings == b.findings and len(a.results) == len(b.results)
        for ra, rb in zip(a.results, b.results):
            _assert_same_model(ra.model, rb.model)
            for ma, mb in zip(ra.spectrum.modes, rb.spectrum.modes, strict=True):
                assert ma.describe() == mb.describe() and ma.top_states() == mb.top_states()


def test_a_text_report_from_the_cache_reads_no_matrix_and_builds_no_mode(tmp_path):
    # What keeps a warm re-check fast: the text report reads only the head of each entry.
    import shutil
    from pathlib import Path

    from eigengate.cli import render
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    repo = tmp_path / "repo"
    shutil.copytree(Path(__file__).resolve().parents[1] / "example_repo", repo,
                    ignore=shutil.ignore_patterns(".eigengate-cache", "__pycache__"))
    config = load_config(start=repo)
    scan([repo], config, jobs=1)
    warm = scan([repo], config, jobs=1)
    assert warm.analysed == 0
    render("text", list(warm.files))
    results = [r for f in warm.files for r in f.results]
    assert len(results) == 30 and not any("A" in r.model.__dict__ or r.spectrum.modes._built is not None
                               for r in results)
