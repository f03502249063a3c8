"""Reading measured spectra (filmstack/io/measured.py): formats, units, sites, and clear errors.

The values here are typed in by hand; the checks are about parsing (units, columns, lines), so
no published source is involved except where noted.
"""

from __future__ import annotations

import numpy as np
import pytest

from filmstack.errors import InputError, OutOfRangeError
from filmstack.io.measured import (NOISE_ALLOWANCE, check_wavelength_range,
                                   read_measured, read_measured_text)
from filmstack.materials import Constant
from filmstack.stack import AIR, Layer, Stack


def one(text, **kw):
    sites = read_measured_text(text, "m.csv", **kw)
    assert len(sites) == 1
    return sites[0]


class TestColumnsAndUnits:
    def test_fraction_column(self):
        m = one("wavelength_nm,R\n400,0.30\n410,0.25\n")
        (c,) = m.channels
        assert (c.quantity, c.angle_deg, c.polarization) == ("R", 0.0, "mean")
        np.testing.assert_array_equal(c.wavelength_nm, [400, 410])
        np.testing.assert_allclose(c.value, [0.30, 0.25])
        assert c.sigma is None
        np.testing.assert_array_equal(c.line, [2, 3])

    @pytest.mark.parametrize("header", ["R_percent", "R (%)", "R [%]", "R%", "%R", "r_pct",
                                        "R percent"])
    def test_percent_from_header(self, header):
        m = one(f"wavelength_nm,{header}\n400,30\n")
        np.testing.assert_allclose(m.channels[0].value, [0.30])

    def test_percent_option_for_a_bare_column(self):
        m = one("wavelength_nm,T\n400,91.5\n", percent=True)
        assert m.channels[0].quantity == "T"
        np.testing.assert_allclose(m.channels[0].value, [0.915])

    def test_fraction_option_contradicting_a_percent_header_is_an_error(self):
        with pytest.raises(InputError, match="says percent"):
            one("wavelength_nm,R_percent\n400,30\n", percent=False)

    def test_sigma_takes_the_unit_of_its_column(self):
        m = one("wavelength_nm,R_percent,sigma\n400,30,0.5\n")
        np.testing.assert_allclose(m.channels[0].sigma, [0.005])
        m = one("wavelength_nm,R,sigma_percent\n400,0.3,0.5\n")
        np.testing.assert_allclose(m.channels[0].sigma, [0.005])

    def test_wavelength_aliases_and_order(self):
        m = one("Wavelength (nm);R\n420;0.2\n400;0.3\n")
        np.testing.assert_array_equal(m.channels[0].wavelength_nm, [400, 420])
        np.testing.assert_allclose(m.channels[0].value, [0.3, 0.2])

    def test_tab_separated(self):
        m = one("wavelength_nm\tR\n400\t0.3\n")
        np.testing.assert_allclose(m.channels[0].value, [0.3])

    def test_r_and_t_and_named_sigmas(self):
        m = one("wavelength_nm,R,T,R_sigma,T_sigma\n400,0.1,0.85,0.001,0.002\n")
        r, t = m.channels
        assert (r.quantity, t.quantity) == ("R", "T")
        np.testing.assert_allclose([r.sigma[0], t.sigma[0]], [0.001, 0.002])

    def test_polarised_columns(self):
        m = one("wavelength_nm,R_s,R_p\n400,0.2,0.1\n", angle_deg=45)
        assert [(c.polarization, c.angle_deg) for c in m.channels] == [("s", 45.0),
                                                                        ("p", 45.0)]

    def test_long_table_of_angles_and_polarisations(self):
        text = ("wavelength_nm,angle_deg,polarization,R\n"
                "400,8,mean,0.1\n410,8,mean,0.2\n400,45,s,0.3\n410,45,s,0.4\n"
                "400,45,p,0.05\n410,45,p,0.06\n")
        m = one(text)
        assert [(c.angle_deg, c.polarization) for c in m.channels] == [
            (8.0, "mean"), (45.0, "s"), (45.0, "p")]
        np.testing.assert_allclose(m.channels[2].value, [0.05, 0.06])

    def test_comment_metadata_and_free_comments(self):
        text = ("# synthetic data for a test\n# angle_deg: 12\n# polarization: s\n"
                "# x_mm: 10\n# y_mm: -5\n# site: centre\nwavelength_nm,R\n400,0.3\n")
        m = one(text)
        assert (m.channels[0].angle_deg, m.channels[0].polarization) == (12.0, "s")
        assert (m.site, m.x_mm, m.y_mm) == ("centre", 10.0, -5.0)

    def test_option_contradicting_the_file_is_an_error(self):
        with pytest.raises(InputError, match="angle"):
            one("# angle_deg: 12\nwavelength_nm,R\n400,0.3\n", angle_deg=8)

    def test_blank_lines_and_comments_between_rows_keep_line_numbers(self):
        m = one("wavelength_nm,R\n400,0.1\n   \n# a note\n410,0.2\n\n")
        np.testing.assert_array_equal(m.channels[0].line, [2, 5])
        with pytest.raises(InputError, match="'x' is not a number") as e:
            one("wavelength_nm,R\n400,0.1\n\n# a note\n410,x\n")
        assert e.value.line == 5

    def test_quoted_cells(self):
        m = one('site,wavelength_nm,R\n"A, centre",400,0.1\n"A, centre",410,0.2\n')
        assert m.site == "A, centre"
        np.testing.assert_allclose(m.channels[0].value, [0.1, 0.2])

    def test_values_just_outside_0_1_are_accepted_as_noise(self):
        m = one(f"wavelength_nm,R\n400,{1 + NOISE_ALLOWANCE / 2}\n410,-0.005\n")
        np.testing.assert_allclose(m.channels[0].value, [1 + NOISE_ALLOWANCE / 2, -0.005])


