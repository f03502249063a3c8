"""Monte Carlo tolerance analysis: production yield under deposition errors.

Error model (each trial is one production run; σ in percent, 1σ):

- **random thickness error**, independent for every layer: ``thickness_pct``;
- **systematic rate error** per material: one draw per trial scales every layer of that
  material (a miscalibrated deposition rate or tooling factor): ``rate_pct[material]``;
- **index error** per material: one draw per trial scales the real index n of every layer of
  that material (k kept): ``index_pct[material]``.

A trial's layer l of material m has thickness ``d_l (1 + σ_r,m z_r,m)(1 + σ_t z_t,l)``
(clipped at 0) and index ``n_l (1 + σ_i,m z_i,m) + i k_l``, with z independent standard
normal draws. The draws are made up front in a fixed order (thickness (N, L), rate (N, M),
index (N, M), M the distinct material names in order of first appearance), all from
``numpy.random.default_rng(seed)``: the same seed gives the same trials and the same yield,
whatever the chunk size, and setting one σ to zero does not change the others' draws.

Every trial is evaluated on the spec's sampling grid (refine=1) as one batched engine call per
chunk (:func:`filmstack.evaluate.evaluate_requirements`). The yield is the fraction of trials that
pass every requirement, with its exact (Clopper–Pearson) binomial confidence interval
(:mod:`filmstack.check.stats`); per requirement, the pass fraction and percentiles of its value.

The model assumes independent Gaussian errors; real processes also drift, correlate errors
between neighbouring layers and grow inhomogeneous films (DESIGN.md §7): the yield is a
planning figure, not a promise.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..evaluate import evaluate_requirements
from ..spec import Requirement, Spec, Tolerances
from .stats import clopper_pearson

__all__ = ["MAX_TRIALS", "PERCENTILES", "RequirementYield", "YieldResult", "draw_trials", "monte_carlo",
           "tolerance_aliases"]

#: Percentiles of each requirement's value reported.
PERCENTILES = (1.0, 5.0, 50.0, 95.0, 99.0)
#: Trials per block between progress reports / stop checks.
BLOCK_TRIALS = 1000
#: Most trials of one run. The draws are made up front (for the same trials whatever the block
#: size), about 8 bytes × (layers + 2 × materials) × 3 per trial; a million trials already gives
#: the yield to ±0.1 % (95 %).
MAX_TRIALS = 1_000_000


@dataclass(frozen=True)
class RequirementYield:
    """Monte Carlo statistics of one requirement.

    pass_fraction and its Clopper–Pearson interval ``ci``; ``percentiles``: {p: value} over the
    trials (internal units); values: (N,) every trial's value; nominal: the value of the quote.
    """

    requirement: Requirement
    pass_fraction: float
    ci: tuple[float, float]
    percentiles: dict
    mean: float
    std: float
    values: np.ndarray
    passed: np.ndarray

    def to_dict(self) -> dict:
        r = self.requirement
        return {"key": r.key, "quantity": r.quantity, "condition": r.text,
                "pass_fraction": self.pass_fraction, "ci": list(self.ci),
                "mean": self.mean, "std": self.std,
                "percentiles": {f"p{p:g}": v for p, v in self.percentiles.items()}}


@dataclass(frozen=True)
class YieldResult:
    """The outcome of a Monte Carlo run.

    ``yield_`` (the fraction of trials passing every requirement) with ``ci`` at ``confidence``
    (method ``ci_method``); ``trials`` done (fewer than ``requested`` if stopped early); per
    requirement :class:`RequirementYield`; the trials' thicknesses (N, L) and index factors
    (N, L) for plots; ``seconds`` of computation.
    """

    yield_: float
    ci: tuple[float, float]
    confidence: float
    trials: int
    requested: int
    seed: int
    tolerances: Tolerances
    requirements: tuple[RequirementYield, ...]
    passed: np.ndarray
    thicknesses_nm: np.ndarray
    index_scale: np.ndarray | None
    seconds: float
    ci_method: str = "Clopper-Pearson (exact binomial)"
    interrupted: bool = False
    notes: tuple[str, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict:
        t = self.tolerances
        return {"yield": self.yield_, "ci": list(self.ci), "confidence": self.confidence,
                "ci_method": self.ci_method, "trials": self.trials,
                "requested": self.requested, "seed": self.seed,
                "interrupted": self.interrupted,
                "tolerances": {"thickness_pct": t.thickness_pct, "rate_pct": dict(t.rate_pct),
                               "index_pct": dict(t.index_pct)},
                "requirements": [r.to_dict() for r in self.requirements],
                "seconds": self.seconds, "notes": list(self.notes)}


def _material_groups(stack, aliases=None):
    """Distinct material names of the layers (first appearance first), each layer's group, and
    the name under which each group's tolerances are looked up."""
    names = []
    group = np.empty(len(stack.layers), dtype=int)
    for i, l in enumerate(stack.layers):
        if l.material.name not in names:
            names.append(l.material.name)
        group[i] = names.index(l.material.name)
    lookup = [(aliases or {}).get(n, n) for n in names]
    return names, group, lookup


