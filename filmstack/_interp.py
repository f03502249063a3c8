"""Monotone piecewise-cubic (PCHIP) interpolation on arrays (private).

Used by tabulated materials that ask for a smooth interpolation: unlike linear interpolation,
the first derivative is continuous, so quantities that differentiate n(λ) — group delay and
group-delay dispersion — do not see a kink at every table row; unlike a cubic spline, it never
overshoots the data (between two rows the value stays between them, so k stays >= 0).

References: F. N. Fritsch & R. E. Carlson, SIAM J. Numer. Anal. 17, 238 (1980) (monotonicity
conditions); F. N. Fritsch & J. Butland, SIAM J. Sci. Stat. Comput. 5, 300 (1984) (the weighted
harmonic-mean slopes used here, as in common PCHIP implementations).
"""

from __future__ import annotations

import numpy as np

__all__ = ["pchip_slopes", "pchip_eval"]


def pchip_slopes(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Node slopes of the monotone cubic through (x, y).

    Parameters: x (N,) strictly increasing, y (N,) values, N >= 2. Returns slopes (N,).
    Interior slopes are the weighted harmonic mean of the neighbouring secant slopes (0 where
    they differ in sign or one is 0); end slopes use the three-point formula, limited to keep
    monotonicity (Fritsch & Butland 1984).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    h = np.diff(x)
    delta = np.diff(y) / h
    n = x.size
    m = np.zeros(n)
    if n == 2:
        m[:] = delta[0]
        return m
    w1 = 2.0 * h[1:] + h[:-1]
    w2 = h[1:] + 2.0 * h[:-1]
    d0, d1 = delta[:-1], delta[1:]
    same = (d0 * d1) > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        hm = (w1 + w2) / (w1 / d0 + w2 / d1)
    m[1:-1] = np.where(same, hm, 0.0)
    m[0] = _end_slope(h[0], h[1], delta[0], delta[1])
    m[-1] = _end_slope(h[-1], h[-2], delta[-1], delta[-2])
    return m


def _end_slope(h0, h1, d0, d1):
    s = ((2.0 * h0 + h1) * d0 - h0 * d1) / (h0 + h1)
    if np.sign(s) != np.sign(d0):
        return 0.0
    if np.sign(d0) != np.sign(d1) and abs(s) > abs(3.0 * d0):
        return 3.0 * d0
    return s


def pchip_eval(x: np.ndarray, y: np.ndarray, slopes: np.ndarray, xq) -> np.ndarray:
    """Evaluate the cubic Hermite interpolant at ``xq`` (any shape), ends held constant outside.

    Parameters: x (N,), y (N,), slopes (N,) from :func:`pchip_slopes`; xq query points.
    Returns an array of the shape of ``xq``.
    """
    xq = np.asarray(xq, dtype=float)
    xc = np.clip(xq, x[0], x[-1])
    i = np.clip(np.searchsorted(x, xc, side="right") - 1, 0, x.size - 2)
    h = x[i + 1] - x[i]
    t = (xc - x[i]) / h
    t2, t3 = t * t, t * t * t
    h00 = 2.0 * t3 - 3.0 * t2 + 1.0
    h10 = t3 - 2.0 * t2 + t
    h01 = -2.0 * t3 + 3.0 * t2
    h11 = t3 - t2
    return h00 * y[i] + h10 * h * slopes[i] + h01 * y[i + 1] + h11 * h * slopes[i + 1]
