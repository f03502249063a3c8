"""Fitting measured spectra (filmstack/fit): recovery of known stacks, uncertainty coverage, the
global stage, warnings and bad inputs.

Synthetic "measurements" of a single film are made here with the closed-form Airy formula of a
film on a substrate, independently of the engine:

    r = (r01 + r12 e^{2iβ}) / (1 + r01 r12 e^{2iβ}),  β = 2π N1 d / λ,  r_ij = (N_i − N_j)/(N_i + N_j)

at normal incidence (M. Born and E. Wolf, *Principles of Optics*, 7th ed., §1.6.4, eq. 58; from
memory). Silicon's optical constants are the bundled library's, whose source is M. A. Green,
Sol. Energ. Mat. Sol. Cells 92, 1305 (2008).
"""

from __future__ import annotations

import numpy as np
import pytest

import filmstack as fs
from filmstack.errors import InputError, OutOfRangeError
from filmstack.fit import (fit_map, fit_spectrum, load_fit_model, model_from_stack,
                           uniformity)
from filmstack.fit._evaluate import Evaluator
from filmstack.io.measured import Channel, Measurement
from filmstack.materials import Constant
from filmstack.response import spectrum
from filmstack.stack import AIR, FreeParameter, Layer, Stack

WL = np.arange(400.0, 1000.1, 2.0)


def airy_R(n_film, d_nm, n_sub, wl):
    """Normal-incidence reflectance of one film on a semi-infinite substrate (Born & Wolf)."""
    n0 = 1.0
    r01 = (n0 - n_film) / (n0 + n_film)
    r12 = (n_film - n_sub) / (n_film + n_sub)
    e = np.exp(2j * (2 * np.pi * n_film * d_nm / wl))
    r = (r01 + r12 * e) / (1 + r01 * r12 * e)
    return np.abs(r) ** 2


def oxide_on_si(start=500.0, lo=20.0, hi=3000.0):
    si, ox = fs.get_material("Si"), fs.get_material("SiO2")
    return Stack(incident=AIR, substrate=si, layers=(Layer(ox, start),),
                 free=(FreeParameter("layers[0].nm", start, lo, hi),))


def measurement(y, wl=WL, sigma=None, quantity="R", angle=0.0, pol="mean", site="s"):
    return Measurement((Channel(quantity, angle, pol, wl, y, sigma),), site)


def airy_oxide_on_si(d_nm, wl=WL):
    si, ox = fs.get_material("Si"), fs.get_material("SiO2")
    return airy_R(ox.nk(wl), d_nm, si.nk(wl), wl)


class TestRecovery:
    def test_engine_model_agrees_with_the_airy_formula(self):
        # Born & Wolf §1.6.4: the model the fit uses must be the textbook single film.
        st = oxide_on_si(731.0)
        R = spectrum(st, WL, 0.0, "mean").R[0]
        np.testing.assert_allclose(R, airy_oxide_on_si(731.0), atol=1e-12)

    def test_single_film_with_noise_within_its_stated_uncertainty(self):
        rng = np.random.default_rng(3)
        y = airy_oxide_on_si(512.3) + rng.normal(0, 0.002, WL.size)
        r = fit_spectrum(model_from_stack(oxide_on_si(300.0)), measurement(y))
        p = r["layers[0].nm"]
        assert abs(p.value - 512.3) < 4 * p.stderr
        assert 0.01 < p.stderr < 1.0
        assert r.rms == pytest.approx(0.002, rel=0.15)
        assert not r.warnings

    def test_noise_free_spectrum_is_recovered_exactly(self):
        r = fit_spectrum(model_from_stack(oxide_on_si(300.0)), measurement(airy_oxide_on_si(87.6)))
        assert r["layers[0].nm"].value == pytest.approx(87.6, abs=1e-6)
        assert r.rms < 1e-9

    def test_the_fitted_stack_reproduces_the_model_values(self):
        y = airy_oxide_on_si(640.0)
        r = fit_spectrum(model_from_stack(oxide_on_si(300.0)), measurement(y))
        R = spectrum(r.stack, WL, 0.0, "mean").R[0]
        np.testing.assert_allclose(R, r.model_values, atol=1e-12)
        assert r.stack.free == ()


