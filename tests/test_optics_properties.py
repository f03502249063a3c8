"""Properties of the optics engine that hold for every stack (hypothesis), its analytic
derivatives against finite differences, and the identities of ``stack_vectors``.

Conventions: exp(−iωt), N = n + ik (k >= 0), layers in deposition order (index 0 touches the exit
medium), r the ratio of tangential electric fields with η_s = N cosθ, η_p = N/cosθ.

Section and equation numbers of the textbooks cited (Born & Wolf, Principles of Optics, 7th ed.;
Macleod, Thin-Film Optical Filters, 4th ed.) are given from memory; every formula used is
written out beside its check, so it can be verified independently of the numbering.
"""

from __future__ import annotations

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from filmstack.optics import coherent_derivatives, coherent_response, stack_vectors

WL = np.array([420.0, 555.0, 730.0])

# Modest, reproducible example counts for CI; FILMSTACK_HYPOTHESIS_EXAMPLES=1000 for a deeper run.
SETTINGS = settings(max_examples=int(os.environ.get("FILMSTACK_HYPOTHESIS_EXAMPLES", "30")),
                    deadline=None, derandomize="FILMSTACK_HYPOTHESIS_EXAMPLES" not in os.environ,
                    suppress_health_check=[HealthCheck.too_slow])


@st.composite
def stacks(draw, absorbing=True, max_layers=8):
    """(N (L, W), d (L,), n0, n_exit, angle) with real incident and exit media."""
    L = draw(st.integers(1, max_layers))
    n = np.array(draw(st.lists(st.floats(1.2, 3.0), min_size=L, max_size=L)))
    if absorbing:
        k = np.array(draw(st.lists(st.one_of(st.just(0.0), st.floats(0.0, 0.6)),
                                   min_size=L, max_size=L)))
    else:
        k = np.zeros(L)
    d = np.array(draw(st.lists(st.floats(0.0, 400.0), min_size=L, max_size=L)))
    # a little dispersion, so every wavelength differs
    N = (n[:, None] + 0.02 * (550.0 / WL - 1.0)[None, :]) + 1j * k[:, None]
    n0 = draw(st.floats(1.0, 1.8))
    ne = draw(st.floats(1.0, 2.5))
    angle = draw(st.floats(0.0, 85.0))
    return N, d, n0, ne, angle


def reverse_angle(n0, ne, angle):
    """The angle in the exit medium for the same Snell invariant (None if it cannot exist there)."""
    s = n0 * np.sin(np.deg2rad(angle)) / ne
    return None if s >= 1 else float(np.rad2deg(np.arcsin(s)))


class TestConservation:
    @SETTINGS
    @given(stacks(absorbing=False))
    def test_lossless_r_plus_t(self, case):
        # Energy conservation for a lossless stack, R + T = 1 (Born & Wolf, Principles of Optics,
        # 7th ed., §1.5.3 for one interface; Macleod, Thin-Film Optical Filters, 4th ed., ch. 2),
        # also with evanescent layers and total internal reflection at the exit.
        N, d, n0, ne, angle = case
        for pol in ("s", "p"):
            res = coherent_response(N, d, n0, ne, WL, angle, pol)
            np.testing.assert_allclose(res.R + res.T, 1.0, rtol=0, atol=1e-12)
            assert np.all(res.R >= -1e-15) and np.all(res.T >= 0)
            np.testing.assert_allclose(np.abs(res.r) ** 2, res.R, rtol=0, atol=1e-15)

    @SETTINGS
    @given(stacks(absorbing=True), st.floats(0.0, 0.3))
    def test_absorbing_layers_absorb(self, case, k_exit):
        # With absorbing layers A = 1 − R − T >= 0 (Poynting's theorem: the absorbed power
        # density ½ωε0 Im(ε)|E|² is >= 0; Born & Wolf §1.1.4); an absorbing exit medium takes
        # T by its Poynting vector (DESIGN.md §3), which is >= 0 too.
        N, d, n0, ne, angle = case
        for pol in ("s", "p", "mean"):
            res = coherent_response(N, d, n0, complex(ne, k_exit), WL, angle, pol)
            assert np.all(res.A >= -1e-12)
            assert np.all(res.R >= -1e-15) and np.all(res.R <= 1 + 1e-12)
            assert np.all(res.T >= 0) and np.all(res.T <= 1 + 1e-12)
            assert np.all(np.isfinite(res.R)) and np.all(np.isfinite(res.T))

    @SETTINGS
    @given(stacks(absorbing=True))
    def test_mean_is_average_of_s_and_p(self, case):
        # Unpolarised light: the mean of the s and p powers (DESIGN.md §3; Born & Wolf §1.5.3).
        N, d, n0, ne, angle = case
        s = coherent_response(N, d, n0, ne, WL, angle, "s")
        p = coherent_response(N, d, n0, ne, WL, angle, "p")
        m = coherent_response(N, d, n0, ne, WL, angle, "mean")
        np.testing.assert_allclose(m.R, (s.R + p.R) / 2, rtol=0, atol=1e-15)
        np.testing.assert_allclose(m.T, (s.T + p.T) / 2, rtol=0, atol=1e-15)


