"""Dispersion models of filmstack.materials: closed forms, interpolation, ranges, shapes."""

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import integrate

from filmstack.errors import ExtrapolationWarning, InputError, OutOfRangeError
from filmstack.materials import (
    HC_EV_NM, MATERIAL_MODELS, Cauchy, Combined, Constant, DrudeLorentz, Sellmeier, Tabulated,
    TaucLorentz, tauc_lorentz_epsilon)

# Malitson's fused-silica coefficients, J. Opt. Soc. Am. 55, 1205 (1965), eq. (1): B_i and λ_i (µm)
MALITSON_B = (0.6961663, 0.4079426, 0.8974794)
MALITSON_L = (0.0684043, 0.1162414, 9.896161)


def malitson() -> Sellmeier:
    return Sellmeier(name="fs", terms=tuple((b, l * l) for b, l in zip(MALITSON_B, MALITSON_L)),
                     range_nm=(210.0, 3710.0))


class TestConstant:
    def test_value_and_shape(self):
        m = Constant(name="x", n=1.5, k=0.01)
        out = m.nk(np.full((2, 3), 500.0))
        assert out.shape == (2, 3)
        assert np.all(out == 1.5 + 0.01j)

    def test_negative_k_rejected(self):
        with pytest.raises(InputError, match="k must be >= 0"):
            Constant(name="x", n=1.5, k=-0.1)


class TestSellmeier:
    def test_closed_form(self):
        # n² − 1 = Σ B_i λ²/(λ² − λ_i²): Malitson (1965) eq. (1) evaluated by hand here
        wl_um = np.array([0.4, 0.5876, 1.0, 2.0])
        n2 = 1 + sum(b * wl_um**2 / (wl_um**2 - l**2) for b, l in zip(MALITSON_B, MALITSON_L))
        assert_allclose(malitson().nk(wl_um * 1000).real, np.sqrt(n2), rtol=1e-13)

    def test_fused_silica_d_line(self):
        # Malitson (1965), Table / abstract: n_d = 1.4585 at 587.6 nm (helium d line)
        assert abs(malitson().nk(587.56).real - 1.4585) < 5e-5

    def test_any_number_of_terms(self):
        one = Sellmeier(name="a", terms=((1.0, 0.01),), range_nm=(300, 2000))
        four = Sellmeier(name="b", terms=((0.25, 0.01),) * 4, range_nm=(300, 2000))
        assert_allclose(one.nk(500.0), four.nk(500.0), rtol=1e-14)
        assert one.nk(500.0).imag == 0

    def test_pole_inside_range_rejected_by_loader(self):
        from filmstack.materials import material_from_mapping
        with pytest.raises(InputError, match="n² <= 0"):
            material_from_mapping({"name": "x", "source": "s", "model": "sellmeier",
                                   "terms": [[1.0, 0.36]], "range_nm": [300, 1000]})


class TestCauchy:
    def test_closed_form(self):
        # n = A + B/λ² + C/λ⁴ with λ in µm (Born & Wolf, Principles of Optics, §2.3.4)
        m = Cauchy(name="c", a=1.45, b=0.0036, c=1e-4, range_nm=(300, 2000))
        wl = np.array([400.0, 550.0, 1000.0])
        lam = wl / 1000
        assert_allclose(m.nk(wl).real, 1.45 + 0.0036 / lam**2 + 1e-4 / lam**4, rtol=1e-14)
        assert np.all(m.nk(wl).imag == 0)

    def test_urbach_tail(self):
        # k = k0·exp((E − E_edge)/E_U), E = hc/λ (Urbach, Phys. Rev. 92, 1324 (1953))
        m = Cauchy(name="c", a=2.0, k0=1e-3, edge_ev=3.5, urbach_ev=0.2, range_nm=(300, 2000))
        wl = np.array([354.24, 400.0, 600.0])
        e = HC_EV_NM / wl
        assert_allclose(m.nk(wl).imag, 1e-3 * np.exp((e - 3.5) / 0.2), rtol=1e-12)
        assert abs(m.nk(HC_EV_NM / 3.5).imag - 1e-3) < 1e-15  # k = k0 at the edge energy
        assert np.all(np.diff(m.nk(np.linspace(300, 2000, 50)).imag) < 0)  # decays to the red


