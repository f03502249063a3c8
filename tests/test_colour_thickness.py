"""Thickness from colour (filmstack.colour.thickness) and the oxide-on-silicon colour sequence.

Sources beside each check. The fab colour chart of thermal oxide on silicon is common practice
with no published source we cite; it is indicative (judged by eye under room light), so we
compare hue *families* (CIELAB hue-angle ranges) and allow the colour to appear within ±8 % of
the charted thickness.
"""

from __future__ import annotations

import numpy as np
import pytest

from filmstack import AIR, Constant, Layer, get_material
from filmstack.colour import colorimetry as cm
from filmstack.colour.stack_colour import ColourSetting
from filmstack.colour.thickness import (CAUTION, FilmSystem, Observation, clear_cache,
                                        film_colour, film_colour_table, find_thickness,
                                        max_resolved_thickness_nm, observation_from_photo)
from filmstack.errors import InputError


@pytest.fixture(scope="module")
def oxide():
    return FilmSystem(get_material("SiO2"), get_material("Si"))


def _noisy(lab, rng, delta_e=1.0):
    """lab moved in a random direction until ΔE2000 = delta_e (bisection on the step)."""
    d = rng.normal(size=3)
    d /= np.linalg.norm(d)
    lo, hi = 0.0, 10.0
    for _ in range(50):
        m = 0.5 * (lo + hi)
        if cm.delta_e_2000(lab + m * d, lab) < delta_e:
            lo = m
        else:
            hi = m
    return lab + lo * d


# Hue families as CIELAB hue-angle ranges h_ab in degrees. Bounds from the CIELAB hues of
# sRGB named colours (computed with colour-science): royal blue #4169E1 292°, blue #0000FF 306°,
# blue-violet #8A2BE2 313°, purple #800080 328°, medium violet-red #C71585 348°, red #FF0000 40°,
# orange #FFA500 73°, gold #FFD700 91°, yellow #FFFF00 103°, green #00FF00 136°,
# sea green #2E8B57 153°, cyan #00FFFF 196°, steel blue #4682B4 263°.
FAMILIES = {
    "violet to red-violet": (290.0, 350.0),
    "blue": (255.0, 295.0),
    "light gold / yellow": (80.0, 115.0),
    "orange": (40.0, 75.0),
    "blue to violet-blue": (255.0, 315.0),
    "green": (130.0, 185.0),
}

# The common fab colour chart of thermal SiO2 on Si, viewed perpendicular in daylight
# (common practice, no published source): thickness nm -> family.
FAB_CHART = [
    (100.0, "violet to red-violet"),
    (120.0, "blue"),
    (200.0, "light gold / yellow"),
    (250.0, "orange"),
    (300.0, "blue to violet-blue"),
    (340.0, "green"),
]


class TestOxideColourChart:
    @pytest.mark.parametrize("t_chart,family", FAB_CHART)
    def test_hue_family_near_charted_thickness(self, oxide, t_chart, family):
        # common practice, no published source (see module docstring): the family's hue must
        # appear within ±8 % of the charted thickness, as a saturated colour (C* > 10)
        lo, hi = FAMILIES[family]
        t = np.arange(np.floor(0.92 * t_chart), np.ceil(1.08 * t_chart) + 1)
        c = film_colour(oxide, t, ColourSetting(illuminant="D65", observer=2))
        h = c.LCh[:, 0, 2]
        inside = (h >= lo) & (h <= hi) & (c.LCh[:, 0, 1] > 10)
        assert inside.any(), f"{t_chart} nm: hues {np.round(h[::4])} never in {family}"

    def test_sequence_is_cyclic_and_ordered(self, oxide):
        # the first-order colours come in the charted order with thickness (common practice)
        t = np.arange(80.0, 360.0)
        h = film_colour(oxide, t, ColourSetting()).LCh[:, 0, 2]
        first = []
        for _, fam in FAB_CHART:
            lo, hi = FAMILIES[fam]
            start = first[-1] if first else 0
            idx = np.flatnonzero((h[start:] >= lo) & (h[start:] <= hi))
            assert idx.size, fam
            first.append(start + int(idx[0]))
        assert first == sorted(first)

    def test_bare_silicon_is_neutral_grey(self, oxide):
        # Si reflects about 35 % nearly flat across the visible (Green 2008 data): low chroma
        c = film_colour(oxide, [0.0], ColourSetting())
        assert c.LCh[0, 0, 1] < 10 and 60 < c.Lab[0, 0, 0] < 72


