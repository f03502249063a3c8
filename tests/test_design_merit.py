"""The design merit: its documented form, its agreement with the check's evaluation, its
analytic Jacobian, and the V-coat closed form reached by refinement.

Sources: the V-coat zero-reflectance condition is derived below from the characteristic matrix
(H. A. Macleod, *Thin-Film Optical Filters*, 4th ed., CRC Press 2010, ch. 4, "two-layer
antireflection coatings", the V-coat); band averages follow ``filmstack.evaluate`` (trapezoid
rule), GD/GDD ``filmstack.response.phase_response`` (five-point central differences, Fornberg,
Math. Comp. 51, 699 (1988)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from filmstack.design import Design, DesignProblem, Merit, refine, refine_thicknesses
from filmstack.evaluate import evaluate_requirements, requirement_wavelengths
from filmstack.materials import Constant
from filmstack.response import spectrum
from filmstack.spec import Limits, Requirement, Spec
from filmstack.stack import AIR, Stack

H = Constant(name="H", n=2.35)
L = Constant(name="L", n=1.46)
M = Constant(name="M", n=1.9, k=0.02)            # slightly absorbing
GLASS = Constant(name="glass", n=1.52)


def make_spec(requirements, materials=None, limits=Limits(), substrate=GLASS, mm=None,
              reference_nm=550.0):
    return Spec(template=Stack(AIR, substrate, substrate_mm=mm, reference_nm=reference_nm),
                materials=materials or {"H": H, "L": L}, requirements=tuple(requirements),
                limits=limits)


AR4 = Design(("H", "L", "H", "L"), (12.0, 35.0, 115.0, 89.0))


class TestForm:
    def test_zero_when_every_target_met_and_positive_when_violated(self):
        # an inequality counts only where violated (module docstring of filmstack.design.merit)
        loose = make_spec([Requirement("R", "<=", 0.05, (420, 680), step_nm=10, over="every")])
        tight = make_spec([Requirement("R", "<=", 0.001, (420, 680), step_nm=10, over="every")])
        assert Merit.from_spec(loose).value(AR4) == 0.0
        assert Merit.from_spec(tight).value(AR4) > 0.0

    def test_value_is_the_documented_weighted_sum(self):
        # F = sum_i (w_i/W) (1/N_i) sum_k (v_ik/s_i)^2 with s = 0.01 for R and margin 0.05 s
        reqs = [Requirement("R", "<=", 0.002, (420, 680), step_nm=20, over="every", weight=2.0),
                Requirement("T", ">=", 0.999, (500, 600), step_nm=25, over="average",
                            angles_deg=(0.0, 30.0))]
        spec = make_spec(reqs)
        merit = Merit.from_spec(spec)
        stack = merit.problem.stack(AR4)
        wl0 = requirement_wavelengths(reqs[0])
        R = spectrum(stack, wl0, [0.0], "mean").R[0]
        v0 = np.maximum(R - (0.002 - 0.0005), 0.0) / 0.01
        wl1 = requirement_wavelengths(reqs[1])
        T = spectrum(stack, wl1, [0.0, 30.0], "mean").T
        Tavg = np.trapezoid(T, wl1, axis=-1) / (wl1[-1] - wl1[0])
        v1 = np.minimum(Tavg - (0.999 + 0.0005), 0.0) / 0.01
        expected = (2 / 3) * np.mean(v0 ** 2) + (1 / 3) * np.mean(v1 ** 2)
        assert merit.value(AR4) == pytest.approx(expected, rel=1e-12)

    def test_equality_counts_everywhere_and_uses_its_tolerance_as_scale(self):
        req = Requirement("R", "=", 0.5, (550, 550), tolerance=0.02)
        merit = Merit.from_spec(make_spec([req]))
        R = spectrum(merit.problem.stack(AR4), [550.0], [0.0], "mean").R[0, 0]
        assert merit.value(AR4) == pytest.approx(((R - 0.5) / 0.02) ** 2, rel=1e-12)

    def test_weight_zero_and_colour_requirements_are_left_out(self):
        reqs = [Requirement("R", "<=", 0.01, (420, 680), weight=0.0),
                Requirement("colour", "<=", 2.0, (380, 780)),
                Requirement("R", "<=", 0.01, (500, 600))]
        merit = Merit.from_spec(make_spec(reqs))
        assert len(merit.targets) == 1 and len(merit.skipped) == 2


class TestAgreesWithTheCheck:
    """The merit samples and averages exactly as ``filmstack.evaluate`` does."""

    REQS = [Requirement("R", "<=", 0.003, (420, 680), over="average", angles_deg=(0.0, 40.0),
                        key="requirements[0]"),
            Requirement("R", "<=", 0.01, (420, 680), step_nm=5, over="every",
                        polarization="p", angles_deg=(30.0,), key="requirements[1]"),
            Requirement("T", ">=", 0.95, (450, 650), over="average", key="requirements[2]"),
            Requirement("GDD", "=", 0.0, (500, 600), tolerance=20.0, polarization="s",
                        step_nm=10, over="every", key="requirements[3]"),
            Requirement("GD", "<=", 5.0, (500, 600), polarization="p", angles_deg=(20.0,),
                        step_nm=10, over="every", side="transmitted", key="requirements[4]")]

    @pytest.mark.parametrize("refine_factor", [1, 4])
    def test_worst_values_equal_evaluate_requirements(self, refine_factor):
        spec = make_spec(self.REQS, materials={"H": H, "L": L, "M": M})
        merit = Merit.from_spec(spec, refine=refine_factor)
        design = Design(("H", "L", "M", "L"), (20.0, 40.0, 100.0, 90.0))
        values = merit.target_values(design)
        results = evaluate_requirements(merit.problem.stack(design), spec, refine=refine_factor)
        for t, q, res in zip(merit.targets, values, results):
            req = t.requirement
            if req.op == "<=":
                worst = np.max(q)
            elif req.op == ">=":
                worst = np.min(q)
            else:
                worst = q.ravel()[np.argmax(np.abs(q - req.limit))]
            tol = 1e-6 if req.quantity in ("GD", "GDD") else 1e-12
            assert worst == pytest.approx(float(res.value), abs=tol), req.key


class TestJacobian:
    """Analytic Jacobian of the residuals against central differences (h = 1e-3 nm)."""

    @pytest.mark.parametrize("mm", [None, 1.0])
    def test_against_central_differences(self, mm):
        reqs = [Requirement("R", "<=", 0.0, (420, 680), step_nm=20, over="every",
                            angles_deg=(0.0, 45.0), polarization="mean"),
                Requirement("A", "<=", 0.0, (420, 680), step_nm=40, over="average"),
                Requirement("T", ">=", 1.0, (500, 600), step_nm=25, over="every",
                            polarization="p", angles_deg=(30.0,))]
        if mm is None:
            reqs.append(Requirement("GDD", "=", 0.0, (500, 600), tolerance=10.0,
                                    polarization="s", step_nm=25, over="every"))
        spec = make_spec(reqs, materials={"H": H, "L": L, "M": M}, mm=mm)
        merit = Merit.from_spec(spec)
        design = Design(("H", "L", "M", "L"), (20.0, 40.0, 100.0, 90.0))
        r, J = merit.residuals_jacobian(design)
        assert J.shape == (r.size, 4)
        h = 1e-3
        for j in range(4):
            e = np.zeros(4)
            e[j] = h
            fd = (merit.residuals(design.with_d(design.d + e))
                  - merit.residuals(design.with_d(design.d - e))) / (2 * h)
            # GDD residuals are second differences in ω divided by h_ω²: their central
            # differences in thickness carry ~1e-8 of round-off
            np.testing.assert_allclose(J[:, j], fd, rtol=1e-5, atol=1e-6 * np.abs(J).max())

    def test_gradient_is_twice_jt_r(self):
        merit = Merit.from_spec(make_spec([Requirement("R", "<=", 0.0, (420, 680))]))
        f, g = merit.value_gradient(AR4)
        r, J = merit.residuals_jacobian(AR4)
        assert f == pytest.approx(r @ r)
        np.testing.assert_allclose(g, 2 * J.T @ r)


def vcoat_closed_form(n0, n1, n2, ns, wavelength_nm):
    """Both zero-reflectance solutions (d1 outer layer n1, d2 inner layer n2) in nm.

    Derivation (Macleod, ch. 4, V-coat): with [B, C] = M1 M2 [1, ns], M_j = [[c_j, i s_j/n_j],
    [i n_j s_j, c_j]], zero reflectance is C = n0 B. Its real and imaginary parts, divided by
    c1 c2 (t_j = tan δ_j), give

        ns − n0 = t1 t2 (n1² ns − n0 n2²)/(n1 n2),
        t1 (n1² − n0 ns)/n1 = t2 (n0 ns − n2²)/n2,

    hence tan²δ1 = (ns − n0)(n0 ns − n2²) n1² / [(n1² − n0 ns)(n1² ns − n0 n2²)] (Macleod's
    form, with both factor signs flipped), t2 = t1 n2 (n1² − n0 ns)/(n1 (n0 ns − n2²)), and
    d_j = δ_j λ / (2π n_j) with δ_j taken in (0, π).
    """
    t1sq = (ns - n0) * (n0 * ns - n2 ** 2) * n1 ** 2 / ((n1 ** 2 - n0 * ns)
                                                       * (n1 ** 2 * ns - n0 * n2 ** 2))
    out = []
    for t1 in (math.sqrt(t1sq), -math.sqrt(t1sq)):
        t2 = t1 * n2 * (n1 ** 2 - n0 * ns) / (n1 * (n0 * ns - n2 ** 2))
        d1 = (math.atan(t1) % math.pi) * wavelength_nm / (2 * math.pi * n1)
        d2 = (math.atan(t2) % math.pi) * wavelength_nm / (2 * math.pi * n2)
        out.append((d1, d2))
    return out


class TestVCoat:
    def test_closed_form_gives_zero_reflectance(self):
        stack0 = Stack(AIR, GLASS)
        for d1, d2 in vcoat_closed_form(1.0, 1.46, 2.35, 1.52, 550.0):
            st = Stack(AIR, GLASS, layers=make_layers(d2, d1))
            assert spectrum(st, [550.0], 0.0, "s").R[0, 0] < 1e-20
        assert spectrum(stack0, [550.0], 0.0, "s").R[0, 0] > 0.04

    def test_refinement_finds_the_closed_form(self):
        # start near the thin-H solution and refine R <= 0 at one wavelength
        spec = make_spec([Requirement("R", "<=", 0.0, (550, 550))])
        merit = Merit.from_spec(spec)
        d, _ = refine_thicknesses(merit, Design(("H", "L"), (20.0, 115.0)), max_nfev=300)
        expected = min(vcoat_closed_form(1.0, 1.46, 2.35, 1.52, 550.0), key=lambda s: s[1])
        # expected (outer L, inner H) ≈ (124.8, 15.4) nm
        assert d.d[1] == pytest.approx(expected[0], abs=0.02)
        assert d.d[0] == pytest.approx(expected[1], abs=0.02)
        assert spectrum(merit.problem.stack(d), [550.0], 0.0, "s").R[0, 0] < 1e-8


def make_layers(d_inner_h, d_outer_l):
    from filmstack.stack import Layer

    return (Layer(H, d_inner_h), Layer(L, d_outer_l))


class TestRefinement:
    def test_recovers_a_known_design_from_a_perturbed_start(self):
        # targets: R of a known 4-layer design at 25 single wavelengths ('=' within 1e-4)
        truth = Design(("H", "L", "H", "L"), (14.0, 32.0, 110.0, 91.0))
        stack = DesignProblem(Stack(AIR, GLASS), {"H": H, "L": L}).stack(truth)
        wl = np.linspace(400, 800, 25)
        R = spectrum(stack, wl, [0.0, 45.0], "s").R
        reqs = [Requirement("R", "=", float(R[0, i]), (w, w), tolerance=1e-4)
                for i, w in enumerate(wl)]
        reqs += [Requirement("R", "=", float(R[1, i]), (w, w), tolerance=1e-4,
                             angles_deg=(45.0,), polarization="s")
                 for i, w in enumerate(wl)]
        merit = Merit.from_spec(make_spec(reqs))
        start = truth.with_d(truth.d * np.array([1.06, 0.95, 1.04, 0.97]))
        found, value = refine(merit, start)
        np.testing.assert_allclose(found.d, truth.d, atol=1e-3)
        assert value < 1e-12

    def test_respects_the_total_thickness_limit(self):
        spec = make_spec([Requirement("R", "<=", 0.0, (420, 680), step_nm=10, over="every")],
                         limits=Limits(total_nm=150.0))
        merit = Merit.from_spec(spec)
        d, v = refine(merit, AR4)
        assert d.d.sum() <= 150.0 + 1e-9
        assert v == pytest.approx(merit.value(d))

    def test_removes_thin_layers_and_merges_neighbours(self):
        spec = make_spec([Requirement("R", "<=", 0.0, (420, 680), step_nm=10, over="every")],
                         limits=Limits(thinnest_nm=5.0))
        merit = Merit.from_spec(spec)
        # a 0.5 nm L layer inside the thick H layer of AR4
        start = Design(("H", "L", "H", "L", "H", "L"), (12.0, 35.0, 60.0, 0.5, 55.0, 89.0))
        d, v = refine(merit, start)
        assert np.all(d.d >= 5.0)
        assert all(a != b for a, b in zip(d.symbols, d.symbols[1:]))
        assert v <= merit.value(AR4) + 1e-12

    def test_lbfgs_and_trf_reach_the_same_optimum(self):
        spec = make_spec([Requirement("R", "<=", 0.0, (420, 680), step_nm=10, over="every")])
        merit = Merit.from_spec(spec)
        a, va = refine_thicknesses(merit, AR4, method="trf", max_nfev=400)
        b, vb = refine_thicknesses(merit, AR4, method="lbfgs", max_nfev=400)
        assert va == pytest.approx(vb, rel=1e-3)
        np.testing.assert_allclose(a.d, b.d, atol=0.05)