class TestInterferenceOrder:
    """A 1.2 µm oxide on silicon from a poor starting value (800 nm)."""

    def data(self):
        rng = np.random.default_rng(12)
        return measurement(airy_oxide_on_si(1200.0) + rng.normal(0, 0.003, WL.size))

    def test_global_stage_finds_the_right_order(self):
        r = fit_spectrum(model_from_stack(oxide_on_si(800.0, 100.0, 3000.0)), self.data())
        p = r["layers[0].nm"]
        assert abs(p.value - 1200.0) < 4 * p.stderr and p.stderr < 1.0
        assert not r.ambiguous
        # the other minima found are far worse
        assert all(rms > 10 * r.rms for _, rms in r.alternatives)

    def test_without_it_a_local_fit_lands_in_a_wrong_order(self):
        # The check above is meaningful: from 800 nm a purely local fit does not reach 1200 nm.
        r = fit_spectrum(model_from_stack(oxide_on_si(800.0, 100.0, 3000.0)), self.data(),
                         global_search=False)
        assert abs(r["layers[0].nm"].value - 1200.0) > 50.0

    def test_map_path_finds_it_too(self):
        res = fit_map(model_from_stack(oxide_on_si(800.0, 100.0, 3000.0)), [self.data()])
        assert abs(res.values[0, 0] - 1200.0) < 4 * res.stderr[0, 0]


class TestCoverage:
    """Over many noise seeds the ±1σ interval should cover the truth about 68.3 % of the time
    (Gaussian errors, linearised model: Press et al., Numerical Recipes, 3rd ed., §15.6; from
    memory). With n fits the fraction has a binomial spread √(0.683·0.317/n); the bounds are
    about ±3.5 of those spreads, wide enough not to flake, narrow enough to fail if the stated
    errors were off by a factor of 1.5 (coverage 0.49 or 0.87)."""

    @staticmethod
    def bounds(n):
        half = 3.5 * np.sqrt(0.683 * 0.317 / n)
        return 0.683 - half, 0.683 + half

    def sites(self, truth_fn, n, sigma, seed, with_sigma=False):
        rng = np.random.default_rng(seed)
        clean = truth_fn()
        out = []
        for i in range(n):
            y = clean + rng.normal(0, sigma, clean.size)
            out.append(measurement(y, sigma=np.full(WL.size, sigma) if with_sigma else None,
                                   site=str(i)))
        return out

    def test_thickness_over_400_seeds(self):
        sites = self.sites(lambda: airy_oxide_on_si(420.0), 400, 0.003, seed=1)
        res = fit_map(model_from_stack(oxide_on_si(300.0)), sites)
        z = (res.values[:, 0] - 420.0) / res.stderr[:, 0]
        lo, hi = self.bounds(400)
        assert lo < np.mean(np.abs(z) < 1) < hi
        assert abs(np.mean(z)) < 4 / np.sqrt(400)          # no bias beyond noise

    def test_thickness_and_index_scale_with_absolute_uncertainties(self):
        # Truth: the film's index is 1.02 × the library's SiO2; fit thickness and the scale.
        si, ox = fs.get_material("Si"), fs.get_material("SiO2")
        sites = self.sites(lambda: airy_R(1.02 * ox.nk(WL).real, 300.0, si.nk(WL), WL), 300,
                           0.002, seed=2, with_sigma=True)
        model = model_from_stack(oxide_on_si(250.0), fit_block={
            "index_scale": {"SiO2": {"fit": 1.0, "min": 0.9, "max": 1.1}}})
        res = fit_map(model, sites, absolute_sigma=True)
        lo, hi = self.bounds(300)
        for j, truth in ((0, 300.0), (1, 1.02)):
            cover = np.mean(np.abs(res.values[:, j] - truth) < res.stderr[:, j])
            assert lo < cover < hi, (model.names[j], cover)
        assert np.median(res.chi2_reduced) == pytest.approx(1.0, abs=0.05)

    def test_single_sample_path_over_80_seeds(self):
        sites = self.sites(lambda: airy_oxide_on_si(880.0), 80, 0.004, seed=3)
        model = model_from_stack(oxide_on_si(500.0))
        hits = []
        for m in sites:
            p = fit_spectrum(model, m)["layers[0].nm"]
            hits.append(abs(p.value - 880.0) < p.stderr)
        lo, hi = self.bounds(80)
        assert lo < np.mean(hits) < hi

    def test_map_and_single_paths_agree(self):
        sites = self.sites(lambda: airy_oxide_on_si(150.0), 5, 0.003, seed=4)
        model = model_from_stack(oxide_on_si(500.0))
        res = fit_map(model, sites)
        for i, m in enumerate(sites):
            one = fit_spectrum(model, m)["layers[0].nm"]
            assert res.values[i, 0] == pytest.approx(one.value, abs=0.02 * one.stderr)
            assert res.stderr[i, 0] == pytest.approx(one.stderr, rel=1e-3)