def tolerance_aliases(stack, spec: Spec) -> dict:
    """{stack material name: spec material name} for the stack's materials that are the same as
    one of the spec's (so ``rate_pct: {H: 0.5}`` reaches the quote's layers of that material even
    when the quote calls it differently)."""
    from .compliance import same_medium

    out = {}
    spec_mats = list(spec.materials.values()) + [l.material for l in
                                                 spec.fixed_bottom + spec.fixed_top]
    for l in stack.layers:
        for m in spec_mats:
            if l.material.name not in out and same_medium(l.material, m):
                out[l.material.name] = m.name
    return out


def draw_trials(stack, tolerances: Tolerances, trials: int, seed: int, *, aliases=None):
    """Random production runs of ``stack``.

    Parameters
    ----------
    stack
        The nominal :class:`~filmstack.stack.Stack`.
    tolerances
        1σ errors in percent (:class:`~filmstack.spec.Tolerances`).
    trials
        Number of runs N >= 1.
    seed
        Seed of ``numpy.random.default_rng``.
    aliases
        Optional {stack material name: name used in ``tolerances``}.

    Returns
    -------
    thicknesses_nm : (N, L) float, nm
    index_scale : (N, L) float factors on n, or None when no index error is given.
    """
    if int(trials) != trials or not 1 <= trials <= MAX_TRIALS:
        raise InputError(f"trials must be a whole number from 1 to {MAX_TRIALS:,}, got "
                         f"{trials!r}")
    if int(seed) != seed or seed < 0:
        raise InputError(f"seed must be a whole number >= 0, got {seed!r}")
    trials = int(trials)
    rng = np.random.default_rng(seed)
    d0 = stack.thicknesses_nm
    names, group, lookup = _material_groups(stack, aliases)
    L, M = d0.size, len(names)
    z_t = rng.standard_normal((trials, L))
    z_r = rng.standard_normal((trials, M))
    z_i = rng.standard_normal((trials, M))
    s_r = np.array([tolerances.rate_for(n) for n in lookup]) / 100.0
    s_i = np.array([tolerances.index_for(n) for n in lookup]) / 100.0
    s_t = tolerances.thickness_pct / 100.0
    rate = 1.0 + (z_r * s_r)[:, group] if M else np.ones((trials, L))
    d = d0 * rate * (1.0 + s_t * z_t)
    np.maximum(d, 0.0, out=d)
    scale = None
    if M and np.any(s_i > 0):
        scale = 1.0 + (z_i * s_i)[:, group]
        if np.any(scale <= 0):
            raise InputError("an index error so large that n drops below 0 in a trial: "
                             "check index_pct")
    return d, scale


