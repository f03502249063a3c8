"""The design driver: from a spec to a stack.

:func:`synthesize` runs, within a time limit:

1. the start design (the spec's ``start`` notation, else one thick layer of the lowest-index
   allowed material: :data:`START_FRACTION` of the total-thickness limit, or
   :data:`START_QWOT` quarter waves without one; with a single allowed material or a limit of
   one free layer, the best material and thickness of a scan of one layer), refined;
2. needle optimisation (:func:`~filmstack.design.needle.needle_optimise`);
3. gradual evolution (:func:`~filmstack.design.needle.gradual_evolution`) when targets are still
   unmet and the limits leave room ("auto" strategy);
4. a few seeded random restarts around the best design (each thickness scaled by a random factor
   of 1 ± 10 %, refined, kept only if better);
5. trimming (:func:`~filmstack.design.needle.trim_layers`): the thinnest layers removed one by
   one where the refined rest reaches a merit no higher;
6. a polish on the 4× finer sampling when a requirement fails there.

The best design that keeps every limit is kept throughout: the merit in ``history`` never rises,
Ctrl-C (KeyboardInterrupt) or the time limit stop the search and return the best design so far.

The result is a :class:`DesignResult` (scipy-style: ``success``, ``message``).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..stack import Stack, qwot_to_nm
from .layout import Design, DesignProblem
from .merit import Merit
from .needle import DEFAULT_PROBE_STEP_NM, gradual_evolution, needle_optimise, trim_layers
from .refine import Clock, TimeUp, refine

__all__ = ["DesignResult", "synthesize", "start_design", "STRATEGIES"]

STRATEGIES = ("auto", "needle", "evolution", "refine")

#: Default start: one layer of the lowest-index material, this fraction of the total-thickness
#: limit thick (a thick start layer gives the needles room; Tikhonravov et al. 1996 start from
#: a single thick layer) ...
START_FRACTION = 0.75
#: ... or, without a total limit, this many quarter waves at the reference wavelength.
START_QWOT = 4.0
#: With one allowed material or one free layer, the single layer's thickness is scanned up to
#: the total limit or this many quarter waves.
SINGLE_SCAN_QWOT = 8.0


@dataclass
class DesignResult:
    """Outcome of :func:`synthesize`.

    Attributes
    ----------
    stack
        The full design as a :class:`~filmstack.stack.Stack` (fixed and free layers).
    design
        The free layers (:class:`~filmstack.design.layout.Design`).
    merit
        Merit of the design on the spec's sampling (0: every target met with margin).
    fine_merit
        Merit without margin on the 4× finer sampling (0 when every inequality holds there).
    history
        One dict per accepted improvement: ``step``, ``stage``, ``layers`` (front layers),
        ``total_nm``, ``merit``, ``elapsed_s``. The merit never rises along it.
    success
        True when every optimised requirement passes on the 4× finer sampling.
    message
        Why the search ended.
    elapsed_s
        Wall time, s.
    n_evaluations
        Merit evaluations made.
    seed
        The seed used.
    """

    stack: Stack
    design: Design
    merit: float
    fine_merit: float
    history: list = field(default_factory=list)
    success: bool = False
    message: str = ""
    elapsed_s: float = 0.0
    n_evaluations: int = 0
    seed: int = 0
    problem: DesignProblem | None = None
    skipped: list = field(default_factory=list)


def start_design(problem: DesignProblem, start: str | None = None) -> Design:
    """The start design: ``start`` in H/L notation, else one thick layer of the lowest-index
    material (see :data:`START_FRACTION`, :data:`START_QWOT`)."""
    ref = problem.template.reference_nm
    if start:
        from ..notation import parse_notation

        items = parse_notation(start, problem.materials.keys(), key="start")
        return Design(tuple(s for s, _ in items),
                      tuple(qwot_to_nm(f, problem.materials[s], ref) for s, f in items))
    sym = min(problem.materials,
              key=lambda s: float(np.real(problem.materials[s].nk(np.array([ref]))[0])))
    if problem.free_total_nm is not None:
        d = START_FRACTION * problem.free_total_nm
    else:
        d = qwot_to_nm(START_QWOT, problem.materials[sym], ref)
    return Design((sym,), (max(d, problem.thinnest_nm),))


def _fit_limits(problem: DesignProblem, design: Design) -> Design:
    """Make a start design keep the limits: merge, drop thin layers, scale to the total cap,
    drop the top layers beyond the layer limit."""
    d = design.cleaned(problem.thinnest_nm)
    lim = problem.free_max_layers
    if lim is not None and len(d) > lim:
        d = Design(d.symbols[:lim], d.thicknesses_nm[:lim])
    cap = problem.free_total_nm
    if cap is not None and d.d.sum() > cap:
        d = d.with_d(d.d * cap / d.d.sum())
        d = d.cleaned(problem.thinnest_nm)
    return d


def _best_single_layer(problem: DesignProblem, merit: Merit, clock: Clock) -> Design:
    """With one allowed material, or room for one free layer, every free design is one layer,
    so the search is one material and one thickness: the best of a scan of each material
    (steps of 1/20 quarter wave at the reference wavelength, from the thinnest limit to the total
    limit or :data:`SINGLE_SCAN_QWOT` quarter waves). The merit has many local minima in that
    thickness (one per half wave), and a refinement from the default thick start finds only the
    nearest."""
    best = (np.inf, None)
    for sym, mat in problem.materials.items():
        qw = qwot_to_nm(1.0, mat, problem.template.reference_nm)
        hi = problem.free_total_nm if problem.free_total_nm is not None else SINGLE_SCAN_QWOT * qw
        lo = problem.thinnest_nm
        for d in np.linspace(lo, max(hi, lo), max(2, int(np.ceil((hi - lo) / (qw / 20))) + 1)):
            clock.check()
            v = merit.value(Design((sym,), (float(d),)))
            if v < best[0]:
                best = (v, Design((sym,), (float(d),)))
    return best[1]


def synthesize(spec, *, seed: int = 0, time_limit_s: float | None = 60.0,
               strategy: str = "auto", progress=None, start: str | Design | None = None,
               step_nm: float = DEFAULT_PROBE_STEP_NM, restarts: int = 3,
               margin_fraction: float = 0.05, method: str = "trf",
               stop=None) -> DesignResult:
    """Design a coating for ``spec``.

    Parameters
    ----------
    spec
        A :class:`~filmstack.spec.Spec` (from ``filmstack.spec.load_spec``).
    seed
        Seed of the random restarts; the same seed (and no time limit cutting the run short)
        gives the same design.
    time_limit_s
        Wall-time budget in seconds (None: none). The best design so far is returned.
    strategy
        'auto' (needle, then gradual evolution if needed), 'needle', 'evolution' or 'refine'
        (refine the start design only).
    progress
        Optional ``progress(entry)`` called with every history entry (a dict).
    start
        A start design (notation or :class:`Design`) overriding the spec's ``start``.
    step_nm
        Spacing of the needle probe depths, nm.
    restarts
        Number of seeded random restarts around the best design.
    margin_fraction
        Design margin of the merit (see :class:`~filmstack.design.merit.Merit`).
    method
        Refinement method, 'trf' or 'lbfgs'.
    stop
        Optional callable; when it returns True the search stops with the best design so far
        (the command line sets it on the first Ctrl-C).

    Returns
    -------
    :class:`DesignResult`
    """
    if strategy not in STRATEGIES:
        raise InputError(f"strategy must be one of {', '.join(STRATEGIES)}, got {strategy!r}")
    clock = Clock(time_limit_s, stop)
    problem = DesignProblem.from_spec(spec)
    merit = Merit(problem, spec.requirements, margin_fraction=margin_fraction)
    if not merit.targets:
        raise InputError("no requirement to optimise (every one has weight 0 or is a colour "
                         "requirement)", file=spec.path, key="requirements")
    rng = np.random.default_rng(seed)
    history: list = []
    state = {"design": None, "value": np.inf}

    def accept(design, value, stage):
        if value > state["value"] or problem.violations(design):
            return
        state["design"], state["value"] = design, value
        entry = {"step": len(history), "stage": stage,
                 "layers": len(design) + problem.n_fixed,
                 "total_nm": float(design.d.sum()) + problem.fixed_nm,
                 "merit": float(value), "elapsed_s": round(clock.elapsed, 3)}
        history.append(entry)
        if progress is not None:
            progress(entry)

    def do_refine(design):
        return refine(merit, design, method=method, clock=clock)

    message = ""
    try:
        if isinstance(start, Design):
            d0 = start
        elif (len(problem.materials) == 1 or problem.free_max_layers == 1) and \
                start is None and not spec.start:
            d0 = _best_single_layer(problem, merit, clock)
        else:
            d0 = start_design(problem, start if start is not None else spec.start)
        d0 = _fit_limits(problem, d0)
        accept(d0, merit.value(d0), "start")
        d, v = do_refine(d0)
        accept(d, v, "refine")
        d, v = state["design"], state["value"]
        if strategy in ("auto", "needle", "evolution"):
            d, v, message = needle_optimise(merit, d, v, refine=do_refine, clock=clock,
                                            accept=accept, step_nm=step_nm)
        if strategy in ("auto", "evolution") and not merit.satisfied(d, v):
            d, v, message = gradual_evolution(merit, d, v, refine=do_refine, clock=clock,
                                              accept=accept, step_nm=step_nm)
        d, v = state["design"], state["value"]
        for _ in range(0 if merit.satisfied(d, v) else restarts):
            clock.check()
            factors = 1.0 + 0.1 * rng.uniform(-1.0, 1.0, len(d))
            trial = _fit_limits(problem, d.with_d(d.d * factors))
            t, tv = do_refine(trial)
            if tv < v * (1.0 - 1e-6):       # history: real improvements only
                accept(t, tv, "restart")
            d, v = state["design"], state["value"]
        if strategy != "refine":
            trim_layers(merit, d, v, refine=do_refine, clock=clock, accept=accept)
            d, v = state["design"], state["value"]
        if not message:
            message = "start design refined" if strategy == "refine" else "search finished"
    except TimeUp as exc:
        message = str(exc) + "; best design so far"
    except KeyboardInterrupt:
        message = "interrupted; best design so far"

    d, v = state["design"], state["value"]
    fine = Merit(problem, spec.requirements, refine=4, margin_fraction=0.0)
    fine_v = fine.value(d)
    fine_ok = fine.satisfied(d, fine_v)
    if (not fine_ok and merit.satisfied(d, v) and clock.left > 0
            and not (stop is not None and stop())):
        # the spec's sampling hides a failure between its samples: polish on the fine grid and
        # keep the result if it passes there and the spec-grid merit does not rise
        try:
            fine_m = Merit(problem, spec.requirements, refine=4, margin_fraction=margin_fraction)
            t, _ = refine(fine_m, d, method=method, clock=clock)
            tv = merit.value(t)
            if tv <= v and not problem.violations(t) and fine.satisfied(t):
                accept(t, tv, "fine polish")
                d, v = state["design"], state["value"]
                fine_v = fine.value(d)
                fine_ok = fine.satisfied(d, fine_v)
        except (TimeUp, KeyboardInterrupt):
            pass
    success = bool(fine_ok)
    if success:
        message = message + "; every optimised requirement passes on the 4x finer sampling"
    return DesignResult(stack=problem.stack(d), design=d, merit=float(v), fine_merit=float(fine_v),
                        history=history, success=success, message=message,
                        elapsed_s=clock.elapsed, n_evaluations=merit.n_evaluations, seed=seed,
                        problem=problem, skipped=list(merit.skipped))
