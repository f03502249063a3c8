"""Colour of stacks (filmstack.colour.stack_colour) checked against closed-form optics.

Sources beside each check: Fresnel reflectance of a bare interface and the single-film
reflectance formula (Macleod, Thin-Film Optical Filters, 4th ed., §2.2 and eq. 2.xx for one
film); CIE 15:2018 for CIELAB.
"""

from __future__ import annotations

import numpy as np
import pytest

from filmstack import AIR, Constant, Layer, Stack
from filmstack.colour import colorimetry as cm
from filmstack.colour.stack_colour import ColourSetting, delta_e_stacks, stack_colour
from filmstack.errors import InputError

GLASS = Constant(name="glass-1.52", n=1.52)
FILM = Constant(name="film-1.38", n=1.38)
HIGH = Constant(name="film-2.3", n=2.3)


def _single_film_R(n0, n1, n2, d, wl):
    """Normal-incidence reflectance of one lossless film (Macleod 4th ed. §2.2, one film):
    R = (r1² + r2² + 2 r1 r2 cos 2δ) / (1 + r1² r2² + 2 r1 r2 cos 2δ), δ = 2π n1 d / λ."""
    r1 = (n0 - n1) / (n0 + n1)
    r2 = (n1 - n2) / (n1 + n2)
    c = np.cos(2 * 2 * np.pi * n1 * d / wl)
    return (r1**2 + r2**2 + 2 * r1 * r2 * c) / (1 + r1**2 * r2**2 + 2 * r1 * r2 * c)


class TestStackColour:
    def test_bare_glass_is_neutral_grey_at_fresnel_level(self):
        # Fresnel: R = ((n-1)/(n+1))² at normal incidence (Born & Wolf, Principles of Optics,
        # §1.5); a flat spectrum has the white's chromaticity: a* = b* = 0 (CIE 15:2018 §8.2.1)
        st = Stack(incident=AIR, substrate=GLASS)
        c = stack_colour(st, 0.0, illuminant="D65", observer=10)
        r = ((1.52 - 1) / (1.52 + 1)) ** 2
        assert c.XYZ[0, 1] == pytest.approx(100 * r, rel=1e-9)
        np.testing.assert_allclose(c.Lab[0, 1:], [0.0, 0.0], atol=1e-9)
        assert c.Lab[0, 0] == pytest.approx(116 * r ** (1 / 3) - 16, rel=1e-9)

    @pytest.mark.parametrize("ill,obs", [("D65", 2), ("A", 10), ("F11", 2)])
    def test_single_film_matches_closed_form(self, ill, obs):
        # quarter wave of n=1.38 at 550 nm on n=1.52: the single-film formula (Macleod §2.2)
        d = 550 / (4 * 1.38)
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(FILM, d),))
        c = stack_colour(st, 0.0, illuminant=ill, observer=obs)
        wl = cm.COLOUR_WAVELENGTHS_NM
        xyz = cm.spectra_to_XYZ(_single_film_R(1.0, 1.38, 1.52, d, wl), wl, ill, obs)
        np.testing.assert_allclose(c.XYZ[0], xyz, rtol=1e-9)
        np.testing.assert_allclose(c.Lab[0], cm.XYZ_to_Lab(xyz, cm.white_point_XYZ(ill, obs)),
                                   atol=1e-9)

    def test_single_layer_ar_reflects_purple(self):
        # a quarter-wave MgF2-like AR at 550 nm reflects the ends of the spectrum: a* > 0,
        # b* < 0, a violet-purple hue (the familiar purple lens reflection; common practice, no
        # published source). CIELAB hue of sRGB blue-violet #8A2BE2 is 313°, purple #800080 328°.
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(FILM, 550 / (4 * 1.38)),))
        c = stack_colour(st)
        assert c.Lab[0, 1] > 1 and c.Lab[0, 2] < -1
        assert 290 < c.LCh[0, 2] < 340

    def test_transmitted_plus_reflected_is_white_for_lossless_stack(self):
        # energy conservation R + T = 1 (no absorption, semi-infinite substrate) and the
        # linearity of XYZ in the spectrum (CIE 15:2018 §7)
        st = Stack(incident=AIR, substrate=GLASS,
                   layers=(Layer(HIGH, 60.0), Layer(FILM, 95.0)))
        angles = [0.0, 30.0, 60.0]
        r = stack_colour(st, angles, side="reflected")
        t = stack_colour(st, angles, side="transmitted")
        np.testing.assert_allclose(r.XYZ + t.XYZ, np.broadcast_to(cm.white_point_XYZ(), (3, 3)),
                                   atol=1e-9)

    def test_bare_substrate_white(self):
        st = Stack(incident=AIR, substrate=GLASS)
        c = stack_colour(st, [0.0, 45.0], white="bare-substrate")
        np.testing.assert_allclose(c.Lab, [[100, 0, 0], [100, 0, 0]], atol=1e-9)
        # the sRGB still shows the colour relative to the diffuser (dark grey, not white)
        assert c.srgb_hex[0] == stack_colour(st, 0.0).srgb_hex[0]

    def test_shapes_for_angles_and_batches(self):
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(HIGH, 60.0), Layer(FILM, 95.0)))
        d = np.random.default_rng(0).uniform(50, 150, size=(2, 4, 2))
        c = stack_colour(st, [0, 20, 40], thicknesses_nm=d)
        assert c.Lab.shape == (2, 4, 3, 3) and c.srgb_hex.shape == (2, 4, 3)
        one = stack_colour(st.with_thicknesses(d[1, 2]), [0, 20, 40])
        np.testing.assert_allclose(c.Lab[1, 2], one.Lab, atol=1e-9)
        assert list(c.srgb_hex[1, 2]) == list(one.srgb_hex)

    def test_to_dict_keys(self):
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(FILM, 100.0),))
        d = stack_colour(st, [0, 30]).to_dict()
        for k in ("illuminant", "observer", "angle_deg", "XYZ", "Lab", "srgb_hex"):
            assert k in d
        assert len(d["Lab"]) == 2 and d["observer"] == 2

    def test_bad_setting_and_angle(self):
        st = Stack(incident=AIR, substrate=GLASS)
        with pytest.raises(InputError, match="side"):
            stack_colour(st, side="sideways")
        with pytest.raises(InputError, match="white"):
            ColourSetting(white="paper")
        with pytest.raises(InputError, match="angle"):
            stack_colour(st, 95.0)