class TestTabulated:
    def table(self):
        return Tabulated(name="t", wavelength_nm=(400, 500, 600, 700),
                         n=(2.0, 2.5, 1.8, 1.9), k=(0.0, 0.3, 0.0, 0.01))

    def test_rows_are_reproduced_and_between_is_linear(self):
        t = self.table()
        assert_allclose(t.nk([400, 500, 600, 700]), [2.0, 2.5 + 0.3j, 1.8, 1.9 + 0.01j])
        assert_allclose(t.nk(450.0), 2.25 + 0.15j)  # midpoint of 400 and 500 rows

    @given(st.lists(st.tuples(st.floats(0.5, 5.0), st.floats(0.0, 5.0)), min_size=2,
                    max_size=30), st.floats(0.0, 1.0))
    @settings(max_examples=60, deadline=None)
    def test_never_overshoots_and_k_nonnegative(self, rows, frac):
        wl = 300.0 + 10.0 * np.arange(len(rows))
        n = np.array([r[0] for r in rows])
        k = np.array([r[1] for r in rows])
        t = Tabulated(name="t", wavelength_nm=tuple(wl), n=tuple(n), k=tuple(k))
        x = np.linspace(wl[0], wl[-1], 7 * len(rows)) * (1 - 1e-12 * frac)
        x = np.clip(x, wl[0], wl[-1])
        out = t.nk(x)
        i = np.clip(np.searchsorted(wl, x, side="right") - 1, 0, len(wl) - 2)
        lo_n, hi_n = np.minimum(n[i], n[i + 1]), np.maximum(n[i], n[i + 1])
        lo_k, hi_k = np.minimum(k[i], k[i + 1]), np.maximum(k[i], k[i + 1])
        assert np.all(out.real >= lo_n - 1e-12) and np.all(out.real <= hi_n + 1e-12)
        assert np.all(out.imag >= lo_k - 1e-12) and np.all(out.imag <= hi_k + 1e-12)
        assert np.all(out.imag >= 0)

    def test_negative_k_rejected(self):
        with pytest.raises(InputError, match=r"k must be >= 0.*row 1"):
            Tabulated(name="t", wavelength_nm=(400, 500), n=(1.5, 1.5), k=(0.0, -0.01))

    def test_extrapolation_holds_end_values(self):
        t = self.table()
        with pytest.warns(ExtrapolationWarning):
            out = t.nk([300.0, 800.0], extrapolate=True)
        assert_allclose(out, [2.0, 1.9 + 0.01j])


class TestDrudeLorentz:
    def test_formula(self):
        # ε = ε∞ + Σ f ωp²/(ω0² − E² − iEΓ) — Rakić et al., Appl. Opt. 37, 5271 (1998), eq. (3)
        osc = ((0.8, 0.0, 0.05), (0.1, 2.0, 0.5))
        m = DrudeLorentz(name="m", plasma_ev=9.0, oscillators=osc, range_nm=(200, 2000))
        wl = np.array([300.0, 550.0, 1500.0])
        e = HC_EV_NM / wl
        eps = 1 - 0.8 * 81 / (e * (e + 0.05j)) + 0.1 * 81 / (4 - e**2 - 0.5j * e)
        assert_allclose(m.nk(wl), np.sqrt(eps), rtol=1e-12)
        assert np.all(m.nk(wl).imag > 0)

    def test_free_electron_metal_reflects(self):
        # Drude metal below the plasma energy: ε1 < 0 so k > n (Born & Wolf §14.5)
        m = DrudeLorentz(name="m", plasma_ev=10.0, oscillators=((1.0, 0.0, 0.01),),
                         range_nm=(200, 5000))
        nk = m.nk(1000.0)
        assert nk.imag > 5 * nk.real


