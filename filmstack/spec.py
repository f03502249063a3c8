"""Requirement specs (DESIGN.md §4): what a coating must do, its limits and tolerances.

The data model is shared by the design job (targets of the merit function) and the check job
(verdicts, margins, yield). Units: R, T, A as fractions 0–1 (a file may write ``"<= 0.5%"``);
phase in degrees in files and radians inside; GD in fs; GDD in fs²; wavelengths in nm; angles in
degrees.

Reading a spec file
-------------------
:func:`load_spec` reads a YAML file (numbers such as ``1e-3`` are numbers) and
:func:`spec_from_mapping` validates an already-parsed mapping. Every problem raises
:class:`~filmstack.errors.InputError` naming the file, the key path (``requirements[1].band_nm``),
the line where known, and what was expected; an unknown key suggests the nearest known one.

A spec file has these top-level keys (only ``stack`` and ``requirements`` are required)::

    stack: {incident: air, substrate: crown-glass, reference_nm: 550}   # as a stack file;
                                                  # layers optional
    materials: [TiO2, SiO2]      # or {H: TiO2, L: SiO2}, or inline [{n: 2.35}, {n: 1.46}]
    start: "(HL)^2"              # optional starting design in H/L notation
    fixed: {bottom: [{material: Al2O3, nm: 5}], top: [{material: SiO2, nm: 10}]}  # optional
    requirements:
      - R: "<= 0.5%"             # quantity: condition
        band_nm: [420, 680]      # [x, x] is a single wavelength (colour: default [380, 780])
        step_nm: 2               # optional sampling step (default: see filmstack.evaluate)
        angles_deg: [0, 15, 30]
        polarization: mean       # s | p | mean (phase, GD, GDD: s or p; default s)
        over: average            # average (band mean, per angle) | every (every sampled point)
        weight: 1                # >= 0, for the design merit
        side: reflected          # reflected | transmitted (phase, GD, GDD, colour)
    limits: {total_nm: 1200, layers: 30, thinnest_nm: 10}
    tolerances: {thickness_pct: 1.0, rate_pct: {TiO2: 0.5}, index_pct: {TiO2: 0.3}}

Conditions are read by a small tokenizer and grammar (never ``eval``)::

    condition := op number [unit] [("±" | "+-" | "+/-") number [unit]]
    op        := "<=" | ">=" | "=" | "≤" | "≥"
    unit      := "%" (R, T, A) | "deg" | "°" | "rad" (phase) | "fs" (GD) | "fs2" | "fs^2" | "fs²" (GDD)

``=`` needs a tolerance (``"= 45 ± 2"``). R, T, A without ``%`` are fractions and must lie in
0–1 (``"<= 50"`` is refused with a hint to write ``50%``).

Materials
---------
``materials:`` as a symbol mapping keeps the symbols. As a list, symbols are given by the real
index at ``reference_nm``, highest first: two materials are ``H``, ``L``; three are ``H``, ``M``,
``L``; four or more are ``A``, ``B``, ``C``, … (give a mapping to choose the symbols yourself).

Tolerances
----------
``rate_pct`` and ``index_pct`` are a number (every material) or a mapping from a material name or
a symbol of ``materials:`` to a 1σ percentage. Internally both are stored by material *name*,
with the key ``"*"`` for "every material"; :meth:`Tolerances.rate_for` / :meth:`Tolerances.index_for`
look up one material.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError
from .materials import Material, material_from_spec
from .notation import check_symbol_name
from .stack import AIR, Layer, Stack

__all__ = [
    "Requirement", "Limits", "Tolerances", "Spec", "Condition",
    "QUANTITIES", "parse_condition", "load_spec", "spec_from_mapping",
]

#: Most sampling intervals of one band (``band / step_nm``); the design and check jobs also
#: evaluate a grid four times finer, and every sample costs memory for every layer and angle.
MAX_BAND_SAMPLES = 100_000
#: The quantities a requirement may constrain, in the order they were introduced.
QUANTITIES = ("R", "T", "A", "phase", "GD", "GDD", "colour")
#: Quantities computed from the phase of r or t (need 's' or 'p').
PHASE_QUANTITIES = ("phase", "GD", "GDD")


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
    text: str = ""                                # the condition as written, for tables

    @property
    def unit(self) -> str:
        """Display unit of the value in files and tables ('%' for R/T/A, 'deg', 'fs', 'fs²')."""
        return _DISPLAY_UNIT.get(self.quantity, "")

    def to_display(self, value):
        """A value in internal units converted to the display unit (R/T/A → %, phase → deg)."""
        return np.asarray(value, dtype=float) * _DISPLAY_SCALE.get(self.quantity, 1.0)

    def describe(self) -> str:
        """One-line description, e.g. ``R <= 0.5% over 420–680 nm (average) at 0, 15°, mean``."""
        lo, hi = self.band_nm
        band = f"{lo:g} nm" if lo == hi else f"{lo:g}–{hi:g} nm"
        angles = ", ".join(f"{a:g}" for a in self.angles_deg) + "°"
        if self.quantity == "colour":
            return f"colour {self.side}: {self._colour_condition()} at {angles}"
        cond = self.text or f"{self.op} {self.to_display(self.limit):g}{self.unit}"
        side = f", {self.side}" if self.quantity in PHASE_QUANTITIES + ("colour",) else ""
        return f"{self.quantity} {cond} over {band} ({self.over}) at {angles}, " \
               f"{self.polarization}{side}"


    def _colour_condition(self) -> str:
        """The colour box or target, with the illuminant and observer, for :meth:`describe`."""
        o = self.options
        if o.get("kind") == "target":
            L, a, b = o["target"]
            cond = f"ΔE2000 {self.op} {self.limit:g} from L*a*b* ({L:g}, {a:g}, {b:g})"
        else:
            box = [f"{c}* in [{o[c][0]:g}, {o[c][1]:g}]" for c in ("a", "b") if o.get(c)]
            cond = " and ".join(box) if box else f"{self.op} {self.limit:g}"
        return f"{cond} ({o.get('illuminant', 'D65')}, {o.get('observer', 2)}°)"


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
    The key ``"*"`` in rate_pct / index_pct applies to every material not named.
    """

    thickness_pct: float = 0.0
    rate_pct: dict = field(default_factory=dict)
    index_pct: dict = field(default_factory=dict)

    def rate_for(self, name: str) -> float:
        """1σ systematic rate error (%) of the material called ``name``."""
        return float(self.rate_pct.get(name, self.rate_pct.get("*", 0.0)))

    def index_for(self, name: str) -> float:
        """1σ index error (%, scales n) of the material called ``name``."""
        return float(self.index_pct.get(name, self.index_pct.get("*", 0.0)))

    @property
    def is_zero(self) -> bool:
        """True when no error is given at all."""
        return (self.thickness_pct == 0 and not any(self.rate_pct.values())
                and not any(self.index_pct.values()))


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


