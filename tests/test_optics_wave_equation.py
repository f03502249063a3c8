"""The optics engine against an independent solution that is not a matrix method.

Maxwell's equations for a plane wave in a layered medium (Born & Wolf, Principles of Optics,
7th ed., §1.6.1–1.6.2) reduce, with exp(i(k_x x − ωt)), k_x = k0 n0 sinθ0, ε(z) = N(z)², μ = 1, to
ordinary differential equations in depth z (z = 0 the outer surface, z increasing into the stack):

  s (TE):  E_y'' + (k0² ε − k_x²) E_y = 0;   E_y and E_y' continuous at interfaces
           (E_y' ∝ H_x, the tangential H).
  p (TM):  (H_y'/ε)' + (k0² − k_x²/ε) H_y = 0;   H_y and H_y'/ε continuous
           (H_y'/ε ∝ E_x, the tangential E).

We integrate them with scipy.integrate.solve_ivp (explicit Runge–Kutta DOP853, tight tolerances;
complex values as real pairs) from the substrate, where only the transmitted wave exp(i k_z,e z)
exists (k_z = k0 sqrt(ε − n0² sin²θ0), Im ≥ 0, exp(−iωt)), up to the outer surface; there the
solution splits into incident a·exp(i k_z0 z) and reflected b·exp(−i k_z0 z) waves. Then

  r_s = b/a (E_y ratio); r_p = −b/a (the ratio of the tangential E, E_x ∝ H_y'/ε, which is our
  convention: tilted admittances η_s = N cosθ, η_p = N/cosθ, r_p = r_s at normal incidence);
  T = Re(flux into the substrate)/(incident flux), flux_s ∝ Re(i E E'*), flux_p ∝ Re(−i (H'/ε) H*);
  A = k0 ∫ Im(ε)|E|² dz / (n0 cosθ0 |E_inc|²) (Poynting's theorem, absorbed power density
  ½ ω ε0 Im(ε)|E|²; Born & Wolf §1.1.4 and §14.1), integrated alongside as an extra ODE state,
  with |E|² = |E_x|² + |E_z|², E_z = −k_x H_y/(k0 ε) for p.

This A is computed from the fields, not as 1 − R − T, so R + T + A = 1 is a real check here.

Section and equation numbers of the textbooks cited (Born & Wolf, Principles of Optics, 7th ed.;
Macleod, Thin-Film Optical Filters, 4th ed.) are given from memory; every formula used is
written out beside its check, so it can be verified independently of the numbering.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import filmstack
from filmstack import Constant, Layer, Stack
from filmstack.optics import coherent_response

RTOL, ATOL = 1e-12, 1e-14


def _rhs(pol, k0, kx, eps):
    a = k0 * k0 * eps - kx * kx               # s: E'' = −a E
    b = k0 * k0 - kx * kx / eps               # p: V' = −b U, U' = ε V
    im = eps.imag

    def f(z, y):
        U = y[0] + 1j * y[1]
        V = y[2] + 1j * y[3]
        if pol == "s":
            dU, dV = V, -a * U
            e2 = abs(U) ** 2
        else:
            dU, dV = eps * V, -b * U
            e2 = (abs(V) ** 2 + abs(kx * U / eps) ** 2) / (k0 * k0)   # |E_x|² + |E_z|²
        return [dU.real, dU.imag, dV.real, dV.imag, im * e2]

    return f


def wave_solution(n0, layers, n_sub, wl, theta_deg, pol, z_eval=None):
    """Integrate the wave equation; layers = [(N, d_nm), …] in deposition order.

    Returns dict r, R, T, A and, if z_eval (depths from the outer surface, inside the stack) is
    given, the normalised |E|² there (relative to the incident wave's |E|²).
    """
    k0 = 2 * np.pi / wl
    kx = k0 * n0 * np.sin(np.deg2rad(theta_deg))
    kz = lambda N: (lambda q: q if q.imag > 0 or (q.imag == 0 and q.real >= 0) else -q)(  # noqa: E731
        k0 * np.sqrt(complex(N) ** 2 - (n0 * np.sin(np.deg2rad(theta_deg))) ** 2))
    eps_sub = complex(n_sub) ** 2
    kze = kz(n_sub)
    # at the substrate interface: the transmitted wave with unit amplitude (E_y for s, H_y for p)
    V0 = 1j * kze if pol == "s" else 1j * kze / eps_sub
    y = np.array([1.0, 0.0, V0.real, V0.imag, 0.0])
    tops = np.concatenate([[0.0], np.cumsum([d for _, d in layers[::-1]])])   # from the surface
    D = tops[-1]
    fields = {}
    # walk from the substrate (depth D) up to the surface, layer by layer
    for idx, (N, d) in enumerate(layers):
        z_bot = D - sum(dd for _, dd in layers[:idx])
        z_top = z_bot - d
        if d == 0:
            continue
        eps = complex(N) ** 2
        te = None
        if z_eval is not None:
            sel = (z_eval < z_bot) & (z_eval >= z_top)      # as field_profile: top in, bottom out
            te = np.sort(z_eval[sel])[::-1]
        sol = solve_ivp(_rhs(pol, k0, kx, eps), (z_bot, z_top), y, method="DOP853",
                        rtol=RTOL, atol=ATOL, t_eval=te if te is not None and te.size else None)
        assert sol.success
        if te is not None and te.size:
            U = sol.y[0] + 1j * sol.y[1]
            V = sol.y[2] + 1j * sol.y[3]
            if pol == "s":
                e2 = np.abs(U) ** 2
            else:
                e2 = (np.abs(V) ** 2 + np.abs(kx * U / eps) ** 2) / k0 ** 2
            for z, v in zip(sol.t, e2):
                fields[z] = v
        y = sol.y[:, -1]
    U = y[0] + 1j * y[1]
    V = y[2] + 1j * y[3]
    kz0 = k0 * n0 * np.cos(np.deg2rad(theta_deg))
    g = kz0 if pol == "s" else kz0 / n0 ** 2
    a = (U + V / (1j * g)) / 2
    b = (U - V / (1j * g)) / 2
    r = b / a if pol == "s" else -b / a
    flux_sub = kze.real if pol == "s" else (kze / eps_sub).real
    T = flux_sub / (g * abs(a) ** 2)
    # |E_inc|²: s |a|²; p |a|²/n0² (H = n E for a plane wave, in free-space admittance units)
    e_inc2 = abs(a) ** 2 if pol == "s" else abs(a) ** 2 / n0 ** 2
    A = k0 * (-y[4]) / (n0 * np.cos(np.deg2rad(theta_deg)) * e_inc2)
    out = {"r": r, "R": abs(r) ** 2, "T": T, "A": A}
    if z_eval is not None:
        out["e2"] = np.array([fields[z] for z in z_eval]) / e_inc2
    return out


def engine(n0, layers, n_sub, wl, theta_deg, pol):
    N = np.array([[complex(n)] for n, _ in layers]).reshape(len(layers), 1)
    d = np.array([float(t) for _, t in layers])
    return coherent_response(N, d, n0, n_sub, [wl], theta_deg, pol)


def random_case(rng, absorbing=True):
    L = int(rng.integers(2, 6))
    layers = []
    for _ in range(L):
        n = rng.uniform(1.3, 2.6)
        k = rng.uniform(0.0, 0.4) if (absorbing and rng.random() < 0.5) else 0.0
        layers.append((complex(n, k), float(rng.uniform(5.0, 220.0))))
    n0 = float(rng.choice([1.0, 1.52]))
    n_sub = complex(rng.uniform(1.4, 2.0), rng.choice([0.0, 0.02]))
    return n0, layers, n_sub, float(rng.uniform(420.0, 900.0)), float(rng.uniform(0.0, 80.0))


class TestWaveEquation:
    @pytest.mark.parametrize("seed", [1, 2, 3, 4, 5, 6])
    @pytest.mark.parametrize("pol", ["s", "p"])
    def test_random_stacks(self, seed, pol):
        # Independent solution of Maxwell's equations (module docstring; Born & Wolf §1.6.1).
        rng = np.random.default_rng(seed)
        n0, layers, n_sub, wl, th = random_case(rng, absorbing=seed <= 4)
        ref = wave_solution(n0, layers, n_sub, wl, th, pol)
        res = engine(n0, layers, n_sub, wl, th, pol)
        assert abs(res.r[0, 0] - ref["r"]) < 1e-8
        assert abs(res.R[0, 0] - ref["R"]) < 1e-8
        assert abs(res.T[0, 0] - ref["T"]) < 1e-8
        assert abs(res.A[0, 0] - ref["A"]) < 1e-8
        # energy from the fields alone (A by Poynting's theorem, not by difference)
        assert ref["R"] + ref["T"] + ref["A"] == pytest.approx(1.0, abs=1e-8)

    @pytest.mark.parametrize("pol", ["s", "p"])
    def test_evanescent_layer_and_exit(self, pol):
        # Light from glass (1.52) at 60°: n0 sinθ0 = 1.316, so the 1.2 layer is evanescent; a
        # second case with a 1.3 exit medium (TIR at the exit, T = 0; A only in the absorbing film).
        layers = [(1.9 + 0.05j, 80.0), (1.2 + 0j, 60.0), (2.2 + 0j, 110.0)]
        for n_sub in (1.7 + 0j, 1.3 + 0j):
            ref = wave_solution(1.52, layers, n_sub, 600.0, 60.0, pol)
            res = engine(1.52, layers, n_sub, 600.0, 60.0, pol)
            assert abs(res.r[0, 0] - ref["r"]) < 1e-8
            assert abs(res.T[0, 0] - ref["T"]) < 1e-8
            assert abs(res.A[0, 0] - ref["A"]) < 1e-8
        assert res.T[0, 0] == 0.0 and ref["A"] > 1e-3

    @pytest.mark.parametrize("pol", ["s", "p"])
    def test_field_profile_matches_the_wave_equation(self, pol):
        # |E|² inside the stack from filmstack.field_profile against the integrated fields
        # (normalised to the incident wave's |E|², Born & Wolf §1.6.1).
        layers = [(2.3 + 0.01j, 70.0), (1.46 + 0j, 95.0), (2.3 + 0j, 60.0), (1.38 + 0j, 100.0)]
        n_sub, wl, th = 1.52, 532.0, 35.0
        stack = Stack(incident=Constant(name="air", n=1.0),
                      substrate=Constant(name="sub", n=n_sub),
                      layers=[Layer(Constant(name=f"m{i}", n=N.real, k=N.imag), d)
                              for i, (N, d) in enumerate(layers)])
        prof = filmstack.field_profile(stack, wl, th, pol, step_nm=5.0)
        inside = (prof.layer_index >= 0) & (prof.layer_index < len(layers))
        z = prof.depth_nm[inside]
        ref = wave_solution(1.0, layers, n_sub, wl, th, pol, z_eval=z)
        np.testing.assert_allclose(prof.e2[inside], ref["e2"], rtol=1e-8, atol=1e-9)
