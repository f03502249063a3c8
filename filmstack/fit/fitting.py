"""Fitting model stacks to measured spectra: one sample (:func:`fit_spectrum`) or a map
(:func:`fit_map`).

Both run in two stages:

1. **Global** (:mod:`filmstack.fit.search`): the free thicknesses are sampled over their whole
   range in one batched engine call, and the best few distinct local minima of the merit become
   start points, so that the fit does not settle in a wrong interference order.
2. **Local**: from each start point, a bounded nonlinear least-squares fit with the engine's
   analytic thickness derivatives (``scipy.optimize.least_squares``, trust-region reflective, for
   one sample; a Levenberg–Marquardt iteration vectorised over sites for a map).

The merit is Σ((model − measured)/σ)² with σ the file's uncertainties, or Σ(model − measured)²
when the file has none. Standard errors and correlations come from the Jacobian at the solution
(see :mod:`filmstack.fit.results`). Warnings are issued (in the result) when another minimum fits
about as well (``cost₂ ≤ ambiguity_ratio · cost₁``), a parameter sits on a bound, two parameters
are almost fully correlated (|ρ| > 0.98), a parameter is not determined by the data, or the
residuals disagree with the stated uncertainties.
"""

from __future__ import annotations

import math
from typing import Callable, Sequence

import numpy as np

from ..errors import InputError
from ..io.measured import MeasuredSet, Measurement, check_wavelength_range
from ._evaluate import Evaluator
from ._lm import batched_lm
from .parameters import FitModel
from .results import FitResult, FitValue, MapResult, covariance
from .search import grid_candidates, grid_spectra, search_grid

__all__ = ["fit_spectrum", "fit_map"]


def _data(model: FitModel, m: Measurement):
    """(Y (M,), w (M,), has_sigma) of a measurement, checked against the model."""
    sig = [c.sigma is not None for c in m.channels]
    if any(sig) and not all(sig):
        raise InputError("some measured curves have uncertainties and others not; give an "
                         "uncertainty column for all or none", file=m.file)
    Y = np.concatenate([c.value for c in m.channels])
    if all(sig):
        w = 1.0 / np.concatenate([c.sigma for c in m.channels])
    else:
        w = np.ones_like(Y)
    P = len(model.parameters)
    if Y.size <= P:
        raise InputError(f"{Y.size} measured points cannot determine {P} free parameters; "
                         "measure more wavelengths or free fewer parameters", file=m.file)
    return Y, w, all(sig)


def _at_bound(x, lower, upper) -> np.ndarray:
    """(…, P) bool: x on (within a tiny tolerance of) a finite bound."""
    span = np.where(np.isfinite(upper - lower), upper - lower, np.maximum(np.abs(x), 1.0))
    tol = np.maximum(1e-5 * span, 1e-9)
    return ((np.isfinite(lower) & (x - lower <= tol)) |
            (np.isfinite(upper) & (upper - x <= tol)))


def _fmt(value: float, unit: str) -> str:
    return f"{value:.6g}{(' ' + unit) if unit else ''}"


def _warnings(model: FitModel, x, stderr, corr, singular, at_bound, chi2_red,
              alternative=None) -> list[str]:
    out = []
    params = model.parameters
    for j, p in enumerate(params):
        if at_bound[j]:
            side = "lower" if abs(x[j] - p.lower) <= abs(x[j] - p.upper) else "upper"
            bound = p.lower if side == "lower" else p.upper
            out.append(f"{p.name} = {_fmt(x[j], p.unit)} sits on its {side} bound "
                       f"{_fmt(bound, p.unit)}: the best fit may lie beyond it; widen the bounds "
                       "or check the model (its standard error is not meaningful)")
        if singular[j]:
            out.append(f"{p.name} is not determined by the measurement (its effect is zero or "
                       "duplicated by other parameters); fix it or measure more")
    P = len(params)
    for a in range(P):
        for b in range(a + 1, P):
            rho = corr[a, b]
            if np.isfinite(rho) and abs(rho) > 0.98:
                out.append(f"{params[a].name} and {params[b].name} are strongly correlated "
                           f"(ρ = {rho:+.3f}); their individual values are uncertain")
    if chi2_red is not None and np.isfinite(chi2_red) and not 0.25 <= chi2_red <= 4.0:
        out.append(f"the residuals are {math.sqrt(chi2_red):.3g} times the stated uncertainties "
                   "(reduced χ² = {:.3g}): the model or the uncertainties are off".format(chi2_red))
    if alternative is not None:
        xa, ratio = alternative
        thick = [j for j, p in enumerate(params) if p.kind == "thickness"]
        what = ", ".join(f"{params[j].name} = {_fmt(xa[j], params[j].unit)}" for j in thick) \
            or "other values"
        out.append(f"ambiguous fit: another minimum ({what}) fits almost as well "
                   f"(merit ratio {ratio:.3g}); measure a wider band or narrow the bounds")
    return out


