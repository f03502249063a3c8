"""Colour requirements (filmstack.colour.requirements): options, values, margins, batches.

Values are checked against colours computed independently (bare glass is neutral by Fresnel's
flat reflectance, Born & Wolf §1.5) and against ΔE2000 of colour-science (Sharma, Wu & Dalal,
Color Res. Appl. 30, 21 (2005)).
"""

from __future__ import annotations

import numpy as np
import pytest

from filmstack import AIR, Constant, Layer, Stack
from filmstack.colour import colorimetry as cm
from filmstack.colour.requirements import (colour_requirement, colour_values,
                                           evaluate_colour_requirement, validate_options)
from filmstack.colour.stack_colour import stack_colour
from filmstack.errors import InputError

GLASS = Constant(name="glass-1.52", n=1.52)
LOW = Constant(name="low-1.46", n=1.46)
HIGH = Constant(name="high-2.3", n=2.3)
AR = Stack(incident=AIR, substrate=GLASS,
           layers=(Layer(HIGH, 13.0), Layer(LOW, 33.0), Layer(HIGH, 115.0), Layer(LOW, 90.0)))


class TestValidateOptions:
    def test_target_and_box(self):
        o = validate_options({"target": [40, -8, 4], "observer": "10"})
        assert o["kind"] == "target" and o["target"] == [40.0, -8.0, 4.0] and o["observer"] == 10
        o = validate_options({"a": [-6, 2], "b": [None, 0], "illuminant": "f11"})
        assert o["kind"] == "box" and o["b"] == (None, 0.0) and o["illuminant"] == "F11"
        assert validate_options({"target": {"L": 50, "a": 0, "b": 0}})["target"] == [50, 0, 0]

    @pytest.mark.parametrize("opts,key,msg", [
        ({"targte": [1, 2, 3]}, "targte", "did you mean 'target'"),
        ({"target": [1, 2]}, "target", r"\[L\*, a\*, b\*\]"),
        ({"target": [120, 0, 0]}, "target[0]", "0-100"),
        ({"target": [50, 0, 0], "a": [0, 1]}, "a", "not both"),
        ({"a": [3, 1]}, "a", "backwards"),
        ({"a": [None, None]}, "a", "open"),
        ({"a": [0, "x"]}, "a[1]", "number"),
        ({"a": [0, 1], "illuminant": "D75"}, "illuminant", "D65"),
        ({"a": [0, 1], "observer": 5}, "observer", "10"),
        ({"a": [0, 1], "white": "paper"}, "white", "bare-substrate"),
        ({}, None, "needs 'target"),
    ])
    def test_mistakes_name_the_key(self, opts, key, msg):
        with pytest.raises(InputError, match=msg) as err:
            validate_options(opts)
        assert err.value.key == key