# --------------------------------------------------------------------------------------------
# Conditions
# --------------------------------------------------------------------------------------------

_DISPLAY_UNIT = {"R": "%", "T": "%", "A": "%", "phase": " deg", "GD": " fs", "GDD": " fs²"}
_DISPLAY_SCALE = {"R": 100.0, "T": 100.0, "A": 100.0, "phase": 180.0 / math.pi}

# unit text -> (quantities it may follow, factor to internal units)
_UNITS = {
    "%": (("R", "T", "A"), 0.01),
    "deg": (("phase",), math.pi / 180.0),
    "°": (("phase",), math.pi / 180.0),
    "rad": (("phase",), 1.0),
    "fs": (("GD",), 1.0),
    "fs2": (("GDD",), 1.0),
    "fs^2": (("GDD",), 1.0),
    "fs²": (("GDD",), 1.0),
}
# what a bare number means for each quantity (factor to internal units)
_DEFAULT_FACTOR = {"R": 1.0, "T": 1.0, "A": 1.0, "phase": math.pi / 180.0, "GD": 1.0,
                   "GDD": 1.0, "colour": 1.0}
_UNIT_HINT = {"R": "'%' or none (a fraction)", "T": "'%' or none (a fraction)",
              "A": "'%' or none (a fraction)", "phase": "'deg' (default) or 'rad'",
              "GD": "'fs'", "GDD": "'fs2'", "colour": "none (a ΔE2000 value)"}

_TOKEN_RE = re.compile(r"""
    (?P<space>\s+)
  | (?P<op><=|>=|≤|≥|==|=|<|>)
  | (?P<pm>±|\+/-|\+-)
  | (?P<num>[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)
  | (?P<unit>%|°|fs\^2|fs²|fs2|fs|deg|rad)
""", re.X)


@dataclass(frozen=True)
class Condition:
    """A parsed condition: ``op`` ('<=', '>=', '='), ``limit`` and ``tolerance`` in internal units."""

    op: str
    limit: float
    tolerance: float = 0.0


class _ConditionError(Exception):
    pass


