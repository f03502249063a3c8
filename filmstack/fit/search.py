"""The global stage of a fit: where in thickness to start the local refinement.

Reflectance and transmittance of a film repeat with its optical thickness: at wavelength λ a
layer of index n and thickness d has phase thickness δ = 2π n d cosθ / λ, and the spectrum
returns to itself when d grows by λ / (2 n cosθ) (one interference order). A local least-squares
fit started in the wrong order converges to a wrong, local minimum. So the free thicknesses are
first scanned over their whole range:

- each free thickness is sampled with a step of λ_min / (8 n_max) (a quarter of the shortest
  fringe period, so the true minimum is at most an eighth of a period from a sample point);
- with one or two free thicknesses (or any number while the product stays under ``max_grid``
  points) the samples form a regular lattice and the candidates are the lattice's local minima;
  with more, ``max_grid`` scrambled-Sobol points (seeded) serve as multi-starts and candidates
  are the best points at least half a fringe period apart;
- other parameters stay at their start values, except a photometric scale, which has a
  closed-form optimum at each sample point (linear least squares) and is profiled out.

All sample points are one batched engine call; for a wafer map the sampled spectra are shared by
every site and only the merit (a matrix product) is per site.

References: fringe period of a single film, H. A. Macleod, *Thin-Film Optical Filters*, 4th ed.
(CRC Press, 2010), §2.6 (from memory); scrambled Sobol sequences, scipy.stats.qmc.Sobol.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._evaluate import Evaluator
from .parameters import FitModel

__all__ = ["SearchGrid", "search_grid", "grid_candidates"]

#: Samples per shortest fringe period.
SAMPLES_PER_FRINGE = 4


@dataclass
class SearchGrid:
    """Sample points of the global stage.

    Attributes
    ----------
    X
        Parameter vectors, shape (G, P) (non-thickness parameters at their start values).
    shape
        Lattice shape (one entry per free thickness) or ``None`` for Sobol points.
    thick
        Indices (into the parameter vector) of the free thicknesses.
    period
        Shortest fringe period of each free thickness, in the parameter's unit, shape (T,).
    """

    X: np.ndarray
    shape: tuple[int, ...] | None
    thick: list[int]
    period: np.ndarray


def _max_index(model: FitModel, layer: int, wl: np.ndarray) -> float:
    """The largest real index a layer may take over ``wl`` (upper bound of its index model)."""
    n = float(np.max(model.stack.layer_indices(wl)[layer].real))
    for g in model.index_groups():
        if layer not in g["layers"]:
            continue
        if g["kind"] == "index_scale":
            j = g["params"].get("s")
            s = model.parameters[j].upper if j is not None else g["fixed"]["s"]
            n *= s if math.isfinite(s) else 1.5
        else:
            coefs = {}
            for c in "ABC":
                j = g["params"].get(c)
                if j is None:
                    coefs[c] = g["fixed"].get(c, 0.0)
                else:
                    p = model.parameters[j]
                    coefs[c] = p.upper if math.isfinite(p.upper) else p.value
            um = wl * 1e-3
            n = float(np.max(coefs["A"] + coefs["B"] / um**2 + coefs["C"] / um**4))
    return max(n, 1.0)


def search_grid(model: FitModel, wavelength_nm, *, max_grid: int = 20000, seed: int = 0,
                samples_per_fringe: int = SAMPLES_PER_FRINGE) -> SearchGrid | None:
    """The sample points of the global stage, or ``None`` when no thickness is free.

    Parameters
    ----------
    model
        The fit model.
    wavelength_nm
        The measured wavelengths (any shape), nm.
    max_grid
        Largest number of sample points.
    seed
        Seed of the Sobol sequence (used with many free thicknesses).
    samples_per_fringe
        Lattice points per shortest fringe period (default 4).
    """
    thick = model.of_kind("thickness")
    if not thick:
        return None
    wl = np.unique(np.asarray(wavelength_nm, dtype=float))
    lam_min = float(wl.min())
    axes, periods = [], []
    for j in thick:
        p = model.parameters[j]
        layer = p.layers[0]
        n = _max_index(model, layer, wl)
        period = lam_min / (2.0 * n) / p.nm_per_unit          # in the parameter's unit
        lo = max(p.lower, 0.0)
        hi = p.upper
        if not math.isfinite(hi):
            # No upper bound given: search up to twice the start, and at least 4 periods on.
            hi = max(2.0 * p.value, p.value + 4.0 * period)
        step = period / samples_per_fringe
        count = max(2, int(math.ceil((hi - lo) / step)) + 1)
        axes.append(np.linspace(lo, hi, count))
        periods.append(period)
    x0 = model.x0
    total = math.prod(a.size for a in axes)
    if total <= max_grid:
        mesh = np.meshgrid(*axes, indexing="ij")
        X = np.broadcast_to(x0, (total, x0.size)).copy()
        for k, j in enumerate(thick):
            X[:, j] = mesh[k].ravel()
        shape = tuple(a.size for a in axes)
    else:
        from scipy.stats import qmc

        sobol = qmc.Sobol(d=len(thick), scramble=True, seed=seed)
        u = sobol.random(max_grid)
        X = np.broadcast_to(x0, (max_grid, x0.size)).copy()
        for k, j in enumerate(thick):
            X[:, j] = axes[k][0] + u[:, k] * (axes[k][-1] - axes[k][0])
        shape = None
    return SearchGrid(X, shape, list(thick), np.asarray(periods))


def grid_spectra(evaluator: Evaluator, grid: SearchGrid, *, chunk: int = 2048) -> np.ndarray:
    """Model values at every sample point, shape (G, M), in chunks of ``chunk`` points."""
    G = grid.X.shape[0]
    out = np.empty((G, evaluator.n_points))
    for a in range(0, G, chunk):
        out[a:a + chunk] = evaluator(grid.X[a:a + chunk])[0]
    return out


def grid_candidates(model: FitModel, grid: SearchGrid, F_grid: np.ndarray, Y: np.ndarray,
                    w: np.ndarray, *, n_candidates: int = 3):
    """The best distinct start points for each site.

    Parameters
    ----------
    model
        The fit model.
    grid, F_grid
        Sample points and their model values (G, M) (at scale 1).
    Y, w
        Measured values and weights (1/σ, or ones), shape (S, M).
    n_candidates
        Start points to return per site.

    Returns
    -------
    X0 : ndarray (S, K, P)
        Start points, best first (a site with fewer distinct minima repeats its best).
    merit : ndarray (S, K)
        Weighted sum of squared residuals at those points.
    """
    S = Y.shape[0]
    G, P = grid.X.shape
    K = max(1, min(n_candidates, G))
    sc = model.of_kind("scale")
    lo_c, hi_c = ((model.parameters[sc[0]].lower, model.parameters[sc[0]].upper)
                  if sc else (1.0, 1.0))
    X0 = np.empty((S, K, P))
    merit_out = np.empty((S, K))
    Ft = F_grid.T                                                     # (M, G)
    F2t = (F_grid**2).T
    coords = grid.X[:, grid.thick] / grid.period                     # (G, T) in periods
    chunk = max(1, min(1024, int(2_000_000 // max(G, 1))))           # bounded (s, G) arrays
    steps = ([(grid.X[:, j].max() - grid.X[:, j].min()) / max(n - 1, 1)
              for j, n in zip(grid.thick, grid.shape)] if grid.shape is not None else None)
    for a in range(0, S, chunk):
        y = Y[a:a + chunk]
        w2 = w[a:a + chunk] ** 2
        yy = np.sum(w2 * y * y, axis=1)[:, None]                     # (s, 1)
        yF = (w2 * y) @ Ft                                           # (s, G)
        FF = w2 @ F2t                                                # (s, G)
        if sc:
            c = np.clip(yF / np.where(FF > 0, FF, 1.0), lo_c, hi_c)
        else:
            c = np.ones_like(yF)
        merit = yy - 2.0 * c * yF + c * c * FF                        # (s, G)
        if grid.shape is not None and G > 1:
            candidate = _lattice_minima(merit, grid.shape)
            # Rank the lattice minima by the parabola-vertex estimate of their basin's minimum,
            # not by the sampled value (which depends on where the samples fall in the basin).
            rank, offsets = _parabolic(merit, grid.shape)
        else:
            candidate = np.ones_like(merit, dtype=bool)
            rank, offsets = merit, None
        m = np.where(candidate, rank, np.inf)
        s_idx = np.arange(y.shape[0])
        chosen = []
        for k in range(K):
            best = np.argmin(m, axis=1)
            # A site without another distinct candidate repeats its best point.
            none_left = ~np.isfinite(m[s_idx, best])
            if k > 0:
                best = np.where(none_left, chosen[0], best)
            chosen.append(best)
            # Exclude everything within half a fringe period of the chosen point.
            near = np.ones_like(m, dtype=bool)
            for t in range(coords.shape[1]):
                near &= np.abs(coords[None, :, t] - coords[best, t][:, None]) < 0.5
            m = np.where(near, np.inf, m)
        for k, best in enumerate(chosen):
            X0[a:a + chunk, k] = grid.X[best]
            merit_out[a:a + chunk, k] = merit[s_idx, best]
            if sc:
                X0[a:a + chunk, k, sc[0]] = c[s_idx, best]
            if offsets is not None:
                for t, j in enumerate(grid.thick):
                    X0[a:a + chunk, k, j] += offsets[t][s_idx, best] * steps[t]
    return X0, merit_out


def _parabolic(merit: np.ndarray, shape: tuple[int, ...]):
    """Parabolic refinement on a lattice.

    Along each axis, the parabola through a point and its two neighbours has its vertex at
    offset δ = (m₋ − m₊) / (2 (m₋ − 2m₀ + m₊)) steps (clipped to ±1) and value
    m₀ − (m₋ − m₊)² / (8 (m₋ − 2m₀ + m₊)).

    Returns
    -------
    estimate : (S, G)
        The merit lowered by the vertex estimate along every axis (= merit where not convex).
    offsets : list of (S, G)
        The vertex offset along each axis, in lattice steps.
    """
    S = merit.shape[0]
    m = merit.reshape((S,) + shape)
    est = m.copy()
    offsets = []
    for ax in range(1, m.ndim):
        n = m.shape[ax]
        off = np.zeros_like(m)
        if n >= 3:
            inner = [slice(None)] * m.ndim
            lo = [slice(None)] * m.ndim
            hi = [slice(None)] * m.ndim
            inner[ax], lo[ax], hi[ax] = slice(1, n - 1), slice(0, n - 2), slice(2, n)
            m0, mlo, mhi = m[tuple(inner)], m[tuple(lo)], m[tuple(hi)]
            curv = mlo - 2.0 * m0 + mhi
            ok = curv > 0
            safe = np.where(ok, curv, 1.0)
            off[tuple(inner)] = np.where(ok, np.clip(0.5 * (mlo - mhi) / safe, -1.0, 1.0), 0.0)
            est[tuple(inner)] -= np.where(ok, (mlo - mhi) ** 2 / (8.0 * safe), 0.0)
        offsets.append(off.reshape(S, -1))
    return est.reshape(S, -1), offsets


def _lattice_minima(merit: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    """Mask (S, G) of lattice points not higher than any neighbour along any axis."""
    S = merit.shape[0]
    m = merit.reshape((S,) + shape)
    mask = np.ones_like(m, dtype=bool)
    for ax in range(1, m.ndim):
        n = m.shape[ax]
        if n < 2:
            continue
        lower = np.take(m, np.arange(1, n), axis=ax) <= np.take(m, np.arange(0, n - 1), axis=ax)
        # m[i] <= m[i-1]
        left = np.concatenate([np.ones_like(np.take(m, [0], axis=ax), dtype=bool), lower], axis=ax)
        upper = np.take(m, np.arange(0, n - 1), axis=ax) <= np.take(m, np.arange(1, n), axis=ax)
        # m[i] <= m[i+1]
        right = np.concatenate([upper, np.ones_like(np.take(m, [0], axis=ax), dtype=bool)],
                               axis=ax)
        mask &= left & right
    return mask.reshape(S, -1)