class TestReciprocity:
    @SETTINGS
    @given(stacks(absorbing=True))
    def test_t_same_from_both_sides(self, case):
        # Reciprocity: between non-absorbing media T is the same whichever side the light comes
        # from, even with absorbing layers (Born & Wolf §1.6.2 / Stokes relations; Macleod,
        # Thin-Film Optical Filters, 4th ed., ch. 2 — sections from memory).
        N, d, n0, ne, angle = case
        back = reverse_angle(n0, ne, angle)
        if back is None:
            return
        for pol in ("s", "p"):
            f = coherent_response(N, d, n0, ne, WL, angle, pol)
            b = coherent_response(N[::-1], d[::-1], ne, n0, WL, back, pol)
            np.testing.assert_allclose(f.T, b.T, rtol=1e-10, atol=1e-14)
            if not np.any(N.imag > 0):
                np.testing.assert_allclose(f.R, b.R, rtol=0, atol=1e-12)

    def test_r_differs_when_layers_absorb(self):
        # Macleod (as above): with absorption R from the two sides differs (A differs), T does
        # not. A thin metal-like film between glass and a dielectric: common practice, no
        # published source for these particular numbers.
        N = np.array([[2.2 + 0j], [0.5 + 2.5j], [1.46 + 0j]])
        d = np.array([60.0, 15.0, 90.0])
        f = coherent_response(N, d, 1.0, 1.52, [550.0], 0.0, "s")
        b = coherent_response(N[::-1], d[::-1], 1.52, 1.0, [550.0], 0.0, "s")
        assert abs(f.T[0, 0] - b.T[0, 0]) < 1e-13
        assert abs(f.R[0, 0] - b.R[0, 0]) > 0.02
        # the same stack without absorption: R the same from both sides
        f = coherent_response(N.real + 0j, d, 1.0, 1.52, [550.0], 0.0, "s")
        b = coherent_response(N[::-1].real + 0j, d[::-1], 1.52, 1.0, [550.0], 0.0, "s")
        assert abs(f.R[0, 0] - b.R[0, 0]) < 1e-14