class TestSites:
    def test_long_table_with_sites_and_positions(self):
        text = ("site,x_mm,y_mm,wavelength_nm,R\n"
                "A,0,0,400,0.1\nA,0,0,410,0.2\nB,10,-20,400,0.3\nB,10,-20,410,0.4\n")
        a, b = read_measured_text(text, "map.csv")
        assert (a.site, a.x_mm, a.y_mm) == ("A", 0.0, 0.0)
        assert (b.site, b.x_mm, b.y_mm) == ("B", 10.0, -20.0)
        np.testing.assert_allclose(b.channels[0].value, [0.3, 0.4])
        assert a.layout_key() == b.layout_key()

    def test_a_site_with_two_positions_is_an_error(self):
        text = "site,x_mm,y_mm,wavelength_nm,R\nA,0,0,400,0.1\nA,0,1,410,0.2\n"
        with pytest.raises(InputError, match="one position per site") as e:
            read_measured_text(text, "map.csv")
        assert e.value.line == 3

    def test_folder_of_files(self, tmp_path):
        for name, v in (("s02", 0.2), ("s01", 0.1)):
            (tmp_path / f"{name}.csv").write_text(
                f"# x_mm: {v * 10}\n# y_mm: 0\nwavelength_nm,R\n400,{v}\n410,{v}\n")
        (tmp_path / "notes.txt").write_text("not a spectrum")
        data = read_measured(tmp_path)
        assert [s.site for s in data.sites] == ["s01", "s02"]
        assert data.is_map and data.has_positions
        assert data.sites[1].x_mm == 2.0

    def test_single_file_site_is_its_name(self, tmp_path):
        p = tmp_path / "sample-7.csv"
        p.write_text("wavelength_nm,R\n400,0.1\n")
        data = read_measured(p)
        assert not data.is_map and data.sites[0].site == "sample-7"

    def test_same_site_in_two_files_is_an_error(self, tmp_path):
        for name in ("a", "b"):
            (tmp_path / f"{name}.csv").write_text("# site: X\nwavelength_nm,R\n400,0.1\n")
        with pytest.raises(InputError, match="unique"):
            read_measured(tmp_path)

    def test_empty_folder_and_missing_path(self, tmp_path):
        with pytest.raises(InputError, match="no .csv files"):
            read_measured(tmp_path)
        with pytest.raises(InputError, match="no such file"):
            read_measured(tmp_path / "nothing.csv")


class TestErrors:
    def test_no_wavelength_column(self):
        with pytest.raises(InputError, match="no wavelength column") as e:
            one("R,T\n0.1,0.9\n")
        assert e.value.line == 1 and e.value.file == "m.csv"
        assert "found: R, T" in str(e.value)

    def test_no_value_column(self):
        with pytest.raises(InputError, match="no measured value column"):
            one("wavelength_nm,sigma\n400,0.1\n")

    def test_percent_read_as_fraction_says_line_column_and_what_to_do(self):
        with pytest.raises(InputError) as e:
            one("wavelength_nm,R\n400,0.3\n410,35.2\n")
        msg = str(e.value)
        assert e.value.line == 3
        assert "column 'R': 35.2 is out of range" in msg
        assert "R_percent" in msg and "--percent" in msg

    def test_negative_value(self):
        with pytest.raises(InputError, match="-0.3 is out of range") as e:
            one("wavelength_nm,T\n400,-0.3\n")
        assert e.value.line == 2

    def test_percent_above_100(self):
        with pytest.raises(InputError, match="out of range"):
            one("wavelength_nm,R_percent\n400,130\n")

    def test_non_numeric_cell_gives_its_line(self):
        with pytest.raises(InputError, match="'n/a' is not a number") as e:
            one("# comment\nwavelength_nm,R\n400,0.1\n410,n/a\n")
        assert e.value.line == 4

    def test_empty_cell(self):
        with pytest.raises(InputError, match="empty cell") as e:
            one("wavelength_nm,R\n400,\n")
        assert e.value.line == 2

    def test_ragged_row(self):
        with pytest.raises(InputError, match="2 columns") as e:
            one("wavelength_nm,R\n400,0.1,7\n")
        assert e.value.line == 2

    def test_repeated_wavelength(self):
        with pytest.raises(InputError, match="appears twice"):
            one("wavelength_nm,R\n400,0.1\n400,0.2\n")

    def test_unknown_column(self):
        with pytest.raises(InputError, match="unknown column 'Rr'"):
            one("wavelength_nm,Rr\n400,0.1\n")

    def test_wavelength_in_micrometres(self):
        with pytest.raises(InputError, match="in nm"):
            one("wavelength_um,R\n0.4,0.1\n")

    def test_non_positive_uncertainty(self):
        with pytest.raises(InputError, match="must be > 0"):
            one("wavelength_nm,R,sigma\n400,0.1,0\n")

    def test_header_only(self):
        with pytest.raises(InputError, match="no data rows"):
            one("wavelength_nm,R\n")