class TestTaucLorentz:
    EG, A, E0, C = 1.2, 122.0, 3.45, 2.54  # a test oscillator in the range of the paper's a-Si

    def eps(self, e):
        return tauc_lorentz_epsilon(np.asarray(e, dtype=float), self.EG, self.A, self.E0, self.C)

    def test_eps2_zero_below_gap(self):
        # Jellison & Modine, Appl. Phys. Lett. 69, 371 (1996), eq. (4): ε2 = 0 for E <= Eg
        e = np.linspace(0.1, self.EG, 30)
        assert np.all(self.eps(e).imag == 0)
        m = TaucLorentz(name="tl", eg_ev=self.EG, oscillators=((self.A, self.E0, self.C),),
                        eps_inf=1.0, range_nm=(200, 5000))
        assert np.all(m.nk(HC_EV_NM / e[e > 0.25]).imag == 0)

    def test_eps2_matches_paper_formula(self):
        # eq. (4): ε2 = A E0 C (E − Eg)² / ((E² − E0²)² + C² E²) / E  for E > Eg
        e = np.array([1.5, 2.5, 3.45, 5.0])
        ref = (self.A * self.E0 * self.C * (e - self.EG) ** 2
               / ((e**2 - self.E0**2) ** 2 + self.C**2 * e**2) / e)
        assert_allclose(self.eps(e).imag, ref, rtol=1e-13)

    @pytest.mark.parametrize("e", [0.5, 1.0, 1.2, 1.5, 2.5, 3.45, 4.0, 6.0])
    def test_eps1_closed_form_is_the_kramers_kronig_integral(self, e):
        # ε1(E) − ε1(∞) = (2/π) P∫_Eg^∞ ξ ε2(ξ)/(ξ² − E²) dξ (Jellison & Modine 1996, eq. (5));
        # the principal value is computed numerically with QUADPACK's Cauchy weight.
        def eps2(x):
            return float(self.eps(x).imag)

        if e > self.EG:
            top = 50 * self.E0
            pv, _ = integrate.quad(lambda x: x * eps2(x) / (x + e), self.EG, top,
                                   weight="cauchy", wvar=e, limit=400)
            tail, _ = integrate.quad(lambda x: x * eps2(x) / (x * x - e * e), top, np.inf,
                                     limit=400)
            ref = 2 / np.pi * (pv + tail)
        else:
            val, _ = integrate.quad(lambda x: x * eps2(x) / (x * x - e * e), self.EG, np.inf,
                                    limit=400)
            ref = 2 / np.pi * val
        assert abs(float(self.eps(e).real) - ref) < 1e-8 * max(1.0, abs(ref))

    def test_c_must_be_below_twice_e0(self):
        with pytest.raises(InputError, match="C_eV < 2"):
            TaucLorentz(name="tl", eg_ev=1.0, oscillators=((10.0, 2.0, 4.5),), range_nm=(200, 900))


class TestCombined:
    def test_n_from_one_k_from_other(self):
        n_part = malitson()
        k_part = Tabulated(name="k", wavelength_nm=(400, 800), n=(1, 1), k=(0.01, 0.0))
        m = Combined(name="c", n_part=n_part, k_part=k_part)
        assert m.range_nm == (400.0, 800.0)
        assert_allclose(m.nk(600.0), n_part.nk(600.0).real + 0.005j)


class TestRanges:
    def test_out_of_range_names_material_range_and_request(self):
        with pytest.raises(OutOfRangeError) as e:
            malitson().nk([150.0, 500.0])
        msg = str(e.value)
        assert "'fs'" in msg and "210 to 3710 nm" in msg and "150 to 500 nm" in msg

    def test_extrapolate_warns_and_evaluates(self):
        with pytest.warns(ExtrapolationWarning, match="extrapolating"):
            out = malitson().nk(4000.0, extrapolate=True)
        assert 1.3 < out.real < 1.45

    def test_inside_range_no_warning(self):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            malitson().nk([210.0, 3710.0])

    def test_bad_wavelengths(self):
        with pytest.raises(InputError, match="finite and > 0"):
            Constant(name="x", n=1.5).nk([500.0, -1.0])

    def test_inverted_range_rejected(self):
        with pytest.raises(InputError, match="range_nm"):
            Cauchy(name="c", a=1.5, range_nm=(800.0, 400.0))


