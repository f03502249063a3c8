"""``filmstack spectrum``: every option, every kind of bad input, and the numbers it prints.

The numbers come from the engine; these tests check that the command passes the stack, grid,
angles and polarisations through unchanged (``--json`` equals the Python API exactly), that its
files hold the same numbers, and that a few textbook cases come out right through the whole
command line.
"""

from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import filmstack
from filmstack.cli import app
from filmstack.report.spectrum_plot import figure_size_px

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
runner = CliRunner()


def run(*args):
    return runner.invoke(app, ["spectrum", *map(str, args)])


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (PNG spec, ISO/IEC 15948, §11.2.2)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG signature"
    assert data[12:16] == b"IHDR"
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


def api(path, wl, angles, pol):
    """What a Python user gets for the same stack (DESIGN.md §2: the CLI adds no physics)."""
    return filmstack.spectrum(filmstack.load_stack(path), np.asarray(wl), np.asarray(angles), pol)


# -- the shipped examples ------------------------------------------------------------------------
EXAMPLE_RUNS = {
    "lens-ar.yaml": ["--from", 400, "--to", 700, "--step", 5],
    "dichroic-45.yaml": ["--from", 400, "--to", 800, "--step", 4, "-a", 45, "-p", "s", "-p", "p"],
    "laser-mirror-1064.yaml": ["--from", 900, "--to", 1200, "--step", 3],
    "oxide-on-silicon.yaml": ["--from", 400, "--to", 1000, "--step", 6, "-a", 0, "-a", 60],
}


class TestExamples:
    def test_the_scenario_stack_files_are_shipped(self):
        assert all((EXAMPLES / name).is_file() for name in EXAMPLE_RUNS)

    @pytest.mark.parametrize("name", sorted(EXAMPLE_RUNS))
    def test_example_runs_and_prints_a_summary(self, name):
        result = run(EXAMPLES / name, *EXAMPLE_RUNS[name])
        assert result.exit_code == 0, result.output
        out = result.stdout
        assert out.startswith(f"{name}: ")
        assert "mean %" in out and "min %" in out and "max %" in out and "at nm" in out
        assert "R, T, A in % of the incident power" in out
        assert "Caution: Predictions assume ideal homogeneous films" in result.stderr

    @pytest.mark.parametrize("name", sorted(EXAMPLE_RUNS))
    def test_json_equals_the_python_api(self, name):
        result = run(EXAMPLES / name, *EXAMPLE_RUNS[name], "--json")
        assert result.exit_code == 0, result.output
        d = json.loads(result.stdout)
        assert {"wavelength_nm", "angle_deg", "polarization", "R", "T", "A"} <= set(d)
        pols = d["polarization"] if isinstance(d["polarization"], list) else [d["polarization"]]
        for ip, pol in enumerate(pols):
            ref = api(EXAMPLES / name, d["wavelength_nm"], d["angle_deg"], pol)
            for q in ("R", "T", "A"):
                got = d[q][ip] if isinstance(d["polarization"], list) else d[q]
                assert got == getattr(ref, q).tolist(), f"{name} {pol} {q}"

    def test_lens_ar_meets_its_design_goal(self):
        # the example's own claim: unpolarised, 0-30 degrees, 420-680 nm: band-average R below
        # 0.5 %, every point below 0.7 %
        result = run(EXAMPLES / "lens-ar.yaml", "--from", 420, "--to", 680, "--step", 2,
                     "-a", 0, "-a", 30, "--json")
        d = json.loads(result.stdout)
        assert d["polarization"] == "mean"
        assert np.max(np.mean(d["R"], axis=1)) < 0.005
        assert np.max(d["R"]) < 0.007

    def test_laser_mirror_reflects_at_1064(self):
        d = json.loads(run(EXAMPLES / "laser-mirror-1064.yaml", "--from", 1060, "--to", 1068,
                           "--step", 4, "--json").stdout)
        # 25 quarter waves Ta2O5/SiO2: R > 99.9 % at the design wavelength (a thick substrate's
        # bare back face transmits what passes the coating)
        assert min(d["R"][0]) > 0.999