def _tokens(text: str):
    pos = 0
    out = []
    while pos < len(text):
        m = _TOKEN_RE.match(text, pos)
        if m is None:
            raise _ConditionError(f"unexpected '{text[pos:]}' at character {pos + 1}")
        if m.lastgroup != "space":
            out.append((m.lastgroup, m.group(), pos))
        pos = m.end()
    return out


def parse_condition(text, quantity: str = "R") -> Condition:
    """Parse a condition such as ``"<= 0.5%"``, ``">= 98 %"``, ``"= 45 ± 2"`` for ``quantity``.

    Parameters
    ----------
    text
        The condition as written in the file.
    quantity
        One of :data:`QUANTITIES`; decides the allowed units and the range check.

    Returns
    -------
    Condition in internal units (R/T/A fractions, phase rad, GD fs, GDD fs²).

    Raises
    ------
    ValueError
        With a message saying what is wrong and what was expected (no file/key: the caller adds
        them).
    """
    example = {"phase": "'= 180 ± 10 deg'", "GD": "'<= 50 fs'", "GDD": "'= -50 ± 10 fs2'",
               "colour": "'<= 2'"}.get(quantity, "'<= 0.5%' or '>= 98%'")
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise ValueError(f"expected a condition as text, e.g. {example}, got {text!r}")
    if not isinstance(text, str):
        raise ValueError(f"a bare number {text!r} is not a condition: write the comparison too, "
                         f"e.g. {example}")
    try:
        toks = _tokens(text)
        if not toks:
            raise _ConditionError("it is empty")
        kind, op, pos = toks[0]
        if kind != "op":
            raise _ConditionError(f"it must start with '<=', '>=' or '=' (found '{op}')")
        if op in ("<", ">"):
            raise _ConditionError(f"'{op}' is not allowed: write '{op}=' (limits are inclusive)")
        if op == "==":
            raise _ConditionError("write '=' with a tolerance, e.g. '= 45 ± 2'")
        op = {"≤": "<=", "≥": ">="}.get(op, op)
        i = 1

        def number(i, what):
            if i >= len(toks) or toks[i][0] != "num":
                found = f"'{toks[i][1]}' at character {toks[i][2] + 1}" if i < len(toks) \
                    else "the end"
                raise _ConditionError(f"expected {what} after '{toks[i - 1][1]}', found {found}")
            return float(toks[i][1]), i + 1

        def unit(i):
            if i < len(toks) and toks[i][0] == "unit":
                u = toks[i][1]
                allowed, factor = _UNITS[u]
                if quantity not in allowed:
                    raise _ConditionError(f"unit '{u}' does not fit {quantity} "
                                          f"(expected {_UNIT_HINT[quantity]})")
                return u, factor, i + 1
            return None, _DEFAULT_FACTOR[quantity], i

        value, i = number(i, "a number")
        u1, f1, i = unit(i)
        tol, u2, f2 = None, None, f1
        if i < len(toks) and toks[i][0] == "pm":
            if op != "=":
                raise _ConditionError(f"a tolerance '±' belongs to '=', not to '{op}'")
            tol, i = number(i + 1, "a tolerance")
            u2, f2, i = unit(i)
            if u1 is None and u2 is not None:
                f1 = f2                      # "= 45 ± 2 %": the unit covers both numbers
            elif u1 is not None and u2 is None:
                f2 = f1
            elif u1 != u2 and f1 != f2:
                raise _ConditionError(f"the value is in '{u1}' but the tolerance in '{u2}'")
        if i < len(toks):
            raise _ConditionError(f"unexpected '{toks[i][1]}' at character {toks[i][2] + 1}")
    except _ConditionError as exc:
        raise ValueError(f"cannot read condition '{text}': {exc}; expected e.g. {example}") \
            from None
    if op == "=" and tol is None:
        u = "" if u1 is None else (u1 if u1 in ("%", "°") else " " + u1)
        raise ValueError(f"'=' needs a tolerance: write e.g. '= {value:g}{u} ± 1{u}' "
                         f"(got '{text}')")
    if tol is not None and tol < 0:
        raise ValueError(f"the tolerance in '{text}' must be >= 0")
    limit = _scaled(value, f1)
    tolerance = 0.0 if tol is None else _scaled(tol, f2)
    if not (math.isfinite(limit) and math.isfinite(tolerance)):
        raise ValueError(f"condition '{text}' has a number that is not finite")
    if quantity in ("R", "T", "A"):
        if not -1e-12 <= limit <= 1 + 1e-12:
            hint = (f" — did you mean '{op} {value:g}%'?" if u1 is None and 1 < value <= 100
                    else "")
            raise ValueError(f"{quantity} limit {_fmt_pct(limit)} in '{text}' is outside 0–100 %"
                             f"{hint}")
    return Condition(op, limit, tolerance)


