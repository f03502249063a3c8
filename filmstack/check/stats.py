"""Statistics of the yield estimate: binomial confidence intervals.

The yield of a Monte Carlo run is the fraction k/n of trials that pass every requirement. Its
confidence interval is the exact (Clopper–Pearson) binomial interval: the set of true pass
probabilities p for which the observed k is not in either tail of probability (1 − c)/2,

.. math::  p_lo = B^{-1}((1-c)/2;\\, k,\\, n-k+1),\\qquad p_hi = B^{-1}((1+c)/2;\\, k+1,\\, n-k)

with B^{-1} the inverse of the regularised incomplete beta function (p_lo = 0 for k = 0,
p_hi = 1 for k = n). It is conservative (coverage ≥ c for every p) and well defined at yields of
0 and 1, where the normal approximation fails. The Wilson score interval is also given for
comparison.

References: C. J. Clopper and E. S. Pearson, Biometrika 26, 404–413 (1934);
E. B. Wilson, J. Am. Stat. Assoc. 22, 209–212 (1927); A. Agresti and B. A. Coull,
Am. Stat. 52, 119–126 (1998).
"""

from __future__ import annotations

import math

__all__ = ["clopper_pearson", "wilson"]


def _check(k, n, confidence):
    if not (isinstance(n, int) or float(n).is_integer()) or n < 1:
        raise ValueError(f"n must be a whole number >= 1, got {n!r}")
    if not 0 <= k <= n:
        raise ValueError(f"k must be in 0..n = {n}, got {k!r}")
    if not 0 < confidence < 1:
        raise ValueError(f"confidence must be between 0 and 1, got {confidence!r}")


def clopper_pearson(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Exact binomial confidence interval (Clopper–Pearson) for k successes in n trials.

    Parameters
    ----------
    k, n
        Passing trials and trials (0 <= k <= n, n >= 1).
    confidence
        Two-sided confidence level, e.g. 0.95.

    Returns
    -------
    (lo, hi): bounds of the pass probability, 0 <= lo <= k/n <= hi <= 1.

    References: Clopper & Pearson, Biometrika 26, 404 (1934).
    """
    from scipy.stats import beta

    _check(k, n, confidence)
    a = 1.0 - confidence
    lo = 0.0 if k == 0 else float(beta.ppf(a / 2, k, n - k + 1))
    hi = 1.0 if k == n else float(beta.ppf(1 - a / 2, k + 1, n - k))
    return lo, hi


def wilson(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for k successes in n trials.

    References: E. B. Wilson, J. Am. Stat. Assoc. 22, 209 (1927).
    """
    from scipy.stats import norm

    _check(k, n, confidence)
    z = float(norm.ppf(0.5 + confidence / 2))
    p = k / n
    denom = 1 + z * z / n
    centre = (p + z * z / (2 * n)) / denom
    half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)
