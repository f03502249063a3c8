"""The data model of a coating: media, layers, substrate, back side; QWOT helpers.

Conventions (DESIGN.md §3): thickness in nm, wavelength in nm (vacuum), layers in *deposition
order* (``layers[0]`` touches the substrate), the light arrives from ``incident``. A substrate with
``substrate_mm`` is thick and incoherent; without it, semi-infinite. ``back_layers`` coat the
substrate's back side (also in deposition order: ``back_layers[0]`` touches the substrate), and
``exit`` is the medium behind a thick substrate.

A quarter-wave optical thickness (QWOT) is n(λ_ref)·d / (λ_ref / 4) at normal incidence, with
n the real part of the layer index at ``reference_nm``.

References: H. A. Macleod, *Thin-Film Optical Filters*, 4th ed. (CRC Press, 2010), ch. 2.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from .errors import InputError
from .materials import Material, get_material

__all__ = ["Layer", "Stack", "FreeParameter", "AIR", "qwot_to_nm", "nm_to_qwot"]

#: The library's air (n = 1), the default incident and exit medium.
AIR = get_material("air")


@dataclass(frozen=True)
class Layer:
    """One homogeneous film: a material and a physical thickness in nm (>= 0)."""

    material: Material
    thickness_nm: float

    def __post_init__(self):
        d = self.thickness_nm
        if not (np.isfinite(d) and d >= 0):
            raise InputError(f"layer thickness must be a finite number >= 0 nm, got {d!r}")


@dataclass(frozen=True)
class FreeParameter:
    """A quantity of a stack left free for fitting or design.

    ``name`` is its place in the stack file, e.g. ``layers[0].nm``; ``value`` the start value;
    ``lower``/``upper`` its bounds (same unit as the quantity).
    """

    name: str
    value: float
    lower: float = -np.inf
    upper: float = np.inf


@dataclass(frozen=True)
class Stack:
    """A coated part: incident medium, layers, substrate, optional back side.

    Attributes
    ----------
    incident
        Medium the light comes from (must be non-absorbing).
    substrate
        Substrate material.
    layers
        Front layers in deposition order (``layers[0]`` touches the substrate).
    substrate_mm
        Substrate thickness in mm; ``None`` for a semi-infinite substrate.
    exit
        Medium behind a thick substrate.
    back_layers
        Layers on the back side, deposition order (``back_layers[0]`` touches the substrate).
    reference_nm
        Reference wavelength for QWOT and H/L notation, nm.
    free
        Free parameters (for fitting), named by their place in the file.
    """

    incident: Material
    substrate: Material
    layers: tuple[Layer, ...] = ()
    substrate_mm: float | None = None
    exit: Material = AIR
    back_layers: tuple[Layer, ...] = ()
    reference_nm: float = 550.0
    free: tuple[FreeParameter, ...] = ()

    def __post_init__(self):
        object.__setattr__(self, "layers", tuple(self.layers))
        object.__setattr__(self, "back_layers", tuple(self.back_layers))
        object.__setattr__(self, "free", tuple(self.free))
        if self.substrate_mm is not None and not (np.isfinite(self.substrate_mm)
                                                  and self.substrate_mm > 0):
            raise InputError(f"substrate thickness must be > 0 mm, got {self.substrate_mm!r}")
        if not (np.isfinite(self.reference_nm) and self.reference_nm > 0):
            raise InputError(f"reference_nm must be > 0, got {self.reference_nm!r}")
        if self.back_layers and self.substrate_mm is None:
            raise InputError("back_layers need a thick substrate (give substrate mm)")

    @property
    def thicknesses_nm(self) -> np.ndarray:
        """Front-layer thicknesses in nm, deposition order, shape (L,)."""
        return np.array([layer.thickness_nm for layer in self.layers], dtype=float)

    @property
    def total_nm(self) -> float:
        """Total physical thickness of the front layers, nm."""
        return float(self.thicknesses_nm.sum())

    def with_thicknesses(self, thicknesses_nm) -> "Stack":
        """A copy with new front-layer thicknesses (nm, shape (L,))."""
        d = np.asarray(thicknesses_nm, dtype=float)
        if d.shape != (len(self.layers),):
            raise InputError(f"expected {len(self.layers)} thicknesses, got shape {d.shape}")
        return replace(self, layers=tuple(Layer(l.material, float(x))
                                          for l, x in zip(self.layers, d)))

    def layer_indices(self, wavelength_nm, *, extrapolate: bool = False) -> np.ndarray:
        """Complex indices of the front layers, shape (L, W) for wavelengths of shape (W,)."""
        wl = np.atleast_1d(np.asarray(wavelength_nm, dtype=float))
        return _indices(self.layers, wl, extrapolate)

    def back_layer_indices(self, wavelength_nm, *, extrapolate: bool = False) -> np.ndarray:
        """Complex indices of the back layers, shape (Lb, W)."""
        wl = np.atleast_1d(np.asarray(wavelength_nm, dtype=float))
        return _indices(self.back_layers, wl, extrapolate)

    @property
    def range_nm(self) -> tuple[float, float]:
        """(lo, hi) nm: the wavelengths where every material of the stack has data."""
        return (max(m.range_nm[0] for m in self.materials),
                min(m.range_nm[1] for m in self.materials))

    @property
    def materials(self) -> tuple[Material, ...]:
        """Every distinct material of the stack (media and layers), first appearance first."""
        seen: dict[int, Material] = {}
        for m in (self.incident, self.substrate, self.exit,
                  *(l.material for l in self.layers), *(l.material for l in self.back_layers)):
            seen.setdefault(id(m), m)
        return tuple(seen.values())


def _indices(layers, wl, extrapolate):
    if not layers:
        return np.empty((0, wl.size), dtype=complex)
    cache: dict[int, np.ndarray] = {}
    rows = []
    for layer in layers:
        key = id(layer.material)
        if key not in cache:
            cache[key] = layer.material.nk(wl, extrapolate=extrapolate)
        rows.append(cache[key])
    return np.stack(rows)


def qwot_to_nm(qwot, material: Material, reference_nm: float) -> float:
    """Physical thickness (nm) of ``qwot`` quarter waves of ``material`` at ``reference_nm``.

    d = qwot · λ_ref / (4 n(λ_ref)), n the real index. References: Macleod (2010), §2.
    """
    n = float(np.real(material.nk(np.array([reference_nm]))[0]))
    return float(qwot) * reference_nm / (4.0 * n)


def nm_to_qwot(thickness_nm, material: Material, reference_nm: float) -> float:
    """Quarter-wave optical thickness of ``thickness_nm`` of ``material`` at ``reference_nm``."""
    n = float(np.real(material.nk(np.array([reference_nm]))[0]))
    return float(thickness_nm) * 4.0 * n / reference_nm