def _scaled(x: float, factor: float) -> float:
    """x · factor, exact in decimal for percent (0.35 % → 0.0035, not 0.0034999999999999996)."""
    if factor == 0.01:
        from decimal import Decimal
        return float(Decimal(repr(x)) / 100)
    return x * factor


def _fmt_pct(x):
    return f"{x * 100:g} %"


# --------------------------------------------------------------------------------------------
# Validation helpers
# --------------------------------------------------------------------------------------------

class _Ctx:
    """File, line table and helpers for messages."""

    def __init__(self, file, lines):
        self.file = None if file is None else str(file)
        self.lines = lines or {}

    def line(self, key):
        from .io.yamlfile import line_of
        return line_of(self.lines, key) if self.lines else None

    def error(self, key, message, cls=InputError):
        return cls(message, file=self.file, key=key or None, line=self.line(key or ""))

    def mapping(self, obj, key, what="a mapping"):
        if not isinstance(obj, dict):
            raise self.error(key, f"expected {what}, got {_typename(obj)}")
        return obj

    def known_keys(self, obj: dict, key: str, allowed, what: str):
        for k in obj:
            if not isinstance(k, str) or k not in allowed:
                sub = _join(key, k)
                close = difflib.get_close_matches(str(k), list(allowed), n=1, cutoff=0.6)
                close = close or [a for a in allowed if a.lower() == str(k).lower()]
                hint = f" — did you mean '{close[0]}'?" if close else ""
                raise self.error(sub, f"unknown key '{k}' in {what}{hint} "
                                      f"(allowed: {', '.join(sorted(allowed))})")

    def number(self, obj, key, *, lo=None, hi=None, lo_open=False, hi_open=False, integer=False,
               what="a number"):
        if isinstance(obj, bool) or not isinstance(obj, (int, float)):
            raise self.error(key, f"expected {what}, got {_typename(obj)} {obj!r}")
        x = float(obj)
        if not math.isfinite(x):
            raise self.error(key, f"expected a finite number, got {obj!r}")
        if integer and not float(obj).is_integer():
            raise self.error(key, f"expected a whole number, got {obj!r}")
        if lo is not None and (x < lo or (lo_open and x == lo)):
            raise self.error(key, f"expected {what} {'>' if lo_open else '>='} {lo:g}, "
                                  f"got {obj!r}")
        if hi is not None and (x > hi or (hi_open and x == hi)):
            raise self.error(key, f"expected {what} {'<' if hi_open else '<='} {hi:g}, "
                                  f"got {obj!r}")
        return int(x) if integer else x

    def choice(self, obj, key, choices, what):
        if not isinstance(obj, str) or obj not in choices:
            close = difflib.get_close_matches(str(obj), list(choices), n=1, cutoff=0.5)
            hint = f" — did you mean '{close[0]}'?" if close else ""
            raise self.error(key, f"{what} must be one of {', '.join(choices)}, got {obj!r}{hint}")
        return obj

    def material(self, obj, key):
        if isinstance(obj, str) and obj.strip().lower() == "air":
            try:
                return material_from_spec(obj)
            except (NotImplementedError, InputError, LookupError):
                return AIR
        try:
            return material_from_spec(obj)
        except InputError as exc:
            raise self.error(key, exc.message, type(exc)) from None
        except (LookupError, TypeError, ValueError) as exc:
            raise self.error(key, f"not a material: {exc}") from None
        except NotImplementedError:
            raise self.error(key, f"cannot look up material {obj!r}: the materials library is "
                                  "not available; give it inline as {n: ..., k: ...}") from None


def _typename(obj):
    return {dict: "a mapping", list: "a list", str: "text", bool: "true/false",
            type(None): "nothing"}.get(type(obj), type(obj).__name__)


def _join(parent, key):
    if isinstance(key, int) and not isinstance(key, bool):
        return f"{parent}[{key}]"
    return f"{parent}.{key}" if parent else str(key)


_TOP_KEYS = ("stack", "materials", "start", "fixed", "requirements", "limits", "tolerances",
             "title", "notes")
_REQ_KEYS = ("band_nm", "step_nm", "angles_deg", "polarization", "over", "weight", "side")
_LIMIT_KEYS = ("total_nm", "layers", "thinnest_nm")
_TOL_KEYS = ("thickness_pct", "rate_pct", "index_pct")


# --------------------------------------------------------------------------------------------
# Public loaders
# --------------------------------------------------------------------------------------------

