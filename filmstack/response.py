"""The optical response of a :class:`~filmstack.stack.Stack`: spectra, derivatives, phase, fields.

These functions evaluate the materials of a stack on the wavelength grid and call the array
engine in :mod:`filmstack.optics`. Units: wavelength nm, thickness nm, angles degrees; R, T, A as
fractions; phase in radians, group delay in fs, group-delay dispersion in fs².

Shapes: results are (..., A, W) for A angles and W wavelengths, where ``...`` are the batch
dimensions of the optional overrides ``thicknesses_nm`` (..., L) and ``layer_indices``
(..., L, W) — a Monte Carlo run or a thickness sweep is one call. Derivatives with respect to the
front-layer thicknesses are (..., L, A, W), per nm.

A stack with ``substrate_mm`` is a thick, incoherent part (both faces, back coating, substrate
absorption; :mod:`filmstack.optics.incoherent`); otherwise the substrate is semi-infinite and the
amplitudes r, t are defined for a single polarisation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .optics import coherent_derivatives, coherent_response, stack_vectors
from .optics._grid import check_polarization, fmt
from .optics.incoherent import incoherent_sum, incoherent_sum_derivatives, internal_transmittance
from .stack import Stack

__all__ = ["Spectrum", "SpectrumDerivatives", "PhaseResponse", "FieldProfile", "spectrum",
           "spectrum_derivatives", "phase_response", "field_profile", "SPEED_OF_LIGHT_NM_PER_FS"]

#: Speed of light in vacuum, nm/fs (exact by the SI definition of the metre).
SPEED_OF_LIGHT_NM_PER_FS = 299.792458

#: Largest phase change (rad) between neighbouring points of the GD/GDD difference stencil.
_PHASE_STEP_RAD = 0.02


@dataclass
class Spectrum:
    """R, T, A of a stack over wavelength and angle.

    wavelength_nm (W,), angle_deg (A,), polarization; R, T, A (..., A, W) fractions; r, t complex
    amplitudes (..., A, W) for 's' or 'p' on a semi-infinite substrate, otherwise None (see
    :mod:`filmstack.optics.coherent` for their conventions).
    """

    wavelength_nm: np.ndarray
    angle_deg: np.ndarray
    polarization: str
    R: np.ndarray
    T: np.ndarray
    A: np.ndarray
    r: np.ndarray | None = None
    t: np.ndarray | None = None


@dataclass
class SpectrumDerivatives(Spectrum):
    """A :class:`Spectrum` with derivatives per nm of every front-layer thickness.

    dR, dT, dA: (..., L, A, W). For 's'/'p' on a semi-infinite substrate also dr, dt (complex),
    phase_r = arg r (..., A, W) and dphase_r (..., L, A, W) in rad/nm.
    """

    dR: np.ndarray | None = None
    dT: np.ndarray | None = None
    dA: np.ndarray | None = None
    dr: np.ndarray | None = None
    dt: np.ndarray | None = None
    phase_r: np.ndarray | None = None
    dphase_r: np.ndarray | None = None


@dataclass
class PhaseResponse:
    """Phase (rad), group delay (fs) and group-delay dispersion (fs²), each shaped (W,)."""

    wavelength_nm: np.ndarray
    phase_rad: np.ndarray
    gd_fs: np.ndarray
    gdd_fs2: np.ndarray
    side: str
    polarization: str


@dataclass
class FieldProfile:
    """|E|² versus depth, normalised to the incident wave's |E|².

    depth_nm (Z,): 0 at the outer surface, increasing into the stack (negative values lie in
    the incident medium); e2 (Z,); interfaces_nm: depth of every interface, outer surface first;
    layer_index (Z,): the layer each point lies in (deposition index; −1 incident medium, L the
    substrate).
    """

    depth_nm: np.ndarray
    e2: np.ndarray
    interfaces_nm: np.ndarray
    layer_index: np.ndarray
    wavelength_nm: float
    angle_deg: float
    polarization: str


# ------------------------------------------------------------------------------------------------


def _absorptance(R, T):
    """A = 1 − R − T, with rounding noise (|A| < 1e-14, e.g. −6e-17 for a lossless stack) set to 0."""
    A = 1.0 - R - T
    return np.where(np.abs(A) < 1e-14, 0.0, A)


def _floats(value, name: str) -> np.ndarray:
    """``value`` as an at-least-1-D float array; text or other non-numbers name the argument."""
    try:
        return np.atleast_1d(np.asarray(value, dtype=float))
    except (TypeError, ValueError):
        raise InputError(f"{name} must be numbers, got {value!r}") from None


def _scalar(value, name: str) -> float:
    """One number (a wavelength or an angle of a single-point function)."""
    x = _floats(value, name)
    if x.size != 1:
        raise InputError(f"{name} must be one number, got {x.size} values")
    return float(x.ravel()[0])


def _grid(wavelengths_nm, angles_deg, names=("wavelengths_nm", "angles_deg")):
    """Check the user's grid, naming the arguments as the calling function spells them."""
    wn, an = names
    wl = _floats(wavelengths_nm, wn)
    ang = _floats(angles_deg, an)
    if wl.ndim != 1 or wl.size == 0:
        raise InputError(f"{wn} must be a non-empty 1-D list, got shape {wl.shape}")
    if not np.all(np.isfinite(wl)) or np.any(wl <= 0):
        bad = wl[~(np.isfinite(wl) & (wl > 0))][0]
        raise InputError(f"{wn} must be finite and > 0 nm, got {fmt(bad)}")
    if ang.ndim != 1 or ang.size == 0:
        raise InputError(f"{an} must be a number or a non-empty 1-D list, got shape {ang.shape}")
    ok = np.isfinite(ang) & (ang >= 0) & (ang < 90)
    if not np.all(ok):
        raise InputError(f"{an} must be in [0, 90) degrees, got {fmt(ang[~ok][0])}")
    return wl, ang


