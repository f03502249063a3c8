"""``filmstack colour``, ``chart`` and ``thickness`` through the command line.

The numbers come from filmstack.colour (checked in the other test_colour_* files against
colour-science, CIE 15 and closed-form optics); here we check that the commands pass their
options through unchanged (``--json`` equals the Python API), write their files, print the
caution, and refuse bad input with exit code 2 and no file written.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import filmstack
from filmstack.cli import app
from filmstack.colour.stack_colour import ColourSetting, stack_colour
from filmstack.colour.thickness import FilmSystem, film_colour

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (PNG spec, ISO/IEC 15948, §11.2.2)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


@pytest.fixture(scope="module")
def oxide():
    return FilmSystem(filmstack.get_material("SiO2"), filmstack.get_material("Si"))


class TestColourCommand:
    def test_table_and_caution(self):
        r = run("colour", EXAMPLES / "colour-oxide-wafer.yaml", "--angle", 0, "--angle", 30)
        assert r.exit_code == 0, r.output
        assert "colour-oxide-wafer.yaml" in r.stdout and "#7A55A3" in r.stdout
        assert "Caution" in r.stderr

    def test_json_equals_api(self):
        path = EXAMPLES / "colour-oxide-wafer.yaml"
        r = run("colour", path, "--illuminant", "F11", "--observer", "10", "--angle", 0,
                "--angle", 45, "--side", "reflected", "--white", "bare-substrate", "--json")
        assert r.exit_code == 0, r.output
        d = json.loads(r.stdout)
        assert {"illuminant", "observer", "angle_deg", "XYZ", "Lab", "srgb_hex"} <= set(d)
        ref = stack_colour(filmstack.load_stack(path), [0, 45],
                           ColourSetting("F11", 10, white="bare-substrate"))
        assert d["illuminant"] == "F11" and d["observer"] == 10 and d["angle_deg"] == [0, 45]
        assert d["Lab"] == ref.Lab.tolist() and d["srgb_hex"] == ref.srgb_hex.tolist()

    def test_compare_gives_delta_e(self):
        r = run("colour", EXAMPLES / "lens-ar.yaml", "--compare",
                EXAMPLES / "quote-lens-ar-asbuilt.yaml", "--angle", 0, "--angle", 30, "--json")
        assert r.exit_code == 0, r.output
        d = json.loads(r.stdout)
        assert len(d["delta_e"]) == 2 and all(x > 0 for x in d["delta_e"])

    def test_transmitted_and_plot(self, tmp_path):
        out = tmp_path / "angle.png"
        r = run("colour", EXAMPLES / "lens-ar.yaml", "--side", "transmitted", "--plot", out)
        assert r.exit_code == 0, r.output
        assert png_size(out.read_bytes())[0] > 500

    @pytest.mark.parametrize("args,msg", [
        (["--illuminant", "D75"], "illuminant"),
        (["--observer", "4"], "observer"),
        (["--side", "left"], "side"),
        (["--white", "paper"], "white"),
        (["--angle", "95"], "angle"),
    ])
    def test_bad_options_exit_2(self, args, msg, tmp_path):
        out = tmp_path / "x.png"
        r = run("colour", EXAMPLES / "lens-ar.yaml", *args, "--plot", out)
        assert r.exit_code == 2 and msg in r.stderr and not out.exists()


class TestThicknessCommand:
    def test_lab_route_json(self, oxide):
        lab = film_colour(oxide, [275.0], ColourSetting()).Lab[0, 0]
        r = run("thickness", "--film", "SiO2", "--substrate", "Si",
                "--lab", ",".join(f"{v:.4f}" for v in lab), "--range", "0:1000", "--top", 3,
                "--json")
        assert r.exit_code == 0, r.output
        d = json.loads(r.stdout)
        assert len(d["candidates"]) == 3
        c0 = d["candidates"][0]
        assert set(c0) >= {"thickness_nm", "delta_e", "Lab", "srgb_hex"}
        assert c0["thickness_nm"] == pytest.approx(275.0, abs=0.05)
        assert "spectrum" in d["caution"]

    def test_table_warns_and_cautions(self, oxide, tmp_path):
        lab = film_colour(oxide, [1180.0], ColourSetting()).Lab[0, 0]
        out = tmp_path / "path.png"
        r = run("thickness", "--film", "SiO2", "--substrate", "Si",
                "--lab", ",".join(f"{v:.3f}" for v in lab), "--plot", out)
        assert r.exit_code == 0, r.output
        assert "thickness candidates" in r.stdout
        assert "ambiguous" in r.stderr and "Caution" in r.stderr
        assert png_size(out.read_bytes())[0] > 500

    def test_second_observation(self, oxide):
        lab0 = film_colour(oxide, [1180.0], ColourSetting()).Lab[0, 0]
        lab45 = film_colour(oxide, [1180.0], ColourSetting(), 45.0).Lab[0, 0]
        r = run("thickness", "--film", "SiO2", "--substrate", "Si",
                "--lab", ",".join(f"{v:.4f}" for v in lab0),
                "--lab2", ",".join(f"{v:.4f}" for v in lab45), "--angle2", 45, "--json")
        assert r.exit_code == 0, r.output
        d = json.loads(r.stdout)
        assert d["candidates"][0]["thickness_nm"] == pytest.approx(1180.0, abs=0.1)
        assert not d["ambiguous"] and len(d["observations"]) == 2

    def test_photo_route(self):
        r = run("thickness", "--film", "SiO2", "--substrate", "Si", "--srgb", "#7057A7",
                "--bare-srgb", "#A0A4B0", "--json")
        assert r.exit_code == 0, r.output
        d = json.loads(r.stdout)
        assert "von Kries" in d["photo"]["method"]
        assert d["observations"][0]["white"] == "bare-substrate"
        assert 250 < d["candidates"][0]["thickness_nm"] < 300

    def test_under_layer(self):
        r = run("thickness", "--film", "SiO2", "--substrate", "Si", "--under", "Si3N4:80",
                "--lab", "50,10,-30", "--json")
        assert r.exit_code == 0, r.output
        assert json.loads(r.stdout)["film"] == "SiO2 on Si3N4 80 nm on Si"

    @pytest.mark.parametrize("args,msg", [
        ([], "give the observed colour"),
        (["--lab", "50,0,0", "--srgb", "#808080"], "not both"),
        (["--srgb", "#808080"], "--bare-srgb"),
        (["--lab", "50,0"], "L,a,b"),
        (["--lab", "150,0,0"], "0-100"),
        (["--lab", "50,0,0", "--angle2", "45"], "--lab2"),
        (["--lab", "50,0,0", "--range", "500:100"], "--range"),
        (["--lab", "50,0,0", "--under", "Si3N4"], "MATERIAL:NM"),
        (["--lab", "50,0,0", "--top", "0"], "--top"),
        (["--srgb", "#80808G", "--bare-srgb", "#808080"], "RRGGBB"),
        (["--srgb", "#8B599A", "--bare-srgb", "#FFFFFF"], "over-exposed"),
    ])
    def test_bad_input_exit_2(self, args, msg):
        r = run("thickness", "--film", "SiO2", "--substrate", "Si", *args)
        assert r.exit_code == 2, r.output
        assert msg in r.stderr

    def test_unknown_material(self):
        r = run("thickness", "--film", "SiO3", "--substrate", "Si", "--lab", "50,0,0")
        assert r.exit_code == 2 and "--film" in r.stderr and "SiO2" in r.stderr


class TestChartCommand:
    def test_png_and_csv(self, tmp_path, oxide):
        png, csv = tmp_path / "chart.png", tmp_path / "chart.csv"
        r = run("chart", "--film", "SiO2", "--substrate", "Si", "--range", "0:600", "--out", png,
                "--csv", csv, "--step", 10)
        assert r.exit_code == 0, r.output
        w, h = png_size(png.read_bytes())
        assert w > 1000 and h > 400
        lines = csv.read_text().splitlines()
        assert lines[0].startswith("#") and lines[2].startswith("thickness_nm,L,a,b")
        assert lines[1].startswith("# caution: Thickness from colour is indicative")
        rows = [l.split(",") for l in lines[3:]]
        assert len(rows) == 61 and float(rows[-1][0]) == 600
        lab = film_colour(oxide, [100.0], ColourSetting()).Lab[0, 0]
        np.testing.assert_allclose([float(x) for x in rows[10][1:4]], lab, atol=1e-4)
        assert "Caution" in r.stderr

    def test_svg_with_under_layer_and_angle(self, tmp_path):
        svg = tmp_path / "chart.svg"
        r = run("chart", "--film", "SiO2", "--substrate", "Si", "--under", "Si3N4:50",
                "--range", "0:400", "--angle", 30, "--illuminant", "A", "--out", svg)
        assert r.exit_code == 0, r.output
        assert svg.read_text().lstrip().startswith("<?xml")

    @pytest.mark.parametrize("args,msg", [
        (["--out", "chart.jpg"], ".png or .svg"),
        (["--out", "chart.png", "--range", "0-100"], "--range"),
        (["--out", "chart.png", "--range", "0:20000"], "false colours"),
        (["--out", "chart.png", "--csv", "x.txt"], ".csv"),
        (["--out", "chart.png", "--observer", "3"], "observer"),
    ])
    def test_bad_input_exit_2_no_file(self, args, msg, tmp_path, monkeypatch):
        monkeypatch.chdir(tmp_path)
        r = run("chart", "--film", "SiO2", "--substrate", "Si", *args)
        assert r.exit_code == 2 and msg in r.stderr
        assert not list(tmp_path.iterdir())
