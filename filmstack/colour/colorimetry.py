"""CIE colorimetry of spectra: tristimulus values, CIELAB, LCh, sRGB, ΔE2000.

Every function here is pure and works on arrays with the **spectral axis last** and any leading
shape: spectra (..., W) give XYZ (..., 3), XYZ (..., 3) give Lab (..., 3), and so on.

Conventions
-----------
=================  ==========================================================================
quantity           convention
=================  ==========================================================================
wavelength         nm (vacuum), a 1-D increasing grid of W points
spectrum           reflectance or transmittance as a fraction 0–1, shape (..., W)
XYZ                CIE tristimulus values on the 0–100 scale: the perfect reflecting diffuser
                   under the chosen illuminant has Y = 100 (CIE 15)
white              the reference white XYZ_n for CIELAB (default: the perfect reflecting
                   diffuser under the same illuminant and observer)
Lab                CIE 1976 L*a*b*; LCh: lightness, chroma, hue angle h in **degrees** 0–360
sRGB               IEC 61966-2-1 primaries and D65 white; the colour is first adapted from the
                   illuminant's white to D65 with the Bradford transform; values 0–1
=================  ==========================================================================

Tristimulus weights
-------------------
The CIE data (colour-matching functions of the CIE 1931 2° and CIE 1964 10° standard observers at
1 nm from 360 to 830 nm; the relative spectral power of illuminants D65, D50, A, F2, F11) come
from colour-science, never typed by hand. For a spectrum sampled on an arbitrary grid ``wl`` the
weights are the exact integral, over the 1 nm CIE grid, of the spectrum *linearly interpolated*
between its samples (and held constant beyond its first and last sample, as ASTM E308 does when it
adds the tails to the end weights)::

    w_j = k Σ_f  B_fj  x̄(λ_f) S(λ_f) Δλ,   k = 100 / Σ_f ȳ(λ_f) S(λ_f) Δλ,

with ``B`` the (F, W) linear-interpolation matrix. Then ``XYZ = R @ w`` is one array product over
the last axis, so thousands of spectra (a thickness sweep) take milliseconds. On the 1 nm grid
360–830 nm ``B`` is the identity and the result equals colour-science's ``sd_to_XYZ`` with the
"Integration" method. The illuminant is brought to the 1 nm grid as colour-science does it
(linear interpolation, constant extrapolation).

References: CIE 15:2018 *Colorimetry*, 4th ed. (tristimulus values, CIELAB, §7–8); ASTM E308-18
(weights, truncated ranges); IEC 61966-2-1:1999 (sRGB); Lam (1985) and Lindbloom for the Bradford
transform; G. Sharma, W. Wu, E. N. Dalal, Color Res. Appl. 30, 21 (2005) (CIEDE2000);
colour-science (Mansencal et al., doi:10.5281/zenodo.3757045) for the data and conversions.
"""

from __future__ import annotations

import functools

import numpy as np

from ..errors import InputError

__all__ = [
    "ILLUMINANTS",
    "OBSERVERS",
    "COLOUR_WAVELENGTHS_NM",
    "normalise_illuminant",
    "normalise_observer",
    "tristimulus_weights",
    "white_point_XYZ",
    "spectra_to_XYZ",
    "XYZ_to_xyY",
    "XYZ_to_Lab",
    "Lab_to_XYZ",
    "Lab_to_LCh",
    "XYZ_to_srgb",
    "srgb_to_XYZ",
    "srgb_linear_to_XYZ",
    "XYZ_to_srgb_linear",
    "srgb_encode",
    "srgb_decode",
    "srgb_to_hex",
    "hex_to_srgb",
    "delta_e_2000",
]

#: Supported illuminants: our name -> colour-science's key in ``SDS_ILLUMINANTS``.
ILLUMINANTS = {"D65": "D65", "D50": "D50", "A": "A", "F2": "FL2", "F11": "FL11"}

#: Supported observers: field size in degrees -> colour-science's key in ``MSDS_CMFS``.
OBSERVERS = {2: "CIE 1931 2 Degree Standard Observer",
             10: "CIE 1964 10 Degree Standard Observer"}

#: The wavelength grid (nm) used for the colour of a stack: 380–780 nm every 5 nm (ASTM E308's
#: recommended range and interval); the CIE tails outside it are held at the end values.
COLOUR_WAVELENGTHS_NM = np.arange(380.0, 780.0 + 0.5, 5.0)

# Out-of-gamut tolerance on linear sRGB channels: the white itself lands at 1 ± 1e-4 (the sRGB
# matrix is built from rounded chromaticities); 1e-3 is below one 8-bit step of the encoded value.
_GAMUT_TOL = 1e-3