def load_spec(path) -> Spec:
    """Read and validate a spec file (YAML, DESIGN.md §4).

    Parameters
    ----------
    path
        The file (str or Path).

    Returns
    -------
    Spec, with ``path`` set.

    Raises
    ------
    InputError
        The file cannot be read or parsed, or anything in it is invalid; the message names the
        file, key path, line and what was expected.
    """
    from .io.yamlfile import load_yaml
    data, lines = load_yaml(path)
    return spec_from_mapping(data, file=str(path), lines=lines)


def spec_from_mapping(data, file=None, lines=None) -> Spec:
    """Validate a parsed spec mapping and build a :class:`Spec`.

    Parameters
    ----------
    data
        The document: a mapping as read from YAML (numbers already numbers).
    file
        File name for messages (optional).
    lines
        ``{key path: line}`` as returned by :func:`filmstack.io.yamlfile.load_yaml` (optional).

    Raises
    ------
    InputError
        On the first problem found, naming file, key path, line and what was expected.
    """
    ctx = _Ctx(file, lines)
    if data is None:
        raise ctx.error("", "the spec is empty: expected a mapping with 'stack' and "
                            "'requirements'")
    ctx.mapping(data, "", "a mapping with 'stack' and 'requirements'")
    if "requirements" not in data and "stack" not in data and \
            ("layers" in data or "incident" in data or "substrate" in data):
        raise ctx.error("", "this is a stack file (it has "
                        + ", ".join(f"'{k}'" for k in ("incident", "substrate", "layers")
                                    if k in data)
                        + "), not a spec: a spec has 'stack' and 'requirements' — in "
                          "'filmstack check STACK --spec SPEC' the quote comes first")
    ctx.known_keys(data, "", _TOP_KEYS, "the spec")
    for required in ("stack", "requirements"):
        if required not in data:
            raise ctx.error(required, f"missing '{required}' (the spec needs "
                                      "'stack' and 'requirements')")

    template = _parse_template(data["stack"], ctx)
    materials = _parse_materials(data.get("materials"), ctx, template.reference_nm)
    fixed_bottom, fixed_top = _parse_fixed(data.get("fixed"), ctx, template)
    start = _parse_start(data.get("start"), ctx, materials)
    requirements = _parse_requirements(data["requirements"], ctx)
    limits = _parse_limits(data.get("limits"), ctx)
    tolerances = _parse_tolerances(data.get("tolerances"), ctx, materials, template,
                                   fixed_bottom + fixed_top)

    # Bands inside every material's data range.
    used = [("stack.incident", template.incident), ("stack.substrate", template.substrate)]
    if template.substrate_mm is not None:
        used.append(("stack.exit", template.exit))
    used += [(f"stack.layers[{i}]", l.material) for i, l in enumerate(template.layers)]
    used += [(f"stack.back_layers[{i}]", l.material) for i, l in enumerate(template.back_layers)]
    used += [(f"materials.{s}", m) for s, m in materials.items()]
    used += [(f"fixed.bottom[{i}]", l.material) for i, l in enumerate(fixed_bottom)]
    used += [(f"fixed.top[{i}]", l.material) for i, l in enumerate(fixed_top)]
    for req in requirements:
        lo, hi = req.band_nm
        for where, m in used:
            mlo, mhi = m.range_nm
            if lo < mlo or hi > mhi:
                raise ctx.error(req.key + ".band_nm",
                                f"band {lo:g}–{hi:g} nm is outside the data range of material "
                                f"'{m.name}' ({where}: {mlo:g}–{mhi:g} nm)")

    # Limits against the fixed layers.
    fixed_total = sum(l.thickness_nm for l in fixed_bottom + fixed_top)
    if limits.total_nm is not None and fixed_total > limits.total_nm:
        raise ctx.error("limits.total_nm", f"the fixed layers alone are {fixed_total:g} nm, "
                                           f"more than total_nm {limits.total_nm:g}")
    if limits.layers is not None and len(fixed_bottom) + len(fixed_top) > limits.layers:
        raise ctx.error("limits.layers", "the fixed layers alone are more than the layer limit")

    return Spec(template=template, materials=materials, requirements=requirements,
                limits=limits, tolerances=tolerances, start=start, fixed_bottom=fixed_bottom,
                fixed_top=fixed_top, path=ctx.file)


# --------------------------------------------------------------------------------------------
# Sections
# --------------------------------------------------------------------------------------------

def _sub_lines(lines, prefix):
    """The line table of the sub-document at ``prefix``, keys made relative to it."""
    out = {}
    for k, v in (lines or {}).items():
        if k == prefix:
            out[""] = v
        elif k.startswith(prefix + ".") or k.startswith(prefix + "["):
            rest = k[len(prefix):]
            out[rest[1:] if rest.startswith(".") else rest] = v
    return out


