"""Tests of stack files (filmstack.io.stack_file): loading, validation messages, saving."""

from __future__ import annotations

import difflib
import math
import os
import textwrap

import pytest

import filmstack.io.stack_file as stack_file
from filmstack.errors import InputError
from filmstack.materials import Constant, Material
from filmstack.notation import NotationError
from filmstack.stack import AIR, FreeParameter, Layer, Stack
from filmstack.io.stack_file import (
    format_stack,
    load_stack,
    save_stack,
    stack_from_mapping,
    stack_to_mapping,
)

# A small stand-in library, so these tests do not depend on the bundled data (the real names are
# tested at the end of the file). Indices are round numbers, not data.
FAKE = {
    "air": Constant(name="air", source="test stand-in", n=1.0),
    "TiO2": Constant(name="TiO2", source="test stand-in", n=2.4),
    "SiO2": Constant(name="SiO2", source="test stand-in", n=1.45),
    "glass": Constant(name="glass", source="test stand-in", n=1.52),
    "metal": Constant(name="metal", source="test stand-in", n=0.5, k=3.0),
    "narrow": Constant(name="narrow", source="test stand-in", range_nm=(600.0, 800.0), n=1.7),
}


@pytest.fixture
def calls():
    return []


@pytest.fixture(autouse=True)
def fake_library(request, monkeypatch, calls):
    if getattr(request.cls, "REAL_LIBRARY", False):
        return  # these tests use the bundled library
    real = stack_file.material_from_spec

    def lookup(spec, search_paths=(), **kw):
        calls.append((spec, tuple(search_paths)))
        if isinstance(spec, str) and "." not in spec and "/" not in spec:
            if spec in FAKE:
                return FAKE[spec]
            near = difflib.get_close_matches(spec, FAKE, n=3, cutoff=0.3)
            err = InputError(f"unknown material '{spec}'; nearest names: {', '.join(near)}")
            if kw.get("key") is None:
                raise err
            raise InputError(err.message, file=kw.get("file"), key=kw["key"],
                             line=kw.get("lines", {}).get(kw["key"]))
        return real(spec, search_paths, **kw)

    monkeypatch.setattr(stack_file, "material_from_spec", lookup)


def write(tmp_path, text, name="stack.yaml"):
    p = tmp_path / name
    p.write_text(textwrap.dedent(text).lstrip("\n"), encoding="utf-8")
    return p


def error_of(tmp_path, text) -> InputError:
    p = write(tmp_path, text)
    with pytest.raises(InputError) as info:
        load_stack(p)
    err = info.value
    assert err.file == str(p)  # every message names the file
    return err


FULL = """
incident: air
substrate: {material: glass, mm: 1.0}
exit: {n: 1.33}
reference_nm: 550
layers:
  - {material: TiO2, nm: 12.4}
  - {material: SiO2, qwot: 1.0}
  - {material: SiO2, nm: {fit: 120, min: 50, max: 300}}
  - {material: {n: 2.0, k: 0.01}, nm: 1e-3}
back_layers:
  - {material: SiO2, nm: 94}
"""


