"""Results of fits and the statistics behind their uncertainties.

Standard errors come from the linearised model at the solution. With weighted residuals
rᵢ = (fᵢ − yᵢ)/σᵢ and their Jacobian J (M × P), the covariance of the parameters is

    C = s² (JᵀJ)⁻¹,

where s² = Σ rᵢ² / (M − P) (the residual variance; σᵢ = 1 when the file gives no uncertainties)
or, when the measured uncertainties are taken as absolute, s² = 1. The standard error of
parameter j is √C_jj and the correlation ρ_jk = C_jk / √(C_jj C_kk).

References: W. H. Press et al., *Numerical Recipes*, 3rd ed. (Cambridge University Press, 2007),
§15.4–15.6; P. R. Bevington and D. K. Robinson, *Data Reduction and Error Analysis for the
Physical Sciences*, 3rd ed. (McGraw-Hill, 2003), ch. 8 (both from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["FitValue", "FitResult", "MapResult", "Uniformity", "covariance", "uniformity"]


def covariance(Jw: np.ndarray, rw: np.ndarray, *, absolute: bool = False):
    """Parameter covariance from weighted Jacobians and residuals, batched.

    Parameters
    ----------
    Jw
        Weighted Jacobian, shape (S, M, P).
    rw
        Weighted residuals, shape (S, M).
    absolute
        Take the weights as absolute 1/σ (s² = 1) instead of scaling by the residual variance.

    Returns
    -------
    cov : (S, P, P), stderr : (S, P), corr : (S, P, P), singular : (S, P) bool
        ``singular`` marks parameters the data cannot determine (in the null space of J, to
        within 1e-10 of the largest eigenvalue of the scaled JᵀJ); their stderr is ``inf``.
    """
    S, M, P = Jw.shape
    H = np.einsum("smi,smj->sij", Jw, Jw)
    D = np.sqrt(np.einsum("sii->si", H))                                   # (S, P)
    Dsafe = np.where(D > 0, D, 1.0)
    Hs = H / (Dsafe[:, :, None] * Dsafe[:, None, :])
    vals, vecs = np.linalg.eigh(Hs)
    tiny = vals < 1e-10 * np.maximum(vals[:, -1:], 1e-300)
    inv_vals = np.where(tiny, 0.0, 1.0 / np.where(tiny, 1.0, vals))
    inv = np.einsum("sik,sk,sjk->sij", vecs, inv_vals, vecs)
    null_weight = np.einsum("sik,sk->si", vecs**2, tiny.astype(float))
    singular = (null_weight > 0.01) | (D == 0)
    dof = M - P
    if absolute:
        s2 = np.ones(S)
    else:
        s2 = np.sum(rw**2, axis=1) / dof if dof > 0 else np.full(S, np.inf)
    cov = inv / (Dsafe[:, :, None] * Dsafe[:, None, :]) * s2[:, None, None]
    var = np.einsum("sii->si", cov)
    stderr = np.where(singular, np.inf, np.sqrt(np.maximum(var, 0.0)))
    se = np.where(stderr > 0, stderr, 1.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / (se[:, :, None] * se[:, None, :])
    corr = np.where(singular[:, :, None] | singular[:, None, :], np.nan, corr)
    idx = np.arange(P)
    corr[:, idx, idx] = 1.0
    return cov, stderr, corr, singular


@dataclass(frozen=True)
class FitValue:
    """A fitted parameter: ``value ± stderr`` (1σ), in ``unit``, with its bounds."""

    name: str
    value: float
    stderr: float
    unit: str = ""
    lower: float = -math.inf
    upper: float = math.inf
    at_bound: bool = False

    def as_dict(self) -> dict:
        """``{"name", "value", "stderr"}`` as in the JSON result (DESIGN.md §5)."""
        return {"name": self.name, "value": self.value,
                "stderr": self.stderr if math.isfinite(self.stderr) else None}


@dataclass
class FitResult:
    """The fit of one measurement.

    Attributes
    ----------
    parameters
        Fitted values with standard errors, in the model's order.
    correlation
        Correlation matrix (P, P).
    covariance
        Covariance matrix (P, P), in the parameters' units.
    rms
        Root-mean-square of (measured − model) over all points, as a fraction (0.001 = 0.1 %).
    chi2_reduced
        Σ((measured − model)/σ)² / (M − P) when the file gives uncertainties, else ``None``.
    n_points
        Number of measured points M.
    x
        The fitted parameter vector (P,).
    stack
        The model stack at the fitted values (a :class:`~filmstack.stack.Stack`).
    measurement
        What was fitted (:class:`~filmstack.io.measured.Measurement`).
    model_values
        The model at the measured points, shape (M,), channels concatenated in order.
    warnings
        Ambiguity, parameters on a bound, strong correlations, undetermined parameters.
    alternatives
        Other distinct minima found by the global stage: ``(x, rms)`` pairs, best first.
    success, message, nfev
        From the local optimiser (scipy.optimize.least_squares).
    model
        The :class:`~filmstack.fit.FitModel` that was fitted.
    """

    parameters: tuple[FitValue, ...]
    correlation: np.ndarray
    covariance: np.ndarray
    rms: float
    chi2_reduced: float | None
    n_points: int
    x: np.ndarray
    stack: object
    measurement: object
    model_values: np.ndarray
    warnings: tuple[str, ...] = ()
    alternatives: tuple = ()
    success: bool = True
    message: str = ""
    nfev: int = 0
    model: object = None

    def model_at(self, channel, wavelength_nm) -> np.ndarray:
        """The fitted model for ``channel``'s quantity, angle and polarisation at other
        wavelengths (nm, shape (W,)), with any fitted shift and scale applied: e.g. a smooth
        curve for a plot."""
        from ..io.measured import Channel
        from ._evaluate import Evaluator

        wl = np.asarray(wavelength_nm, dtype=float)
        ch = Channel(channel.quantity, channel.angle_deg, channel.polarization, wl,
                     np.zeros_like(wl))
        return Evaluator(self.model, [ch])(self.x[None])[0][0]

    def __getitem__(self, name: str) -> FitValue:
        for p in self.parameters:
            if p.name == name:
                return p
        raise KeyError(name)

    @property
    def ambiguous(self) -> bool:
        return any("ambiguous" in w for w in self.warnings)

    def curves(self):
        """Per channel: ``(channel, model values (W,))``."""
        out, off = [], 0
        for c in self.measurement.channels:
            n = c.wavelength_nm.size
            out.append((c, self.model_values[off:off + n]))
            off += n
        return out

    def as_dict(self) -> dict:
        """The JSON form: ``parameters``, ``rms``, ``chi2_reduced``, ``correlation``, …"""
        return {
            "parameters": [p.as_dict() for p in self.parameters],
            "rms": self.rms,
            "chi2_reduced": self.chi2_reduced,
            "n_points": self.n_points,
            "correlation": {"names": [p.name for p in self.parameters],
                            "matrix": self.correlation},
            "warnings": list(self.warnings),
            "alternatives": [{"parameters": dict(zip([p.name for p in self.parameters],
                                                     map(float, x))), "rms": rms}
                             for x, rms in self.alternatives],
        }


@dataclass(frozen=True)
class Uniformity:
    """Uniformity figures of one parameter over the sites of a map.

    ``nonuniformity`` is (max − min) / (2·mean) (common practice in wafer metrology, no
    published source); ``sigma`` the sample standard deviation (ddof = 1).
    """

    name: str
    mean: float
    minimum: float
    maximum: float
    range: float
    sigma: float
    nonuniformity: float
    n_sites: int

    def as_dict(self) -> dict:
        return {"name": self.name, "mean": self.mean, "min": self.minimum,
                "max": self.maximum, "range": self.range, "sigma": self.sigma,
                "nonuniformity": self.nonuniformity, "n_sites": self.n_sites}


def uniformity(values, name: str = "") -> Uniformity:
    """Mean, min, max, range, σ (ddof=1) and (max − min)/(2·mean) of ``values`` (finite ones)."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        nan = float("nan")
        return Uniformity(name, nan, nan, nan, nan, nan, nan, 0)
    mean = float(v.mean())
    lo, hi = float(v.min()), float(v.max())
    sigma = float(v.std(ddof=1)) if v.size > 1 else 0.0
    nu = (hi - lo) / (2.0 * mean) if mean != 0 else float("nan")
    return Uniformity(name, mean, lo, hi, hi - lo, sigma, nu, int(v.size))