def monte_carlo(stack, spec_or_requirements, *, trials: int, seed: int = 0,
                tolerances: Tolerances | None = None, confidence: float = 0.95,
                block: int = BLOCK_TRIALS, progress=None) -> YieldResult:
    """Monte Carlo yield of a stack against a spec's requirements.

    Parameters
    ----------
    stack
        The nominal :class:`~filmstack.stack.Stack`.
    spec_or_requirements
        A :class:`~filmstack.spec.Spec` (its ``tolerances`` are used unless ``tolerances`` is
        given) or a sequence of requirements.
    trials
        Number of trials N.
    seed
        Random seed (same seed, same result).
    tolerances
        1σ errors in percent; overrides the spec's.
    confidence
        Level of the yield's confidence interval.
    block
        Trials per block; ``progress(done, total)`` is called after each block and may return
        True to stop early (the result then covers the trials done).

    Returns
    -------
    YieldResult
    """
    aliases = {}
    if isinstance(spec_or_requirements, Spec):
        reqs = spec_or_requirements.requirements
        tol = spec_or_requirements.tolerances if tolerances is None else tolerances
        aliases = tolerance_aliases(stack, spec_or_requirements)
    else:
        reqs = tuple(spec_or_requirements)
        tol = Tolerances() if tolerances is None else tolerances
    t0 = time.perf_counter()
    d, scale = draw_trials(stack, tol, trials, seed, aliases=aliases)
    N = d.shape[0]
    values = [np.empty(N) for _ in reqs]
    passes = [np.empty(N, dtype=bool) for _ in reqs]
    done = 0
    interrupted = False
    try:
        for i0 in range(0, N, max(1, int(block))):
            i1 = min(N, i0 + max(1, int(block)))
            res = evaluate_requirements(stack, reqs, thicknesses_nm=d[i0:i1],
                                        index_scale=None if scale is None else scale[i0:i1])
            for j, r in enumerate(res):
                values[j][i0:i1] = r.value
                passes[j][i0:i1] = r.passed
            done = i1
            if progress is not None and progress(done, N) and done < N:
                interrupted = True
                break
    except KeyboardInterrupt:
        interrupted = True
    if done == 0:
        raise KeyboardInterrupt
    seconds = time.perf_counter() - t0
    values = [v[:done] for v in values]
    passes = [p[:done] for p in passes]
    all_pass = np.logical_and.reduce(passes) if passes else np.ones(done, bool)
    k = int(all_pass.sum())

    exact = tol.is_zero or d.shape[1] == 0

    def interval(k_pass):
        # without any error every trial is the nominal stack: the yield is known exactly
        # (1 or 0), not a binomial estimate
        if exact:
            return (k_pass / done, k_pass / done)
        return clopper_pearson(k_pass, done, confidence)

    per = []
    for req, v, p in zip(reqs, values, passes):
        kp = int(p.sum())
        per.append(RequirementYield(
            req, kp / done, interval(kp),
            {q: float(x) for q, x in zip(PERCENTILES, np.percentile(v, PERCENTILES))},
            float(np.mean(v)), float(np.std(v, ddof=1)) if done > 1 else 0.0, v, p))
    notes = []
    if d.shape[1] == 0 and not tol.is_zero:
        notes.append("the stack has no layers: every trial is the nominal stack, and the yield "
                     "is exact (no interval)")
    if tol.is_zero:
        notes.append("every tolerance is zero: every trial is the nominal stack, and the yield "
                     "is exact (no interval)")
    used = {aliases.get(l.material.name, l.material.name) for l in stack.layers}
    for what, table in (("rate_pct", tol.rate_pct), ("index_pct", tol.index_pct)):
        for name, pct in table.items():
            if name != "*" and pct and name not in used:
                notes.append(f"tolerances.{what} for '{name}' matches no layer of the stack")
    # a rate error given per material but not for one the stack uses (an off-list material in a
    # quote, say): its layers get thickness errors only — worth saying
    if any(v for k, v in tol.rate_pct.items() if k != "*") and not tol.rate_pct.get("*"):
        bare = sorted({l.material.name for l in stack.layers
                       if not tol.rate_pct.get(aliases.get(l.material.name, l.material.name))})
        if bare:
            notes.append(f"no rate error is given for {', '.join(bare)}: its layers vary by the "
                         f"random thickness error only")
    return YieldResult(k / done, interval(k), confidence, done,
                       int(trials), int(seed), tol, tuple(per), all_pass, d[:done],
                       None if scale is None else scale[:done], seconds,
                       interrupted=interrupted, notes=tuple(notes))