# -- every option -------------------------------------------------------------------------------
class TestOptions:
    lens = EXAMPLES / "lens-ar.yaml"

    def test_defaults(self):
        d = json.loads(run(self.lens, "--json").stdout)
        assert d["wavelength_nm"][0] == 400 and d["wavelength_nm"][-1] == 700
        assert len(d["wavelength_nm"]) == 301
        assert d["angle_deg"] == [0.0] and d["polarization"] == "mean"
        assert np.shape(d["R"]) == (1, 301)

    def test_grid_options(self):
        d = json.loads(run(self.lens, "--from", 450, "--to", 650, "--step", 50, "--json").stdout)
        assert d["wavelength_nm"] == [450, 500, 550, 600, 650]

    def test_angles_and_polarizations_shape(self):
        d = json.loads(run(self.lens, "--step", 100, "-a", 0, "--angle", 30, "-a", 60,
                           "--pol", "s", "-p", "p", "--json").stdout)
        assert d["angle_deg"] == [0, 30, 60] and d["polarization"] == ["s", "p"]
        assert np.shape(d["T"]) == (2, 3, 4)          # [polarization][angle][wavelength]
        R = np.array(d["R"])
        np.testing.assert_allclose(R[0, 0], R[1, 0], rtol=0, atol=1e-15)  # s = p at 0°
        assert not np.allclose(R[0, 2], R[1, 2])      # and differ at 60°

    def test_polarizations_with_commas(self):
        d = json.loads(run(self.lens, "--step", 100, "-p", "s,p,mean", "--json").stdout)
        assert d["polarization"] == ["s", "p", "mean"]

    def test_show_chooses_table_rows(self):
        out = run(self.lens, "--step", 50, "--show", "R").stdout
        rows = [ln.split() for ln in out.splitlines()]
        assert any(r[:3] == ["0°", "mean", "R"] for r in rows)
        assert not any("T" in r[:4] for r in rows if r and r[0] != "angle")

    def test_table_numbers_match_the_spectrum(self):
        out = run(self.lens, "--step", 5, "--show", "R").stdout
        row = next(ln.split() for ln in out.splitlines() if ln.split()[:3] == ["0°", "mean", "R"])
        ref = api(self.lens, np.arange(400, 701, 5.0), [0.0], "mean").R[0] * 100
        wl = np.arange(400, 701, 5.0)
        assert float(row[3]) == pytest.approx(ref.mean(), abs=6e-4)
        assert float(row[4]) == pytest.approx(ref.min(), abs=6e-4)
        assert float(row[5]) == wl[np.argmin(ref)]
        assert float(row[6]) == pytest.approx(ref.max(), abs=6e-4)
        assert float(row[7]) == wl[np.argmax(ref)]

    def test_out_csv_has_units_and_the_numbers(self, tmp_path):
        target = tmp_path / "lens.csv"
        result = run(self.lens, "--step", 10, "-a", 0, "-a", 45, "-p", "s", "-p", "p",
                     "--out", target)
        assert result.exit_code == 0, result.output
        assert f"wrote {target}" in result.stdout
        lines = target.read_text().splitlines()
        header = lines[0].split(",")
        assert header[0] == "wavelength_nm"
        assert set(header[1:]) == {f"{q}_{p}_{a}deg_fraction" for q in "RTA" for p in "sp"
                                   for a in (0, 45)}
        data = np.loadtxt(lines[1:], delimiter=",")
        assert data.shape == (31, 13)
        ref = api(self.lens, data[:, 0], [0.0, 45.0], "p")
        np.testing.assert_allclose(data[:, header.index("R_p_45deg_fraction")], ref.R[1],
                                   rtol=1e-9, atol=1e-12)

    def test_out_json_file_equals_stdout_json(self, tmp_path):
        target = tmp_path / "lens.json"
        result = run(self.lens, "--step", 10, "-a", 20, "--out", target, "--json")
        assert result.exit_code == 0
        assert json.loads(target.read_text()) == json.loads(result.stdout)

    def test_plot_png_is_an_image_of_the_expected_size(self, tmp_path):
        target = tmp_path / "lens.png"
        result = run(self.lens, "--step", 5, "-a", 0, "-a", 30, "--plot", target, "--show", "R")
        assert result.exit_code == 0, result.output
        assert png_size(target.read_bytes()) == figure_size_px(1) == (1200, 630)
        target2 = tmp_path / "lens2.png"
        run(self.lens, "--step", 5, "--plot", target2)        # R, T and A (TiO2 absorbs)
        assert png_size(target2.read_bytes()) == figure_size_px(3)

    def test_plot_svg(self, tmp_path):
        import xml.etree.ElementTree as ET

        target = tmp_path / "lens.svg"
        assert run(self.lens, "--step", 10, "--plot", target).exit_code == 0
        root = ET.fromstring(target.read_bytes())
        assert root.tag == "{http://www.w3.org/2000/svg}svg"

    def test_single_wavelength(self, tmp_path):
        # --from = --to is one wavelength (a laser line): table, JSON and a plot with a visible
        # point, and no warning from the plot's axis limits
        target = tmp_path / "one.png"
        result = run(self.lens, "--from", 550, "--to", 550, "--json", "--plot", target)
        assert result.exit_code == 0, result.output
        d = json.loads(result.stdout)
        ref = api(self.lens, [550.0], [0.0], "mean")
        assert d["wavelength_nm"] == [550.0] and d["R"] == ref.R.tolist()
        assert "warning" not in result.stderr
        assert png_size(target.read_bytes())[0] == 1200
        table = run(self.lens, "--from", 550, "--to", 550)
        assert "550 nm (1 wavelength);" in table.stdout

    def test_json_mode_prints_only_json(self, tmp_path):
        result = run(self.lens, "--step", 50, "--json", "--plot", tmp_path / "x.png")
        json.loads(result.stdout)                       # nothing else on stdout
        assert result.stderr == ""
        assert (tmp_path / "x.png").exists()


