"""The optics engine against textbook closed forms.

Sign convention checked throughout (DESIGN.md §3, :mod:`filmstack.optics.coherent`): time
dependence exp(−iωt), N = n + ik with k >= 0; ``r`` is the ratio of the reflected to the incident
*tangential* electric field, with tilted admittances η_s = N cosθ and η_p = N / cosθ, so that

    r_s = (η0 − η1)/(η0 + η1) = (n0 cosθ0 − n1 cosθ1)/(n0 cosθ0 + n1 cosθ1)
    r_p = (n0 cosθ1 − n1 cosθ0)/(n0 cosθ1 + n1 cosθ0)

and r_p = r_s at normal incidence. Born & Wolf's r_∥ (Principles of Optics, 7th ed., §1.5.2,
eq. (21)) is defined with the opposite orientation of the p reference vector: r_p(ours) = −r_∥(B&W).
Their t_⊥, t_∥ (full-field amplitude ratios) equal our t_s, t_p.

Stacks are built with inline constant media so the tests don't depend on the materials library.

Section and equation numbers of the textbooks cited (Born & Wolf, Principles of Optics, 7th ed.;
Macleod, Thin-Film Optical Filters, 4th ed.) are given from memory; every formula used is
written out beside its check, so it can be verified independently of the numbering.
"""

from __future__ import annotations

import numpy as np
import pytest

import filmstack
from filmstack import Constant, Layer, Stack
from filmstack.optics import coherent_response

AIR = Constant(name="air", n=1.0)


def medium(n, k=0.0, name=None):
    return Constant(name=name or f"n={n}+{k}i", n=float(n), k=float(k))


def bare(n0, n1, k1=0.0):
    return Stack(incident=medium(n0), substrate=medium(n1, k1))


def fresnel(n0, n1, theta0_deg):
    """Closed-form Fresnel amplitudes in our convention (complex cosθ1 beyond the critical angle).

    Born & Wolf, Principles of Optics, 7th ed., §1.5.2, eqs. (20)–(21), with r_p = −r_∥ (see the
    module docstring); cosθ1 = sqrt(1 − (n0 sinθ0/n1)²) on the branch Im(n1 cosθ1) >= 0
    (B&W §1.5.4 for the evanescent wave).
    """
    th = np.deg2rad(theta0_deg)
    c0 = np.cos(th)
    q1 = np.sqrt((n1 * n1 - (n0 * np.sin(th)) ** 2) + 0j)
    q1 = np.where(q1.imag < 0, -q1, q1)
    c1 = q1 / n1
    q0 = n0 * c0
    rs = (q0 - q1) / (q0 + q1)
    rp = (n0 * c1 - n1 * c0) / (n0 * c1 + n1 * c0)
    ts = 2 * q0 / (q0 + q1)
    tp = 2 * n0 * c0 / (n0 * c1 + n1 * c0)
    # B&W §1.5.3, eq. (35): T = (n1 cosθ1)/(n0 cosθ0) |t|² (real part: zero for an evanescent wave)
    Ts = (q1.real / q0) * np.abs(ts) ** 2
    Tp = (q1.real / q0) * np.abs(tp) ** 2
    return rs, rp, ts, tp, Ts, Tp


ANGLES = np.array([0.0, 5.0, 15.0, 30.0, 41.0, 42.0, 45.0, 56.3, 60.0, 75.0, 85.0, 89.5])