def normalise_illuminant(name) -> str:
    """Our canonical illuminant name ('D65', 'D50', 'A', 'F2', 'F11') from a user's spelling.

    Accepts any case and the colour-science spellings 'FL2'/'FL11'. Raises InputError otherwise.
    """
    s = str(name).strip().upper()
    s = {"FL2": "F2", "FL11": "F11"}.get(s, s)
    if s not in ILLUMINANTS:
        raise InputError(f"unknown illuminant {name!r}; expected one of "
                         + ", ".join(ILLUMINANTS))
    return s


def normalise_observer(observer) -> int:
    """The observer's field size 2 or 10 (degrees) from 2, 10, '2', '10°', '10deg', ..."""
    s = str(observer).strip().lower().replace("°", "").replace("deg", "").strip()
    v = {"2": 2, "2.0": 2, "10": 10, "10.0": 10}.get(s)
    if v is None:
        raise InputError(f"unknown observer {observer!r}; expected 2 (CIE 1931) or 10 (CIE 1964)")
    return v


@functools.lru_cache(maxsize=None)
def _cie_data(illuminant: str, observer: int):
    """(λ (F,), x̄ȳz̄ (F, 3), S (F,)) on colour-science's 1 nm CMF grid, 360–830 nm."""
    import colour
    from colour.colorimetry import reshape_sd

    cmfs = colour.MSDS_CMFS[OBSERVERS[observer]]
    sd = reshape_sd(colour.SDS_ILLUMINANTS[ILLUMINANTS[illuminant]], cmfs.shape)
    wl = np.asarray(cmfs.wavelengths, dtype=float)
    cmf = np.asarray(cmfs.values, dtype=float)
    s = np.asarray(sd.values, dtype=float)
    for a in (wl, cmf, s):
        a.setflags(write=False)
    return wl, cmf, s


def _check_grid(wavelengths_nm) -> np.ndarray:
    wl = np.asarray(wavelengths_nm, dtype=float)
    if wl.ndim != 1 or wl.size < 2:
        raise InputError(f"the wavelength grid must be 1-D with at least 2 points, "
                         f"got shape {wl.shape}")
    if not np.all(np.isfinite(wl)) or np.any(np.diff(wl) <= 0):
        raise InputError("the wavelength grid must be finite and strictly increasing (nm)")
    return wl


@functools.lru_cache(maxsize=64)
def _weights_cached(wl_key: tuple, illuminant: str, observer: int) -> np.ndarray:
    wl = np.array(wl_key, dtype=float)
    wf, cmf, s = _cie_data(illuminant, observer)
    dwf = wf[1] - wf[0]
    # B[f, j]: weight of sample j in the linear interpolant at λ_f (constant beyond the ends).
    eye = np.eye(wl.size)
    basis = np.stack([np.interp(wf, wl, eye[j]) for j in range(wl.size)], axis=1)
    weighted = cmf * s[:, None] * dwf                      # (F, 3)
    k = 100.0 / weighted[:, 1].sum()
    w = k * (basis.T @ weighted)                            # (W, 3)
    w.setflags(write=False)
    return w


def tristimulus_weights(wavelengths_nm, illuminant: str = "D65", observer=2) -> np.ndarray:
    """Tristimulus weights for spectra sampled on ``wavelengths_nm``.

    Parameters
    ----------
    wavelengths_nm
        Increasing 1-D grid, nm, shape (W,). Any spacing; the range may be narrower than
        360–830 nm (the spectrum is then held constant beyond its ends).
    illuminant
        'D65', 'D50', 'A', 'F2' or 'F11'.
    observer
        2 (CIE 1931) or 10 (CIE 1964), degrees.

    Returns
    -------
    numpy.ndarray, shape (W, 3), read-only: ``XYZ = spectrum @ weights`` on the 0–100 scale
    (a spectrum of ones gives Y = 100). Cached per (grid, illuminant, observer).

    References: CIE 15:2018 §7; ASTM E308-18. See the module docstring for the construction.
    """
    wl = _check_grid(wavelengths_nm)
    return _weights_cached(tuple(wl.tolist()), normalise_illuminant(illuminant),
                           normalise_observer(observer))


def white_point_XYZ(illuminant: str = "D65", observer=2) -> np.ndarray:
    """XYZ (3,) of the perfect reflecting diffuser under ``illuminant``, 0–100 scale (Y = 100).

    Computed with the same weights as every colour, so a perfect reflector gives L* = 100,
    a* = b* = 0 exactly. References: CIE 15:2018 §7.
    """
    return tristimulus_weights(COLOUR_WAVELENGTHS_NM, illuminant, observer).sum(axis=0)


