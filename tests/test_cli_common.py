"""Shared CLI helpers: option validation, JSON rules, atomic writes, progress, spectrum files, plots."""

from __future__ import annotations

import json
import math
import os
import signal
import stat
import struct
import xml.etree.ElementTree as ET
from types import SimpleNamespace

import numpy as np
import pytest

from filmstack.cli import _common as c
from filmstack.errors import InputError, OutOfRangeError
from filmstack.io.atomic import atomic_write, check_writable, write_bytes_atomic, write_text_atomic
from filmstack.io.json_out import dumps_json, to_jsonable
from filmstack.io.spectra_out import band_summary, spectrum_csv, spectrum_json, write_spectrum


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (PNG spec, ISO/IEC 15948, §11.2.2)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG signature"
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


# -- option validation -------------------------------------------------------------------------
class TestWavelengthGrid:
    def test_inclusive_end_on_the_grid(self):
        wl = c.wavelength_grid(400, 700, 5)
        assert wl[0] == 400 and wl[-1] == 700 and wl.size == 61
        assert np.all(np.diff(wl) > 0)

    def test_end_off_the_grid_stops_below_it(self):
        wl = c.wavelength_grid(400, 702, 5)
        assert wl[-1] == 700

    def test_from_equal_to_is_one_wavelength(self):
        # a single wavelength (a laser line) is a legal grid
        assert c.wavelength_grid(1064, 1064, 1).tolist() == [1064.0]

    def test_decimal_steps_print_cleanly(self):
        wl = c.wavelength_grid(400, 401, 0.1)
        assert wl.size == 11
        assert [f"{x:g}" for x in wl[:4]] == ["400", "400.1", "400.2", "400.3"]
        assert wl[-1] == 401

    @pytest.mark.parametrize("args, words", [
        ((800, 400, 1), ["--from", "not be above", "--to"]),
        ((500, 500, 0), ["--step", "> 0"]),
        ((400, 700, 0), ["--step", "> 0"]),
        ((400, 700, -1), ["--step"]),
        ((0, 700, 1), ["--from", "> 0"]),
        ((-5, 700, 1), ["--from"]),
        ((float("nan"), 700, 1), ["--from", "finite"]),
        ((400, float("inf"), 1), ["--to", "finite"]),
        ((400, 700, 1e-6), ["--step", "at most"]),
    ])
    def test_bad_grids(self, args, words):
        with pytest.raises(InputError) as info:
            c.wavelength_grid(*args)
        for w in words:
            assert w in str(info.value)

    def test_option_names_in_messages(self):
        with pytest.raises(InputError, match="--lo"):
            c.wavelength_grid(9, 1, 1, names=("--lo", "--hi", "--by"))


class TestAngles:
    def test_default_is_normal_incidence(self):
        assert c.check_angles(None).tolist() == [0.0]
        assert c.check_angles([]).tolist() == [0.0]

    def test_order_kept_repeats_dropped(self):
        assert c.check_angles([45, 0, 45, 89.9]).tolist() == [45.0, 0.0, 89.9]

    @pytest.mark.parametrize("bad", [90, 95, -1, float("nan"), float("inf")])
    def test_out_of_range(self, bad):
        with pytest.raises(InputError, match="--angle"):
            c.check_angles([0, bad])


class TestPolarization:
    def test_values_and_case(self):
        assert c.parse_polarization("S") == "s"
        assert c.parse_polarizations(None) == ["mean"]
        assert c.parse_polarizations(["s,p", "p", "MEAN"]) == ["s", "p", "mean"]

    @pytest.mark.parametrize("bad", ["x", "unpolarised", "sp", ""])
    def test_bad(self, bad):
        with pytest.raises(InputError, match="s, p or mean"):
            c.parse_polarization(bad)