class TestBareInterface:
    @pytest.mark.parametrize("n0,n1", [(1.0, 1.5), (1.0, 3.5), (1.5, 1.0), (1.52, 1.33)])
    def test_fresnel_amplitudes_and_powers(self, n0, n1):
        # Born & Wolf, Principles of Optics, 7th ed., §1.5.2 (Fresnel formulae), eqs. (20)-(21),
        # and §1.5.3 eq. (35) for T; beyond the critical angle §1.5.4.
        stack = bare(n0, n1)
        rs, rp, ts, tp, Ts, Tp = fresnel(n0, n1, ANGLES)
        wl = [633.0]
        S = filmstack.spectrum(stack, wl, ANGLES, "s")
        P = filmstack.spectrum(stack, wl, ANGLES, "p")
        np.testing.assert_allclose(S.r[:, 0], rs, rtol=0, atol=1e-13)
        np.testing.assert_allclose(P.r[:, 0], rp, rtol=0, atol=1e-13)
        np.testing.assert_allclose(S.t[:, 0], ts, rtol=0, atol=1e-13)
        np.testing.assert_allclose(P.t[:, 0], tp, rtol=0, atol=1e-12)
        np.testing.assert_allclose(S.R[:, 0], np.abs(rs) ** 2, rtol=0, atol=1e-14)
        np.testing.assert_allclose(P.R[:, 0], np.abs(rp) ** 2, rtol=0, atol=1e-14)
        np.testing.assert_allclose(S.T[:, 0], Ts, rtol=0, atol=1e-13)
        np.testing.assert_allclose(P.T[:, 0], Tp, rtol=0, atol=1e-13)
        M = filmstack.spectrum(stack, wl, ANGLES, "mean")
        np.testing.assert_allclose(M.R[:, 0], (np.abs(rs) ** 2 + np.abs(rp) ** 2) / 2, atol=1e-14)
        assert M.r is None and M.t is None

    def test_metal_substrate(self):
        # Born & Wolf §14.2 (reflection at a metal surface): the Fresnel formulae with complex
        # N = n + ik; at normal incidence R = ((n0 − n)² + k²)/((n0 + n)² + k²).
        n, k = 0.2, 3.4
        stack = bare(1.0, n, k)
        S = filmstack.spectrum(stack, [600.0], ANGLES, "s")
        P = filmstack.spectrum(stack, [600.0], ANGLES, "p")
        rs, rp, *_ = fresnel(1.0, complex(n, k), ANGLES)
        np.testing.assert_allclose(S.r[:, 0], rs, atol=1e-13)
        np.testing.assert_allclose(P.r[:, 0], rp, atol=1e-13)
        R0 = ((1 - n) ** 2 + k ** 2) / ((1 + n) ** 2 + k ** 2)
        assert S.R[0, 0] == pytest.approx(R0, abs=1e-14)
        assert S.T[0, 0] == pytest.approx(1 - R0, abs=1e-13)   # all of it enters the metal

    @pytest.mark.parametrize("n0,n1", [(1.0, 1.5), (1.0, 2.35), (1.5, 1.0)])
    def test_brewster_angle(self, n0, n1):
        # Brewster's law, tanθ_B = n1/n0 (Born & Wolf §1.5.3): R_p = 0 there, R_s is not.
        theta_b = np.rad2deg(np.arctan(n1 / n0))
        P = filmstack.spectrum(bare(n0, n1), [550.0], [theta_b, theta_b - 2], "p")
        S = filmstack.spectrum(bare(n0, n1), [550.0], [theta_b], "s")
        assert P.R[0, 0] < 1e-28
        assert P.R[1, 0] > 1e-5
        assert S.R[0, 0] > 1e-3
        assert P.T[0, 0] == pytest.approx(1.0, abs=1e-14)

    def test_total_internal_reflection(self):
        # Glass (1.5) to air: beyond the critical angle arcsin(1/1.5) = 41.81° R = 1 for s and p
        # (Born & Wolf §1.5.4); the phase of r_s follows from r_s = (q0 − iκ)/(q0 + iκ),
        # κ = sqrt(n0² sin²θ0 − n1²): arg r_s = −2 arctan(κ/q0); and r_p = (n0 c1 − n1 c0)/(…)
        # with c1 = iκ/n1 is −(n1² c0 − i n0 κ)/(n1² c0 + i n0 κ), so
        # arg r_p = π − 2 arctan(n0² κ/(n1² q0)) in our convention (B&W §1.5.4, eq. (60), gives
        # tan(δ/2) of these phase changes, with the p sign of their convention).
        n0, n1 = 1.5, 1.0
        crit = np.rad2deg(np.arcsin(n1 / n0))
        angles = np.array([crit + 0.01, 45.0, 50.0, 60.0, 75.0, 89.0])
        for pol in ("s", "p"):
            sp = filmstack.spectrum(bare(n0, n1), [400.0, 700.0], angles, pol)
            np.testing.assert_allclose(sp.R, 1.0, rtol=0, atol=1e-14)
            np.testing.assert_allclose(sp.T, 0.0, rtol=0, atol=1e-14)
            th = np.deg2rad(angles)
            kappa = np.sqrt((n0 * np.sin(th)) ** 2 - n1 ** 2)
            q0 = n0 * np.cos(th)
            expect = -2 * np.arctan(kappa / q0) if pol == "s" else \
                np.pi - 2 * np.arctan(n0 ** 2 * kappa / (n1 ** 2 * q0))
            np.testing.assert_allclose(np.angle(sp.r[:, 0]), expect, atol=1e-12)
        # Just below the critical angle the light still gets out.
        sp = filmstack.spectrum(bare(n0, n1), [550.0], [crit - 1.0], "s")
        assert sp.T[0, 0] > 0.1

    def test_phase_change_on_reflection(self):
        # The π phase change at a low-to-high index interface (Born & Wolf §1.5.2; Hecht, Optics,
        # §4.6): air → glass at normal incidence r = (1 − 1.5)/(1 + 1.5) = −0.2, real negative;
        # glass → air r = +0.2. With our tilted admittances r_p = r_s at normal incidence.
        for pol in ("s", "p"):
            a2g = filmstack.spectrum(bare(1.0, 1.5), [550.0], [0.0], pol).r[0, 0]
            g2a = filmstack.spectrum(bare(1.5, 1.0), [550.0], [0.0], pol).r[0, 0]
            assert a2g.real == pytest.approx(-0.2, abs=1e-15) and a2g.imag == 0.0
            assert g2a.real == pytest.approx(0.2, abs=1e-15) and g2a.imag == 0.0
            assert abs(np.angle(a2g)) == pytest.approx(np.pi, abs=1e-15)


