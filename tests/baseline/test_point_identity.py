"""Operating points and sweep points keep their baseline identity when their label (which often
carries a parameter value) changes: a retune of a swept parameter is compared before → after,
not reported as a stale entry plus a new model. The CLI as a subprocess."""

import json
import shutil
import textwrap
from pathlib import Path

import pytest

from eigengate.baseline.store import Baseline
from eigengate.baseline.store import BaselineError
# the checks run in this process (support.run_main): their output is the subject here
from support import cruise_points, run_main, write



points = cruise_points  # zeta = k2 / 4, see support.cruise_points


def rules(repo, *args):
    proc = run_main("check", "--format", "json", "--no-cache", *args, cwd=repo)
    doc = json.loads(proc.stdout)
    found = [f for fr in doc["files"] for f in
             fr["findings"] + [g for m in fr["models"] for g in m["findings"]]]
    return proc, found


@pytest.fixture
def repo(tmp_path):
    write(tmp_path / "pyproject.toml", "[tool.eigengate]\n")
    return tmp_path


def accept(repo):
    proc = run_main("baseline", "accept", cwd=repo)
    assert proc.returncode == 0, proc.stdout + proc.stderr


def test_relabelled_point_is_compared_with_its_position(repo):
    model = repo / "models" / "cruise.yaml"
    write(model, points(("", "v=30 k2=2", 2.0), ("", "v=45 k2=2", 2.0)))     # zeta 0.5
    accept(repo)
    write(model, points(("", "v=30 k2=2", 2.0), ("", "v=45 k2=0.4", 0.4)))   # zeta 0.1
    proc, found = rules(repo)
    got = sorted(f["rule"] for f in found)
    assert "EG208" not in got and "EG209" not in got, got
    damping = [f for f in found if f["rule"] == "EG203"]
    assert damping and damping[0]["label"] == "v=45 k2=0.4"
    assert damping[0]["threshold"] == pytest.approx(0.5) and \
        damping[0]["measured"] == pytest.approx(0.1)
    assert "v=45 k2=2" in damping[0]["message"]  # says which entry it was compared with
    assert proc.returncode == 1


def test_user_id_follows_a_point_that_moved_and_was_relabelled(repo):
    model = repo / "models" / "cruise.yaml"
    write(model, points(("id: slow, ", "v=30", 2.0), ("id: fast, ", "v=45", 2.0)))
    accept(repo)
    # reordered, relabelled, and "fast" retuned (zeta 0.5 -> 0.1)
    write(model, points(("id: fast, ", "v=50", 0.4), ("id: slow, ", "v=31", 2.0)))
    proc, found = rules(repo)
    got = [(f["rule"], f["label"]) for f in found]
    assert ("EG203", "v=50") in got and not any(r in ("EG208", "EG209") for r, _ in got), got


def test_unchanged_labels_of_an_old_baseline_still_match(repo):
    model = repo / "models" / "cruise.yaml"
    write(model, points(("", "v=30", 2.0), ("", "v=45", 2.0)))
    accept(repo)
    path = repo / ".eigengate" / "baseline.json"
    # a baseline written before point identities existed: no "point" fields
    old = "\n".join(line for line in path.read_text().splitlines()
                    if '"point":' not in line) + "\n"
    path.write_text(old)
    assert len(Baseline.load(path)) == 2
    write(model, points(("", "v=30", 2.0), ("", "v=45", 0.4)))
    proc, found = rules(repo)
    got = [(f["rule"], f["label"]) for f in found]
    assert ("EG203", "v=45") in got and proc.returncode == 1, got
    assert not any(f["rule"] in ("EG208", "EG209") for f in found)


