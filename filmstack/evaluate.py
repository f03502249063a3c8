"""Sampling and evaluating a spec's requirements on a stack (shared by design and check).

Sampling (:func:`requirement_wavelengths`)
------------------------------------------
Each requirement's band ``[lo, hi]`` is sampled at evenly spaced wavelengths, ends included:

- with ``step_nm`` given, at that step or finer (the band is split into ``ceil((hi−lo)/step)``
  equal intervals), with at least 2 points;
- otherwise at :data:`DEFAULT_STEP_NM` = 2 nm or finer, with at least :data:`MIN_BAND_POINTS`
  = 11 points. 2 nm resolves the fringes of any stack thinner than about 15 µm of optical
  thickness in the visible (a fringe of a film of optical thickness nd has width
  ≈ λ²/(2nd) ≈ 10 nm at 550 nm for nd = 15 µm; common practice, no published source);
- a band ``[x, x]`` is the single wavelength x.

``refine=k`` splits every interval into k, so the grid is k times finer and contains the coarse
grid: the design job re-evaluates on ``refine=4`` so that spikes between samples are not hidden.

Values (:func:`evaluate_requirements`)
--------------------------------------
For R, T, A the stack's response (:func:`filmstack.response.spectrum`) at each of the
requirement's angles, for its polarisation, is reduced to one value:

- ``over: average``: the band mean at each angle, by the trapezoid rule on the sample grid
  (``∫ v dλ / (hi − lo)``; the value itself for a single wavelength); the requirement holds when
  the mean at *every* angle meets it, so the reported value is the mean at the worst angle;
- ``over: every``: the worst sampled point over wavelengths and angles.

"Worst" is the largest value for ``<=``, the smallest for ``>=`` and the farthest from the
target for ``=``. The signed margin is positive when the requirement passes, in the
requirement's internal units (fractions for R, T, A; radians for phase; fs; fs²):

=========  ==============================
``<=``     ``limit − value``
``>=``     ``value − limit``
``=``      ``tolerance − |value − limit|``
=========  ==============================

and a requirement passes when its margin is ``>= 0``.

Phase, GD and GDD come from :func:`filmstack.response.phase_response` (reflected or
transmitted, s or p); colour requirements from :mod:`filmstack.colour.requirements`.

Batches: with ``thicknesses_nm`` of shape (N, L) (and/or ``index_scale`` (N, L)) every value,
margin, verdict and worst point is an array of shape (N,); R/T/A go through the engine as one
batched call per chunk of trials, so peak memory stays bounded.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .materials import Material
from .spec import PHASE_QUANTITIES, Requirement, Spec

__all__ = ["DEFAULT_STEP_NM", "MIN_BAND_POINTS", "RequirementResult",
           "requirement_wavelengths", "evaluate_requirements", "reduce_values",
           "scaled_index_stack", "MEMORY_BUDGET_BYTES"]

#: Default sampling step of a band, nm.
DEFAULT_STEP_NM = 2.0
#: Fewest samples of a band with the default step.
MIN_BAND_POINTS = 11
#: Memory a batched evaluation aims to stay within (per chunk of trials), bytes.
MEMORY_BUDGET_BYTES = 64 * 2**20


def requirement_wavelengths(req: Requirement, refine: int = 1) -> np.ndarray:
    """Sample wavelengths of a requirement's band, nm.

    Parameters
    ----------
    req
        The requirement (its ``band_nm`` and ``step_nm``).
    refine
        Integer >= 1: every interval of the grid is split into ``refine`` (4 gives the 4× finer
        re-evaluation grid, which contains the coarse one).

    Returns
    -------
    numpy.ndarray, shape (W,), increasing, both band ends included; (1,) for ``[x, x]``.
    """
    if int(refine) != refine or refine < 1:
        raise InputError(f"refine must be a whole number >= 1, got {refine!r}")
    lo, hi = map(float, req.band_nm)
    if hi == lo:
        return np.array([lo])
    span = hi - lo
    if req.step_nm is not None:
        n_int = max(1, math.ceil(span / req.step_nm - 1e-9))
    else:
        n_int = max(MIN_BAND_POINTS - 1, math.ceil(span / DEFAULT_STEP_NM - 1e-9))
    return np.linspace(lo, hi, n_int * int(refine) + 1)


@dataclass(frozen=True)
class RequirementResult:
    """The outcome of one requirement.

    Scalars for one stack; arrays of shape (N,) for a batch of N thickness sets.

    Attributes
    ----------
    requirement
        The requirement evaluated.
    value
        Band mean at the worst angle (``average``) or the worst sampled point (``every``), in
        internal units (fractions for R, T, A; rad; fs; fs²).
    limit
        The limit (for ``=``: the target; ``requirement.tolerance`` is the allowed deviation).
    margin
        Signed margin, positive = passes, in the same units as ``value``.
    passed
        ``margin >= 0``.
    worst_wavelength_nm
        Wavelength of the worst point (``every``), NaN for a band average.
    worst_angle_deg
        Angle of incidence of the worst point or of the worst band average.
    refine
        The grid refinement used (1 = the spec's sampling).
    """

    requirement: Requirement
    value: np.ndarray | float
    limit: float
    margin: np.ndarray | float
    passed: np.ndarray | bool
    worst_wavelength_nm: np.ndarray | float
    worst_angle_deg: np.ndarray | float
    refine: int = 1

    def to_dict(self) -> dict:
        """JSON-ready dict for one stack (fractions for R/T/A; None for NaN)."""
        r = self.requirement

        def num(x):
            x = float(np.asarray(x))
            return None if not math.isfinite(x) else x

        return {"key": r.key, "quantity": r.quantity, "condition": r.text, "op": r.op,
                "band_nm": list(r.band_nm), "angles_deg": list(r.angles_deg),
                "polarization": r.polarization, "over": r.over,
                "pass": bool(np.asarray(self.passed)), "value": num(self.value),
                "limit": num(self.limit), "tolerance": num(r.tolerance),
                "margin": num(self.margin), "worst_wavelength_nm": num(self.worst_wavelength_nm),
                "worst_angle_deg": num(self.worst_angle_deg), "refine": self.refine}


# --------------------------------------------------------------------------------------------
# Reduction of sampled values to one value per requirement
# --------------------------------------------------------------------------------------------

def _badness(req: Requirement, v):
    """Larger = worse; same shape as v."""
    if req.op == "<=":
        return v
    if req.op == ">=":
        return -v
    return np.abs(v - req.limit)


def _margin(req: Requirement, value):
    if req.op == "<=":
        return req.limit - value
    if req.op == ">=":
        return value - req.limit
    return req.tolerance - np.abs(value - req.limit)


def reduce_values(req: Requirement, values, wavelengths_nm):
    """Reduce sampled values (..., A, W) to ``(value, margin, worst_wl, worst_angle)``, each (...).

    Parameters
    ----------
    req
        The requirement (op, limit, tolerance, over, angles_deg).
    values
        Sampled quantity, shape (..., A, W) with A = len(req.angles_deg), internal units.
    wavelengths_nm
        The sample grid, shape (W,).

    Returns
    -------
    value, margin, worst_wavelength_nm, worst_angle_deg : arrays of shape (...)
        ``worst_wavelength_nm`` is NaN for ``over: average``.
    """
    v = np.asarray(values, dtype=float)
    wl = np.asarray(wavelengths_nm, dtype=float)
    angles = np.asarray(req.angles_deg, dtype=float)
    if v.shape[-2:] != (angles.size, wl.size):
        raise ValueError(f"values of shape {v.shape} do not end in (angles {angles.size}, "
                         f"wavelengths {wl.size})")
    if req.over == "average":
        if wl.size == 1:
            per_angle = v[..., 0]
        else:
            per_angle = np.trapezoid(v, wl, axis=-1) / (wl[-1] - wl[0])
        i = np.argmax(_badness(req, per_angle), axis=-1)
        value = np.take_along_axis(per_angle, i[..., None], axis=-1)[..., 0]
        worst_wl = np.full(value.shape, np.nan)
        worst_angle = angles[i]
    else:
        flat = v.reshape(v.shape[:-2] + (-1,))
        j = np.argmax(_badness(req, flat), axis=-1)
        value = np.take_along_axis(flat, j[..., None], axis=-1)[..., 0]
        ia, iw = np.divmod(j, wl.size)
        worst_wl = wl[iw]
        worst_angle = angles[ia]
    return value, _margin(req, value), worst_wl, worst_angle


# --------------------------------------------------------------------------------------------
# Index overrides
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _ScaledIndex(Material):
    """A material whose real index n is scaled by ``scale`` (k kept)."""

    base: Material | None = None
    scale: float = 1.0

    def _nk(self, wl):
        nk = self.base.nk(wl)
        return nk.real * self.scale + 1j * nk.imag


def scaled_index_stack(stack, index_scale):
    """A copy of ``stack`` whose layer l has its real index n scaled by ``index_scale[l]``.

    Parameters
    ----------
    stack
        The :class:`~filmstack.stack.Stack`.
    index_scale
        Shape (L,): factors on n of each front layer (k unchanged).
    """
    from dataclasses import replace

    from .stack import Layer
    s = np.asarray(index_scale, dtype=float)
    layers = tuple(
        l if sc == 1.0 else Layer(_ScaledIndex(name=l.material.name, source=l.material.source,
                                               range_nm=l.material.range_nm, base=l.material,
                                               scale=float(sc)), l.thickness_nm)
        for l, sc in zip(stack.layers, s))
    return replace(stack, layers=layers)


def _scale_n(indices, scale):
    """indices (L, W) complex, scale (..., L) → (..., L, W) with n scaled, k kept."""
    s = np.asarray(scale, dtype=float)[..., None]
    if not np.any(indices.imag):
        return indices * s                       # one complex × real product
    out = np.empty(np.broadcast_shapes(s.shape[:-1] + indices.shape[-1:], indices.shape),
                   dtype=complex)
    out.real = indices.real * s
    out.imag = indices.imag
    return out


# --------------------------------------------------------------------------------------------
# Evaluation
# --------------------------------------------------------------------------------------------

def _as_requirements(spec_or_requirements):
    if isinstance(spec_or_requirements, Spec):
        return tuple(spec_or_requirements.requirements)
    if isinstance(spec_or_requirements, Requirement):
        return (spec_or_requirements,)
    reqs = tuple(spec_or_requirements)
    if not all(isinstance(r, Requirement) for r in reqs):
        raise TypeError("expected a Spec, a Requirement or a sequence of Requirement")
    return reqs


def _chunk_size(n_batch, n_layers, n_wl, n_angles, with_indices):
    per_trial = n_angles * n_wl * 8 * 8 + (n_layers * n_wl * 16 * 2 if with_indices else 0)
    return int(max(1, min(n_batch, MEMORY_BUDGET_BYTES // max(per_trial, 1))))


def evaluate_requirements(stack, spec_or_requirements, *, refine: int = 1,
                          thicknesses_nm=None, layer_indices=None, index_scale=None,
                          chunk: int | None = None) -> list[RequirementResult]:
    """Evaluate every requirement on a stack (or a batch of thickness / index variants).

    Parameters
    ----------
    stack
        The :class:`~filmstack.stack.Stack`.
    spec_or_requirements
        A :class:`~filmstack.spec.Spec`, one :class:`~filmstack.spec.Requirement` or a sequence.
    refine
        Grid refinement (1: the spec's sampling; 4: four times finer), see
        :func:`requirement_wavelengths`.
    thicknesses_nm
        Optional override of the front-layer thicknesses, nm: shape (L,) or a batch (N, L).
    layer_indices
        Optional override of the front-layer complex indices: a callable
        ``f(wavelengths_nm (W,)) -> (..., L, W)``, or an array (..., L, W) when every
        requirement samples the same wavelengths. R, T, A only.
    index_scale
        Optional factors on the real index n of each layer, shape (L,) or (N, L) (k kept): the
        Monte Carlo's index errors. Works for every quantity.
    chunk
        Trials per engine call for batches (default: chosen to keep memory within
        :data:`MEMORY_BUDGET_BYTES`).

    Returns
    -------
    list of RequirementResult, in the order of the requirements; fields are floats for one
    stack and arrays (N,) for a batch.

    Raises
    ------
    InputError
        Shapes that do not fit, or a quantity whose module is not available (colour).
    """
    from . import response

    reqs = _as_requirements(spec_or_requirements)
    L = len(stack.layers)
    d = None if thicknesses_nm is None else np.asarray(thicknesses_nm, dtype=float)
    sc = None if index_scale is None else np.asarray(index_scale, dtype=float)
    for name, arr in (("thicknesses_nm", d), ("index_scale", sc)):
        if arr is not None and (arr.ndim not in (1, 2) or arr.shape[-1] != L):
            raise InputError(f"{name} must have shape (L,) or (N, L) with L = {L} layers, "
                             f"got {arr.shape}")
    batch_shape = ()
    for arr in (d, sc):
        if arr is not None and arr.ndim == 2:
            if batch_shape and batch_shape != arr.shape[:1]:
                raise InputError(f"thicknesses_nm and index_scale batches differ: "
                                 f"{batch_shape[0]} and {arr.shape[0]} trials")
            batch_shape = arr.shape[:1]
    if layer_indices is not None and sc is not None:
        raise InputError("give layer_indices or index_scale, not both")
    if layer_indices is not None and not callable(layer_indices):
        grids = {requirement_wavelengths(r, refine).tobytes() for r in reqs}
        if len(grids) > 1:
            raise InputError("an array layer_indices needs every requirement to sample the "
                             "same wavelengths; pass a callable f(wavelengths_nm) instead")
        li_array = np.asarray(layer_indices)
        layer_indices = lambda wl: li_array  # noqa: E731
    if layer_indices is not None:
        probe = np.asarray(layer_indices(requirement_wavelengths(reqs[0], refine)))
        if probe.ndim == 3:
            if batch_shape and batch_shape != probe.shape[:1]:
                raise InputError("layer_indices and thicknesses_nm batches differ")
            batch_shape = probe.shape[:1]

    N = batch_shape[0] if batch_shape else None
    cache: dict = {}
    out = []
    for req in reqs:
        wl = requirement_wavelengths(req, refine)
        if req.quantity in ("R", "T", "A"):
            vals = _rta(response, stack, req, wl, d, sc, layer_indices, N, chunk, cache)
        elif req.quantity in PHASE_QUANTITIES:
            if layer_indices is not None:
                raise InputError(f"{req.key}: {req.quantity} requirements take index errors "
                                 "as index_scale, not as a layer_indices override")
            vals = _phase(response, stack, req, wl, d, sc, N)
        elif req.quantity == "colour":
            vals, wl = _colour(stack, req, d, sc, layer_indices, N)
        else:  # pragma: no cover - the loader refuses other quantities
            raise InputError(f"{req.key}: unknown quantity {req.quantity!r}")
        value, margin, wwl, wang = reduce_values(req, vals, wl)
        if req.quantity == "colour":                  # a colour has no worst wavelength
            wwl = np.full(np.shape(value), np.nan)
        if N is None:
            value, margin, wwl, wang = (float(x) for x in (value, margin, wwl, wang))
            passed = bool(margin >= 0)
        else:
            passed = margin >= 0
        out.append(RequirementResult(req, value, float(req.limit), margin, passed, wwl, wang,
                                     int(refine)))
    return out


def _batched(d, sc, N, i0, i1):
    dd = d if d is None or d.ndim == 1 else d[i0:i1]
    ss = sc if sc is None or sc.ndim == 1 else sc[i0:i1]
    if N is not None:
        if dd is not None and dd.ndim == 1:
            dd = np.broadcast_to(dd, (i1 - i0, dd.size))
        if ss is not None and ss.ndim == 1:
            ss = np.broadcast_to(ss, (i1 - i0, ss.size))
    return dd, ss


def _engine_polarization(req):
    """At normal incidence s and p coincide (η_p = N / cos θ = η_s at θ = 0, DESIGN.md §3), so
    'mean' there is computed once, as 's'."""
    if req.polarization == "mean" and all(a == 0.0 for a in req.angles_deg):
        return "s"
    return req.polarization


def _rta(response, stack, req, wl, d, sc, li_fn, N, chunk, cache):
    pol = _engine_polarization(req)
    key = (wl.tobytes(), req.angles_deg, pol)
    if key not in cache:
        A = len(req.angles_deg)
        base_idx = None
        if sc is not None:
            base_idx = stack.layer_indices(wl)               # (L, W)
        if N is None:
            li = None
            if li_fn is not None:
                li = np.asarray(li_fn(wl))
            elif sc is not None:
                li = _scale_n(base_idx, sc)
            sp = response.spectrum(stack, wl, list(req.angles_deg), pol,
                                   thicknesses_nm=d, layer_indices=li)
            res = {"R": sp.R, "T": sp.T, "A": sp.A}
        else:
            step = chunk or _chunk_size(N, len(stack.layers), wl.size, A,
                                        sc is not None or li_fn is not None)
            parts = {"R": [], "T": [], "A": []}
            full_li = None if li_fn is None else np.asarray(li_fn(wl))
            for i0 in range(0, N, step):
                i1 = min(N, i0 + step)
                dd, ss = _batched(d, sc, N, i0, i1)
                li = None
                if full_li is not None:
                    li = full_li[i0:i1] if full_li.ndim == 3 else full_li
                elif ss is not None:
                    li = _scale_n(base_idx, ss)
                if dd is None and li is not None and li.ndim == 2:
                    dd = np.broadcast_to(stack.thicknesses_nm, (i1 - i0, len(stack.layers)))
                sp = response.spectrum(stack, wl, list(req.angles_deg), pol,
                                       thicknesses_nm=dd, layer_indices=li)
                for q in parts:
                    v = np.asarray(getattr(sp, q))
                    parts[q].append(np.broadcast_to(v, (i1 - i0,) + v.shape[-2:]))
            res = {q: np.concatenate(p, axis=0) for q, p in parts.items()}
        cache[key] = res
    return cache[key][req.quantity]


def _phase_one(response, st, req, wl):
    rows = []
    for a in req.angles_deg:
        pr = response.phase_response(st, wl, a, req.polarization, side=req.side)
        rows.append({"phase": pr.phase_rad, "GD": pr.gd_fs, "GDD": pr.gdd_fs2}[req.quantity])
    return np.asarray(rows, dtype=float)                        # (A, W)


def _phase(response, stack, req, wl, d, sc, N):
    if N is None:
        st = stack if d is None else stack.with_thicknesses(d)
        if sc is not None:
            st = scaled_index_stack(st, sc)
        return _phase_one(response, st, req, wl)
    dd, ss = _batched(d, sc, N, 0, N)
    out = np.empty((N, len(req.angles_deg), wl.size))
    for n in range(N):
        st = stack if dd is None else stack.with_thicknesses(dd[n])
        if ss is not None:
            st = scaled_index_stack(st, ss[n])
        out[n] = _phase_one(response, st, req, wl)
    return out


def _colour(stack, req, d, sc, li_fn, N):
    """Colour requirements through filmstack.colour.requirements.colour_values.

    Expected there: ``colour_values(stack, requirement, *, thicknesses_nm=None,
    index_scale=None) -> array (..., A)``: the requirement's colour quantity (e.g. ΔE2000 to
    its target) at each of its angles.
    """
    try:
        from .colour.requirements import colour_values
    except ImportError:
        raise InputError(f"{req.key}: colour requirements need the colour module "
                         "(filmstack.colour.requirements), which is not available") from None
    if li_fn is not None:
        raise InputError(f"{req.key}: colour requirements take index errors as index_scale")
    v = np.asarray(colour_values(stack, req, thicknesses_nm=d, index_scale=sc), dtype=float)
    if N is not None and v.ndim == 1:
        v = np.broadcast_to(v, (N, v.size))
    return v[..., None], np.array([float(np.mean(req.band_nm))])