def quarter(n, lam0=550.0):
    return lam0 / (4.0 * n)


class TestSingleLayer:
    @pytest.mark.parametrize("n1,ns", [(1.38, 1.52), (2.35, 1.52), (1.23, 1.52), (1.9, 4.0)])
    def test_quarter_wave_layer(self, n1, ns):
        # Macleod, Thin-Film Optical Filters, 4th ed., ch. 2–3 (quarter-wave layer: admittance
        # Y = n1²/ns, R = ((n0 − Y)/(n0 + Y))²) — i.e. R = ((n0·ns − n1²)/(n0·ns + n1²))²;
        # chapter numbers from memory.
        n0 = 1.0
        st = Stack(incident=AIR, substrate=medium(ns), layers=[Layer(medium(n1), quarter(n1))])
        R = filmstack.spectrum(st, [550.0], 0.0, "s").R[0, 0]
        assert R == pytest.approx(((n0 * ns - n1 ** 2) / (n0 * ns + n1 ** 2)) ** 2, abs=1e-14)

    def test_quarter_wave_ar_zero(self):
        # Macleod (as above): a quarter wave of n1 = sqrt(n0 ns) reflects nothing at λ0.
        ns = 1.69
        n1 = np.sqrt(ns)
        st = Stack(incident=AIR, substrate=medium(ns), layers=[Layer(medium(n1), quarter(n1))])
        sp = filmstack.spectrum(st, [550.0, 450.0], 0.0, "mean")
        assert sp.R[0, 0] < 1e-30
        assert sp.R[0, 1] > 1e-4

    @pytest.mark.parametrize("pol", ["s", "p"])
    @pytest.mark.parametrize("angle", [0.0, 40.0])
    def test_half_wave_absentee(self, pol, angle):
        # Macleod, Thin-Film Optical Filters, 4th ed., ch. 2 (absentee layers); Born & Wolf
        # §1.6.4: a layer whose phase thickness is π (a half wave at the angle of use) leaves the
        # amplitude reflection coefficient unchanged.
        n1, ns, lam0 = 2.1, 1.52, 550.0
        th1 = np.arcsin(np.sin(np.deg2rad(angle)) / n1)
        d = lam0 / (2 * n1 * np.cos(th1))
        st = Stack(incident=AIR, substrate=medium(ns), layers=[Layer(medium(n1), d)])
        coated = filmstack.spectrum(st, [lam0, 480.0], angle, pol)
        plain = filmstack.spectrum(bare(1.0, ns), [lam0, 480.0], angle, pol)
        assert coated.r[0, 0] == pytest.approx(plain.r[0, 0], abs=1e-14)
        assert coated.R[0, 0] == pytest.approx(plain.R[0, 0], abs=1e-15)
        assert abs(coated.R[0, 1] - plain.R[0, 1]) > 1e-3      # elsewhere it is not absent

    def test_thin_absorbing_film_on_glass(self):
        # Born & Wolf §1.6.4 eq. (58) (Airy sum for one film):
        # r = (r01 + r12 e^{2iβ})/(1 + r01 r12 e^{2iβ}), β = 2π N1 d cosθ1/λ with exp(−iωt).
        n0, N1, ns, d, wl = 1.0, 2.0 + 0.3j, 1.52, 37.0, 500.0
        st = Stack(incident=AIR, substrate=medium(ns),
                   layers=[Layer(medium(N1.real, N1.imag), d)])
        r01 = (n0 - N1) / (n0 + N1)
        r12 = (N1 - ns) / (N1 + ns)
        e = np.exp(2j * 2 * np.pi * N1 * d / wl)
        r = (r01 + r12 * e) / (1 + r01 * r12 * e)
        t01, t12 = 2 * n0 / (n0 + N1), 2 * N1 / (N1 + ns)
        t = t01 * t12 * np.exp(1j * 2 * np.pi * N1 * d / wl) / (1 + r01 * r12 * e)
        sp = filmstack.spectrum(st, [wl], 0.0, "s")
        assert sp.r[0, 0] == pytest.approx(r, abs=1e-14)
        assert sp.t[0, 0] == pytest.approx(t, abs=1e-14)
        assert sp.T[0, 0] == pytest.approx(ns / n0 * abs(t) ** 2, abs=1e-14)
        assert sp.A[0, 0] > 0.05


