"""Mode matching on hand-built spectra whose right assignment is known."""

import itertools
import math
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate import from_arrays
from eigengate.analysis.matching import DEFAULT_GATE, FLOOR_FRACTION, match_modes, scaled_distance
from eigengate.analysis.modes import analyse


def mode(re, im=0.0, mult=1):
    return SimpleNamespace(s=complex(re, im), pair=im != 0, multiplicity=mult)


def spectrum(*modes):
    return list(modes)


def pairs(matches):
    """(before index, after index) of every match, None for appeared/disappeared."""
    return sorted(((m.before_index, m.after_index) for m in matches),
                  key=lambda p: (p[0] is None, p[0] or 0, p[1] is None, p[1] or 0))


def floor_of(before, after):
    return FLOOR_FRACTION * max(abs(m.s) for m in before + after)


def total(before, after, matches, gate=DEFAULT_GATE):
    floor = floor_of(before, after)
    cost = 0.0
    for m in matches:
        if m.before is None or m.after is None:
            cost += gate / 2 * m.count
        else:
            cost += scaled_distance(m.before.s, m.after.s, floor) * m.count
    return cost


def brute_force(before, after, gate=DEFAULT_GATE):
    """Reference: the cheapest partial matching by enumerating every injection (unmatched
    modes cost gate/2 each, matches above the gate are not allowed)."""
    floor = floor_of(before, after)
    n, m = len(before), len(after)
    best = math.inf
    for k in range(0, min(n, m) + 1):
        for rows in itertools.combinations(range(n), k):
            for cols in itertools.permutations(range(m), k):
                d = [scaled_distance(before[i].s, after[j].s, floor) for i, j in zip(rows, cols)]
                if any(x > gate for x in d):
                    continue
                best = min(best, sum(d) + gate / 2 * (n + m - 2 * k))
    return best


def test_identical_spectra_match_one_to_one():
    a = spectrum(mode(-0.5, 2.0), mode(-1.0), mode(-3.0, 0.5))
    got = match_modes(a, a)
    assert pairs(got) == [(0, 0), (1, 1), (2, 2)]
    assert all(m.distance == 0.0 and m.kind == "matched" for m in got)


def test_near_coincident_eigenvalues_both_moving():
    # -1.0 and -1.001 each move by a few 1e-4: each must keep its own identity
    # (known assignment by construction: every other pairing moves farther).
    before = spectrum(mode(-1.0), mode(-1.001), mode(-20.0))
    after = spectrum(mode(-20.0), mode(-1.0013), mode(-0.9996))
    assert pairs(match_modes(before, after)) == [(0, 2), (1, 1), (2, 0)]


def test_conjugate_pairs_stay_together():
    before = spectrum(mode(-0.5, 2.0), mode(-0.5, 3.0))
    # the solver may see the lower members; a pair is one unit represented by its upper one
    after = spectrum(mode(-0.55, -2.9), mode(-0.45, 2.1))
    got = match_modes(before, after)
    assert pairs(got) == [(0, 1), (1, 0)]
    assert all(m.count == 1 for m in got)


def test_greedy_nearest_is_wrong_optimal_assignment_is_right():
    before = spectrum(mode(-2.0), mode(-3.0))
    after = spectrum(mode(-2.4), mode(-1.0))
    floor = floor_of(before, after)
    # greedy: take the globally closest pair first, then what is left
    d = {(i, j): scaled_distance(before[i].s, after[j].s, floor) for i in range(2)
         for j in range(2)}
    first = min(d, key=d.get)
    rest = (1 - first[0], 1 - first[1])
    greedy = d[first] + d[rest]
    got = match_modes(before, after)
    assert first == (0, 0) and pairs(got) == [(0, 1), (1, 0)]
    assert total(before, after, got) < greedy
    assert total(before, after, got) == pytest.approx(brute_force(before, after))


def test_added_state_appears():
    before = spectrum(mode(-1.0), mode(-5.0, 2.0))
    after = spectrum(mode(-1.05), mode(-5.0, 2.0), mode(-20.0))
    got = match_modes(before, after)
    assert pairs(got) == [(0, 0), (1, 1), (None, 2)]
    assert got[-1].kind == "appeared" and got[-1].before is None


def test_removed_state_disappears():
    before = spectrum(mode(-1.0), mode(-5.0, 2.0), mode(-20.0))
    after = spectrum(mode(-5.1, 2.0), mode(-0.98))
    got = match_modes(before, after)
    assert pairs(got) == [(0, 1), (1, 0), (2, None)]
    assert [m.kind for m in got].count("disappeared") == 1


def test_multiplicity_splits_into_two_matches():
    before = spectrum(mode(-1.0, mult=2), mode(-9.0))
    after = spectrum(mode(-0.98), mode(-1.02), mode(-9.0))
    got = match_modes(before, after)
    assert pairs(got) == [(0, 0), (0, 1), (1, 2)]
    assert sum(m.count for m in got if m.before_index == 0) == 2


def test_multiplicity_rise_leaves_one_unit_appeared():
    got = match_modes(spectrum(mode(-1.0)), spectrum(mode(-1.0, mult=2)))
    assert [(m.kind, m.count) for m in got] == [("matched", 1), ("appeared", 1)]


