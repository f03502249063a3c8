"""Tests of filmstack.evaluate: band sampling, reduction to one value, margins, batches."""

import numpy as np
import pytest

from filmstack.errors import InputError
from filmstack.evaluate import (DEFAULT_STEP_NM, MIN_BAND_POINTS, evaluate_requirements,
                                reduce_values, requirement_wavelengths)
from filmstack.materials import Constant
from filmstack.spec import Requirement
from filmstack.stack import Layer, Stack

AIR = Constant(name="air-test", n=1.0)
GLASS = Constant(name="glass-1.52", n=1.52)
MGF2 = Constant(name="n1.38", n=1.38)
HI = Constant(name="H-2.35", n=2.35)
LO = Constant(name="L-1.46", n=1.46)


def req(**kw):
    base = dict(quantity="R", op="<=", limit=0.01, band_nm=(500.0, 600.0))
    base.update(kw)
    return Requirement(**base)


def quarter_wave_ar(lam=550.0):
    return Stack(incident=AIR, substrate=GLASS, layers=(Layer(MGF2, lam / (4 * 1.38)),))


class TestWavelengths:
    def test_default_step(self):
        wl = requirement_wavelengths(req(band_nm=(420.0, 680.0)))
        assert wl[0] == 420 and wl[-1] == 680
        assert np.allclose(np.diff(wl), DEFAULT_STEP_NM)

    def test_narrow_band_gets_enough_points(self):
        wl = requirement_wavelengths(req(band_nm=(500.0, 504.0)))
        assert wl.size == MIN_BAND_POINTS and wl[0] == 500 and wl[-1] == 504

    def test_single_wavelength(self):
        assert requirement_wavelengths(req(band_nm=(550.0, 550.0)), refine=4).tolist() == [550]

    def test_step_is_honoured_or_finer(self):
        wl = requirement_wavelengths(req(band_nm=(400.0, 700.0), step_nm=7.0))
        assert np.diff(wl).max() <= 7.0 + 1e-12 and wl[-1] == 700

    def test_refine_contains_the_coarse_grid(self):
        r = req(band_nm=(400.0, 700.0), step_nm=5.0)
        coarse, fine = requirement_wavelengths(r), requirement_wavelengths(r, refine=4)
        assert fine.size == 4 * (coarse.size - 1) + 1
        assert np.allclose(fine[::4], coarse)

    def test_bad_refine(self):
        with pytest.raises(InputError):
            requirement_wavelengths(req(), refine=0)


class TestReduce:
    """The reduction rules of the module docstring, on made-up sampled values."""

    WL = np.array([500.0, 550.0, 600.0])
    V = np.array([[0.01, 0.02, 0.03],      # angle 0: trapezoid mean 0.02
                  [0.00, 0.05, 0.00]])     # angle 30: mean 0.025, peak 0.05

    def test_average_is_trapezoid_mean_at_worst_angle(self):
        r = req(limit=0.03, angles_deg=(0.0, 30.0))
        value, margin, wl, ang = reduce_values(r, self.V, self.WL)
        assert value == pytest.approx(0.025) and margin == pytest.approx(0.005)
        assert ang == 30.0 and np.isnan(wl)

    def test_every_is_the_worst_point(self):
        r = req(limit=0.04, angles_deg=(0.0, 30.0), over="every")
        value, margin, wl, ang = reduce_values(r, self.V, self.WL)
        assert (value, wl, ang) == (0.05, 550.0, 30.0)
        assert margin == pytest.approx(-0.01)

    def test_at_least(self):
        r = req(op=">=", limit=0.005, angles_deg=(0.0, 30.0), over="every")
        value, margin, wl, ang = reduce_values(r, self.V, self.WL)
        assert (value, ang) == (0.0, 30.0) and margin == pytest.approx(-0.005)

    def test_equal_with_tolerance(self):
        r = req(op="=", limit=0.02, tolerance=0.01, angles_deg=(0.0, 30.0), over="every")
        value, margin, wl, ang = reduce_values(r, self.V, self.WL)
        assert value == 0.05 and margin == pytest.approx(0.01 - 0.03)

    def test_batch_shape(self):
        r = req(angles_deg=(0.0, 30.0))
        out = reduce_values(r, np.stack([self.V, self.V * 2, self.V / 2]), self.WL)
        assert all(np.shape(x) == (3,) for x in out)
        assert np.allclose(out[0], [0.025, 0.05, 0.0125])