def hl_stack(pattern, nH=2.35, nL=1.46, ns=1.52, lam0=550.0):
    """Quarter-wave stack from a string of H/L in deposition order (first touches the substrate)."""
    H, L = medium(nH, name="H"), medium(nL, name="L")
    layers = [Layer(H, quarter(nH, lam0)) if c == "H" else Layer(L, quarter(nL, lam0))
              for c in pattern]
    return Stack(incident=AIR, substrate=medium(ns), layers=layers)


class TestQuarterWaveStack:
    @pytest.mark.parametrize("N", [1, 3, 7, 12])
    def test_peak_reflectance(self, N):
        # Macleod, Thin-Film Optical Filters, 4th ed., ch. 6 (quarter-wave stacks; chapter from
        # memory). Derivation in our deposition order: each quarter wave maps the admittance Y
        # below it to n_j²/Y. From the substrate: H gives nH²/ns, then L gives nL² ns/nH², …;
        # (HL)^N H (H on the substrate and H facing the air, symmetric) ends at
        # Y = (nH/nL)^(2N) nH²/ns, so R = ((n0 − Y)/(n0 + Y))² — with n0 = 1 the brief's formula.
        nH, nL, ns = 2.35, 1.46, 1.52
        Y = (nH / nL) ** (2 * N) * nH ** 2 / ns
        sp = filmstack.spectrum(hl_stack("HL" * N + "H"), [550.0], 0.0, "s")
        assert sp.R[0, 0] == pytest.approx(((1 - Y) / (1 + Y)) ** 2, rel=0, abs=1e-13)

    def test_order_matters_for_asymmetric_stacks(self):
        # Same derivation for asymmetric stacks, to pin the deposition order down:
        # deposition (HL)^N (H on the substrate, L facing the air) ends at Y = (nL/nH)^(2N) ns;
        # deposition (LH)^N (L on the substrate, H facing the air) at Y = (nH/nL)^(2N) ns.
        nH, nL, ns, N = 2.35, 1.46, 1.52, 3
        for pattern, Y in (("HL" * N, (nL / nH) ** (2 * N) * ns),
                           ("LH" * N, (nH / nL) ** (2 * N) * ns)):
            R = filmstack.spectrum(hl_stack(pattern), [550.0], 0.0, "s").R[0, 0]
            assert R == pytest.approx(((1 - Y) / (1 + Y)) ** 2, abs=1e-13)

    def test_stop_band_width(self):
        # Macleod, Thin-Film Optical Filters, 4th ed., ch. 6 (width of the high-reflectance zone
        # of a quarter-wave stack): Δg = (4/π) arcsin((nH − nL)/(nH + nL)), g = λ0/λ.
        # Measured numerically: inside the stop band T falls exponentially with the number of
        # periods (Bloch attenuation γ per period, γ = ln(nH/nL) at the centre, from Y above);
        # outside it does not. γ is taken from T of 40 and 80 periods; the band is where γ > 0.01
        # (near an edge γ² grows linearly with the distance, so the threshold biases the edges
        # by ~1e-4 in g).
        nH, nL = 2.35, 1.46
        lam0 = 550.0
        g = np.linspace(0.8, 1.2, 4001)
        wl = lam0 / g
        lnT = {}
        for N in (40, 80):
            n = np.where(np.arange(2 * N + 1) % 2 == 0, nH, nL)
            d = lam0 / (4 * n)
            res = coherent_response(np.repeat(n[:, None], wl.size, 1).astype(complex), d, 1.0,
                                    1.52, wl, 0.0, "s")
            lnT[N] = np.log(res.T[0])
        gamma = (lnT[40] - lnT[80]) / (2 * 40)
        i0 = np.argmin(np.abs(g - 1.0))
        assert gamma[i0] == pytest.approx(np.log(nH / nL), rel=1e-6)
        band = gamma > 0.01
        lo = hi = i0
        while band[lo - 1]:
            lo -= 1
        while band[hi + 1]:
            hi += 1
        width = g[hi] - g[lo]
        expect = 4 / np.pi * np.arcsin((nH - nL) / (nH + nL))
        assert width == pytest.approx(expect, abs=1.5e-3)
        assert (g[hi] + g[lo]) / 2 == pytest.approx(1.0, abs=2e-4)   # centred on λ0

    def test_third_order_band_and_missing_second(self):
        # Macleod ch. 6 (as above): a quarter-wave stack has high-reflectance zones at odd
        # multiples of g (g = 3) and none at even ones (g = 2, where every layer is a half wave,
        # i.e. absentee, and R equals the bare substrate's).
        st = hl_stack("HL" * 8 + "H")
        sp = filmstack.spectrum(st, [550.0 / 3, 550.0 / 2], 0.0, "s")
        assert sp.R[0, 0] > 0.99
        assert sp.R[0, 1] == pytest.approx(((1 - 1.52) / (1 + 1.52)) ** 2, abs=1e-13)


