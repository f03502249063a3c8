"""The engine's and the stack-level API's contracts: shapes, batches, chunking, threads, bad input.

Shape convention (filmstack.optics docstring): indices (..., L, W), thicknesses (..., L), results
(..., A, W), per-layer derivatives (..., L, A, W); the batch dimensions of all inputs broadcast.
These are contracts of our own API (common practice, no published source); the physics is
checked in test_optics_reference.py, test_optics_wave_equation.py and test_optics_properties.py.
"""

from __future__ import annotations

import numpy as np
import pytest

import filmstack
import filmstack.optics._grid as grid
import filmstack.optics.coherent as coherent_mod
from filmstack import Constant, InputError, Layer, Stack
from filmstack.optics import coherent_derivatives, coherent_response, stack_vectors

AIR = Constant(name="air", n=1.0)
GLASS = Constant(name="glass", n=1.52)
H = Constant(name="H", n=2.35)
L_ = Constant(name="L", n=1.46)
M = Constant(name="absorber", n=1.9, k=0.2)

WL = np.linspace(400.0, 800.0, 9)
ANG = np.array([0.0, 30.0, 60.0])


def make_stack(**kw):
    layers = [Layer(H, 60.0), Layer(L_, 95.0), Layer(M, 20.0), Layer(L_, 110.0)]
    return Stack(incident=AIR, substrate=GLASS, layers=layers, **kw)


def random_batch(rng, B=5, L=4, W=WL.size, absorbing_rows=(1, 3)):
    N = rng.uniform(1.3, 2.5, (B, L, W)) + 0j
    for b in (i for i in absorbing_rows if i < B):
        N[b] += 1j * rng.uniform(0.0, 0.3, (L, W))
    d = rng.uniform(0.0, 250.0, (B, L))
    return N, d


class TestShapes:
    def test_engine_shapes(self):
        rng = np.random.default_rng(0)
        N, d = random_batch(rng)
        res = coherent_response(N[0], d[0], 1.0, 1.52, WL, ANG, "s")
        assert res.R.shape == res.T.shape == res.A.shape == res.r.shape == (3, WL.size)
        res = coherent_response(N[0], d[0], 1.0, 1.52, WL, 25.0, "p")
        assert res.R.shape == (1, WL.size)
        res = coherent_response(N, d, 1.0, 1.52, WL, ANG, "mean")
        assert res.R.shape == (5, 3, WL.size) and res.r is None
        # broadcasting: thicknesses (2, 1, L) against indices (3, L, W)
        res = coherent_response(N[:3], d[:2, None, :], 1.0, 1.52, WL, ANG, "s")
        assert res.R.shape == (2, 3, 3, WL.size)
        # index arrays for the media, one per wavelength and per batch element
        res = coherent_response(N, d, np.full(WL.size, 1.0), np.full((5, WL.size), 1.6 + 0.01j),
                                WL, ANG, "s")
        assert res.R.shape == (5, 3, WL.size)

    def test_derivative_and_vector_shapes(self):
        rng = np.random.default_rng(1)
        N, d = random_batch(rng, B=2)
        der = coherent_derivatives(N, d, 1.0, 1.52, WL, ANG, "s")
        assert der.R.shape == (2, 3, WL.size)
        assert der.dR.shape == der.dT.shape == der.dA.shape == der.dr.shape == (2, 4, 3, WL.size)
        assert der.dphase_r.shape == (2, 4, 3, WL.size) and der.phase_r.shape == (2, 3, WL.size)
        sv = stack_vectors(N, d, 1.0, 1.52, WL, ANG, "p")
        assert sv.kz.shape == sv.eta.shape == (2, 4, 3, WL.size)
        assert sv.v.shape == sv.w_num.shape == sv.w_den.shape == (2, 5, 2, 3, WL.size)
        assert sv.r.shape == sv.eta_in.shape == (2, 3, WL.size)

    def test_stack_level_shapes(self):
        st = make_stack()
        sp = filmstack.spectrum(st, WL, ANG, "mean")
        assert sp.R.shape == (3, WL.size)
        np.testing.assert_array_equal(sp.wavelength_nm, WL)
        np.testing.assert_array_equal(sp.angle_deg, ANG)
        assert sp.polarization == "mean"
        sp = filmstack.spectrum(st, 550.0, 0.0, "s")
        assert sp.R.shape == (1, 1) and sp.r.shape == (1, 1)
        d = np.tile(st.thicknesses_nm, (2, 3, 1))
        sp = filmstack.spectrum(st, WL, ANG, "s", thicknesses_nm=d)
        assert sp.R.shape == (2, 3, 3, WL.size)
        der = filmstack.spectrum_derivatives(st, WL, ANG, "mean", thicknesses_nm=d)
        assert der.dR.shape == (2, 3, 4, 3, WL.size)
        thick = make_stack(substrate_mm=1.0)
        sp = filmstack.spectrum(thick, WL, ANG, "p", thicknesses_nm=d)
        assert sp.R.shape == (2, 3, 3, WL.size) and sp.r is None
        der = filmstack.spectrum_derivatives(thick, WL, ANG, "s", thicknesses_nm=d)
        assert der.dT.shape == (2, 3, 4, 3, WL.size)

    def test_no_layers(self):
        st = Stack(incident=AIR, substrate=GLASS)
        sp = filmstack.spectrum(st, WL, ANG, "s")
        assert sp.R.shape == (3, WL.size)
        der = filmstack.spectrum_derivatives(st, WL, ANG, "s")
        assert der.dR.shape == (0, 3, WL.size)