class TestRange:
    def test_parse(self):
        assert c.parse_range("0:1200") == (0.0, 1200.0)
        assert c.parse_range(" 50 : 60.5 ") == (50.0, 60.5)

    @pytest.mark.parametrize("bad", ["100", "5:1", "1:1", "-1:5", "a:5", "1:2:3", "0:inf"])
    def test_bad(self, bad):
        with pytest.raises(InputError, match="--range"):
            c.parse_range(bad)

    def test_zero_refused_when_asked(self):
        with pytest.raises(InputError):
            c.parse_range("0:5", allow_zero=False)


class TestOutputAndFiles:
    def test_check_output_suffix(self, tmp_path):
        assert c.check_output(None, ("csv",), option="--out") is None
        p, fmt = c.check_output(tmp_path / "a.JSON", ("csv", "json"), option="--out")
        assert fmt == "json" and p.name == "a.JSON"
        with pytest.raises(InputError, match=r"--out must be a file ending in \.csv or \.json"):
            c.check_output(tmp_path / "a.txt", ("csv", "json"), option="--out")

    def test_check_output_missing_folder(self, tmp_path):
        with pytest.raises(InputError, match="does not exist"):
            c.check_output(tmp_path / "no" / "a.png", ("png",), option="--plot")
        assert not (tmp_path / "no").exists()

    def test_require_file(self, tmp_path):
        f = tmp_path / "a.yaml"
        f.write_text("x: 1\n")
        assert c.require_file(f) == f
        with pytest.raises(InputError, match="no such stack file"):
            c.require_file(tmp_path / "b.yaml", what="stack file")
        with pytest.raises(InputError, match="folder"):
            c.require_file(tmp_path)

    def test_wavelengths_outside_a_material(self):
        from filmstack.materials import Material

        class Narrow(Material):
            def _nk(self, wl):
                return np.full(wl.shape, 1.5 + 0j)

        from filmstack.stack import AIR

        stack = SimpleNamespace(materials=(Narrow(name="glassy", range_nm=(400.0, 900.0)),),
                                incident=AIR)
        c.check_wavelengths_in_range(stack, np.array([400.0, 900.0]))
        with pytest.raises(OutOfRangeError) as info:
            c.check_wavelengths_in_range(stack, np.array([350.0, 700.0]), file="part.yaml")
        msg = str(info.value)
        assert msg.startswith("part.yaml: ") and "'glassy'" in msg and "400 to 900 nm" in msg
        with pytest.raises(OutOfRangeError, match="0.4 µm is 400 nm"):   # a grid typed in µm
            c.check_wavelengths_in_range(stack, np.array([0.4, 0.7]), file="part.yaml")

    def test_absorbing_incident_medium_is_named_before_any_work(self):
        from filmstack.materials import Constant

        ink = Constant(name="ink", n=1.5, k=0.01)
        stack = SimpleNamespace(materials=(ink,), incident=ink)
        with pytest.raises(InputError) as info:
            c.check_wavelengths_in_range(stack, np.array([500.0]), file="part.yaml")
        assert info.value.key == "incident" and "'ink' absorbs" in str(info.value)


# -- JSON ------------------------------------------------------------------------------------
class TestJson:
    def test_numpy_and_non_finite(self):
        obj = {"a": np.array([[1.0, np.nan], [np.inf, -np.inf]]), "b": np.float64(0.1),
               "c": np.int64(3), "d": (1, 2), "e": np.bool_(True), "f": [np.float32(0.5)]}
        plain = to_jsonable(obj)
        assert plain == {"a": [[1.0, None], [None, None]], "b": 0.1, "c": 3, "d": [1, 2],
                         "e": True, "f": [0.5]}
        text = dumps_json(obj)
        assert json.loads(text) == plain
        assert "NaN" not in text and "Infinity" not in text

    def test_full_precision_round_trip(self):
        x = np.array([0.1 + 0.2, 1 / 3, 2.0 ** -40])
        assert json.loads(dumps_json(x)) == x.tolist()

    def test_complex_refused(self):
        with pytest.raises(TypeError):
            to_jsonable(np.array([1 + 2j]))
        with pytest.raises(TypeError):
            to_jsonable(object())

    def test_print_json_is_one_document(self, capsys):
        c.print_json({"x": np.arange(3)})
        out = capsys.readouterr().out
        assert json.loads(out) == {"x": [0, 1, 2]}
        assert out.count("\n") == 1


