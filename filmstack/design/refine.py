"""Refinement: bounded local optimisation of every free thickness, then clean-up.

:func:`refine_thicknesses` minimises the merit over the free thicknesses with scipy — the
trust-region reflective least-squares method (``least_squares(method='trf')``) with the analytic
Jacobian of the residuals (variables scaled by the Jacobian's column norms, floored: see
:func:`_x_scale`), or L-BFGS-B with the analytic gradient. Bounds: every thickness ≥ 0;
the total-thickness limit (a sum, which box bounds cannot express) enters as a stiff penalty
residual ``PENALTY_PER_NM × excess`` and the result is scaled onto the limit if it still exceeds
it. :func:`refine` then removes layers thinner than the thinnest-layer limit, merges neighbours of
the same material and refines again, until nothing changes.

References: M. A. Branch, T. F. Coleman, Y. Li, "A subspace, interior, and conjugate gradient
method for large-scale bound-constrained minimization problems", SIAM J. Sci. Comput. 21, 1
(1999) (trf); R. H. Byrd, P. Lu, J. Nocedal, C. Zhu, SIAM J. Sci. Comput. 16, 1190 (1995)
(L-BFGS-B).
"""

from __future__ import annotations

import time

import numpy as np

from .layout import Design

__all__ = ["refine_thicknesses", "refine", "Clock", "TimeUp", "PENALTY_PER_NM"]

#: Weight of the total-thickness penalty residual, per nm of excess (merit units^½ / nm).
PENALTY_PER_NM = 10.0
#: Floor of the Jacobian column norms used as variable scales, relative to the largest.
SCALE_FLOOR = 1e-3


class TimeUp(Exception):
    """Raised inside an optimisation when the time limit is reached."""


class Clock:
    """Deadline keeper: ``check()`` raises :class:`TimeUp` once ``limit_s`` seconds have passed
    (``None``: no limit) or when ``stop()`` returns True (a polite stop request, e.g. Ctrl-C)."""

    def __init__(self, limit_s: float | None = None, stop=None):
        self.start = time.perf_counter()
        self.limit_s = limit_s
        self.stop = stop

    @property
    def elapsed(self) -> float:
        """Seconds since the clock was made."""
        return time.perf_counter() - self.start

    @property
    def left(self) -> float:
        """Seconds left (inf without a limit)."""
        return np.inf if self.limit_s is None else self.limit_s - self.elapsed

    def check(self) -> None:
        if self.limit_s is not None and self.elapsed > self.limit_s:
            raise TimeUp(f"time limit of {self.limit_s:g} s reached")
        if self.stop is not None and self.stop():
            raise TimeUp("stopped on request")


def _x_scale(J):
    """Variable scales for the trust region: 1 / column norm of the Jacobian (scipy's
    ``x_scale='jac'``), with every norm raised to at least :data:`SCALE_FLOOR` × the largest.

    A layer that hardly changes the merit — silica on fused silica, or any film matched to its
    neighbour — has a column of rounding noise (1e-16); unclipped, its scale of 1e16 lets the
    trust region spend itself along that layer, which then wanders by micrometres while the
    other layers do not move at all (a 3-layer case stalled at merit 5.5 instead of 0.13)."""
    norms = np.linalg.norm(J, axis=0)
    top = float(norms.max()) if norms.size else 0.0
    if top <= 0:
        return 1.0
    return 1.0 / np.maximum(norms, SCALE_FLOOR * top)


def _project_total(problem, x, lower=0.0):
    """Thicknesses brought within the total limit: the excess is taken from every layer in
    proportion to its thickness above ``lower``."""
    cap = problem.free_total_nm
    s = float(np.sum(x))
    if cap is None or s <= cap:
        return x
    room = np.clip(x - lower, 0.0, None)
    if room.sum() <= 0:
        return x * (cap / s)
    return x - (s - cap) * room / room.sum()