class TestValues:
    def test_box_excursion_on_neutral_glass(self):
        # bare glass reflects a flat 4.26 %: a* = b* = 0 exactly (CIE 15:2018 §8.2.1)
        bare = Stack(incident=AIR, substrate=GLASS)
        outside = colour_requirement(a=(1.0, 3.0), angles_deg=[0, 30])
        np.testing.assert_allclose(colour_values(bare, outside), [1.0, 1.0], atol=1e-9)
        inside = colour_requirement(a=(-2.0, 2.0), b=(-0.5, 4.0))
        np.testing.assert_allclose(colour_values(bare, inside), [-0.5], atol=1e-9)
        r = evaluate_colour_requirement(bare, inside)
        assert r.passed and r.margin == pytest.approx(0.5) and r.limit == 0.0

    def test_target_delta_e_matches_colour_science(self):
        req = colour_requirement(target=[30, 5, -10], max_delta_e=3, angles_deg=[0, 30, 45])
        lab = stack_colour(AR, [0, 30, 45]).Lab
        # CIEDE2000 of colour-science (Sharma, Wu & Dalal 2005)
        from colour.difference import delta_E_CIE2000
        ref = delta_E_CIE2000(lab, np.array([30.0, 5.0, -10.0]))
        np.testing.assert_allclose(colour_values(AR, req), ref, atol=1e-9)
        r = evaluate_colour_requirement(AR, req)
        assert r.value == pytest.approx(ref.max())
        assert r.worst_angle_deg == [0, 30, 45][int(np.argmax(ref))]
        assert r.margin == pytest.approx(3 - ref.max()) and r.passed == (ref.max() <= 3)

    def test_target_equal_to_own_colour_passes(self):
        lab = stack_colour(AR, 0.0).Lab[0]
        req = colour_requirement(target=lab, max_delta_e=0.5)
        r = evaluate_colour_requirement(AR, req)
        assert r.passed and r.value == pytest.approx(0.0, abs=1e-9)

    def test_batch_matches_one_by_one(self):
        req = colour_requirement(a=(-6, 2), b=(-12, 0), angles_deg=[0, 30])
        d = AR.thicknesses_nm * np.random.default_rng(4).normal(1, 0.03, size=(3, 2, 4))
        r = evaluate_colour_requirement(AR, req, thicknesses_nm=d)
        assert r.value.shape == (3, 2) and r.passed.shape == (3, 2) and r.Lab.shape == (3, 2, 2, 3)
        one = evaluate_colour_requirement(AR.with_thicknesses(d[2, 1]), req)
        assert r.value[2, 1] == pytest.approx(one.value)
        assert r.margin[2, 1] == pytest.approx(one.margin)

    def test_index_scale(self):
        req = colour_requirement(target=[30, 5, -10], max_delta_e=3)
        np.testing.assert_allclose(colour_values(AR, req, index_scale=np.ones(4)),
                                   colour_values(AR, req), atol=1e-12)
        # scaling n of every layer equals the same stack with scaled constant indices
        scaled = Stack(incident=AIR, substrate=GLASS, layers=tuple(
            Layer(Constant(name="x", n=l.material.n * 1.02), l.thickness_nm) for l in AR.layers))
        np.testing.assert_allclose(colour_values(AR, req, index_scale=np.full(4, 1.02)),
                                   colour_values(scaled, req), atol=1e-9)

    def test_greater_equal_condition(self):
        # "stay away from purple": ΔE00 >= 10 from a purple target
        from dataclasses import replace
        req = replace(colour_requirement(target=[30, 40, -40], max_delta_e=10), op=">=")
        r = evaluate_colour_requirement(AR, req)
        assert r.margin == pytest.approx(r.value - 10)


class TestSpecIntegration:
    def test_loader_and_evaluate_use_this_module(self):
        spec_mod = pytest.importorskip("filmstack.spec")
        evaluate = pytest.importorskip("filmstack.evaluate")
        spec = spec_mod.spec_from_mapping({
            "stack": {"incident": "air", "substrate": {"n": 1.52}},
            "requirements": [{"colour": "<= 0", "a": [-6, 2], "b": [-12, 0],
                              "band_nm": [380, 780], "angles_deg": [0, 30], "observer": 10}]})
        req = spec.requirements[0]
        assert req.options["kind"] == "box" and req.options["observer"] == 10
        got = evaluate.evaluate_requirements(AR, spec)[0]
        mine = evaluate_colour_requirement(AR, req)
        assert got.value == pytest.approx(mine.value) and got.passed == mine.passed

    def test_loader_reports_colour_key_errors(self):
        spec_mod = pytest.importorskip("filmstack.spec")
        with pytest.raises(InputError, match=r"requirements\[0\]\.targte"):
            spec_mod.spec_from_mapping({
                "stack": {"incident": "air", "substrate": {"n": 1.52}},
                "requirements": [{"colour": "<= 2", "targte": [1, 2, 3],
                                  "band_nm": [380, 780]}]})
