r"""A thick substrate: incoherent sum of the multiply reflected intensities.

A substrate much thicker than the coherence length of the light (a window, a lens, a wafer
measured by a spectrophotometer) is treated incoherently: the powers of the successive
reflections inside it add, each pass attenuated by the substrate's internal transmittance τ.
With the front coating seen from outside (R_f, T_f) and from inside (R_f'), and the back
coating seen from inside (R_b, T_b):

.. math::

    R = R_f + \frac{T_f^2 τ^2 R_b}{1 − R_f' R_b τ^2},\qquad
    T = \frac{T_f T_b τ}{1 − R_f' R_b τ^2},\qquad
    τ = \exp(−2\,\mathrm{Im}(k_z)\, d)

T_f is the same in both directions (reciprocity of transmittance between non-absorbing media).
The sums are done per polarisation (s and p do not mix); unpolarised light averages after.
The callers (:func:`filmstack.response.spectrum`) compute the coatings with the substrate's real
index (the common practice for weakly absorbing substrates), its absorption entering through τ,
except R_f, the light that never enters the substrate, which uses the complex index so that an
opaque substrate reflects what a semi-infinite one does.

References: Macleod, *Thin-Film Optical Filters*, 4th ed. (2010), §2.9 (incoherent reflection in
a thick substrate); O. S. Heavens, *Optical Properties of Thin Solid Films* (1955), ch. 4.
"""

from __future__ import annotations

import numpy as np

from ._grid import TWO_PI, normal_index

__all__ = ["internal_transmittance", "incoherent_sum", "incoherent_sum_derivatives"]


def internal_transmittance(n_substrate, thickness_nm, wavelength_nm, snell_invariant):
    """Single-pass power transmittance τ through a substrate.

    Parameters
    ----------
    n_substrate : complex array, shape (W,)
        Substrate index N = n + ik.
    thickness_nm : float
        Substrate thickness in nm.
    wavelength_nm : array, shape (W,)
    snell_invariant : array, shape (A, W)
        n0·sinθ0 of the light (θ0 in the incident medium).

    Returns
    -------
    τ, shape (A, W): exp(−2 Im(k_z) d), k_z = 2π sqrt(N² − s0²)/λ (the oblique path included).
    """
    q = normal_index(np.asarray(n_substrate, dtype=complex), np.asarray(snell_invariant))
    with np.errstate(under="ignore"):
        return np.exp(-2.0 * TWO_PI * q.imag * thickness_nm / np.asarray(wavelength_nm))


def incoherent_sum(Rf, Tf, Rf_inside, Rb, Tb, tau):
    """R and T of a part with a thick substrate, from its two coatings (arrays broadcast).

    Parameters: Rf, Tf front coating from outside; Rf_inside front coating's reflectance from
    inside the substrate; Rb, Tb back coating from inside; tau internal transmittance. All power
    fractions of one polarisation, any broadcastable shapes.

    Returns (R, T). References: Macleod (2010), §2.9.
    """
    tau2 = tau * tau
    denom = 1.0 - Rf_inside * Rb * tau2
    R = Rf + Tf * Tf * tau2 * Rb / denom
    T = Tf * Tb * tau / denom
    return R, T


def incoherent_sum_derivatives(Rf, Tf, Rf_inside, Rb, Tb, tau, dRf, dTf, dRf_inside):
    """Derivatives of :func:`incoherent_sum` with respect to front-layer thicknesses.

    dRf, dTf, dRf_inside have a layer axis at -3 (shape (..., L, A, W)); the others (..., A, W).
    Returns (dR, dT) shaped (..., L, A, W).
    """
    e = lambda a: np.expand_dims(a, -3)  # noqa: E731 - broadcast over the layer axis
    tau2 = e(tau * tau)
    denom = 1.0 - e(Rf_inside * Rb) * tau2
    num_r = e(Tf * Tf * Rb) * tau2
    dden = -dRf_inside * e(Rb) * tau2
    dR = dRf + (2.0 * e(Tf) * dTf * tau2 * e(Rb)) / denom - num_r * dden / denom ** 2
    num_t = e(Tf * Tb * tau)
    dT = dTf * e(Tb * tau) / denom - num_t * dden / denom ** 2
    return dR, dT