@pytest.mark.parametrize("shape", [(6,), (2, 3), (2, 3, 1), ()])
@pytest.mark.parametrize("model", [
    malitson(),
    Cauchy(name="c", a=1.5, b=0.004, k0=1e-4, edge_ev=4.0, urbach_ev=0.3, range_nm=(300, 900)),
    Tabulated(name="t", wavelength_nm=(300, 600, 900), n=(1.6, 1.5, 1.45), k=(0.1, 0.0, 0.0)),
    DrudeLorentz(name="d", plasma_ev=9.0, oscillators=((0.8, 0, 0.05),), range_nm=(200, 2000)),
    TaucLorentz(name="tl", eg_ev=3.0, oscillators=((100.0, 4.0, 1.0),), range_nm=(250, 2000)),
], ids=lambda m: getattr(m, "model", None))
def test_n_dimensional(model, shape):
    # common practice, no published source: elementwise evaluation keeps any input shape
    wl = np.linspace(350.0, 850.0, int(np.prod(shape)) or 1).reshape(shape)
    out = model.nk(wl)
    assert out.shape == shape and out.dtype == complex
    assert_allclose(out.ravel(), [complex(model.nk(float(w))) for w in wl.ravel()], rtol=1e-14)


def test_models_mapping_covers_every_class():
    assert set(MATERIAL_MODELS.values()) == {Constant, Cauchy, Sellmeier, Tabulated,
                                             DrudeLorentz, TaucLorentz, Combined}
    for key, cls in MATERIAL_MODELS.items():
        assert cls.model == key


def test_materials_are_hashable_frozen_values():
    a = Tabulated(name="t", wavelength_nm=(400, 500), n=(1.5, 1.6), k=(0, 0))
    b = Tabulated(name="t", wavelength_nm=(400, 500), n=(1.5, 1.6), k=(0, 0))
    assert a == b and hash(a) == hash(b) and len({a, b, malitson()}) == 2
    with pytest.raises(Exception):
        a.name = "u"
    assert math.isfinite(hash(malitson()))


class TestTableInterpolationOption:
    """`interpolation: pchip` for tables (monotone cubic, filmstack._interp)."""

    ROWS = [[400.0, 1.50, 0.0], [450.0, 1.49, 0.0], [500.0, 1.485, 0.001], [600.0, 1.48, 0.0]]

    def _load(self, extra):
        from filmstack.materials import material_from_mapping
        return material_from_mapping({"name": "t", "source": "test table (invented)",
                                      "model": "table", "table": self.ROWS, **extra})

    def test_pchip_passes_through_the_rows_and_differs_from_linear_between(self):
        lin = self._load({})
        cub = self._load({"interpolation": "pchip"})
        rows = np.array([r[0] for r in self.ROWS])
        np.testing.assert_allclose(cub.nk(rows), lin.nk(rows), atol=1e-15)
        assert abs(cub.nk(np.array([425.0]))[0] - lin.nk(np.array([425.0]))[0]) > 1e-5

    def test_pchip_k_stays_non_negative(self):
        cub = self._load({"interpolation": "pchip"})
        assert np.all(cub.nk(np.linspace(400, 600, 801)).imag >= 0)

    def test_unknown_interpolation_names_the_key(self):
        with pytest.raises(InputError, match=r"interpolation.*linear, pchip.*'cubic'"):
            self._load({"interpolation": "cubic"})

    def test_saved_and_loaded_keeps_the_interpolation(self):
        from filmstack.materials import material_from_mapping, material_to_mapping
        cub = self._load({"interpolation": "pchip"})
        again = material_from_mapping({"name": "t", "source": "test table (invented)",
                                       **material_to_mapping(cub)})
        assert again.interpolation == "pchip"
        np.testing.assert_allclose(again.nk(np.array([425.0])), cub.nk(np.array([425.0])))