# -- atomic writes --------------------------------------------------------------------------------
class TestAtomic:
    def test_writes_text_and_bytes(self, tmp_path):
        write_text_atomic(tmp_path / "a.csv", "x,y\n1,2\n")
        write_bytes_atomic(tmp_path / "b.bin", b"\x00\x01")
        assert (tmp_path / "a.csv").read_text() == "x,y\n1,2\n"
        assert (tmp_path / "b.bin").read_bytes() == b"\x00\x01"
        assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "b.bin"]

    def test_failure_leaves_nothing_behind(self, tmp_path):
        with pytest.raises(RuntimeError):
            with atomic_write(tmp_path / "out.csv") as f:
                f.write("half a file")
                raise RuntimeError("boom")
        assert list(tmp_path.iterdir()) == []

    def test_failure_keeps_the_old_file(self, tmp_path):
        target = tmp_path / "out.csv"
        target.write_text("old\n")
        with pytest.raises(KeyboardInterrupt):
            with atomic_write(target) as f:
                f.write("new, but cut short")
                raise KeyboardInterrupt
        assert target.read_text() == "old\n"
        assert list(tmp_path.iterdir()) == [target]

    def test_new_file_mode_follows_umask(self, tmp_path):
        old = os.umask(0o022)
        try:
            write_text_atomic(tmp_path / "a.txt", "x")
        finally:
            os.umask(old)
        assert stat.S_IMODE((tmp_path / "a.txt").stat().st_mode) == 0o644

    def test_replaced_file_keeps_its_mode(self, tmp_path):
        target = tmp_path / "a.txt"
        target.write_text("x")
        target.chmod(0o600)
        write_text_atomic(target, "y")
        assert stat.S_IMODE(target.stat().st_mode) == 0o600 and target.read_text() == "y"

    def test_folder_problems_are_input_errors(self, tmp_path):
        with pytest.raises(InputError, match="is a folder"):
            check_writable(tmp_path)
        with pytest.raises(InputError, match="does not exist"):
            write_text_atomic(tmp_path / "missing" / "a.txt", "x")


# -- progress ----------------------------------------------------------------------------------
class TestProgress:
    def test_disabled_prints_nothing(self, capsys):
        with c.Progress("work", total=3, enabled=False) as p:
            for _ in range(3):
                p.advance(status="ok")
            p.update(completed=3, total=3)
        assert capsys.readouterr().err == ""

    def test_enabled_display_is_taken_down_on_ctrl_c(self):
        with pytest.raises(KeyboardInterrupt):
            with c.Progress("work", total=10, enabled=True) as p:
                p.advance(2)
                raise KeyboardInterrupt
        assert p._progress is None

    def test_first_ctrl_c_asks_to_stop_second_aborts(self, capsys):
        before = signal.getsignal(signal.SIGINT)
        steps = 0
        with pytest.raises(KeyboardInterrupt):
            with c.Progress("refine", total=100, stop_on_interrupt=True, enabled=False) as p:
                for _ in range(100):
                    if p.stop_requested:
                        break
                    steps += 1
                    if steps == 3:
                        os.kill(os.getpid(), signal.SIGINT)
                assert p.stop_requested and steps == 3      # stopped early, kept going
                os.kill(os.getpid(), signal.SIGINT)         # a second Ctrl-C aborts
        assert signal.getsignal(signal.SIGINT) is before
        assert "stopping after this step" in capsys.readouterr().err


# -- spectrum files and plots (format only; the numbers come from the engine tests) ---------------
def _fake(pol="mean", angles=(0.0, 45.0)):
    wl = np.array([400.0, 500.0, 600.0])
    a = np.asarray(angles)
    R = np.array([[0.04, 0.01, 0.02], [0.05, 0.02, 0.03]])[: a.size]
    A = np.zeros_like(R)
    return SimpleNamespace(wavelength_nm=wl, angle_deg=a, polarization=pol, R=R, T=1 - R - A,
                           A=A)


