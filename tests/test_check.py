"""Tests of the check job: verdicts against closed forms, limits, sensitivity, Monte Carlo yield."""

import math

import numpy as np
import pytest
from scipy.stats import binomtest, norm

from filmstack.check import (check_stack, clopper_pearson, compare_stacks, draw_trials,
                             monte_carlo, sensitivities, wilson)
from filmstack.evaluate import evaluate_requirements
from filmstack.materials import Constant
from filmstack.spec import Requirement, Tolerances, spec_from_mapping
from filmstack.stack import Layer, Stack

AIR = Constant(name="air-test", n=1.0)
NS, NH, NL, N1 = 1.52, 2.35, 1.46, 1.38
GLASS = Constant(name="glass", n=NS)
HI = Constant(name="H235", n=NH)
LO = Constant(name="L146", n=NL)
MGF2 = Constant(name="n138", n=N1)
LAM = 550.0


def mirror(pairs):
    """H (LH)^pairs quarter waves at 550 nm on glass, H next to the substrate and to the air."""
    layers = [Layer(HI, LAM / (4 * NH))]
    for _ in range(pairs):
        layers += [Layer(LO, LAM / (4 * NL)), Layer(HI, LAM / (4 * NH))]
    return Stack(incident=AIR, substrate=GLASS, layers=tuple(layers))


def mirror_peak(pairs):
    # Macleod, Thin-Film Optical Filters, 4th ed., ch. 5 (quarter-wave stack, 2N+1 layers, air;
    # chapter number from memory):
    # R = ((1 − (nH/nL)^(2N) nH²/ns) / (1 + (nH/nL)^(2N) nH²/ns))²
    y = (NH / NL) ** (2 * pairs) * NH ** 2 / NS
    return ((1 - y) / (1 + y)) ** 2


def spec_of(requirements, **extra):
    data = {"stack": {"incident": {"n": 1.0}, "substrate": {"n": NS}},
            "requirements": requirements}
    data.update(extra)
    return spec_from_mapping(data, file="test-spec.yaml")


class TestQuarterWaveMirrorQuote:
    @pytest.mark.parametrize("pairs", [3, 7])
    def test_value_is_the_closed_form(self, pairs):
        spec = spec_of([{"R": ">= 90%", "band_nm": [550, 550]}])
        res = check_stack(mirror(pairs), spec)
        assert res.requirements[0].value == pytest.approx(mirror_peak(pairs), abs=1e-12)
        assert res.passed

    def test_limit_just_above_the_peak_fails(self):
        peak = mirror_peak(7)
        ok = spec_of([{"R": f">= {100 * (peak - 1e-7):.9f}%", "band_nm": [550, 550]}])
        bad = spec_of([{"R": f">= {100 * (peak + 1e-7):.9f}%", "band_nm": [550, 550]}])
        r_ok, r_bad = check_stack(mirror(7), ok), check_stack(mirror(7), bad)
        assert r_ok.passed and r_ok.requirements[0].margin == pytest.approx(1e-7, abs=1e-10)
        assert not r_bad.passed and r_bad.requirements[0].margin < 0


class TestFinerGrid:
    def test_spike_between_samples_is_found(self):
        # one layer with n·d = 1500 nm is a whole number of half waves at 500 and 600 nm (R of
        # the bare glass, 4.3 %) but near an odd quarter wave at 550 nm (R ≈ 30 %): sampled at
        # 500 and 600 nm only it looks fine; the 4× finer grid must catch it.
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(HI, 1500.0 / NH),))
        spec = spec_of([{"R": "<= 5%", "band_nm": [500, 600], "step_nm": 100, "over": "every"}])
        coarse = evaluate_requirements(st, spec)[0]
        assert coarse.passed
        res = check_stack(st, spec)
        assert not res.passed and res.requirements[0].refine == 4
        assert any("finer" in n for n in res.notes)


class TestLimits:
    def test_limits_on_the_quote(self):
        st = mirror(3)                                  # 7 layers, thinnest 58.5 nm
        spec = spec_of([{"R": ">= 50%", "band_nm": [550, 550]}],
                       limits={"layers": 5, "thinnest_nm": 60, "total_nm": 5000},
                       materials={"H": {"n": NH}, "L": {"n": 1.45}})
        lim = {l.name: l for l in check_stack(st, spec).limits}
        assert not lim["layers"].passed and lim["layers"].margin == -2
        assert not lim["thinnest_nm"].passed
        assert lim["thinnest_nm"].value == pytest.approx(LAM / (4 * NH))
        assert lim["total_nm"].passed
        assert not lim["materials"].passed and lim["materials"].value == 3   # 3 L layers
        assert "L146" in lim["materials"].detail


