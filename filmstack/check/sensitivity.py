"""Sensitivity of each requirement's value to each layer's thickness.

For R, T and A the derivatives come from the engine's analytic derivatives
(:func:`filmstack.response.spectrum_derivatives`, ∂R/∂d_l at every sample), reduced the way the
value is: for ``over: average`` the band mean of ∂v/∂d_l at the worst angle (trapezoid rule);
for ``over: every`` ∂v/∂d_l at the worst point (the worst point is held fixed: a one-sided
derivative where two points tie). Phase, GD, GDD and colour use central differences of the value
with a step of :data:`FD_STEP_NM`.

Layers are ranked by |∂v/∂d| per nm: the layers whose thickness errors move the requirement's
value most, which the vendor must control best. ``per_pct`` gives the change for a 1 % change
of that layer's thickness (∂v/∂d · d / 100), the figure to compare with percentage tolerances.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..evaluate import _engine_polarization, evaluate_requirements, requirement_wavelengths
from ..spec import Requirement, Spec

__all__ = ["FD_STEP_NM", "Sensitivity", "sensitivities"]

#: Step of the central differences for quantities without analytic derivatives, nm.
FD_STEP_NM = 0.01


@dataclass(frozen=True)
class Sensitivity:
    """Derivatives of one requirement's value.

    requirement: the requirement; value: its value (internal units); d_value_d_nm: (L,)
    ∂value/∂d_l per nm of layer l (internal units per nm); per_pct: (L,) change of the value for
    +1 % of layer l's thickness; ranking: layer indices (0-based, deposition order) by
    decreasing |∂value/∂d|; method: 'analytic' or 'central differences'.
    """

    requirement: Requirement
    value: float
    d_value_d_nm: np.ndarray
    per_pct: np.ndarray
    ranking: np.ndarray
    method: str

    def d_margin_d_nm(self) -> np.ndarray:
        """∂margin/∂d_l: the sign says whether thicker helps (positive) or hurts."""
        r = self.requirement
        if r.op == "<=":
            return -self.d_value_d_nm
        if r.op == ">=":
            return self.d_value_d_nm
        return -np.sign(self.value - r.limit) * self.d_value_d_nm

    def to_dict(self, stack=None, top: int | None = None) -> dict:
        order = self.ranking if top is None else self.ranking[:top]
        layers = []
        for i in order:
            item = {"layer": int(i) + 1, "d_value_d_nm": float(self.d_value_d_nm[i]),
                    "per_pct": float(self.per_pct[i]),
                    "d_margin_d_nm": float(self.d_margin_d_nm()[i])}
            if stack is not None:
                item["material"] = stack.layers[i].material.name
                item["nm"] = float(stack.layers[i].thickness_nm)
            layers.append(item)
        return {"key": self.requirement.key, "quantity": self.requirement.quantity,
                "method": self.method, "layers": layers}


def _analytic(stack, req, refine, result):
    from .. import response

    wl = requirement_wavelengths(req, refine)
    der = response.spectrum_derivatives(stack, wl, list(req.angles_deg),
                                        _engine_polarization(req))
    dv = np.asarray({"R": der.dR, "T": der.dT, "A": der.dA}[req.quantity])   # (L, A, W)
    ia = list(req.angles_deg).index(result.worst_angle_deg)
    if req.over == "average":
        if wl.size == 1:
            return dv[:, ia, 0]
        return np.trapezoid(dv[:, ia, :], wl, axis=-1) / (wl[-1] - wl[0])
    iw = int(np.argmin(np.abs(wl - result.worst_wavelength_nm)))
    return dv[:, ia, iw]


def _central(stack, req, refine):
    d0 = stack.thicknesses_nm
    L = d0.size
    h = FD_STEP_NM
    d = np.repeat(d0[None, :], 2 * L, axis=0)
    idx = np.arange(L)
    d[2 * idx, idx] += h
    d[2 * idx + 1, idx] = np.maximum(d0 - h, 0.0)
    res = evaluate_requirements(stack, [req], refine=refine, thicknesses_nm=d)[0]
    v = np.asarray(res.value, dtype=float)
    return (v[0::2] - v[1::2]) / (d[2 * idx, idx] - d[2 * idx + 1, idx])


def sensitivities(stack, spec_or_requirements, *, refine: int = 1) -> list[Sensitivity]:
    """Thickness sensitivity of every requirement of a spec on a stack.

    Parameters
    ----------
    stack
        The :class:`~filmstack.stack.Stack` (at least one front layer).
    spec_or_requirements
        A :class:`~filmstack.spec.Spec` or a sequence of requirements.
    refine
        Grid refinement (1: the spec's sampling).

    Returns
    -------
    list of Sensitivity, one per requirement.
    """
    reqs = spec_or_requirements.requirements if isinstance(spec_or_requirements, Spec) \
        else tuple(spec_or_requirements)
    d0 = stack.thicknesses_nm
    out = []
    nominal = evaluate_requirements(stack, reqs, refine=refine)
    for req, res in zip(reqs, nominal):
        if d0.size == 0:
            g, method = np.zeros(0), "analytic"
        elif req.quantity in ("R", "T", "A"):
            g, method = _analytic(stack, req, refine, res), "analytic"
        else:
            g, method = _central(stack, req, refine), "central differences"
        g = np.asarray(g, dtype=float)
        out.append(Sensitivity(req, float(res.value), g, g * d0 / 100.0,
                               np.argsort(-np.abs(g), kind="stable"), method))
    return out