class TestInvariance:
    @SETTINGS
    @given(stacks(absorbing=True), st.integers(0, 8), st.floats(1.1, 3.0), st.floats(0.0, 1.0))
    def test_zero_thickness_layer_changes_nothing(self, case, where, n_new, k_new):
        # A layer of zero thickness has the unit characteristic matrix (Macleod ch. 2): inserting
        # one anywhere changes nothing.
        N, d, n0, ne, angle = case
        j = where % (len(d) + 1)
        N2 = np.insert(N, j, complex(n_new, k_new), axis=0)
        d2 = np.insert(d, j, 0.0)
        for pol in ("s", "p"):
            a = coherent_response(N, d, n0, ne, WL, angle, pol)
            b = coherent_response(N2, d2, n0, ne, WL, angle, pol)
            np.testing.assert_allclose(b.r, a.r, rtol=0, atol=1e-13)
            np.testing.assert_allclose(b.t, a.t, rtol=1e-12, atol=1e-15)
            np.testing.assert_allclose(b.T, a.T, rtol=1e-12, atol=1e-15)

    @SETTINGS
    @given(stacks(absorbing=True), st.integers(0, 7), st.floats(0.0, 1.0))
    def test_splitting_a_layer_changes_nothing(self, case, which, frac):
        # M(δ1 + δ2) = M(δ1) M(δ2) for one material (Macleod ch. 2; Born & Wolf §1.6.2):
        # a layer split into two of the same material is the same layer.
        N, d, n0, ne, angle = case
        j = which % len(d)
        N2 = np.insert(N, j, N[j], axis=0)
        d2 = np.insert(d, j, d[j] * frac)
        d2[j + 1] = d[j] * (1 - frac)
        for pol in ("s", "p"):
            a = coherent_response(N, d, n0, ne, WL, angle, pol)
            b = coherent_response(N2, d2, n0, ne, WL, angle, pol)
            np.testing.assert_allclose(b.r, a.r, rtol=0, atol=1e-12)
            np.testing.assert_allclose(b.T, a.T, rtol=1e-10, atol=1e-14)


# ------------------------------------------------------------------------------------------------
# Derivatives against central finite differences (no published source needed: the definition of
# the derivative; common practice)

H = 1e-4   # nm; truncation ~H²·|k_z|³ ≈ 1e-13, rounding ~1e-16/H ≈ 1e-12


def fd(N, d, n0, ne, wl, angle, pol, j):
    dp, dm = d.copy(), d.copy()
    dp[j] += H
    dm[j] -= H
    a = coherent_response(N, dp, n0, ne, wl, angle, pol)
    b = coherent_response(N, dm, n0, ne, wl, angle, pol)
    out = {"R": (a.R - b.R) / (2 * H), "T": (a.T - b.T) / (2 * H)}
    if pol != "mean":
        out["r"] = (a.r - b.r) / (2 * H)
        out["t"] = (a.t - b.t) / (2 * H)
        out["phase"] = np.angle(a.r * np.conj(b.r)) / (2 * H)
    return out


CASES = {
    # lossless, propagating: the engine's real-arithmetic path
    "lossless": (np.array([2.35, 1.46, 2.35, 1.46, 2.1]), np.array([61.0, 94.0, 40.0, 120.0, 75.0]),
                 1.0, 1.52, 40.0),
    # absorbing layers and an absorbing exit medium: the complex path
    "absorbing": (np.array([2.3 + 0.05j, 1.46, 0.4 + 2.2j, 1.9 + 0.3j]),
                  np.array([80.0, 50.0, 12.0, 70.0]), 1.0, 1.6 + 0.02j, 30.0),
    # light from glass at 65°: the 1.38 and 1.2 layers are evanescent (complex path, lossless)
    "evanescent": (np.array([2.0, 1.38, 1.7, 1.2]), np.array([90.0, 35.0, 60.0, 25.0]),
                   1.52, 1.6, 65.0),
}