class TestBatches:
    @pytest.mark.parametrize("pol", ["s", "p", "mean"])
    def test_batched_equals_per_element(self, pol):
        # one call with thicknesses (B, L) and indices (B, L, W) against B separate calls
        rng = np.random.default_rng(2)
        N, d = random_batch(rng)
        res = coherent_response(N, d, 1.0, 1.52, WL, ANG, pol)
        der = coherent_derivatives(N, d, 1.0, 1.52, WL, ANG, pol)
        for b in range(N.shape[0]):
            one = coherent_response(N[b], d[b], 1.0, 1.52, WL, ANG, pol)
            np.testing.assert_allclose(res.R[b], one.R, rtol=0, atol=1e-14)
            np.testing.assert_allclose(res.T[b], one.T, rtol=0, atol=1e-14)
            if pol != "mean":
                np.testing.assert_allclose(res.r[b], one.r, rtol=0, atol=1e-14)
            oned = coherent_derivatives(N[b], d[b], 1.0, 1.52, WL, ANG, pol)
            np.testing.assert_allclose(der.dR[b], oned.dR, rtol=0, atol=1e-13)
            np.testing.assert_allclose(der.dT[b], oned.dT, rtol=0, atol=1e-13)

    def test_batched_media_equal_per_element(self):
        # batch dimensions on the incident and exit indices broadcast against the layers
        rng = np.random.default_rng(7)
        N, d = random_batch(rng, B=1)
        n0 = rng.uniform(1.0, 1.5, (4, WL.size))
        ne = rng.uniform(1.4, 1.8, (4, WL.size)) + 0.01j
        res = coherent_response(N[0], d[0], n0, ne, WL, ANG, "p")
        der = coherent_derivatives(N[0], d[0], n0, ne, WL, ANG, "p")
        sv = stack_vectors(N[0], d[0], n0, ne, WL, ANG, "p")
        for b in range(4):
            one = coherent_response(N[0], d[0], n0[b], ne[b], WL, ANG, "p")
            np.testing.assert_allclose(res.r[b], one.r, rtol=0, atol=1e-14)
            oned = coherent_derivatives(N[0], d[0], n0[b], ne[b], WL, ANG, "p")
            np.testing.assert_allclose(der.dr[b], oned.dr, rtol=0, atol=1e-13)
            onev = stack_vectors(N[0], d[0], n0[b], ne[b], WL, ANG, "p")
            np.testing.assert_allclose(sv.v[b], onev.v, rtol=0, atol=1e-13)

    def test_stack_level_batch_equals_per_element(self):
        st = make_stack()
        rng = np.random.default_rng(3)
        d = st.thicknesses_nm * rng.uniform(0.9, 1.1, (4, 4))
        N = st.layer_indices(WL) * rng.uniform(0.98, 1.02, (4, 4, 1))
        for thick in (None, 2.0):
            s = make_stack(substrate_mm=thick) if thick else st
            sp = filmstack.spectrum(s, WL, ANG, "mean", thicknesses_nm=d, layer_indices=N)
            der = filmstack.spectrum_derivatives(s, WL, ANG, "mean", thicknesses_nm=d,
                                                 layer_indices=N)
            for b in range(4):
                one = filmstack.spectrum(s.with_thicknesses(d[b]), WL, ANG, "mean",
                                         layer_indices=N[b])
                np.testing.assert_allclose(sp.R[b], one.R, rtol=0, atol=1e-14)
                np.testing.assert_allclose(sp.T[b], one.T, rtol=0, atol=1e-14)
                oned = filmstack.spectrum_derivatives(s.with_thicknesses(d[b]), WL, ANG, "mean",
                                                      layer_indices=N[b])
                np.testing.assert_allclose(der.dR[b], oned.dR, rtol=0, atol=1e-13)

    def test_override_defaults_to_the_stack(self):
        st = make_stack()
        a = filmstack.spectrum(st, WL, ANG, "s")
        b = filmstack.spectrum(st, WL, ANG, "s", thicknesses_nm=st.thicknesses_nm,
                               layer_indices=st.layer_indices(WL))
        np.testing.assert_array_equal(a.R, b.R)
        c = filmstack.spectrum(st, WL, ANG, "s", thicknesses_nm=st.thicknesses_nm * 1.05)
        assert np.max(np.abs(c.R - a.R)) > 1e-3


