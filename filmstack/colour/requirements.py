"""Colour requirements a spec can state, and their evaluation on a stack or a batch of designs.

Two forms, both on the reflected (default) or transmitted colour, over the requirement's angles
(``angles_deg``), for unpolarised light unless ``polarization`` says otherwise:

**Within ΔE2000 of a target colour** — ``colour: "<= 2"`` with ``target: [L*, a*, b*]``. The value
at each angle is ΔE2000 between the stack's colour and the target.

**a*, b* inside a box** — ``colour: "<= 0"`` with ``a: [lo, hi]`` and/or ``b: [lo, hi]`` (``null``
for an open end). The value at each angle is how far (a*, b*) lies *beyond* the box, in CIELAB
units: ``max(lo_a − a*, a* − hi_a, lo_b − b*, b* − hi_b)`` — negative inside (minus the
distance to the nearest edge), zero on an edge. ``"<= 0"`` means "inside the box";
``"<= 1"`` would allow one unit outside.

Further keys of a colour requirement (all optional): ``illuminant`` (D65, D50, A, F2, F11;
default D65), ``observer`` (2 or 10; default 2), ``white`` (diffuser or bare-substrate; default
diffuser). The spec loader (:mod:`filmstack.spec`) hands these keys to :func:`validate_options`.
The band (``band_nm``) plays no part: colour always integrates the CIE range.

Spec example (a "no purple reflection" lens AR and a tinted mirror)::

    requirements:
      - colour: "<= 0"            # reflected a*, b* inside the box at 0° and 30°
        a: [-6, 2]
        b: [-12, 0]
        angles_deg: [0, 30]
        band_nm: [380, 780]       # (required by the loader; not used for colour)
        illuminant: D65
        observer: 10
      - colour: "<= 3"            # within ΔE00 3 of a pale green
        target: [40, -8, 4]
        band_nm: [380, 780]

A requirement passes when its signed margin is >= 0 at the worst angle:
``<=``: limit − value; ``>=``: value − limit; ``=``: tolerance − |value − limit|
(the convention of :mod:`filmstack.evaluate`).

References: CIE 15:2018 (CIELAB); G. Sharma, W. Wu, E. N. Dalal, Color Res. Appl. 30, 21 (2005)
(CIEDE2000).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from . import colorimetry as cm
from .stack_colour import WHITES, ColourSetting, stack_colour

__all__ = ["OPTION_KEYS", "validate_options", "colour_setting", "colour_values",
           "ColourRequirementResult", "evaluate_colour_requirement", "colour_requirement"]

#: Keys a colour requirement may carry besides the common requirement keys.
OPTION_KEYS = ("target", "a", "b", "illuminant", "observer", "white")


def _number(v, key, what):
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise InputError(f"expected {what} (a finite number), got {v!r}", key=key)
    return float(v)


def _interval(v, key):
    if not isinstance(v, (list, tuple)) or len(v) != 2:
        raise InputError(f"expected [lo, hi] (CIELAB units; null for an open end), got {v!r}",
                         key=key)
    lo = None if v[0] is None else _number(v[0], f"{key}[0]", "a lower bound")
    hi = None if v[1] is None else _number(v[1], f"{key}[1]", "an upper bound")
    if lo is None and hi is None:
        raise InputError("both ends are open: give at least one bound", key=key)
    if lo is not None and hi is not None and hi < lo:
        raise InputError(f"[{lo:g}, {hi:g}] runs backwards: write [{hi:g}, {lo:g}]", key=key)
    return (lo, hi)


def validate_options(opts: dict) -> dict:
    """Check the colour-specific keys of one requirement and return them normalised.

    Parameters
    ----------
    opts
        The keys of the requirement mapping other than the common ones (``band_nm``,
        ``angles_deg``, ``side``, ...): ``target`` or ``a``/``b``, and optionally
        ``illuminant``, ``observer``, ``white``.

    Returns
    -------
    dict with ``kind`` ('target' or 'box'), ``target`` ([L, a, b] or None), ``a``, ``b``
    ((lo, hi) with None for open ends, or None), ``illuminant`` ('D65', ...), ``observer``
    (2 or 10), ``white`` ('diffuser' or 'bare-substrate').

    Raises
    ------
    InputError
        With ``key`` the offending key relative to the requirement (the loader prefixes it).
    """
    if not isinstance(opts, dict):
        raise InputError(f"expected a mapping of colour options, got {opts!r}")
    for k in opts:
        if k not in OPTION_KEYS:
            import difflib

            near = difflib.get_close_matches(str(k), OPTION_KEYS, n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            raise InputError(f"unknown key '{k}' in a colour requirement{hint}; expected "
                             + ", ".join(OPTION_KEYS), key=str(k))
    out = {"kind": None, "target": None, "a": None, "b": None}
    if "target" in opts:
        t = opts["target"]
        if isinstance(t, dict):
            if set(t) != {"L", "a", "b"}:
                raise InputError(f"expected target {{L: .., a: .., b: ..}}, got {t!r}",
                                 key="target")
            t = [t["L"], t["a"], t["b"]]
        if not isinstance(t, (list, tuple)) or len(t) != 3:
            raise InputError(f"expected target [L*, a*, b*], got {t!r}", key="target")
        vals = [_number(x, f"target[{i}]", "a CIELAB value") for i, x in enumerate(t)]
        if not 0.0 <= vals[0] <= 100.0:
            raise InputError(f"L* must be within 0-100, got {vals[0]:g}", key="target[0]")
        out["kind"], out["target"] = "target", vals
    for ab in ("a", "b"):
        if ab in opts:
            if out["kind"] == "target":
                raise InputError(f"give either a target colour or an a*/b* box, not both",
                                 key=ab)
            out[ab] = _interval(opts[ab], ab)
            out["kind"] = "box"
    if out["kind"] is None:
        raise InputError("a colour requirement needs 'target: [L*, a*, b*]' (with a ΔE2000 "
                         "condition such as '<= 2') or a box 'a: [lo, hi]' and/or "
                         "'b: [lo, hi]' (with '<= 0')")
    try:
        out["illuminant"] = cm.normalise_illuminant(opts.get("illuminant", "D65"))
    except InputError as exc:
        raise InputError(exc.message, key="illuminant") from None
    try:
        out["observer"] = cm.normalise_observer(opts.get("observer", 2))
    except InputError as exc:
        raise InputError(exc.message, key="observer") from None
    white = str(opts.get("white", "diffuser")).strip().lower()
    if white not in WHITES:
        raise InputError(f"white must be diffuser or bare-substrate, got {opts.get('white')!r}",
                         key="white")
    out["white"] = white
    return out


def _options(req) -> dict:
    opts = dict(req.options or {})
    if "kind" not in opts:            # raw keys (a Requirement built by hand): validate now
        opts = validate_options(opts)
    return opts


def colour_setting(req) -> ColourSetting:
    """The :class:`ColourSetting` of a colour requirement (illuminant, observer, side, white)."""
    o = _options(req)
    return ColourSetting(illuminant=o["illuminant"], observer=o["observer"], side=req.side,
                         white=o["white"], polarization=req.polarization)


def _values_from_lab(opts, lab):
    if opts["kind"] == "target":
        return cm.delta_e_2000(lab, np.asarray(opts["target"], dtype=float))
    parts = []
    for i, ab in ((1, "a"), (2, "b")):
        if opts[ab] is None:
            continue
        lo, hi = opts[ab]
        if lo is not None:
            parts.append(lo - lab[..., i])
        if hi is not None:
            parts.append(lab[..., i] - hi)
    return np.max(np.stack(parts, axis=-1), axis=-1)


def _colour(stack, req, thicknesses_nm, index_scale):
    setting = colour_setting(req)
    from .stack_colour import colour_wavelengths

    li = None
    wl = None
    if index_scale is not None:
        sc = np.asarray(index_scale, dtype=float)
        if sc.shape[-1:] != (len(stack.layers),):
            raise InputError(f"index_scale must end in L = {len(stack.layers)} layers, "
                             f"got shape {sc.shape}")
        wl = colour_wavelengths(stack.materials)
        base = stack.layer_indices(wl)                                   # (L, W)
        li = base.real * sc[..., None] + 1j * base.imag                  # (..., L, W)
    return stack_colour(stack, list(req.angles_deg), setting, thicknesses_nm=thicknesses_nm,
                        layer_indices=li, wavelengths_nm=wl)


def colour_values(stack, requirement, *, thicknesses_nm=None, index_scale=None) -> np.ndarray:
    """The requirement's colour quantity at each of its angles, shape (..., A).

    Parameters
    ----------
    stack
        The :class:`~filmstack.stack.Stack`.
    requirement
        A :class:`~filmstack.spec.Requirement` with ``quantity == 'colour'`` (its ``options``
        as returned by :func:`validate_options`, or the raw keys).
    thicknesses_nm
        Optional front-layer thicknesses, nm, (L,) or a batch (..., L).
    index_scale
        Optional factors on the real index n of each front layer (k kept), (L,) or (..., L).

    Returns
    -------
    ΔE2000 to the target, or the excursion beyond the a*/b* box (CIELAB units, negative inside),
    shape (..., A) with A = len(requirement.angles_deg).
    """
    c = _colour(stack, requirement, thicknesses_nm, index_scale)
    return _values_from_lab(_options(requirement), c.Lab)


@dataclass(frozen=True)
class ColourRequirementResult:
    """Outcome of a colour requirement: floats for one stack, arrays (...) for a batch.

    value: the quantity at the worst angle (ΔE2000, or the excursion beyond the box);
    limit: the condition's limit; margin: signed, >= 0 passes; passed: margin >= 0;
    worst_angle_deg: where the value was taken; values: per angle (..., A);
    Lab: the stack's CIELAB per angle (..., A, 3); srgb_hex (..., A).
    """

    value: np.ndarray | float
    limit: float
    margin: np.ndarray | float
    passed: np.ndarray | bool
    worst_angle_deg: np.ndarray | float
    values: np.ndarray
    Lab: np.ndarray
    srgb_hex: np.ndarray


def _badness(op, limit, v):
    if op == "<=":
        return v
    if op == ">=":
        return -v
    return np.abs(v - limit)


def _margin(op, limit, tolerance, value):
    if op == "<=":
        return limit - value
    if op == ">=":
        return value - limit
    return tolerance - np.abs(value - limit)


def evaluate_colour_requirement(stack, requirement, *, thicknesses_nm=None,
                                index_scale=None) -> ColourRequirementResult:
    """Evaluate one colour requirement on a stack, or on a batch of thickness sets.

    Parameters
    ----------
    stack
        The :class:`~filmstack.stack.Stack`.
    requirement
        A :class:`~filmstack.spec.Requirement` with ``quantity == 'colour'`` (see the module
        docstring for its keys), e.g. from :func:`colour_requirement` or a spec file.
    thicknesses_nm
        Optional front-layer thicknesses, nm: (L,) or a batch (..., L).
    index_scale
        Optional factors on the real index n per front layer, (L,) or (..., L).

    Returns
    -------
    ColourRequirementResult: ``value``, ``limit``, ``margin``, ``passed``, ``worst_angle_deg``
    (floats for one stack, arrays of the batch shape ``...`` otherwise), and per-angle
    ``values`` (..., A), ``Lab`` (..., A, 3), ``srgb_hex`` (..., A). The value is taken at the
    worst angle (every angle must pass).
    """
    if requirement.quantity != "colour":
        raise InputError(f"not a colour requirement: {requirement.quantity!r}")
    c = _colour(stack, requirement, thicknesses_nm, index_scale)
    vals = _values_from_lab(_options(requirement), c.Lab)                  # (..., A)
    op, limit, tol = requirement.op, float(requirement.limit), float(requirement.tolerance)
    i = np.argmax(_badness(op, limit, vals), axis=-1)
    value = np.take_along_axis(vals, i[..., None], axis=-1)[..., 0]
    margin = _margin(op, limit, tol, value)
    worst = np.asarray(requirement.angles_deg, dtype=float)[i]
    if value.ndim == 0:
        value, margin, worst = float(value), float(margin), float(worst)
        passed = bool(margin >= 0)
    else:
        passed = margin >= 0
    return ColourRequirementResult(value=value, limit=limit, margin=margin, passed=passed,
                                   worst_angle_deg=worst, values=vals, Lab=c.Lab,
                                   srgb_hex=c.srgb_hex)


def colour_requirement(*, target=None, max_delta_e: float | None = None, a=None, b=None,
                       angles_deg=(0.0,), side: str = "reflected", illuminant: str = "D65",
                       observer=2, white: str = "diffuser", polarization: str = "mean",
                       weight: float = 1.0, key: str = ""):
    """Build a colour :class:`~filmstack.spec.Requirement` in Python.

    Either ``target=[L, a, b]`` with ``max_delta_e`` (ΔE2000 <= max_delta_e), or a box
    ``a=(lo, hi)`` and/or ``b=(lo, hi)`` (None for an open end; condition ``<= 0``).

    Examples
    --------
    >>> req = colour_requirement(a=(-6, 2), b=(-12, 0), angles_deg=[0, 30])  # doctest: +SKIP
    >>> evaluate_colour_requirement(stack, req).passed                       # doctest: +SKIP
    """
    from ..spec import Requirement

    raw = {"illuminant": illuminant, "observer": observer, "white": white}
    if target is not None:
        if max_delta_e is None:
            raise InputError("a target colour needs max_delta_e")
        raw["target"] = list(target)
        limit, text = float(max_delta_e), f"<= {float(max_delta_e):g}"
    else:
        if a is not None:
            raw["a"] = list(a)
        if b is not None:
            raw["b"] = list(b)
        limit, text = 0.0, "<= 0"
    opts = validate_options(raw)
    return Requirement(quantity="colour", op="<=", limit=limit, band_nm=(380.0, 780.0),
                       angles_deg=tuple(float(x) for x in np.atleast_1d(angles_deg)),
                       polarization=polarization, over="every", weight=weight, side=side,
                       key=key, options=opts, text=text)