class TestDerivatives:
    @pytest.mark.parametrize("case", list(CASES))
    @pytest.mark.parametrize("pol", ["s", "p", "mean"])
    def test_against_central_differences(self, case, pol):
        n, d, n0, ne, angle = CASES[case]
        wl = np.array([450.0, 600.0, 820.0])
        N = np.repeat(np.asarray(n, dtype=complex)[:, None], wl.size, 1)
        der = coherent_derivatives(N, d, n0, ne, wl, angle, pol)
        plain = coherent_response(N, d, n0, ne, wl, angle, pol)
        np.testing.assert_allclose(der.R, plain.R, rtol=0, atol=1e-15)
        np.testing.assert_allclose(der.T, plain.T, rtol=0, atol=1e-15)
        for j in range(len(d)):
            f = fd(N, d, n0, ne, wl, angle, pol, j)
            np.testing.assert_allclose(der.dR[j], f["R"], rtol=0, atol=2e-10)
            np.testing.assert_allclose(der.dT[j], f["T"], rtol=0, atol=2e-10)
            np.testing.assert_allclose(der.dA[j], -f["R"] - f["T"], rtol=0, atol=4e-10)
            if pol != "mean":
                np.testing.assert_allclose(der.dr[j], f["r"], rtol=0, atol=2e-10)
                np.testing.assert_allclose(der.dt[j], f["t"], rtol=0, atol=2e-10)
                np.testing.assert_allclose(der.dphase_r[j], f["phase"], rtol=0, atol=2e-9)
        assert np.any(np.abs(der.dR) > 1e-4)          # not trivially zero
        if pol != "mean":
            np.testing.assert_allclose(der.phase_r, np.angle(plain.r), atol=1e-15)
        else:
            assert der.dr is None and der.r is None

    def test_deep_mirror_with_renormalisation(self):
        # 481 layers of a high-contrast quarter-wave mirror (4.0/1.38): at g = 1 the tangential
        # fields grow by ~(4/1.38)^240 ≈ 1e111, past the engine's 1e100 renormalisation threshold
        # of the real path (checked by hand: it triggers); T ~ 1e-223. Relative derivatives of T
        # (d ln T) and dr are checked against central differences.
        L = 481
        n = np.where(np.arange(L) % 2 == 0, 4.0, 1.38)
        d = 550.0 / (4 * n) * (1 + 0.01 * np.sin(np.arange(L)))
        wl = np.array([550.0, 700.0])
        N = np.repeat(n[:, None].astype(complex), wl.size, 1)
        der = coherent_derivatives(N, d, 1.0, 1.52, wl, 0.0, "s")
        assert np.all(np.isfinite(der.dR)) and np.all(np.isfinite(der.dT))
        assert der.T[0, 0] < 1e-100
        for j in (0, 1, 240, L - 2, L - 1):
            f = fd(N, d, 1.0, 1.52, wl, 0.0, "s", j)
            np.testing.assert_allclose(der.dT[j] / der.T, f["T"] / der.T, rtol=1e-6, atol=1e-9)
            np.testing.assert_allclose(der.dr[j], f["r"], rtol=0, atol=1e-9)


# ------------------------------------------------------------------------------------------------
# stack_vectors: the identities in its docstring


def kmat(eta):
    """K_n = [[0, −i/η], [−iη, 0]] stacked over points: (2, 2, ...)."""
    z = np.zeros_like(eta)
    return np.array([[z, -1j / eta], [-1j * eta, z]])


def mat(delta, eta):
    """The characteristic matrix M(δ) = [[cos δ, −i sin δ/η], [−i η sin δ, cos δ]] (exp(−iωt))."""
    c, s = np.cos(delta), np.sin(delta)
    return np.array([[c, -1j * s / eta], [-1j * eta * s, c]])


def apply(M, v):
    return np.einsum("ij...,j...->i...", M, v)


def coapply(w, M):
    return np.einsum("i...,ij...->j...", w, M)


SV_CASES = [("s", 0.0, False), ("p", 50.0, False), ("s", 35.0, True), ("p", 20.0, True)]


def sv_case(absorbing):
    n = np.array([2.35, 1.46, 2.35, 1.46, 2.0], dtype=complex)
    if absorbing:
        n[2] += 0.15j
        n[4] = 0.3 + 2.0j
    d = np.array([70.0, 100.0, 55.0, 130.0, 20.0])
    wl = np.array([480.0, 640.0])
    return np.repeat(n[:, None], wl.size, 1), d, wl


