"""The needle function: the derivative of the merit for inserting a thin layer at a depth.

Checked against the finite-difference effect of really inserting a 0.01 nm layer (and a
Richardson extrapolation of 0.01 and 0.005 nm), for both ways of computing it (partial products
of the engine's stack vectors; engine derivatives of an expanded stack), with s, p and mean
polarisation, oblique incidence, an absorbing needle material, T, A and GDD targets, fixed layers
and a thick substrate. Formula: A. V. Tikhonravov, M. K. Trubetskov, G. W. DeBell, Appl. Opt. 35,
5493 (1996), eq. for P(z) as the first variation of the merit; characteristic matrices from
H. A. Macleod, *Thin-Film Optical Filters*, 4th ed., ch. 2.
"""

from __future__ import annotations

import numpy as np
import pytest

from filmstack.design import Design, Merit, insert_needle, needle_function
from filmstack.design.needle import NeedleScan
from filmstack.materials import Constant
from filmstack.spec import Limits, Requirement, Spec
from filmstack.stack import AIR, Layer, Stack

H = Constant(name="H", n=2.35)
L = Constant(name="L", n=1.46)
M = Constant(name="M", n=1.9, k=0.05)
GLASS = Constant(name="glass", n=1.52)
EPS = 0.01          # nm, the brief's needle thickness


def spec_for(reqs, *, mm=None, fixed_bottom=(), fixed_top=(), materials=None):
    return Spec(template=Stack(AIR, GLASS, substrate_mm=mm), requirements=tuple(reqs),
                materials=materials or {"H": H, "L": L, "M": M}, limits=Limits(),
                fixed_bottom=tuple(fixed_bottom), fixed_top=tuple(fixed_top))


REQS = {
    "R-mean-oblique": [Requirement("R", "<=", 0.0, (420, 680), step_nm=20, over="every",
                                   angles_deg=(0.0, 40.0), polarization="mean")],
    "T-p-average": [Requirement("T", ">=", 1.0, (450, 650), step_nm=25, over="average",
                                angles_deg=(50.0,), polarization="p")],
    "A-and-R-s": [Requirement("A", "<=", 0.0, (450, 650), step_nm=50, over="every"),
                  Requirement("R", "=", 0.3, (500, 520), step_nm=10, tolerance=0.05,
                              polarization="s", angles_deg=(20.0,))],
    "GDD-s": [Requirement("GDD", "=", 30.0, (520, 580), step_nm=20, tolerance=10.0,
                          polarization="s", over="every"),
              Requirement("R", ">=", 0.9, (540, 560), step_nm=10, polarization="s")],
    "phase-p-transmitted": [Requirement("phase", "=", 1.0, (520, 580), step_nm=30,
                                        tolerance=0.1, polarization="p", side="transmitted",
                                        angles_deg=(30.0,))],
}
DESIGN = Design(("H", "L", "M", "L"), (25.0, 60.0, 40.0, 95.0))


def finite_difference(merit, design, scan, m, p, eps):
    trial = insert_needle(design, int(scan.layer[p]), float(scan.z_nm[p]), scan.materials[m],
                          eps)
    return (merit.value(trial) - merit.value(design)) / eps


def check_against_insertion(merit, design, scan, n_probes=9):
    finite = np.argwhere(np.isfinite(scan.values))
    assert len(finite) > 0
    pick = finite[np.linspace(0, len(finite) - 1, n_probes).astype(int)]
    for m, p in pick:
        P = scan.values[m, p]
        fd1 = finite_difference(merit, design, scan, m, p, EPS)
        fd2 = finite_difference(merit, design, scan, m, p, EPS / 2)
        scale = np.nanmax(np.abs(scan.values))
        # first-order agreement with a 0.01 nm layer (error O(eps))
        assert P == pytest.approx(fd1, rel=2e-2, abs=2e-3 * scale), (m, p)
        # Richardson extrapolation 2 fd(eps/2) - fd(eps) removes the O(eps) term
        assert P == pytest.approx(2 * fd2 - fd1, rel=2e-4, abs=1e-5 * scale), (m, p)


