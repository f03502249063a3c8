"""Checks of the pure colorimetry (filmstack.colour.colorimetry) against the outside world.

References named beside each check: colour-science (a general-purpose reference library, its own
``sd_to_XYZ`` / ``XYZ_to_Lab`` / ``XYZ_to_sRGB``), CIE 15:2018, Sharma, Wu & Dalal (2005).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from filmstack.colour import colorimetry as cm
from filmstack.errors import InputError

colour = pytest.importorskip("colour")

# colour-science (the reference side) announces that it aligns shapes; that is expected here.
pytestmark = pytest.mark.filterwarnings("ignore::colour.utilities.ColourRuntimeWarning")

ALL_SETTINGS = [(ill, obs) for ill in cm.ILLUMINANTS for obs in cm.OBSERVERS]


def _cs_sd(values, wl):
    """A colour-science spectral distribution, linearly interpolated and held constant beyond its
    ends, aligned to the CIE 1 nm grid: the definition our weights claim to integrate exactly."""
    from colour.algebra import Extrapolator, LinearInterpolator

    sd = colour.SpectralDistribution(values, wl, interpolator=LinearInterpolator,
                                     extrapolator=Extrapolator,
                                     extrapolator_kwargs={"method": "Constant"})
    return sd.copy().align(colour.SpectralShape(360, 830, 1))


def _cs_refs(ill, obs):
    return (colour.MSDS_CMFS[cm.OBSERVERS[obs]],
            colour.SDS_ILLUMINANTS[cm.ILLUMINANTS[ill]])


class TestSpectraToXYZ:
    @pytest.mark.parametrize("ill,obs", ALL_SETTINGS)
    def test_random_spectra_1nm_match_colour_science(self, ill, obs):
        # colour-science sd_to_XYZ, "Integration" method (CIE 15:2018 §7.1), 1 nm data
        wl = np.arange(360.0, 831.0)
        rng = np.random.default_rng(11)
        spectra = rng.random((3, wl.size))
        cmfs, illum = _cs_refs(ill, obs)
        ref = np.array([colour.sd_to_XYZ(colour.SpectralDistribution(r, wl), cmfs, illum,
                                         method="Integration") for r in spectra])
        np.testing.assert_allclose(cm.spectra_to_XYZ(spectra, wl, ill, obs), ref,
                                   rtol=0, atol=1e-9)

    @pytest.mark.parametrize("ill,obs", ALL_SETTINGS)
    def test_random_spectra_5nm_match_colour_science(self, ill, obs):
        # colour-science sd_to_XYZ "Integration" of the linearly interpolated 5 nm spectrum
        wl = cm.COLOUR_WAVELENGTHS_NM
        rng = np.random.default_rng(12)
        spectra = rng.random((3, wl.size))
        cmfs, illum = _cs_refs(ill, obs)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ref = np.array([colour.sd_to_XYZ(_cs_sd(r, wl), cmfs, illum, method="Integration")
                            for r in spectra])
        np.testing.assert_allclose(cm.spectra_to_XYZ(spectra, wl, ill, obs), ref,
                                   rtol=0, atol=1e-9)

    @pytest.mark.parametrize("ill,obs", ALL_SETTINGS)
    def test_smooth_spectrum_close_to_astm_e308_weights(self, ill, obs):
        # colour-science default sd_to_XYZ = ASTM E308-18 with ASTM E2022 weights (5 nm);
        # a different quadrature, so agreement to a small fraction of a unit, not exactly.
        wl = cm.COLOUR_WAVELENGTHS_NM
        r = 0.5 + 0.4 * np.sin(wl / 37.0 + 1.0)
        cmfs, illum = _cs_refs(ill, obs)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ref = colour.sd_to_XYZ(colour.SpectralDistribution(r, wl), cmfs, illum)
        np.testing.assert_allclose(cm.spectra_to_XYZ(r, wl, ill, obs), ref, atol=0.1)

    def test_any_leading_shape(self):
        wl = cm.COLOUR_WAVELENGTHS_NM
        r = np.random.default_rng(3).random((2, 3, 4, wl.size))
        xyz = cm.spectra_to_XYZ(r, wl)
        assert xyz.shape == (2, 3, 4, 3)
        np.testing.assert_allclose(xyz[1, 2, 3], cm.spectra_to_XYZ(r[1, 2, 3], wl))

    def test_wrong_wavelength_count_names_both(self):
        with pytest.raises(InputError, match="81"):
            cm.spectra_to_XYZ(np.ones(10), cm.COLOUR_WAVELENGTHS_NM)

    def test_bad_grid(self):
        with pytest.raises(InputError, match="increasing"):
            cm.tristimulus_weights([500, 400, 600])

    def test_names(self):
        assert cm.normalise_illuminant("fl11") == "F11"
        assert cm.normalise_observer("10°") == 10
        with pytest.raises(InputError, match="illuminant"):
            cm.normalise_illuminant("D75")
        with pytest.raises(InputError, match="observer"):
            cm.normalise_observer(4)


class TestWhiteAndBlack:
    @pytest.mark.parametrize("ill,obs", ALL_SETTINGS)
    def test_perfect_reflector_and_absorber(self, ill, obs):
        # CIE 15:2018 §8.2.1: the perfect reflecting diffuser has L* = 100, a* = b* = 0;
        # a perfect absorber (X = Y = Z = 0) has L* = 0.
        wl = cm.COLOUR_WAVELENGTHS_NM
        wn = cm.white_point_XYZ(ill, obs)
        xyz = cm.spectra_to_XYZ(np.stack([np.ones(wl.size), np.zeros(wl.size)]), wl, ill, obs)
        lab = cm.XYZ_to_Lab(xyz, wn)
        np.testing.assert_allclose(lab[0], [100.0, 0.0, 0.0], atol=1e-9)
        np.testing.assert_allclose(lab[1], [0.0, 0.0, 0.0], atol=1e-9)
        assert xyz[0, 1] == pytest.approx(100.0)

    def test_d65_white_point(self):
        # CIE 15:2018 Table T.3 (from memory of the published table): D65, 2°: X=95.04, Z=108.88
        np.testing.assert_allclose(cm.white_point_XYZ("D65", 2), [95.04, 100.0, 108.88],
                                   atol=0.02)
        # CIE 15:2018 Table T.3 (from memory): illuminant A, 2°: X=109.85, Z=35.58
        np.testing.assert_allclose(cm.white_point_XYZ("A", 2), [109.85, 100.0, 35.58],
                                   atol=0.03)


class TestConversions:
    @pytest.mark.parametrize("ill,obs", ALL_SETTINGS)
    def test_lab_lch_xyY_srgb_match_colour_science(self, ill, obs):
        # colour-science XYZ_to_Lab / Lab_to_LCHab / XYZ_to_xyY / XYZ_to_sRGB (IEC 61966-2-1 with
        # Bradford adaptation from the illuminant white to D65)
        wl = cm.COLOUR_WAVELENGTHS_NM
        r = np.random.default_rng(5).random((6, wl.size))
        xyz = cm.spectra_to_XYZ(r, wl, ill, obs)
        wn = cm.white_point_XYZ(ill, obs)
        xy_n = wn[:2] / wn.sum()
        lab = cm.XYZ_to_Lab(xyz, wn)
        np.testing.assert_allclose(lab, colour.XYZ_to_Lab(xyz / 100, xy_n), atol=1e-9)
        np.testing.assert_allclose(cm.Lab_to_LCh(lab), colour.Lab_to_LCHab(lab), atol=1e-9)
        xyY_ref = colour.XYZ_to_xyY(xyz / 100) * [1, 1, 100]
        np.testing.assert_allclose(cm.XYZ_to_xyY(xyz), xyY_ref, atol=1e-12)
        rgb, oog = cm.XYZ_to_srgb(xyz, wn)
        ref = colour.XYZ_to_sRGB(xyz / 100, xy_n, "Bradford")
        np.testing.assert_allclose(rgb, np.clip(ref, 0, 1), atol=1e-9)
        lin = colour.XYZ_to_sRGB(xyz / 100, xy_n, "Bradford", apply_cctf_encoding=False)
        np.testing.assert_array_equal(oog, np.any((lin < -1e-3) | (lin > 1 + 1e-3), axis=-1))
        # the round trip back to XYZ
        np.testing.assert_allclose(cm.Lab_to_XYZ(lab, wn), xyz, atol=1e-9)

    def test_dark_colours_use_the_linear_branch(self):
        # CIE 15:2018 §8.2.1: below (6/29)³ of the white, f(t) = t/(3(6/29)²) + 4/29; checked
        # against colour-science XYZ_to_Lab on very dark spectra
        wl = cm.COLOUR_WAVELENGTHS_NM
        r = np.random.default_rng(8).random((5, wl.size)) * 1e-3
        for ill, obs in (("D65", 2), ("A", 10)):
            xyz = cm.spectra_to_XYZ(r, wl, ill, obs)
            wn = cm.white_point_XYZ(ill, obs)
            assert np.all(xyz / wn < (6 / 29) ** 3)
            np.testing.assert_allclose(cm.XYZ_to_Lab(xyz, wn),
                                       colour.XYZ_to_Lab(xyz / 100, wn[:2] / wn.sum()),
                                       atol=1e-9)

    def test_white_is_in_gamut_and_ffffff(self):
        for ill in cm.ILLUMINANTS:
            wn = cm.white_point_XYZ(ill, 2)
            rgb, oog = cm.XYZ_to_srgb(wn, wn)
            assert not oog
            assert cm.srgb_to_hex(rgb) == "#FFFFFF"

    def test_saturated_colour_is_out_of_gamut(self):
        # a narrow band at 520 nm lies outside the sRGB triangle (IEC 61966-2-1 primaries)
        wl = cm.COLOUR_WAVELENGTHS_NM
        r = np.where(np.abs(wl - 520) < 3, 1.0, 0.0)
        wn = cm.white_point_XYZ()
        _, oog = cm.XYZ_to_srgb(cm.spectra_to_XYZ(r, wl), wn)
        assert oog

    def test_hex_round_trip_and_errors(self):
        rgb = cm.hex_to_srgb("#1a2B3c")
        assert cm.srgb_to_hex(rgb) == "#1A2B3C"
        np.testing.assert_allclose(cm.hex_to_srgb("#fff"), [1, 1, 1])
        with pytest.raises(InputError, match="RRGGBB"):
            cm.hex_to_srgb("#12345G")

    def test_srgb_to_XYZ_inverts(self):
        wn = cm.white_point_XYZ("A", 10)
        xyz = np.array([[20.0, 18.0, 9.0], [40.0, 41.0, 12.0]])
        rgb, oog = cm.XYZ_to_srgb(xyz, wn)
        assert not oog.any()
        np.testing.assert_allclose(cm.srgb_to_XYZ(rgb, wn), xyz, atol=1e-9)


# Sharma, Wu & Dalal, Color Res. Appl. 30, 21 (2005), Table 1: the 34 CIEDE2000 test pairs
# (L1, a1, b1, L2, a2, b2, ΔE00), typed from memory of the published table.
SHARMA_PAIRS = [
    (50.0000, 2.6772, -79.7751, 50.0000, 0.0000, -82.7485, 2.0425),
    (50.0000, 3.1571, -77.2803, 50.0000, 0.0000, -82.7485, 2.8615),
    (50.0000, 2.8361, -74.0200, 50.0000, 0.0000, -82.7485, 3.4412),
    (50.0000, -1.3802, -84.2814, 50.0000, 0.0000, -82.7485, 1.0000),
    (50.0000, -1.1848, -84.8006, 50.0000, 0.0000, -82.7485, 1.0000),
    (50.0000, -0.9009, -85.5211, 50.0000, 0.0000, -82.7485, 1.0000),
    (50.0000, 0.0000, 0.0000, 50.0000, -1.0000, 2.0000, 2.3669),
    (50.0000, -1.0000, 2.0000, 50.0000, 0.0000, 0.0000, 2.3669),
    (50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0009, 7.1792),
    (50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0010, 7.1792),
    (50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0011, 7.2195),
    (50.0000, 2.4900, -0.0010, 50.0000, -2.4900, 0.0012, 7.2195),
    (50.0000, -0.0010, 2.4900, 50.0000, 0.0009, -2.4900, 4.8045),
    (50.0000, -0.0010, 2.4900, 50.0000, 0.0010, -2.4900, 4.8045),
    (50.0000, -0.0010, 2.4900, 50.0000, 0.0011, -2.4900, 4.7461),
    (50.0000, 2.5000, 0.0000, 50.0000, 0.0000, -2.5000, 4.3065),
    (50.0000, 2.5000, 0.0000, 73.0000, 25.0000, -18.0000, 27.1492),
    (50.0000, 2.5000, 0.0000, 61.0000, -5.0000, 29.0000, 22.8977),
    (50.0000, 2.5000, 0.0000, 56.0000, -27.0000, -3.0000, 31.9030),
    (50.0000, 2.5000, 0.0000, 58.0000, 24.0000, 15.0000, 19.4535),
    (50.0000, 2.5000, 0.0000, 50.0000, 3.1736, 0.5854, 1.0000),
    (50.0000, 2.5000, 0.0000, 50.0000, 3.2972, 0.0000, 1.0000),
    (50.0000, 2.5000, 0.0000, 50.0000, 1.8634, 0.5757, 1.0000),
    (50.0000, 2.5000, 0.0000, 50.0000, 3.2592, 0.3350, 1.0000),
    (60.2574, -34.0099, 36.2677, 60.4626, -34.1751, 39.4387, 1.2644),
    (63.0109, -31.0961, -5.8663, 62.8187, -29.7946, -4.0864, 1.2630),
    (61.2901, 3.7196, -5.3901, 61.4292, 2.2480, -4.9620, 1.8731),
    (35.0831, -44.1164, 3.7933, 35.0232, -40.0716, 1.5901, 1.8645),
    (22.7233, 20.0904, -46.6940, 23.0331, 14.9730, -42.5619, 2.0373),
    (36.4612, 47.8580, 18.3852, 36.2715, 50.5065, 21.2231, 1.4146),
    (90.8027, -2.0831, 1.4410, 91.1528, -1.6435, 0.0447, 1.4441),
    (90.9257, -0.5406, -0.9208, 88.6381, -0.8985, -0.7239, 1.5381),
    (6.7747, -0.2908, -2.4247, 5.8714, -0.0985, -2.2286, 0.6377),
    (2.0776, 0.0795, -1.1350, 0.9033, -0.0636, -0.5514, 0.9082),
]


class TestDeltaE2000:
    def test_sharma_wu_dalal_pairs(self):
        # Sharma, Wu & Dalal, Color Res. Appl. 30, 21 (2005), Table 1 (4 decimals published)
        p = np.array(SHARMA_PAIRS)
        de = cm.delta_e_2000(p[:, 0:3], p[:, 3:6])
        np.testing.assert_allclose(de, p[:, 6], atol=5e-5)

    def test_symmetric_and_broadcasts(self):
        p = np.array(SHARMA_PAIRS)
        np.testing.assert_allclose(cm.delta_e_2000(p[:, 3:6], p[:, 0:3]), p[:, 6], atol=5e-5)
        de = cm.delta_e_2000(p[:, 0:3].reshape(2, 17, 3), [50.0, 0.0, 0.0])
        assert de.shape == (2, 17)
        assert cm.delta_e_2000([50, 1, 1], [50, 1, 1]) == pytest.approx(0.0)
