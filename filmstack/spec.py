"""Requirement specs (DESIGN.md §4): what a coating must do, its limits and tolerances.

The data model is shared by the design job (targets of the merit function) and the check job
(verdicts, margins, yield). Units: R, T, A as fractions 0–1 (a file may write ``"<= 0.5%"``);
phase in degrees in files and radians inside; GD in fs; GDD in fs²; wavelengths in nm; angles in
degrees.

(Skeleton: the check issue writes the loader, validation and evaluation; the design issue builds
its merit on the same model.)
"""

from __future__ import annotations

from dataclasses import dataclass, field

from .materials import Material
from .stack import Layer, Stack

__all__ = ["Requirement", "Limits", "Tolerances", "Spec"]


@dataclass(frozen=True)
class Requirement:
    """One requirement: ``quantity op limit`` over a band, angles and a polarisation.

    quantity: 'R', 'T', 'A', 'phase', 'GD', 'GDD' or 'colour'; op: '<=', '>=' or '=';
    limit in internal units (fractions for R/T/A); tolerance (for '=') in the same unit;
    band_nm: (lo, hi) with lo == hi for a single wavelength; step_nm: sampling step or None for
    the default; angles_deg: angles of incidence; polarization: 's', 'p' or 'mean';
    over: 'average' (band mean) or 'every' (every sampled point); weight >= 0;
    side: 'reflected' or 'transmitted' (phase, GD, GDD, colour); ``key`` is its place in the
    file (``requirements[0]``) for messages.
    """

    quantity: str
    op: str
    limit: float
    band_nm: tuple[float, float]
    tolerance: float = 0.0
    step_nm: float | None = None
    angles_deg: tuple[float, ...] = (0.0,)
    polarization: str = "mean"
    over: str = "average"
    weight: float = 1.0
    side: str = "reflected"
    key: str = ""
    options: dict = field(default_factory=dict)   # quantity-specific (e.g. colour box, target)


@dataclass(frozen=True)
class Limits:
    """Manufacturing limits on a design: total thickness (nm), layer count, thinnest layer (nm)."""

    total_nm: float | None = None
    layers: int | None = None
    thinnest_nm: float | None = None


@dataclass(frozen=True)
class Tolerances:
    """Deposition errors for Monte Carlo: 1σ in percent.

    thickness_pct: random, independent per layer; rate_pct: systematic per material name (one draw
    per trial scales every layer of that material); index_pct: per material name (scales n).
    """

    thickness_pct: float = 0.0
    rate_pct: dict = field(default_factory=dict)
    index_pct: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Spec:
    """A whole spec file.

    template: a :class:`Stack` with the media and reference wavelength (its layers are the fixed
    layers and the start, if given); materials: the materials the optimiser may use, by symbol
    (``{'H': TiO2, 'L': SiO2}``); start: an optional starting design in H/L notation;
    fixed_bottom / fixed_top: layers that the design keeps (adhesion, protective top layers).
    """

    template: Stack
    materials: dict
    requirements: tuple[Requirement, ...]
    limits: Limits = Limits()
    tolerances: Tolerances = Tolerances()
    start: str | None = None
    fixed_bottom: tuple[Layer, ...] = ()
    fixed_top: tuple[Layer, ...] = ()
    path: str | None = None
