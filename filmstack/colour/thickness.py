"""Film thickness from an observed interference colour: ranked candidates.

The forward model is a single film (``film``) on a substrate, optionally on fixed under-layers,
seen at an angle under an illuminant (a :class:`~filmstack.colour.stack_colour.ColourSetting`).
Its colour repeats with thickness (every half wave of optical thickness, roughly), so one
observed colour has several thickness answers: the result is a ranked list, never one number.

Method
------
1. **Precompute** the film's CIELAB on a fine thickness grid (default 1 nm over the range): one
   vectorised engine call with ``thicknesses_nm`` of shape (N, L). The table is cached per
   (film system, setting, angle, range, step) for the life of the process.
2. **Compare**: ΔE2000 between the observed colour and every grid colour. With several
   observations (another angle or illuminant of the same spot) their differences are combined as
   the root mean square, ``ΔE = sqrt(mean_i ΔE_i²)`` — in the same unit as one ΔE, and a
   thickness must match *every* observation to score well, which breaks the cyclic ambiguity.
3. **Local minima** of the combined ΔE on the grid, each **refined** by a bracketed search
   inside its two neighbouring grid intervals: two rounds of 21 samples, each round one engine
   call for all minima together, shrink the bracket 100-fold (to ±0.01 nm for a 1 nm grid). A
   golden-section search would need ~14 sequential engine calls for the same precision. Only
   the ``max(2·top, 8)`` best grid minima are refined (refinement lowers a grid minimum's ΔE by
   at most the colour change over one step).
4. **Distinct candidates**: best first, a candidate is kept only if it lies at least
   ``min_separation_nm`` from every better one. The result is **ambiguous** when the runner-up is
   within ``ambiguity_delta_e`` of the best, and a **poor match** when even the best differs by
   more than ``poor_match_delta_e``.

Photo route (:func:`observation_from_photo`)
--------------------------------------------
A camera's sRGB is neither white-balanced to the illuminant nor exposed to a known level. With
the bare substrate in the same photo, its colour is computed by the model and the camera is
corrected by a **von Kries-style diagonal scaling in linear sRGB**: each linear channel c of the
photo is multiplied by ``g_c = c_bare,model / c_bare,photo``. This fixes white balance and
exposure together (the bare substrate of known reflectance is the grey card); it assumes the
camera's sRGB decodes to values proportional to the scene's linear sRGB and that the light was
close to the chosen illuminant. The corrected colour is then given in CIELAB relative to the
computed bare substrate (white ``bare-substrate``), and matched like a colorimeter reading.

Caution (DESIGN.md §7): colour is indicative and repeats with thickness; cameras shift colour.
Confirm with a measured spectrum (or ellipsometry) before a process decision.

References: CIE 15:2018 (colorimetry); Sharma, Wu & Dalal, Color Res. Appl. 30, 21 (2005)
(CIEDE2000); J. von Kries (1902), chromatic adaptation by independent channel gains (see
M. D. Fairchild, *Color Appearance Models*, 3rd ed., Wiley 2013, §9).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputError
from ..materials import Material
from ..stack import AIR, Layer, Stack
from . import colorimetry as cm
from .stack_colour import ColourSetting, bare_stack, colour_wavelengths, stack_colour

__all__ = ["CAUTION", "FilmSystem", "Observation", "FilmColourTable", "Candidate",
           "ThicknessResult", "PhotoCorrection", "film_colour_table", "film_colour",
           "observation_from_photo", "find_thickness", "clear_cache",
           "max_resolved_thickness_nm"]

#: The caution every thickness-from-colour result carries (DESIGN.md §7, word for word, as the
#: command line prints it).
CAUTION = ("Thickness from colour is indicative; colour repeats with thickness, cameras shift "
           "colour. Process decisions use a measured spectrum or ellipsometry, and local codes "
           "and qualified practice.")

_ZOOM_POINTS = 21                # samples per bracket and round of the local search
_ZOOM_ROUNDS = 2                 # a bracket of 2 grid steps ends 100x narrower (0.02 nm at 1 nm)
_MAX_GRID_POINTS = 200_001


@dataclass(frozen=True)
class FilmSystem:
    """A film of unknown thickness on a substrate, over fixed under-layers.

    Attributes
    ----------
    film
        The film's material.
    substrate
        The substrate (semi-infinite: a wafer or a thick part seen from the front).
    under
        Fixed layers between substrate and film, deposition order (``under[0]`` touches the
        substrate), with their thicknesses in nm.
    incident
        The medium the light comes from (default air).
    """

    film: Material
    substrate: Material
    under: tuple[Layer, ...] = ()
    incident: Material = AIR

    def __post_init__(self):
        object.__setattr__(self, "under", tuple(self.under))

    def stack(self, thickness_nm: float = 0.0) -> Stack:
        """The stack with the film ``thickness_nm`` thick (nm)."""
        return Stack(incident=self.incident, substrate=self.substrate,
                     layers=self.under + (Layer(self.film, float(thickness_nm)),))

    def thickness_rows(self, film_nm) -> np.ndarray:
        """Front-layer thicknesses (M, L) for film thicknesses (M,): under-layers fixed."""
        t = np.asarray(film_nm, dtype=float).reshape(-1, 1)
        under = np.array([l.thickness_nm for l in self.under], dtype=float)
        return np.concatenate([np.broadcast_to(under, (t.shape[0], under.size)), t], axis=1)

    def describe(self) -> str:
        """E.g. ``'SiO2 on Si3N4 80 nm on Si'``."""
        parts = [self.film.name] + [f"{l.material.name} {l.thickness_nm:g} nm"
                                    for l in reversed(self.under)] + [self.substrate.name]
        return " on ".join(parts)

    def _key(self):
        return (_material_key(self.film), _material_key(self.substrate),
                tuple((_material_key(l.material), l.thickness_nm) for l in self.under),
                _material_key(self.incident))


def _material_key(m: Material):
    try:
        hash(m)
        return m
    except TypeError:
        return ("id", id(m))


@dataclass(frozen=True)
class Observation:
    """One observed colour of the film.

    Attributes
    ----------
    lab
        CIELAB (L*, a*, b*) relative to ``setting.white``.
    angle_deg
        Viewing angle (angle of incidence of the light, specular geometry), degrees.
    setting
        Illuminant, observer, side and white of the observation.
    label
        A name for messages ('observation 1', 'photo', ...).
    """

    lab: tuple
    angle_deg: float = 0.0
    setting: ColourSetting = field(default_factory=ColourSetting)
    label: str = "observation"

    def __post_init__(self):
        lab = np.asarray(self.lab, dtype=float)
        if lab.shape != (3,) or not np.all(np.isfinite(lab)):
            raise InputError(f"an observed colour is three finite numbers L*, a*, b*, "
                             f"got {self.lab!r}")
        if not 0.0 <= lab[0] <= 100.0 + 1e-9 and self.setting.white == "diffuser":
            raise InputError(f"L* must be within 0-100 relative to the perfect diffuser, "
                             f"got {lab[0]:g}")
        object.__setattr__(self, "lab", tuple(float(x) for x in lab))
        a = float(self.angle_deg)
        if not (math.isfinite(a) and 0.0 <= a < 90.0):
            raise InputError(f"the viewing angle must be in 0 <= angle < 90 degrees, got {a:g}")
        object.__setattr__(self, "angle_deg", a)


@dataclass(frozen=True)
class FilmColourTable:
    """Colours of the film on a thickness grid (precomputed, read-only arrays).

    thickness_nm (N,); XYZ, Lab (N, 3); srgb_hex (N,); out_of_gamut (N,); white_XYZ (3,).
    """

    system: FilmSystem
    setting: ColourSetting
    angle_deg: float
    thickness_nm: np.ndarray
    XYZ: np.ndarray
    Lab: np.ndarray
    srgb: np.ndarray
    srgb_hex: np.ndarray
    out_of_gamut: np.ndarray
    white_XYZ: np.ndarray


@dataclass(frozen=True)
class Candidate:
    """One thickness candidate.

    thickness_nm: film thickness, nm; delta_e: combined ΔE2000 over the observations;
    delta_e_each: ΔE2000 per observation (O,); Lab: computed CIELAB per observation (O, 3);
    srgb_hex: computed sRGB per observation (O,); out_of_gamut (O,).
    """

    thickness_nm: float
    delta_e: float
    delta_e_each: tuple
    Lab: tuple
    srgb_hex: tuple
    out_of_gamut: tuple

    def to_dict(self) -> dict:
        """JSON-ready: thickness_nm, delta_e, Lab and srgb_hex (of the first observation), and
        per-observation lists."""
        return {"thickness_nm": round(self.thickness_nm, 3), "delta_e": self.delta_e,
                "Lab": list(self.Lab[0]), "srgb_hex": self.srgb_hex[0],
                "delta_e_each": list(self.delta_e_each),
                "Lab_each": [list(x) for x in self.Lab],
                "srgb_hex_each": list(self.srgb_hex),
                "out_of_gamut_each": list(self.out_of_gamut)}


@dataclass(frozen=True)
class ThicknessResult:
    """Ranked candidates and the flags a user must see.

    candidates: best first; ambiguous: the runner-up is within ``ambiguity_delta_e`` of the best;
    poor_match: the best ΔE exceeds ``poor_match_delta_e``; warnings: messages to show;
    caution: :data:`CAUTION`; range_nm, step_nm: the searched grid; observations: the inputs.
    """

    system: FilmSystem
    observations: tuple
    candidates: tuple
    ambiguous: bool
    poor_match: bool
    warnings: tuple
    range_nm: tuple
    step_nm: float
    min_separation_nm: float
    caution: str = CAUTION

    @property
    def best(self) -> Candidate | None:
        """The best candidate (None when the range held no minimum at all)."""
        return self.candidates[0] if self.candidates else None

    def to_dict(self) -> dict:
        """JSON-ready dict: ``candidates`` (each thickness_nm, delta_e, Lab, srgb_hex, ...)."""
        return {
            "candidates": [c.to_dict() for c in self.candidates],
            "ambiguous": self.ambiguous,
            "poor_match": self.poor_match,
            "warnings": list(self.warnings),
            "film": self.system.describe(),
            "range_nm": list(self.range_nm),
            "step_nm": self.step_nm,
            "min_separation_nm": self.min_separation_nm,
            "observations": [{"label": o.label, "Lab": list(o.lab), "angle_deg": o.angle_deg,
                              "illuminant": o.setting.illuminant,
                              "observer": o.setting.observer, "side": o.setting.side,
                              "white": o.setting.white} for o in self.observations],
            "caution": self.caution,
        }


# --------------------------------------------------------------------------------------------
# Forward model
# --------------------------------------------------------------------------------------------

_TABLES: dict = {}
_TABLES_MAX = 32


def clear_cache() -> None:
    """Forget every precomputed colour table (frees memory; the next query recomputes)."""
    _TABLES.clear()
    _WHITES.clear()
    _WAVELENGTHS.clear()


def film_colour(system: FilmSystem, film_nm, setting: ColourSetting, angle_deg: float = 0.0):
    """Colour of the film at thicknesses ``film_nm`` (M,) nm: a StackColour with arrays (M, 1, ...).

    One vectorised engine call with thicknesses of shape (M, L).
    """
    t = np.atleast_1d(np.asarray(film_nm, dtype=float))
    return stack_colour(system.stack(0.0), [float(angle_deg)], setting,
                        thicknesses_nm=system.thickness_rows(t))


def _grid(range_nm, step_nm) -> np.ndarray:
    lo, hi = (float(x) for x in range_nm)
    step = float(step_nm)
    if not (math.isfinite(lo) and math.isfinite(hi) and 0.0 <= lo < hi):
        raise InputError(f"the thickness range must be 0 <= from < to (nm), got {lo:g}:{hi:g}")
    if not (math.isfinite(step) and step > 0):
        raise InputError(f"the thickness step must be > 0 nm, got {step:g}")
    n = int(math.floor((hi - lo) / step + 1e-9)) + 1
    if n > _MAX_GRID_POINTS:
        raise InputError(f"a step of {step:g} nm over {lo:g}-{hi:g} nm gives {n} thicknesses; "
                         f"at most {_MAX_GRID_POINTS} (use a larger step)")
    grid = lo + step * np.arange(n)
    if hi - grid[-1] > 1e-9:
        grid = np.append(grid, hi)
    return grid


def max_resolved_thickness_nm(system: FilmSystem, angle_deg: float = 0.0) -> float:
    """The thickest film (nm) whose colour the 5 nm colour grid computes without aliasing.

    The reflectance of a film of optical path ``P = 2 Σ n_j d_j cos θ_j`` (film and
    under-layers) repeats in wavelength every ``Δλ ≈ λ² / P``. Sampled every ``δ`` = 5 nm from
    ``λ_min`` = 380 nm, the fringes are resolved while ``Δλ(λ_min) >= 2 δ`` (Nyquist), i.e.
    ``P <= λ_min² / (2 δ)`` ≈ 14.4 µm: about 4.9 µm of SiO2. Thicker films alias to false
    colours (in reality they look nearly neutral, the fringes averaging out). Uses the real
    part of n at ``λ_min``; 0 when the under-layers alone use up the limit.

    References: Born & Wolf, Principles of Optics, 7th ed., §7.6 (fringes of equal
    inclination, Δλ = λ²/(2nd cos θ)); Shannon's sampling theorem.
    """
    wl = cm.COLOUR_WAVELENGTHS_NM
    lam, step = float(wl[0]), float(wl[1] - wl[0])
    budget = lam * lam / (2.0 * step)                              # P at the limit, nm
    def n_at(material) -> float:
        return float(np.real(np.asarray(material.nk(lam))).ravel()[0])

    s0 = n_at(system.incident) * math.sin(math.radians(float(angle_deg)))   # n sin θ, invariant

    def path_per_nm(material) -> float:
        n = n_at(material)
        return 2.0 * n * math.sqrt(max(0.0, 1.0 - (s0 / n) ** 2))

    used = sum(path_per_nm(l.material) * l.thickness_nm for l in system.under)
    return max(0.0, (budget - used) / path_per_nm(system.film))


def _check_resolved(system: FilmSystem, hi_nm: float, angle_deg: float) -> None:
    limit = max_resolved_thickness_nm(system, angle_deg)
    if hi_nm > limit:
        raise InputError(
            f"the thickness range (--range) reaches {hi_nm:g} nm, but colour is computed every "
            f"5 nm of wavelength, which resolves the interference of {system.film.name} here up "
            f"to {math.floor(limit):g} nm; thicker films would show false colours (in reality "
            f"they look nearly neutral): search at most {math.floor(limit):g} nm, or fit a "
            "measured spectrum (filmstack fit)")


def film_colour_table(system: FilmSystem, setting: ColourSetting, angle_deg: float = 0.0,
                      range_nm=(0.0, 1500.0), step_nm: float = 1.0) -> FilmColourTable:
    """The film's colours on the grid ``range_nm`` every ``step_nm`` nm (both ends included).

    Cached per (system, setting, angle, range, step) within the process; arrays are read-only.
    Cost: one engine call of shape (N, L) × 81 wavelengths (about 0.1 s for N = 1501).
    A range beyond :func:`max_resolved_thickness_nm` is an :class:`InputError`.
    """
    grid = _grid(range_nm, step_nm)
    _check_resolved(system, float(grid[-1]), angle_deg)
    key = (system._key(), setting, float(angle_deg), float(grid[0]), float(grid[-1]),
           float(step_nm))
    table = _TABLES.get(key)
    if table is not None:
        return table
    c = film_colour(system, grid, setting, angle_deg)
    arrays = dict(thickness_nm=grid, XYZ=c.XYZ[:, 0], Lab=c.Lab[:, 0], srgb=c.srgb[:, 0],
                  srgb_hex=c.srgb_hex[:, 0], out_of_gamut=c.out_of_gamut[:, 0],
                  white_XYZ=np.asarray(c.white_XYZ, dtype=float).reshape(-1, 3)[0])
    for a in arrays.values():
        a.setflags(write=False)
    table = FilmColourTable(system=system, setting=setting, angle_deg=float(angle_deg), **arrays)
    if len(_TABLES) >= _TABLES_MAX:
        _TABLES.pop(next(iter(_TABLES)))
    _TABLES[key] = table
    return table


# --------------------------------------------------------------------------------------------
# Photo route
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class PhotoCorrection:
    """An sRGB photo reading corrected against the computed bare substrate.

    observation: the corrected colour (CIELAB relative to the bare substrate); gains: the
    per-channel factors on linear sRGB (3,); bare_srgb_model: the computed bare substrate as
    encoded sRGB (3,); warnings: e.g. clipped channels.
    """

    observation: Observation
    gains: np.ndarray
    bare_srgb_model: np.ndarray
    corrected_srgb_hex: str
    warnings: tuple


#: Darkest 8-bit code a bare-substrate channel may have to serve as the camera's reference:
#: below it one code step changes the linear value by more than 10 % (the linear segment of the
#: sRGB decoding, IEC 61966-2-1:1999).
_BARE_MIN_CODE = 10


def observation_from_photo(film_hex: str, bare_hex: str, system: FilmSystem,
                           setting: ColourSetting | None = None, angle_deg: float = 0.0,
                           label: str = "photo") -> PhotoCorrection:
    """Turn a photo's sRGB of the film and of the bare substrate into an :class:`Observation`.

    Parameters
    ----------
    film_hex, bare_hex
        '#RRGGBB' picked from the same photo: the film, and the uncoated substrate.
    system
        The film system (its substrate is the bare reference; under-layers are not on it).
    setting
        Illuminant, observer, side; its ``white`` becomes 'bare-substrate'.
    angle_deg
        Viewing angle, degrees.

    Returns
    -------
    PhotoCorrection. Method: von Kries-style diagonal scaling in linear sRGB (module docstring).

    Raises
    ------
    InputError
        When the bare substrate cannot serve as the reference: a channel clipped at 255
        (over-exposed: the true value is unknown, so every gain would be wrong) or below
        10 of 255 (too coarsely quantised). A clipped film channel is only a warning.
    """
    setting = replace(setting or ColourSetting(), white="bare-substrate")
    film = cm.srgb_decode(cm.hex_to_srgb(film_hex))
    bare = cm.srgb_decode(cm.hex_to_srgb(bare_hex))
    warnings = []
    bare_code = np.round(cm.hex_to_srgb(bare_hex) * 255.0)
    if np.any(bare_code >= 255):
        raise InputError(f"the bare substrate's colour {bare_hex} has a channel at 255: it is "
                         "over-exposed (clipped) and cannot calibrate the camera; take the photo "
                         "darker so that no channel of the bare substrate reaches 255")
    if np.any(bare_code < _BARE_MIN_CODE):
        raise InputError(f"the bare substrate's colour {bare_hex} has a channel below "
                         f"{_BARE_MIN_CODE} of 255: too dark to calibrate the camera (one 8-bit "
                         "step there is over 10 % of the value); pick a brighter, unsaturated "
                         "spot or expose the photo brighter")
    if np.any(cm.hex_to_srgb(film_hex) >= 1.0):
        warnings.append(f"the film's colour {film_hex} has a channel at 255 (clipped): the "
                        "corrected colour is unreliable; use a darker exposure")
    bare_stk = bare_stack(system.stack(0.0))
    bare_c = stack_colour(bare_stk, [float(angle_deg)], replace(setting, white="diffuser"))
    diffuser = setting.diffuser_XYZ
    bare_xyz = bare_c.XYZ[0]
    bare_model_lin = cm.XYZ_to_srgb_linear(bare_xyz, diffuser)
    if np.any(bare_model_lin <= 1e-6):
        raise InputError(f"the computed colour of bare {system.substrate.name} has no "
                         "(or negative) sRGB red, green or blue: it cannot calibrate a photo; "
                         "use a colorimeter reading (--lab) instead")
    gains = bare_model_lin / bare
    corrected_lin = gains * film
    xyz = cm.srgb_linear_to_XYZ(corrected_lin, diffuser)
    lab = cm.XYZ_to_Lab(xyz, bare_xyz)
    corrected_rgb, _ = cm.XYZ_to_srgb(xyz, diffuser)
    obs = Observation(lab=tuple(lab), angle_deg=angle_deg, setting=setting, label=label)
    return PhotoCorrection(observation=obs, gains=gains,
                           bare_srgb_model=cm.srgb_encode(bare_model_lin),
                           corrected_srgb_hex=str(cm.srgb_to_hex(corrected_rgb)),
                           warnings=tuple(warnings))


# --------------------------------------------------------------------------------------------
# Inversion
# --------------------------------------------------------------------------------------------

def _combined(de_each):
    """RMS over the last axis (observations)."""
    return np.sqrt(np.mean(np.square(de_each), axis=-1))


def _film_lab(system, setting, angle_deg, t):
    """Lean forward model for the search: CIELAB (M, 3) of the film at thicknesses t (M,)."""
    from ..response import spectrum

    # cache values keep `system` alive, so an id() in a key (unhashable material) stays unique
    key = (system._key(), setting, float(angle_deg))
    white = _WHITES.get(key, (None,))[0]
    if white is None:
        if setting.white == "diffuser":
            white = setting.diffuser_XYZ
        else:
            white = film_colour(system, [0.0], setting, angle_deg).white_XYZ.reshape(-1, 3)[0]
        _WHITES[key] = (white, system)
    wl = _WAVELENGTHS.get(key[0], (None,))[0]
    if wl is None:
        wl = colour_wavelengths(system.stack(0.0).materials)
        _WAVELENGTHS[key[0]] = (wl, system)
    sp = spectrum(system.stack(0.0), wl, [float(angle_deg)], setting.polarization,
                  thicknesses_nm=system.thickness_rows(t))
    r = np.asarray(sp.R if setting.side == "reflected" else sp.T, dtype=float)[:, 0]
    xyz = cm.spectra_to_XYZ(r, wl, setting.illuminant, setting.observer)
    return cm.XYZ_to_Lab(xyz, white)


_WHITES: dict = {}
_WAVELENGTHS: dict = {}


def _delta_e_at(system, observations, t):
    """ΔE2000 per observation at film thicknesses t (M,): (M, O)."""
    return np.stack([cm.delta_e_2000(_film_lab(system, o.setting, o.angle_deg, t),
                                     np.asarray(o.lab)) for o in observations], axis=-1)


def _zoom(system, observations, a, b, points: int = _ZOOM_POINTS, rounds: int = _ZOOM_ROUNDS):
    """Vectorised bracketed search of the combined ΔE on brackets [a, b] (M,).

    Each round samples every bracket at ``points`` evenly spaced thicknesses — all brackets in
    one engine call of shape (M · points, L) — and shrinks it to the two intervals around the
    best sample. Two rounds of 41 points shrink a bracket of two grid steps by 400×. (Golden
    section needs ~18 sequential engine calls for the same; each call has a fixed cost.)
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    m = a.size
    u = np.linspace(0.0, 1.0, points)
    for _ in range(rounds):
        t = a[:, None] + (b - a)[:, None] * u[None, :]                   # (M, P)
        f = _combined(_delta_e_at(system, observations, t.ravel())).reshape(m, points)
        j = np.argmin(f, axis=1)
        h = (b - a) / (points - 1)
        best = t[np.arange(m), j]
        a, b = np.maximum(best - h, a), np.minimum(best + h, b)
    return best