class TestJacobian:
    """The fit's Jacobian (analytic in thickness, batched differences for index parameters,
    exact for the scale) against central finite differences of the model values (common
    practice, no published source)."""

    def test_every_parameter_kind(self):
        ta, sio2 = fs.get_material("Ta2O5"), fs.get_material("SiO2")
        glass = fs.get_material("crown-glass")
        st = Stack(incident=AIR, substrate=glass, substrate_mm=1.0,
                   layers=(Layer(ta, 110.0), Layer(sio2, 180.0)),
                   free=(FreeParameter("layers[0].nm", 110.0, 0, 400),
                         FreeParameter("layers[1].nm", 180.0, 0, 400)))
        model = model_from_stack(st, fit_block={
            "index_scale": {"SiO2": {"fit": 1.01, "min": 0.9, "max": 1.1}},
            "cauchy": {"Ta2O5": {"A": {"fit": 2.05, "min": 1.8, "max": 2.4},
                                 "B": {"fit": 0.02, "min": 0, "max": 0.1}, "C": 1e-4}},
            "wavelength_shift_nm": {"fit": 0.7, "min": -3, "max": 3},
            "scale": {"fit": 0.98, "min": 0.9, "max": 1.1}})
        wl = np.arange(450.0, 800.0, 7.0)
        chans = (Channel("R", 8.0, "mean", wl, np.zeros_like(wl)),
                 Channel("T", 45.0, "p", wl[::2], np.zeros(wl[::2].size)))
        ev = Evaluator(model, chans)
        x = model.x0
        F, J = ev(x[None], jac=True)
        for j, p in enumerate(model.parameters):
            h = 1e-4 * max(abs(x[j]), 1.0)
            xp, xm = x.copy(), x.copy()
            xp[j] += h
            xm[j] -= h
            num = (ev(xp[None])[0][0] - ev(xm[None])[0][0]) / (2 * h)
            scale = np.max(np.abs(num)) + 1e-12
            assert np.max(np.abs(J[0, :, j] - num)) < 2e-4 * scale, p.name


