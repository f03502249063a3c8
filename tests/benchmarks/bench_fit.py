"""Benchmark of fitting measured spectra (run by hand: ``python tests/benchmarks/run.py fit``).

Figures (DESIGN.md §6 budgets: a single-film fit under 0.1 s; a 10,000-site wafer map under
60 s on the 2-core machine):

1. Single film: an oxide on silicon, 301 wavelengths (400–1000 nm), thickness free over
   50–3000 nm from a poor start, with the global scan. Baseline in the same run: the naive
   multi-start — scipy's least_squares with a finite-difference Jacobian from 20 evenly spaced
   starts (no scan, no analytic derivatives), the best result kept.
2. Wafer map: 10,000 sites of the same model, 161 wavelengths (450–850 nm, every 2.5 nm), one
   batched fit. Baseline: the single-sample fit called site by site, on 100 sites, scaled.

Each line says whether the answer was right (within 4σ of the truth) as well as how fast.
Exit code 1 if a budget is missed.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))   # the repo, when not installed

SINGLE_BUDGET_S = 0.1
MAP_BUDGET_S = 60.0


def _model(start=800.0):
    import filmstack as fs
    from filmstack.fit import model_from_stack
    from filmstack.stack import AIR, FreeParameter, Layer, Stack

    st = Stack(incident=AIR, substrate=fs.get_material("Si"),
               layers=(Layer(fs.get_material("SiO2"), start),),
               free=(FreeParameter("layers[0].nm", start, 50.0, 3000.0),))
    return st, model_from_stack(st)


def _spectra(stack, wl, d):
    from filmstack.response import spectrum

    return spectrum(stack, wl, 0.0, "mean", thicknesses_nm=np.asarray(d)[:, None]).R[:, 0]


def bench_single() -> bool:
    from scipy.optimize import least_squares

    from filmstack.fit import fit_spectrum
    from filmstack.io.measured import Channel, Measurement
    from filmstack.response import spectrum

    stack, model = _model()
    wl = np.arange(400.0, 1000.1, 2.0)
    rng = np.random.default_rng(1)
    truth = 1234.5
    y = _spectra(stack, wl, [truth])[0] + rng.normal(0, 0.003, wl.size)
    m = Measurement((Channel("R", 0.0, "mean", wl, y),), "bench")
    fit_spectrum(model, m)                                  # imports, caches
    times, r = [], None
    for _ in range(15):
        t0 = time.perf_counter()
        r = fit_spectrum(model, m)
        times.append(time.perf_counter() - t0)
    p = r["layers[0].nm"]
    ok = abs(p.value - truth) < 4 * p.stderr
    med = statistics.median(times)
    print(f"single-film fit (global scan + least squares): median {1e3 * med:.1f} ms, "
          f"min {1e3 * min(times):.1f} ms; {p.value:.2f} ± {p.stderr:.2f} nm "
          f"(truth {truth}) {'right' if ok else 'WRONG'}; budget {1e3 * SINGLE_BUDGET_S:.0f} ms")

    def fun(x):
        return spectrum(stack.with_thicknesses(x), wl, 0.0, "mean").R[0] - y

    t0 = time.perf_counter()
    best = None
    for start in np.linspace(60.0, 2990.0, 20):
        res = least_squares(fun, [start], bounds=([50.0], [3000.0]), jac="2-point")
        if best is None or res.cost < best.cost:
            best = res
    tb = time.perf_counter() - t0
    okb = abs(best.x[0] - truth) < 4 * p.stderr
    print(f"  baseline, 20 local fits with finite differences: {1e3 * tb:.0f} ms; "
          f"{best.x[0]:.2f} nm {'right' if okb else 'WRONG'}; speed-up {tb / med:.0f}x")
    return ok and med <= SINGLE_BUDGET_S


def bench_map() -> bool:
    from filmstack.fit import fit_map, fit_spectrum
    from filmstack.io.measured import Channel, Measurement

    stack, model = _model()
    wl = np.arange(450.0, 850.1, 2.5)
    S = 10_000
    rng = np.random.default_rng(2)
    x = rng.uniform(-70, 70, S)
    yy = rng.uniform(-70, 70, S)
    truth = 1200.0 * (1 - 0.03 * (x**2 + yy**2) / 70**2) + rng.normal(0, 2.0, S)
    R = _spectra(stack, wl, truth) + rng.normal(0, 0.003, (S, wl.size))
    # The same sites as one long CSV table, read back (the reader's share of a CLI run).
    import tempfile

    from filmstack.io.measured import read_measured

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "map.csv"
        wl_col = np.tile(wl, S)
        site_col = np.repeat(np.arange(S), wl.size)
        lines = ["site,x_mm,y_mm,wavelength_nm,R"]
        lines += [f"s{i},{x[i]:.2f},{yy[i]:.2f},{w:g},{v:.5f}"
                  for i, w, v in zip(site_col, wl_col, R.ravel())]
        path.write_text("\n".join(lines) + "\n")
        t0 = time.perf_counter()
        data = read_measured(path)
        tr = time.perf_counter() - t0
    print(f"reading the map as CSV ({S * wl.size} rows, {len(data.sites)} sites): {tr:.1f} s")
    sites = [Measurement((Channel("R", 0.0, "mean", wl, R[i]),), f"s{i}", float(x[i]),
                         float(yy[i])) for i in range(S)]
    t0 = time.perf_counter()
    res = fit_map(model, sites)
    t = time.perf_counter() - t0
    z = (res.values[:, 0] - truth) / res.stderr[:, 0]
    ok = np.mean(np.abs(z) < 4) > 0.999
    u = res.uniformity()
    print(f"wafer map, {S} sites x {wl.size} wavelengths: {t:.1f} s ({S / t:.0f} sites/s); "
          f"{np.mean(np.abs(z) < 4) * 100:.2f} % of sites within 4σ of the truth, "
          f"1σ coverage {np.mean(np.abs(z) < 1) * 100:.1f} % (expected 68.3); "
          f"{int(res.ambiguous.sum())} ambiguous; mean {u.mean:.1f} nm, "
          f"non-uniformity {100 * u.nonuniformity:.2f} %; budget {MAP_BUDGET_S:.0f} s")
    n = 100
    t0 = time.perf_counter()
    for i in range(n):
        fit_spectrum(model, sites[i])
    tb = (time.perf_counter() - t0) / n * S
    print(f"  baseline, the single-sample fit site by site: {tb:.0f} s for {S} sites "
          f"(from {n}); speed-up {tb / t:.1f}x")
    return bool(ok) and t <= MAP_BUDGET_S


def main() -> int:
    ok = bench_single()
    ok &= bench_map()
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
