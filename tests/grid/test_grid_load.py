"""Loading operating-point grids: stacked arrays and file patterns, identities, regions and
the errors of bad grids (docs/grids.md)."""

import numpy as np
import pytest
import scipy.io
from gridcase import LOADS, SPEEDS, STACKED, expected_damping, model_text, stacked_repo, stacks

from eigengate import ModelError, analyse, load_models


def _closed_loop_eigenvalues(a, b, k):
    return np.sort_complex(np.linalg.eigvals(a - b @ k))


def test_a_stacked_grid_gives_one_model_per_point_with_its_matrices(tmp_path):
    path = stacked_repo(tmp_path)
    models = load_models(path)
    assert len(models) == len(SPEEDS) * len(LOADS)
    a, b, k = stacks()
    for model in models:
        coords = dict(model.grid)
        i, j = SPEEDS.index(coords["speed"]), LOADS.index(coords["load"])
        # reference library: numpy's eigenvalues of the closed loop A - B K formed by hand
        ref = _closed_loop_eigenvalues(a[i, j], b[i, j], k[i, j])
        got = [m.eigenvalue for m in analyse(model).modes]
        got = np.sort_complex(np.array(got + [z.conjugate() for z in got if z.imag > 0]))
        assert np.allclose(got, ref, atol=1e-12)
        # second-order standard form: ζ = (load + k2) / (2 √(speed + k1))
        assert analyse(model).min_damping == pytest.approx(
            expected_damping(coords["speed"], coords["load"]), rel=1e-9)


def test_points_come_in_axis_order_the_last_axis_fastest(tmp_path):
    models = load_models(stacked_repo(tmp_path))
    assert [m.point_id for m in models[:4]] == ["speed=1,load=0", "speed=1,load=0.5",
                                                "speed=1,load=1", "speed=2,load=0"]
    assert all(m.label == m.point_id and m.title == f"hoist[{m.point_id}]" for m in models)


def test_a_file_per_point_by_pattern_gives_the_same_models(tmp_path):
    stacked = load_models(stacked_repo(tmp_path / "a"))
    root = tmp_path / "b"
    (root / ".git").mkdir(parents=True)
    a, b, k = stacks()
    (root / "models" / "points").mkdir(parents=True)
    for i, s in enumerate(SPEEDS):
        for j, l in enumerate(LOADS):
            np.savetxt(root / "models" / "points" / f"A_{s:g}_{l:g}.csv", a[i, j], delimiter=",")
        # gains per speed only: a pattern may leave an axis out
        np.savez(root / "models" / "points" / f"K_{s:g}.npz", K=k[i, 0])
    np.savez(root / "models" / "b.npz", B=b)
    text = model_text("""\
        plant.A: {pattern: "points/A_{speed}_{load}.csv"}
        plant.B: {file: b.npz, key: B}
        feedback.state_gain: {pattern: "points/K_{speed}.npz", key: K}
        """)
    (root / "models" / "hoist.yaml").write_text(text, encoding="utf-8")
    by_pattern = load_models(root / "models" / "hoist.yaml")
    assert [m.point_id for m in by_pattern] == [m.point_id for m in stacked]
    for x, y in zip(by_pattern, stacked):
        assert np.array_equal(x.A, y.A)


def test_a_mat_stack_is_read_like_an_npz_one(tmp_path):
    npz = load_models(stacked_repo(tmp_path / "a"))
    root = tmp_path / "b"
    (root / ".git").mkdir(parents=True)
    (root / "models").mkdir()
    a, b, k = stacks()
    scipy.io.savemat(root / "models" / "grid.mat", {"A": a, "B": b, "K": k})
    (root / "models" / "hoist.yaml").write_text(model_text(STACKED.replace("npz", "mat")),
                                                encoding="utf-8")
    mat = load_models(root / "models" / "hoist.yaml")
    assert all(np.array_equal(x.A, y.A) for x, y in zip(mat, npz))


def test_identities_are_the_coordinates_and_do_not_depend_on_the_matrices(tmp_path):
    first = [m.point_id for m in load_models(stacked_repo(tmp_path / "a"))]
    retuned = [m.point_id for m in load_models(stacked_repo(tmp_path / "b",
                                                            retune=((1, 1), 0.2)))]
    assert first == retuned
    # integer values without a decimal point, others in their shortest exact form
    ids = [m.point_id for m in load_models(stacked_repo(tmp_path / "c", speeds=(2.0, 1e-05),
                                                        loads=(0.1,)))]
    assert ids == ["speed=2,load=0.1", "speed=1e-05,load=0.1"]


def test_a_region_overrides_requirements_inside_its_bounds_only(tmp_path):
    path = stacked_repo(tmp_path, regions="""\
        - name: fast
          where: {speed: {min: 3}}
          requirements: {min_damping: 0.4}
        - where: {speed: {min: 4, max: 4}, load: {max: 0}}
          requirements: {min_decay_rate: 0.1}
        """)
    for m in load_models(path):
        speed, load = dict(m.grid)["speed"], dict(m.grid)["load"]
        reqs = {r.rule: r for r in m.requirements}
        assert reqs["EG103"].zeta == (0.4 if speed >= 3 else 0.2)  # bounds inclusive
        assert ("EG102" in reqs) == (speed == 4 and load == 0)