class TestInversion:
    TRUE = [60.0, 130.0, 200.0, 275.0, 340.0, 480.0, 700.0]

    @pytest.mark.parametrize("true", TRUE)
    def test_exact_colour_returns_true_thickness_first(self, oxide, true):
        lab = film_colour(oxide, [true], ColourSetting()).Lab[0, 0]
        r = find_thickness(oxide, Observation(lab))
        assert r.candidates[0].thickness_nm == pytest.approx(true, abs=0.05)
        assert r.candidates[0].delta_e < 0.05

    def test_with_delta_e_one_noise_true_is_among_candidates(self, oxide):
        rng = np.random.default_rng(2024)
        for true in self.TRUE:
            lab = film_colour(oxide, [true], ColourSetting()).Lab[0, 0]
            r = find_thickness(oxide, Observation(_noisy(lab, rng)), top=5)
            got = [c.thickness_nm for c in r.candidates]
            assert min(abs(np.array(got) - true)) < 8.0, (true, got)

    def test_candidates_are_distinct_and_ranked(self, oxide):
        lab = film_colour(oxide, [480.0], ColourSetting()).Lab[0, 0]
        r = find_thickness(oxide, Observation(lab), top=6, min_separation_nm=40)
        t = np.array([c.thickness_nm for c in r.candidates])
        de = np.array([c.delta_e for c in r.candidates])
        assert len(t) == 6 and np.all(np.diff(de) >= 0)
        assert np.min(np.abs(t[:, None] - t[None, :]) + np.eye(6) * 1e9) >= 40

    def test_thick_film_is_flagged_ambiguous_and_second_angle_resolves(self, oxide):
        # beyond ~1 µm the colours are pale and repeat: one observation is ambiguous; a second
        # at 45° (a different optical path, cos θ in the film) singles out the true thickness
        true = 1180.0
        lab0 = film_colour(oxide, [true], ColourSetting()).Lab[0, 0]
        lab45 = film_colour(oxide, [true], ColourSetting(), 45.0).Lab[0, 0]
        one = find_thickness(oxide, Observation(lab0))
        assert one.ambiguous and any("ambiguous" in w for w in one.warnings)
        two = find_thickness(oxide, [Observation(lab0), Observation(lab45, angle_deg=45.0)])
        assert not two.ambiguous
        assert two.candidates[0].thickness_nm == pytest.approx(true, abs=0.05)
        assert len(two.candidates[0].delta_e_each) == 2

    def test_second_illuminant_also_counts(self, oxide):
        true = 1250.0
        sa = ColourSetting(illuminant="A")
        lab0 = film_colour(oxide, [true], ColourSetting()).Lab[0, 0]
        laba = film_colour(oxide, [true], sa).Lab[0, 0]
        r = find_thickness(oxide, [Observation(lab0), Observation(laba, setting=sa)])
        assert r.candidates[0].thickness_nm == pytest.approx(true, abs=0.05)

    def test_under_layer_changes_the_answer(self):
        # SiO2 on 80 nm Si3N4 on Si: the forward model includes the under-layer
        under = FilmSystem(get_material("SiO2"), get_material("Si"),
                           under=(Layer(get_material("Si3N4"), 80.0),))
        lab = film_colour(under, [150.0], ColourSetting()).Lab[0, 0]
        r = find_thickness(under, Observation(lab))
        assert r.candidates[0].thickness_nm == pytest.approx(150.0, abs=0.05)
        assert under.describe() == "SiO2 on Si3N4 80 nm on Si"

    def test_poor_match_is_flagged(self, oxide):
        r = find_thickness(oxide, Observation((50.0, 60.0, 60.0)))    # a saturated red
        assert r.poor_match and any("poor match" in w for w in r.warnings)

    def test_result_dict_and_caution(self, oxide):
        lab = film_colour(oxide, [200.0], ColourSetting()).Lab[0, 0]
        d = find_thickness(oxide, Observation(lab), top=3).to_dict()
        assert len(d["candidates"]) == 3
        assert set(d["candidates"][0]) >= {"thickness_nm", "delta_e", "Lab", "srgb_hex"}
        assert d["caution"] == CAUTION and "spectrum" in CAUTION
        # one wording (DESIGN.md §7) in the JSON, on stderr and in the images
        from filmstack.cli._common import CAUTION_COLOUR
        assert CAUTION == CAUTION_COLOUR

    def test_table_is_cached_and_read_only(self, oxide):
        clear_cache()
        a = film_colour_table(oxide, ColourSetting(), 0.0, (0, 500), 1.0)
        b = film_colour_table(oxide, ColourSetting(), 0.0, (0, 500), 1.0)
        assert a is b and not a.Lab.flags.writeable and a.thickness_nm.size == 501

    @pytest.mark.parametrize("kwargs,msg", [
        ({"range_nm": (500, 100)}, "range"),
        ({"step_nm": 0}, "step"),
        ({"top": 0}, "top"),
    ])
    def test_bad_arguments(self, oxide, kwargs, msg):
        with pytest.raises(InputError, match=msg):
            find_thickness(oxide, Observation((50, 0, 0)), **kwargs)

    def test_bad_observation(self):
        with pytest.raises(InputError, match="L\\*"):
            Observation((120, 0, 0))
        with pytest.raises(InputError, match="angle"):
            Observation((50, 0, 0), angle_deg=90)


