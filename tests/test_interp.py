"""Monotone cubic interpolation used by smooth tabulated materials (filmstack._interp)."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.interpolate import PchipInterpolator

from filmstack._interp import pchip_eval, pchip_slopes


def _table(seed, n=25):
    rng = np.random.default_rng(seed)
    x = np.cumsum(rng.uniform(0.3, 4.0, n)) + 300.0
    y = rng.normal(size=n)
    return x, y


class TestPchip:
    def test_agrees_with_scipy_pchip(self):
        # scipy.interpolate.PchipInterpolator (Fritsch & Butland 1984 slopes), a general-purpose
        # reference implementation of the same method
        for seed in range(5):
            x, y = _table(seed)
            xq = np.linspace(x[0], x[-1], 2001)
            ref = PchipInterpolator(x, y)(xq)
            np.testing.assert_allclose(pchip_eval(x, y, pchip_slopes(x, y), xq), ref,
                                       rtol=0, atol=1e-13)

    def test_passes_through_the_rows(self):
        x, y = _table(7)
        np.testing.assert_allclose(pchip_eval(x, y, pchip_slopes(x, y), x), y, atol=1e-14)

    def test_first_derivative_is_continuous_at_the_rows(self):
        # the point of the smooth option: no kink at a row (linear interpolation has one)
        x, y = _table(3)
        m = pchip_slopes(x, y)
        eps = 1e-6
        left = (pchip_eval(x, y, m, x[1:-1]) - pchip_eval(x, y, m, x[1:-1] - eps)) / eps
        right = (pchip_eval(x, y, m, x[1:-1] + eps) - pchip_eval(x, y, m, x[1:-1])) / eps
        np.testing.assert_allclose(left, right, atol=1e-4 * np.abs(m).max())

    def test_two_rows_are_a_straight_line(self):
        x, y = np.array([400.0, 500.0]), np.array([1.5, 1.7])
        np.testing.assert_allclose(pchip_eval(x, y, pchip_slopes(x, y), [425.0, 450.0]),
                                   [1.55, 1.6], atol=1e-15)

    def test_outside_the_table_holds_the_end_values(self):
        x, y = _table(1)
        got = pchip_eval(x, y, pchip_slopes(x, y), [x[0] - 10, x[-1] + 10])
        np.testing.assert_allclose(got, [y[0], y[-1]])

    def test_keeps_the_query_shape(self):
        x, y = _table(2)
        q = np.full((2, 3, 4), x[5] + 0.1)
        assert pchip_eval(x, y, pchip_slopes(x, y), q).shape == (2, 3, 4)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(0.0, 5.0), min_size=3, max_size=30), st.integers(0, 2**31 - 1))
def test_never_overshoots_between_rows(values, seed):
    # between two rows the interpolant stays between their values (so a k column stays >= 0)
    rng = np.random.default_rng(seed)
    y = np.array(values)
    x = np.cumsum(rng.uniform(0.5, 5.0, y.size))
    m = pchip_slopes(x, y)
    t = np.linspace(0.0, 1.0, 21)[1:-1]
    for i in range(y.size - 1):
        v = pchip_eval(x, y, m, x[i] + t * (x[i + 1] - x[i]))
        lo, hi = min(y[i], y[i + 1]), max(y[i], y[i + 1])
        assert np.all(v >= lo - 1e-12) and np.all(v <= hi + 1e-12)
