"""Parameter ranges and the ``robust:`` requirement (EG113): exact boundaries for one parameter,
vertices, edges and a sampled interior for several, and the loader's checks of the
``parameters`` block.

Outside sources beside each check: the Routh–Hurwitz criterion for cubics (a3 = 1: stable iff
a2, a1, a0 > 0 and a2·a1 > a0; Routh 1877, Hurwitz 1895; any control textbook, e.g. Ogata,
*Modern Control Engineering*, ch. 5, from memory), the damping ratio of m x'' + c x' + k x = 0,
ζ = c / (2√(mk)) (same books), Jury's test for z² + a1 z + a0 (stable iff |a0| < 1 and
|a1| < 1 + a0; Jury 1964; a pair of complex roots has |z|² = a0), and the eigenvalue sums and
products of the bialternate sum and product (Fuller, J. Math. Anal. Appl. 1968).
"""

from __future__ import annotations

import json
import math
import textwrap
from pathlib import Path

import numpy as np
import pytest
from support import run_cli

from eigengate.analysis import parametric as pm
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.scan.engine import check_model


@pytest.fixture
def repo(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    return tmp_path


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def robust_verdict(path: Path):
    (model,) = load_models(path)
    result = check_model(model)
    (v,) = [v for v in result.verdicts if v.rule == "EG113"]
    return model, v


# ------------------------------------------------------------------ one parameter, exact

# Mass m = 1 with spring k and damper c, driven by a first-order actuator f' = −f + u, and
# state feedback u = −(g x + d v). States (x, v, f):
#   A_cl = [[0, 1, 0], [−k, −c, 1], [−g, −d, −1]],
#   det(sI − A_cl) = s³ + (c + 1) s² + (c + k + d) s + (k + g).
# Routh–Hurwitz: stable iff (c + 1)(c + k + d) > k + g (all coefficients positive here).
# In the damper c (d = 0): c² + (k + 1) c − g = 0 at the boundary, so
#   c* = (−(k + 1) + √((k + 1)² + 4g)) / 2;  k = 2, g = 12: c* = (−3 + √57)/2 ≈ 2.2749.
# In the velocity gain d: d* = (k + g)/(c + 1) − c − k;  c = 0.5, k = 2, g = 12: d* = 41/6.
MSD = """\
    model_format: 1
    name: mast-damper
    plant:
      states: [x, v, f]
      A: [[0, 1, 0], [-2, -{c}, 1], [0, 0, -1]]
      B: [[0], [0], [1]]
    feedback:
      state_gain: [[12, {d}, 0]]
    parameters:
      {name}:
        nominal: {nominal}
        range: [{lo}, {hi}]
        affects:
          {target}: {coeff}
    requirements:
      robust: {{{req}}}
    """


def msd_file(repo, *, param="damper", lo=1.0, hi=4.0, nominal=3.0, req="stable: true",
             c=3.0, d=0.0):
    if param == "damper":
        target, coeff = "plant.A", "[[0, 0, 0], [0, -1, 0], [0, 0, 0]]"
    else:
        target, coeff = "feedback.state_gain", "[[0, 1, 0]]"
    return write(repo, "msd.yaml", MSD.format(c=c, d=d, name=f"{param}_gain", nominal=nominal,
                                              lo=lo, hi=hi, target=target, coeff=coeff,
                                              req=req))


def test_the_damper_boundary_is_found_to_1e_10(repo):
    model, v = robust_verdict(msd_file(repo))
    exact = (-3 + math.sqrt(57)) / 2  # Routh–Hurwitz, derived above
    search = pm.search(model.parameters, [pm.Check(lambda lam: float(-lam.real.max()),
                                                   (pm.Boundary("abscissa", 0.0),))])
    (worst,) = search.worst
    assert [abs(c[0] - exact) < 1e-10 for c in worst.crossings] == [True]
    assert worst.proven and worst.margin < 0 and worst.at[0] < exact
    assert not v.passed and v.decided_by in ("certified", "estimated")
    assert "exact (guardian maps)" in v.message and "damper_gain=2.27491721" in v.message
    assert v.figure.name == "robust_margin" and v.figure.at_label == "damper_gain"
    assert v.figure.value < 0 and v.figure.lower == -math.inf


def test_a_range_inside_the_stable_side_passes_and_says_so(repo):
    exact = (-3 + math.sqrt(57)) / 2
    model, v = robust_verdict(msd_file(repo, lo=exact + 0.01, hi=4.0))
    assert v.passed and not v.uncertain
    assert v.decided_by == "estimated"  # never certified: floating-point boundaries
    assert "not proven" not in v.message and "exact" in v.message
    assert v.figure.lower == 0.0 and v.figure.value > 0
    # the worst point is the low end: the abscissa rises as c falls towards c* (Routh)
    assert abs(v.figure.at[0] - (exact + 0.01)) < 1e-6


def test_the_velocity_gain_boundary_through_the_feedback_block(repo):
    # d* = (k + g)/(c + 1) − c − k = 14/1.5 − 2.5 = 41/6 (Routh–Hurwitz, derived above)
    model, v = robust_verdict(msd_file(repo, param="velocity", lo=5.0, hi=8.0, nominal=7.0,
                                       c=0.5, d=7.0))
    (worst,) = pm.search(model.parameters, [pm.Check(lambda lam: float(-lam.real.max()),
                                                     (pm.Boundary("abscissa", 0.0),))]).worst
    assert len(worst.crossings) == 1 and abs(worst.crossings[0][0] - 41 / 6) < 1e-10
    assert not v.passed


def test_the_nominal_values_rebuild_the_nominal_model(repo):
    model, _ = robust_verdict(msd_file(repo))
    a, e = model.parameters.build(model.parameters.nominal)
    assert e is None and np.array_equal(a, model.A)
    a2, _ = model.parameters.build((2.0,))
    assert a2[1, 1] == -2.0 and a2[2, 0] == -12.0  # A − B K, K = [12, 0, 0]


#: m = 2, k = 8 (A = [[0, 1], [−k/m, −c/m]]), the damper c from the given low end to 5.
OSCILLATOR = """\
    model_format: 1
    plant:
      A: [[0, 1], [-4, -1.5]]
    parameters:
      damper: {nominal: 3.0, range: [%s, 5.0], affects: {plant.A: [[0, 0], [0, -0.5]]}}
    requirements:
      robust: {min_damping: 0.3}
"""


def test_a_damping_boundary_in_closed_form(repo):
    # m = 2, k = 8: ζ = c / (2√(mk)) = c/8 (second-order standard form), so ζ ≥ 0.3 needs
    # c ≥ 2.4; c in [1, 5]: worst at c = 1 with ζ = 0.125.
    path = write(repo, "osc.yaml", OSCILLATOR % 1.0)
    model, v = robust_verdict(path)
    (worst,) = pm.search(model.parameters, [pm.Check(
        lambda lam: float(min(-lam.real / abs(lam)) - 0.3), (pm.Boundary("sector", 0.3),),
        sample_unstable=True)]).worst
    assert len(worst.crossings) == 1 and abs(worst.crossings[0][0] - 2.4) < 1e-10
    assert not v.passed and abs(v.measured - 0.125) < 1e-12 and v.figure.at == (1.0,)
    assert abs(v.margin - (0.125 - 0.3)) < 1e-12


def test_a_frequency_boundary_in_closed_form(repo):
    # ωn² = k/m: with m = 1, k = 4 + p, max_frequency 3 needs k ≤ 9, so p ≤ 5 (same form)
    path = write(repo, "freq.yaml", """\
        model_format: 1
        plant:
          A: [[0, 1], [-4, -0.4]]
        parameters:
          stiffening: {nominal: 0.0, range: [0.0, 8.0], affects: {plant.A: [[0, 0], [-1, 0]]}}
        requirements:
          robust: {max_frequency: 3}
        """)
    model, v = robust_verdict(path)
    assert not v.passed and "stiffening=5 " in v.message + " "
    assert abs(v.measured - math.sqrt(12)) < 1e-10  # worst at p = 8: ωn = √12


def test_a_discrete_loop_and_its_decay_rate_circle(repo):
    # z² + 0.5 z + a0, a0 in [0.2, 1.3]: complex roots with |z|² = a0, so (Jury) unstable
    # for a0 ≥ 1 and |z| ≤ e^(−αT) (α = 1, T = 0.1) needs a0 ≤ e^(−0.2).
    path = write(repo, "disc.yaml", """\
        model_format: 1
        domain: discrete
        sample_period: 0.1
        plant:
          A: [[0, 1], [-0.5, -0.5]]
        parameters:
          a0: {nominal: 0.5, range: [0.2, 1.3], affects: {plant.A: [[0, 0], [-1, 0]]}}
        requirements:
          robust: {stable: true, min_decay_rate: 1.0}
        """)
    model, v = robust_verdict(path)
    stable, decay = pm.search(model.parameters, [
        pm.Check(lambda lam: float(1 - abs(lam).max()), (pm.Boundary("circle", 1.0),)),
        pm.Check(lambda lam: float(-np.log(abs(lam)).max() / 0.1 - 1.0),
                 (pm.Boundary("circle", math.exp(-0.1)),))]).worst
    assert [abs(c[0] - 1.0) < 1e-10 for c in stable.crossings] == [True]
    assert [abs(c[0] - math.exp(-0.2)) < 1e-10 for c in decay.crossings] == [True]
    assert not v.passed and "exact" in v.message


def test_discrete_damping_is_sampled_and_says_so(repo):
    path = write(repo, "disc.yaml", """\
        model_format: 1
        domain: discrete
        sample_period: 0.1
        plant:
          A: [[0, 1], [-0.5, -0.5]]
        parameters:
          a0: {nominal: 0.5, range: [0.3, 0.6], affects: {plant.A: [[0, 0], [-1, 0]]}}
        requirements:
          robust: {min_damping: 0.05}
        """)
    _, v = robust_verdict(path)
    assert v.passed and v.decided_by == "estimated"
    assert "sampled" in v.message and "not proven" in v.message
    assert v.figure.lower == -math.inf


# ------------------------------------------------------------------ polynomial and rational

def test_a_loop_polynomial_in_the_parameter(repo):
    # B = [0, q]ᵀ and K = [0, q − 2] both vary: A_cl = A − BK = [[0, 1], [−100, −0.5 −
    # q(q − 2)]], so s² + ((q − 1)² − 0.5) s + 100: unstable for |q − 1| < √0.5 (Routh,
    # second order: both coefficients positive).
    path = write(repo, "poly.yaml", """\
        model_format: 1
        plant:
          A: [[0, 1], [-100, -0.5]]
          B: [[0], [0.5]]
        feedback:
          state_gain: [[0, -1.5]]
        parameters:
          q:
            nominal: 0.5
            range: [0.0, 2.0]
            affects: {plant.B: [[0], [1]], feedback.state_gain: [[0, 1]]}
        requirements:
          robust: {stable: true}
        """)
    model, v = robust_verdict(path)
    (worst,) = pm.search(model.parameters, [pm.Check(lambda lam: float(-lam.real.max()),
                                                     (pm.Boundary("abscissa", 0.0),))]).worst
    found = sorted(c[0] for c in worst.crossings)
    assert len(found) == 2
    assert abs(found[0] - (1 - math.sqrt(0.5))) < 1e-10
    assert abs(found[1] - (1 + math.sqrt(0.5))) < 1e-10
    assert abs(worst.at[0] - 1.0) < 1e-6  # the most unstable point: Re s = 0.25 at q = 1
    assert not v.passed and "exact (guardian maps)" in v.message


def test_a_feedthrough_makes_the_loop_rational_and_the_range_sampled(repo):
    # u = −k y with y = x + u: A_cl = 0.5 − k/(1 + k), zero at k = 1 (algebra); not a
    # polynomial in k, so the interval is sampled and the crossing found by bracketing.
    path = write(repo, "rational.yaml", """\
        model_format: 1
        plant:
          A: [[0.5]]
          B: [[1]]
          C: [[1]]
          D: [[1]]
        feedback:
          output_gain: [[2.0]]
        parameters:
          k: {nominal: 2.0, range: [0.2, 3.0], affects: {feedback.output_gain: [[1]]}}
        requirements:
          robust: {stable: true}
        """)
    model, v = robust_verdict(path)
    (worst,) = pm.search(model.parameters, [pm.Check(lambda lam: float(-lam.real.max()),
                                                     (pm.Boundary("abscissa", 0.0),))]).worst
    assert [abs(c[0] - 1.0) < 1e-12 for c in worst.crossings] == [True]
    assert not v.passed and "sampled" in v.message and "exact" not in v.message
    assert pm.identify(lambda t: model.parameters.build((1.6 + 1.4 * t,))[0]) is None


# ------------------------------------------------------------------ several parameters

VERTEX = """\
    model_format: 1
    plant:
      A: [[-3, 1], [0, -5]]
    parameters:
      p1: {nominal: 0.0, range: [0.0, 1.0], affects: {plant.A: [[1, 0], [0, 0]]}}
      p2: {nominal: 0.0, range: [0.0, 1.5], affects: {plant.A: [[1, 0], [0, 0]]}}
    requirements:
      robust: {min_decay_rate: %s}
    """


def test_two_parameters_worst_at_a_vertex(repo):
    # eigenvalues −3 + p1 + p2 and −5 (triangular): slowest decay 0.5 at the vertex (1, 1.5)
    _, v = robust_verdict(write(repo, "v.yaml", VERTEX % 0.4))
    assert v.passed and v.decided_by == "estimated"
    assert v.figure.at == (1.0, 1.5) and abs(v.figure.value - 0.1) < 1e-12
    assert "4 vertices and 4 edges: exact" in v.message
    assert "interior: sampled" in v.message and "not proven" in v.message
    _, v = robust_verdict(write(repo, "v.yaml", VERTEX % 0.6))
    assert not v.passed and v.figure.at == (1.0, 1.5) and abs(v.margin + 0.1) < 1e-12


INTERIOR = """\
    model_format: 1
    plant:
      A: [[0, 1], [-100, -3]]
      B: [[0, 0], [1, 1]]
    feedback:
      state_gain: [[0, -1], [0, -1]]
    parameters:
      q1:
        nominal: 1.0
        range: [0.0, 2.0]
        affects: {plant.B: [[0, 0], [1, 0]], feedback.state_gain: [[0, 1], [0, 0]]}
      q2:
        nominal: 1.0
        range: [0.0, 2.0]
        affects: {plant.B: [[0, 0], [0, 1]], feedback.state_gain: [[0, 0], [0, 1]]}
    %s
    requirements:
      robust: {min_decay_rate: %s}
    """


def test_two_parameters_worst_inside_the_box_is_sampled(repo):
    # Inputs b_i = q_i with gains q_i − 2 (u = −Kx): damping term 3 + q1(q1 − 2) +
    # q2(q2 − 2) = 1 + (q1 − 1)² + (q2 − 1)², so the slowest decay (Re s = −c/2, ωn = 10 underdamped)
    # is 0.5 at (1, 1), inside the box; on the edges it is at least 1.0 (algebra).
    _, v = robust_verdict(write(repo, "i.yaml", INTERIOR % ("", 0.45)))
    assert v.passed and v.decided_by == "estimated" and "not proven" in v.message
    assert np.allclose(v.figure.at, (1.0, 1.0), atol=1e-5)
    assert abs(v.figure.value - 0.05) < 1e-9
    _, v = robust_verdict(write(repo, "i.yaml", INTERIOR % ("", 0.6)))
    assert not v.passed and np.allclose(v.figure.at, (1.0, 1.0), atol=1e-5)
    assert "interior: sampled" in v.message
    # a pass that rests on sampling is not enough where verdicts must be certified
    _, v = robust_verdict(write(repo, "i.yaml", INTERIOR % ("require: certified", 0.45)))
    assert not v.passed and v.uncertain and v.decided_by == "uncertain"


def test_operating_points_take_the_file_level_parameters(repo):
    path = write(repo, "points.yaml", OSCILLATOR % 2.5 + """\
    operating_points:
      - {label: stiff, plant: {A: [[0, 1], [-4, -1.5]]}}
      - {label: soft, plant: {A: [[0, 1], [-1, -1.5]]}}
    """)
    stiff, soft = load_models(path)
    assert stiff.parameters.names == soft.parameters.names == ("damper",)
    assert soft.parameters.build((3.0,))[0][1, 0] == -1.0
    # ζ = c/(2√(m k)): stiff (m 2, k 8) c ≥ 2.5 gives ζ ≥ 0.3125; soft (k 2) ζ = c/4 ≥ 0.625
    assert all(v.passed for m in (stiff, soft) for v in check_model(m).verdicts)


def test_the_cache_round_trip_keeps_the_verdict_and_its_figure(repo):
    from eigengate.scan.serial import results_from_data, results_to_data

    model, _ = robust_verdict(msd_file(repo))
    result = check_model(model)
    data, blobs = results_to_data(model.source, [result], None)
    _, (back,), _ = results_from_data(json.loads(json.dumps(data)), blobs)
    (before,) = [v for v in result.verdicts if v.rule == "EG113"]
    (after,) = [v for v in back.verdicts if v.rule == "EG113"]
    assert after.figure == before.figure and after.message == before.message
    assert back.model.requirements == model.requirements


# ------------------------------------------------------------------ guardian matrices

def test_bialternate_sum_and_product_eigenvalues():
    # Fuller 1968: eig(2A ⊙ I) = {λi + λj}, eig(A ⊙ A) = {λi λj}, i < j
    a = np.random.default_rng(7).normal(size=(6, 6))
    lam = np.linalg.eigvals(a)
    i, j = np.triu_indices(6, 1)
    for got, want in ((pm.bialternate_sum(a), lam[i] + lam[j]),
                      (pm.bialternate_product(a, a), lam[i] * lam[j])):
        g = np.linalg.eigvals(got)
        assert max(min(abs(g - w)) for w in want) < 1e-12
        assert max(min(abs(want - x)) for x in g) < 1e-12


def test_a_singular_guardian_falls_back_to_sampling():
    # an integrator fixed at 0 in every model of the family: det A(p) ≡ 0
    assert pm.real_roots([np.array([[0.0, 1.0], [0.0, -1.0]]),
                          np.array([[0.0, 0.0], [0.0, 1.0]])]) is None


# ------------------------------------------------------------------ bad input

BAD_BASE = ("model_format: 1\nplant:\n  A: [[0, 1], [-4, -1.5]]\n  B: [[0], [1]]\n"
            "parameters:\n  damper:\n%s\nrequirements:\n  robust: {stable: true}\n")


@pytest.mark.parametrize("block, field, words", [
    ("    nominal: 3\n    range: [1, 5]\n    affects: {plant.F: [[0, 0], [0, 1]]}",
     "parameters.damper.affects.plant.F", "did you mean 'plant.E'"),
    ("    nominal: 3\n    range: [1, 5]\n    affects: {plant.A: [[0, 1]]}",
     "parameters.damper.affects.plant.A", "must be 2×2 like plant.A, got 1×2"),
    ("    nominal: 6\n    range: [1, 5]\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.nominal", "outside its range [1, 5]"),
    ("    nominal: 3\n    range: [5, 1]\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.range", "low < high"),
    ("    nominal: 3\n    range: [3, 3]\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.range", "low < high"),
    ("    nominal: 3\n    range: [1, 3, 5]\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.range", "must be [low, high]"),
    ("    nominal: 3\n    range: '1..5'\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.range", "must be [low, high]"),
    ("    nominal: .nan\n    range: [1, 5]\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.nominal", "finite number"),
    ("    nominal: 3\n    range: [1, .inf]\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.range", "finite number"),
    ("    nominal: 3\n    range: [1, 5]\n    affects: {plant.A: [[0, 0], [0, .inf]]}",
     "parameters.damper.affects.plant.A", "finite numbers"),
    ("    nominal: true\n    range: [1, 5]\n    affects: {plant.A: [[0, 0], [0, 1]]}",
     "parameters.damper.nominal", "finite number"),
    ("    nominal: 3\n    range: [1, 5]\n    affects: {plant.A: [[0, 0], [0, 1]]}\n"
     "    spread: 2", "parameters.damper.spread", "is not a field of a parameter"),
    ("    nominal: 3\n    range: [1, 5]", "parameters.damper.affects", "is missing"),
    ("    nominal: 3\n    range: [1, 5]\n    affects: {}", "parameters.damper.affects",
     "changes no matrix"),
    ("    nominal: 3\n    range: [1, 5]\n    affects: {feedback.state_gain: [[1, 0]]}",
     "parameters.damper.affects.feedback.state_gain", "which the model does not give"),
    ("    [1, 2]", "parameters.damper", "must be a mapping"),
])
def test_bad_parameter_blocks_are_refused(repo, block, field, words):
    path = repo / "bad.yaml"
    path.write_text(BAD_BASE % block, encoding="utf-8")
    with pytest.raises(ModelError) as info:
        load_models(path)
    err = info.value
    assert err.source == "bad.yaml" and err.field == field, str(err)
    assert words in str(err), str(err)
    assert err.line is not None


@pytest.mark.parametrize("text, field, words", [
    ("plant: {A: [[-1]]}\nrequirements:\n  robust: {stable: true}\n",
     "requirements.robust", "no parameters block"),
    ("plant: {A: [[-1]]}\nparameters:\n  p: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\nrequirements:\n  robust: {min_gain_margin_db: 6}\n",
     "requirements.robust.min_gain_margin_db", "is not evaluated over a parameter range"),
    ("plant: {A: [[-1]]}\nparameters:\n  p: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\nrequirements:\n  robust: {robust: {stable: true}}\n",
     "requirements.robust.robust", "is not evaluated over a parameter range"),
    ("plant: {A: [[-1]]}\nparameters:\n  p: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\nrequirements:\n  robust: {stabel: true}\n",
     "requirements.robust.stabel", "is not a known field"),
    ("plant: {A: [[-1]]}\nparameters:\n  p: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\nrequirements:\n  robust: {stable: false}\n",
     "requirements.robust", "must set at least one of"),
    ("plant: {A: [[-1]]}\nparameters:\n  p: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\nrequirements:\n  robust: {stable: true, samples: 1}\n",
     "requirements.robust.samples", "whole number from 2 to 101"),
    ("plant: {A: [[-1]]}\nparameters:\n  p: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\nrequirements:\n  robust: true\n",
     "requirements.robust", "must be a mapping"),
    ("plant: {A: [[-1]]}\nparameters: {}\n", "parameters", "declares no parameter"),
    ("plant: {A: [[-1]]}\nparameters:\n" + "".join(
        f"  p{i}: {{nominal: 0, range: [0, 1], affects: {{plant.A: [[1]]}}}}\n"
        for i in range(7)), "parameters", "more than the limit of 6"),
    ("plant: {A: [[-1]]}\nparameters:\n  7: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\n", "parameters", "not a string"),  # the reader refuses it
    ("plant: {num: [1], den: [1, 1]}\nparameters:\n  p: {nominal: 0, range: [0, 1], "
     "affects: {plant.A: [[1]]}}\n", "parameters.p.affects.plant.A",
     "which the model does not give"),
    ("plant: {A: [[-1]]}\nparameters:\n  p: {nominal: 0, range: [0, 1], affects: "
     "{plant.A: [[1]]}}\nknown_modes: [{eigenvalue: -1}]\nrequirements:\n"
     "  robust: {stable: true}\n", "requirements.robust", "known_modes"),
    ("plant: {A: [[-1]]}\noperating_points:\n  - label: a\n    parameters: {}\n",
     "operating_points[0] (label 'a').parameters", "is not a field of an operating point"),
])
def test_bad_robust_and_parameter_uses_are_refused(repo, text, field, words):
    path = write(repo, "bad.yaml", "model_format: 1\n" + text)
    with pytest.raises(ModelError) as info:
        load_models(path)
    err = info.value
    assert err.field == field and words in str(err), str(err)


def test_parameters_with_a_vector_field_are_refused(repo):
    path = write(repo, "vf.yaml", """\
        model_format: 1
        vector_field: {function: "dyn:f", states: [x]}
        parameters:
          p: {nominal: 0, range: [0, 1], affects: {plant.A: [[1]]}}
        """)
    with pytest.raises(ModelError) as info:
        load_models(path)
    assert info.value.field == "parameters" and "vector_field" in str(info.value)


# ------------------------------------------------------------------ command line

CLI_MODEL = """\
    model_format: 1
    name: mast-damper
    plant:
      states: [x, v, f]
      A: [[0, 1, 0], [-2, -0.5, 1], [0, 0, -1]]
      B: [[0], [0], [1]]
    feedback:
      state_gain: [[12, 7.0, 0]]
    parameters:
      damper_gain:
        nominal: 7.0
        range: [5.0, 8.0]
        affects:
          feedback.state_gain: {file: gain_effect.csv}
    requirements:
      stable: true
      robust: {stable: true}
    """


def test_the_command_line_end_to_end_with_a_matrix_file(repo):
    (repo / "models").mkdir()
    write(repo, "models/mast.yaml", CLI_MODEL)
    effect = repo / "models" / "gain_effect.csv"
    effect.write_text("0,1,0\n", encoding="utf-8")
    first = run_cli("check", "models", cwd=repo)
    assert first.returncode == 1, first.stdout + first.stderr
    assert "EG113" in first.stdout and "damper_gain=6.833333333" in first.stdout  # 41/6
    assert "exact (guardian maps)" in first.stdout
    again = run_cli("check", "models", cwd=repo)  # from the cache: the same bytes
    assert again.stdout == first.stdout
    # the cache key covers the referenced matrix file: a change is seen
    effect.write_text("0,0,0\n", encoding="utf-8")  # the gain no longer varies
    third = run_cli("check", "models", cwd=repo)
    assert third.returncode == 0, third.stdout + third.stderr


def test_the_documented_example_loads_and_finds_its_edge_boundaries(repo):
    # docs/parameter-ranges.md: the loop above with k = mast_stiffness; on the edges k = 1.5
    # and k = 2.5 the velocity-gain boundary d* = (k + 12)/1.5 − 0.5 − k is 7 and 20/3
    # (Routh–Hurwitz, derived above); along d = 5 the loop is unstable throughout, along
    # d = 8 stable throughout.
    import re

    text = (Path(__file__).parents[2] / "docs" / "parameter-ranges.md").read_text("utf-8")
    body = re.findall(r"```yaml\n(.*?)```", text, re.S)[0]
    _, v = robust_verdict(write(repo, "doc.yaml", body))
    assert not v.passed and "4 vertices and 4 edges: exact" in v.message
    assert "damper_gain=7, mast_stiffness=1.5" in v.message
    assert "damper_gain=6.666666667, mast_stiffness=2.5" in v.message


def test_low_rank_factors_of_the_guardian_matrices():
    # the bialternate sum and the Kronecker sum are linear in A, so a rank-2 A gives factors
    # of width 2n and 4n that reproduce them (algebra; checked against the dense matrices)
    from eigengate.analysis import guardians as g

    rng = np.random.default_rng(3)
    a = sum(np.outer(rng.normal(size=6), rng.normal(size=6)) for _ in range(2))
    left, right = g.bialternate_sum_factor(a)
    assert left.shape == (15, 12) and np.abs(left @ right - g.bialternate_sum(a)).max() < 1e-13
    c = np.exp(0.3j)
    left, right = g.kronecker_sum_factor(a, c)
    dense = np.kron(c * a, np.eye(6)) + np.kron(np.eye(6), np.conj(c) * a)
    assert left.shape == (36, 24) and np.abs(left @ right - dense).max() < 1e-13


def test_a_descriptor_model_is_sampled_and_its_crossing_found(repo):
    # E x' = A x with E = diag(1, 0): the algebraic row gives x2 = x1, so x1' = (1 − p) x1,
    # one finite eigenvalue 1 − p (algebra): unstable for p < 1.
    path = write(repo, "desc.yaml", """\
        model_format: 1
        plant:
          A: [[-1.5, 1], [1, -1]]
          E: [[1, 0], [0, 0]]
        parameters:
          p: {nominal: 1.5, range: [0.5, 2.0], affects: {plant.A: [[-1, 0], [0, 0]]}}
        requirements:
          robust: {stable: true}
        """)
    model, v = robust_verdict(path)
    assert model.parameters.descriptor
    (worst,) = pm.search(model.parameters, [pm.Check(lambda lam: float(-lam.real.max()),
                                                     (pm.Boundary("abscissa", 0.0),))]).worst
    assert [abs(c[0] - 1.0) < 1e-12 for c in worst.crossings] == [True]
    assert not v.passed and "sampled" in v.message and abs(v.figure.at[0] - 0.5) < 1e-9