class TestPhotoRoute:
    def _photo(self, oxide, true, gains, exposure):
        """A synthetic camera: linear sRGB of the scene times per-channel gains (white-balance
        error) and an exposure factor, then 8-bit sRGB encoding (IEC 61966-2-1)."""
        s = ColourSetting()
        wn = s.diffuser_XYZ
        film_xyz = film_colour(oxide, [true], s).XYZ[0, 0]
        bare_xyz = film_colour(oxide, [0.0], s).XYZ[0, 0]

        def shoot(xyz):
            lin = cm.XYZ_to_srgb_linear(xyz, wn) * np.asarray(gains) * exposure
            return str(cm.srgb_to_hex(cm.srgb_encode(lin)))
        return shoot(film_xyz), shoot(bare_xyz)

    @pytest.mark.parametrize("true", [120.0, 275.0, 480.0])
    def test_white_balance_error_is_corrected(self, oxide, true):
        # a diagonal (von Kries) camera error is undone exactly by the diagonal correction
        # against the computed bare substrate (von Kries 1902; Fairchild, Color Appearance
        # Models, 3rd ed., §9); what remains is 8-bit quantisation
        film_hex, bare_hex = self._photo(oxide, true, gains=(1.25, 1.0, 0.7), exposure=0.8)
        pc = observation_from_photo(film_hex, bare_hex, oxide)
        assert pc.observation.setting.white == "bare-substrate"
        np.testing.assert_allclose(pc.gains * np.array([1.25, 1.0, 0.7]) * 0.8, 1.0, atol=0.02)
        r = find_thickness(oxide, pc.observation)
        assert r.candidates[0].thickness_nm == pytest.approx(true, abs=3.0)
        assert r.candidates[0].delta_e < 1.5

    def test_uncorrected_photo_would_be_wrong(self, oxide):
        # the same photo read as if it were calibrated colour misses badly: the correction matters
        film_hex, _ = self._photo(oxide, 275.0, gains=(1.25, 1.0, 0.7), exposure=0.8)
        s = ColourSetting()
        xyz = cm.srgb_to_XYZ(cm.hex_to_srgb(film_hex), s.diffuser_XYZ)
        raw = Observation(tuple(cm.XYZ_to_Lab(xyz, s.diffuser_XYZ)))
        r = find_thickness(oxide, raw)
        assert abs(r.candidates[0].thickness_nm - 275.0) > 3 or r.candidates[0].delta_e > 3

    def test_black_bare_channel_refused(self, oxide):
        with pytest.raises(InputError, match="channel below 10"):
            observation_from_photo("#556677", "#00C080", oxide)

    @pytest.mark.parametrize("bare_hex", ["#050505", "#0A0909"])
    def test_too_dark_bare_substrate_refused(self, oxide, bare_hex):
        # at code 5 one 8-bit step is 20 % of the linear value (IEC 61966-2-1 decoding): the
        # gains would be 200-fold and the corrected colour meaningless (L* above 500)
        with pytest.raises(InputError, match="too dark"):
            observation_from_photo("#556677", bare_hex, oxide)

    @pytest.mark.parametrize("bare_hex", ["#FFFFFF", "#FFD0C0", "#C0FFC0"])
    def test_over_exposed_bare_substrate_refused(self, oxide, bare_hex):
        # a clipped reference under-states the bare substrate's brightness, so every gain is
        # too small: with #FFFFFF the best candidate came out at 91 nm for a 275 nm film
        film_hex, _ = self._photo(oxide, 275.0, gains=(1.0, 1.0, 1.0), exposure=2.0)
        with pytest.raises(InputError, match="over-exposed"):
            observation_from_photo(film_hex, bare_hex, oxide)

    def test_clipped_film_channel_warned(self, oxide):
        pc = observation_from_photo("#FF6677", "#A0A0A0", oxide)
        assert any("clipped" in w and "#FF6677" in w for w in pc.warnings)