class TestChunking:
    def _spy(self, monkeypatch):
        calls = []
        orig = coherent_mod.chunk_terms

        def spy(problem, start, stop, pols):
            calls.append((start, stop))
            return orig(problem, start, stop, pols)

        monkeypatch.setattr(coherent_mod, "chunk_terms", spy)
        return calls

    @pytest.mark.parametrize("pol", ["s", "mean"])
    def test_chunk_points_does_not_change_results(self, monkeypatch, pol):
        # a batch mixing absorbing and lossless elements, so chunks take both the real and the
        # complex path; chunks of 7 points cut through wavelengths, angles and batch elements
        rng = np.random.default_rng(4)
        N, d = random_batch(rng)
        ref = coherent_response(N, d, 1.0, 1.52, WL, ANG, pol)
        calls = self._spy(monkeypatch)
        monkeypatch.setattr(grid, "CHUNK_POINTS", 7)
        small = coherent_response(N, d, 1.0, 1.52, WL, ANG, pol)
        assert len(calls) == -(-N.shape[0] * ANG.size * WL.size // 7)   # it really chunked
        np.testing.assert_allclose(small.R, ref.R, rtol=0, atol=1e-14)
        np.testing.assert_allclose(small.T, ref.T, rtol=0, atol=1e-14)
        if pol != "mean":
            np.testing.assert_allclose(small.r, ref.r, rtol=0, atol=1e-14)

    def test_chunk_argument_for_derivatives_and_vectors(self, monkeypatch):
        # coherent_derivatives and stack_vectors pick their own chunk size (>= 256 points);
        # force 5 through run_chunks' ``chunk`` argument
        rng = np.random.default_rng(5)
        N, d = random_batch(rng)
        ref = coherent_derivatives(N, d, 1.0, 1.52, WL, ANG, "p")
        ref_sv = stack_vectors(N, d, 1.0, 1.52, WL, ANG, "s")
        orig = grid.run_chunks
        used = []

        def small_chunks(func, problem, chunk=None):
            used.append(chunk)
            return orig(func, problem, chunk=5)

        monkeypatch.setattr(coherent_mod, "run_chunks", small_chunks)
        calls = self._spy(monkeypatch)
        der = coherent_derivatives(N, d, 1.0, 1.52, WL, ANG, "p")
        sv = stack_vectors(N, d, 1.0, 1.52, WL, ANG, "s")
        assert len(used) == 2 and len(calls) == 2 * -(-N.shape[0] * ANG.size * WL.size // 5)
        for name in ("R", "T", "r", "dR", "dT", "dr", "dt", "dphase_r"):
            np.testing.assert_allclose(getattr(der, name), getattr(ref, name), rtol=1e-12,
                                       atol=1e-13, err_msg=name)
        for name in ("v", "w_num", "w_den", "r"):
            np.testing.assert_allclose(getattr(sv, name), getattr(ref_sv, name), rtol=1e-12,
                                       atol=1e-13, err_msg=name)

    def test_one_thread_and_two_threads_agree(self, monkeypatch):
        # FILMSTACK_THREADS=1 runs the chunks in order; 2 runs them on a pool. The chunks are the
        # same, so the numbers must be identical, not merely close.
        rng = np.random.default_rng(6)
        N, d = random_batch(rng, B=8)
        monkeypatch.setattr(grid, "CHUNK_POINTS", 16)
        out = {}
        for n in ("1", "2"):
            monkeypatch.setenv("FILMSTACK_THREADS", n)
            assert grid._threads() == int(n)
            out[n] = (coherent_response(N, d, 1.0, 1.52, WL, ANG, "s"),
                      coherent_derivatives(N, d, 1.0, 1.52, WL, ANG, "mean"),
                      stack_vectors(N, d, 1.0, 1.52, WL, ANG, "p"))
        a, b = out["1"], out["2"]
        np.testing.assert_array_equal(a[0].r, b[0].r)
        np.testing.assert_array_equal(a[0].T, b[0].T)
        np.testing.assert_array_equal(a[1].dR, b[1].dR)
        np.testing.assert_array_equal(a[1].dT, b[1].dT)
        np.testing.assert_array_equal(a[2].v, b[2].v)
        np.testing.assert_array_equal(a[2].w_num, b[2].w_num)


class TestBadInput:
    """Bad input raises InputError (a ValueError) naming the argument and the value."""

    def test_is_value_error(self):
        assert issubclass(InputError, ValueError)

    @pytest.mark.parametrize("d,match", [([np.nan, 1, 1, 1], r"thickness.*nan"),
                                         ([np.inf, 1, 1, 1], r"thickness.*inf"),
                                         ([10, -5, 1, 1], r"thickness.*-5"),
                                         ([10, 5, 1], r"thicknesses_nm.*4.*\(3,\)")])
    def test_thickness(self, d, match):
        with pytest.raises(ValueError, match=match):
            filmstack.spectrum(make_stack(), WL, 0.0, thicknesses_nm=d)
        with pytest.raises(ValueError, match=match):
            filmstack.spectrum_derivatives(make_stack(), WL, 0.0, thicknesses_nm=d)

    @pytest.mark.parametrize("d", [-1.0, np.nan, np.inf])
    def test_layer_thickness(self, d):
        with pytest.raises(ValueError, match=r"thickness.*" + str(d)):
            Layer(H, d)

    def test_negative_k(self):
        with pytest.raises(ValueError, match=r"k must be >= 0.*-0\.1"):
            Constant(name="bad", n=1.5, k=-0.1)
        N = make_stack().layer_indices(WL).copy()
        N[2] = 1.9 - 0.1j
        with pytest.raises(ValueError, match=r"k must be >= 0.*-0\.1"):
            filmstack.spectrum(make_stack(), WL, 0.0, layer_indices=N)
        with pytest.raises(ValueError, match=r"n_layers.*k must be >= 0.*-0\.1"):
            coherent_response(N, make_stack().thicknesses_nm, 1.0, 1.52, WL, 0.0)
        with pytest.raises(ValueError, match=r"n_exit"):
            coherent_response(N.real + 0j, make_stack().thicknesses_nm, 1.0, 1.5 - 0.1j, WL, 0.0)

    def test_override_errors_name_the_api_argument(self):
        N = make_stack().layer_indices(WL).copy()
        N[2] = 1.9 - 0.1j
        with pytest.raises(ValueError, match=r"layer_indices"):
            filmstack.spectrum(make_stack(), WL, 0.0, layer_indices=N)

    @pytest.mark.parametrize("angle,match", [(90.0, r"angle.*90"), (95.0, r"angle.*95"),
                                             (-1.0, r"angle.*-1"), (np.nan, r"angle.*nan")])
    def test_angle(self, angle, match):
        with pytest.raises(ValueError, match=match):
            filmstack.spectrum(make_stack(), WL, [0.0, angle])
        with pytest.raises(ValueError, match=match):
            filmstack.field_profile(make_stack(), 550.0, angle)
        with pytest.raises(ValueError, match=match):
            coherent_response(np.ones((1, 1)) * 1.5, [10.0], 1.0, 1.5, [500.0], angle)

    def test_empty_grids(self):
        with pytest.raises(ValueError, match=r"wavelengths_nm.*empty"):
            filmstack.spectrum(make_stack(), [], 0.0)
        with pytest.raises(ValueError, match=r"angles_deg.*empty"):
            filmstack.spectrum(make_stack(), WL, [])
        with pytest.raises(ValueError, match=r"wavelength_nm.*empty"):
            coherent_response(np.ones((1, 0)), [10.0], 1.0, 1.5, [], 0.0)
        with pytest.raises(ValueError, match=r"angle_deg.*empty"):
            coherent_response(np.ones((1, 1)), [10.0], 1.0, 1.5, [500.0], [])

    def test_bad_wavelengths(self):
        for wl in ([-500.0], [0.0], [np.inf], [np.nan]):
            with pytest.raises(ValueError, match=r"wavelength"):
                filmstack.spectrum(make_stack(), wl, 0.0)
            with pytest.raises(ValueError, match=r"wavelength"):
                coherent_response(np.ones((1, 1)), [10.0], 1.0, 1.5, wl, 0.0)
        with pytest.raises(ValueError, match=r"wavelengths_nm.*\(1, 2\)"):
            filmstack.spectrum(make_stack(), [[500.0, 600.0]], 0.0)

    def test_mismatched_shapes(self):
        st = make_stack()
        with pytest.raises(ValueError, match=r"layer_indices.*\(2, 1\)"):
            filmstack.spectrum(st, WL, 0.0, layer_indices=np.ones((2, 1)))
        with pytest.raises(ValueError, match=r"layer_indices"):
            filmstack.spectrum(st, WL, 0.0, layer_indices=np.ones((4, WL.size + 1)))
        with pytest.raises(ValueError, match=r"broadcast"):
            filmstack.spectrum(st, WL, 0.0, thicknesses_nm=np.ones((3, 4)),
                               layer_indices=np.ones((2, 4, WL.size)))
        with pytest.raises(ValueError, match=r"thickness_nm.*L = 2"):
            coherent_response(np.ones((2, 3)), [1.0, 2.0, 3.0], 1.0, 1.5, [1, 2, 3.0], 0.0)
        with pytest.raises(ValueError, match=r"n_layers.*W = 3"):
            coherent_response(np.ones((2, 4)), [1.0, 2.0], 1.0, 1.5, [1, 2, 3.0], 0.0)
        with pytest.raises(ValueError, match=r"n_incident"):
            coherent_response(np.ones((2, 3)), [1.0, 2.0], [1.0, 1.0], 1.5, [1, 2, 3.0], 0.0)

    def test_absorbing_incident_medium(self):
        st = Stack(incident=Constant(name="inky", n=1.5, k=0.01), substrate=GLASS)
        with pytest.raises(ValueError, match=r"inky.*absorbs.*0\.01"):
            filmstack.spectrum(st, WL, 0.0)
        with pytest.raises(ValueError, match=r"n_incident"):
            coherent_response(np.ones((1, 1)), [1.0], 1.5 + 0.01j, 1.5, [500.0], 0.0)

    def test_polarization(self):
        with pytest.raises(ValueError, match=r"polarization.*'x'"):
            filmstack.spectrum(make_stack(), WL, 0.0, "x")
        with pytest.raises(ValueError, match=r"polarization.*'mean'"):
            filmstack.phase_response(make_stack(), WL, 0.0, "mean")
        with pytest.raises(ValueError, match=r"polarization.*'mean'"):
            filmstack.field_profile(make_stack(), 550.0, 0.0, "mean")
        with pytest.raises(ValueError, match=r"polarization"):
            stack_vectors(np.ones((1, 1)), [1.0], 1.0, 1.5, [500.0], 0.0, "mean")

    def test_other_arguments(self):
        with pytest.raises(ValueError, match=r"side.*'up'"):
            filmstack.phase_response(make_stack(), WL, 0.0, "s", side="up")
        with pytest.raises(ValueError, match=r"step_nm.*0"):
            filmstack.field_profile(make_stack(), 550.0, 0.0, "s", step_nm=0.0)
        with pytest.raises(ValueError, match=r"substrate.*-1"):
            make_stack(substrate_mm=-1.0)
