"""Benchmark of the check job's Monte Carlo yield (DESIGN.md §6; run by hand).

    python tests/benchmarks/bench_check.py [--trials 10000]

A 40-layer quarter-wave mirror, (HL)^20 at 550 nm on n = 1.52 (H n = 2.35, L n = 1.46), one
requirement (R >= 99.999 % at every point) sampled at 401 wavelengths (495–615 nm every 0.3 nm)
at normal incidence, unpolarised; errors 1 % per layer, 0.5 % rate and 0.3 % index per
material.
Target: 10,000 trials within a minute on the 2-core reference machine.

Baseline, measured in the same run: the same trials one at a time through the same engine (one
``spectrum`` call per trial), timed on a subset and scaled to the full count.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from filmstack.check import monte_carlo
from filmstack.evaluate import evaluate_requirements, requirement_wavelengths
from filmstack.materials import Constant
from filmstack.spec import spec_from_mapping
from filmstack.stack import Layer, Stack


def setup():
    H, L = Constant(name="H", n=2.35), Constant(name="L", n=1.46)
    layers = []
    for _ in range(20):
        layers += [Layer(H, 550 / (4 * 2.35)), Layer(L, 550 / (4 * 1.46))]
    stack = Stack(incident=Constant(name="air", n=1.0), substrate=Constant(name="glass", n=1.52),
                  layers=tuple(layers))
    spec = spec_from_mapping({
        "stack": {"incident": {"n": 1.0}, "substrate": {"n": 1.52}},
        "materials": {"H": {"n": 2.35}, "L": {"n": 1.46}},
        "requirements": [{"R": ">= 99.999%", "band_nm": [495, 615], "step_nm": 0.3,
                          "over": "every"}],
        "tolerances": {"thickness_pct": 1.0, "rate_pct": {"H": 0.5, "L": 0.5},
                       "index_pct": {"H": 0.3, "L": 0.3}}})
    # the benchmark's stack uses the spec's materials so that the tolerances reach it
    stack = Stack(incident=stack.incident, substrate=stack.substrate,
                  layers=tuple(Layer(spec.materials["H" if l.material.name == "H" else "L"],
                                     l.thickness_nm) for l in layers))
    return stack, spec


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=10_000)
    ap.add_argument("--baseline-trials", type=int, default=200)
    args = ap.parse_args()
    stack, spec = setup()
    W = requirement_wavelengths(spec.requirements[0]).size
    print(f"stack: {len(stack.layers)} layers; {W} wavelengths; 1 angle (0°); unpolarised "
          "(s = p at normal incidence: one engine pass)")

    t0 = time.perf_counter()
    mc = monte_carlo(stack, spec, trials=args.trials, seed=1)
    t_batch = time.perf_counter() - t0
    print(f"batched Monte Carlo: {args.trials} trials in {t_batch:.2f} s "
          f"({args.trials / t_batch:,.0f} trials/s); yield {mc.yield_:.4f} "
          f"[{mc.ci[0]:.4f}, {mc.ci[1]:.4f}] (95 %, Clopper-Pearson)")

    # the same without index errors: every trial shares the materials' index array
    from filmstack.spec import Tolerances
    tol = Tolerances(thickness_pct=1.0, rate_pct=dict(spec.tolerances.rate_pct))
    t0 = time.perf_counter()
    mc2 = monte_carlo(stack, spec, trials=args.trials, seed=1, tolerances=tol)
    t_thick = time.perf_counter() - t0
    print(f"thickness and rate errors only: {args.trials} trials in {t_thick:.2f} s "
          f"({args.trials / t_thick:,.0f} trials/s); yield {mc2.yield_:.4f}")

    # baseline: one trial at a time through the same engine
    n = args.baseline_trials
    d, scale = mc.thicknesses_nm[:n], mc.index_scale[:n]
    t0 = time.perf_counter()
    for i in range(n):
        evaluate_requirements(stack, spec, thicknesses_nm=d[i], index_scale=scale[i])
    t_one = (time.perf_counter() - t0) / n
    print(f"baseline, one trial per engine call: {t_one * 1e3:.2f} ms/trial -> "
          f"{t_one * args.trials:.1f} s for {args.trials} trials "
          f"(batched is {t_one * args.trials / t_batch:.1f}x faster)")
    print(f"target: {args.trials} trials within 60 s: "
          f"{'met' if t_batch <= 60 * args.trials / 10_000 else 'NOT met'}")


if __name__ == "__main__":
    main()
