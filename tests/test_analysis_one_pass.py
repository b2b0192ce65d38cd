"""The one-pass formulations of the analysis give the step-by-step ones' results, bit for bit.

Three shortcuts of a small model's analysis are checked against the general formulation
they replace, on generated matrices of many kinds (random, repeated and defective
eigenvalues, complex pairs near and on the imaginary axis, lightly damped pairs, zero
eigenvalues, 1×1 to 12×12, huge and tiny scales, continuous and discrete):

* ``modes._simple_modes`` (the modes of a spectrum with no cluster, built in one loop)
  against ``analyse``'s general loop over clusters (``_mode_fields`` and ``_mode``), which
  a spectrum takes when its labels are not the identity;
* the one-pass threshold and stability verdicts of ``rules.requirements`` against the
  definitions (the margins, ``min`` by ``(margin, index)``, the decision as the weakest of
  the rows' levels), on the modes of those spectra and on hand-made rows at the boundaries;
* ``scan.engine.analyse_model``'s equilibrium against ``rules.origin_requirements.origin``.

The references are the general paths of this package (common practice: a fast path is
checked against the path it shortcuts, every field compared, NaN equal to NaN and the
sign of zero included).
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate import from_arrays
from eigengate.analysis import modes
from eigengate.rules import requirements as rq
from eigengate.rules.origin_requirements import origin
from eigengate.scan.engine import analyse_model

from test_modes_small_path import _same


class _NotIdentity(list):
    """Labels that never compare equal to ``list(range(n))``: analyse then takes its
    general loop (clusters of one member each, component sizes counted)."""

    def __eq__(self, other):
        return False

    __hash__ = None


def _general_loop(model):
    touching = modes.touching_small
    with pytest.MonkeyPatch.context() as m:
        m.setattr(modes, "touching_small", lambda *a, **k: _NotIdentity(touching(*a, **k)))
        return modes.analyse(model)


def _record(mode) -> list:
    d = mode.__dict__
    return [list(d)] + [v.tobytes() if isinstance(v, np.ndarray) else v for v in d.values()]


def _rotation(re, im):
    return np.array([[re, im], [-im, re]])


def _build(args):
    n, seed, kind = args
    rng = np.random.default_rng(seed)
    if kind == 0:  # the usual stable model
        return rng.normal(size=(n, n)) - 1.5 * np.eye(n)
    if kind == 1:  # anything: unstable modes, saddles
        return rng.normal(size=(n, n))
    if kind == 2:  # repeated or defective real eigenvalues, zeros
        a = np.diag(rng.choice([-1.0, 0.0, 0.5], size=n))
        return a + np.diag(rng.choice([0.0, 1.0], size=n - 1), 1) if n > 1 else a
    if kind == 3:  # lightly damped, near-imaginary and imaginary pairs mixed with reals
        a, i = np.zeros((n, n)), 0
        while i < n:
            if i + 1 < n and rng.random() < 0.7:
                re = rng.choice([0.0, -1e-13, -1e-3, -0.049, -0.05, -1.0, 2e-3])
                a[i:i + 2, i:i + 2] = _rotation(re, rng.choice([1.0, 1.0 + 1e-9, 3.0]))
                i += 2
            else:
                a[i, i] = rng.choice([-2.0, 0.0, 1.0])
                i += 1
        q = np.linalg.qr(rng.normal(size=(n, n)))[0] if rng.random() < 0.5 else np.eye(n)
        return q @ a @ q.T
    if kind == 4:  # many scales (balancing), huge or tiny overall
        scale = 10.0 ** float(rng.choice([-100, -8, 0, 8, 100]))
        return rng.normal(size=(n, n)) * 10.0 ** rng.integers(-4, 5, size=(n, n)) * scale
    return rng.integers(-2, 3, size=(n, n)).astype(float)  # small integers: clusters


def _matrices():
    return st.tuples(st.integers(1, 12), st.integers(0, 2**32 - 1), st.integers(0, 5)).map(
        _build)


_REQUIREMENTS = (rq.Stability(), rq.Stability(allow_marginal=True), rq.MinDamping(0.05),
                 rq.MinDecayRate(0.1), rq.MaxFrequency(2.0),
                 rq.PoleRegion(alpha=0.01, zeta=0.05, omega=3.0))


def _models(a):
    yield from_arrays(a, requirements=_REQUIREMENTS)
    yield from_arrays(a / max(1.0, float(np.abs(a).max())), sample_period=0.1,
                      requirements=_REQUIREMENTS, on_uncertain="pass")


@settings(max_examples=300, deadline=None)
@given(_matrices())
def test_simple_modes_are_the_general_loops(a):
    for model in _models(a):
        fast, general = modes.analyse(model), _general_loop(model)
        assert len(fast.modes) == len(general.modes)
        for x, y in zip(fast.modes, general.modes):
            assert all(_same(p, q) for p, q in zip(_record(x), _record(y)))


# --- the verdicts: the definitions the one-pass loops replace ---------------------------

def _level(distance, u, c):
    d = abs(distance)
    return "certified" if d > c and d > u else "estimated" if d > u else "uncertain"


def _weakest(levels):
    levels = list(levels)
    for level in ("uncertain", "estimated"):
        if level in levels:
            return level
    return "certified"


def _threshold_reference(rows, threshold, at_least, on_uncertain):
    sign = 1.0 if at_least else -1.0
    margins = [(m, sign * (v - threshold), u, v, c) for m, v, u, c in rows]
    failing = [m for m, g, u, _, _ in margins if g < -u]
    unsure = [m for m, g, u, _, _ in margins if not g < -u and abs(g) <= u]
    worst = min(margins, key=lambda t: (t[1], t[0].index))
    if failing:
        decided = "certified" if any(_level(g, u, c) == "certified"
                                     for _, g, u, _, c in margins if g < -u) else "estimated"
    else:
        decided = _weakest({_level(g, u, c) for _, g, u, _, c in margins})
    passed = not failing and (not unsure or on_uncertain == "pass")
    offending = tuple(m for m, *_ in margins if m in failing or m in unsure)
    return (passed, bool(unsure), worst[3], worst[1], offending, decided)


def _stability_level(modes_):
    levels, exact = set(), False
    for m in modes_:
        re, u = m.s.real, m.uncertainty
        if not (re < -u or re > u) and re == 0.0:
            exact = True
            continue
        levels.add(_level(re, u, m.enclosure))
    return _weakest(levels | ({"estimated"} if exact else set()))


def _verdict_fields(v):
    return (v.passed, v.uncertain, v.measured, v.margin, v.offending, v.decided_by)


def _threshold_rows(req, spectrum_modes):
    captured = []
    with pytest.MonkeyPatch.context() as m:
        real = rq._threshold_verdict
        m.setattr(rq, "_threshold_verdict",
                  lambda r, rows, *a, **k: captured.append(rows) or real(r, rows, *a, **k))
        req.check(spectrum_modes, None, "fail")
    return captured[0]


@settings(max_examples=200, deadline=None)
@given(_matrices())
def test_one_pass_verdicts_are_the_definitions(a):
    for model in _models(a):
        spectrum = modes.analyse(model)
        ms = list(spectrum.modes)
        for req in _REQUIREMENTS[2:]:
            rows = _threshold_rows(req, ms)
            if not rows:
                continue
            for policy in ("fail", "pass"):
                at_least = not isinstance(req, rq.MaxFrequency)
                threshold = {rq.MinDamping: lambda r: r.zeta, rq.MinDecayRate: lambda r: r.alpha,
                             rq.MaxFrequency: lambda r: r.omega,
                             rq.PoleRegion: lambda r: 0.0}[type(req)](req)
                v = req.check(ms, spectrum, policy)
                expected = _threshold_reference(rows, threshold, at_least, policy)
                assert all(_same(x, y) if isinstance(x, float) else x == y
                           for x, y in zip(_verdict_fields(v), expected))
        for req in _REQUIREMENTS[:2]:
            v = req.check(ms, spectrum, "fail")
            unstable = [m for m in ms if m.s.real > m.uncertainty]
            exact_defective = [m for m in ms if m.s.real == 0.0 and m.defective]
            exact_simple = [m for m in ms if m.s.real == 0.0 and not m.defective
                            and not req.allow_marginal]
            if not (unstable or exact_defective or exact_simple):
                assert v.decided_by == _stability_level(ms)


_NAN, _INF = math.nan, math.inf


class _M:
    def __init__(self, index):
        self.index = index


@pytest.mark.parametrize("values", [
    [(1.0, 0.1, 0.2), (1.0, 0.1, 0.2), (0.5, 0.1, _INF)],  # equal margins: the lower index
    [(0.05, 0.0, 0.0), (0.049, 0.01, 0.001)],  # within the estimate, outside the enclosure
    [(_NAN, 0.1, 0.1), (0.2, 0.1, 0.1)],  # a NaN value: never failing, never decided
    [(0.2, 0.1, 0.1), (_NAN, 0.1, 0.1)],
    [(-1.0, 0.1, _INF), (-2.0, 3.0, 0.1), (0.06, 0.01, 0.005)],  # failing, unsure, passing
    [(0.1, _INF, _INF), (0.1, 0.0, _NAN)],
])
def test_threshold_verdict_at_the_boundaries(values):
    rows = [(_M(k), v, u, c) for k, (v, u, c) in enumerate(values)]
    for policy in ("fail", "pass"):
        for at_least in (True, False):
            v = rq._threshold_verdict(rq.MinDamping(0.05), rows, 0.05, at_least, "x", policy,
                                      empty="", suggest=str)
            expected = _threshold_reference(rows, 0.05, at_least, policy)
            assert all(_same(x, y) if isinstance(x, float) else x == y
                       for x, y in zip(_verdict_fields(v), expected))


@settings(max_examples=100, deadline=None)
@given(_matrices())
def test_analyse_model_equilibrium_is_origins(a):
    for model in _models(a):
        result = analyse_model(model)
        expected = origin(list(result.spectrum.modes), result.spectrum)[0]
        assert result.equilibrium.__dict__ == expected.__dict__
        assert list(result.__dict__) == ["model", "spectrum", "equilibrium", "verdicts",
                                         "findings", "waived", "used_waivers", "pictures"]