class TestSensitivity:
    def test_analytic_matches_central_differences(self):
        st = Stack(incident=AIR, substrate=GLASS,
                   layers=tuple(Layer(HI if i % 2 == 0 else LO, 40.0 + 11 * i)
                                for i in range(5)))
        reqs = [Requirement("R", "<=", 0.02, (450.0, 650.0), angles_deg=(0.0, 40.0)),
                Requirement("T", ">=", 0.9, (500.0, 560.0), over="every", polarization="p")]
        for s, r in zip(sensitivities(st, reqs), reqs):
            assert s.method == "analytic"
            h = 1e-4
            for l in range(5):
                dp, dm = st.thicknesses_nm.copy(), st.thicknesses_nm.copy()
                dp[l] += h
                dm[l] -= h
                vp = evaluate_requirements(st.with_thicknesses(dp), [r])[0].value
                vm = evaluate_requirements(st.with_thicknesses(dm), [r])[0].value
                assert s.d_value_d_nm[l] == pytest.approx((vp - vm) / (2 * h), rel=1e-5,
                                                          abs=1e-10)
            g = np.abs(s.d_value_d_nm)
            assert np.all(np.diff(g[s.ranking]) <= 0)
            assert s.per_pct == pytest.approx(s.d_value_d_nm * st.thicknesses_nm / 100)


class TestStatistics:
    @pytest.mark.parametrize("k, n", [(0, 10), (3, 10), (10, 10), (950, 1000), (1, 5000)])
    def test_clopper_pearson_matches_scipy_exact(self, k, n):
        # Clopper & Pearson, Biometrika 26, 404 (1934); scipy's binomtest(...).proportion_ci
        # (method='exact') is an independent implementation of the same interval.
        ref = binomtest(k, n).proportion_ci(0.95, method="exact")
        assert clopper_pearson(k, n) == pytest.approx((ref.low, ref.high), abs=1e-10)

    def test_all_pass_closed_form(self):
        # with k = n the exact lower bound is (α/2)^(1/n) (Clopper & Pearson 1934)
        assert clopper_pearson(100, 100)[0] == pytest.approx(0.025 ** (1 / 100))
        assert clopper_pearson(100, 100)[1] == 1.0

    def test_wilson_matches_scipy(self):
        ref = binomtest(30, 80).proportion_ci(0.9, method="wilson")
        assert wilson(30, 80, 0.9) == pytest.approx((ref.low, ref.high), abs=1e-10)