class TestStackVectors:
    @pytest.mark.parametrize("pol,angle,absorbing", SV_CASES)
    def test_identities(self, pol, angle, absorbing):
        # Docstring of stack_vectors: w_num[j]·v[j] = r and w_den[j]·v[j] = 1 at every interface;
        # at the top v = [1 + r, η0 (1 − r)] (incident tangential E = 1 plus the reflected wave,
        # Macleod ch. 2); at the bottom H/E = η_exit (only the transmitted wave).
        N, d, wl = sv_case(absorbing)
        sv = stack_vectors(N, d, 1.0, 1.52, wl, angle, pol)
        res = coherent_response(N, d, 1.0, 1.52, wl, angle, pol)
        np.testing.assert_allclose(sv.r, res.r, atol=1e-14)
        num = np.einsum("jiaw,jiaw->jaw", sv.w_num, sv.v)
        den = np.einsum("jiaw,jiaw->jaw", sv.w_den, sv.v)
        np.testing.assert_allclose(num, np.broadcast_to(res.r, num.shape), atol=1e-13)
        np.testing.assert_allclose(den, 1.0, atol=1e-13)
        top = sv.v[-1]
        np.testing.assert_allclose(top[0], 1 + res.r, atol=1e-13)
        np.testing.assert_allclose(top[1], sv.eta_in * (1 - res.r), atol=1e-13)
        bot = sv.v[0]
        np.testing.assert_allclose(bot[1], sv.eta_exit * bot[0], atol=1e-13)
        # layer by layer: v[j+1] = M_j v[j]
        for j in range(len(d)):
            M = mat(sv.kz[j] * d[j], sv.eta[j])
            np.testing.assert_allclose(apply(M, sv.v[j]), sv.v[j + 1], atol=1e-12)

    @pytest.mark.parametrize("pol,angle,absorbing", SV_CASES)
    def test_needle_formula(self, pol, angle, absorbing):
        # Docstring of stack_vectors (the needle variation of r; common practice in needle
        # optimisation, e.g. Tikhonravov et al., Appl. Opt. 35, 5493 (1996), from memory):
        # inserting a layer ε thin changes r by ε k_n (w_num K_n v − r w_den K_n v).
        # Compared with the effect of actually inserting ε = 0.01 nm and 0.005 nm
        # (Richardson extrapolation removes the O(ε) term of the one-sided difference).
        N, d, wl = sv_case(absorbing)
        n0, ne = 1.0, 1.52
        sv = stack_vectors(N, d, n0, ne, wl, angle, pol)
        Nn = 1.38 + 0.0j if not absorbing else 1.8 + 0.4j
        s0 = n0 * np.sin(np.deg2rad(angle))
        qn = np.sqrt(Nn * Nn - s0 * s0)
        kn = 2 * np.pi * qn / wl
        eta_n = qn if pol == "s" else Nn * Nn / qn
        Kn = kmat(np.broadcast_to(eta_n, (1, wl.size)).astype(complex))
        r = sv.r

        def predicted(v, wn, wd):
            return kn * (np.einsum("i...,i...->...", wn, apply(Kn, v))
                         - r * np.einsum("i...,i...->...", wd, apply(Kn, v)))

        def inserted(j, z, eps):
            """r with a needle of thickness eps at height z inside layer j (z = 0: its bottom)."""
            N2 = np.insert(N, j, N[j], axis=0)
            d2 = np.insert(d, j, z)
            d2[j + 1] = d[j] - z
            N3 = np.insert(N2, j + 1, Nn, axis=0)
            d3 = np.insert(d2, j + 1, eps)
            return coherent_response(N3, d3, n0, ne, wl, angle, pol).r

        def measured(j, z):
            e = 0.01
            d1 = (inserted(j, z, e) - r) / e
            d2 = (inserted(j, z, e / 2) - r) / (e / 2)
            return 2 * d2 - d1

        for j in range(len(d)):
            # at the interface below layer j (z = 0) and inside it (z = 0.37 d_j)
            for z in (0.0, 0.37 * d[j]):
                Mb = mat(sv.kz[j] * z, sv.eta[j])
                Ma = mat(sv.kz[j] * (d[j] - z), sv.eta[j])
                v = apply(Mb, sv.v[j])
                wn = coapply(sv.w_num[j + 1], Ma)
                wd = coapply(sv.w_den[j + 1], Ma)
                np.testing.assert_allclose(predicted(v, wn, wd), measured(j, z), rtol=1e-5,
                                           atol=1e-9)
        # the top surface (a needle in contact with the incident medium)
        v, wn, wd = sv.v[-1], sv.w_num[-1], sv.w_den[-1]
        top = (np.concatenate([N, np.full((1, wl.size), Nn)]), np.append(d, 0.01))
        ref = (coherent_response(*top, n0, ne, wl, angle, pol).r - r) / 0.01
        np.testing.assert_allclose(predicted(v, wn, wd), ref, rtol=2e-3, atol=1e-6)