class TestThickSubstrate:
    def test_uncoated_window(self):
        # Two bare faces summed incoherently: T = (1 − ρ)²/(1 − ρ²) = (1 − ρ)/(1 + ρ)
        # = 2n/(n² + 1) with ρ = ((n − 1)/(n + 1))² (Macleod, Thin-Film Optical Filters, 4th ed.,
        # ch. 2, incoherent reflection in a thick substrate; Heavens, Optical Properties of Thin
        # Solid Films, ch. 4). n = 1.5: T = 3/3.25 = 0.923077.
        n = 1.5
        st = Stack(incident=AIR, substrate=medium(n), substrate_mm=1.0)
        for pol in ("s", "p", "mean"):
            sp = filmstack.spectrum(st, [400.0, 550.0, 1000.0], 0.0, pol)
            np.testing.assert_allclose(sp.T, 2 * n / (n * n + 1), rtol=0, atol=1e-14)
            np.testing.assert_allclose(sp.R, (n - 1) ** 2 / (n * n + 1), rtol=0, atol=1e-14)
            np.testing.assert_allclose(sp.A, 0.0, atol=1e-14)
            assert sp.r is None
        assert 2 * n / (n * n + 1) == pytest.approx(0.923, abs=5e-4)

    def test_absorbing_slab(self):
        # Same incoherent sum with the internal transmittance τ = exp(−4π k d/λ) at normal
        # incidence (Macleod, as above; Beer–Lambert with α = 4πk/λ, Born & Wolf §14.1):
        # R = ρ + (1 − ρ)² τ² ρ/(1 − ρ² τ²), T = (1 − ρ)² τ/(1 − ρ² τ²).
        # ρ uses the real index; with k = 2e-6 the difference to the complex ρ is ~1e-12.
        n, k, mm = 1.5, 2e-6, 1.0
        st = Stack(incident=AIR, substrate=medium(n, k), substrate_mm=mm)
        wl = np.array([400.0, 550.0, 800.0])
        sp = filmstack.spectrum(st, wl, 0.0, "mean")
        rho = ((n - 1) / (n + 1)) ** 2
        tau = np.exp(-4 * np.pi * k * mm * 1e6 / wl)
        assert np.all(tau < 0.97) and np.all(tau > 0.9)
        R = rho + (1 - rho) ** 2 * tau ** 2 * rho / (1 - rho ** 2 * tau ** 2)
        T = (1 - rho) ** 2 * tau / (1 - rho ** 2 * tau ** 2)
        np.testing.assert_allclose(sp.R[0], R, rtol=0, atol=1e-11)
        np.testing.assert_allclose(sp.T[0], T, rtol=0, atol=1e-11)
        np.testing.assert_allclose(sp.A[0], 1 - R - T, rtol=0, atol=1e-11)

    def test_oblique_window_uses_the_oblique_path(self):
        # At oblique incidence each face's reflectance is Fresnel's (B&W §1.5.2) and the path in
        # the substrate is d / cosθ1 (τ = exp(−4π k d/(λ cosθ1)), k small); per polarisation the
        # same incoherent sum as above.
        n, k, mm, ang, wl = 1.5, 2e-6, 2.0, 50.0, 500.0
        st = Stack(incident=AIR, substrate=medium(n, k), substrate_mm=mm)
        c1 = np.sqrt(1 - (np.sin(np.deg2rad(ang)) / n) ** 2)
        tau = np.exp(-4 * np.pi * k * mm * 1e6 / (wl * c1))
        rs, rp, *_ = fresnel(1.0, n, np.array([ang]))
        for pol, r in (("s", rs), ("p", rp)):
            rho = abs(r[0]) ** 2
            T = (1 - rho) ** 2 * tau / (1 - rho ** 2 * tau ** 2)
            sp = filmstack.spectrum(st, [wl], ang, pol)
            assert sp.T[0, 0] == pytest.approx(T, abs=1e-10)

    def test_coated_back_side(self):
        # A quarter-wave AR (n1 = sqrt(ns)) on the back face removes that face's reflection
        # (Macleod ch. 3–4, single-layer AR), so the part transmits (1 − ρ) τ: one Fresnel loss.
        ns = 1.69
        n1 = np.sqrt(ns)
        st = Stack(incident=AIR, substrate=medium(ns), substrate_mm=1.0,
                   back_layers=[Layer(medium(n1), quarter(n1))])
        sp = filmstack.spectrum(st, [550.0], 0.0, "s")
        rho = ((ns - 1) / (ns + 1)) ** 2
        assert sp.T[0, 0] == pytest.approx(1 - rho, abs=1e-14)
        assert sp.R[0, 0] == pytest.approx(rho, abs=1e-14)