def test_gate_splits_a_far_move_into_disappeared_and_appeared():
    before, after = spectrum(mode(-1.0)), spectrum(mode(1.0))
    # scaled distance |(-1) - 1| / 1 = 2 > gate
    assert pairs(match_modes(before, after)) == [(0, None), (None, 0)]
    assert pairs(match_modes(before, after, gate=2.5)) == [(0, 0)]


def test_slow_mode_crossing_the_axis_is_still_the_same_mode():
    # the floor (5 % of the largest |s|) keeps slow modes comparable in absolute terms
    before = spectrum(mode(-0.1), mode(-10.0))
    after = spectrum(mode(-10.0), mode(0.1))
    assert pairs(match_modes(before, after)) == [(0, 1), (1, 0)]


def test_pair_turning_into_two_real_modes():
    # zeta 0.2, wn 2 becomes two real poles with the same product wn^2 = 4: the pair matches
    # the real mode nearest to it, the other is new
    before = spectrum(mode(-0.4, math.sqrt(4 - 0.16)))
    after = spectrum(mode(-1.0), mode(-4.0))
    got = match_modes(before, after)
    assert [m.kind for m in got] == ["matched", "appeared"]


def test_empty_sides():
    assert match_modes([], []) == []
    assert [m.kind for m in match_modes([mode(-1.0)], [])] == ["disappeared"]
    assert [m.kind for m in match_modes([], [mode(-1.0)])] == ["appeared"]


def test_scaled_distance_cases():
    assert scaled_distance(-1 + 0j, -1.1 + 0j, 0.01) == pytest.approx(0.1 / 1.1)
    assert scaled_distance(complex(-math.inf, 0), complex(-math.inf, 0), 1.0) == 0.0
    assert scaled_distance(complex(-math.inf, 0), -1 + 0j, 1.0) == math.inf
    assert scaled_distance(1e-9 + 0j, -1e-9 + 0j, 0.5) == pytest.approx(4e-9)


def test_discrete_models_match_in_the_s_plane():
    # z = e^{sT} (exact zero-order-hold pole mapping): poles at z = 0.9, 0.5 and a deadbeat
    # pole; the retune moves 0.9 to 0.92 and 0.5 to 0.45.
    T = 0.1

    def modes_of(zs):
        n = len(zs)
        m = from_arrays(np.diag(zs), np.zeros((n, 1)), np.zeros((1, n)), np.zeros((1, 1)),
                        sample_period=T)
        return list(analyse(m).modes)

    before, after = modes_of([0.9, 0.5, 0.0]), modes_of([0.0, 0.45, 0.92])
    for m in before + after:
        if m.eigenvalue != 0:
            assert m.s.real == pytest.approx(math.log(m.eigenvalue.real) / T)
    got = {(before[m.before_index].eigenvalue.real, after[m.after_index].eigenvalue.real)
           for m in match_modes(before, after)}
    assert got == {(0.9, 0.92), (0.5, 0.45), (0.0, 0.0)}


def test_matching_is_symmetric():
    a = spectrum(mode(-0.3, 1.0), mode(-1.0), mode(-2.5))
    b = spectrum(mode(-2.2), mode(-0.35, 1.1), mode(-0.8))
    ab = {(m.before_index, m.after_index) for m in match_modes(a, b)}
    ba = {(m.after_index, m.before_index) for m in match_modes(b, a)}
    assert ab == ba


eigs = st.tuples(st.floats(-10, 2), st.sampled_from([0.0, 0.0, 0.5, 1.0, 3.0])).map(
    lambda t: mode(round(t[0], 3), t[1]))


@settings(max_examples=150, deadline=None)
@given(st.lists(eigs, min_size=0, max_size=4), st.lists(eigs, min_size=0, max_size=4),
       st.sampled_from([0.3, 1.0, DEFAULT_GATE]))
def test_assignment_is_optimal_against_brute_force(before, after, gate):
    # assignment optimality: brute force over every partial injection as the reference
    if not before or not after or max(abs(m.s) for m in before + after) == 0:
        return
    got = match_modes(before, after, gate=gate)
    assert sum(m.count for m in got if m.before is not None) == len(before)
    assert sum(m.count for m in got if m.after is not None) == len(after)
    assert total(before, after, got, gate) == pytest.approx(brute_force(before, after, gate),
                                                            abs=1e-9)


_finite = st.floats(-1e6, 1e6, allow_nan=False)
_eigenvalue = st.one_of(st.builds(complex, _finite, _finite), st.sampled_from(
    [0j, complex(-2.0, 0.0), complex(math.inf, 0.0), complex(-math.inf, 0.0)]))


@settings(max_examples=200, deadline=None)
@given(st.lists(_eigenvalue, min_size=1, max_size=8), st.lists(_eigenvalue, min_size=1,
                                                              max_size=8),
       st.floats(1e-300, 10.0))
def test_the_distance_matrix_is_the_scalar_distance_to_the_last_bit(before, after, floor):
    # Exact ties decide assignments, so the matrix used for matching must agree bit for bit
    # with scaled_distance (Python's abs of a complex number is hypot of its parts).
    from eigengate.analysis.matching import _distances

    matrix = _distances(np.array(before), np.array(after), floor)
    for i, b in enumerate(before):
        for j, a in enumerate(after):
            assert matrix[i, j] == scaled_distance(b, a, floor) or (
                math.isnan(matrix[i, j]) and math.isnan(scaled_distance(b, a, floor)))
