"""Compliance of a quoted stack with a spec: every requirement with its margin, and the limits.

Each requirement is evaluated on its own sampling grid (the spec's, see
:mod:`filmstack.evaluate`) and again on a grid :data:`FINE_REFINE` times finer; the worse of the
two (the smaller margin) is reported, so a spike between samples cannot hide. The spec's limits
(total thickness, layer count, thinnest layer, allowed materials) are checked on the quote too,
and differences between the quote's media and the spec's (another substrate, say) are noted.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..evaluate import RequirementResult, evaluate_requirements
from ..spec import Spec

__all__ = ["FINE_REFINE", "LimitResult", "CheckResult", "check_stack", "check_limits",
           "media_notes", "same_medium"]

#: Refinement of the second, finer evaluation grid.
FINE_REFINE = 4


@dataclass(frozen=True)
class LimitResult:
    """One manufacturing limit checked on the quote.

    name: 'total_nm', 'layers', 'thinnest_nm' or 'materials'; value and limit in nm or counts
    (for 'materials': the number of layers of materials the spec does not allow, limit 0);
    margin positive = passes; detail: a short explanation.
    """

    name: str
    value: float
    limit: float
    margin: float
    passed: bool
    detail: str = ""

    def to_dict(self) -> dict:
        return {"name": self.name, "pass": self.passed, "value": self.value,
                "limit": self.limit, "margin": self.margin, "detail": self.detail}


@dataclass(frozen=True)
class CheckResult:
    """The verdict on one stack.

    requirements: one :class:`~filmstack.evaluate.RequirementResult` per requirement (the worse
    of the spec grid and the finer grid; ``refine`` says which); limits: :class:`LimitResult`;
    notes: things the user should know that are not failures; passed: every requirement and
    limit passes.
    """

    requirements: tuple[RequirementResult, ...]
    limits: tuple[LimitResult, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def passed(self) -> bool:
        return all(bool(r.passed) for r in self.requirements) and \
            all(l.passed for l in self.limits)

    def to_dict(self) -> dict:
        return {"pass": self.passed,
                "requirements": [r.to_dict() for r in self.requirements],
                "limits": [l.to_dict() for l in self.limits],
                "notes": list(self.notes)}


def same_medium(a, b) -> bool:
    """True when two materials are the same: equal, or the same name with the same index at
    400 nm (or the start of their data), or inline constants with equal n and k."""
    from ..materials import Constant

    if a is b or a == b:
        return True
    if a.name != b.name:
        return isinstance(a, Constant) and isinstance(b, Constant) and \
            (a.n, a.k) == (b.n, b.k)
    wl = np.array([max(a.range_nm[0], b.range_nm[0], 400.0)])
    try:
        return bool(np.allclose(a.nk(wl), b.nk(wl)))
    except Exception:  # pragma: no cover - ranges that do not overlap
        return False


def check_limits(stack, spec: Spec) -> tuple[LimitResult, ...]:
    """The spec's limits (and allowed materials) checked on the stack's front layers."""
    out = []
    lim = spec.limits
    d = stack.thicknesses_nm
    if lim.total_nm is not None:
        total = float(d.sum())
        out.append(LimitResult("total_nm", total, lim.total_nm, lim.total_nm - total,
                               total <= lim.total_nm, f"total physical thickness {total:.1f} nm"))
    if lim.layers is not None:
        n = len(d)
        out.append(LimitResult("layers", n, lim.layers, lim.layers - n, n <= lim.layers,
                               f"{n} layer" if n == 1 else f"{n} layers"))
    if lim.thinnest_nm is not None and len(d):
        i = int(np.argmin(d))
        out.append(LimitResult("thinnest_nm", float(d[i]), lim.thinnest_nm,
                               float(d[i]) - lim.thinnest_nm, float(d[i]) >= lim.thinnest_nm,
                               f"thinnest is layer {i + 1} ({stack.layers[i].material.name})"))
    if spec.materials:
        allowed = list(spec.materials.values()) + [l.material for l in
                                                   spec.fixed_bottom + spec.fixed_top]
        bad = [i for i, l in enumerate(stack.layers)
               if not any(same_medium(l.material, m) for m in allowed)]
        names = sorted({stack.layers[i].material.name for i in bad})
        detail = ("every layer uses an allowed material" if not bad else
                  f"layer{'s' if len(bad) > 1 else ''} {', '.join(str(i + 1) for i in bad[:8])}"
                  f"{' …' if len(bad) > 8 else ''} use{'' if len(bad) > 1 else 's'} "
                  f"{', '.join(names)}, not in the spec's "
                  f"materials ({', '.join(m.name for m in spec.materials.values())})")
        out.append(LimitResult("materials", len(bad), 0, -len(bad), not bad, detail))
    return tuple(out)


def media_notes(stack, spec: Spec) -> tuple[str, ...]:
    """Differences between the stack's media and the spec's (not failures, but worth a look)."""
    notes = []
    t = spec.template
    for what, a, b in (("incident medium", stack.incident, t.incident),
                       ("substrate", stack.substrate, t.substrate)):
        if not same_medium(a, b):
            notes.append(f"the stack's {what} is '{a.name}' but the spec's is '{b.name}': "
                         "the requirements are evaluated on the stack as given")
    if (stack.substrate_mm is None) != (t.substrate_mm is None):
        kind = lambda mm: "semi-infinite" if mm is None else f"{mm:g} mm thick"  # noqa: E731
        notes.append(f"the stack's substrate is {kind(stack.substrate_mm)}, the spec's "
                     f"{kind(t.substrate_mm)}")
    return tuple(notes)


def check_stack(stack, spec: Spec, *, fine_refine: int = FINE_REFINE) -> CheckResult:
    """Evaluate every requirement and limit of ``spec`` on ``stack``.

    Parameters
    ----------
    stack
        The quoted :class:`~filmstack.stack.Stack`.
    spec
        The :class:`~filmstack.spec.Spec`.
    fine_refine
        Refinement of the second grid (1 disables the second evaluation).

    Returns
    -------
    CheckResult; ``.passed`` is the overall verdict.
    """
    coarse = evaluate_requirements(stack, spec, refine=1)
    results = coarse
    notes = list(media_notes(stack, spec))
    if fine_refine and fine_refine > 1:
        fine = evaluate_requirements(stack, spec, refine=fine_refine)
        results = []
        for c, f in zip(coarse, fine):
            worse = f if f.margin < c.margin else c
            if c.passed and not f.passed:
                where = (f" near {f.worst_wavelength_nm:g} nm" if np.isfinite(
                    f.worst_wavelength_nm) else "")
                notes.append(f"{c.requirement.key} passes on the spec's sampling but fails on "
                             f"a grid {fine_refine}× finer{where}")
            results.append(worse)
    return CheckResult(tuple(results), check_limits(stack, spec), tuple(notes))