class TestNeedleFunction:
    @pytest.mark.parametrize("case", sorted(REQS))
    def test_analytic_matches_insertion_of_a_thin_layer(self, case):
        merit = Merit.from_spec(spec_for(REQS[case]))
        scan = needle_function(merit, DESIGN, step_nm=7.0, method="analytic")
        check_against_insertion(merit, DESIGN, scan)

    @pytest.mark.parametrize("case", sorted(REQS))
    def test_analytic_equals_expanded_stack(self, case):
        merit = Merit.from_spec(spec_for(REQS[case]))
        a = needle_function(merit, DESIGN, step_nm=7.0, method="analytic")
        b = needle_function(merit, DESIGN, step_nm=7.0, method="expanded")
        np.testing.assert_array_equal(np.isnan(a.values), np.isnan(b.values))
        np.testing.assert_allclose(a.values, b.values, rtol=1e-7,
                                   atol=1e-9 * np.nanmax(np.abs(a.values)))

    def test_thick_substrate_uses_the_expanded_stack_and_matches_insertion(self):
        reqs = [Requirement("R", "<=", 0.0, (420, 680), step_nm=20, over="every",
                            angles_deg=(0.0, 30.0)),
                Requirement("T", ">=", 1.0, (500, 600), step_nm=25, polarization="p",
                            angles_deg=(30.0,))]
        merit = Merit.from_spec(spec_for(reqs, mm=1.0))
        scan = needle_function(merit, DESIGN, step_nm=9.0)
        check_against_insertion(merit, DESIGN, scan)

    def test_with_fixed_layers(self):
        spec = spec_for(REQS["R-mean-oblique"], fixed_bottom=(Layer(M, 5.0),),
                        fixed_top=(Layer(L, 10.0), Layer(H, 3.0)))
        merit = Merit.from_spec(spec)
        scan = needle_function(merit, DESIGN, step_nm=7.0)
        check_against_insertion(merit, DESIGN, scan)
        # depths are measured from the substrate, past the fixed bottom layer
        assert scan.depth_nm.min() == pytest.approx(5.0)
        assert scan.depth_nm.max() == pytest.approx(5.0 + DESIGN.d.sum())

    def test_single_layer_and_empty_design(self):
        merit = Merit.from_spec(spec_for(REQS["R-mean-oblique"]))
        one = Design(("L",), (100.0,))
        check_against_insertion(merit, one, needle_function(merit, one, step_nm=10.0), 5)
        empty = Design((), ())
        scan = needle_function(merit, empty)
        assert scan.values.shape == (3, 1)
        for m in range(3):
            fd = [(merit.value(insert_needle(empty, -1, 0.0, scan.materials[m], e))
                   - merit.value(empty)) / e for e in (EPS, EPS / 2)]
            # a lossless needle on a bare surface changes r in quadrature: P = 0 exactly and the
            # 0.01 nm difference quotient is its second-order term; Richardson removes it
            assert scan.values[m, 0] == pytest.approx(2 * fd[1] - fd[0], rel=1e-3, abs=1e-6)
        assert abs(scan.values[0, 0]) < 1e-12 and scan.values[2, 0] > 0.0


class TestMeaning:
    def test_same_material_as_the_host_is_no_candidate(self):
        merit = Merit.from_spec(spec_for(REQS["R-mean-oblique"]))
        scan = needle_function(merit, DESIGN, step_nm=5.0)
        for m, sym in enumerate(scan.materials):
            inside = (scan.z_nm > 0) & (scan.z_nm < DESIGN.d[scan.layer])
            host = np.array([DESIGN.symbols[f] for f in scan.layer])
            assert np.all(np.isnan(scan.values[m][inside & (host == sym)]))
            assert np.all(np.isfinite(scan.values[m][inside & (host != sym)]))

    def test_ranked_is_most_negative_first(self):
        scan = NeedleScan(("H", "L"), np.array([0, 0, 1]), np.array([0.0, 1.0, 2.0]),
                          np.array([0.0, 1.0, 2.0]),
                          np.array([[0.5, -2.0, np.nan], [-1.0, 3.0, -0.1]]), merit=1.0)
        assert [(m, p) for _, m, p in scan.ranked()] == [(0, 1), (1, 0), (1, 2)]
        scan.multiplier = 0.5          # on the total-thickness limit: P + λ must be < 0
        assert [(m, p) for _, m, p in scan.ranked()] == [(0, 1), (1, 0)]

    def test_insert_needle_splits_or_adds(self):
        d = Design(("H", "L"), (10.0, 20.0))
        assert insert_needle(d, 1, 5.0, "H", 1.0) == Design(("H", "L", "H", "L"),
                                                            (10.0, 5.0, 1.0, 15.0))
        assert insert_needle(d, 0, 0.0, "L", 2.0) == Design(("L", "H", "L"), (2.0, 10.0, 20.0))
        assert insert_needle(d, 1, 20.0, "H", 3.0) == Design(("H", "L", "H"), (10.0, 20.0, 3.0))
