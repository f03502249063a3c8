"""Comparison of two stacks: a quoted design against a vendor's as-built model (or two quotes).

Spectral differences (stack B minus stack A) of R and T on a common grid — by default spanning
the spec's bands every :data:`COMPARE_STEP_NM` nm at the spec's angles, unpolarised — with the
largest |ΔR|, |ΔT| and where they occur, and the RMS differences; with a spec, every requirement
on both stacks; and the reflected colour difference ΔE2000 (D65, 2° observer) at each angle,
when both stacks' materials have data over 380–780 nm.

References: G. Sharma, W. Wu, E. N. Dalal, Color Res. Appl. 30, 21 (2005) (CIEDE2000).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..spec import Spec
from .compliance import CheckResult, check_stack

__all__ = ["COMPARE_STEP_NM", "CompareResult", "compare_stacks"]

#: Default step of the comparison grid, nm.
COMPARE_STEP_NM = 1.0


@dataclass(frozen=True)
class CompareResult:
    """Differences between stack B and stack A.

    wavelength_nm (W,), angle_deg (A,); R_a, R_b, T_a, T_b (A, W) unpolarised; summary: per
    quantity ('R', 'T') the max |Δ|, where (wavelength, angle) and the RMS; delta_e: ΔE2000 of
    the reflected colour per angle (or None with a note); check_a / check_b: verdicts when a spec
    was given.
    """

    wavelength_nm: np.ndarray
    angle_deg: np.ndarray
    R_a: np.ndarray
    R_b: np.ndarray
    T_a: np.ndarray
    T_b: np.ndarray
    summary: dict
    delta_e: np.ndarray | None = None
    check_a: CheckResult | None = None
    check_b: CheckResult | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict:
        out = {"wavelength_nm": self.wavelength_nm, "angle_deg": self.angle_deg,
               "summary": self.summary,
               "delta_e2000": None if self.delta_e is None else self.delta_e,
               "notes": list(self.notes)}
        if self.check_a is not None:
            out["pass_a"] = self.check_a.passed
            out["pass_b"] = self.check_b.passed
            out["requirements"] = [
                {"key": a.requirement.key, "value_a": float(a.value), "value_b": float(b.value),
                 "difference": float(b.value) - float(a.value), "pass_a": bool(a.passed),
                 "pass_b": bool(b.passed)}
                for a, b in zip(self.check_a.requirements, self.check_b.requirements)]
        return out


def _default_grid(spec):
    if spec is None:
        return np.arange(400.0, 700.0 + 1e-9, COMPARE_STEP_NM), np.array([0.0])
    lo = min(r.band_nm[0] for r in spec.requirements)
    hi = max(r.band_nm[1] for r in spec.requirements)
    if hi == lo:
        lo, hi = lo - 50.0, hi + 50.0
    angles = sorted({a for r in spec.requirements for a in r.angles_deg})
    n = int(np.ceil((hi - lo) / COMPARE_STEP_NM)) + 1
    return np.linspace(lo, hi, n), np.array(angles, dtype=float)


def compare_stacks(stack_a, stack_b, spec: Spec | None = None, *, wavelengths_nm=None,
                   angles_deg=None, colour: bool = True) -> CompareResult:
    """Compare two stacks spectrally, by colour and (with a spec) requirement by requirement.

    Parameters
    ----------
    stack_a, stack_b
        The stacks (A: the reference, e.g. the quoted design; B: e.g. the as-built model).
    spec
        Optional spec: sets the default grid and gives both verdicts.
    wavelengths_nm, angles_deg
        Optional comparison grid (W,) nm and angles (A,) degrees.
    colour
        Compute ΔE2000 of the reflected colour (needs data over 380–780 nm).

    Returns
    -------
    CompareResult
    """
    from ..response import spectrum

    wl0, ang0 = _default_grid(spec)
    wl = wl0 if wavelengths_nm is None else np.asarray(wavelengths_nm, dtype=float)
    ang = ang0 if angles_deg is None else np.atleast_1d(np.asarray(angles_deg, dtype=float))
    sa = spectrum(stack_a, wl, ang, "mean")
    sb = spectrum(stack_b, wl, ang, "mean")
    summary = {}
    for q in ("R", "T"):
        a, b = np.asarray(getattr(sa, q)), np.asarray(getattr(sb, q))
        diff = b - a
        i = np.unravel_index(int(np.argmax(np.abs(diff))), diff.shape)
        summary[q] = {"max_abs_diff": float(np.abs(diff[i])), "diff_at_max": float(diff[i]),
                      "wavelength_nm": float(wl[i[1]]), "angle_deg": float(ang[i[0]]),
                      "rms_diff": float(np.sqrt(np.mean(diff ** 2)))}
    notes = []
    de = None
    if colour:
        try:
            from ..colour.stack_colour import delta_e_stacks
        except ImportError:
            notes.append("colour difference not computed: the colour module is not available")
        else:
            try:
                de = np.asarray(delta_e_stacks(stack_a, stack_b, ang), dtype=float)
            except InputError as exc:  # e.g. materials without data over 380–780 nm
                notes.append(f"colour difference not computed: {exc}")
    ca = cb = None
    if spec is not None:
        ca, cb = check_stack(stack_a, spec), check_stack(stack_b, spec)
    return CompareResult(wl, ang, np.asarray(sa.R), np.asarray(sb.R), np.asarray(sa.T),
                         np.asarray(sb.T), summary, de, ca, cb, tuple(notes))