def _inputs(stack: Stack, wl, thicknesses_nm, layer_indices, extrapolate):
    """Engine inputs of the front side: (N (..., L, W), d (..., L), n0 (W,), n_sub (W,))."""
    n0 = stack.incident.nk(wl, extrapolate=extrapolate)
    if np.any(n0.imag != 0):
        raise InputError(f"incident medium '{stack.incident.name}' absorbs (k up to "
                         f"{n0.imag.max():.3g}); light must arrive from a non-absorbing medium")
    n_sub = stack.substrate.nk(wl, extrapolate=extrapolate)
    if layer_indices is None:
        N = stack.layer_indices(wl, extrapolate=extrapolate)
    else:
        N = np.asarray(layer_indices, dtype=complex)
    d = stack.thicknesses_nm if thicknesses_nm is None else np.asarray(thicknesses_nm, dtype=float)
    if thicknesses_nm is not None:
        ok = np.isfinite(d) & (d >= 0)
        if not np.all(ok):
            raise InputError(f"thicknesses_nm must be finite and >= 0 nm, got {fmt(d[~ok][0])}")
    if layer_indices is not None:
        if not np.all(np.isfinite(N)):
            raise InputError(f"layer_indices must be finite, got {fmt(N[~np.isfinite(N)][0])}")
        if np.any(N.imag < 0):
            raise InputError(f"layer_indices: k must be >= 0 (absorption), got k = "
                             f"{fmt(N.imag.min())}")
        if np.any(N.real <= 0):
            raise InputError(f"layer_indices: n must be > 0, got n = {fmt(N.real.min())}")
    L = len(stack.layers)
    if d.ndim < 1 or d.shape[-1] != L:
        raise InputError(f"thicknesses_nm must have shape (..., {L}) for this stack's {L} "
                         f"layers, got shape {d.shape}")
    if N.ndim < 2 or N.shape[-2:] != (L, wl.size):
        raise InputError(f"layer_indices must have shape (..., {L}, {wl.size}), got {N.shape}")
    return N, d, n0.real, n_sub


