"""The free parameters of a fit and how they act on the model stack.

A fit model is a :class:`~filmstack.stack.Stack` (the sample as measured: incident medium,
substrate with or without thickness, back side) plus free parameters:

=====================================  ===========================================================
parameter name                         meaning
=====================================  ===========================================================
``layers[i].nm``                       physical thickness of front layer *i*, nm (from
                                       ``nm: {fit: 120, min: 50, max: 300}`` in the stack file,
                                       recorded by the loader in ``Stack.free``)
``layers[i].qwot``                     the same given in quarter waves at ``reference_nm``
``fit.index_scale.<M>``                factor on the real index n of every layer of material
                                       ``<M>`` (k kept): N = s·n + ik
``fit.cauchy.<M>.A`` / ``.B`` / ``.C`` Cauchy coefficients replacing n of material ``<M>``:
                                       n(λ) = A + B/λ² + C/λ⁴ with λ in µm (B in µm², C in
                                       µm⁴, as in the material files); k
                                       of the material is kept
``fit.wavelength_shift_nm``            correction added to the measured wavelength axis, nm
                                       (instrument calibration)
``fit.scale``                          factor on the model values (instrument photometric
                                       scale): measured ≈ scale · model
=====================================  ===========================================================

``<M>`` is a material's name as used in the layers (``SiO2``) or a single layer ``layers[i]``.
The ``fit.*`` parameters come from an optional top-level ``fit:`` block of the stack file, read
by :func:`parse_fit_block`::

    fit:
      index_scale: {SiO2: {fit: 1.0, min: 0.95, max: 1.05}}
      cauchy: {TiO2: {A: {fit: 2.2, min: 1.9, max: 2.6}, B: {fit: 0.02, min: 0, max: 0.1}}}
      wavelength_shift_nm: {fit: 0, min: -2, max: 2}
      scale: {fit: 1.0, min: 0.9, max: 1.1}

Every entry is either a plain number (held fixed) or ``{fit: start, min: lower, max: upper}``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputError
from ..materials import Material
from ..stack import Layer, Stack

__all__ = [
    "Parameter", "FitModel", "ScaledIndexMaterial", "CauchyMaterial", "parse_fit_block",
    "model_from_stack", "load_fit_model", "DEFAULT_BOUNDS",
]

#: Bounds used when a ``fit`` entry gives no ``min``/``max``.
DEFAULT_BOUNDS = {
    "index_scale": (0.8, 1.25),
    "cauchy.A": (1.0, 5.0),
    "cauchy.B": (-math.inf, math.inf),
    "cauchy.C": (-math.inf, math.inf),
    "wavelength_shift_nm": (-5.0, 5.0),
    "scale": (0.5, 1.5),
}

_KINDS = ("thickness", "index_scale", "cauchy", "shift", "scale")


@dataclass(frozen=True)
class Parameter:
    """One free parameter.

    Attributes
    ----------
    name
        Its place in the model file (``layers[0].nm``, ``fit.index_scale.SiO2``, …).
    kind
        ``"thickness"``, ``"index_scale"``, ``"cauchy"``, ``"shift"`` or ``"scale"``.
    value, lower, upper
        Start value and bounds, in the parameter's unit.
    layers
        Front layers it acts on (thickness: one; index parameters: every layer of the material).
    coefficient
        ``"A"``, ``"B"`` or ``"C"`` for a Cauchy coefficient.
    nm_per_unit
        For a thickness: nm per unit of the parameter (1 for ``.nm``; λ_ref/(4n) for ``.qwot``).
    unit
        Unit for display (``nm``, ``µm²``, …; empty for a factor).
    """

    name: str
    kind: str
    value: float
    lower: float = -math.inf
    upper: float = math.inf
    layers: tuple[int, ...] = ()
    coefficient: str | None = None
    nm_per_unit: float = 1.0
    unit: str = ""

    def __post_init__(self):
        if self.kind not in _KINDS:
            raise ValueError(f"unknown parameter kind {self.kind!r}")
        if not self.lower < self.upper:
            raise InputError(f"min ({self.lower:g}) must be below max ({self.upper:g})",
                             key=self.name)
        if not (math.isfinite(self.value) and self.lower <= self.value <= self.upper):
            raise InputError(f"start value {self.value:g} lies outside its bounds "
                             f"[{self.lower:g}, {self.upper:g}]", key=self.name)


@dataclass(frozen=True)
class ScaledIndexMaterial(Material):
    """A material whose real index is multiplied by ``scale``: N = scale·n + ik."""

    base: Material | None = None
    scale: float = 1.0

    def _nk(self, wl):
        nk = self.base.nk(wl)
        return self.scale * nk.real + 1j * nk.imag


@dataclass(frozen=True)
class CauchyMaterial(Material):
    """n(λ) = A + B/λ² + C/λ⁴ with λ in µm (B in µm², C in µm⁴, the unit of the material
    files' ``cauchy`` model), with the extinction k of ``base`` (0 without one).

    References: A.-L. Cauchy (1836); e.g. M. Born and E. Wolf, *Principles of Optics*, 7th ed.,
    §2.3.4 (the dispersion formula; from memory).
    """

    base: Material | None = None
    A: float = 1.5
    B: float = 0.0
    C: float = 0.0

    def _nk(self, wl):
        um = wl * 1e-3
        n = self.A + self.B / um**2 + self.C / um**4
        k = self.base.nk(wl).imag if self.base is not None else 0.0
        return n + 1j * k


@dataclass(frozen=True)
class FitModel:
    """A model stack with its free parameters.

    Attributes
    ----------
    stack
        The model (its thicknesses are those of the file; free ones are replaced by the fit).
    parameters
        The free parameters, in the order of the fit vector.
    cauchy
        ``{material key: {"A": .., "B": .., "C": ..}}`` start/fixed Cauchy coefficients.
    index_scale
        ``{material key: factor}`` start/fixed index scales.
    file
        The model file, for messages.
    """

    stack: Stack
    parameters: tuple[Parameter, ...]
    cauchy: dict = field(default_factory=dict)
    index_scale: dict = field(default_factory=dict)
    file: str | None = None

    def __post_init__(self):
        if not self.parameters:
            raise InputError("the model has no free parameter: mark at least one, e.g. a layer "
                             "thickness as nm: {fit: 120, min: 50, max: 300}", file=self.file)
        names = [p.name for p in self.parameters]
        if len(set(names)) != len(names):
            raise InputError("a free parameter is given twice", file=self.file)

    # -- vectors ---------------------------------------------------------------------------
    @property
    def names(self) -> list[str]:
        return [p.name for p in self.parameters]

    @property
    def x0(self) -> np.ndarray:
        """Start values, shape (P,)."""
        return np.array([p.value for p in self.parameters], dtype=float)

    @property
    def lower(self) -> np.ndarray:
        return np.array([p.lower for p in self.parameters], dtype=float)

    @property
    def upper(self) -> np.ndarray:
        return np.array([p.upper for p in self.parameters], dtype=float)

    def index_of(self, name: str) -> int:
        return self.names.index(name)

    def of_kind(self, kind: str) -> list[int]:
        return [j for j, p in enumerate(self.parameters) if p.kind == kind]

    # -- the model at given parameters ----------------------------------------------------
    def thicknesses(self, X) -> np.ndarray:
        """Front-layer thicknesses in nm for parameter vectors ``X`` (..., P): shape (..., L)."""
        X = np.asarray(X, dtype=float)
        d = np.broadcast_to(self.stack.thicknesses_nm, X.shape[:-1] + (len(self.stack.layers),))
        d = d.copy()
        for j, p in enumerate(self.parameters):
            if p.kind == "thickness":
                d[..., p.layers[0]] = X[..., j] * p.nm_per_unit
        return d

    def index_groups(self) -> list[dict]:
        """The material groups whose index is parametrised: ``{"key", "layers", "kind",
        "params": {coefficient or "s": parameter index}, "fixed": {...}}``."""
        groups = []
        for key, s in self.index_scale.items():
            layers = _layers_of(self.stack, key)
            params = {"s": j for j, p in enumerate(self.parameters)
                      if p.kind == "index_scale" and p.name == f"fit.index_scale.{key}"}
            groups.append({"key": key, "layers": layers, "kind": "index_scale",
                           "params": params, "fixed": {"s": float(s)}})
        for key, coefs in self.cauchy.items():
            layers = _layers_of(self.stack, key)
            params = {p.coefficient: j for j, p in enumerate(self.parameters)
                      if p.kind == "cauchy" and p.name.startswith(f"fit.cauchy.{key}.")}
            groups.append({"key": key, "layers": layers, "kind": "cauchy", "params": params,
                           "fixed": {c: float(v) for c, v in coefs.items()}})
        return groups

    def layer_indices(self, X, wavelength_nm, base=None):
        """Complex front-layer indices (..., L, W) for parameters ``X`` (..., P), or ``None``
        when no index is parametrised. ``base``: the stack's indices (L, W) if already known."""
        groups = self.index_groups()
        if not groups:
            return None
        X = np.asarray(X, dtype=float)
        wl = np.asarray(wavelength_nm, dtype=float)
        N0 = self.stack.layer_indices(wl) if base is None else base
        N = np.broadcast_to(N0, X.shape[:-1] + N0.shape).copy()
        for g in groups:
            idx = list(g["layers"])
            k0 = N0[idx].imag
            if g["kind"] == "index_scale":
                s = _value(X, g, "s")[..., None, None]
                N[..., idx, :] = s * N0[idx].real + 1j * k0
            else:
                A = _value(X, g, "A")[..., None, None]
                B = _value(X, g, "B")[..., None, None]
                C = _value(X, g, "C")[..., None, None]
                um = wl * 1e-3
                N[..., idx, :] = A + B / um**2 + C / um**4 + 1j * k0
        return N

    def stack_at(self, x) -> Stack:
        """The model stack at parameters ``x`` (P,): thicknesses set and parametrised
        materials replaced by :class:`ScaledIndexMaterial` / :class:`CauchyMaterial`."""
        x = np.asarray(x, dtype=float)
        d = self.thicknesses(x)
        layers = list(self.stack.layers)
        for g in self.index_groups():
            for i in g["layers"]:
                base = layers[i].material
                if g["kind"] == "index_scale":
                    s = float(_value(x, g, "s"))
                    mat = ScaledIndexMaterial(name=f"{base.name}×{s:.5g}", source=base.source,
                                              range_nm=base.range_nm, base=base, scale=s)
                else:
                    A, B, C = (float(_value(x, g, c)) for c in "ABC")
                    mat = CauchyMaterial(name=f"{base.name} (Cauchy)",
                                         source=f"fitted Cauchy n, k of {base.name}",
                                         range_nm=base.range_nm, base=base, A=A, B=B, C=C)
                layers[i] = Layer(mat, layers[i].thickness_nm)
        stack = replace(self.stack, layers=tuple(layers), free=())
        return stack.with_thicknesses(d)

    def shift(self, X) -> np.ndarray | float:
        """Wavelength correction in nm for ``X`` (..., P): shape (...) (0 if not free)."""
        j = self.of_kind("shift")
        return np.asarray(X)[..., j[0]] if j else 0.0

    def scale(self, X):
        """Photometric scale for ``X`` (..., P): shape (...) (1 if not free)."""
        j = self.of_kind("scale")
        return np.asarray(X)[..., j[0]] if j else 1.0

    def shift_bounds(self) -> tuple[float, float]:
        j = self.of_kind("shift")
        if not j:
            return 0.0, 0.0
        p = self.parameters[j[0]]
        return p.lower, p.upper


def _value(X, group, coef):
    j = group["params"].get(coef)
    if j is not None:
        return np.asarray(X)[..., j]
    return np.full(np.asarray(X).shape[:-1], group["fixed"].get(coef, 0.0))


_LAYER_KEY = re.compile(r"^layers\[(\d+)\]$")


def _layers_of(stack: Stack, key: str) -> tuple[int, ...]:
    m = _LAYER_KEY.match(key)
    if m:
        i = int(m.group(1))
        return (i,) if i < len(stack.layers) else ()
    return tuple(i for i, l in enumerate(stack.layers) if l.material.name == key)


# --- building a model -----------------------------------------------------------------------
_FREE_RE = re.compile(r"^layers\[(\d+)\]\.(nm|qwot)$")


def _thickness_parameter(fp, stack: Stack, file: str | None) -> Parameter:
    m = _FREE_RE.match(fp.name)
    if not m:
        raise InputError(f"free parameter '{fp.name}' cannot be fitted: fit supports free "
                         "front-layer thicknesses (layers[i].nm or layers[i].qwot) and the "
                         "fit: block (index_scale, cauchy, wavelength_shift_nm, scale)",
                         file=file, key=fp.name)
    i = int(m.group(1))
    if i >= len(stack.layers):
        raise InputError(f"free parameter '{fp.name}' names a layer the model does not have "
                         f"({len(stack.layers)} layers)", file=file, key=fp.name)
    if m.group(2) == "nm":
        lower = max(0.0, float(fp.lower))
        return Parameter(fp.name, "thickness", float(fp.value), lower, float(fp.upper), (i,),
                         nm_per_unit=1.0, unit="nm")
    mat = stack.layers[i].material
    n = float(np.real(mat.nk(np.array([stack.reference_nm]))[0]))
    per = stack.reference_nm / (4.0 * n)
    return Parameter(fp.name, "thickness", float(fp.value), max(0.0, float(fp.lower)),
                     float(fp.upper), (i,), nm_per_unit=per, unit="QWOT")


def _entry(value, key: str, file, lines, default_bounds) -> tuple[float, float, float, bool]:
    """(start, lower, upper, free) of a fit-block entry: a number or {fit, min, max}."""
    line = lines.get(key) if lines else None
    if isinstance(value, bool):
        raise InputError(f"expected a number or {{fit: .., min: .., max: ..}}, got {value!r}",
                         file=file, key=key, line=line)
    if isinstance(value, (int, float)):
        v = float(value)
        if not math.isfinite(v):
            raise InputError(f"expected a finite number, got {value!r}", file=file, key=key,
                             line=line)
        return v, v, v, False
    if isinstance(value, dict):
        unknown = set(value) - {"fit", "min", "max"}
        if unknown:
            raise InputError(f"unknown key '{sorted(map(str, unknown))[0]}'; expected fit, min, "
                             "max", file=file, key=key, line=line)
        if "fit" not in value:
            raise InputError("a free parameter needs 'fit: <start value>'", file=file, key=key,
                             line=line)
        out = []
        for sub, dflt in (("fit", None), ("min", default_bounds[0]), ("max", default_bounds[1])):
            v = value.get(sub, dflt)
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise InputError(f"'{sub}' must be a number, got {v!r}", file=file,
                                 key=f"{key}.{sub}",
                                 line=(lines or {}).get(f"{key}.{sub}", line))
            out.append(float(v))
        start, lo, hi = out
        if not lo < hi:
            raise InputError(f"min ({lo:g}) must be below max ({hi:g})", file=file, key=key,
                             line=line)
        if not lo <= start <= hi:
            raise InputError(f"fit start {start:g} lies outside [min, max] = [{lo:g}, {hi:g}]",
                             file=file, key=key, line=line)
        return start, lo, hi, True
    raise InputError(f"expected a number or {{fit: .., min: .., max: ..}}, got {value!r}",
                     file=file, key=key, line=line)


def parse_fit_block(block, stack: Stack, *, file: str | None = None,
                    lines: dict | None = None) -> tuple[list[Parameter], dict, dict]:
    """Validate the ``fit:`` block of a stack file (see the module docstring).

    Parameters
    ----------
    block
        The block as loaded from YAML (a mapping) or ``None``.
    stack
        The model, to find the layers of each named material.
    file, lines
        The file name and the ``{key path: line}`` table of :func:`filmstack.io.yamlfile.load_yaml`,
        for messages.

    Returns
    -------
    (parameters, index_scale, cauchy)
        Free parameters, ``{material key: start factor}``, ``{material key: {A, B, C}}``.
    """
    lines = lines or {}
    if block is None:
        return [], {}, {}
    if not isinstance(block, dict):
        raise InputError("'fit' must be a mapping with index_scale, cauchy, "
                         "wavelength_shift_nm or scale", file=file, key="fit",
                         line=lines.get("fit"))
    allowed = ("index_scale", "cauchy", "wavelength_shift_nm", "scale")
    for k in block:
        if k not in allowed:
            raise InputError(f"unknown key '{k}'; expected one of {', '.join(allowed)}",
                             file=file, key=f"fit.{k}", line=lines.get(f"fit.{k}"))
    params: list[Parameter] = []
    index_scale: dict = {}
    cauchy: dict = {}
    used: dict[str, str] = {}

    def material_key(section, key):
        path = f"fit.{section}.{key}"
        layers = _layers_of(stack, str(key))
        if not layers:
            names = sorted({l.material.name for l in stack.layers})
            raise InputError(f"'{key}' is not a material of the layers (they use: "
                             f"{', '.join(names) or 'no layers'}) nor layers[i] of an existing "
                             "layer", file=file, key=path, line=lines.get(path))
        for i in layers:
            if i in used:
                raise InputError(f"layer {i} already has its index set by {used[i]}; give one "
                                 "index model per layer", file=file, key=path,
                                 line=lines.get(path))
            used[i] = path
        return str(key), layers

    for section in ("index_scale", "cauchy"):
        sub = block.get(section)
        if sub is None:
            continue
        if not isinstance(sub, dict) or not sub:
            raise InputError(f"'{section}' must map material names to values", file=file,
                             key=f"fit.{section}", line=lines.get(f"fit.{section}"))
        for key, value in sub.items():
            mkey, layers = material_key(section, key)
            path = f"fit.{section}.{key}"
            if section == "index_scale":
                start, lo, hi, free = _entry(value, path, file, lines,
                                             DEFAULT_BOUNDS["index_scale"])
                if start <= 0:
                    raise InputError("an index scale must be > 0", file=file, key=path,
                                     line=lines.get(path))
                index_scale[mkey] = start
                if free:
                    params.append(Parameter(path, "index_scale", start, lo, hi, layers))
            else:
                if not isinstance(value, dict) or "A" not in value:
                    raise InputError("a Cauchy model needs A (and optionally B in µm², C in "
                                     "µm⁴): {A: {fit: 1.46, min: 1.3, max: 1.7}, B: 0.0035}",
                                     file=file, key=path, line=lines.get(path))
                coefs = {}
                for c, v in value.items():
                    if c not in ("A", "B", "C"):
                        raise InputError(f"unknown Cauchy coefficient '{c}'; expected A, B, C",
                                         file=file, key=f"{path}.{c}",
                                         line=lines.get(f"{path}.{c}"))
                    start, lo, hi, free = _entry(v, f"{path}.{c}", file, lines,
                                                 DEFAULT_BOUNDS[f"cauchy.{c}"])
                    coefs[c] = start
                    if free:
                        unit = {"A": "", "B": "µm²", "C": "µm⁴"}[c]
                        params.append(Parameter(f"{path}.{c}", "cauchy", start, lo, hi, layers,
                                                coefficient=c, unit=unit))
                cauchy[mkey] = coefs
    for key, kind, unit in (("wavelength_shift_nm", "shift", "nm"), ("scale", "scale", "")):
        if key in block:
            path = f"fit.{key}"
            start, lo, hi, free = _entry(block[key], path, file, lines, DEFAULT_BOUNDS[key])
            if not free:
                raise InputError(f"'{key}' must be free ({{fit: .., min: .., max: ..}}); a fixed "
                                 "calibration is applied to the measured file instead",
                                 file=file, key=path, line=lines.get(path))
            params.append(Parameter(path, kind, start, lo, hi, unit=unit))
    return params, index_scale, cauchy


def model_from_stack(stack: Stack, *, fit_block=None, fit_shift: bool = False,
                     fit_scale: bool = False, file: str | None = None,
                     lines: dict | None = None) -> FitModel:
    """A :class:`FitModel` from a stack (its ``free`` thicknesses) and a ``fit:`` block.

    Parameters
    ----------
    stack
        The model; ``stack.free`` lists free thicknesses (``layers[i].nm``/``.qwot``).
    fit_block
        The ``fit:`` mapping (see the module docstring) or ``None``.
    fit_shift, fit_scale
        Add a free wavelength shift (±5 nm) / photometric scale (0.5–1.5) when the block has none.
    file, lines
        For messages.
    """
    params = [_thickness_parameter(fp, stack, file) for fp in stack.free]
    extra, index_scale, cauchy = parse_fit_block(fit_block, stack, file=file, lines=lines)
    params += extra
    have = {p.kind for p in params}
    if fit_shift and "shift" not in have:
        params.append(Parameter("fit.wavelength_shift_nm", "shift", 0.0,
                                *DEFAULT_BOUNDS["wavelength_shift_nm"], unit="nm"))
    if fit_scale and "scale" not in have:
        params.append(Parameter("fit.scale", "scale", 1.0, *DEFAULT_BOUNDS["scale"]))
    return FitModel(stack, tuple(params), cauchy, index_scale, file)


def load_fit_model(path, *, fit_shift: bool = False, fit_scale: bool = False,
                   search_paths=()) -> FitModel:
    """Read a model stack file with its free parameters.

    The stack is validated by :func:`filmstack.io.stack_file.stack_from_mapping` (free
    thicknesses ``nm: {fit: .., min: .., max: ..}`` become ``Stack.free``); the optional
    top-level ``fit:`` block (index scales, Cauchy coefficients, calibration) is taken out first
    and validated here by :func:`parse_fit_block`.

    Parameters
    ----------
    path
        The model stack file.
    fit_shift, fit_scale
        Also fit a wavelength shift / photometric scale (see :func:`model_from_stack`).
    search_paths
        Extra folders of material files.
    """
    from pathlib import Path

    from ..io.stack_file import stack_from_mapping
    from ..io.yamlfile import load_yaml

    data, lines = load_yaml(path)
    block = None
    if isinstance(data, dict) and "fit" in data:
        data = dict(data)
        block = data.pop("fit")
    stack = stack_from_mapping(data, file=str(path), lines=lines, search_paths=search_paths,
                               base_dir=Path(path).parent)
    return model_from_stack(stack, fit_block=block, fit_shift=fit_shift, fit_scale=fit_scale,
                            file=str(path), lines=lines)
