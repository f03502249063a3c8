"""Tests of filmstack.spec: the condition parser and spec-file validation (DESIGN.md §4).

The physics is not involved here; what is checked is that a spec file reads into the documented
data model (units converted: R/T/A to fractions, phase to radians) and that a dozen real mistakes
give one message naming the file, the key path, the line and the problem.
"""

import math
import textwrap

import pytest

from filmstack.errors import InputError
from filmstack.materials import Constant
from filmstack.spec import (Limits, Spec, Tolerances, parse_condition, load_spec,
                            spec_from_mapping)

GOOD = textwrap.dedent("""\
    stack: {incident: {n: 1.0}, substrate: {n: 1.52}, reference_nm: 550}
    materials: {H: {n: 2.35}, L: {n: 1.46}}
    start: "(HL)^2 H"
    requirements:
      - R: "<= 0.5%"
        band_nm: [420, 680]
        angles_deg: [0, 15, 30]
        polarization: mean
        over: average
        weight: 1
      - T: ">= 98 %"
        band_nm: [600, 800]
        step_nm: 1e0
        over: every
      - R: "= 50 ± 2 %"
        band_nm: [550, 550]
        angles_deg: [45]
        polarization: s
        weight: 1e-3
    limits: {total_nm: 1200, layers: 30, thinnest_nm: 10}
    tolerances:
      thickness_pct: 1.0
      rate_pct: {H: 0.5}
      index_pct: 0.3
    """)