def test_sweep_point_keeps_its_grid_position(repo):
    fields = Path(__file__).resolve().parents[1] / "nonlinear" / "fields.py"
    (repo / "pyproject.toml").write_text("[tool.eigengate]\nallow_python = true\n")
    (repo / "dynamics").mkdir()
    (repo / "dynamics" / "__init__.py").write_text("")
    shutil.copy(fields, repo / "dynamics" / "fields.py")
    # damped pendulum theta'' + b theta' + sin theta = 0 at the hanging equilibrium:
    # s^2 + b s + 1, zeta = b / 2 (linearisation, standard second-order form)
    doc = textwrap.dedent("""\
        model_format: 1
        name: boom
        vector_field:
          function: dynamics.fields:pendulum
          states: [theta, omega]
          inputs: [torque]
          sweep: {{b: [0.8, {b}]}}
          at:
            - {{label: hanging, x: [0.0, 0.0]}}
        requirements:
          stable: true
        """)
    write(repo / "models" / "boom.yaml", doc.format(b=1.0))                   # zeta 0.5
    accept(repo)
    write(repo / "models" / "boom.yaml", doc.format(b=0.2))                   # zeta 0.1
    proc, found = rules(repo)
    got = [(f["rule"], f["label"]) for f in found]
    assert ("EG203", "b=0.2, hanging") in got, got
    assert not any(r in ("EG208", "EG209") for r, _ in got), got


def test_point_ids_are_checked(repo):
    model = repo / "models" / "cruise.yaml"
    write(model, points(("id: same, ", "a", 2.0), ("id: same, ", "b", 2.0)))
    proc = run_main("check", "--no-baseline", cwd=repo)
    assert proc.returncode == 1 and "operating_points[1]" in proc.stdout and "id" in proc.stdout
    write(model, points(("id: '#1', ", "a", 2.0)))
    proc = run_main("check", "--no-baseline", cwd=repo)
    assert proc.returncode == 1 and "operating_points[0]" in proc.stdout, proc.stdout


def test_baseline_point_field_is_read_strictly(repo):
    text = textwrap.dedent("""\
        {
          "format_version": 1,
          "models": {
            "m.yaml": {
              "m[a]": {
                "domain": "continuous",
                "figures": {"center": 0, "equilibrium": "stable-node", "min_damping": 1, "spectral_abscissa": -1, "spectral_radius": 1, "stable": 1, "unstable": 0},
                "modes": [],
                "point": 3,
                "sample_period": null,
                "written_by": "eigengate 0.1.0"
              }
            }
          }
        }
        """)
    with pytest.raises(BaselineError, match="point"):
        Baseline.loads(text, "b.json")
    good = Baseline.loads(text.replace('"point": 3', '"point": "#0"'), "b.json")
    assert good.entry("m.yaml", "m[a]").point == "#0"
    assert good.dump() == text.replace('"point": 3', '"point": "#0"')


def test_a_different_point_in_the_same_place_is_not_its_predecessor(repo):
    # "loaded" replaced by "towing": the label's words changed, not only its numbers
    model = repo / "models" / "cruise.yaml"
    write(model, points(("", "empty", 2.0), ("", "loaded", 2.0)))
    accept(repo)
    write(model, points(("", "empty", 2.0), ("", "towing", 0.4)))
    proc, found = rules(repo)
    got = sorted((f["rule"], f["label"]) for f in found)
    assert got == [("EG208", "towing"), ("EG209", "loaded")], got


def test_identity_is_stored_with_the_entry(repo):
    write(repo / "models" / "cruise.yaml",
          points(("", "v=30 k2=2", 2.0), ("id: fast, ", "v=45", 2.0)))
    accept(repo)
    stored = Baseline.load(repo / ".eigengate" / "baseline.json")
    assert [(e.title, e.point) for e in stored] == [
        ("cruise[v=30 k2=2]", "#0:v=# k2=#"), ("cruise[v=45]", "fast")]


@pytest.mark.parametrize("label, shape", [
    ("v=30", "v=#"), ("v = 30.5,  k2=-1e-3", "v = #, k2=#"), ("x*=[0, 3.14]", "x*=[#, #]"),
    ("towing", "towing"), ("b=1, hanging", "b=#, hanging"), ("mode2", "mode2")])
def test_label_shape(label, shape):
    from eigengate.load.loader import label_shape

    assert label_shape(label) == shape

