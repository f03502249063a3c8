"""The free part of a coating design and the problem it sits in.

A :class:`Design` is what the optimiser changes: a sequence of material symbols (keys of the
spec's ``materials``) and their physical thicknesses in nm, in deposition order (``[0]`` nearest
the substrate). A :class:`DesignProblem` holds what stays fixed: the media and reference wavelength
(the spec's template stack), the allowed materials, the fixed layers below and above the free
layers (an adhesion layer, a protective top layer) and the limits. ``problem.stack(design)``
gives the full :class:`~filmstack.stack.Stack`:
``fixed_bottom + design layers + fixed_top`` on the template's substrate.

Layer count and total thickness limits count every front layer of that full stack, fixed layers
included (they are deposited too); the thinnest-layer limit applies to the free layers only (the
fixed layers are given as they are).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputError
from ..stack import Layer, Stack, nm_to_qwot

__all__ = ["Design", "DesignProblem", "DEFAULT_THINNEST_NM"]

#: Thinnest free layer kept when the spec sets no ``thinnest_nm`` (nm). Below about a nanometre a
#: film is not a homogeneous layer; common practice, no published source.
DEFAULT_THINNEST_NM = 1.0


@dataclass(frozen=True)
class Design:
    """Free layers of a design: ``symbols`` (material keys) and ``thicknesses_nm``, deposition order.

    Thicknesses are stored as a tuple of floats so that a design is hashable and comparable; use
    :attr:`d` for the array (shape (F,), nm).
    """

    symbols: tuple[str, ...]
    thicknesses_nm: tuple[float, ...]

    def __post_init__(self):
        object.__setattr__(self, "symbols", tuple(str(s) for s in self.symbols))
        object.__setattr__(self, "thicknesses_nm",
                           tuple(float(x) for x in np.asarray(self.thicknesses_nm, float).ravel()))
        if len(self.symbols) != len(self.thicknesses_nm):
            raise InputError(f"a design needs one thickness per layer: {len(self.symbols)} "
                             f"symbols, {len(self.thicknesses_nm)} thicknesses")

    @property
    def d(self) -> np.ndarray:
        """Thicknesses in nm, shape (F,)."""
        return np.array(self.thicknesses_nm, dtype=float)

    def __len__(self) -> int:
        return len(self.symbols)

    def with_d(self, d) -> "Design":
        """A copy with new thicknesses (nm, shape (F,))."""
        return replace(self, thicknesses_nm=tuple(np.asarray(d, float).ravel()))

    def cleaned(self, thinnest_nm: float) -> "Design":
        """Layers thinner than ``thinnest_nm`` removed, then neighbours of one material merged."""
        syms, ds = [], []
        for s, x in zip(self.symbols, self.thicknesses_nm):
            if x < thinnest_nm:
                continue
            if syms and syms[-1] == s:
                ds[-1] += x
            else:
                syms.append(s)
                ds.append(x)
        return Design(tuple(syms), tuple(ds))

    def merged(self) -> "Design":
        """Neighbours of the same material merged into one layer (nothing removed)."""
        return self.cleaned(-1.0)


@dataclass(frozen=True)
class DesignProblem:
    """Everything of a design that the optimiser does not change.

    Attributes
    ----------
    template
        Stack with the media, the substrate (semi-infinite or thick) and ``reference_nm``.
    materials
        Allowed materials by symbol, e.g. ``{'H': TiO2, 'L': SiO2}``.
    fixed_bottom, fixed_top
        Layers kept as they are below / above the free layers (deposition order).
    total_nm, max_layers
        Limits on the whole front stack (fixed layers included); ``None`` for none.
    thinnest_nm
        Thinnest free layer allowed (nm); :data:`DEFAULT_THINNEST_NM` if the spec sets none.
    """

    template: Stack
    materials: dict = field(default_factory=dict)
    fixed_bottom: tuple[Layer, ...] = ()
    fixed_top: tuple[Layer, ...] = ()
    total_nm: float | None = None
    max_layers: int | None = None
    thinnest_nm: float = DEFAULT_THINNEST_NM

    @classmethod
    def from_spec(cls, spec) -> "DesignProblem":
        """The problem of a :class:`~filmstack.spec.Spec` (validated by its loader)."""
        if not spec.materials:
            raise InputError("a design spec needs 'materials': the materials the optimiser may "
                             "use, e.g. materials: [TiO2, SiO2]", file=spec.path, key="materials")
        lim = spec.limits
        thin = lim.thinnest_nm if lim.thinnest_nm else DEFAULT_THINNEST_NM
        tmpl = replace(spec.template, layers=())
        return cls(template=tmpl, materials=dict(spec.materials),
                   fixed_bottom=tuple(spec.fixed_bottom), fixed_top=tuple(spec.fixed_top),
                   total_nm=lim.total_nm, max_layers=lim.layers, thinnest_nm=float(thin))

    @property
    def n_fixed(self) -> int:
        """Number of fixed layers (bottom + top)."""
        return len(self.fixed_bottom) + len(self.fixed_top)

    @property
    def fixed_nm(self) -> float:
        """Total thickness of the fixed layers, nm."""
        return float(sum(l.thickness_nm for l in self.fixed_bottom + self.fixed_top))

    @property
    def free_total_nm(self) -> float | None:
        """Total thickness left to the free layers (nm), or None without a limit."""
        return None if self.total_nm is None else max(self.total_nm - self.fixed_nm, 0.0)

    @property
    def free_max_layers(self) -> int | None:
        """Number of free layers allowed, or None without a limit."""
        return None if self.max_layers is None else max(self.max_layers - self.n_fixed, 0)

    def layers(self, design: Design) -> tuple[Layer, ...]:
        """All front layers, deposition order: fixed bottom, free, fixed top."""
        free = tuple(Layer(self.materials[s], float(x))
                     for s, x in zip(design.symbols, design.thicknesses_nm))
        return tuple(self.fixed_bottom) + free + tuple(self.fixed_top)

    def stack(self, design: Design) -> Stack:
        """The full :class:`Stack` of ``design``."""
        return replace(self.template, layers=self.layers(design))

    def violations(self, design: Design) -> list[str]:
        """Human-readable list of the limits ``design`` breaks (empty when it keeps them all)."""
        out = []
        n = len(design) + self.n_fixed
        total = float(design.d.sum()) + self.fixed_nm
        if self.max_layers is not None and n > self.max_layers:
            out.append(f"{n} layers > limit {self.max_layers}")
        if self.total_nm is not None and total > self.total_nm * (1 + 1e-9) + 1e-9:
            out.append(f"total {total:.2f} nm > limit {self.total_nm:g} nm")
        thin = [x for x in design.thicknesses_nm if x < self.thinnest_nm * (1 - 1e-9) - 1e-9]
        if thin:
            out.append(f"layer of {min(thin):.3g} nm < thinnest {self.thinnest_nm:g} nm")
        unknown = sorted(set(design.symbols) - set(self.materials))
        if unknown:
            out.append(f"unknown material symbol(s) {', '.join(unknown)}")
        return out

    def qwots(self, design: Design) -> np.ndarray:
        """QWOT of every free layer at the template's reference wavelength, shape (F,)."""
        ref = self.template.reference_nm
        return np.array([nm_to_qwot(x, self.materials[s], ref)
                         for s, x in zip(design.symbols, design.thicknesses_nm)])