def _thick_parts(stack, wl, ang, pol, N, d, n0, n_sub, extrapolate, derivatives=False):
    """R, T (and dR, dT) of one polarisation for a thick substrate.

    The coatings are computed with the substrate's real index, the common practice for weakly
    absorbing substrates (:mod:`filmstack.optics.incoherent`), with one exception: the light
    reflected by the front coating never enters the substrate, so its reflectance R_f is
    computed with the substrate's complex index. An opaque substrate (a metal, silicon in the
    ultraviolet) then reflects exactly what a semi-infinite one does, and T — which does not
    involve R_f — stays the same from either side of the part (reciprocity).
    """
    engine = coherent_derivatives if derivatives else coherent_response
    ns_real = n_sub.real
    s0 = n0[None, :] * np.sin(np.deg2rad(ang))[:, None]                       # (A, W)
    front = engine(N, d, n0, ns_real, wl, ang, pol)
    front_r = engine(N, d, n0, n_sub, wl, ang, pol) if np.any(n_sub.imag != 0) else front
    inside = engine(N[..., ::-1, :], d[..., ::-1], ns_real, n0, wl, ang, pol,
                    snell_invariant=s0)
    Nb = stack.back_layer_indices(wl, extrapolate=extrapolate)
    db = np.array([l.thickness_nm for l in stack.back_layers], dtype=float)
    n_exit = stack.exit.nk(wl, extrapolate=extrapolate)
    back = coherent_response(Nb[::-1], db[::-1], ns_real, n_exit, wl, ang, pol,
                             snell_invariant=s0)
    tau = internal_transmittance(n_sub, stack.substrate_mm * 1e6, wl, s0)
    R, T = incoherent_sum(front_r.R, front.T, inside.R, back.R, back.T, tau)
    if not derivatives:
        return R, T, None, None
    dR, dT = incoherent_sum_derivatives(front_r.R, front.T, inside.R, back.R, back.T, tau,
                                        front_r.dR, front.dT, inside.dR[..., ::-1, :, :])
    return R, T, dR, dT


def spectrum(stack: Stack, wavelengths_nm, angles_deg=0.0, polarization: str = "mean", *,
             thicknesses_nm=None, layer_indices=None, extrapolate: bool = False) -> Spectrum:
    """R, T and A of a stack over wavelengths and angles.

    Parameters
    ----------
    stack
        The coated part.
    wavelengths_nm : array_like, shape (W,)
        Vacuum wavelengths, nm.
    angles_deg : float or array_like, shape (A,)
        Angles of incidence in the incident medium, degrees in [0, 90).
    polarization : {'s', 'p', 'mean'}
        'mean' is unpolarised light (the mean of the s and p powers).
    thicknesses_nm : array_like, shape (..., L), optional
        Front-layer thicknesses replacing the stack's (batch dimensions allowed).
    layer_indices : array_like, complex, shape (..., L, W), optional
        Front-layer indices replacing the materials' (e.g. perturbed for a tolerance run).
    extrapolate
        Allow materials outside their data range (warned).

    Returns
    -------
    Spectrum with R, T, A shaped (..., A, W).

    References: Macleod, *Thin-Film Optical Filters*, 4th ed. (2010), ch. 2.
    """
    wl, ang = _grid(wavelengths_nm, angles_deg)
    pols = check_polarization(polarization)
    N, d, n0, n_sub = _inputs(stack, wl, thicknesses_nm, layer_indices, extrapolate)
    if stack.substrate_mm is None:
        res = coherent_response(N, d, n0, n_sub, wl, ang, polarization)
        return Spectrum(wl, ang, polarization, res.R, res.T, _absorptance(res.R, res.T), res.r,
                        res.t)
    parts = [_thick_parts(stack, wl, ang, p, N, d, n0, n_sub, extrapolate) for p in pols]
    R = sum(p[0] for p in parts) / len(parts)
    T = sum(p[1] for p in parts) / len(parts)
    return Spectrum(wl, ang, polarization, R, T, _absorptance(R, T))


def spectrum_derivatives(stack: Stack, wavelengths_nm, angles_deg=0.0,
                         polarization: str = "mean", *, thicknesses_nm=None, layer_indices=None,
                         extrapolate: bool = False) -> SpectrumDerivatives:
    """:func:`spectrum` and its derivatives per nm of every front-layer thickness.

    Same parameters as :func:`spectrum`. Derivatives are analytic (an adjoint sweep through the
    stack, :func:`filmstack.optics.coherent_derivatives`), shaped (..., L, A, W), and include
    the incoherent substrate when the stack has one.
    """
    wl, ang = _grid(wavelengths_nm, angles_deg)
    pols = check_polarization(polarization)
    N, d, n0, n_sub = _inputs(stack, wl, thicknesses_nm, layer_indices, extrapolate)
    if stack.substrate_mm is None:
        res = coherent_derivatives(N, d, n0, n_sub, wl, ang, polarization)
        return SpectrumDerivatives(wl, ang, polarization, res.R, res.T,
                                   _absorptance(res.R, res.T), res.r, res.t,
                                   dR=res.dR, dT=res.dT, dA=res.dA, dr=res.dr, dt=res.dt,
                                   phase_r=res.phase_r, dphase_r=res.dphase_r)
    parts = [_thick_parts(stack, wl, ang, p, N, d, n0, n_sub, extrapolate, derivatives=True)
             for p in pols]
    n = len(parts)
    R, T, dR, dT = (sum(p[i] for p in parts) / n for i in range(4))
    return SpectrumDerivatives(wl, ang, polarization, R, T, _absorptance(R, T), dR=dR, dT=dT,
                               dA=-(dR + dT))