class TestWavelengthRange:
    def stack(self, lo, hi):
        film = Constant(name="film", n=1.46)
        object.__setattr__(film, "range_nm", (lo, hi))
        return Stack(incident=AIR, substrate=Constant(name="sub", n=1.52),
                     layers=(Layer(film, 100.0),))

    def test_outside_the_materials_data_names_the_material(self):
        m = one("wavelength_nm,R\n200,0.1\n500,0.1\n")
        with pytest.raises(OutOfRangeError, match="'film'.*300-900 nm"):
            check_wavelength_range(m, self.stack(300.0, 900.0), model_file="model.yaml")

    def test_inside_passes_and_a_shift_margin_counts(self):
        m = one("wavelength_nm,R\n400,0.1\n800,0.1\n")
        check_wavelength_range(m, self.stack(398.0, 900.0))
        with pytest.raises(OutOfRangeError):
            check_wavelength_range(m, self.stack(398.0, 900.0), margin_nm=(-5.0, 5.0))


class TestInstrumentExports:
    """Files as spectrophotometers and spreadsheets write them (common practice, no published
    source): a free-text preamble, semicolons with decimal commas, a trailing separator,
    Windows line endings, byte-order marks, UTF-16 and Windows-1252 text."""

    ROWS = [(400.0, 44.921), (402.0, 41.843), (404.0, 37.5)]

    def check(self, m):
        (c,) = m.channels
        np.testing.assert_array_equal(c.wavelength_nm, [r[0] for r in self.ROWS])
        np.testing.assert_allclose(c.value, [r[1] / 100 for r in self.ROWS])
        return c

    def test_free_text_preamble_before_the_header_is_skipped(self):
        text = ("Spectrometer XY-100\r\nOperator: J. Doe\r\nDate: 2026-11-30 14:02\r\n\r\n"
                "Wavelength (nm);%R\r\n"
                + "".join(f"{w};{r}\r\n" for w, r in self.ROWS))
        c = self.check(one(text))
        assert c.line[0] == 6                       # lines still counted from the file's top

    def test_trailing_separator_on_every_line_is_an_empty_column(self):
        text = ("Wavelength [nm],Reflectance [%],\r\n"
                + "".join(f"{w},{r},\r\n" for w, r in self.ROWS))
        self.check(one(text))

    def test_trailing_separator_only_on_data_rows(self):
        self.check(one("wavelength_nm;R_percent\n"
                       + "".join(f"{w};{r};\n" for w, r in self.ROWS)))

    def test_a_filled_extra_cell_is_still_an_error(self):
        with pytest.raises(InputError, match="3 cells where the header has 2") as e:
            one("wavelength_nm,R,\n400,0.3,x\n")
        assert e.value.line == 2

    def test_decimal_comma_with_semicolons(self):
        text = "Wavelength (nm);R (%)\n" + "".join(
            f"{w:.1f};{r:.3f}\n".replace(".", ",") for w, r in self.ROWS)
        self.check(one(text))

    def test_decimal_comma_bad_cell_is_named(self):
        with pytest.raises(InputError, match="'abc' is not a number") as e:
            one("wavelength_nm;R\n400,5;0,3\n401;abc\n")
        assert e.value.line == 3

    def test_no_header_anywhere_names_the_first_line(self):
        with pytest.raises(InputError, match="no wavelength column") as e:
            one("Instrument XY\nno table here\n")
        assert e.value.line == 1

    @pytest.mark.parametrize("encoding", ["utf-8-sig", "utf-16", "cp1252"])
    def test_encodings_from_files(self, tmp_path, encoding):
        text = ("Instrument: XY-100, 23 °C\r\nwavelength_nm,R_percent\r\n"
                + "".join(f"{w},{r}\r\n" for w, r in self.ROWS))
        f = tmp_path / "site 1.csv"
        f.write_bytes(text.encode(encoding))
        self.check(read_measured(f).sites[0])

    def test_binary_file_is_refused(self, tmp_path):
        f = tmp_path / "x.csv"
        f.write_bytes(b"PK\x03\x04\x00\x00data")
        with pytest.raises(InputError, match="not a text file"):
            read_measured(f)


def test_wavelengths_in_micrometres_are_named():
    with pytest.raises(InputError, match="look like µm") as e:
        one("wavelength_nm,R\n0.40,0.3\n0.41,0.31\n")
    assert e.value.line == 2