class TestStability:
    @pytest.mark.parametrize("pol", ["s", "p"])
    def test_thick_metal_layer(self, pol):
        # 10 µm of a metal (N = 0.05 + 3.5i): the film is opaque (single-pass amplitude
        # exp(−2π·3.5·10⁴/λ) underflows), so R is that of the semi-infinite metal — Fresnel with a
        # complex index (Born & Wolf §14.2) — T = 0 and A = 1 − R (Poynting's theorem). A naive
        # matrix product overflows here (cosh of ~400).
        N = 0.05 + 3.5j
        st = Stack(incident=AIR, substrate=medium(1.52),
                   layers=[Layer(medium(N.real, N.imag), 10_000.0)])
        ang = np.array([0.0, 30.0, 70.0])
        sp = filmstack.spectrum(st, [400.0, 633.0, 1064.0], ang, pol)
        rs, rp, *_ = fresnel(1.0, N, ang)
        R_metal = np.abs(rs if pol == "s" else rp) ** 2
        assert np.all(np.isfinite(sp.R)) and np.all(np.isfinite(sp.r))
        np.testing.assert_allclose(sp.R, np.repeat(R_metal[:, None], 3, 1), rtol=0, atol=1e-13)
        # T of the order of the single-pass power attenuation exp(−2 Im(k_z) d) ≤ e^(−413),
        # which underflows at the shorter wavelengths
        assert np.all(sp.T >= 0) and np.all(sp.T < 1e-170)
        np.testing.assert_allclose(sp.A, 1 - sp.R, rtol=0, atol=1e-15)

    @pytest.mark.parametrize("pol", ["s", "p"])
    @pytest.mark.parametrize("gap_nm", [30.0, 150.0, 600.0, 3000.0, 40_000.0])
    def test_frustrated_total_internal_reflection(self, pol, gap_nm):
        # Frustrated TIR: an air gap of thickness d between two glass prisms (n1 = 1.5), light
        # at θ1 = 50° beyond the critical angle. In the gap the wave is evanescent:
        # k_z = iκ, κ = k0 sqrt(n1² sin²θ1 − n2²). Derivation (as for tunnelling through a
        # rectangular barrier, e.g. Griffiths, Introduction to Quantum Mechanics, §2.6, from
        # memory; for the optical case S. Zhu et al., Am. J. Phys. 54, 601 (1986), from memory):
        # with outer admittance η1 (real) and gap admittance η2 = iγ (γ real), matching the
        # tangential fields at both faces gives |η1 B + C|² = 4η1² + (γ + η1²/γ)² sinh²(κd), so
        #     T = 1 / (1 + ((η1² + γ²)/(2 η1 γ))² sinh²(κd)),
        # s: η1 = n1 cosθ1, γ = κ/k0; p: η1 = n1/cosθ1, γ = −n2²/(κ/k0) (|γ| enters only).
        # Nothing absorbs, so R = 1 − T.
        n1, n2, th, wl = 1.5, 1.0, 50.0, 633.0
        st = Stack(incident=medium(n1), substrate=medium(n1),
                   layers=[Layer(medium(n2), gap_nm)])
        sp = filmstack.spectrum(st, [wl], th, pol)
        t = np.deg2rad(th)
        kap = np.sqrt((n1 * np.sin(t)) ** 2 - n2 ** 2)      # κ/k0
        if pol == "s":
            eta1, gam = n1 * np.cos(t), kap
        else:
            eta1, gam = n1 / np.cos(t), n2 ** 2 / kap
        sh2 = np.sinh(2 * np.pi / wl * kap * gap_nm) ** 2
        T = 1.0 / (1.0 + ((eta1 ** 2 + gam ** 2) / (2 * eta1 * gam)) ** 2 * sh2)
        assert np.isfinite(sp.R[0, 0]) and np.isfinite(sp.T[0, 0])
        assert sp.T[0, 0] == pytest.approx(T, rel=1e-10, abs=1e-300)
        assert sp.R[0, 0] + sp.T[0, 0] == pytest.approx(1.0, abs=1e-12)
        if gap_nm == 30.0:
            assert sp.T[0, 0] > 0.5                  # a thin gap lets most light through

    @pytest.mark.parametrize("n0,angle,n_exit", [(1.0, 0.0, 1.52), (1.0, 60.0, 1.52),
                                                 (2.0, 70.0, 2.5), (2.0, 70.0, 1.0)])
    def test_500_layers(self, n0, angle, n_exit):
        # Energy conservation R + T = 1 for a lossless stack (Born & Wolf §1.5.3; Macleod ch. 2)
        # with 500 layers of random thickness; from n0 = 2 at 70° every 1.46 layer is evanescent
        # (n0 sinθ0 = 1.88), the hard case for the matrix product.
        rng = np.random.default_rng(500)
        H, L = medium(2.35, name="H"), medium(1.46, name="L")
        layers = [Layer(H if j % 2 == 0 else L, float(x))
                  for j, x in enumerate(rng.uniform(20.0, 300.0, 500))]
        st = Stack(incident=medium(n0), substrate=medium(n_exit), layers=layers)
        wl = np.linspace(400.0, 1000.0, 61)
        for pol in ("s", "p"):
            sp = filmstack.spectrum(st, wl, angle, pol)
            assert np.all(np.isfinite(sp.r)) and np.all(np.isfinite(sp.t))
            np.testing.assert_allclose(sp.R + sp.T, 1.0, rtol=0, atol=1e-12)
            assert np.all(sp.R >= -1e-15) and np.all(sp.T >= 0)