def spectra_to_XYZ(spectra, wavelengths_nm, illuminant: str = "D65", observer=2) -> np.ndarray:
    """CIE XYZ of reflectance/transmittance spectra.

    Parameters
    ----------
    spectra
        Fractions 0–1, shape (..., W): wavelength on the last axis, any leading shape.
    wavelengths_nm
        Grid (W,) in nm.
    illuminant, observer
        See :func:`tristimulus_weights`.

    Returns
    -------
    numpy.ndarray, shape (..., 3), 0–100 scale. One matrix product over the last axis.

    References: CIE 15:2018 §7.
    """
    r = np.asarray(spectra, dtype=float)
    w = tristimulus_weights(wavelengths_nm, illuminant, observer)
    if r.ndim == 0 or r.shape[-1] != w.shape[0]:
        raise InputError(f"spectra have {r.shape[-1] if r.ndim else 0} wavelengths on the last "
                         f"axis but the grid has {w.shape[0]}")
    return r @ w


def XYZ_to_xyY(XYZ) -> np.ndarray:
    """Chromaticity x, y and luminance Y (0–100), shape (..., 3) from XYZ (..., 3).

    A black (X+Y+Z = 0) gets the D65 chromaticity (convention of colour-science).
    References: CIE 15:2018 §7.3.
    """
    import colour

    xyz = np.asarray(XYZ, dtype=float)
    xyY = colour.XYZ_to_xyY(xyz / 100.0)
    xyY = np.asarray(xyY, dtype=float)
    xyY[..., 2] *= 100.0
    return xyY


def _white(white_XYZ) -> np.ndarray:
    wn = np.asarray(white_XYZ, dtype=float)
    if wn.ndim == 0 or wn.shape[-1] != 3 or not np.all(wn[..., 1] > 0):
        raise InputError(f"the reference white must be XYZ of shape (..., 3) with Y > 0, "
                         f"got {white_XYZ!r}")
    return wn


def XYZ_to_Lab(XYZ, white_XYZ) -> np.ndarray:
    """CIE 1976 L*a*b* (..., 3) of XYZ (..., 3) relative to the white XYZ_n (same scale).

    ``white_XYZ`` is (3,) — usually :func:`white_point_XYZ` (the perfect reflecting diffuser)
    or the colour of a bare substrate — or any shape broadcasting with ``XYZ`` (one white per
    angle, say). Written out here (a few array operations, no per-call overhead: the thickness
    search calls it in a loop) and checked against colour-science's ``XYZ_to_Lab``.

    .. math::
        L^* = 116 f(Y/Y_n) - 16,\\ a^* = 500 [f(X/X_n) - f(Y/Y_n)],\\
        b^* = 200 [f(Y/Y_n) - f(Z/Z_n)],

    with f(t) = t^(1/3) for t > (6/29)³, else t / (3 (6/29)²) + 4/29.
    References: CIE 15:2018 §8.2.1.
    """
    xyz = np.asarray(XYZ, dtype=float)
    wn = _white(white_XYZ)
    t = xyz / wn
    eps = (6.0 / 29.0) ** 3
    f = np.where(t > eps, np.cbrt(t), t / (3.0 * (6.0 / 29.0) ** 2) + 4.0 / 29.0)
    fx, fy, fz = f[..., 0], f[..., 1], f[..., 2]
    return np.stack([116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)], axis=-1)


def Lab_to_XYZ(Lab, white_XYZ) -> np.ndarray:
    """Inverse of :func:`XYZ_to_Lab`: XYZ (..., 3) on the scale of ``white_XYZ`` (..., 3)."""
    import colour

    wn = _white(white_XYZ)
    xy_n = wn[..., :2] / wn.sum(axis=-1, keepdims=True)
    return np.asarray(colour.Lab_to_XYZ(np.asarray(Lab, dtype=float), illuminant=xy_n),
                      dtype=float) * wn[..., 1:2]


def Lab_to_LCh(Lab) -> np.ndarray:
    """L*, C*ab, h_ab (degrees 0–360) of CIELAB (..., 3). References: CIE 15:2018 §8.2.2."""
    import colour

    return np.asarray(colour.Lab_to_LCHab(np.asarray(Lab, dtype=float)), dtype=float)


@functools.lru_cache(maxsize=32)
def _xyz_to_srgb_matrix(white_key: tuple) -> np.ndarray:
    """(3, 3) matrix: XYZ (Y_white = 1) adapted from ``white`` to D65 (Bradford), to linear sRGB."""
    import colour
    from colour.adaptation import matrix_chromatic_adaptation_VonKries

    space = colour.RGB_COLOURSPACES["sRGB"]
    white = np.array(white_key, dtype=float)
    white = white / white[1]
    d65 = colour.xy_to_XYZ(space.whitepoint)
    cat = matrix_chromatic_adaptation_VonKries(white, d65, "Bradford")
    m = np.asarray(space.matrix_XYZ_to_RGB, dtype=float) @ cat
    m.setflags(write=False)
    return m