class TestLoad:
    def test_full_file(self, tmp_path):
        s = load_stack(write(tmp_path, FULL.replace("incident: air", "incident: {n: 1.0}")))
        assert s.incident.n == 1.0
        assert s.substrate is FAKE["glass"] and s.substrate_mm == 1.0
        assert isinstance(s.exit, Constant) and s.exit.n == 1.33
        assert s.reference_nm == 550.0
        # deposition order: layers[0] touches the substrate and is the first entry
        assert [l.material.name for l in s.layers] == ["TiO2", "SiO2", "SiO2", "n=2,k=0.01"]
        assert s.layers[0].thickness_nm == 12.4
        # QWOT: n·d = λ/4 (Macleod, Thin-Film Optical Filters, 4th ed., §2.4)
        assert s.layers[1].thickness_nm == pytest.approx(550 / (4 * 1.45), rel=1e-15)
        assert s.layers[2].thickness_nm == 120.0
        assert s.layers[3].thickness_nm == 1e-3  # "1e-3" is a number, not text
        assert s.free == (FreeParameter("layers[2].nm", 120.0, 50.0, 300.0),)
        assert [(l.material.name, l.thickness_nm) for l in s.back_layers] == [("SiO2", 94.0)]

    def test_defaults(self, tmp_path):
        s = load_stack(write(tmp_path, "substrate: glass\nlayers: []\n"))
        assert s.incident == AIR and s.exit == AIR
        assert s.substrate_mm is None and s.layers == () and s.back_layers == ()
        assert s.reference_nm == 550.0 and s.free == ()

    @pytest.mark.parametrize("sub,mm", [
        ("glass", None), ("{material: glass}", None), ("{material: glass, mm: 2}", 2.0),
        ("{n: 1.52}", None), ("{n: 1.52, mm: 0.5}", 0.5), ("{material: {n: 1.52}, mm: 3}", 3.0),
    ])
    def test_substrate_forms(self, tmp_path, sub, mm):
        s = load_stack(write(tmp_path, f"substrate: {sub}\nlayers: []\n"))
        assert s.substrate.n == 1.52 and s.substrate_mm == mm

    def test_free_thickness_defaults_to_nonnegative_unbounded(self, tmp_path):
        s = load_stack(write(tmp_path, """
            substrate: glass
            layers: [{material: SiO2, nm: {fit: 80}}]
        """))
        assert s.free == (FreeParameter("layers[0].nm", 80.0, 0.0, math.inf),)

    def test_design_equals_the_same_layers_written_out(self, tmp_path):
        by_design = load_stack(write(tmp_path, """
            substrate: glass
            reference_nm: 600
            design: "(HL)^2 0.5H"
            symbols: {H: TiO2, L: SiO2}
        """, "a.yaml"))
        by_layers = load_stack(write(tmp_path, """
            substrate: glass
            reference_nm: 600
            layers:
              - {material: TiO2, qwot: 1}
              - {material: SiO2, qwot: 1}
              - {material: TiO2, qwot: 1}
              - {material: SiO2, qwot: 1}
              - {material: TiO2, qwot: 0.5}
        """, "b.yaml"))
        assert by_design == by_layers
        assert by_design.layers[0].thickness_nm == pytest.approx(600 / (4 * 2.4), rel=1e-15)

    def test_design_keeps_adjacent_same_material_layers(self, tmp_path):
        s = load_stack(write(tmp_path, """
            substrate: glass
            reference_nm: 550
            design: "H 0.5H L"
            symbols: {H: TiO2, L: {n: 1.38}}
        """))
        assert len(s.layers) == 3
        assert s.layers[0].material is s.layers[1].material is FAKE["TiO2"]
        assert s.layers[2].material.n == 1.38

    def test_back_design(self, tmp_path):
        s = load_stack(write(tmp_path, """
            substrate: {material: glass, mm: 1}
            reference_nm: 550
            layers: []
            back_design: "LH"
            symbols: {H: TiO2, L: SiO2}
        """))
        assert [l.material.name for l in s.back_layers] == ["SiO2", "TiO2"]

    def test_each_material_is_looked_up_once(self, tmp_path, calls):
        load_stack(write(tmp_path, """
            substrate: glass
            layers: [{material: SiO2, nm: 1}, {material: SiO2, nm: 2}, {material: SiO2, nm: 3}]
        """))
        assert [c[0] for c in calls].count("SiO2") == 1

    def test_materials_dir_is_searched_relative_to_the_file(self, tmp_path, calls):
        (tmp_path / "mine").mkdir()
        (tmp_path / "extra").mkdir()
        p = write(tmp_path, """
            substrate: glass
            materials_dir: mine
            layers: []
        """)
        load_stack(p, search_paths=[tmp_path / "extra"])
        # the caller's folders are searched first: get_material searches later folders first
        assert calls[-1] == ("glass", (tmp_path / "mine", tmp_path / "extra"))

    def test_key_prefix_for_embedded_stacks(self):
        from filmstack.io.yamlfile import load_yaml_text
        data, lines = load_yaml_text("stack:\n  substrate: glass\n  layers:\n"
                                     "    - {material: SiO2, nm: -1}\n", "spec.yaml")
        with pytest.raises(InputError) as info:
            stack_from_mapping(data["stack"], file="spec.yaml", lines=lines, key_prefix="stack")
        assert info.value.key == "stack.layers[0].nm" and info.value.line == 4
        s = stack_from_mapping({"substrate": "glass"}, require_layers=False)
        assert s.layers == ()


