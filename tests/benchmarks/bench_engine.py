"""Engine benchmark (DESIGN.md §6): forward speed, derivative cost, batch memory.

Figures printed:
- forward layer-points per second per polarisation on 100 layers × 2001 wavelengths × 91 angles
  (layer-points = layers × wavelengths × angles), for 's' alone and for 'mean' (s and p share
  their trigonometric terms), beside the straightforward numpy layer loop (complex 2×2 matrix
  products vectorised over the grid) and a per-wavelength Python loop (on a subset, scaled);
- the time of all thickness derivatives relative to one forward evaluation (budget: ≤ 4×);
- peak memory of 10,000 designs × 40 layers × 401 wavelengths in one call (budget: 1 GB).
Exit status 1 when a budget is missed.
"""

from __future__ import annotations

import time
import tracemalloc

import numpy as np

from filmstack.optics import coherent_derivatives, coherent_response


def best_of(f, n=3):
    times = []
    for _ in range(n):
        t = time.perf_counter()
        f()
        times.append(time.perf_counter() - t)
    return min(times)


def numpy_layer_loop(N, d, n0, ns, wl, ang_deg):
    """Baseline: one complex 2×2 matrix product per layer, vectorised over (angle, wavelength)."""
    th = np.deg2rad(ang_deg)[:, None]
    s0 = n0 * np.sin(th)
    M = np.zeros((2, 2) + np.broadcast_shapes(th.shape, wl.shape), dtype=complex)
    M[0, 0] = M[1, 1] = 1
    for j in range(N.shape[0] - 1, -1, -1):
        q = np.sqrt(N[j] ** 2 - s0 ** 2 + 0j)
        delta = 2 * np.pi * q * d[j] / wl
        c, s = np.cos(delta), np.sin(delta)
        Mj = np.array([[c, -1j * s / q], [-1j * q * s, c]])
        M = np.einsum("ik...,kj...->ij...", M, Mj)
    qs = np.sqrt(ns ** 2 - s0 ** 2 + 0j)
    B = M[0, 0] + M[0, 1] * qs
    C = M[1, 0] + M[1, 1] * qs
    q0 = n0 * np.cos(th)
    return np.abs((q0 * B - C) / (q0 * B + C)) ** 2


def python_wavelength_loop(N, d, n0, ns, wl, ang_deg):
    """Baseline: a Python loop over wavelengths and layers with 2×2 numpy matrices."""
    out = np.empty((len(ang_deg), wl.size))
    for a, ang in enumerate(np.deg2rad(ang_deg)):
        s0 = n0 * np.sin(ang)
        for w, lam in enumerate(wl):
            M = np.eye(2, dtype=complex)
            for j in range(N.shape[0] - 1, -1, -1):
                q = np.sqrt(N[j, w] ** 2 - s0 ** 2 + 0j)
                dl = 2 * np.pi * q * d[j] / lam
                M = M @ np.array([[np.cos(dl), -1j * np.sin(dl) / q],
                                  [-1j * q * np.sin(dl), np.cos(dl)]])
            qs = np.sqrt(ns ** 2 - s0 ** 2 + 0j)
            B, C = M @ np.array([1, qs])
            q0 = n0 * np.cos(ang)
            out[a, w] = abs((q0 * B - C) / (q0 * B + C)) ** 2
    return out


def main() -> int:
    ok = True
    L, W, A = 100, 2001, 91
    wl = np.linspace(400.0, 1000.0, W)
    ang = np.linspace(0.0, 89.0, A)
    nH, nL = 2.35, 1.46
    N = np.where(np.arange(L) % 2 == 0, nH, nL)[:, None] * np.ones(W) + 0j
    d = np.where(np.arange(L) % 2 == 0, 550 / 4 / nH, 550 / 4 / nL) * (1 + 0.05 * np.sin(np.arange(L)))
    pts = L * W * A
    print(f"forward: {L} layers x {W} wavelengths x {A} angles = {pts / 1e6:.1f} M layer-points")
    t_s = best_of(lambda: coherent_response(N, d, 1.0, 1.52, wl, ang, "s"))
    t_m = best_of(lambda: coherent_response(N, d, 1.0, 1.52, wl, ang, "mean"))
    rate_s, rate_m = pts / t_s / 1e6, 2 * pts / t_m / 1e6
    print(f"  filmstack 's':    {t_s:6.3f} s  {rate_s:6.1f} M layer-points/s per polarisation")
    print(f"  filmstack 'mean': {t_m:6.3f} s  {rate_m:6.1f} M layer-points/s per polarisation")
    t_base = best_of(lambda: numpy_layer_loop(N, d, 1.0, 1.52, wl, ang), n=1)
    print(f"  numpy layer loop: {t_base:6.3f} s  {pts / t_base / 1e6:6.1f} M layer-points/s")
    sub = slice(0, 101)
    t_py = best_of(lambda: python_wavelength_loop(N[:, sub], d, 1.0, 1.52, wl[sub], ang[:2]), n=1)
    print(f"  per-wavelength Python loop (101 wl x 2 angles): "
          f"{L * 101 * 2 / t_py / 1e6:6.2f} M layer-points/s")
    ref = numpy_layer_loop(N, d, 1.0, 1.52, wl, ang[:5])
    got = coherent_response(N, d, 1.0, 1.52, wl, ang[:5], "s").R
    print(f"  agreement with the baseline: max |dR| = {np.abs(ref - got).max():.1e}")
    if min(rate_s, rate_m) < 30:
        print("  BUDGET MISSED: >= 30 M layer-points/s per polarisation")
        ok = False

    print("derivatives: 100 layers x 401 wavelengths x 10 angles")
    wl2, ang2 = wl[::5], ang[:10]
    N2 = N[:, ::5]
    for pol in ("s", "mean"):
        tf = best_of(lambda: coherent_response(N2, d, 1.0, 1.52, wl2, ang2, pol))
        td = best_of(lambda: coherent_derivatives(N2, d, 1.0, 1.52, wl2, ang2, pol))
        print(f"  {pol:4s}: forward {tf:.3f} s, all {L} derivatives {td:.3f} s = {td / tf:.1f}x "
              f"(finite differences would cost {L + 1}x)")
        if td / tf > 4.0:
            print("  BUDGET MISSED: derivatives <= 4x one forward evaluation")
            ok = False

    print("batch: 10,000 designs x 40 layers x 401 wavelengths, one call")
    rng = np.random.default_rng(0)
    L3, W3, nb = 40, 401, 10_000
    wl3 = np.linspace(400.0, 800.0, W3)
    N3 = np.where(np.arange(L3) % 2 == 0, nH, nL)[:, None] * np.ones(W3) + 0j
    d3 = np.where(np.arange(L3) % 2 == 0, 58.5, 94.2) * (1 + 0.01 * rng.standard_normal((nb, L3)))
    tracemalloc.start()
    t = time.perf_counter()
    res = coherent_response(N3, d3, 1.0, 1.52, wl3, 0.0, "mean")
    dt = time.perf_counter() - t
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"  {dt:.2f} s, peak traced memory {peak / 2**20:.0f} MiB, result {res.R.shape}")
    if peak > 2**30:
        print("  BUDGET MISSED: <= 1 GB")
        ok = False
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