#: An alternative minimum is not excluded when its χ² exceeds the best by less than this
#: (about 3σ for one degree of freedom; χ² in units of the residual variance unless the
#: uncertainties are taken as absolute).
DELTA_CHI2_AMBIGUOUS = 9.0


def _ambiguity_limit(ratio: float, dof: int, cost_best, absolute: bool):
    """The largest cost of another minimum that still makes a fit ambiguous: the larger of
    ``ratio`` × the best cost and the best cost plus Δχ² = ``DELTA_CHI2_AMBIGUOUS``."""
    cost_best = np.asarray(cost_best, dtype=float)
    if absolute:
        stat = cost_best + 0.5 * DELTA_CHI2_AMBIGUOUS
    else:
        stat = cost_best * (1.0 + DELTA_CHI2_AMBIGUOUS / max(dof, 1))
    return np.maximum(ratio * cost_best, stat)


def _distinct(xa, xb, grid) -> bool:
    """True if two solutions lie in different minima (thicknesses ≥ ¼ fringe apart)."""
    if grid is None:
        return False
    da = np.abs(np.asarray(xa)[grid.thick] - np.asarray(xb)[grid.thick]) / grid.period
    return bool(np.any(da >= 0.25))


def fit_spectrum(model: FitModel, measurement: Measurement, *, global_search: bool = True,
                 n_starts: int = 5, max_grid: int = 20000, seed: int = 0,
                 absolute_sigma: bool = False, ambiguity_ratio: float = 1.25) -> FitResult:
    """Fit the free parameters of ``model`` to one measurement.

    Parameters
    ----------
    model
        The model stack and its free parameters (:func:`~filmstack.fit.load_fit_model`).
    measurement
        The measured spectra (:func:`~filmstack.io.measured.read_measured`).
    global_search
        Scan the free thicknesses first (recommended). ``False`` starts from the model's values.
    n_starts
        Number of distinct minima of the scan refined locally.
    max_grid
        Largest number of scan points.
    seed
        Seed for the scan's Sobol points (used with many free thicknesses).
    absolute_sigma
        With measured uncertainties: take them as absolute (standard errors not scaled by the
        residual variance). Default: scaled, as the residual variance also carries model error.
    ambiguity_ratio
        Another distinct minimum with merit ≤ this × the best makes the fit ambiguous; so does
        one whose χ² exceeds the best by less than ``DELTA_CHI2_AMBIGUOUS`` (9, about 3σ).

    Returns
    -------
    FitResult
    """
    from scipy.optimize import least_squares

    if not isinstance(measurement, Measurement):
        raise TypeError("measurement must be a Measurement (one site); use fit_map for many")
    check_wavelength_range(measurement, model.stack, margin_nm=model.shift_bounds(),
                           model_file=model.file)
    Y, w, has_sigma = _data(model, measurement)
    ev = Evaluator(model, measurement.channels)
    lower, upper = model.lower, model.upper
    grid = search_grid(model, ev.wavelength_nm, max_grid=max_grid, seed=seed) \
        if global_search else None
    if grid is not None:
        Fg = grid_spectra(ev, grid)
        X0, _ = grid_candidates(model, grid, Fg, Y[None], w[None], n_candidates=n_starts)
        starts = []
        for x in X0[0]:
            if not any(np.array_equal(x, s) for s in starts):
                starts.append(x)
    else:
        starts = [model.x0]

    # Refine every start together (one batched engine call per iteration) ...
    def fun_batch(X, jac, rows):
        F, J = ev(X, jac=jac)
        return (F - Y) * w, (J * w[:, None] if jac else None)

    lm = batched_lm(fun_batch, np.asarray(starts), lower, upper, max_iter=30, ftol=1e-8,
                    xtol=1e-8, group=np.zeros(len(starts), dtype=int),
                    give_up=2.0 * max(ambiguity_ratio,
                                      1.0 + DELTA_CHI2_AMBIGUOUS / max(Y.size - lower.size, 1)))
    order = np.argsort(lm.cost)

    # ... then polish the best with scipy's trust-region least squares.
    def fun(x):
        return (ev(x[None])[0][0] - Y) * w

    def jac(x):
        return ev(x[None], jac=True)[1][0] * w[:, None]

    best = least_squares(fun, lm.x[order[0]], jac=jac, bounds=(lower, upper), method="trf",
                         x_scale="jac", ftol=1e-12, xtol=1e-12, gtol=1e-12, max_nfev=100)
    if best.cost > lm.cost[order[0]]:   # (cannot happen with a monotone solver; be safe)
        best.x, best.cost = lm.x[order[0]], lm.cost[order[0]]
    nfev = int(lm.n_iter.sum()) * 2 + best.nfev
    distinct = []
    for k in order[1:]:
        if lm.abandoned[k]:
            continue
        xk = lm.x[k]
        if _distinct(xk, best.x, grid) and all(_distinct(xk, d[0], grid) for d in distinct):
            distinct.append((xk, float(lm.cost[k])))
    x = best.x
    F, J = ev(x[None], jac=True)
    F, J = F[0], J[0]
    rw = (F - Y) * w
    cov, stderr, corr, singular = covariance((J * w[:, None])[None], rw[None],
                                             absolute=absolute_sigma and has_sigma)
    cov, stderr, corr, singular = cov[0], stderr[0], corr[0], singular[0]
    dof = Y.size - x.size
    chi2 = float(np.sum(rw**2) / dof) if has_sigma else None
    bound = _at_bound(x, lower, upper)
    alt = None
    if distinct:
        limit = _ambiguity_limit(ambiguity_ratio, dof, best.cost, absolute_sigma and has_sigma)
        if distinct[0][1] <= limit:
            ratio = distinct[0][1] / best.cost if best.cost > 0 else math.inf
            alt = (distinct[0][0], ratio)
    warns = _warnings(model, x, stderr, corr, singular, bound, chi2, alt)
    values = tuple(FitValue(p.name, float(x[j]), float(stderr[j]), p.unit, p.lower, p.upper,
                            bool(bound[j])) for j, p in enumerate(model.parameters))
    alternatives = []
    if distinct:
        Fa = ev(np.array([d[0] for d in distinct]))[0]
        alternatives = [(d[0], float(np.sqrt(np.mean((f - Y) ** 2))))
                        for d, f in zip(distinct, Fa)]
    return FitResult(
        parameters=values, correlation=corr, covariance=cov,
        rms=float(np.sqrt(np.mean((F - Y) ** 2))), chi2_reduced=chi2, n_points=int(Y.size),
        x=x, stack=model.stack_at(x), measurement=measurement, model_values=F,
        warnings=tuple(warns), alternatives=tuple(alternatives),
        success=bool(best.success), message=str(best.message), nfev=nfev, model=model)