def write(tmp_path, text, name="spec.yaml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


class TestParseCondition:
    @pytest.mark.parametrize("text, op, limit, tol", [
        ("<= 0.5%", "<=", 0.005, 0.0),
        (">= 98 %", ">=", 0.98, 0.0),
        ("<= 0.005", "<=", 0.005, 0.0),
        ("<= 1e-3", "<=", 0.001, 0.0),
        ("≤ 2%", "<=", 0.02, 0.0),
        ("= 45 ± 2 %", "=", 0.45, 0.02),
        ("= 45% +- 2%", "=", 0.45, 0.02),
        ("=0.5+/-0.1", "=", 0.5, 0.1),
    ])
    def test_reflectance_conditions(self, text, op, limit, tol):
        c = parse_condition(text, "R")
        assert c.op == op
        assert c.limit == pytest.approx(limit, abs=1e-15)
        assert c.tolerance == pytest.approx(tol, abs=1e-15)

    def test_phase_in_degrees_becomes_radians(self):
        c = parse_condition("= 45 ± 2", "phase")
        assert c.limit == pytest.approx(math.pi / 4)
        assert c.tolerance == pytest.approx(math.radians(2))
        assert parse_condition("= 180 +- 10 deg", "phase").limit == pytest.approx(math.pi)
        assert parse_condition("<= 1 rad", "phase").limit == 1.0

    def test_dispersion_units(self):
        assert parse_condition("<= 50 fs", "GD").limit == 50
        assert parse_condition("= -50 ± 10 fs2", "GDD") == parse_condition("= -50 ± 10 fs^2",
                                                                          "GDD")

    @pytest.mark.parametrize("text, words", [
        ("< 0.5%", "'<=' "),                 # strict inequality
        ("<= 50", "did you mean '<= 50%'"),  # percent forgotten
        ("<= 0.5 %%", "character 9"),        # stray character, with its position
        ("0.5%", "must start with"),
        ("= 0.45", "needs a tolerance"),
        (">= 98% ± 2%", "belongs to '='"),
        ("<= abc", "unexpected 'abc'"),
        ("<= 0.5 fs", "does not fit R"),
        ("", "empty"),
        ("<=", "expected a number"),
        ("= 5% ± -1%", ">= 0"),
        ("== 5%", "write '='"),
    ])
    def test_bad_conditions(self, text, words):
        with pytest.raises(ValueError) as e:
            parse_condition(text, "R")
        assert words in str(e.value)

    def test_bare_number_and_non_text(self):
        with pytest.raises(ValueError, match="bare number"):
            parse_condition(0.5, "R")
        with pytest.raises(ValueError, match="as text"):
            parse_condition([1], "R")

    def test_never_evaluates_code(self):
        with pytest.raises(ValueError):
            parse_condition("<= __import__('os').getcwd()", "R")


class TestLoadGood:
    def test_reads_into_the_model(self, tmp_path):
        spec = load_spec(write(tmp_path, GOOD))
        assert isinstance(spec, Spec)
        assert spec.path.endswith("spec.yaml")
        r0, r1, r2 = spec.requirements
        assert (r0.quantity, r0.op, r0.limit) == ("R", "<=", pytest.approx(0.005))
        assert r0.angles_deg == (0.0, 15.0, 30.0) and r0.over == "average"
        assert r0.key == "requirements[0]"
        assert (r1.quantity, r1.over, r1.step_nm) == ("T", "every", 1.0)
        assert r2.band_nm == (550.0, 550.0) and r2.tolerance == pytest.approx(0.02)
        assert r2.weight == 1e-3 and r2.polarization == "s"
        assert spec.limits == Limits(total_nm=1200, layers=30, thinnest_nm=10)
        assert spec.start == "(HL)^2 H"
        assert spec.materials["H"].nk([550])[0] == 2.35
        # rate keyed by symbol is stored by material name; a bare number applies to all
        assert spec.tolerances.rate_for(spec.materials["H"].name) == 0.5
        assert spec.tolerances.rate_for(spec.materials["L"].name) == 0.0
        assert spec.tolerances.index_for("anything") == 0.3
        assert spec.template.substrate.nk([500])[0] == 1.52

    def test_list_of_materials_gets_symbols_by_index(self):
        data = {"stack": {"substrate": {"n": 1.52}},
                "materials": [{"n": 1.46}, {"n": 2.35}, {"n": 1.8}],
                "requirements": [{"R": "<= 1%", "band_nm": [500, 600]}]}
        spec = spec_from_mapping(data)
        assert {s: m.nk([550])[0].real for s, m in spec.materials.items()} == \
            {"H": 2.35, "M": 1.8, "L": 1.46}

    def test_defaults(self):
        spec = spec_from_mapping({"stack": {"substrate": {"n": 1.5}},
                                  "requirements": [{"GDD": "= 0 ± 20", "band_nm": 800}]})
        r = spec.requirements[0]
        assert r.band_nm == (800.0, 800.0)
        assert r.polarization == "s"      # phase quantities default to s
        assert r.angles_deg == (0.0,)
        assert spec.tolerances == Tolerances() and spec.tolerances.is_zero
        assert spec.materials == {}

    def test_fixed_layers(self):
        spec = spec_from_mapping({
            "stack": {"substrate": {"n": 1.5}},
            "fixed": {"bottom": [{"material": {"n": 1.63}, "nm": 5}],
                      "top": [{"material": {"n": 1.38}, "nm": 10}]},
            "requirements": [{"R": "<= 1%", "band_nm": [500, 600]}]})
        assert [l.thickness_nm for l in spec.fixed_bottom + spec.fixed_top] == [5, 10]


def _err(tmp_path, text):
    with pytest.raises(InputError) as e:
        load_spec(write(tmp_path, text))
    return e.value


def _replace(old, new):
    assert old in GOOD
    return GOOD.replace(old, new)


class TestValidationMessages:
    """A dozen real mistakes: each message names the file, the key path, the line and the fix."""

    @pytest.mark.parametrize("text, key, line, words", [
        # 1. typo in a top-level key
        (_replace("requirements:", "requirments:"), "requirments", 4,
         "did you mean 'requirements'"),
        # 2. typo in a requirement key
        (_replace("angles_deg: [0, 15, 30]", "angle_deg: [0, 15, 30]"),
         "requirements[0].angle_deg", 7, "did you mean 'angles_deg'"),
        # 3. a condition that cannot parse
        (_replace('"<= 0.5%"', '"<= 0.5 %%"'), "requirements[0].R", 5, "character 9"),
        # 4. percent forgotten
        (_replace('">= 98 %"', '">= 98"'), "requirements[1].T", 11, "did you mean '>= 98%'"),
        # 5. band running backwards
        (_replace("[420, 680]", "[680, 420]"), "requirements[0].band_nm", 6, "backwards"),
        # 6. angle of 90 degrees (grazing)
        (_replace("[0, 15, 30]", "[0, 15, 90]"), "requirements[0].angles_deg[2]", 7, "< 90"),
        # 7. polarisation misspelt
        (_replace("polarization: mean", "polarization: unpolarized"),
         "requirements[0].polarization", 8, "one of s, p, mean"),
        # 8. over misspelt
        (_replace("over: every", "over: every-point"), "requirements[1].over", 14,
         "did you mean 'every'"),
        # 9. negative weight
        (_replace("weight: 1\n", "weight: -1\n"), "requirements[0].weight", 10, ">= 0"),
        # 10. fractional layer count
        (_replace("layers: 30", "layers: 30.5"), "limits.layers", 20, "whole number"),
        # 11. tolerance for a material that is not in the spec
        (_replace("rate_pct: {H: 0.5}", "rate_pct: {TiO3: 0.5}"), "tolerances.rate_pct.TiO3",
         23, "not a material of this spec"),
        # 12. '=' without a tolerance
        (_replace('"= 50 ± 2 %"', '"= 50%"'), "requirements[2].R", 15, "needs a tolerance"),
        # 13. two quantities in one requirement
        (_replace('  - T: ">= 98 %"', '  - T: ">= 98 %"\n    R: "<= 1%"'),
         "requirements[1].R", 12, "one quantity per requirement"),
        # 14. band missing
        (_replace("    band_nm: [600, 800]\n", ""), "requirements[1].band_nm", 11, "missing"),
        # 15. start uses a symbol that materials do not define
        (_replace('"(HL)^2 H"', '"(HL)^2 M"'), "start", 3, "'M'"),
        # 16. negative tolerance percentage
        (_replace("thickness_pct: 1.0", "thickness_pct: -1"), "tolerances.thickness_pct", 22,
         ">= 0"),
        # 17. a step so fine that the band would take gigabytes (1e-5 nm over 200 nm used
        #     16 GB and ran for minutes in check)
        (_replace("step_nm: 1e0", "step_nm: 1e-5"), "requirements[1].step_nm", 13,
         "at least 0.002 nm"),
    ], ids=["top-key-typo", "requirement-key-typo", "condition-syntax", "percent-forgotten",
            "band-backwards", "grazing-angle", "polarization", "over", "negative-weight",
            "fractional-layers", "unknown-material-tolerance", "equal-without-tolerance",
            "two-quantities", "band-missing", "start-symbol", "negative-tolerance",
            "step-too-fine"])
    def test_mistakes(self, tmp_path, text, key, line, words):
        e = _err(tmp_path, text)
        msg = str(e)
        assert e.key == key, msg
        assert e.line == line, msg
        assert "spec.yaml" in msg and f":{line}" in msg and f"'{key}'" in msg
        assert words in msg

    def test_missing_stack(self):
        with pytest.raises(InputError, match="missing 'stack'"):
            spec_from_mapping({"requirements": [{"R": "<= 1%", "band_nm": [500, 600]}]},
                              file="x.yaml")

    def test_phase_needs_s_or_p(self):
        with pytest.raises(InputError, match="needs polarization s or p") as e:
            spec_from_mapping({"stack": {"substrate": {"n": 1.5}},
                               "requirements": [{"GD": "<= 10 fs", "band_nm": [780, 820],
                                                 "polarization": "mean"}]})
        assert e.value.key == "requirements[0].polarization"

    def test_band_outside_material_range(self):
        ta = Constant(name="Ta2O5-test", source="test", range_nm=(400.0, 900.0), n=2.1)
        with pytest.raises(InputError) as e:
            spec_from_mapping({"stack": {"substrate": {"n": 1.5}}, "materials": {"H": ta},
                               "requirements": [{"R": "<= 1%", "band_nm": [350, 600]}]},
                              file="x.yaml")
        assert e.value.key == "requirements[0].band_nm"
        assert "Ta2O5-test" in str(e.value) and "400–900" in str(e.value)

    def test_a_stack_file_given_as_the_spec_says_so(self, tmp_path):
        # the quote and the spec swapped on the command line used to give "unknown key
        # 'incident' in the spec"
        e = _err(tmp_path, "incident: air\nsubstrate: {n: 1.52}\nlayers:\n"
                           "  - {material: {n: 1.38}, nm: 99.6}\n")
        assert "this is a stack file" in str(e) and "quote comes first" in str(e)

    def test_empty_file(self, tmp_path):
        e = _err(tmp_path, "")
        assert "empty" in str(e)

    def test_colour_without_the_colour_module(self, monkeypatch):
        import sys
        monkeypatch.setitem(sys.modules, "filmstack.colour", None)  # as if not installed
        with pytest.raises(InputError, match="colour requirements need the colour module"):
            spec_from_mapping({"stack": {"substrate": {"n": 1.5}},
                               "requirements": [{"colour": "<= 2", "band_nm": [380, 780]}]})


class TestNestedMessages:
    def test_stack_key_typo_is_prefixed(self, tmp_path):
        e = _err(tmp_path, _replace("substrate: {n: 1.52}", "substrat: {n: 1.52}"))
        assert e.key == "stack.substrat" and e.line == 1
        assert "did you mean 'substrate'" in str(e)

    def test_fixed_layer_error_names_its_place(self, tmp_path):
        e = _err(tmp_path, _replace("requirements:\n", "fixed:\n  bottom:\n"
                                    "    - {material: {n: 1.6}, nm: -5}\nrequirements:\n"))
        assert e.key == "fixed.bottom[0].nm" and e.line == 6

    def test_symbols_are_single_letters(self, tmp_path):
        e = _err(tmp_path, _replace("{H: {n: 2.35}, L: {n: 1.46}}",
                                    "{HI: {n: 2.35}, L: {n: 1.46}}"))
        assert e.key == "materials.HI" and "single letter" in str(e)