def _stack_from_mapping(data, ctx, prefix):
    """Build a Stack from a stack-file mapping via the stack-file loader, keys under ``prefix``.

    ``layers`` (or ``design``) may be absent: a spec's stack gives the media.
    """
    from .io.stack_file import stack_from_mapping
    base_dir = None if ctx.file is None else Path(ctx.file).parent
    return stack_from_mapping(data, file=ctx.file, lines=ctx.lines, key_prefix=prefix,
                              require_layers=False, base_dir=base_dir)


def _parse_template(data, ctx):
    ctx.mapping(data, "stack", "a mapping like {incident: air, substrate: crown-glass, "
                               "reference_nm: 550}")
    return _stack_from_mapping(data, ctx, "stack")


def _real_index(m: Material, reference_nm: float) -> float:
    lo, hi = m.range_nm
    wl = min(max(reference_nm, lo), hi)
    return float(np.real(m.nk(np.array([wl]))[0]))


def _parse_materials(data, ctx, reference_nm):
    if data is None:
        return {}
    if isinstance(data, dict):
        if not data:
            raise ctx.error("materials", "expected at least one material")
        out = {}
        for sym, obj in data.items():
            try:
                check_symbol_name(sym)
            except InputError as exc:
                raise ctx.error(_join("materials", sym), exc.message) from None
            if isinstance(obj, dict) and not ({"n", "k"} >= set(obj)):
                ctx.known_keys(obj, _join("materials", sym), ("n", "k"), "an inline material")
            out[sym] = ctx.material(obj, _join("materials", sym))
        return out
    if isinstance(data, (str,)):
        data = [data]
    if not isinstance(data, list) or not data:
        raise ctx.error("materials", "expected a list of materials (names or {n: ..., k: ...}) "
                                     "or a symbol mapping like {H: TiO2, L: SiO2}")
    mats = []
    for i, obj in enumerate(data):
        key = f"materials[{i}]"
        if isinstance(obj, dict) and not ({"n", "k"} >= set(obj)):
            ctx.known_keys(obj, key, ("n", "k"), "an inline material")
        mats.append(ctx.material(obj, key))
    names = [m.name for m in mats]
    for i, n in enumerate(names):
        if n in names[:i]:
            raise ctx.error(f"materials[{i}]", f"material '{n}' is listed twice")
    order = sorted(range(len(mats)), key=lambda i: -_real_index(mats[i], reference_nm))
    if len(mats) == 1:
        syms = ["H"]
    elif len(mats) == 2:
        syms = ["H", "L"]
    elif len(mats) == 3:
        syms = ["H", "M", "L"]
    elif len(mats) <= 26:
        syms = [chr(ord("A") + j) for j in range(len(mats))]
    else:
        raise ctx.error("materials", f"{len(mats)} materials is more than 26 symbols")
    return {s: mats[i] for s, i in zip(syms, order)}


def _parse_fixed(data, ctx, template):
    if data is None:
        return (), ()
    ctx.mapping(data, "fixed", "a mapping {bottom: [layers], top: [layers]}")
    ctx.known_keys(data, "fixed", ("bottom", "top"), "fixed")
    out = []
    for side in ("bottom", "top"):
        items = data.get(side) or []
        key = f"fixed.{side}"
        if not isinstance(items, list):
            raise ctx.error(key, f"expected a list of layers {{material: ..., nm: ...}}, "
                                 f"got {_typename(items)}")
        if not items:
            out.append(())
            continue
        sub = {"substrate": {"n": 1.5}, "reference_nm": template.reference_nm,
               "layers": items}
        try:
            st = _stack_from_mapping(sub, _Ctx(ctx.file, _relines(ctx.lines, key, "layers")),
                                     "")
        except InputError as exc:
            k = exc.key or ""
            k = key + k[len("layers"):] if k.startswith("layers") else _join(key, k)
            raise InputError(exc.message, file=ctx.file, key=k, line=ctx.line(k)) from None
        out.append(st.layers)
    return out[0], out[1]


def _relines(lines, old_prefix, new_prefix):
    """Line table with paths under ``old_prefix`` renamed to be under ``new_prefix``."""
    out = {}
    for k, v in (lines or {}).items():
        if k == old_prefix or k.startswith(old_prefix + "[") or k.startswith(old_prefix + "."):
            out[new_prefix + k[len(old_prefix):]] = v
    return out