def XYZ_to_srgb_linear(XYZ, white_XYZ) -> np.ndarray:
    """Linear sRGB (..., 3) of XYZ (..., 3) seen under the illuminant whose white is ``white_XYZ``.

    The colour is adapted from ``white_XYZ`` to D65 (Bradford) and scaled so the white's Y maps to
    1; unclipped (values outside 0–1 are out of gamut). References: IEC 61966-2-1:1999.
    """
    wn = np.asarray(white_XYZ, dtype=float)
    m = _xyz_to_srgb_matrix(tuple(wn.tolist()))
    return (np.asarray(XYZ, dtype=float) / wn[1]) @ m.T


def srgb_linear_to_XYZ(rgb_linear, white_XYZ) -> np.ndarray:
    """Inverse of :func:`XYZ_to_srgb_linear`: XYZ (..., 3) on the scale of ``white_XYZ``."""
    wn = np.asarray(white_XYZ, dtype=float)
    m = _xyz_to_srgb_matrix(tuple(wn.tolist()))
    return (np.asarray(rgb_linear, dtype=float) @ np.linalg.inv(m).T) * wn[1]


def srgb_encode(rgb_linear) -> np.ndarray:
    """sRGB transfer function (linear 0–1 -> encoded 0–1), after clipping to 0–1.

    References: IEC 61966-2-1:1999 (via colour-science ``eotf_inverse_sRGB``).
    """
    from colour.models import eotf_inverse_sRGB

    return np.asarray(eotf_inverse_sRGB(np.clip(np.asarray(rgb_linear, dtype=float), 0.0, 1.0)),
                      dtype=float)


def srgb_decode(rgb_encoded) -> np.ndarray:
    """Inverse sRGB transfer function (encoded 0–1 -> linear 0–1). References: IEC 61966-2-1."""
    from colour.models import eotf_sRGB

    return np.asarray(eotf_sRGB(np.asarray(rgb_encoded, dtype=float)), dtype=float)


def XYZ_to_srgb(XYZ, white_XYZ):
    """Encoded sRGB (..., 3) in 0–1 (clipped) and an out-of-gamut flag (...,) bool.

    The flag is True where a linear channel falls outside 0–1 (beyond 1e-3): the colour cannot be
    shown exactly and the displayed value is clipped.
    """
    lin = XYZ_to_srgb_linear(XYZ, white_XYZ)
    out = np.any((lin < -_GAMUT_TOL) | (lin > 1.0 + _GAMUT_TOL), axis=-1)
    return srgb_encode(lin), out


def srgb_to_XYZ(rgb_encoded, white_XYZ) -> np.ndarray:
    """XYZ (..., 3) of encoded sRGB (..., 3) 0–1, adapted back from D65 to ``white_XYZ``."""
    return srgb_linear_to_XYZ(srgb_decode(rgb_encoded), white_XYZ)


def srgb_to_hex(rgb_encoded) -> np.ndarray:
    """'#RRGGBB' strings (...,) of encoded sRGB (..., 3) in 0–1 (rounded to 8 bits)."""
    v = np.clip(np.rint(np.asarray(rgb_encoded, dtype=float) * 255.0), 0, 255).astype(int)
    flat = v.reshape(-1, 3)
    out = np.array([f"#{r:02X}{g:02X}{b:02X}" for r, g, b in flat], dtype=object)
    return out.reshape(v.shape[:-1])


def hex_to_srgb(text: str) -> np.ndarray:
    """Encoded sRGB (3,) in 0–1 from '#RRGGBB', 'RRGGBB' or '#RGB'. InputError if malformed."""
    s = str(text).strip().lstrip("#")
    if len(s) == 3:
        s = "".join(c * 2 for c in s)
    if len(s) != 6 or any(c not in "0123456789abcdefABCDEF" for c in s):
        raise InputError(f"expected an sRGB colour as #RRGGBB (hex digits), got {text!r}")
    return np.array([int(s[i:i + 2], 16) for i in (0, 2, 4)], dtype=float) / 255.0


def delta_e_2000(Lab1, Lab2) -> np.ndarray:
    """CIEDE2000 colour difference (...,) between CIELAB arrays broadcasting to (..., 3).

    Parametric factors k_L = k_C = k_H = 1. Computed by colour-science's ``delta_E_CIE2000``.
    References: CIE 142-2001; G. Sharma, W. Wu, E. N. Dalal, Color Res. Appl. 30, 21 (2005).
    """
    from colour.difference import delta_E_CIE2000

    a, b = np.broadcast_arrays(np.asarray(Lab1, dtype=float), np.asarray(Lab2, dtype=float))
    return np.asarray(delta_E_CIE2000(a, b), dtype=float)