def _amplitude(stack, wl, angle_deg, polarization, side, extrapolate):
    """Complex r or t of the front coating (substrate taken as semi-infinite), shape (W,)."""
    N, d, n0, n_sub = _inputs(stack, wl, None, None, extrapolate)
    res = coherent_response(N, d, n0, n_sub, wl, [angle_deg], polarization)
    return (res.r if side == "reflected" else res.t)[0]


def phase_response(stack: Stack, wavelengths_nm, angle_deg: float = 0.0,
                   polarization: str = "s", side: str = "reflected", *,
                   extrapolate: bool = False) -> PhaseResponse:
    """Phase, group delay and group-delay dispersion of reflection or transmission.

    With the time dependence exp(−iωt), GD = dφ/dω and GDD = d²φ/dω² (ω = 2πc/λ). They are
    computed by five-point central differences in ω on phase *differences* arg(r(ω + kh)·r*(ω)),
    so no unwrapping is needed. The step starts at h = 1e-3·ω and shrinks, per wavelength, until
    the phase changes by at most 0.02 rad a step (h·|GD| <= 0.02), which keeps the truncation
    error near (0.02)^4 relative even for group delays of picoseconds. The materials' dispersion
    is included (they are evaluated at the shifted wavelengths). For a thick substrate the front coating is
    taken with a semi-infinite substrate (the phase of an incoherent part is not defined).

    Parameters
    ----------
    stack, wavelengths_nm (W,), angle_deg (one angle, degrees), polarization ('s' or 'p'),
    side ('reflected' or 'transmitted').

    Returns
    -------
    PhaseResponse with phase_rad, gd_fs, gdd_fs2 shaped (W,).

    References: A. M. Weiner, *Ultrafast Optics* (Wiley, 2009), §4.1 (group delay and its
    dispersion); B. Fornberg, Math. Comp. 51, 699 (1988) (finite-difference weights).
    """
    if polarization not in ("s", "p"):
        raise InputError(f"phase needs polarization 's' or 'p', got {polarization!r}")
    if side not in ("reflected", "transmitted"):
        raise InputError(f"side must be 'reflected' or 'transmitted', got {side!r}")
    angle_deg = _scalar(angle_deg, "angle_deg")
    wl, _ = _grid(wavelengths_nm, angle_deg, names=("wavelengths_nm", "angle_deg"))
    omega = 2.0 * np.pi * SPEED_OF_LIGHT_NM_PER_FS / wl                        # rad/fs
    a0 = _amplitude(stack, wl, angle_deg, polarization, side, extrapolate)
    h = 1e-3 * omega
    for _ in range(8):
        dphi = {}
        for k in (-2, -1, 1, 2):
            wl_k = 2.0 * np.pi * SPEED_OF_LIGHT_NM_PER_FS / (omega + k * h)
            amp = _amplitude(stack, wl_k, angle_deg, polarization, side, extrapolate)
            dphi[k] = np.angle(amp * np.conj(a0))
        gd = (8.0 * (dphi[1] - dphi[-1]) - (dphi[2] - dphi[-2])) / (12.0 * h)
        # Keep the phase step h·|GD| below _PHASE_STEP_RAD so that the stencil resolves the
        # phase (truncation error ~ (h·GD)^4) and no difference wraps past π.
        h_new = np.maximum(np.minimum(h, _PHASE_STEP_RAD / np.maximum(np.abs(gd), 1e-30)),
                           1e-9 * omega)
        if np.all(h_new >= 0.5 * h):
            break
        h = h_new
    gdd = (-dphi[2] + 16.0 * dphi[1] + 16.0 * dphi[-1] - dphi[-2]) / (12.0 * h * h)
    return PhaseResponse(wl, np.angle(a0), gd, gdd, side, polarization)