def _parse_start(data, ctx, materials):
    if data is None:
        return None
    if not isinstance(data, str) or not data.strip():
        raise ctx.error("start", f"expected a design in H/L notation such as '(HL)^2 H', "
                                 f"got {data!r}")
    if not materials:
        raise ctx.error("start", "'start' needs 'materials' to say what its symbols are")
    from .notation import parse_notation
    try:
        parse_notation(data, materials.keys(), key="start")
    except InputError as exc:
        raise ctx.error("start", exc.message) from None
    return data.strip()


def _parse_requirements(data, ctx):
    if not isinstance(data, list) or not data:
        raise ctx.error("requirements", "expected a list of requirements, e.g. "
                                        "- {R: '<= 0.5%', band_nm: [420, 680]}")
    out = []
    for i, item in enumerate(data):
        out.append(_parse_requirement(item, ctx, f"requirements[{i}]"))
    return tuple(out)


def _parse_requirement(item, ctx, key):
    ctx.mapping(item, key, "a requirement such as {R: '<= 0.5%', band_nm: [420, 680]}")
    qkeys = [k for k in item if k in QUANTITIES]
    if len(qkeys) > 1:
        raise ctx.error(_join(key, qkeys[1]), f"one quantity per requirement, found "
                                              f"{' and '.join(qkeys)}: split it in two")
    colour_opts = {}
    if qkeys and qkeys[0] == "colour":
        # the colour module validates its own keys (target, illuminant, ...)
        allowed = set(_REQ_KEYS) | {"colour"}
        colour_opts = {k: v for k, v in item.items() if k not in allowed}
        item = {k: v for k, v in item.items() if k in allowed}
    ctx.known_keys(item, key, QUANTITIES + _REQ_KEYS, "a requirement")
    if not qkeys:
        raise ctx.error(key, f"no quantity: a requirement needs one of {', '.join(QUANTITIES)} "
                             "with a condition, e.g. R: '<= 0.5%'")
    q = qkeys[0]
    qkey = _join(key, q)
    try:
        cond = parse_condition(item[q], q)
    except ValueError as exc:
        raise ctx.error(qkey, str(exc)) from None

    if "band_nm" not in item and q == "colour":
        item = {**item, "band_nm": [380.0, 780.0]}   # colour integrates the CIE range
    if "band_nm" not in item:
        raise ctx.error(_join(key, "band_nm"), "missing 'band_nm': give [from, to] in nm "
                                               "([x, x] for one wavelength)")
    band = item["band_nm"]
    bkey = _join(key, "band_nm")
    if isinstance(band, (int, float)) and not isinstance(band, bool):
        band = [band, band]
    if not isinstance(band, list) or len(band) != 2:
        raise ctx.error(bkey, f"expected [from, to] in nm, got {band!r}")
    lo = ctx.number(band[0], bkey + "[0]", lo=0, lo_open=True, what="a wavelength in nm")
    hi = ctx.number(band[1], bkey + "[1]", lo=0, lo_open=True, what="a wavelength in nm")
    if hi < lo:
        raise ctx.error(bkey, f"band [{lo:g}, {hi:g}] runs backwards: write [{hi:g}, {lo:g}]")

    step = None
    if "step_nm" in item:
        step = ctx.number(item["step_nm"], _join(key, "step_nm"), lo=0, lo_open=True,
                          what="a step in nm")
        if (hi - lo) / step > MAX_BAND_SAMPLES:
            raise ctx.error(_join(key, "step_nm"),
                            f"step {step:g} nm samples the {hi - lo:g} nm band at more than "
                            f"{MAX_BAND_SAMPLES:,} points: expected a step of at least "
                            f"{(hi - lo) / MAX_BAND_SAMPLES:.3g} nm")

    angles = item.get("angles_deg", [0.0])
    akey = _join(key, "angles_deg")
    if isinstance(angles, (int, float)) and not isinstance(angles, bool):
        angles = [angles]
    if not isinstance(angles, list) or not angles:
        raise ctx.error(akey, f"expected a list of angles in degrees, got {angles!r}")
    angles = tuple(ctx.number(a, f"{akey}[{j}]", lo=0, hi=90, hi_open=True,
                              what="an angle of incidence in degrees")
                   for j, a in enumerate(angles))
    if len(set(angles)) != len(angles):
        raise ctx.error(akey, f"an angle is listed twice in {list(angles)}")

    default_pol = "s" if q in PHASE_QUANTITIES else "mean"
    pol = ctx.choice(item.get("polarization", default_pol), _join(key, "polarization"),
                     ("s", "p", "mean"), "polarization")
    if q in PHASE_QUANTITIES and pol == "mean":
        raise ctx.error(_join(key, "polarization"),
                        f"{q} needs polarization s or p (a phase of unpolarised light is not "
                        "defined)")
    over = ctx.choice(item.get("over", "average"), _join(key, "over"), ("average", "every"),
                      "over")
    weight = ctx.number(item.get("weight", 1.0), _join(key, "weight"), lo=0, what="a weight")
    side = ctx.choice(item.get("side", "reflected"), _join(key, "side"),
                      ("reflected", "transmitted"), "side")
    if "side" in item and q in ("R", "T", "A"):
        raise ctx.error(_join(key, "side"), f"'side' is for phase, GD, GDD and colour; {q} "
                                            "already says which side")

    options = {}
    if q == "colour":
        options = _colour_options(colour_opts, ctx, key)

    return Requirement(quantity=q, op=cond.op, limit=cond.limit, band_nm=(lo, hi),
                       tolerance=cond.tolerance, step_nm=step, angles_deg=angles,
                       polarization=pol, over=over, weight=weight, side=side, key=key,
                       options=options, text=str(item[q]).strip())