class TestMistakes:
    """Real mistakes: one clear message naming the file, key path, line and what was expected."""

    def test_typo_in_top_level_key(self, tmp_path):
        err = error_of(tmp_path, "substrat: glass\nlayers: []\n")
        assert err.key == "substrat" and err.line == 1
        assert "unknown key 'substrat'" in str(err) and "did you mean 'substrate'" in str(err)

    def test_typo_in_layer_key(self, tmp_path):
        err = error_of(tmp_path, """
            substrate: glass
            layers:
              - {material: TiO2, nm: 10}
              - {material: SiO2, mn: 95}
        """)
        assert err.key == "layers[1].mn" and err.line == 4
        assert "did you mean 'nm'" in str(err)

    def test_missing_substrate(self, tmp_path):
        err = error_of(tmp_path, "layers: []\n")
        assert "missing required key 'substrate'" in str(err)

    def test_missing_layers(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\n")
        assert "give layers" in str(err) and "design" in str(err)

    def test_negative_thickness(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers:\n  - {material: SiO2, nm: -5}\n")
        assert err.key == "layers[0].nm" and err.line == 3
        assert "must be >= 0 nm" in str(err) and "-5" in str(err)

    @pytest.mark.parametrize("value", [".nan", ".inf"])
    def test_non_finite_thickness(self, tmp_path, value):
        err = error_of(tmp_path, f"substrate: glass\nlayers: [{{material: SiO2, nm: {value}}}]\n")
        assert err.key == "layers[0].nm" and "finite" in str(err)

    def test_both_nm_and_qwot(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nreference_nm: 550\n"
                                 "layers: [{material: SiO2, nm: 90, qwot: 1}]\n")
        assert err.key == "layers[0]" and "either nm or qwot, not both" in str(err)

    def test_neither_nm_nor_qwot(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers: [{material: SiO2}]\n")
        assert err.key == "layers[0]" and "missing thickness" in str(err)

    def test_number_written_with_unit(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\nlayers:\n  - {material: SiO2, nm: "12 nm"}\n')
        assert err.key == "layers[0].nm" and err.line == 3
        assert 'got the text "12 nm"' in str(err) and "without a unit (12)" in str(err)

    def test_number_in_quotes(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\nreference_nm: "550"\nlayers: []\n')
        assert err.key == "reference_nm" and "without quotes" in str(err)

    def test_unknown_material_lists_nearest_names(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers:\n  - {material: TiO, nm: 10}\n")
        assert err.key == "layers[0].material" and err.line == 3
        assert "unknown material 'TiO'" in str(err) and "TiO2" in str(err)

    @pytest.mark.parametrize("mm", ["0", "-1"])
    def test_substrate_thickness_not_positive(self, tmp_path, mm):
        err = error_of(tmp_path, f"substrate:\n  material: glass\n  mm: {mm}\nlayers: []\n")
        assert err.key == "substrate.mm" and err.line == 3 and "must be > 0 mm" in str(err)

    def test_back_layers_without_thick_substrate(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers: []\n"
                                 "back_layers: [{material: SiO2, nm: 90}]\n")
        assert err.key == "back_layers" and err.line == 3
        assert "need a thick substrate" in str(err)

    def test_exit_without_thick_substrate(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nexit: {n: 1.33}\nlayers: []\n")
        assert err.key == "exit" and err.line == 2 and "thick substrate" in str(err)

    def test_fit_bounds_reversed(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers:\n"
                                 "  - {material: SiO2, nm: {fit: 100, min: 300, max: 50}}\n")
        assert err.key == "layers[0].nm" and err.line == 3
        assert "min (300 nm) is greater than max (50 nm)" in str(err)

    def test_fit_start_outside_bounds(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers:\n"
                                 "  - {material: SiO2, nm: {fit: 20, min: 50, max: 300}}\n")
        assert err.key == "layers[0].nm.fit" and "outside its bounds [50, 300]" in str(err)

    def test_typo_in_fit_mapping(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers:\n"
                                 "  - {material: SiO2, nm: {fit: 100, mx: 300}}\n")
        assert err.key == "layers[0].nm.mx" and "did you mean 'max'" in str(err)

    def test_free_qwot_is_refused(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nreference_nm: 550\nlayers:\n"
                                 "  - {material: SiO2, qwot: {fit: 1}}\n")
        assert err.key == "layers[0].qwot" and "only a thickness in nm can be free" in str(err)

    def test_qwot_needs_reference_wavelength(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers: [{material: SiO2, qwot: 1}]\n")
        assert err.key == "layers[0].qwot" and "needs reference_nm" in str(err)

    def test_reference_outside_material_data(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nreference_nm: 550\n"
                                 "layers:\n  - {material: narrow, qwot: 1}\n")
        assert err.key == "layers[0].qwot" and err.line == 4
        assert "from 600 to 800 nm" in str(err)

    def test_top_level_not_a_mapping(self, tmp_path):
        err = error_of(tmp_path, "- {material: SiO2, nm: 90}\n")
        assert "expected a stack: a mapping" in str(err) and "got a list" in str(err)

    def test_empty_file(self, tmp_path):
        err = error_of(tmp_path, "# nothing yet\n")
        assert "the stack is empty" in str(err)

    def test_malformed_yaml_gives_the_line(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers:\n  - {material: SiO2, nm: 90\n"
                                 "reference_nm: 550\n")
        assert err.line is not None and err.line >= 3 and "not valid YAML" in str(err)

    def test_duplicate_key(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers: []\nsubstrate: air\n")
        assert err.line == 3 and "duplicate key 'substrate'" in str(err)

    def test_layers_not_a_list(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers: {material: SiO2, nm: 90}\n")
        assert err.key == "layers" and "expected a list of layers" in str(err)

    def test_layer_given_as_a_bare_name(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers: [SiO2]\n")
        assert err.key == "layers[0]" and 'got the text "SiO2"' in str(err)

    def test_layers_and_design_together(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\nreference_nm: 550\nlayers: []\n'
                                 'design: "HL"\nsymbols: {H: TiO2, L: SiO2}\n')
        assert err.key == "design" and "not both" in str(err)

    def test_design_notation_error_points_at_line_and_column(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\nreference_nm: 550\n'
                                 'design: "(HL))^7 H"\nsymbols: {H: TiO2, L: SiO2}\n')
        assert isinstance(err, NotationError)
        assert err.key == "design" and err.line == 3 and err.column == 5
        assert "unexpected ')' at column 5" in str(err)

    def test_design_unknown_symbol(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\nreference_nm: 550\n'
                                 'design: "HLM"\nsymbols: {H: TiO2, L: SiO2}\n')
        assert "unknown symbol 'M'" in str(err) and "known symbols: H, L" in str(err)

    def test_design_without_symbols(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\nreference_nm: 550\ndesign: "HL"\n')
        assert err.key == "design" and "needs symbols" in str(err)

    def test_design_without_reference_wavelength(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\ndesign: "HL"\n'
                                 'symbols: {H: TiO2, L: SiO2}\n')
        assert err.key == "design" and "needs reference_nm" in str(err)

    def test_symbol_that_is_not_a_letter(self, tmp_path):
        err = error_of(tmp_path, 'substrate: glass\nreference_nm: 550\ndesign: "H"\n'
                                 'symbols: {H: TiO2, H2: SiO2}\n')
        assert err.key == "symbols.H2" and err.line == 4 and "single letter" in str(err)

    def test_symbols_without_design(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nlayers: []\nsymbols: {H: TiO2}\n")
        assert err.key == "symbols" and "only used by design" in str(err)

    def test_inline_material_typo(self, tmp_path):
        err = error_of(tmp_path, "substrate: {material: {n: 1.5, kk: 0.1}}\nlayers: []\n")
        assert err.key == "substrate.material.kk" and "did you mean 'k'" in str(err)

    def test_negative_extinction(self, tmp_path):
        err = error_of(tmp_path, "substrate: {n: 1.5, k: -0.1}\nlayers: []\n")
        assert err.key == "substrate.k" and "must be >= 0" in str(err)

    def test_inline_index_not_positive(self, tmp_path):
        err = error_of(tmp_path, "substrate: {n: 0}\nlayers: []\n")
        assert err.key == "substrate.n" and err.line == 1 and "must be > 0, got 0" in str(err)

    def test_absorbing_incident_medium(self, tmp_path):
        err = error_of(tmp_path, "incident: metal\nsubstrate: glass\nlayers: []\n")
        assert err.key == "incident" and "must not absorb" in str(err)

    def test_materials_dir_missing(self, tmp_path):
        err = error_of(tmp_path, "substrate: glass\nmaterials_dir: nowhere\nlayers: []\n")
        assert err.key == "materials_dir" and "folder not found" in str(err)

    def test_missing_file(self, tmp_path):
        with pytest.raises(InputError, match="file not found"):
            load_stack(tmp_path / "nope.yaml")


class TestSave:
    def test_round_trip_gives_an_equal_stack(self, tmp_path):
        s = load_stack(write(tmp_path, FULL))
        out = tmp_path / "saved.yaml"
        save_stack(s, out)
        again = load_stack(out)
        assert again == s
        text = out.read_text()
        assert "material: TiO2" in text          # library materials by name
        assert "{n: 2.0, k: 0.01}" in text       # constants inline
        assert "{fit: 120.0, min: 50.0, max: 300.0}" in text
        assert "qwot" not in text                # thicknesses always in nm

    def test_inline_models_round_trip(self, tmp_path):
        # every inline model a stack file may hold is written back inline and reads back equal
        # (issue: saving a loaded stack and loading it again gives the same stack); model
        # parameters are round numbers of our own, not data
        text = textwrap.dedent("""\
            substrate: {n: 1.52}
            layers:
              - {material: {cauchy: [2.2, 0.02]}, nm: 10}
              - {material: {sellmeier: [[1.1, 0.01]], range_nm: [400, 900]}, nm: 20}
              - material: {model: drude-lorentz, plasma_eV: 9.0, range_nm: [300, 1000],
                           oscillators: [{f: 0.8, omega_eV: 0, gamma_eV: 0.05}]}
                nm: 5
              - material: {model: tauc-lorentz, Eg_eV: 3.2, range_nm: [250, 1500],
                           oscillators: [{A_eV: 150, E0_eV: 4.5, C_eV: 1.5}], eps_inf: 2.0}
                nm: 30
              - {material: {model: table, table: [[400, 2.0, 0.1], [800, 1.9, 0]]}, nm: 7}
              - material: {model: combined, range_nm: [400, 800],
                           n: {model: cauchy, A: 1.45, range_nm: [300, 1000]},
                           k: {model: table, columns: [wavelength_nm, k],
                               table: [[400, 0.001], [800, 0]]}}
                nm: 40
            """)
        s = load_stack(write(tmp_path, text))
        out = tmp_path / "saved.yaml"
        save_stack(s, out)
        again = load_stack(out)
        assert again == s
        assert "cauchy" in out.read_text() and "tauc-lorentz" in out.read_text()

    def test_full_precision(self, tmp_path):
        d = [1 / 3, 2 ** -40, 123456.78901234567, 0.0]
        s = Stack(incident=AIR, substrate=FAKE["glass"],
                  layers=tuple(Layer(FAKE["SiO2"], x) for x in d), reference_nm=632.8)
        save_stack(s, tmp_path / "p.yaml")
        again = load_stack(tmp_path / "p.yaml")
        assert again.thicknesses_nm.tolist() == d
        assert again == s

    def test_python_built_stack_with_inline_media(self, tmp_path):
        inline = stack_file.material_from_spec({"n": 1.46})  # as a file's {n: 1.46} loads
        s = Stack(incident=AIR, substrate=FAKE["glass"], substrate_mm=1.0, exit=inline,
                  layers=(Layer(inline, 100.0),), back_layers=(Layer(FAKE["TiO2"], 5.0),),
                  free=(FreeParameter("layers[0].nm", 100.0, 10.0, math.inf),
                        FreeParameter("back_layers[0].nm", 5.0, 0.0, 50.0)))
        save_stack(s, tmp_path / "q.yaml")
        assert load_stack(tmp_path / "q.yaml") == s

    def test_stack_to_mapping(self):
        s = Stack(incident=AIR, substrate=FAKE["glass"], layers=(Layer(FAKE["TiO2"], 10.0),))
        assert stack_to_mapping(s) == {"substrate": "glass", "reference_nm": 550.0,
                                       "layers": [{"material": "TiO2", "nm": 10.0}]}

    def test_comment_and_one_line_layers(self):
        s = Stack(incident=AIR, substrate=FAKE["glass"], layers=(Layer(FAKE["TiO2"], 10.0),))
        text = format_stack(s, comment="Larkspur Optics: visible AR\nsecond line")
        assert "# Larkspur Optics: visible AR\n# second line\n" in text
        assert "  - {material: TiO2, nm: 10.0}\n" in text

    def test_material_that_cannot_be_written(self, tmp_path):
        class Odd(Material):
            def _nk(self, wl):
                return wl * 0 + 1.5

        s = Stack(incident=AIR, substrate=Odd(name="mystery"), layers=())
        with pytest.raises(InputError, match="'mystery' cannot be written"):
            save_stack(s, tmp_path / "x.yaml")

    def test_nothing_written_on_error(self, tmp_path):
        out = tmp_path / "keep.yaml"
        out.write_text("old content\n")
        s = Stack(incident=AIR, substrate=FAKE["glass"],
                  free=(FreeParameter("substrate.n", 1.5),))
        with pytest.raises(InputError, match="not layer thicknesses: substrate.n"):
            save_stack(s, out)
        assert out.read_text() == "old content\n"
        assert os.listdir(tmp_path) == ["keep.yaml"]  # no temporary file left behind

    def test_replaces_atomically(self, tmp_path):
        out = tmp_path / "d.yaml"
        out.write_text("old\n")
        s = Stack(incident=AIR, substrate=FAKE["glass"], layers=(Layer(FAKE["TiO2"], 1.0),))
        save_stack(s, out)
        assert load_stack(out) == s
        assert os.listdir(tmp_path) == ["d.yaml"]

    def test_materials_dir_is_written_and_used(self, tmp_path, calls):
        (tmp_path / "mine").mkdir()
        s = Stack(incident=AIR, substrate=FAKE["glass"], layers=(Layer(FAKE["SiO2"], 1.0),))
        save_stack(s, tmp_path / "m.yaml", materials_dir="mine")
        assert "materials_dir: mine\n" in (tmp_path / "m.yaml").read_text()
        assert load_stack(tmp_path / "m.yaml") == s
        assert calls[-1][1] == (tmp_path / "mine",)


class TestRealLibrary:
    """The same paths with the bundled library (filmstack/data/materials)."""

    REAL_LIBRARY = True

    TEXT = """
        incident: air
        substrate: {material: fused-silica, mm: 1.0}
        exit: air
        reference_nm: 550
        layers:
          - {material: TiO2, qwot: 1}
          - {material: SiO2, qwot: 1}
          - {material: TiO2, nm: {fit: 20, min: 5, max: 40}}
        back_design: "0.5L"
        symbols: {L: MgF2}
    """

    def test_load(self, tmp_path):
        from filmstack.materials import get_material
        s = load_stack(write(tmp_path, self.TEXT))
        assert [l.material.name for l in s.layers] == ["TiO2", "SiO2", "TiO2"]
        assert s.substrate.name == "fused-silica" and s.substrate_mm == 1.0
        # Malitson, J. Opt. Soc. Am. 55, 1205 (1965): fused silica n(587.6 nm) = 1.4585
        assert s.substrate.nk(587.6).real == pytest.approx(1.4585, abs=2e-4)
        # QWOT: n(λ_ref)·d = λ_ref/4 with the library's own index (Macleod, 4th ed., §2.4)
        n_tio2 = get_material("TiO2").nk(550.0).real
        assert s.layers[0].thickness_nm == pytest.approx(550 / (4 * n_tio2), rel=1e-12)
        n_mgf2 = get_material("MgF2").nk(550.0).real
        assert s.back_layers[0].thickness_nm == pytest.approx(0.5 * 550 / (4 * n_mgf2),
                                                              rel=1e-12)
        assert s.free == (FreeParameter("layers[2].nm", 20.0, 5.0, 40.0),)

    def test_round_trip_writes_library_names(self, tmp_path):
        s = load_stack(write(tmp_path, self.TEXT))
        save_stack(s, tmp_path / "out.yaml")
        text = (tmp_path / "out.yaml").read_text()
        for name in ("incident: air", "material: fused-silica", "material: TiO2",
                     "material: SiO2", "material: MgF2", "exit: air"):
            assert name in text
        assert load_stack(tmp_path / "out.yaml") == s

    def test_alias_and_case_are_written_as_the_library_name(self, tmp_path):
        s = load_stack(write(tmp_path, "substrate: Fused-Silica\nlayers: []\n"))
        save_stack(s, tmp_path / "out.yaml")
        assert "substrate: fused-silica\n" in (tmp_path / "out.yaml").read_text()
        assert load_stack(tmp_path / "out.yaml") == s

    def test_crown_glass_substrate(self, tmp_path):
        s = load_stack(write(tmp_path, "substrate: crown-glass\nlayers: "
                                       "[{material: MgF2, nm: 99.6}]\n"))
        assert s.substrate.name == "crown-glass" and s.substrate_mm is None

    def test_unknown_name_lists_nearest(self, tmp_path):
        err = error_of(tmp_path, "substrate: crown-glass\nlayers:\n"
                                 "  - {material: TiO3, nm: 10}\n")
        assert err.key == "layers[0].material" and err.line == 3
        assert "unknown material 'TiO3'" in str(err) and "TiO2" in str(err)

    def test_reference_outside_the_data(self, tmp_path):
        err = error_of(tmp_path, "substrate: crown-glass\nreference_nm: 150\nlayers:\n"
                                 "  - {material: SiO2, qwot: 1}\n")
        assert err.key == "layers[0].qwot" and err.line == 4
        assert "material 'SiO2' has data from 252 to 1250 nm" in str(err)

    def test_users_own_materials_by_name_and_by_path(self, tmp_path):
        mine = tmp_path / "mine"
        mine.mkdir()
        (mine / "larkspur-hi.yaml").write_text(
            "name: larkspur-hi\nmodel: constant\nn: 2.1\n"
            "source: synthetic example of a user's own film (Larkspur Optics)\n")
        (tmp_path / "film.csv").write_text(
            "# synthetic n,k of a user's film\nwavelength_nm,n,k\n400,1.50,0.001\n800,1.48,0\n")
        s = load_stack(write(tmp_path, """
            substrate: crown-glass
            materials_dir: mine
            layers:
              - {material: larkspur-hi, nm: 60}
              - {material: film.csv, nm: 90}
        """))
        assert s.layers[0].material.n == 2.1
        assert s.layers[1].material.nk(600.0) == pytest.approx(1.49 + 0.0005j)
        save_stack(s, tmp_path / "out.yaml", materials_dir="mine")
        text = (tmp_path / "out.yaml").read_text()
        assert "material: larkspur-hi" in text and "material: film.csv" in text
        assert load_stack(tmp_path / "out.yaml") == s