class TestDeltaEStacks:
    def test_same_stack_zero_and_thickness_error_positive(self):
        a = Stack(incident=AIR, substrate=GLASS, layers=(Layer(HIGH, 60.0), Layer(FILM, 95.0)))
        b = a.with_thicknesses([63.0, 95.0])
        np.testing.assert_allclose(delta_e_stacks(a, a, [0, 30]), [0.0, 0.0], atol=1e-9)
        de = delta_e_stacks(a, b, [0, 30])
        assert de.shape == (2,) and np.all(de > 0.1)
        # equals ΔE2000 of the two colours (Sharma, Wu & Dalal 2005 via colour-science)
        np.testing.assert_allclose(de, cm.delta_e_2000(stack_colour(a, [0, 30]).Lab,
                                                       stack_colour(b, [0, 30]).Lab))


class TestColourGrid:
    def test_material_from_400_nm_gets_a_cut_grid_and_a_warning(self):
        # ASTM E308-18: a truncated range is handled by holding the spectrum at its end values
        # (tails added to the end weights); for a smooth single-film spectrum the colour moves by
        # well under one unit
        from filmstack.colour.stack_colour import colour_wavelengths
        from filmstack.errors import FilmstackWarning

        short = Constant(name="film-from-400", n=2.3, range_nm=(400.0, 1000.0))
        full = Constant(name="film-full", n=2.3)
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(short, 60.0),))
        with pytest.warns(FilmstackWarning, match="400-780 nm"):
            wl = colour_wavelengths(st.materials)
        assert wl[0] == 400.0 and wl[-1] == 780.0
        c = stack_colour(st)
        ref = stack_colour(Stack(incident=AIR, substrate=GLASS, layers=(Layer(full, 60.0),)))
        assert np.max(np.abs(c.XYZ - ref.XYZ)) < 1.0
        assert cm.delta_e_2000(c.Lab, ref.Lab)[0] < 1.0

    def test_material_without_400_700_is_refused(self):
        from filmstack.errors import OutOfRangeError

        narrow = Constant(name="ir-only", n=2.0, range_nm=(450.0, 2000.0))
        st = Stack(incident=AIR, substrate=GLASS, layers=(Layer(narrow, 60.0),))
        with pytest.raises(OutOfRangeError, match="ir-only.*400-700"):
            stack_colour(st)


class TestThickLayerWarning:
    # a layer's fringes repeat every λ²/(2nd) (Born & Wolf, Principles of Optics, 7th ed.,
    # §7.6); sampled every 5 nm from 380 nm they alias beyond 2nd = 380²/10 nm
    def test_thick_layer_warns_thin_multilayer_does_not(self):
        import warnings

        from filmstack.errors import FilmstackWarning
        sub = Constant(name="glass", n=1.52)
        film = Constant(name="film", n=1.46)
        thick = Stack(incident=AIR, substrate=sub, layers=(Layer(film, 20000.0),))
        with pytest.warns(FilmstackWarning, match=r"layers\[0\].*alias"):
            stack_colour(thick, [0.0])
        # 40 layers of 150 nm: 6 µm optical thickness in all, each layer far below the limit
        multi = Stack(incident=AIR, substrate=sub, layers=tuple(
            Layer(Constant(name=f"m{i % 2}", n=1.46 + 0.8 * (i % 2)), 150.0) for i in range(40)))
        with warnings.catch_warnings():
            warnings.simplefilter("error", FilmstackWarning)
            stack_colour(multi, [0.0])
