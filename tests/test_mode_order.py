"""``modes.mode_order`` orders modes as sorting by ``modes.sort_key`` does, bit for bit.

The shortcut sorts by the real parts of s alone when rounding to 10 significant digits
cannot make two of them tie; the reference is Python's sort by the rounded keys themselves
(real part, imaginary part, leading state), on real parts that are equal, nearly equal at
every relative gap around the rounding's, signed zeros, subnormal, huge, infinite and NaN.
"""

import math

from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate.analysis import modes


_BASES = [0.0, -0.0, 1.0, -1.0, 0.3, -2.5e-3, 9.9999999995, 1e-310, -4e-320, 1e300,
          -1.6e308, 123456.789]  # beyond about 1.7e308 rounding overflows: sort_key's limit
_GAPS = [0.0, 1e-16, 1e-12, 1e-10, 4.9e-10, 5e-10, 1e-9, 2e-9, 3e-9, 1e-8, 1e-3, 1.0]


def _reals():
    # runs of values a relative gap apart around one base (ties after rounding, or not),
    # mixed with anything else, in any order
    run = st.tuples(st.sampled_from(_BASES), st.sampled_from(_GAPS), st.integers(1, 6)).map(
        lambda t: [t[0] * (1.0 + k * t[1]) if t[0] else k * t[1] * 1e-300
                   for k in range(-t[2] // 2, (t[2] + 1) // 2)])
    other = st.lists(st.floats(-1e307, 1e307) | st.floats(-10.0, 10.0)
                     | st.sampled_from([math.nan, math.inf, -math.inf]), max_size=4)
    return st.tuples(run, run, other).flatmap(
        lambda t: st.permutations(t[0] + t[1] + t[2]))


@settings(max_examples=1500, deadline=None)
@given(_reals(), st.data())
def test_mode_order_is_the_sort_by_rounded_keys(real, data):
    imag = data.draw(st.lists(st.sampled_from([0.0, 1.0, 1.0 + 1e-12, 2.0, 3.0]),
                              min_size=len(real), max_size=len(real)))
    tops = data.draw(st.lists(st.integers(0, 3), min_size=len(real), max_size=len(real)))
    rows = [{"s": complex(r, i)} for r, i in zip(real, imag)]

    def key(j):
        return modes.sort_key(rows[j], tops[j])

    expected = sorted(range(len(rows)), key=key)
    assert modes.mode_order([r["s"].real for r in rows], key) == expected
