"""Stack-level response functions: spectrum, spectrum_derivatives, phase_response, field_profile.

Conventions: exp(−iωt), N = n + ik (k >= 0), layers in deposition order (layers[0] touches the
substrate), r the ratio of tangential electric fields (η_s = N cosθ, η_p = N/cosθ), t the ratio of
full electric-field amplitudes; group delay GD = dφ/dω (fs), GDD = d²φ/dω² (fs²).
Stacks use inline constant media (plus one small dispersive model defined here), so these tests
do not depend on the materials library.

Section and equation numbers of the textbooks cited (Born & Wolf, Principles of Optics, 7th ed.;
Macleod, Thin-Film Optical Filters, 4th ed.) are given from memory; every formula used is
written out beside its check, so it can be verified independently of the numbering.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest

import filmstack
from filmstack import Constant, Layer, Material, Stack
from filmstack.optics import coherent_response
from filmstack.response import SPEED_OF_LIGHT_NM_PER_FS as C_NM_FS

AIR = Constant(name="air", n=1.0)
GLASS = Constant(name="glass", n=1.52)
H = Constant(name="H", n=2.35)
L_ = Constant(name="L", n=1.46)
ABS = Constant(name="absorber", n=2.0, k=0.25)
METAL = Constant(name="metal", n=0.3, k=2.8)


@dataclass(frozen=True)
class TwoTerm(Material):
    """n = a + b/λ² (λ in nm), lossless: a small dispersive medium for the phase tests."""

    a: float = 1.5
    b: float = 0.0

    def _nk(self, wl):
        return self.a + self.b / (wl * wl) + 0j


def medium(n, k=0.0, name=None):
    return Constant(name=name or f"n{n}k{k}", n=float(n), k=float(k))


def front_layers(absorbing):
    mid = ABS if absorbing else H
    return [Layer(H, 55.0), Layer(L_, 90.0), Layer(mid, 35.0), Layer(L_, 120.0)]


WL = np.array([430.0, 520.0, 610.0, 760.0])
ANG = np.array([0.0, 40.0])


# ------------------------------------------------------------------------------------------------
# spectrum


class TestSpectrum:
    def test_semi_infinite_is_the_engine(self):
        st = Stack(incident=AIR, substrate=GLASS, layers=front_layers(True))
        for pol in ("s", "p", "mean"):
            sp = filmstack.spectrum(st, WL, ANG, pol)
            ref = coherent_response(st.layer_indices(WL), st.thicknesses_nm, 1.0, 1.52, WL, ANG,
                                    pol)
            np.testing.assert_array_equal(sp.R, ref.R)
            np.testing.assert_array_equal(sp.T, ref.T)
            np.testing.assert_array_equal(sp.A, ref.A)

    @pytest.mark.parametrize("absorbing", [False, True])
    def test_thick_substrate_composes_its_faces(self, absorbing):
        # Incoherent sum over a thick substrate (Macleod, Thin-Film Optical Filters, 4th ed.,
        # ch. 2; Heavens, Optical Properties of Thin Solid Films, ch. 4):
        #   R = Rf + Tf² τ² Rb/(1 − Rf' Rb τ²),  T = Tf Tb τ/(1 − Rf' Rb τ²),
        # per polarisation, with Rf, Tf the front coating seen from the air, Rf' from inside the
        # substrate, Rb, Tb the back coating from inside, τ = exp(−4πk d cosθ-path/λ). The faces
        # are computed here as separate semi-infinite stacks — the inside views by building the
        # stack the other way round (incident = substrate, layers reversed in deposition order).
        # Our model (response._thick_parts): the faces use the substrate's real index, except Rf,
        # the light that never enters the substrate, which sees its complex index.
        ns, ks, mm = 1.52, 3e-6, 1.5
        sub = medium(ns, ks, "sub")
        sub_real = medium(ns, 0.0, "sub-real")
        front = front_layers(absorbing)
        back = [Layer(L_, 100.0), Layer(H, 40.0)]
        part = Stack(incident=AIR, substrate=sub, layers=front, substrate_mm=mm, exit=AIR,
                     back_layers=back)
        ang = np.array([0.0, 35.0])
        for pol in ("s", "p"):
            f_out = filmstack.spectrum(Stack(incident=AIR, substrate=sub_real, layers=front),
                                       WL, ang, pol)
            rf = filmstack.spectrum(Stack(incident=AIR, substrate=sub, layers=front),
                                    WL, ang, pol).R
            # from inside: the light meets the front layers substrate-side first
            s_in = np.rad2deg(np.arcsin(np.sin(np.deg2rad(ang)) / ns))
            rev = list(reversed(front))   # deposition order seen from inside: air side first
            f_in = filmstack.spectrum(Stack(incident=sub_real, substrate=AIR, layers=rev),
                                      WL, s_in, pol)
            b_in = filmstack.spectrum(Stack(incident=sub_real, substrate=AIR,
                                            layers=list(reversed(back))), WL, s_in, pol)
            cos1 = np.cos(np.deg2rad(s_in))[:, None]
            tau = np.exp(-4 * np.pi * ks * mm * 1e6 / (WL[None, :] * cos1))
            den = 1 - f_in.R * b_in.R * tau ** 2
            R = rf + f_out.T ** 2 * tau ** 2 * b_in.R / den
            T = f_out.T * b_in.T * tau / den
            sp = filmstack.spectrum(part, WL, ang, pol)
            np.testing.assert_allclose(sp.R, R, rtol=0, atol=1e-9)
            np.testing.assert_allclose(sp.T, T, rtol=0, atol=1e-9)
            if absorbing:
                assert np.max(np.abs(f_in.R - f_out.R)) > 1e-3   # the orientation matters

    @pytest.mark.parametrize("coated", [False, True])
    def test_opaque_thick_substrate_reflects_like_a_semi_infinite_one(self, coated):
        # A 1 mm metal plate is opaque (τ = exp(−4πk d/λ) underflows to 0), so no light comes
        # back from its inside: the part reflects exactly what the front face on a semi-infinite
        # substrate reflects, and at normal incidence a bare face gives Fresnel's
        # R = |(1 − N)/(1 + N)|² with the complex N (Born & Wolf, Principles of Optics, §14.2).
        layers = front_layers(False) if coated else []
        thick = Stack(incident=AIR, substrate=METAL, layers=layers, substrate_mm=1.0)
        semi = Stack(incident=AIR, substrate=METAL, layers=layers)
        for pol in ("s", "p", "mean"):
            a = filmstack.spectrum(thick, WL, ANG, pol)
            b = filmstack.spectrum(semi, WL, ANG, pol)
            np.testing.assert_allclose(a.R, b.R, rtol=0, atol=1e-12)
            np.testing.assert_allclose(a.T, 0.0, rtol=0, atol=1e-15)
            np.testing.assert_allclose(a.A, 1.0 - b.R, rtol=0, atol=1e-12)
        if not coated:
            N = complex(METAL.n, METAL.k)
            r0 = filmstack.spectrum(thick, WL, 0.0, "s").R[0]
            np.testing.assert_allclose(r0, abs((1 - N) / (1 + N)) ** 2, rtol=1e-12)

    def test_thick_part_reciprocity(self):
        # T of a whole part is the same from either side (reciprocity, Born & Wolf §1.6.2 /
        # Stokes; Macleod ch. 2); with absorbing coatings R is not.
        a = front_layers(True)
        b = [Layer(L_, 100.0), Layer(METAL, 8.0), Layer(H, 40.0)]
        fwd = Stack(incident=AIR, substrate=medium(1.6, 1e-6), layers=a, substrate_mm=1.0,
                    back_layers=b)
        rev = Stack(incident=AIR, substrate=medium(1.6, 1e-6), layers=b, substrate_mm=1.0,
                    back_layers=a)
        for pol in ("s", "p", "mean"):
            f = filmstack.spectrum(fwd, WL, ANG, pol)
            r = filmstack.spectrum(rev, WL, ANG, pol)
            np.testing.assert_allclose(f.T, r.T, rtol=1e-10, atol=1e-14)
            assert np.max(np.abs(f.R - r.R)) > 1e-2
            assert np.all(f.A >= 0)

    def test_non_air_exit_and_incident(self):
        # A cemented part: light from glass (1.52) onto a coated glass cube face, exit medium
        # cement (1.56): R + T = 1 for lossless layers (Born & Wolf §1.5.3).
        st = Stack(incident=GLASS, substrate=medium(1.6), layers=front_layers(False),
                   substrate_mm=5.0, exit=medium(1.56))
        sp = filmstack.spectrum(st, WL, [0.0, 30.0, 70.0], "mean")
        np.testing.assert_allclose(sp.R + sp.T, 1.0, rtol=0, atol=1e-12)


# ------------------------------------------------------------------------------------------------
# spectrum_derivatives against central finite differences (definition of the derivative)

HSTEP = 1e-4


def fd_spectrum(stack, wl, ang, pol):
    d0 = stack.thicknesses_nm
    L = d0.size
    dp = d0 + HSTEP * np.eye(L)
    dm = d0 - HSTEP * np.eye(L)
    a = filmstack.spectrum(stack, wl, ang, pol, thicknesses_nm=dp)
    b = filmstack.spectrum(stack, wl, ang, pol, thicknesses_nm=dm)
    out = {"R": (a.R - b.R) / (2 * HSTEP), "T": (a.T - b.T) / (2 * HSTEP)}
    if a.r is not None:
        out["r"] = (a.r - b.r) / (2 * HSTEP)
        out["phase"] = np.angle(a.r * np.conj(b.r)) / (2 * HSTEP)
    return out


class TestSpectrumDerivatives:
    @pytest.mark.parametrize("absorbing", [False, True])
    @pytest.mark.parametrize("thick", [False, True])
    @pytest.mark.parametrize("pol", ["s", "p", "mean"])
    def test_against_finite_differences(self, absorbing, thick, pol):
        kw = dict(substrate_mm=2.0, back_layers=[Layer(L_, 95.0)]) if thick else {}
        sub = medium(1.52, 2e-6 if thick else 0.0, "sub")
        st = Stack(incident=AIR, substrate=sub, layers=front_layers(absorbing), **kw)
        der = filmstack.spectrum_derivatives(st, WL, ANG, pol)
        sp = filmstack.spectrum(st, WL, ANG, pol)
        np.testing.assert_allclose(der.R, sp.R, rtol=0, atol=1e-15)
        np.testing.assert_allclose(der.T, sp.T, rtol=0, atol=1e-15)
        f = fd_spectrum(st, WL, ANG, pol)
        np.testing.assert_allclose(der.dR, f["R"], rtol=0, atol=3e-10)
        np.testing.assert_allclose(der.dT, f["T"], rtol=0, atol=3e-10)
        np.testing.assert_allclose(der.dA, -f["R"] - f["T"], rtol=0, atol=6e-10)
        assert np.max(np.abs(der.dR)) > 1e-4
        if pol != "mean" and not thick:
            np.testing.assert_allclose(der.dr, f["r"], rtol=0, atol=3e-10)
            np.testing.assert_allclose(der.dphase_r, f["phase"], rtol=0, atol=3e-9)
            np.testing.assert_allclose(der.phase_r, np.angle(sp.r), atol=1e-15)
        else:
            assert der.dr is None and der.dphase_r is None


# ------------------------------------------------------------------------------------------------
# phase, GD, GDD


class TestPhaseResponse:
    @pytest.mark.parametrize("d_nm", [800.0, 2500.0])
    def test_gires_tournois_closed_form(self, d_nm):
        # A Gires–Tournois interferometer: a lossless spacer (n1 = 2.0, thickness d) with a
        # partial front reflector and a 100 % back reflector — here the front reflector is the
        # interface with a dense incident medium (n0 = 2.4) and the back reflector is total
        # internal reflection at the air exit (light at 45°: n0 sinθ0 = 1.697 > 1). With
        # a = r01 (real) and r12 = e^{iψ} (|r12| = 1), Airy's sum (Born & Wolf §1.6.4)
        #     r = (a + e^{iy})/(1 + a e^{iy}),  y = 2 k_z1 d + ψ,  dy/dω = 2 q1 d/c,
        # so d arg r/dy = (1 − a²)/(1 + a² + 2a cos y) and
        #     GD  = (2 q1 d/c) (1 − a²)/(1 + a² + 2a cos y),
        #     GDD = (2 q1 d/c)² (1 − a²) 2a sin y/(1 + a² + 2a cos y)²
        # (F. Gires & P. Tournois, C. R. Acad. Sci. Paris 258, 6112 (1964); Weiner, Ultrafast
        # Optics (2009) — both from memory; the derivation above is ours). Non-dispersive media.
        n0, n1, n2, th = 2.4, 2.0, 1.0, 45.0
        st = Stack(incident=medium(n0), substrate=medium(n2), layers=[Layer(medium(n1), d_nm)])
        wl = np.linspace(700.0, 900.0, 41)
        pr = filmstack.phase_response(st, wl, th, "s", "reflected")
        s0 = n0 * np.sin(np.deg2rad(th))
        q0, q1 = n0 * np.cos(np.deg2rad(th)), np.sqrt(n1 ** 2 - s0 ** 2)
        kap2 = np.sqrt(s0 ** 2 - n2 ** 2)
        a = (q0 - q1) / (q0 + q1)
        psi = np.angle((q1 - 1j * kap2) / (q1 + 1j * kap2))
        omega = 2 * np.pi * C_NM_FS / wl
        y = 2 * q1 * d_nm * omega / C_NM_FS + psi
        k = 2 * q1 * d_nm / C_NM_FS
        den = 1 + a * a + 2 * a * np.cos(y)
        gd = k * (1 - a * a) / den
        gdd = k * k * (1 - a * a) * 2 * a * np.sin(y) / den ** 2
        phase = np.angle((a + np.exp(1j * y)) / (1 + a * np.exp(1j * y)))
        np.testing.assert_allclose(np.exp(1j * pr.phase_rad), np.exp(1j * phase), atol=1e-12)
        # phase_response differentiates numerically (five points, a step that keeps the phase
        # change per step <= 0.02 rad); its truncation error is about (0.02)⁴ relative
        np.testing.assert_allclose(pr.gd_fs, gd, rtol=1e-6, atol=1e-9)
        np.testing.assert_allclose(pr.gdd_fs2, gdd, rtol=0, atol=1e-5 * np.max(np.abs(gdd)))
        assert np.ptp(gd) > 1.0 and np.max(np.abs(gdd)) > 10.0      # a real dispersion curve

    def test_high_group_delay(self):
        # The same Gires–Tournois closed form with a 20 µm spacer (GD up to ≈ 226 fs, an ordinary
        # GTI mirror), and a Fabry–Perot narrowband filter (HL)^5 HH (LH)^5 at 800 nm whose
        # transmitted GD at the resonance (≈ 382 fs) is taken from a dense-grid gradient of the
        # unwrapped phase (common practice, no published source).
        n0, n1, n2, th, d_nm = 2.4, 2.0, 1.0, 45.0, 20_000.0
        st = Stack(incident=medium(n0), substrate=medium(n2), layers=[Layer(medium(n1), d_nm)])
        wl = np.linspace(780.0, 820.0, 81)
        s0 = n0 * np.sin(np.deg2rad(th))
        q0, q1 = n0 * np.cos(np.deg2rad(th)), np.sqrt(n1 ** 2 - s0 ** 2)
        a = (q0 - q1) / (q0 + q1)
        psi = np.angle((q1 - 1j * np.sqrt(s0 ** 2 - n2 ** 2)) / (q1 + 1j * np.sqrt(s0 ** 2 - n2 ** 2)))
        k = 2 * q1 * d_nm / C_NM_FS
        y = k * 2 * np.pi * C_NM_FS / wl + psi
        gd = k * (1 - a * a) / (1 + a * a + 2 * a * np.cos(y))
        gd_ok = np.allclose(filmstack.phase_response(st, wl, th, "s").gd_fs, gd, rtol=1e-5)
        lam0 = 800.0
        layers = [Layer(H, lam0 / (4 * 2.35)) if c == "H" else Layer(L_, lam0 / (4 * 1.46))
                  for c in "HL" * 5 + "HH" + "LH" * 5]
        fp = Stack(incident=AIR, substrate=GLASS, layers=layers)
        w0 = 2 * np.pi * C_NM_FS / lam0
        w = w0 + np.linspace(-2e-4, 2e-4, 401)
        t = filmstack.spectrum(fp, 2 * np.pi * C_NM_FS / w, 0.0, "s").t[0]
        gd_dense = np.gradient(np.unwrap(np.angle(t)), w)[200]
        gd_fp = filmstack.phase_response(fp, [lam0], 0.0, "s", "transmitted").gd_fs[0]
        assert gd_dense > 300.0
        assert gd_ok and gd_fp == pytest.approx(gd_dense, rel=1e-4)

    def test_bare_interface_has_no_delay(self):
        # Non-dispersive Fresnel reflection: the phase does not depend on ω (B&W §1.5.2).
        pr = filmstack.phase_response(Stack(incident=AIR, substrate=GLASS), WL, 20.0, "p")
        np.testing.assert_allclose(pr.gd_fs, 0.0, atol=1e-12)
        np.testing.assert_allclose(pr.gdd_fs2, 0.0, atol=1e-9)

    @pytest.mark.parametrize("side,pol", [("reflected", "s"), ("transmitted", "p")])
    def test_against_dense_grid_gradient(self, side, pol):
        # Independent numerical GD/GDD: the phase of r (or t) on a dense uniform ω grid,
        # unwrapped and differentiated twice with numpy.gradient (second-order central
        # differences; common practice, no published source). Dispersive materials (n = a + b/λ²)
        # so that their dispersion must be included.
        Hd = TwoTerm(name="Hd", a=2.2, b=2.5e4)
        Ld = TwoTerm(name="Ld", a=1.44, b=4.0e3)
        layers = [Layer(Hd if j % 2 == 0 else Ld, x) for j, x in
                  enumerate([62, 88, 58, 95, 66, 80, 71, 99, 55, 104, 63, 91, 69])]
        st = Stack(incident=AIR, substrate=GLASS, layers=layers)
        w = np.linspace(2 * np.pi * C_NM_FS / 900.0, 2 * np.pi * C_NM_FS / 600.0, 6001)
        wl = 2 * np.pi * C_NM_FS / w
        sp = filmstack.spectrum(st, wl, 15.0, pol)
        amp = (sp.r if side == "reflected" else sp.t)[0]
        phi = np.unwrap(np.angle(amp))
        gd = np.gradient(phi, w)
        gdd = np.gradient(gd, w)
        pick = np.arange(100, w.size - 100, 97)
        pr = filmstack.phase_response(st, wl[pick], 15.0, pol, side)
        scale_gd = np.max(np.abs(gd[pick]))
        scale_gdd = np.max(np.abs(gdd[pick]))
        np.testing.assert_allclose(pr.gd_fs, gd[pick], rtol=0, atol=2e-4 * scale_gd)
        np.testing.assert_allclose(pr.gdd_fs2, gdd[pick], rtol=0, atol=2e-3 * scale_gdd)
        np.testing.assert_allclose(np.exp(1j * pr.phase_rad), amp[pick] / np.abs(amp[pick]),
                                   atol=1e-12)
        assert scale_gd > 1.0
        # dispersion matters here: the same stack without it gives a different GD
        flat = Stack(incident=AIR, substrate=GLASS, layers=[
            Layer(Constant(name=l.material.name, n=float(l.material.nk([750.0])[0].real)),
                  l.thickness_nm) for l in layers])
        pr_flat = filmstack.phase_response(flat, wl[pick], 15.0, pol, side)
        assert np.max(np.abs(pr_flat.gd_fs - pr.gd_fs)) > 0.05


# ------------------------------------------------------------------------------------------------
# field profile


def hr_stack(N=6, lam0=550.0):
    layers = [Layer(H if j % 2 == 0 else L_, lam0 / (4 * (2.35 if j % 2 == 0 else 1.46)))
              for j in range(2 * N + 1)]
    return Stack(incident=AIR, substrate=GLASS, layers=layers)


class TestFieldProfile:
    def test_layout(self):
        st = Stack(incident=AIR, substrate=GLASS, layers=front_layers(False))
        prof = filmstack.field_profile(st, 550.0, 0.0, "s", step_nm=1.0, margin_nm=60.0)
        total = st.total_nm
        # interfaces from the outer surface down: 0, 120, 210, 245, 300 (layers 3, 2, 1, 0)
        np.testing.assert_allclose(prof.interfaces_nm, [0.0, 120.0, 155.0, 245.0, 300.0])
        assert prof.depth_nm[0] == pytest.approx(-60.0) and prof.depth_nm[-1] == pytest.approx(
            total + 60.0)
        assert np.all(np.diff(prof.depth_nm) > 0)
        assert prof.e2.shape == prof.depth_nm.shape == prof.layer_index.shape
        lay = prof.layer_index
        assert set(lay) == {-1, 0, 1, 2, 3, 4}
        assert np.all(lay[prof.depth_nm < 0] == -1) and np.all(lay[prof.depth_nm > total] == 4)
        inside = (prof.depth_nm >= 0) & (prof.depth_nm < 120.0)
        assert np.all(lay[inside] == 3)             # the outermost layer is the last deposited

    @pytest.mark.parametrize("angle", [0.0, 50.0])
    def test_s_field_continuous_across_interfaces(self, angle):
        # s: E_y is tangential, so continuous (Born & Wolf §1.1.3): the last sample above an
        # interface and the first at/below it differ only by the slope × step.
        st = Stack(incident=AIR, substrate=GLASS,
                   layers=[Layer(H, 55.0), Layer(ABS, 35.0), Layer(L_, 90.0)])
        step = 0.01
        prof = filmstack.field_profile(st, 500.0, angle, "s", step_nm=step, margin_nm=30.0)
        slope = np.max(np.abs(np.diff(prof.e2))) / step
        for z in prof.interfaces_nm:
            i = np.searchsorted(prof.depth_nm, z - 1e-9)
            assert abs(prof.e2[i] - prof.e2[i - 1]) <= 1.5 * slope * step
        # p at oblique incidence is not continuous: ε E_z is, so |E_z| jumps at each interface
        p = filmstack.field_profile(st, 500.0, 50.0, "p", step_nm=step, margin_nm=30.0)
        i = np.searchsorted(p.depth_nm, p.interfaces_nm[-1] - 1e-9)    # glass/first layer
        assert abs(p.e2[i] - p.e2[i - 1]) > 20 * slope * step

    @pytest.mark.parametrize("pol,angle", [("s", 0.0), ("s", 30.0), ("p", 30.0)])
    def test_standing_wave_in_front_of_a_reflector(self, pol, angle):
        # Incident plus reflected plane waves in front of the stack (Born & Wolf §7.4, standing
        # waves; Macleod ch. 2 on fields): with depth z < 0 and k_z = k0 n0 cosθ0,
        #   s: |E|² = |e^{ik_z z} + r e^{−ik_z z}|²
        #   p: |E|² = cos²θ0 |e^{ik_z z} + r e^{−ik_z z}|² + sin²θ0 |e^{ik_z z} − r e^{−ik_z z}|²
        # (r the tangential-E ratio). For a quarter-wave high reflector with H outermost at λ0,
        # r ≈ −1: a node at the surface, antinodes of ≈ 4 a quarter wave out.
        st = hr_stack()
        wl = 550.0
        prof = filmstack.field_profile(st, wl, angle, pol, step_nm=0.5, margin_nm=600.0)
        r = filmstack.spectrum(st, [wl], angle, pol).r[0, 0]
        z = prof.depth_nm[prof.layer_index == -1]
        kz = 2 * np.pi / wl * np.cos(np.deg2rad(angle))
        f, b = np.exp(1j * kz * z), r * np.exp(-1j * kz * z)
        if pol == "s":
            e2 = np.abs(f + b) ** 2
        else:
            c, s = np.cos(np.deg2rad(angle)), np.sin(np.deg2rad(angle))
            e2 = c * c * np.abs(f + b) ** 2 + s * s * np.abs(f - b) ** 2
        np.testing.assert_allclose(prof.e2[prof.layer_index == -1], e2, rtol=0, atol=1e-12)
        if angle == 0.0:
            assert abs(r) > 0.99 and r.real < 0
            assert prof.e2[prof.depth_nm == 0.0][0] < 1e-3
            assert np.max(e2) == pytest.approx((1 + abs(r)) ** 2, abs=1e-4)

    @pytest.mark.parametrize("pol,k_sub", [("s", 0.0), ("s", 0.01), ("p", 0.0), ("p", 0.01)])
    def test_substrate_field_is_the_transmitted_wave(self, pol, k_sub):
        # In the substrate only the transmitted wave: E = t·(full-field unit vector)·e^{ik_z z'}
        # (z' below the last interface; Born & Wolf §1.5.2 and §14.1 for the decay):
        #   s: |E|² = |t|² e^{−2 Im(k_z) z'};
        #   p: |E|² = |t|² (|cosθs|² + |sinθs|²) e^{−2 Im(k_z) z'}, cosθs = q/N, sinθs = s0/N
        #      (complex angles when the substrate absorbs; = |t|² e^{…} when it does not).
        ns = complex(1.52, k_sub)
        st = Stack(incident=AIR, substrate=medium(ns.real, ns.imag),
                   layers=front_layers(True))
        wl, angle = 600.0, 40.0
        prof = filmstack.field_profile(st, wl, angle, pol, step_nm=2.0, margin_nm=400.0)
        t = filmstack.spectrum(st, [wl], angle, pol).t[0, 0]
        zs = prof.depth_nm[prof.layer_index == len(st.layers)] - st.total_nm
        s0 = np.sin(np.deg2rad(angle))
        q = np.sqrt(ns * ns - s0 * s0)
        decay = np.exp(-2 * (2 * np.pi / wl) * q.imag * zs)
        geom = 1.0 if pol == "s" else abs(q / ns) ** 2 + abs(s0 / ns) ** 2
        np.testing.assert_allclose(prof.e2[prof.layer_index == len(st.layers)],
                                   abs(t) ** 2 * geom * decay, rtol=1e-12, atol=1e-15)

    @pytest.mark.parametrize("angle", [0.0, 45.0])
    def test_absorption_from_the_field(self, angle):
        # Poynting's theorem (Born & Wolf §1.1.4, §14.1): the absorbed fraction is
        # A = k0 ∫ Im(ε)|E|² dz / (n0 cosθ0), |E|² relative to the incident wave — it must equal
        # the engine's A = 1 − R − T, which ties the profile's normalisation to R and T.
        st = Stack(incident=AIR, substrate=GLASS,
                   layers=[Layer(H, 40.0), Layer(ABS, 30.0), Layer(L_, 80.0), Layer(ABS, 12.0)])
        wl, step = 500.0, 0.01
        prof = filmstack.field_profile(st, wl, angle, "s", step_nm=step, margin_nm=10.0)
        A_field = 0.0
        eps_im = {j: (l.material.nk([wl])[0] ** 2).imag for j, l in enumerate(st.layers)}
        for j, im in eps_im.items():
            if im == 0:
                continue
            sel = np.flatnonzero(prof.layer_index == j)
            sel = np.append(sel, sel[-1] + 1)          # the bottom: E_y is continuous (s)
            A_field += im * np.trapezoid(prof.e2[sel], prof.depth_nm[sel])
        A_field *= 2 * np.pi / wl / np.cos(np.deg2rad(angle))
        A = filmstack.spectrum(st, [wl], angle, "s").A[0, 0]
        assert A > 0.05
        assert A_field == pytest.approx(A, rel=2e-6)


# ------------------------------------------------------------------------------------------------
# bad arguments: an InputError (a ValueError) naming the argument, as the API promises


class TestArguments:
    st = Stack(incident=AIR, substrate=GLASS, layers=front_layers(True))

    @pytest.mark.parametrize("call, words", [
        (lambda st: filmstack.spectrum(st, "abc"), ["wavelengths_nm", "'abc'"]),
        (lambda st: filmstack.phase_response(st, WL, [0.0, 10.0]), ["angle_deg", "one number"]),
        (lambda st: filmstack.phase_response(st, WL, 95.0), ["angle_deg", "95"]),
        (lambda st: filmstack.field_profile(st, [500.0, 600.0]), ["wavelength_nm", "one"]),
        (lambda st: filmstack.field_profile(st, 500.0, 90.0), ["angle_deg", "90"]),
        (lambda st: filmstack.field_profile(st, -5.0), ["wavelength_nm", "-5"]),
    ])
    def test_named_in_the_message(self, call, words):
        with pytest.raises(ValueError) as info:
            call(self.st)
        assert isinstance(info.value, filmstack.InputError)
        for w in words:
            assert w in str(info.value)

    def test_field_profile_takes_a_one_element_list(self):
        a = filmstack.field_profile(self.st, [550.0], 10.0, "p")
        b = filmstack.field_profile(self.st, 550.0, 10.0, "p")
        np.testing.assert_array_equal(a.e2, b.e2)
        assert a.wavelength_nm == 550.0

    def test_derivatives_report_the_same_absorptance_as_the_spectrum(self):
        # A is 1 − R − T with round-off below 1e-14 set to 0, in both functions
        lossless = Stack(incident=AIR, substrate=GLASS, layers=front_layers(False))
        for st in (lossless, Stack(incident=AIR, substrate=GLASS, layers=front_layers(False),
                                   substrate_mm=1.0)):
            d = filmstack.spectrum_derivatives(st, WL, ANG, "mean")
            s = filmstack.spectrum(st, WL, ANG, "mean")
            np.testing.assert_array_equal(d.A, s.A)
            assert np.all(d.A == 0.0)