class TestOtherParameters:
    def test_cauchy_film_thickness_and_coefficients(self):
        # A film with n = 1.62 + 0.009/λ² (λ in µm) on fused silica (Malitson 1965 via the
        # library).
        sub = fs.get_material("fused-silica")
        film = Constant(name="film", n=1.6)
        n_true = 1.62 + 0.009 / (WL * 1e-3) ** 2
        rng = np.random.default_rng(5)
        y = airy_R(n_true, 640.0, sub.nk(WL), WL) + rng.normal(0, 0.001, WL.size)
        st = Stack(incident=AIR, substrate=sub, layers=(Layer(film, 600.0),),
                   free=(FreeParameter("layers[0].nm", 600.0, 400.0, 900.0),))
        model = model_from_stack(st, fit_block={"cauchy": {"film": {
            "A": {"fit": 1.6, "min": 1.4, "max": 1.8}, "B": {"fit": 0.005, "min": 0,
                                                             "max": 0.04}}}})
        r = fit_spectrum(model, measurement(y))
        for name, truth in (("layers[0].nm", 640.0), ("fit.cauchy.film.A", 1.62),
                            ("fit.cauchy.film.B", 0.009)):
            p = r[name]
            assert abs(p.value - truth) < 4.5 * p.stderr, (name, p.value, p.stderr)
        # Thickness and index trade off (the optical thickness n·d sets the fringes), so their
        # correlation is negative; the matrix is a proper correlation matrix.
        C = r.correlation
        assert C[0, 1] < 0
        np.testing.assert_allclose(C, C.T)
        np.testing.assert_allclose(np.diag(C), 1.0)
        assert np.all(np.abs(C) <= 1 + 1e-12)

    def test_instrument_shift_and_scale_are_recovered(self):
        rng = np.random.default_rng(6)
        si, ox = fs.get_material("Si"), fs.get_material("SiO2")
        # The instrument reads λ_true − 1.5 nm and 0.97 × R.
        y = 0.97 * airy_R(ox.nk(WL + 1.5), 700.0, si.nk(WL + 1.5), WL + 1.5)
        y = y + rng.normal(0, 0.001, WL.size)
        model = model_from_stack(oxide_on_si(500.0), fit_shift=True, fit_scale=True)
        r = fit_spectrum(model, measurement(y))
        for name, truth in (("layers[0].nm", 700.0), ("fit.wavelength_shift_nm", 1.5),
                            ("fit.scale", 0.97)):
            p = r[name]
            assert abs(p.value - truth) < 4.5 * p.stderr, (name, p.value, p.stderr)

    def test_transmittance_through_a_thick_substrate(self):
        # T of a TiO2 film on a 1 mm crown-glass plate, both faces counted (incoherent).
        glass, tio2 = fs.get_material("crown-glass"), fs.get_material("TiO2")
        wl = np.arange(420.0, 900.0, 3.0)
        st = Stack(incident=AIR, substrate=glass, substrate_mm=1.0,
                   layers=(Layer(tio2, 95.0),),
                   free=(FreeParameter("layers[0].nm", 60.0, 10.0, 400.0),))
        clean = spectrum(st.with_thicknesses([233.0]), wl, 0.0, "mean").T[0]
        rng = np.random.default_rng(7)
        m = measurement(clean + rng.normal(0, 0.002, wl.size), wl=wl, quantity="T")
        p = fit_spectrum(model_from_stack(st), m)["layers[0].nm"]
        assert abs(p.value - 233.0) < 4 * p.stderr

    def test_two_free_thicknesses(self):
        ta, sio2 = fs.get_material("Ta2O5"), fs.get_material("SiO2")
        glass = fs.get_material("fused-silica")
        st = Stack(incident=AIR, substrate=glass,
                   layers=(Layer(ta, 100.0), Layer(sio2, 100.0)),
                   free=(FreeParameter("layers[0].nm", 100.0, 20, 300),
                         FreeParameter("layers[1].nm", 100.0, 20, 300)))
        clean = spectrum(st.with_thicknesses([183.0, 91.0]), WL, 0.0, "mean").R[0]
        rng = np.random.default_rng(8)
        r = fit_spectrum(model_from_stack(st), measurement(clean + rng.normal(0, 0.001, WL.size)))
        for name, truth in (("layers[0].nm", 183.0), ("layers[1].nm", 91.0)):
            assert abs(r[name].value - truth) < 4 * r[name].stderr


class TestMapLayouts:
    def test_sites_measured_differently_are_fitted_in_their_own_groups(self):
        # Two wavelength grids and a second channel (T is ~0 on silicon: R only here, and R at
        # 45° s) in one map: each group shares its scan; every site gets its own thickness.
        rng = np.random.default_rng(13)
        st = oxide_on_si()
        wl2 = np.arange(450.0, 950.0, 5.0)
        sites = []
        truths = [300.0, 305.0, 310.0, 295.0]
        for i, d in enumerate(truths):
            if i % 2 == 0:
                y = airy_oxide_on_si(d) + rng.normal(0, 0.002, WL.size)
                sites.append(measurement(y, site=f"a{i}"))
            else:
                r0 = spectrum(st.with_thicknesses([d]), wl2, 0.0, "mean").R[0]
                r45 = spectrum(st.with_thicknesses([d]), wl2, 45.0, "s").R[0]
                sites.append(Measurement(
                    (Channel("R", 0.0, "mean", wl2, r0 + rng.normal(0, 0.002, wl2.size)),
                     Channel("R", 45.0, "s", wl2, r45 + rng.normal(0, 0.002, wl2.size))),
                    f"b{i}"))
        res = fit_map(model_from_stack(st), sites)
        for i, d in enumerate(truths):
            assert abs(res.values[i, 0] - d) < 4 * res.stderr[i, 0]
        assert res.site == ["a0", "b1", "a2", "b3"]

    def test_a_site_with_a_bad_measurement_is_flagged_as_a_poor_fit(self):
        # seven good sites with 0.3 % noise and one whose file holds a flat 5 % (a bad
        # measurement): its fit lands somewhere with a large residual, and must say so
        rng = np.random.default_rng(3)
        st = oxide_on_si()
        sites = [measurement(airy_oxide_on_si(300.0 + i) + rng.normal(0, 0.003, WL.size),
                             site=f"s{i}") for i in range(7)]
        sites.append(measurement(np.full(WL.size, 0.05), site="bad"))
        res = fit_map(model_from_stack(st), sites)
        assert res.poor_fit.tolist() == [False] * 7 + [True]
        assert any("poor fit" in w for w in res.warnings[7])
        assert not any(res.warnings[i] for i in range(7))
        assert res.as_dict()["n_poor_fit"] == 1