def refine_thicknesses(merit, design: Design, *, method: str = "trf", max_nfev: int = 100,
                       clock: Clock | None = None, lower: float = 0.0) -> tuple[Design, float]:
    """Locally optimise every free thickness of ``design`` (symbols unchanged).

    Parameters
    ----------
    merit
        :class:`~filmstack.design.merit.Merit`.
    design
        Start design.
    method
        'trf' (least squares with the analytic Jacobian) or 'lbfgs' (L-BFGS-B with the analytic
        gradient).
    max_nfev
        Most merit evaluations.
    clock
        Optional :class:`Clock`; when time runs out the best point so far is returned.
    lower
        Lower bound of every thickness, nm (0 lets layers vanish).

    Returns
    -------
    (design, merit value): thicknesses ≥ 0 within the total-thickness limit (layers may have
    shrunk to zero; :func:`refine` removes them).
    """
    from scipy.optimize import least_squares, minimize

    problem = merit.problem
    if len(design) == 0:
        return design, merit.value(design)
    cap = problem.free_total_nm
    x0 = np.clip(design.d, lower, None)
    best = {"f": np.inf, "x": x0}

    def penalty(x):
        if cap is None:
            return 0.0, np.zeros_like(x)
        ex = float(np.sum(x)) - cap
        if ex <= 0:
            return 0.0, np.zeros_like(x)
        return PENALTY_PER_NM * ex, np.full_like(x, PENALTY_PER_NM)

    cache = {}

    def evaluate(x):
        key = x.tobytes()
        if key not in cache:
            if clock is not None:
                clock.check()
            r, J = merit.residuals_jacobian(design.with_d(x))
            p, dp = penalty(x)
            r = np.append(r, p)
            J = np.vstack([J, dp[None, :]])
            cache.clear()
            cache[key] = (r, J)
            f = float(r @ r)
            if f < best["f"]:
                best["f"], best["x"] = f, x.copy()
        return cache[key]

    try:
        if method == "trf":
            least_squares(lambda x: evaluate(x)[0], x0, jac=lambda x: evaluate(x)[1],
                          bounds=(lower, np.inf), method="trf",
                          x_scale=_x_scale(evaluate(x0)[1]),
                          ftol=1e-9, xtol=1e-9, gtol=1e-10, max_nfev=max_nfev)
        elif method == "lbfgs":
            def fg(x):
                r, J = evaluate(x)
                return float(r @ r), 2.0 * J.T @ r

            minimize(fg, x0, jac=True, method="L-BFGS-B", bounds=[(lower, None)] * x0.size,
                     options={"maxfun": max_nfev, "maxiter": max_nfev, "ftol": 1e-12,
                              "gtol": 1e-10})
        else:
            raise ValueError(f"method must be 'trf' or 'lbfgs', got {method!r}")
    except TimeUp:
        if not np.isfinite(best["f"]):
            raise
    # the best point seen (merit + penalty), scaled onto the total-thickness limit if the
    # penalty left it a little above
    x = _project_total(problem, np.clip(best["x"], lower, None), lower)
    out = design.with_d(x)
    return out, merit.value(out)


def refine(merit, design: Design, *, method: str = "trf", max_nfev: int = 100,
           clock: Clock | None = None, rounds: int = 6) -> tuple[Design, float]:
    """Refine, remove layers below the thinnest limit, merge same-material neighbours, repeat.

    When the first refinement leaves layers thinner than the limit, two ways are followed and the
    better kept: (a) remove them, merge neighbours and refine again (repeatedly), and (b) keep
    every layer with its thickness bounded below by the limit.

    Returns (design, merit value); the design keeps every limit of the problem except possibly the
    layer count (refinement never adds layers).
    """
    problem = merit.problem
    thin = problem.thinnest_nm
    cur = design.merged()
    kept = None
    for _ in range(rounds):
        new, val = refine_thicknesses(merit, cur, method=method, max_nfev=max_nfev, clock=clock)
        cleaned = new.cleaned(thin)
        if cleaned == new:
            break
        if kept is None:
            kept = refine_thicknesses(merit, new.with_d(np.maximum(new.d, thin)), method=method,
                                      max_nfev=max_nfev, clock=clock, lower=thin)
            if problem.violations(kept[0]):
                kept = (kept[0], np.inf)
        cur = cleaned
    else:
        new, val = cur, merit.value(cur)
    if kept is not None and kept[1] < val:
        return kept
    return new, val