def fit_map(model: FitModel, measured: MeasuredSet | Sequence[Measurement], *,
            global_search: bool = True, n_starts: int = 3, max_grid: int = 4096, seed: int = 0,
            absolute_sigma: bool = False, ambiguity_ratio: float = 1.25, chunk: int = 2048,
            progress: Callable[[int, int], None] | None = None,
            stop: Callable[[], bool] | None = None) -> MapResult:
    """Fit the free parameters of ``model`` at every site of a map, vectorised across sites.

    Sites measured alike (same channels and wavelengths) are fitted together: the global scan's
    spectra are computed once and shared, and the local Levenberg–Marquardt steps of all sites
    are one batched engine call per iteration (in chunks of ``chunk`` sites).

    Parameters
    ----------
    model
        The model and its free parameters.
    measured
        The sites (:class:`~filmstack.io.measured.MeasuredSet` or a sequence of measurements).
    global_search, n_starts, max_grid, seed, absolute_sigma, ambiguity_ratio
        As for :func:`fit_spectrum` (``n_starts`` minima are refined per site; 3 by default,
        enough to tell an ambiguous site).
    chunk
        Sites per batch (bounds memory).
    progress
        Called as ``progress(sites_done, sites_total)`` after each chunk.
    stop
        Polled between iterations; when it returns True the fit ends early with the best values
        so far (``MapResult.interrupted``).

    Returns
    -------
    MapResult
    """
    sites = list(measured.sites if isinstance(measured, MeasuredSet) else measured)
    if not sites:
        raise InputError("no sites to fit")
    check_wavelength_range(MeasuredSet(tuple(sites)), model.stack,
                           margin_nm=model.shift_bounds(), model_file=model.file)
    S, P = len(sites), len(model.parameters)
    values = np.full((S, P), np.nan)
    stderr = np.full((S, P), np.nan)
    rms = np.full(S, np.nan)
    chi2 = np.full(S, np.nan)
    at_bound = np.zeros((S, P), dtype=bool)
    ambiguous = np.zeros(S, dtype=bool)
    warnings: list[list[str]] = [[] for _ in range(S)]
    lower, upper = model.lower, model.upper
    any_sigma = False
    interrupted = False

    groups: dict[tuple, list[int]] = {}
    for i, m in enumerate(sites):
        groups.setdefault(m.layout_key(), []).append(i)
    done = 0
    for key, members in groups.items():
        first = sites[members[0]]
        data = [_data(model, sites[i]) for i in members]
        Y = np.stack([d[0] for d in data])
        W = np.stack([d[1] for d in data])
        has_sigma = data[0][2]
        any_sigma |= has_sigma
        ev = Evaluator(model, first.channels)
        grid = search_grid(model, ev.wavelength_nm, max_grid=max_grid, seed=seed,
                           samples_per_fringe=8) if global_search else None
        Fg = grid_spectra(ev, grid) if grid is not None else None
        for a in range(0, len(members), chunk):
            idx = np.asarray(members[a:a + chunk])
            y, wt = Y[a:a + chunk], W[a:a + chunk]
            n = idx.size
            if grid is not None:
                X0, _ = grid_candidates(model, grid, Fg, y, wt, n_candidates=n_starts)
            else:
                X0 = np.broadcast_to(model.x0, (n, 1, P)).copy()
            K = X0.shape[1]
            yk = np.repeat(y, K, axis=0)
            wk = np.repeat(wt, K, axis=0)

            def fun(X, jac, rows, _y=yk, _w=wk, _ev=ev):
                F, J = _ev(X, jac=jac)
                r = (F - _y[rows]) * _w[rows]
                return r, (J * _w[rows][..., None] if jac else None)

            res = batched_lm(fun, X0.reshape(n * K, P), lower, upper, stop=stop,
                             group=np.repeat(np.arange(n), K),
                             give_up=2.0 * max(ambiguity_ratio,
                                               1.0 + DELTA_CHI2_AMBIGUOUS / max(Y.shape[1] - P, 1)),
                             se_tol=0.01)
            interrupted |= res.interrupted
            xk = res.x.reshape(n, K, P)
            ck = res.cost.reshape(n, K)
            order = np.argsort(ck, axis=1)
            best = np.take_along_axis(xk, order[:, :1, None], axis=1)[:, 0]
            cbest = np.take_along_axis(ck, order[:, :1], axis=1)[:, 0]
            # The best distinct alternative per site.
            alt_x = np.full((n, P), np.nan)
            alt_ratio = np.full(n, np.inf)
            if grid is not None and K > 1:
                for k in range(1, K):
                    xo = np.take_along_axis(xk, order[:, k:k + 1, None], axis=1)[:, 0]
                    co = np.take_along_axis(ck, order[:, k:k + 1], axis=1)[:, 0]
                    sep = np.max(np.abs(xo[:, grid.thick] - best[:, grid.thick])
                                 / grid.period, axis=1) >= 0.25
                    ratio = np.where(cbest > 0, co / np.where(cbest > 0, cbest, 1.0), np.inf)
                    take = sep & (ratio < alt_ratio)
                    alt_x[take], alt_ratio[take] = xo[take], ratio[take]
            # Statistics at the best point.
            F, J = ev(best, jac=True)
            rw = (F - y) * wt
            cov, se, corr, singular = covariance(J * wt[..., None], rw,
                                                 absolute=absolute_sigma and has_sigma)
            dof = y.shape[1] - P
            values[idx], stderr[idx] = best, se
            rms[idx] = np.sqrt(np.mean((F - y) ** 2, axis=1))
            if has_sigma:
                chi2[idx] = np.sum(rw**2, axis=1) / dof
            bnd = _at_bound(best, lower, upper)
            at_bound[idx] = bnd
            limit = _ambiguity_limit(ambiguity_ratio, dof, cbest, absolute_sigma and has_sigma)
            amb = alt_ratio * cbest <= limit
            ambiguous[idx] = amb
            flagged = (bnd.any(axis=1) | amb | singular.any(axis=1)
                       | (np.abs(np.triu(np.nan_to_num(corr), 1)) > 0.98).any(axis=(1, 2)))
            if has_sigma:
                c2 = chi2[idx]
                flagged |= (c2 < 0.25) | (c2 > 4.0)
            for t in np.nonzero(flagged)[0]:
                warnings[idx[t]] = _warnings(
                    model, best[t], se[t], corr[t], singular[t], bnd[t],
                    float(chi2[idx[t]]) if has_sigma else None,
                    (alt_x[t], float(alt_ratio[t])) if amb[t] else None)
            done += n
            if progress is not None:
                progress(done, S)
            if interrupted:
                break
        if interrupted:
            break
    poor = _poor_fits(rms)
    for i in np.nonzero(poor)[0]:
        med = float(np.nanmedian(rms))
        warnings[i] = list(warnings[i]) + [
            f"poor fit: residual RMS {100 * rms[i]:.3g} % is {rms[i] / med:.0f} times the map's "
            f"median ({100 * med:.3g} %); check this site's measurement, or whether the model "
            "describes it"]
    x_mm = np.array([np.nan if m.x_mm is None else m.x_mm for m in sites], dtype=float)
    y_mm = np.array([np.nan if m.y_mm is None else m.y_mm for m in sites], dtype=float)
    return MapResult(
        names=model.names, units=[p.unit for p in model.parameters],
        site=[m.site for m in sites], x_mm=x_mm, y_mm=y_mm, values=values, stderr=stderr,
        rms=rms, chi2_reduced=chi2 if any_sigma else None, at_bound=at_bound,
        ambiguous=ambiguous, warnings=warnings, interrupted=interrupted, poor_fit=poor)


#: A map site fits poorly when its residual RMS exceeds this many times the map's median ...
POOR_FIT_FACTOR = 4.0
#: ... and this absolute RMS (fraction), so a near-perfect map flags nothing for round-off.
POOR_FIT_MIN_RMS = 0.002
#: Sites needed for a median to compare with.
POOR_FIT_MIN_SITES = 5


def _poor_fits(rms: np.ndarray) -> np.ndarray:
    """Sites (S,) bool whose residual RMS stands out from the rest of the map (common
    practice, no published source: a robust outlier rule against the median)."""
    ok = np.isfinite(rms)
    if ok.sum() < POOR_FIT_MIN_SITES:
        return np.zeros(rms.shape, dtype=bool)
    med = float(np.median(rms[ok]))
    with np.errstate(invalid="ignore"):
        return ok & (rms > POOR_FIT_FACTOR * med) & (rms > POOR_FIT_MIN_RMS)