class TestMonteCarlo:
    SPEC_OK = [{"R": ">= 99%", "band_nm": [540, 560], "over": "every"}]

    def test_zero_tolerances_give_exactly_one_or_zero(self):
        ok = monte_carlo(mirror(7), spec_of(self.SPEC_OK), trials=50, seed=1)
        # and exactly means exactly: no binomial interval around a yield without randomness
        # (it was [92.9–100] % for 50 trials)
        assert ok.yield_ == 1.0 and ok.ci == (1.0, 1.0)
        assert all(r.pass_fraction == 1.0 and r.ci == (1.0, 1.0) for r in ok.requirements)
        bad = monte_carlo(mirror(2), spec_of(self.SPEC_OK), trials=50, seed=1)
        assert bad.yield_ == 0.0 and bad.ci == (0.0, 0.0)
        assert np.ptp(bad.requirements[0].values) == 0.0       # every trial is the nominal
        # a stack without layers has nothing to vary either (bare glass fails R >= 99 %)
        bare = monte_carlo(Stack(incident=AIR, substrate=GLASS),
                           spec_of(self.SPEC_OK, tolerances={"thickness_pct": 2}), trials=50,
                           seed=1)
        assert bare.yield_ == 0.0 and bare.ci == (0.0, 0.0)

    def test_single_layer_yield_is_analytic(self):
        # One quarter-wave layer (n1 = 1.38) on glass at 550 nm with R ≤ limit passes for a
        # thickness interval [a, b] around the quarter wave. The single-film reflectance
        #   R = (r1² + r2² + 2 r1 r2 cos 2δ) / (1 + r1² r2² + 2 r1 r2 cos 2δ),  δ = 2π n1 d / λ
        # (Born & Wolf, Principles of Optics, 7th ed., §1.6.4; section number from memory) gives
        # cos 2δ at R = limit in closed form, hence a and b. With d = d0 (1 + σ z), z standard
        # normal, the yield is Φ((b/d0 − 1)/σ) − Φ((a/d0 − 1)/σ).
        limit, sigma = 0.0127, 0.03
        r1, r2 = (1 - N1) / (1 + N1), (N1 - NS) / (N1 + NS)
        c = (r1 ** 2 + r2 ** 2 - limit * (1 + r1 ** 2 * r2 ** 2)) / (2 * r1 * r2 * (limit - 1))
        two_delta = math.acos(c)
        a = two_delta * LAM / (4 * math.pi * N1)
        b = (2 * math.pi - two_delta) * LAM / (4 * math.pi * N1)
        d0 = LAM / (4 * N1)
        expected = norm.cdf((b / d0 - 1) / sigma) - norm.cdf((a / d0 - 1) / sigma)
        assert 0.3 < expected < 0.9
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(MGF2, d0),))
        # the engine agrees that the interval ends sit on the limit
        for edge in (a, b):
            v = evaluate_requirements(st.with_thicknesses([edge]),
                                      [Requirement("R", "<=", limit, (LAM, LAM))])[0].value
            assert v == pytest.approx(limit, rel=1e-9)
        spec = spec_of([{"R": f"<= {limit}", "band_nm": [LAM, LAM]}],
                       tolerances={"thickness_pct": 100 * sigma})
        mc = monte_carlo(st, spec, trials=4000, seed=11)
        lo, hi = mc.ci
        assert lo <= expected <= hi, (mc.yield_, mc.ci, expected)
        assert hi - lo < 0.04

    def test_same_seed_same_yield_and_chunking_does_not_matter(self):
        spec = spec_of(self.SPEC_OK, tolerances={"thickness_pct": 3, "rate_pct": 1,
                                                 "index_pct": {"*": 0.5}})
        a = monte_carlo(mirror(5), spec, trials=300, seed=5)
        b = monte_carlo(mirror(5), spec, trials=300, seed=5, block=70)
        c = monte_carlo(mirror(5), spec, trials=300, seed=6)
        assert 0 < a.yield_ < 1
        assert a.yield_ == b.yield_
        assert np.array_equal(a.requirements[0].values, b.requirements[0].values)
        assert not np.array_equal(a.requirements[0].values, c.requirements[0].values)

    def test_error_model(self):
        st = mirror(2)                                   # H L H L H
        tol = Tolerances(thickness_pct=0.0, rate_pct={"H235": 2.0})
        d, scale = draw_trials(st, tol, 2000, seed=3)
        assert scale is None
        ratio = d / st.thicknesses_nm
        # a systematic rate error moves every H layer of a trial together; L layers stay put
        assert np.allclose(ratio[:, 0], ratio[:, 2]) and np.allclose(ratio[:, 4], ratio[:, 0])
        assert np.allclose(ratio[:, 1], 1.0)
        assert np.std(ratio[:, 0]) == pytest.approx(0.02, rel=0.1)
        _, scale = draw_trials(st, Tolerances(index_pct={"L146": 1.0}), 2000, seed=3)
        assert np.allclose(scale[:, 0], 1.0) and np.allclose(scale[:, 1], scale[:, 3])

    def test_tolerance_by_symbol_reaches_quote_layers(self):
        # the spec names the material by symbol; the quote calls it differently
        spec = spec_of(self.SPEC_OK, materials={"H": {"n": NH}, "L": {"n": NL}},
                       tolerances={"rate_pct": {"H": 5}})
        mc = monte_carlo(mirror(3), spec, trials=200, seed=2)
        r = mc.thicknesses_nm / mirror(3).thicknesses_nm
        assert np.std(r[:, 0]) > 0.03 and np.allclose(r[:, 1], 1.0)
        assert not any("matches no layer" in n for n in mc.notes)

    def test_material_without_a_rate_error_is_noted(self):
        # the spec gives a rate error for H only; the quote's L layers get none, and the user
        # is told so rather than left to think every layer is covered
        spec = spec_of(self.SPEC_OK, materials={"H": {"n": NH}, "L": {"n": NL}},
                       tolerances={"rate_pct": {"H": 1}})
        mc = monte_carlo(mirror(2), spec, trials=20, seed=1)
        assert any("no rate error is given for L146" in n for n in mc.notes), mc.notes

    def test_stop_early_keeps_the_trials_done(self):
        spec = spec_of(self.SPEC_OK, tolerances={"thickness_pct": 2})
        mc = monte_carlo(mirror(5), spec, trials=500, seed=1, block=100,
                         progress=lambda done, total: done >= 200)
        assert mc.interrupted and mc.trials == 200 and mc.requested == 500


class TestCompare:
    def test_identical_and_shifted(self):
        spec = spec_of([{"R": ">= 95%", "band_nm": [520, 580]}])
        same = compare_stacks(mirror(5), mirror(5), spec)
        assert same.summary["R"]["max_abs_diff"] == 0.0
        assert np.allclose(same.delta_e, 0.0)
        st = mirror(5)
        shifted = compare_stacks(st, st.with_thicknesses(st.thicknesses_nm * 1.03), spec)
        assert shifted.summary["R"]["max_abs_diff"] > 1e-3
        assert np.all(shifted.delta_e > 0)
        assert shifted.to_dict()["requirements"][0]["pass_a"] is True


def test_spectra_plot_labels_a_shared_limit_once():
    # s and p required to the same '= 50 % ± 3 %' on one band: one line, one label '1, 2: …'
    # (the two labels overprinted each other)
    from filmstack.report.check_plots import plot_check_spectra
    from filmstack.spec import Requirement

    reqs = [Requirement("R", "=", 0.5, (500, 600), tolerance=0.03, angles_deg=(45.0,),
                        polarization=p, over="every") for p in ("s", "p")]
    fig, axes = plot_check_spectra(mirror(2), reqs)
    ax = axes[0] if isinstance(axes, (list, tuple, np.ndarray)) else axes
    labels = [t.get_text() for t in ax.texts if "50" in t.get_text()]
    assert len(labels) == 1 and labels[0].startswith("1, 2:")
    assert "± 3%" in labels[0]                  # the tolerance with its unit