class TestWarnings:
    def test_a_narrow_band_is_ambiguous(self):
        # 6 nm of band cannot tell neighbouring interference orders of a 1 µm film apart.
        wl = np.arange(600.0, 606.1, 1.0)
        rng = np.random.default_rng(9)
        y = airy_oxide_on_si(1000.0, wl) + rng.normal(0, 0.005, wl.size)
        r = fit_spectrum(model_from_stack(oxide_on_si(900.0, 100.0, 3000.0)),
                         measurement(y, wl=wl))
        assert r.ambiguous
        assert any("ambiguous fit" in w for w in r.warnings)
        res = fit_map(model_from_stack(oxide_on_si(900.0, 100.0, 3000.0)),
                      [measurement(y, wl=wl)])
        assert res.ambiguous[0] and "ambiguous" in res.warnings[0][-1]

    def test_a_parameter_on_its_bound(self):
        y = airy_oxide_on_si(400.0)
        r = fit_spectrum(model_from_stack(oxide_on_si(300.0, 250.0, 350.0)), measurement(y))
        p = r["layers[0].nm"]
        assert p.at_bound and p.value == pytest.approx(350.0, abs=1e-3)
        assert any("sits on its upper bound" in w for w in r.warnings)

    def test_a_well_posed_fit_has_no_warnings(self):
        rng = np.random.default_rng(10)
        y = airy_oxide_on_si(300.0) + rng.normal(0, 0.002, WL.size)
        assert fit_spectrum(model_from_stack(oxide_on_si()), measurement(y)).warnings == ()


class TestBadInput:
    def test_no_free_parameter(self):
        st = oxide_on_si()
        st = Stack(incident=st.incident, substrate=st.substrate, layers=st.layers)
        with pytest.raises(InputError, match="no free parameter"):
            model_from_stack(st)

    def test_measured_range_outside_the_materials_data(self):
        # The bundled SiO2 table runs 252-1250 nm (silicon's to 1450 nm).
        wl = np.arange(1100.0, 1300.0, 5.0)
        with pytest.raises(OutOfRangeError, match="'SiO2'"):
            fit_spectrum(model_from_stack(oxide_on_si()), measurement(np.full(wl.size, 0.3),
                                                                      wl=wl))
        with pytest.raises(OutOfRangeError):
            fit_map(model_from_stack(oxide_on_si()), [measurement(np.full(wl.size, 0.3), wl=wl)])

    def test_fewer_points_than_parameters(self):
        wl = np.array([500.0])
        with pytest.raises(InputError, match="cannot determine"):
            fit_spectrum(model_from_stack(oxide_on_si()), measurement(np.array([0.2]), wl=wl))

    def test_mixed_uncertainties(self):
        m = Measurement((Channel("R", 0.0, "mean", WL, np.full(WL.size, 0.2),
                                 np.full(WL.size, 0.01)),
                         Channel("T", 0.0, "mean", WL, np.full(WL.size, 0.2))))
        with pytest.raises(InputError, match="all or none"):
            fit_spectrum(model_from_stack(oxide_on_si()), m)

    @pytest.mark.parametrize("block, match", [
        ({"index_scal": {}}, "unknown key 'index_scal'"),
        ({"index_scale": {"TiO2": 1.0}}, "not a material of the layers"),
        ({"index_scale": {"SiO2": {"fit": 1.3, "min": 0.9, "max": 1.1}}}, "outside"),
        ({"index_scale": {"SiO2": 1.0}, "cauchy": {"SiO2": {"A": 1.45}}}, "one index model"),
        ({"cauchy": {"SiO2": {"B": 3000}}}, "needs A"),
        ({"cauchy": {"SiO2": {"A": 1.45, "D": 1}}}, "unknown Cauchy coefficient"),
        ({"scale": 1.0}, "must be free"),
        ({"wavelength_shift_nm": {"min": -1, "max": 1}}, "needs 'fit"),
    ])
    def test_fit_block_mistakes(self, block, match):
        with pytest.raises(InputError, match=match):
            model_from_stack(oxide_on_si(), fit_block=block)