class TestJustMeets:
    """A single quarter-wave layer at 550 nm: R = ((n0·ns − n1²)/(n0·ns + n1²))²
    (Macleod, Thin-Film Optical Filters, 4th ed., ch. 4, single-layer antireflection coating;
    chapter number from memory)."""

    R_QW = ((1.0 * 1.52 - 1.38 ** 2) / (1.0 * 1.52 + 1.38 ** 2)) ** 2

    def test_value_is_the_closed_form(self):
        res = evaluate_requirements(quarter_wave_ar(), [req(band_nm=(550.0, 550.0))])[0]
        assert res.value == pytest.approx(self.R_QW, rel=1e-12)

    def test_margin_zero_and_nudges_fail(self):
        r = req(band_nm=(550.0, 550.0), limit=self.R_QW)
        st = quarter_wave_ar()
        res = evaluate_requirements(st, [r])[0]
        assert abs(res.margin) < 1e-14
        # the quarter wave is a minimum of R: any thickness change raises R above the limit
        for delta in (+0.5, -0.5):
            nudged = st.with_thicknesses(st.thicknesses_nm + delta)
            out = evaluate_requirements(nudged, [r])[0]
            assert out.margin < 0 and not out.passed
        # and a limit a hair below the value fails
        tighter = req(band_nm=(550.0, 550.0), limit=self.R_QW - 1e-9)
        assert not evaluate_requirements(st, [tighter])[0].passed


class TestNormalIncidence:
    def test_mean_at_normal_incidence_equals_the_engine_mean(self):
        # evaluate computes 'mean' at 0° as 's' (r_s = r_p there, DESIGN.md §3): same numbers
        from filmstack.response import spectrum
        st = Stack(incident=AIR, substrate=GLASS,
                   layers=tuple(Layer(HI if i % 2 == 0 else LO, 50.0 + 9 * i) for i in range(7)))
        r = req(band_nm=(400.0, 700.0), over="every")
        wl = requirement_wavelengths(r)
        ref = spectrum(st, wl, [0.0], "mean").R[0]
        res = evaluate_requirements(st, [r])[0]
        assert res.value == pytest.approx(ref.max(), rel=1e-13)
        assert res.worst_wavelength_nm == wl[np.argmax(ref)]


class TestBatches:
    def test_batch_equals_one_by_one(self):
        st = Stack(incident=AIR, substrate=GLASS,
                   layers=tuple(Layer(HI if i % 2 == 0 else LO, 60.0 + 7 * i) for i in range(6)))
        reqs = [req(band_nm=(450.0, 650.0), angles_deg=(0.0, 30.0)),
                req(quantity="T", op=">=", limit=0.9, over="every", band_nm=(500.0, 520.0),
                    polarization="s")]
        rng = np.random.default_rng(1)
        d = st.thicknesses_nm * (1 + 0.02 * rng.standard_normal((5, 6)))
        scale = 1 + 0.01 * rng.standard_normal((5, 6))
        batch = evaluate_requirements(st, reqs, thicknesses_nm=d, index_scale=scale, chunk=2)
        for n in range(5):
            layers = tuple(Layer(Constant(name=f"x{i}", n=l.material.n * scale[n, i]), d[n, i])
                           for i, l in enumerate(st.layers))
            one = evaluate_requirements(Stack(incident=AIR, substrate=GLASS, layers=layers),
                                        reqs)
            for b, o in zip(batch, one):
                assert b.value[n] == pytest.approx(o.value, rel=1e-10)
                assert b.worst_angle_deg[n] == o.worst_angle_deg
                assert bool(b.passed[n]) == o.passed

    def test_bad_shapes(self):
        st = quarter_wave_ar()
        with pytest.raises(InputError, match="shape"):
            evaluate_requirements(st, [req()], thicknesses_nm=np.ones((3, 2)))


class TestPhase:
    def test_batch_phase_equals_single(self):
        st = quarter_wave_ar()
        r = req(quantity="GD", op="<=", limit=10.0, polarization="s", band_nm=(540.0, 560.0))
        d = st.thicknesses_nm + np.array([[0.0], [5.0]])
        batch = evaluate_requirements(st, [r], thicknesses_nm=d)[0]
        single = evaluate_requirements(st.with_thicknesses(d[1]), [r])[0]
        assert batch.value[1] == pytest.approx(single.value, rel=1e-12)
        assert batch.value.shape == (2,)