@pytest.mark.parametrize("change, field, words", [
    (dict(axes="{speed: [1, 2, 3], load: [0, 0.5, 1]}"), "grid.matrices.plant.A",
     "is shaped 4×3×2×2 in 'models/grid.npz', but the grid speed (3) × load (3) needs 3×3"),
    (dict(axes="{speed: [1, 2, 2, 4], load: [0, 0.5, 1]}"), "grid.axes.speed",
     "lists the value 2 more than once"),
    (dict(axes="{}"), "grid.axes", "declares no scheduling variable"),
    (dict(regions="- where: {speed: {min: 9}}\n  requirements: {min_damping: 0.5}"),
     "grid.regions[0].where", "matches no grid point"),
    (dict(regions="- where: {height: {min: 1}}\n  requirements: {min_damping: 0.5}"),
     "grid.regions[0].where.height", "which is not a grid axis"),
    (dict(extra="operating_points: [{label: a}]\n"), "grid",
     "cannot be combined with operating_points"),
])
def test_bad_grids_are_clear_model_errors(tmp_path, change, field, words):
    with pytest.raises(ModelError) as err:
        load_models(stacked_repo(tmp_path, **change))
    assert err.value.field == field and words in err.value.problem
    assert err.value.source == "models/hoist.yaml"


def test_a_nan_in_a_stack_names_the_grid_point(tmp_path):
    path = stacked_repo(tmp_path)
    a, b, k = stacks()
    a[2, 1, 1, 0] = np.nan
    np.savez(path.parent / "grid.npz", A=a, B=b, K=k)
    with pytest.raises(ModelError) as err:
        load_models(path)
    assert err.value.field == "grid.matrices.plant.A"
    assert "nan" in err.value.problem and "grid point speed=3,load=0.5, entry [1, 0]" in \
        err.value.problem


def test_missing_pattern_files_are_listed_by_point(tmp_path):
    root = tmp_path
    (root / ".git").mkdir()
    (root / "models" / "p").mkdir(parents=True)
    a, b, k = stacks()
    for i, s in enumerate(SPEEDS):
        for j, l in enumerate(LOADS):
            if (i, j) not in ((1, 2), (3, 0)):
                np.savetxt(root / "models" / "p" / f"A_{s:g}_{l:g}.csv", a[i, j], delimiter=",")
    np.savez(root / "models" / "grid.npz", B=b, K=k)
    text = model_text("""\
        plant.A: {pattern: "p/A_{speed}_{load}.csv"}
        plant.B: {file: grid.npz, key: B}
        feedback.state_gain: {file: grid.npz, key: K}
        """)
    (root / "models" / "hoist.yaml").write_text(text, encoding="utf-8")
    with pytest.raises(ModelError) as err:
        load_models(root / "models" / "hoist.yaml")
    assert err.value.field == "grid.matrices"
    assert "for 2 grid points: speed=2,load=1 (models/p/A_2_1.csv); speed=4,load=0 " \
        "(models/p/A_4_0.csv)" in err.value.problem


@pytest.mark.parametrize("matrices, field, words", [
    ('plant.A: {pattern: "A_{height}.csv"}', "grid.matrices.plant.A.pattern",
     "placeholder {height}, which is not a grid axis"),
    ("plant.Q: {file: grid.npz, key: A}", "grid.matrices.plant.Q", "is not a matrix field"),
    ("plant.A: {file: grid.npz, key: A, pattern: x}", "grid.matrices.plant.A",
     "not both"),
    ("plant.A: {file: a.csv}", "grid.matrices.plant.A.file",
     "cannot hold this array"),
    ("plant.A: {file: ../../outside.npz, key: A}", "grid.matrices.plant.A.file",
     "points outside the repository"),
])
def test_bad_matrix_sources(tmp_path, matrices, field, words):
    path = stacked_repo(tmp_path / "repo")
    (path.parent / "a.csv").write_text("1, 0\n0, 1\n", encoding="utf-8")
    np.savez(tmp_path / "outside.npz", A=stacks()[0])
    path.write_text(model_text(matrices + "\nplant.B: {file: grid.npz, key: B}\n"
                               "feedback.state_gain: {file: grid.npz, key: K}"),
                    encoding="utf-8")
    with pytest.raises(ModelError) as err:
        load_models(path)
    assert err.value.field == field and words in err.value.problem


def test_a_grid_model_survives_the_result_cache(tmp_path):
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    path = stacked_repo(tmp_path)
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    config = load_config(start=tmp_path)
    cold = scan([path], config, jobs=1)
    warm = scan([path], config, jobs=1)
    assert warm.analysed == 0
    assert [r.model.grid for r in warm.files[0].results] == \
        [r.model.grid for r in cold.files[0].results]
    assert warm.files[0].grid == cold.files[0].grid
