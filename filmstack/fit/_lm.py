"""A Levenberg–Marquardt least-squares solver vectorised over independent problems (private).

Used for wafer maps, where thousands of small, independent fits (one per site) advance together
so that each iteration is a single batched engine call. Each problem keeps its own damping μ; the
step solves (JᵀJ + μ·diag(JᵀJ)) δ = −Jᵀr (Marquardt's scaling, so parameters in different units
need no manual scaling), bounds are kept by projection with parameters pinned at a bound when the
gradient pushes outward (an active set), and a problem stops when its cost no longer falls by
more than ``ftol`` relative, its step is below ``xtol`` relative, or after ``max_iter`` steps.

References: K. Levenberg, Q. Appl. Math. 2, 164 (1944); D. W. Marquardt, J. Soc. Ind. Appl. Math.
11, 431 (1963), doi:10.1137/0111030; J. Nocedal and S. J. Wright, *Numerical Optimization*, 2nd ed.
(Springer, 2006), §10.3 (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class BatchResult:
    x: np.ndarray          # (S, P)
    cost: np.ndarray       # (S,) 0.5 Σ r²
    n_iter: np.ndarray     # (S,)
    converged: np.ndarray  # (S,) bool
    abandoned: np.ndarray  # (S,) bool: stopped early as clearly worse than another start
    interrupted: bool = False


def batched_lm(fun, X0, lower, upper, *, max_iter: int = 60, ftol: float = 1e-10,
               xtol: float = 1e-10, stop=None, group=None,
               give_up: float | None = None, se_tol: float | None = None) -> BatchResult:
    """Minimise ½‖r_s(x_s)‖² for every row s of ``X0`` (S, P) within [lower, upper] (P,).

    ``fun(X, jac, rows)`` returns weighted residuals r (n, M) and, with ``jac``, the Jacobian
    J (n, M, P) for parameter vectors ``X`` (n, P) of the problems ``rows`` (n,) (indices
    into ``X0``). ``stop()``, if given, is polled once per iteration: when
    it returns True the solver returns the best points so far with ``interrupted=True``.

    Rows may be several starts of one problem: ``group`` (S,) ints says which; with ``give_up``,
    a row stops early when its cost exceeds ``give_up`` × the lowest cost in its group and its
    last step gained less than 5 % (a start converging slowly to a clearly worse minimum).

    With ``se_tol``, a row also stops after an accepted step smaller than ``se_tol`` times every
    parameter's standard error (estimated from JᵀJ and the residual variance): the remaining
    error is then a negligible fraction of the uncertainty.
    """
    lower = np.asarray(lower, dtype=float)
    upper = np.asarray(upper, dtype=float)
    X = np.clip(np.asarray(X0, dtype=float), lower, upper)
    S, P = X.shape
    r, J = fun(X, True, np.arange(S))
    cost = 0.5 * np.sum(r * r, axis=1)
    mu = np.full(S, 1e-3)
    n_iter = np.zeros(S, dtype=int)
    active = np.isfinite(cost)
    converged = np.zeros(S, dtype=bool)
    abandoned = np.zeros(S, dtype=bool)
    eye = np.eye(P)
    interrupted = False
    for _ in range(max_iter):
        if stop is not None and stop():
            interrupted = True
            break
        idx = np.nonzero(active)[0]
        if idx.size == 0:
            break
        Ja, ra, Xa = J[idx], r[idx], X[idx]
        g = np.einsum("smp,sm->sp", Ja, ra)
        H = np.einsum("smp,smq->spq", Ja, Ja)
        pinned = ((Xa <= lower) & (g > 0)) | ((Xa >= upper) & (g < 0))
        diag = np.einsum("spp->sp", H)
        diag = np.where(diag > 0, diag, 1.0)
        A = H + mu[idx, None, None] * diag[:, :, None] * eye
        free = ~pinned
        A = np.where(free[:, :, None] & free[:, None, :], A, 0.0) + pinned[:, :, None] * eye
        g = np.where(pinned, 0.0, g)
        try:
            step = -np.linalg.solve(A, g[..., None])[..., 0]
        except np.linalg.LinAlgError:
            step = -np.stack([np.linalg.lstsq(a, b, rcond=None)[0] for a, b in zip(A, g)])
        Xn = np.clip(Xa + step, lower, upper)
        rn, Jn = fun(Xn, True, idx)
        cn = 0.5 * np.sum(rn * rn, axis=1)
        ok = np.isfinite(cn) & (cn < cost[idx])
        gain_rel = np.where(ok, (cost[idx] - cn) / np.maximum(cost[idx], 1e-300), 0.0)
        small_step = np.all(np.abs(Xn - Xa) <= xtol * (np.abs(Xa) + xtol), axis=1)
        small_gain = ok & ((cost[idx] - cn) <= ftol * cost[idx])
        n_iter[idx] += 1
        if se_tol is not None:
            M = ra.shape[1]
            s2 = 2.0 * cost[idx] / max(M - P, 1)
            try:
                var = np.einsum("spp->sp", np.linalg.inv(H + 1e-12 * diag[:, :, None] * eye)) * s2[:, None]
            except np.linalg.LinAlgError:
                var = np.zeros_like(Xa)
            se = np.sqrt(np.maximum(var, 0.0))
            tiny_step = ok & np.all(np.abs(Xn - Xa) <= se_tol * se, axis=1)
        else:
            tiny_step = np.zeros(idx.size, dtype=bool)
        acc = idx[ok]
        X[acc], r[acc], J[acc], cost[acc] = Xn[ok], rn[ok], Jn[ok], cn[ok]
        mu[acc] = np.maximum(mu[acc] / 3.0, 1e-12)
        rej = idx[~ok]
        mu[rej] *= 4.0
        done = (small_gain | small_step | tiny_step | (cost[idx] <= 1e-30)
                | (mu[idx] > 1e12))
        if give_up is not None and group is not None:
            gmin = np.full(int(group.max()) + 1, np.inf)
            np.minimum.at(gmin, group, cost)
            slow = ~ok | (gain_rel < 0.05)
            drop = slow & (cost[idx] > give_up * gmin[group[idx]]) & ~done
            abandoned[idx[drop]] = True
            done |= drop
        converged[idx[done]] = True
        active[idx[done]] = False
    return BatchResult(X, cost, n_iter, converged & ~abandoned, abandoned, interrupted)