class TestModelFile:
    def test_free_thickness_and_fit_block_from_a_file(self, tmp_path):
        p = tmp_path / "model.yaml"
        p.write_text("substrate: Si\nlayers:\n  - {material: SiO2, nm: {fit: 100, min: 10, "
                     "max: 900}}\nfit:\n  index_scale: {SiO2: {fit: 1.0, min: 0.95, "
                     "max: 1.05}}\n")
        model = load_fit_model(p, fit_scale=True)
        assert model.names == ["layers[0].nm", "fit.index_scale.SiO2", "fit.scale"]
        assert [(q.lower, q.upper) for q in model.parameters] == [(10, 900), (0.95, 1.05),
                                                                  (0.5, 1.5)]

    def test_a_mistake_in_the_fit_block_names_file_key_and_line(self, tmp_path):
        p = tmp_path / "model.yaml"
        p.write_text("substrate: Si\nlayers:\n  - {material: SiO2, nm: {fit: 100}}\nfit:\n"
                     "  index_scale:\n    SiO2: {fit: 1.0, min: 1.1, max: 1.2}\n")
        with pytest.raises(InputError) as e:
            load_fit_model(p)
        assert e.value.line == 6 and e.value.key == "fit.index_scale.SiO2"

    def test_no_free_parameter_in_a_file(self, tmp_path):
        p = tmp_path / "model.yaml"
        p.write_text("substrate: Si\nlayers:\n  - {material: SiO2, nm: 100}\n")
        with pytest.raises(InputError, match="no free parameter") as e:
            load_fit_model(p)
        assert e.value.file == str(p)


class TestUniformity:
    def test_figures(self):
        # non-uniformity (max − min)/(2·mean): common practice, no published source.
        u = uniformity([100.0, 102.0, 98.0, 101.0, np.nan])
        assert (u.mean, u.minimum, u.maximum, u.range) == (100.25, 98.0, 102.0, 4.0)
        assert u.sigma == pytest.approx(np.std([100, 102, 98, 101], ddof=1))
        assert u.nonuniformity == pytest.approx(4.0 / 200.5)
        assert u.n_sites == 4

    def test_map_result_json_shape(self):
        rng = np.random.default_rng(11)
        sites = []
        for i, d in enumerate((300.0, 310.0, 305.0)):
            y = airy_oxide_on_si(d) + rng.normal(0, 0.002, WL.size)
            m = measurement(y, site=f"p{i}")
            sites.append(Measurement(m.channels, m.site, float(i), 0.0))
        res = fit_map(model_from_stack(oxide_on_si()), sites)
        np.testing.assert_allclose(res.column("layers[0].nm"), [300, 310, 305], atol=1.0)
        doc = res.as_dict()
        assert set(doc) >= {"parameters", "rms", "sites"}
        assert doc["parameters"][0]["name"] == "layers[0].nm"
        assert doc["parameters"][0]["nonuniformity"] == pytest.approx(
            (res.values[:, 0].max() - res.values[:, 0].min()) / (2 * res.values[:, 0].mean()))
        site = doc["sites"][1]
        assert site["site"] == "p1" and site["x_mm"] == 1.0
        assert set(site["parameters"][0]) == {"name", "value", "stderr"}


class TestFitPlot:
    def test_legend_has_one_entry_per_curve_and_leaves_a_full_panel_uncovered(self):
        # four curves (two angles × s, p) fill the panel: the legend goes beside it
        from filmstack.report.fit_plots import plot_fit
        wl = np.arange(420.0, 900.0, 4.0)
        st = oxide_on_si(start=300.0, lo=50.0, hi=600.0)
        chans = []
        for angle in (0.0, 45.0):
            for pol in ("s", "p"):
                y = spectrum(st.with_thicknesses([312.0]), wl, angle, pol).R[0]
                chans.append(Channel("R", angle, pol, wl, y))
        res = fit_spectrum(model_from_stack(st), Measurement(tuple(chans), "site"))
        fig, (ax, _) = plot_fit(res)
        leg = ax.get_legend()
        assert [t.get_text() for t in leg.get_texts()] == [
            "R at 0°, s", "R at 0°, p", "R at 45°, s", "R at 45°, p"]
        fig.canvas.draw()
        box, panel = leg.get_window_extent(), ax.get_window_extent()
        assert box.x0 >= panel.x1 - 1