# -- textbook cases through the whole command line -----------------------------------------------
class TestPhysicsThroughTheCli:
    def _file(self, tmp_path, text):
        p = tmp_path / "part.yaml"
        p.write_text(text)
        return p

    def test_bare_glass_fresnel(self, tmp_path):
        # Fresnel equations at normal incidence: R = ((n0 - n1) / (n0 + n1))^2
        # (Born & Wolf, Principles of Optics, 7th ed., §1.5.3, eq. 1.5.(24)-(25) at θ = 0)
        p = self._file(tmp_path, "substrate: {n: 1.52}\nlayers: []\n")
        d = json.loads(run(p, "--from", 500, "--to", 600, "--step", 50, "--json").stdout)
        assert d["R"][0] == pytest.approx([((1 - 1.52) / (1 + 1.52)) ** 2] * 3, rel=1e-12)
        assert d["T"][0] == pytest.approx([1 - ((1 - 1.52) / (1 + 1.52)) ** 2] * 3, rel=1e-12)

    def test_brewster_angle_p_reflects_nothing(self, tmp_path):
        # Brewster's angle tan θB = n1/n0: r_p = 0 (Born & Wolf, 7th ed., §1.5.3)
        p = self._file(tmp_path, "substrate: {n: 1.5}\nlayers: []\n")
        theta_b = math.degrees(math.atan(1.5))
        d = json.loads(run(p, "--from", 500, "--to", 600, "--step", 100, "-a", theta_b,
                           "-p", "p", "-p", "s", "--json").stdout)
        assert max(d["R"][0][0]) < 1e-20
        # s at Brewster's angle: R_s = sin²(θi - θt) / sin²(θi + θt), Born & Wolf eq. 1.5.(21)
        ti = math.radians(theta_b)
        tt = math.asin(math.sin(ti) / 1.5)
        assert d["R"][1][0][0] == pytest.approx(math.sin(ti - tt) ** 2 / math.sin(ti + tt) ** 2,
                                                rel=1e-12)

    def test_quarter_wave_single_layer(self, tmp_path):
        # a quarter wave of n1 on ns at λ0: R = ((n0 ns - n1²) / (n0 ns + n1²))²
        # (Macleod, Thin-Film Optical Filters, 4th ed., §4.1, single-layer antireflection coating)
        p = self._file(tmp_path, "substrate: {n: 1.52}\nreference_nm: 550\n"
                                 "layers:\n  - {material: {n: 1.38}, qwot: 1}\n")
        d = json.loads(run(p, "--from", 500, "--to", 600, "--step", 50, "--json").stdout)
        assert d["wavelength_nm"][1] == 550
        expected = ((1.52 - 1.38 ** 2) / (1.52 + 1.38 ** 2)) ** 2
        assert d["R"][0][1] == pytest.approx(expected, rel=1e-10)
        assert d["R"][0][0] > expected and d["R"][0][2] > expected    # the minimum is at λ0

    def test_materials_dir(self, tmp_path):
        # the user's own material file, found through --materials-dir; a quarter wave of it on
        # n = 1.52 gives R = ((n0 ns - n1²) / (n0 ns + n1²))² at λ0 (Macleod, 4th ed., §4.1)
        folder = tmp_path / "mine"
        folder.mkdir()
        (folder / "larkspur-mgf2.yaml").write_text(
            "name: larkspur-mgf2\nsource: Larkspur Optics, synthetic example for a test\n"
            "model: constant\nn: 1.38\n")
        p = self._file(tmp_path, "substrate: {n: 1.52}\nreference_nm: 550\n"
                                 "layers:\n  - {material: larkspur-mgf2, qwot: 1}\n")
        result = run(p, "--from", 550, "--to", 560, "--step", 10, "--materials-dir", folder,
                     "--json")
        assert result.exit_code == 0, result.output
        expected = ((1.52 - 1.38 ** 2) / (1.52 + 1.38 ** 2)) ** 2
        assert json.loads(result.stdout)["R"][0][0] == pytest.approx(expected, rel=1e-10)
        without = run(p, "--from", 550, "--to", 560, "--step", 10)
        assert without.exit_code == 2 and "larkspur-mgf2" in without.stderr


