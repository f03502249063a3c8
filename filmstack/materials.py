"""Optical constants: dispersion models and the bundled materials library.

Conventions: wavelength in nm (vacuum); complex index N = n + ik with k >= 0 (time dependence
exp(-iwt)). Every model knows its valid wavelength range; evaluating outside it raises
:class:`~filmstack.errors.OutOfRangeError` unless ``extrapolate=True`` (then an
:class:`~filmstack.errors.ExtrapolationWarning` is issued).

(Skeleton: the materials issue fills in the models and the library loader.)
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from .errors import ExtrapolationWarning, InputError, OutOfRangeError

__all__ = ["Material", "Constant", "get_material", "list_materials", "material_from_spec"]


@dataclass(frozen=True)
class Material:
    """A named optical material with a dispersion model.

    Subclasses implement :meth:`_nk` on wavelengths already checked against ``range_nm``.

    Attributes
    ----------
    name
        The library name (or a description for inline materials).
    source
        The published source of the data or model.
    range_nm
        (min, max) wavelengths in nm where the model is valid.
    """

    name: str
    source: str = ""
    range_nm: tuple[float, float] = (0.0, math.inf)

    def nk(self, wavelength_nm, *, extrapolate: bool = False) -> np.ndarray:
        """Complex refractive index N = n + ik.

        Parameters
        ----------
        wavelength_nm
            Vacuum wavelengths in nm, any shape.
        extrapolate
            Allow evaluation outside ``range_nm`` (warned); otherwise that is an error.

        Returns
        -------
        numpy.ndarray of complex, the shape of ``wavelength_nm``.
        """
        wl = np.asarray(wavelength_nm, dtype=float)
        lo, hi = self.range_nm
        if wl.size and (wl.min() < lo or wl.max() > hi):
            msg = (f"material '{self.name}' has data from {lo:g} to {hi:g} nm, "
                   f"asked for {wl.min():g} to {wl.max():g} nm")
            if not extrapolate:
                raise OutOfRangeError(msg)
            warnings.warn(msg + "; extrapolating", ExtrapolationWarning, stacklevel=2)
        return np.asarray(self._nk(wl), dtype=complex)

    def _nk(self, wl: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError


@dataclass(frozen=True)
class Constant(Material):
    """A wavelength-independent index N = n + ik (valid at every wavelength)."""

    n: float = 1.0
    k: float = 0.0

    def __post_init__(self):
        if not (np.isfinite(self.n) and self.n > 0):
            raise InputError(f"n must be a positive number, got {self.n!r}")
        if not (np.isfinite(self.k) and self.k >= 0):
            raise InputError(f"k must be >= 0 (absorption), got {self.k!r}")

    def _nk(self, wl):
        return np.full(wl.shape, complex(self.n, self.k))


def get_material(name: str, search_paths=()) -> Material:
    """Load a material by library name (skeleton: filled in by the materials issue)."""
    raise NotImplementedError


def list_materials(search_paths=()) -> list[str]:
    """Names of the bundled (and user) materials (skeleton)."""
    raise NotImplementedError


def material_from_spec(spec, search_paths=()) -> Material:
    """A material from a name or an inline ``{n: .., k: ..}`` mapping (skeleton)."""
    if isinstance(spec, Material):
        return spec
    if isinstance(spec, dict) and set(spec) <= {"n", "k"} and "n" in spec:
        n, k = float(spec["n"]), float(spec.get("k", 0.0))
        return Constant(name=f"n={n:g}" + (f",k={k:g}" if k else ""), source="inline", n=n, k=k)
    return get_material(spec, search_paths)