class TestThickFilmResolution:
    """The 5 nm colour grid resolves the fringes of a film up to an optical path of
    λ_min²/(2·5 nm) (Born & Wolf, Principles of Optics, 7th ed., §7.6: fringe period
    Δλ = λ²/(2nd cos θ); Nyquist sampling). Beyond, the colour aliases."""

    def _lab(self, oxide, d_nm, wl):
        from filmstack.response import spectrum
        R = spectrum(oxide.stack(0.0), wl, 0.0, "mean",
                     thicknesses_nm=np.asarray(d_nm, float).reshape(-1, 1)).R[:, 0, :]
        w5 = cm.COLOUR_WAVELENGTHS_NM
        white = cm.spectra_to_XYZ(np.ones(w5.size), w5)
        return cm.XYZ_to_Lab(cm.spectra_to_XYZ(R, wl), white)

    def test_limit_for_oxide_on_silicon(self, oxide):
        # 380² / (2 · 5) / (2 n) with n(SiO2, 380 nm) ≈ 1.47 (Malitson 1965): about 4.9 µm
        assert max_resolved_thickness_nm(oxide) == pytest.approx(4900, rel=0.03)
        assert max_resolved_thickness_nm(oxide, 60.0) > max_resolved_thickness_nm(oxide)

    def test_colour_inside_the_limit_matches_fine_sampling(self, oxide):
        # below the limit the 5 nm grid agrees with a 0.25 nm grid; well beyond it does not
        lim = max_resolved_thickness_nm(oxide)
        d = np.array([0.5 * lim, 0.95 * lim, 3.0 * lim])
        coarse = self._lab(oxide, d, cm.COLOUR_WAVELENGTHS_NM)
        fine = self._lab(oxide, d, np.arange(380.0, 780.0 + 1e-9, 0.25))
        de = cm.delta_e_2000(coarse, fine)
        assert np.all(de[:2] < 0.2), de
        assert de[2] > 0.5, de

    def test_range_beyond_the_limit_refused(self, oxide):
        with pytest.raises(InputError, match="--range.*false colours"):
            film_colour_table(oxide, ColourSetting(), 0.0, (0.0, 20000.0), 5.0)
        with pytest.raises(InputError, match="at most 48"):
            find_thickness(oxide, Observation((56.0, 1.0, -7.0)), range_nm=(0.0, 6000.0))