def _colour_options(opts, ctx, key):
    """Colour requirements: validated by the colour module when it is there."""
    try:
        from .colour import requirements as colour_requirements
    except ImportError:
        raise ctx.error(key, "colour requirements need the colour module (filmstack.colour), "
                             "which is not installed in this version") from None
    validate = getattr(colour_requirements, "validate_options", None)
    if validate is None:
        return dict(opts)
    try:
        return dict(validate(opts))
    except InputError as exc:
        k = _join(key, exc.key) if exc.key else key
        raise ctx.error(k, exc.message) from None
    except ValueError as exc:
        raise ctx.error(key, str(exc)) from None


def _parse_limits(data, ctx):
    if data is None:
        return Limits()
    ctx.mapping(data, "limits", "a mapping like {total_nm: 1200, layers: 30, thinnest_nm: 10}")
    ctx.known_keys(data, "limits", _LIMIT_KEYS, "limits")
    total = data.get("total_nm")
    layers = data.get("layers")
    thinnest = data.get("thinnest_nm")
    total = None if total is None else ctx.number(total, "limits.total_nm", lo=0, lo_open=True,
                                                  what="a thickness in nm")
    layers = None if layers is None else ctx.number(layers, "limits.layers", lo=1, integer=True,
                                                    what="a number of layers")
    thinnest = None if thinnest is None else ctx.number(thinnest, "limits.thinnest_nm", lo=0,
                                                        what="a thickness in nm")
    if total is not None and thinnest is not None and thinnest > total:
        raise ctx.error("limits.thinnest_nm", f"thinnest_nm {thinnest:g} is more than total_nm "
                                              f"{total:g}")
    return Limits(total_nm=total, layers=layers, thinnest_nm=thinnest)


def _parse_tolerances(data, ctx, materials, template, fixed):
    if data is None:
        return Tolerances()
    ctx.mapping(data, "tolerances", "a mapping like {thickness_pct: 1, rate_pct: {TiO2: 0.5}}")
    ctx.known_keys(data, "tolerances", _TOL_KEYS, "tolerances")
    thick = ctx.number(data.get("thickness_pct", 0.0), "tolerances.thickness_pct", lo=0,
                       hi=50, what="a 1σ percentage")
    known = {m.name: m.name for m in materials.values()}
    known.update({s: m.name for s, m in materials.items()})
    for l in template.layers + fixed:
        known.setdefault(l.material.name, l.material.name)

    def per_material(name):
        obj = data.get(name)
        key = f"tolerances.{name}"
        if obj is None:
            return {}
        if isinstance(obj, (int, float)) and not isinstance(obj, bool):
            return {"*": ctx.number(obj, key, lo=0, hi=50, what="a 1σ percentage")}
        ctx.mapping(obj, key, "a number (every material) or a mapping {material: percent}")
        out = {}
        for mat, pct in obj.items():
            k = _join(key, mat)
            if mat != "*" and known and mat not in known:
                close = difflib.get_close_matches(str(mat), list(known), n=1, cutoff=0.5)
                hint = f" — did you mean '{close[0]}'?" if close else ""
                raise ctx.error(k, f"'{mat}' is not a material of this spec{hint} "
                                   f"(known: {', '.join(sorted(known))})")
            out[known.get(mat, mat) if mat != "*" else "*"] = ctx.number(
                pct, k, lo=0, hi=50, what="a 1σ percentage")
        return out

    return Tolerances(thickness_pct=thick, rate_pct=per_material("rate_pct"),
                      index_pct=per_material("index_pct"))