# -- bad input: exit 2, one line naming the problem, and no output file left behind ----------------
LENS = "substrate: crown-glass\nlayers:\n  - {material: TiO2, nm: 12}\n  - {material: SiO2, nm: 90}\n"
BAD_INPUTS = {
    # case: (stack file text or None for a missing file, extra options, words in the message)
    "missing file": (None, [], ["part.yaml", "not found"]),
    "malformed YAML": ("substrate: crown-glass\nlayers:\n  - {material: TiO2, nm: 10\n", [],
                       ["part.yaml:", "YAML"]),
    "unknown key": ("substrate: crown-glass\nlayer:\n  - {material: TiO2, nm: 10}\n", [],
                    ["part.yaml:2", "'layer'", "layers"]),
    "unknown material": ("substrate: crown-glass\nlayers:\n  - {material: Unobtainium, nm: 10}\n",
                         [], ["part.yaml:3", "layers[0].material", "Unobtainium"]),
    "negative thickness": ("substrate: crown-glass\nlayers:\n  - {material: TiO2, nm: -5}\n", [],
                           ["part.yaml:3", "layers[0].nm", "-5"]),
    "from above to": (LENS, ["--from", 700, "--to", 400],
                      ["--from", "700", "not be above", "--to"]),
    "wavelengths in micrometres": (LENS, ["--from", 0.4, "--to", 0.7, "--step", 0.01],
                                   ["part.yaml", "crown-glass", "0.4-0.7 nm", "µm", "400 nm"]),
    "absorbing incident medium": ("incident: Si\nsubstrate: crown-glass\nlayers: []\n", [],
                                  ["part.yaml", "'incident'", "Si", "absorbs"]),
    "tab in the YAML": ("substrate: crown-glass\nlayers:\n\t- {material: TiO2, nm: 10}\n", [],
                        ["part.yaml:3", "tab"]),
    "zero step": (LENS, ["--step", 0], ["--step", "> 0"]),
    "angle 95": (LENS, ["--angle", 95], ["--angle", "95", "90"]),
    "negative angle": (LENS, ["--angle", -10], ["--angle", "-10"]),
    "bad polarization": (LENS, ["--pol", "u"], ["--pol", "s, p or mean"]),
    "outside material data": (LENS, ["--from", 400, "--to", 1500],
                              ["part.yaml", "crown-glass", "380 to 1100 nm", "--from/--to"]),
    "not a number": (LENS, ["--step", "fast"], ["--step"]),
    "unknown option": (LENS, ["--colour"], ["--colour"]),
    "bad show": (LENS, ["--show", "X"], ["--show", "'X'"]),
    "missing materials folder": (LENS, ["--materials-dir", "nowhere"],
                                 ["--materials-dir", "nowhere"]),
}


class TestBadInput:
    @pytest.mark.parametrize("case", sorted(BAD_INPUTS))
    def test_exit_2_one_line_no_output(self, tmp_path, case):
        text, extra, words = BAD_INPUTS[case]
        stack = tmp_path / "part.yaml"
        if text is not None:
            stack.write_text(text)
        before = sorted(tmp_path.iterdir())
        result = run(stack, *extra, "--out", tmp_path / "s.csv", "--plot", tmp_path / "s.png")
        assert result.exit_code == 2, result.output
        assert result.stdout == ""
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1, result.stderr
        assert lines[0].startswith("filmstack: error: ")
        for w in words:
            assert w in lines[0], f"{w!r} not in {lines[0]!r}"
        assert "Traceback" not in result.stderr
        assert sorted(tmp_path.iterdir()) == before       # no output, no temporary file

    def test_bad_input_keeps_an_existing_output(self, tmp_path):
        old = tmp_path / "s.csv"
        old.write_text("previous result\n")
        stack = tmp_path / "part.yaml"
        stack.write_text(LENS)
        result = run(stack, "--angle", 95, "--out", old)
        assert result.exit_code == 2
        assert old.read_text() == "previous result\n"

    @pytest.mark.parametrize("option, name", [("--out", "s.txt"), ("--plot", "s.jpg"),
                                              ("--out", "missing/s.csv")])
    def test_bad_output_paths(self, tmp_path, option, name):
        stack = tmp_path / "part.yaml"
        stack.write_text(LENS)
        result = run(stack, option, tmp_path / name)
        assert result.exit_code == 2
        assert option in result.stderr or "does not exist" in result.stderr
        assert sorted(p.name for p in tmp_path.iterdir()) == ["part.yaml"]

    def test_an_example_copied_elsewhere_still_runs(self, tmp_path):
        # stack files name library materials, not paths: a copy works anywhere
        shutil.copy(EXAMPLES / "oxide-on-silicon.yaml", tmp_path)
        assert run(tmp_path / "oxide-on-silicon.yaml", "--step", 50).exit_code == 0