class TestSpectrumFiles:
    def test_band_summary(self):
        s = band_summary([400, 500, 600], np.array([[0.3, 0.1, 0.5], [0.2, 0.2, 0.2]]))
        assert s["mean"] == pytest.approx([0.3, 0.2])
        assert s["min"].tolist() == [0.1, 0.2] and s["min_nm"].tolist() == [500, 400]
        assert s["max"].tolist() == [0.5, 0.2] and s["max_nm"].tolist() == [600, 400]

    def test_json_single_polarization_has_design_keys(self):
        d = to_jsonable(spectrum_json(_fake()))
        assert list(d) == ["wavelength_nm", "angle_deg", "polarization", "R", "T", "A"]
        assert d["polarization"] == "mean"
        assert np.shape(d["R"]) == (2, 3)     # [angle][wavelength]

    def test_json_several_polarizations_lead_axis(self):
        d = to_jsonable(spectrum_json([_fake("s"), _fake("p")]))
        assert d["polarization"] == ["s", "p"]
        assert np.shape(d["T"]) == (2, 2, 3)  # [polarization][angle][wavelength]

    def test_mismatched_grids_refused(self):
        with pytest.raises(ValueError):
            spectrum_json([_fake("s"), _fake("p", angles=(0.0,))])

    def test_csv_header_has_units_and_values_round_trip(self):
        text = spectrum_csv([_fake("s"), _fake("p")])
        lines = text.splitlines()
        header = lines[0].split(",")
        assert header[0] == "wavelength_nm"
        assert header[1:4] == ["R_s_0deg_fraction", "T_s_0deg_fraction", "A_s_0deg_fraction"]
        assert "R_p_45deg_fraction" in header
        assert len(header) == 1 + 2 * 2 * 3 and len(lines) == 4
        data = np.loadtxt(lines[1:], delimiter=",")
        assert data[:, 0].tolist() == [400, 500, 600]
        assert data[:, header.index("R_p_45deg_fraction")].tolist() == [0.05, 0.02, 0.03]

    def test_write_spectrum_by_suffix(self, tmp_path):
        write_spectrum(tmp_path / "s.json", _fake())
        write_spectrum(tmp_path / "s.csv", _fake())
        assert json.loads((tmp_path / "s.json").read_text())["R"][1][2] == 0.03
        assert (tmp_path / "s.csv").read_text().startswith("wavelength_nm,R_mean_0deg_fraction")
        with pytest.raises(ValueError):
            write_spectrum(tmp_path / "s.txt", _fake())


class TestPlot:
    def test_png_has_the_expected_size(self):
        from filmstack.report import figure_bytes, figure_size_px, plot_spectrum

        fig, axes = plot_spectrum([_fake("s"), _fake("p")], ("R", "T"), title="t",
                                  subtitle="s", caption="c")
        assert len(axes) == 2
        assert axes[0].get_ylabel() == "Reflectance R (%)"
        assert axes[1].get_xlabel() == "Wavelength (nm, vacuum)"
        labels = [t.get_text() for t in axes[0].get_legend().get_texts()]
        assert labels == ["0°  s", "0°  p", "45°  s", "45°  p"]
        data = figure_bytes(fig, "png")
        assert png_size(data) == figure_size_px(2) == (1200, 1095)

    def test_single_panel_returns_one_axes_and_svg(self):
        from filmstack.report import figure_bytes, plot_spectrum

        fig, ax = plot_spectrum(_fake(), ("R",))
        assert ax.get_ylabel() == "Reflectance R (%)"
        root = ET.fromstring(figure_bytes(fig, "svg"))
        assert root.tag.endswith("svg") and root.get("width") == "576pt"

    def test_bad_quantity(self):
        from filmstack.report import plot_spectrum

        with pytest.raises(ValueError):
            plot_spectrum(_fake(), ("X",))