@dataclass
class MapResult:
    """Fits of many sites (a wafer map), as arrays over sites.

    Attributes
    ----------
    names, units
        Parameter names and units (P,).
    site
        Site ids (S,).
    x_mm, y_mm
        Positions (S,), NaN where unknown.
    values, stderr
        Fitted values and standard errors (S, P).
    rms
        Residual RMS per site (S,), fraction.
    chi2_reduced
        (S,) or ``None`` when the files give no uncertainties.
    at_bound
        (S, P) bool: the value sits on a bound.
    ambiguous
        (S,) bool: another minimum fits about as well.
    warnings
        Per site, a list of messages.
    interrupted
        True if the fit was stopped early (Ctrl-C): values are the best so far.
    poor_fit
        (S,) bool: the site's residual RMS is far above the map's median (a bad measurement,
        or the model does not describe that site); ``None`` means none flagged. The site's
        values are still part of the uniformity figures: look at the site.
    """

    names: list[str]
    units: list[str]
    site: list[str]
    x_mm: np.ndarray
    y_mm: np.ndarray
    values: np.ndarray
    stderr: np.ndarray
    rms: np.ndarray
    chi2_reduced: np.ndarray | None
    at_bound: np.ndarray
    ambiguous: np.ndarray
    warnings: list[list[str]] = field(default_factory=list)
    interrupted: bool = False
    poor_fit: np.ndarray | None = None

    def __post_init__(self):
        if self.poor_fit is None:
            self.poor_fit = np.zeros(len(self.site), dtype=bool)

    def __len__(self) -> int:
        return len(self.site)

    def column(self, name: str) -> np.ndarray:
        """Fitted values of parameter ``name`` over sites (S,)."""
        return self.values[:, self.names.index(name)]

    def uniformity(self, name: str | None = None) -> Uniformity:
        """Uniformity figures of parameter ``name`` (default: the first)."""
        name = self.names[0] if name is None else name
        return uniformity(self.column(name), name)

    def as_dict(self) -> dict:
        """The JSON form: ``parameters`` (mean over sites, with the standard error of that mean,
        and uniformity figures), ``rms`` (RMS over all sites), ``sites``."""
        params = []
        for j, name in enumerate(self.names):
            u = self.uniformity(name)
            d = {"name": name, "value": u.mean,
                 "stderr": (u.sigma / math.sqrt(u.n_sites)) if u.n_sites > 1 else None}
            d.update({k: v for k, v in u.as_dict().items() if k != "name"})
            params.append(d)
        sites = []
        for i, sid in enumerate(self.site):
            sites.append({
                "site": sid,
                "x_mm": None if not np.isfinite(self.x_mm[i]) else float(self.x_mm[i]),
                "y_mm": None if not np.isfinite(self.y_mm[i]) else float(self.y_mm[i]),
                "parameters": [{"name": n, "value": float(self.values[i, j]),
                                "stderr": (float(self.stderr[i, j])
                                           if np.isfinite(self.stderr[i, j]) else None)}
                               for j, n in enumerate(self.names)],
                "rms": float(self.rms[i]),
                "warnings": list(self.warnings[i]) if self.warnings else [],
            })
        return {"parameters": params,
                "rms": (float(np.sqrt(np.nanmean(self.rms**2)))
                        if np.isfinite(self.rms).any() else None),
                "n_sites": len(self), "n_ambiguous": int(self.ambiguous.sum()),
                "n_poor_fit": int(self.poor_fit.sum()),
                "interrupted": self.interrupted, "sites": sites}