def field_profile(stack: Stack, wavelength_nm: float, angle_deg: float = 0.0,
                  polarization: str = "s", step_nm: float = 1.0, *, margin_nm: float | None = None,
                  extrapolate: bool = False) -> FieldProfile:
    """|E|² through the stack at one wavelength and angle, relative to the incident wave.

    The tangential fields at each interface come from :func:`filmstack.optics.stack_vectors`;
    inside a layer (or a medium) they are carried by the layer's characteristic matrix. For s,
    |E|² = |E_y|²; for p, |E|² = |E_x|² + |E_z|² with E_z = −(n0 sinθ0 / N²)·H_y. The incident
    medium shows the standing wave of incident and reflected light; the substrate is taken as
    semi-infinite.

    Parameters
    ----------
    stack, wavelength_nm (one wavelength, nm), angle_deg (degrees), polarization ('s'/'p'),
    step_nm: sampling step in nm, margin_nm: how far to show into the incident medium and the
    substrate (default a quarter of the stack thickness, at least 50 nm).

    Returns
    -------
    FieldProfile (depth_nm measured from the outer surface into the stack).

    References: Macleod (2010), §2.2 (fields from the characteristic matrix).
    """
    if polarization not in ("s", "p"):
        raise InputError(f"field profile needs polarization 's' or 'p', got {polarization!r}")
    step_nm = _scalar(step_nm, "step_nm")
    if not (np.isfinite(step_nm) and step_nm > 0):
        raise InputError(f"step_nm must be > 0, got {step_nm!r}")
    angle_deg = _scalar(angle_deg, "angle_deg")
    wl, _ = _grid(_scalar(wavelength_nm, "wavelength_nm"), angle_deg,
                  names=("wavelength_nm", "angle_deg"))
    N, d, n0, n_sub = _inputs(stack, wl, None, None, extrapolate)
    sv = stack_vectors(N, d, n0, n_sub, wl, [angle_deg], polarization)
    L = d.size
    total = float(d.sum())
    margin = max(50.0, total / 4) if margin_nm is None else float(margin_nm)
    s0 = n0[0] * np.sin(np.deg2rad(angle_deg))
    cos0 = np.cos(np.deg2rad(angle_deg))
    kz = sv.kz[:, 0, 0]
    eta = sv.eta[:, 0, 0]
    v = sv.v[:, :, 0, 0]                                         # (L+1, 2)
    from .optics._grid import TWO_PI, normal_index, tilted_admittance
    q_in = n0[0] * cos0
    q_sub = normal_index(n_sub[0], s0)
    media = {
        "in": (TWO_PI * q_in / wl[0], tilted_admittance(n0[0] + 0j, q_in + 0j, polarization),
               n0[0] + 0j),
        "sub": (TWO_PI * q_sub / wl[0], tilted_admittance(n_sub[0], q_sub, polarization),
                n_sub[0]),
    }
    # Interfaces by depth from the outer surface: top of layer L-1 at 0, substrate at `total`.
    tops = total - np.concatenate([[0.0], np.cumsum(d)])          # depth of interface j
    depths, e2, where = [], [], []

    def emit(z_depth, ref_vec, height, k, e, Nmed, label):
        c, s = np.cos(k * height), np.sin(k * height)
        B = c * ref_vec[0] - 1j * s / e * ref_vec[1]
        C = -1j * e * s * ref_vec[0] + c * ref_vec[1]
        if polarization == "s":
            val = np.abs(B) ** 2
        else:
            val = (np.abs(B) ** 2 + np.abs(s0 * C / (Nmed * Nmed)) ** 2) * cos0 ** 2
        depths.append(z_depth)
        e2.append(val)
        where.append(np.full(np.shape(z_depth), label))

    # incident medium: heights above the top interface
    z = np.arange(-margin, 0.0, step_nm)
    k, e, Nm = media["in"]
    emit(z, v[L], -z, k, e, Nm, -1)
    for j in range(L - 1, -1, -1):
        zj = np.arange(tops[j + 1], tops[j], step_nm)
        emit(zj, v[j], tops[j] - zj, kz[j], eta[j], N[j, 0], j)
    zs = np.arange(total, total + margin + step_nm / 2, step_nm)
    k, e, Nm = media["sub"]
    emit(zs, v[0], total - zs, k, e, Nm, L)
    return FieldProfile(np.concatenate(depths), np.concatenate(e2), tops[::-1].copy(),
                        np.concatenate(where).astype(int), float(wl[0]),
                        float(angle_deg), polarization)
