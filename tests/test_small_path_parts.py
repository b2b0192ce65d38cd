"""The pieces of the small-model path give what the general pieces give, bit for bit.

``analysis.small_modes`` does the arithmetic of ``bounds.first_order`` and ``bounds.gershgorin``
on Python floats, ``bounds.touching_small`` the clustering sweep of ``bounds.touching``, and
``bounds.column_norms`` and ``small_modes._norm1`` the reductions of ``numpy.linalg.norm``
without its argument handling. The references are those general functions and numpy itself
(reference library), on random inputs with zeros, infinities, NaNs, ties and both memory
layouts; ``tests/test_modes_small_path.py`` checks the whole analysis. ``Model.with_fields``
copies a model's fields where ``dataclasses.replace`` (the reference) calls ``__init__``.
"""

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate.analysis import bounds, small_modes


def _same_list(fast, general) -> bool:
    """Equal floats, NaN equal to NaN, the same sign of zero."""
    if fast is None or general is None:
        return fast is None and general is None
    general = list(general)
    return len(fast) == len(general) and all(
        (math.isnan(a) and math.isnan(b)) or (a == b and math.copysign(1, a) == math.copysign(1, b))
        for a, b in zip(fast, general))


def _complex(rng, n, k, fortran):
    x = rng.normal(size=(n, k)) + 1j * rng.normal(size=(n, k))
    x *= 10.0 ** rng.integers(-3, 4, size=(1, k))
    return np.asfortranarray(x) if fortran else x


_cases = st.tuples(st.integers(1, 16), st.integers(0, 2**32 - 1), st.booleans())


@settings(max_examples=150, deadline=None)
@given(_cases, st.sampled_from(["none", "zero", "inf", "nan", "tiny"]))
def test_first_order_on_floats_matches_numpy(case, odd):
    n, seed, fortran = case
    rng = np.random.default_rng(seed)
    vr, vl, R = (_complex(rng, n, n, fortran) for _ in range(3))
    if rng.random() < 0.3:
        vr = vr.real.copy(order="F" if fortran else "C")  # all eigenvalues real
    dots = np.abs(rng.normal(size=n)) * 10.0 ** rng.integers(-5, 3, size=n)
    j = int(rng.integers(n))
    dots[j] = {"none": dots[j], "zero": 0.0, "inf": math.inf, "nan": math.nan,
               "tiny": 5e-324}[odd]
    absl = np.abs(rng.normal(size=n)) * 10.0 ** rng.integers(-2, 3, size=n)
    norm = float(rng.uniform(0.1, 100.0))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        bound, kappa = bounds.first_order(R, vr, vl, dots, absl, norm, 1.0)
        delta, kap = small_modes.first_order(
            *(bounds.column_norms(x).tolist() for x in (vr, vl, R)), dots.tolist(),
            absl.tolist(), n, norm)
    assert _same_list(delta, bound) and _same_list(kap, kappa)


@settings(max_examples=150, deadline=None)
@given(_cases, st.sampled_from([1e-12, 1e-6, 1e-2, 0.3, 3.0]), st.booleans())
def test_gershgorin_on_floats_matches_numpy(case, spread, huge):
    # near-orthogonal X (enclosures), ill-conditioned X (refused), overflowing residuals
    n, seed, fortran = case
    rng = np.random.default_rng(seed)
    vr = np.eye(n) + spread * _complex(rng, n, n, fortran)
    vl = np.linalg.inv(vr).conj().T + spread * 1e-3 * _complex(rng, n, n, False)
    vl = np.asfortranarray(vl) if fortran else vl
    R = 1e-14 * _complex(rng, n, n, fortran) * (1e300 if huge else 1.0)
    A = rng.normal(size=(n, n))
    lam = rng.normal(size=n) + 1j * rng.normal(size=n)
    dots = np.einsum("ij,ij->j", vl.conj(), vr)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        general = bounds.gershgorin(np.abs(A), np.abs(lam), vr, vl, R, dots)
        fast = small_modes.gershgorin(np.abs(A), np.abs(lam), vr, vl.conj(), R, dots)
    assert _same_list(fast, general)


def _points():
    def build(args):
        n, seed, grid = args
        rng = np.random.default_rng(seed)
        if grid:  # ties of real parts, touching discs, chains
            lam = rng.integers(-3, 4, size=n) * 0.5 + 1j * rng.integers(-2, 3, size=n) * 0.5
            radius = rng.choice([0.0, 0.125, 0.25, 0.5, math.inf], size=n)
        else:
            lam = rng.normal(size=n) + 1j * rng.normal(size=n)
            radius = np.abs(rng.normal(size=n)) * 10.0 ** float(rng.integers(-6, 1))
        return lam.astype(complex), radius
    return st.tuples(st.integers(0, 20), st.integers(0, 2**32 - 1), st.booleans()).map(build)


