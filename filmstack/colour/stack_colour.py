"""Reflected and transmitted colour of a coated part, over angle; colour difference of two stacks.

The stack's unpolarised (``mean``) reflectance or transmittance is computed on
:data:`~filmstack.colour.colorimetry.COLOUR_WAVELENGTHS_NM` (380–780 nm every 5 nm) by the engine
(:func:`filmstack.response.spectrum`) and turned into CIE XYZ with precomputed tristimulus weights
(:mod:`filmstack.colour.colorimetry`), for every angle — and every design in a batch — at once.

Reference white of CIELAB (``white``):

- ``"diffuser"`` (default): the perfect reflecting diffuser under the same illuminant and
  observer (CIE 15), the usual object-colour convention: a perfect mirror has L* = 100;
- ``"bare-substrate"``: the same side's colour of the uncoated part (same incident medium,
  substrate and back side, no front layers) at the same angle, so a coating that looks like the
  bare part has a* = b* = 0 and L* = 100. Useful to describe a tint "relative to the glass".

The sRGB value always shows the colour as seen under the illuminant, adapted to D65 (Bradford),
relative to the perfect diffuser — the bare-substrate white changes CIELAB only.

References: CIE 15:2018 *Colorimetry* (§7, §8); IEC 61966-2-1:1999 (sRGB);
G. Sharma, W. Wu, E. N. Dalal, Color Res. Appl. 30, 21 (2005) (CIEDE2000).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import InputError
from . import colorimetry as cm

__all__ = ["ColourSetting", "StackColour", "WHITES", "SIDES", "colour_from_spectra",
           "colour_wavelengths", "stack_colour", "bare_stack", "delta_e_stacks",
           "MIN_COLOUR_RANGE_NM"]

#: The least a stack's materials must cover for a colour: 400–700 nm (outside the 380–780 nm
#: grid the spectrum is held at its end values, as ASTM E308 does for truncated ranges).
MIN_COLOUR_RANGE_NM = (400.0, 700.0)

#: Reference whites of CIELAB.
WHITES = ("diffuser", "bare-substrate")
#: Which light is seen.
SIDES = ("reflected", "transmitted")


@dataclass(frozen=True)
class ColourSetting:
    """How a colour is seen: illuminant, observer, side, reference white, polarisation.

    Attributes
    ----------
    illuminant
        'D65', 'D50', 'A', 'F2' or 'F11' (any case; 'FL2' also accepted).
    observer
        2 (CIE 1931) or 10 (CIE 1964), degrees.
    side
        'reflected' or 'transmitted'.
    white
        'diffuser' (perfect reflecting diffuser) or 'bare-substrate'.
    polarization
        'mean' (unpolarised light, the default), 's' or 'p'.
    """

    illuminant: str = "D65"
    observer: int = 2
    side: str = "reflected"
    white: str = "diffuser"
    polarization: str = "mean"

    def __post_init__(self):
        object.__setattr__(self, "illuminant", cm.normalise_illuminant(self.illuminant))
        object.__setattr__(self, "observer", cm.normalise_observer(self.observer))
        side = str(self.side).strip().lower()
        if side not in SIDES:
            raise InputError(f"side must be reflected or transmitted, got {self.side!r}")
        object.__setattr__(self, "side", side)
        white = str(self.white).strip().lower().replace("_", "-")
        if white not in WHITES:
            raise InputError(f"white must be diffuser or bare-substrate, got {self.white!r}")
        object.__setattr__(self, "white", white)
        pol = str(self.polarization).strip().lower()
        if pol not in ("s", "p", "mean"):
            raise InputError(f"polarization must be s, p or mean, got {self.polarization!r}")
        object.__setattr__(self, "polarization", pol)

    @property
    def diffuser_XYZ(self) -> np.ndarray:
        """XYZ (3,) of the perfect reflecting diffuser, Y = 100."""
        return cm.white_point_XYZ(self.illuminant, self.observer)

    def describe(self) -> str:
        """E.g. ``'reflected, D65, 2° observer, white: diffuser'``."""
        return f"{self.side}, {self.illuminant}, {self.observer}° observer, white: {self.white}"


@dataclass(frozen=True)
class StackColour:
    """Colour of a stack (or a batch of stacks) at one or more angles.

    Shapes: ``(..., A)`` per colour, ``(..., A, 3)`` per colour triple, ``...`` the batch
    dimensions (none for one stack).

    Attributes
    ----------
    setting
        The :class:`ColourSetting`.
    angle_deg
        Angles of incidence, degrees, (A,).
    XYZ
        Tristimulus values, 0–100 scale (diffuser Y = 100), (..., A, 3).
    white_XYZ
        The CIELAB reference white, (3,) for the diffuser or (A, 3) for the bare substrate.
    xyY, Lab, LCh
        Chromaticity and luminance; CIELAB; lightness, chroma, hue angle (degrees), (..., A, 3).
    srgb
        Encoded sRGB 0–1, clipped, (..., A, 3).
    srgb_hex
        '#RRGGBB' strings, object array (..., A).
    out_of_gamut
        True where the colour is outside the sRGB gamut (the hex is clipped), (..., A).
    """

    setting: ColourSetting
    angle_deg: np.ndarray
    XYZ: np.ndarray
    white_XYZ: np.ndarray
    xyY: np.ndarray
    Lab: np.ndarray
    LCh: np.ndarray
    srgb: np.ndarray
    srgb_hex: np.ndarray
    out_of_gamut: np.ndarray

    def to_dict(self) -> dict:
        """JSON-ready dict (DESIGN.md §5 keys first), values indexed [angle] (then batch)."""
        return {
            "illuminant": self.setting.illuminant,
            "observer": self.setting.observer,
            "angle_deg": self.angle_deg.tolist(),
            "XYZ": self.XYZ.tolist(),
            "Lab": self.Lab.tolist(),
            "srgb_hex": self.srgb_hex.tolist(),
            "side": self.setting.side,
            "white": self.setting.white,
            "polarization": self.setting.polarization,
            "xyY": self.xyY.tolist(),
            "LCh": self.LCh.tolist(),
            "out_of_gamut": self.out_of_gamut.tolist(),
            "white_XYZ": np.asarray(self.white_XYZ).tolist(),
        }


def colour_from_spectra(spectra, setting: ColourSetting, *, white_XYZ=None, angle_deg=None,
                        wavelengths_nm=None) -> StackColour:
    """Colour of spectra (..., A, W) or (..., W) sampled on ``wavelengths_nm``.

    Parameters
    ----------
    spectra
        R or T fractions 0–1, wavelength last; the axis before it is the angle when
        ``angle_deg`` is given.
    setting
        The :class:`ColourSetting` (its ``white`` is ignored here: pass ``white_XYZ``).
    white_XYZ
        CIELAB reference white broadcasting with (..., 3); default the perfect diffuser.
    angle_deg
        Angles (A,) for the record; default a single 0°.
    wavelengths_nm
        The grid (W,); default :data:`~filmstack.colour.colorimetry.COLOUR_WAVELENGTHS_NM`.
    """
    wl = cm.COLOUR_WAVELENGTHS_NM if wavelengths_nm is None else wavelengths_nm
    xyz = cm.spectra_to_XYZ(spectra, wl, setting.illuminant, setting.observer)
    diffuser = setting.diffuser_XYZ
    wn = diffuser if white_XYZ is None else np.asarray(white_XYZ, dtype=float)
    lab = cm.XYZ_to_Lab(xyz, wn)
    rgb, oog = cm.XYZ_to_srgb(xyz, diffuser)
    angles = np.atleast_1d(np.asarray(0.0 if angle_deg is None else angle_deg, dtype=float))
    return StackColour(setting=setting, angle_deg=angles, XYZ=xyz, white_XYZ=wn,
                       xyY=cm.XYZ_to_xyY(xyz), Lab=lab, LCh=cm.Lab_to_LCh(lab), srgb=rgb,
                       srgb_hex=cm.srgb_to_hex(rgb), out_of_gamut=oog)


_WARNED: set = set()       # cut grids already announced in this process


def colour_wavelengths(materials) -> np.ndarray:
    """The colour grid (nm) for a set of materials: 380–780 nm every 5 nm, cut to the range
    every material covers.

    A material with data over less than 380–780 nm (ZnS from 400 nm, say) still gets a colour
    when its data cover :data:`MIN_COLOUR_RANGE_NM`: the grid is cut to the common range (on the
    5 nm steps) and a :class:`~filmstack.errors.FilmstackWarning` says so; the CIE weights then
    hold the spectrum at its end values beyond the cut (ASTM E308 practice for truncated
    ranges), which changes XYZ by well under a unit for coatings without features there.
    The warning is given once per process for each cut grid and set of materials.
    Otherwise an :class:`~filmstack.errors.OutOfRangeError` names the material.
    """
    import warnings

    from ..errors import FilmstackWarning, OutOfRangeError

    wl = cm.COLOUR_WAVELENGTHS_NM
    lo, hi = float(wl[0]), float(wl[-1])
    names = []
    for m in materials:
        mlo, mhi = m.range_nm
        if mlo > lo or mhi < hi:
            names.append(m)
            lo, hi = max(lo, mlo), min(hi, mhi)
    if not names:
        return wl
    if lo > MIN_COLOUR_RANGE_NM[0] or hi < MIN_COLOUR_RANGE_NM[1]:
        m = names[-1]
        raise OutOfRangeError(f"material '{m.name}' has data from {m.range_nm[0]:g} to "
                              f"{m.range_nm[1]:g} nm; a colour needs at least "
                              f"{MIN_COLOUR_RANGE_NM[0]:g}-{MIN_COLOUR_RANGE_NM[1]:g} nm "
                              "(380-780 nm preferred)")
    cut = wl[(wl >= lo - 1e-9) & (wl <= hi + 1e-9)]
    key = (float(cut[0]), float(cut[-1]), tuple(sorted({m.name for m in names})))
    if key in _WARNED:
        return cut
    _WARNED.add(key)
    warnings.warn(f"colour computed over {cut[0]:g}-{cut[-1]:g} nm (not 380-780 nm): "
                  + ", ".join(sorted({m.name for m in names})) + " has no data beyond; the "
                  "spectrum is held at its end values there", FilmstackWarning, stacklevel=3)
    return cut


def _warn_unresolved(stack, wl) -> None:
    """Warn when a layer is too thick for the colour grid: its fringes repeat every
    Δλ ≈ λ²/P (P = 2 n d, normal incidence: the worst case) and the grid samples every δ nm, so
    they alias once Δλ(λ_min) < 2 δ (Born & Wolf, Principles of Optics, 7th ed., §7.6).

    Judged per layer: a multilayer of many thin layers (a 26-layer mirror, 7.5 µm of optical
    thickness in all) has weak fine ripple and its colour is unaffected (ΔE00 0.01 against a
    0.25 nm grid), while one thick layer gives strong fringes (ΔE00 7 for 20 µm of oxide)."""
    import warnings

    from ..errors import FilmstackWarning
    if not stack.layers:
        return
    lam, step = float(wl[0]), float(wl[1] - wl[0])
    path = 2.0 * np.real(stack.layer_indices(np.array([lam])))[:, 0] \
        * np.asarray(stack.thicknesses_nm, dtype=float)
    limit = lam * lam / (2.0 * step)
    if np.any(path > limit):
        i = int(np.argmax(path))
        warnings.warn(f"layers[{i}] ({stack.layers[i].material.name}, "
                      f"{stack.thicknesses_nm[i]:g} nm) is thicker than the {step:g} nm colour "
                      f"grid resolves (optical thickness {path[i] / 2:.0f} nm, at most "
                      f"{limit / 2:.0f} nm): its fine fringes alias, so the computed colour is "
                      "not reliable (such a layer looks nearly neutral)", FilmstackWarning,
                      stacklevel=3)


def bare_stack(stack):
    """The uncoated part: ``stack`` without its front layers (back side and media kept)."""
    return replace(stack, layers=(), free=())


def _check_angles(angles_deg) -> np.ndarray:
    a = np.atleast_1d(np.asarray(angles_deg, dtype=float))
    if a.ndim != 1 or a.size == 0 or not np.all(np.isfinite(a)) or np.any((a < 0) | (a >= 90)):
        raise InputError(f"angles of incidence must be in 0 <= angle < 90 degrees, "
                         f"got {np.asarray(angles_deg).tolist()}")
    return a


def _side_spectrum(sp, side):
    return np.asarray(sp.R if side == "reflected" else sp.T, dtype=float)


def stack_colour(stack, angles_deg=0.0, setting: ColourSetting | None = None, *,
                 thicknesses_nm=None, layer_indices=None, wavelengths_nm=None,
                 **setting_kwargs) -> StackColour:
    """Reflected or transmitted colour of ``stack`` at each angle (and each design of a batch).

    Parameters
    ----------
    stack
        The :class:`~filmstack.stack.Stack`. Its materials need data over 380–780 nm.
    angles_deg
        Angle(s) of incidence in degrees, 0 <= angle < 90, scalar or (A,).
    setting
        A :class:`ColourSetting`; or give its fields as keywords (``illuminant='A'``,
        ``observer=10``, ``side='transmitted'``, ``white='bare-substrate'``).
    thicknesses_nm
        Optional batch of front-layer thicknesses, nm, (..., L): one colour per row.
    layer_indices
        Optional override of the front-layer indices on the colour grid, (..., L, W) complex.
    wavelengths_nm
        The colour grid, nm (default :func:`colour_wavelengths` of the stack's materials:
        380–780 nm every 5 nm when they cover it).

    Returns
    -------
    StackColour with arrays (..., A, 3) / (..., A).

    Examples
    --------
    >>> c = stack_colour(stack, [0, 30, 60], illuminant="D65", observer=10)  # doctest: +SKIP
    >>> c.Lab[1], c.srgb_hex[1]                                            # doctest: +SKIP
    """
    from ..response import spectrum

    if setting is None:
        setting = ColourSetting(**setting_kwargs)
    elif setting_kwargs:
        setting = replace(setting, **setting_kwargs)
    angles = _check_angles(angles_deg)
    wl = colour_wavelengths(stack.materials) if wavelengths_nm is None else \
        np.asarray(wavelengths_nm, dtype=float)
    if thicknesses_nm is None and layer_indices is None and wavelengths_nm is None:
        _warn_unresolved(stack, wl)
    sp = spectrum(stack, wl, angles, setting.polarization, thicknesses_nm=thicknesses_nm,
                  layer_indices=layer_indices)
    values = _side_spectrum(sp, setting.side)                     # (..., A, W)
    white = None
    if setting.white == "bare-substrate":
        bare = spectrum(bare_stack(stack), wl, angles, setting.polarization)
        white = cm.spectra_to_XYZ(_side_spectrum(bare, setting.side), wl, setting.illuminant,
                                  setting.observer)               # (A, 3)
        if np.any(white[..., 1] <= 1e-9):
            raise InputError(f"the bare substrate's {setting.side} colour is black (Y = 0); "
                             "it cannot be the reference white: use white 'diffuser'")
    return colour_from_spectra(values, setting, white_XYZ=white, angle_deg=angles,
                               wavelengths_nm=wl)


def delta_e_stacks(stack_a, stack_b, angles_deg=0.0, setting: ColourSetting | None = None,
                   **setting_kwargs) -> np.ndarray:
    """CIEDE2000 colour difference between two stacks (design vs as-built) at each angle, (A,).

    Both colours use the same setting; with ``white='bare-substrate'`` each stack is referred
    to its own bare substrate. References: Sharma, Wu & Dalal, Color Res. Appl. 30, 21 (2005).
    """
    ca = stack_colour(stack_a, angles_deg, setting, **setting_kwargs)
    cb = stack_colour(stack_b, angles_deg, ca.setting)
    return cm.delta_e_2000(ca.Lab, cb.Lab)