def find_thickness(system: FilmSystem, observations, *, range_nm=(0.0, 1500.0),
                   step_nm: float = 1.0, min_separation_nm: float = 20.0, top: int = 5,
                   ambiguity_delta_e: float = 2.0,
                   poor_match_delta_e: float = 6.0) -> ThicknessResult:
    """Ranked film-thickness candidates for one or more observed colours.

    Parameters
    ----------
    system
        The :class:`FilmSystem` (film, substrate, under-layers, incident medium).
    observations
        One :class:`Observation` or a sequence (e.g. two angles or two illuminants of the same
        spot). Their ΔE2000 are combined as the root mean square.
    range_nm
        (from, to) film thickness searched, nm, 0 <= from < to.
    step_nm
        Grid step of the precomputed table, nm (1 nm resolves every minimum of an oxide up to
        a few µm; the refinement goes below it).
    min_separation_nm
        Candidates closer than this to a better one are dropped, nm.
    top
        Number of candidates returned (>= 1).
    ambiguity_delta_e
        The result is ambiguous when the runner-up's ΔE is within this of the best.
    poor_match_delta_e
        Warn when the best ΔE is above this (the model or the observation is off).

    Returns
    -------
    ThicknessResult with ``candidates`` ranked by combined ΔE2000 (best first).

    Notes
    -----
    Cost: the tables (one per observation setting) are computed once per process; a query then
    takes a few tens of milliseconds (see ``tests/benchmarks/bench_colour.py``).
    """
    obs = (observations,) if isinstance(observations, Observation) else tuple(observations)
    if not obs:
        raise InputError("give at least one observed colour")
    if int(top) != top or top < 1:
        raise InputError(f"top must be a whole number >= 1, got {top!r}")
    if not (min_separation_nm >= 0):
        raise InputError(f"the minimum separation must be >= 0 nm, got {min_separation_nm!r}")
    tables = [film_colour_table(system, o.setting, o.angle_deg, range_nm, step_nm) for o in obs]
    grid = tables[0].thickness_nm
    de_each = np.stack([cm.delta_e_2000(t.Lab, np.asarray(o.lab)) for t, o in zip(tables, obs)],
                       axis=-1)                                     # (N, O)
    f = _combined(de_each)
    n = f.size
    # local minima (plateaus: first point), ends included
    left = np.r_[np.inf, f[:-1]]
    right = np.r_[f[1:], np.inf]
    idx = np.flatnonzero((f <= left) & (f < right) | (f < left) & (f <= right))
    idx = idx[np.argsort(f[idx], kind="stable")[:max(2 * int(top), 8)]]
    lo_b = grid[np.maximum(idx - 1, 0)]
    hi_b = grid[np.minimum(idx + 1, n - 1)]
    x = _zoom(system, obs, lo_b, hi_b) if idx.size else np.empty(0)
    # keep the grid point where the refinement did not improve on it (flat minimum)
    fx = _combined(_delta_e_at(system, obs, x)) if idx.size else np.empty(0)
    worse = fx > f[idx]
    x = np.where(worse, grid[idx], x)
    fx = np.where(worse, f[idx], fx)
    order = np.argsort(fx, kind="stable")
    chosen: list[int] = []
    for i in order:
        if all(abs(x[i] - x[j]) >= min_separation_nm for j in chosen):
            chosen.append(int(i))
        if len(chosen) >= top:
            break
    chosen_x = x[chosen]
    cols = [film_colour(system, chosen_x, o.setting, o.angle_deg) for o in obs]
    de_x = np.stack([cm.delta_e_2000(c.Lab[:, 0], np.asarray(o.lab)) for c, o in zip(cols, obs)],
                    axis=-1).reshape(len(chosen), len(obs))
    cands = []
    for k, i in enumerate(chosen):
        cands.append(Candidate(
            thickness_nm=float(x[i]), delta_e=float(_combined(de_x[k])),
            delta_e_each=tuple(float(v) for v in de_x[k]),
            Lab=tuple(tuple(float(v) for v in c.Lab[k, 0]) for c in cols),
            srgb_hex=tuple(str(c.srgb_hex[k, 0]) for c in cols),
            out_of_gamut=tuple(bool(c.out_of_gamut[k, 0]) for c in cols)))
    warnings = []
    ambiguous = False
    poor = False
    if cands:
        best = cands[0]
        close = [c for c in cands[1:] if c.delta_e - best.delta_e < ambiguity_delta_e]
        if close:
            ambiguous = True
            others = ", ".join(f"{c.thickness_nm:.0f} nm (ΔE00 {c.delta_e:.2f})" for c in close)
            hint = ("add a second observation at another angle or under another illuminant, "
                    "or measure a spectrum" if len(obs) == 1 else "measure a spectrum")
            warnings.append(f"ambiguous: the best candidate {best.thickness_nm:.0f} nm "
                            f"(ΔE00 {best.delta_e:.2f}) is within ΔE00 {ambiguity_delta_e:g} of "
                            f"{others}; {hint}")
        if best.delta_e > poor_match_delta_e:
            poor = True
            warnings.append(f"poor match: no thickness in {grid[0]:g}-{grid[-1]:g} nm gives the "
                            f"observed colour (best ΔE00 {best.delta_e:.1f}); check the materials, "
                            "under-layers, illuminant, angle and white reference")
        edge = [c for c in cands[:1] if min(c.thickness_nm - grid[0], grid[-1] - c.thickness_nm)
                < step_nm]
        if edge and not (edge[0].thickness_nm == 0.0 and grid[0] == 0.0):
            warnings.append(f"the best candidate lies at the end of the searched range "
                            f"({edge[0].thickness_nm:g} nm): widen --range")
    if len(obs) > 1:
        s0 = obs[0]
        same = [o for o in obs[1:] if o.angle_deg == s0.angle_deg
                and o.setting.illuminant == s0.setting.illuminant]
        if same:
            warnings.append("a second observation with the same angle and illuminant cannot "
                            "break the cyclic ambiguity: change the angle or the illuminant")
    return ThicknessResult(system=system, observations=obs, candidates=tuple(cands),
                           ambiguous=ambiguous, poor_match=poor, warnings=tuple(warnings),
                           range_nm=(float(grid[0]), float(grid[-1])), step_nm=float(step_nm),
                           min_separation_nm=float(min_separation_nm))