@settings(max_examples=200, deadline=None)
@given(_points(), st.sampled_from([1.0, bounds.TOUCH, 4.0]))
def test_touching_on_floats_matches_the_numpy_sweep(points, factor):
    lam, radius = points
    lams = lam.tolist()
    expected = bounds.touching(lam, radius, factor)
    assert bounds.touching_small(lams, radius.tolist(), factor) == expected
    sweep = bounds.sweep_order(lam.real.tolist())
    assert bounds.touching_small(lams, radius.tolist(), factor, sweep) == expected


@settings(max_examples=100, deadline=None)
@given(_cases, st.booleans())
def test_norms_match_numpy_linalg_norm(case, real):
    # reference: numpy.linalg.norm (axis=0; ord=1; "fro"), the same reductions
    n, seed, fortran = case
    rng = np.random.default_rng(seed)
    x = _complex(rng, n, n, fortran)
    x = x.real.copy(order="F" if fortran else "C") if real else x
    assert bounds.column_norms(x).tobytes() == np.linalg.norm(x, axis=0).tobytes()
    a = x.real.copy(order="F" if fortran else "C")
    assert small_modes._norm1(np.abs(a)) == float(np.linalg.norm(a, 1))
    flat = a.ravel(order="K")
    assert math.sqrt(flat.dot(flat)) == float(np.linalg.norm(a, "fro"))


@settings(max_examples=100, deadline=None)
@given(_cases)
def test_stacked_column_norms_match_numpy_linalg_norm(case):
    # reference: numpy.linalg.norm(axis=0) of the Fortran-ordered vl and vr; the small path
    # takes both in one reduction over the rows of the C-ordered stack they are views of
    n, seed, _ = case
    rng = np.random.default_rng(seed)
    both = np.array((_complex(rng, n, n, False), _complex(rng, n, n, False)))
    vl, vr = both[0].T, both[1].T
    assert vl.flags.f_contiguous and vr.flags.f_contiguous
    bothc = both.conj()
    stacked = np.sqrt(np.add.reduce((bothc * both).real, axis=(2,)))
    assert stacked[0].tobytes() == np.linalg.norm(vl, axis=0).tobytes()
    assert stacked[1].tobytes() == np.linalg.norm(vr, axis=0).tobytes()
    assert bothc[0].T.tobytes() == vl.conj().tobytes()
    assert bothc[0].T.strides == vl.conj().strides


def test_with_fields_is_dataclasses_replace():
    import dataclasses

    import pytest

    from eigengate import from_arrays
    from eigengate.model.core import Model

    model = from_arrays(np.diag([-1.0, -2.0]), name="plant", states=["x", "v"])
    changes = dict(requirements=(), disabled=("EG101",), on_uncertain="pass", require=None)
    fast, general = model.with_fields(**changes), dataclasses.replace(model, **changes)
    assert type(fast) is Model and fast is not model
    assert all(getattr(fast, f.name) is getattr(general, f.name)
               for f in dataclasses.fields(Model))
    assert model.disabled == () and model.on_uncertain is None  # the original is untouched
    with pytest.raises(TypeError):  # no such field: dataclasses.replace's own refusal
        model.with_fields(nonsense=1)

    @dataclasses.dataclass(frozen=True, eq=False)
    class Marked(Model):
        mark: int = 0

    marked = Marked(**{f.name: getattr(model, f.name) for f in dataclasses.fields(Model)})
    again = marked.with_fields(mark=3)
    assert type(again) is Marked and again.mark == 3 and again.A is model.A


_parts = st.sampled_from([0.0, -0.0, 1.0, -3.5, 1e-300, -5e-324, 1e300, 0.7, -2.0 ** 0.5])


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(_parts, _parts, _parts, _parts) | st.tuples(
    *(st.floats(-1e6, 1e6) for _ in range(4))), min_size=1, max_size=12))
def test_conjugate_quotient_is_the_quotient_of_conjugates(entries):
    # small_modes.gershgorin forms conj(vl)/d where bounds.gershgorin forms conj(vl/conj(d)):
    # numpy's complex quotient (reference library) gives the same values both ways, but for
    # the sign of an exact zero, which gershgorin reads only through |Y| and I − Y·X
    a = np.array([complex(x, y) for x, y, _, _ in entries])
    d = np.array([complex(u, v) for _, _, u, v in entries])
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        general = (a / d.conj()).conj()
        fast = a.conj() / d
    for part in ("real", "imag"):
        f, g = getattr(fast, part), getattr(general, part)
        assert np.array_equal(np.isnan(f), np.isnan(g))
        assert np.array_equal(f[~np.isnan(f)], g[~np.isnan(g)])  # -0.0 == 0.0
    assert np.abs(fast).tobytes() == np.abs(general).tobytes()
