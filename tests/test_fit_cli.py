"""``filmstack fit``: results, JSON keys (DESIGN.md §5), output files, and bad inputs → exit 2.

The measured files are synthetic, written here from the engine with seeded noise; the fitted
values are checked against the thickness that made them, within their stated uncertainty.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import filmstack as fs
from filmstack.cli import app
from filmstack.cli.fit import map_csv
from filmstack.response import spectrum
from filmstack.stack import AIR, Layer, Stack

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]
WL = np.arange(400.0, 900.1, 4.0)
MODEL = "substrate: Si\nlayers:\n  - {material: SiO2, nm: {fit: 500, min: 50, max: 2000}}\n"


def reflectance(d_nm, wl=WL):
    st = Stack(incident=AIR, substrate=fs.get_material("Si"),
               layers=(Layer(fs.get_material("SiO2"), 100.0),))
    return spectrum(st, wl, 0.0, "mean", thicknesses_nm=np.atleast_1d(d_nm)[:, None]).R[:, 0]


@pytest.fixture
def files(tmp_path):
    rng = np.random.default_rng(21)
    model = tmp_path / "model.yaml"
    model.write_text(MODEL)
    one = tmp_path / "one.csv"
    y = reflectance(731.0)[0] + rng.normal(0, 0.002, WL.size)
    one.write_text("# synthetic test data\nwavelength_nm,R_percent\n"
                   + "".join(f"{w:g},{100 * v:.4f}\n" for w, v in zip(WL, y)))
    truth = {"a": 700.0, "b": 720.0, "c": 735.0, "d": 690.0}
    pos = {"a": (0, 0), "b": (20, 0), "c": (0, 20), "d": (-20, -20)}
    R = reflectance(np.array(list(truth.values())))
    rows = ["site,x_mm,y_mm,wavelength_nm,R"]
    for (sid, _), r in zip(truth.items(), R):
        noisy = r + rng.normal(0, 0.002, WL.size)
        rows += [f"{sid},{pos[sid][0]},{pos[sid][1]},{w:g},{v:.5f}" for w, v in zip(WL, noisy)]
    table = tmp_path / "map.csv"
    table.write_text("\n".join(rows) + "\n")
    folder = tmp_path / "sites"
    folder.mkdir()
    for sid, r in zip(truth, R):
        (folder / f"{sid}.csv").write_text(
            f"# x_mm: {pos[sid][0]}\n# y_mm: {pos[sid][1]}\nwavelength_nm,R\n"
            + "".join(f"{w:g},{v:.5f}\n" for w, v in zip(WL, r)))
    return {"model": model, "one": one, "map": table, "folder": folder, "truth": truth,
            "tmp": tmp_path}


def run(*args):
    return runner.invoke(app, ["fit", *map(str, args)])


class TestSingle:
    def test_json_parameters_and_rms(self, files):
        r = run(files["one"], "--model", files["model"], "--json")
        assert r.exit_code == 0, r.stderr
        doc = json.loads(r.stdout)
        assert set(doc) >= {"parameters", "rms"}
        (p,) = doc["parameters"]
        assert set(p) == {"name", "value", "stderr"} and p["name"] == "layers[0].nm"
        assert abs(p["value"] - 731.0) < 4 * p["stderr"]
        assert doc["rms"] == pytest.approx(0.002, rel=0.2)

    def test_table_plot_and_csv(self, files):
        tmp = files["tmp"]
        r = run(files["one"], "--model", files["model"], "--plot", tmp / "fit.png",
                "--out", tmp / "fit.csv")
        assert r.exit_code == 0, r.stderr
        assert "layers[0].nm" in r.stdout and "± 1σ" in r.stdout
        assert (tmp / "fit.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        head, row = (tmp / "fit.csv").read_text().splitlines()
        assert head.startswith("site,x_mm,y_mm,layers[0].nm,layers[0].nm_stderr,rms")
        assert row.startswith("one,,,")
        assert "Caution" in r.stderr

    def test_percent_option(self, files):
        p = files["tmp"] / "bare.csv"
        y = 100 * reflectance(731.0)[0]
        p.write_text("wavelength_nm,R\n" + "".join(f"{w:g},{v:.4f}\n" for w, v in zip(WL, y)))
        bad = run(p, "--model", files["model"])
        assert bad.exit_code == 2 and "--percent" in bad.stderr
        ok = run(p, "--model", files["model"], "--percent", "--json")
        assert ok.exit_code == 0
        assert json.loads(ok.stdout)["parameters"][0]["value"] == pytest.approx(731.0, abs=0.1)


class TestMap:
    @pytest.mark.parametrize("source", ["map", "folder"])
    def test_sites_uniformity_map_and_csv(self, files, source):
        tmp = files["tmp"]
        r = run(files[source], "--model", files["model"], "--json", "--map", tmp / "m.png",
                "--out", tmp / "sites.csv")
        assert r.exit_code == 0, r.stderr
        doc = json.loads(r.stdout)
        assert set(doc) >= {"parameters", "rms", "sites"}
        got = {s["site"]: s["parameters"][0] for s in doc["sites"]}
        for sid, truth in files["truth"].items():
            p = got[sid]
            if source == "folder":        # noise-free files: exact
                assert p["value"] == pytest.approx(truth, abs=1e-3)
            else:
                assert abs(p["value"] - truth) < 4 * p["stderr"]
        values = np.array([got[s]["value"] for s in files["truth"]])
        top = doc["parameters"][0]
        assert top["value"] == pytest.approx(values.mean())
        assert top["nonuniformity"] == pytest.approx(
            (values.max() - values.min()) / (2 * values.mean()))
        assert (tmp / "m.png").read_bytes()[:4] == b"\x89PNG"
        lines = (tmp / "sites.csv").read_text().splitlines()
        assert len(lines) == 1 + len(files["truth"])

    def test_table_output(self, files):
        r = run(files["map"], "--model", files["model"])
        assert r.exit_code == 0, r.stderr
        assert "4 sites" in r.stdout and "non-unif" in r.stdout

    def test_map_needs_positions(self, files):
        tmp = files["tmp"]
        folder = tmp / "nopos"
        folder.mkdir()
        for sid in ("a", "b"):
            (folder / f"{sid}.csv").write_text("wavelength_nm,R\n"
                                               + "".join(f"{w:g},0.3\n" for w in WL))
        r = run(folder, "--model", files["model"], "--map", tmp / "m.png")
        assert r.exit_code == 2 and "x_mm" in r.stderr
        assert not (tmp / "m.png").exists()


class TestBadInput:
    """Each bad input: exit 2, one line on stderr naming what is wrong, nothing written."""

    def check(self, files, args, *needles):
        out = files["tmp"] / "never.csv"
        r = run(*args, "--out", out)
        assert r.exit_code == 2, (r.exit_code, r.stdout, r.stderr)
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1, r.stderr
        for n in needles:
            assert n in lines[0]
        assert not out.exists()

    def test_no_wavelength_column(self, files):
        p = files["tmp"] / "nowl.csv"
        p.write_text("R\n0.3\n")
        self.check(files, [p, "--model", files["model"]], "no wavelength column", "nowl.csv:1")

    def test_value_out_of_range(self, files):
        p = files["tmp"] / "big.csv"
        p.write_text("wavelength_nm,R\n500,0.3\n510,1.7\n")
        self.check(files, [p, "--model", files["model"]], "1.7 is out of range", "big.csv:3")

    def test_measured_range_outside_the_materials_data(self, files):
        p = files["tmp"] / "uv.csv"
        p.write_text("wavelength_nm,R\n" + "".join(f"{w},0.3\n" for w in range(200, 500, 10)))
        self.check(files, [p, "--model", files["model"]], "'Si'", "250")

    def test_no_free_parameter(self, files):
        m = files["tmp"] / "fixed.yaml"
        m.write_text("substrate: Si\nlayers:\n  - {material: SiO2, nm: 500}\n")
        self.check(files, [files["one"], "--model", m], "no free parameter", "fixed.yaml")

    def test_missing_model(self, files):
        self.check(files, [files["one"], "--model", files["tmp"] / "nope.yaml"], "nope.yaml")

    def test_bad_fit_block(self, files):
        m = files["tmp"] / "bad.yaml"
        m.write_text(MODEL + "fit:\n  index_scale: {TiO2: 1.0}\n")
        self.check(files, [files["one"], "--model", m], "bad.yaml:5", "TiO2")

    def test_bad_plot_suffix(self, files):
        self.check(files, [files["one"], "--model", files["model"], "--plot",
                           files["tmp"] / "x.jpg"], "--plot")


class TestExamples:
    """The README's example commands on the shipped synthetic files."""

    def test_single_example(self):
        r = run(ROOT / "examples/fit/oxide-on-si-site.csv", "--model",
                ROOT / "examples/fit/oxide-on-si.yaml", "--json")
        assert r.exit_code == 0, r.stderr
        p = json.loads(r.stdout)["parameters"][0]
        # make_synthetic.py: true oxide 1187.4 nm
        assert abs(p["value"] - 1187.4) < 4 * p["stderr"]

    def test_map_example(self, tmp_path):
        r = run(ROOT / "examples/fit/wafer-map.csv", "--model",
                ROOT / "examples/fit/oxide-on-si.yaml", "--json")
        assert r.exit_code == 0, r.stderr
        import importlib.util

        spec = importlib.util.spec_from_file_location(
            "make_synthetic", ROOT / "examples/fit/make_synthetic.py")
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        doc = json.loads(r.stdout)
        assert len(doc["sites"]) > 100 and doc["n_ambiguous"] == 0
        z = [(s["parameters"][0]["value"] - mod.wafer_thickness_nm(s["x_mm"], s["y_mm"]))
             / s["parameters"][0]["stderr"] for s in doc["sites"]]
        assert np.mean(np.abs(z) < 1) == pytest.approx(0.683, abs=0.12)

    def test_example_files_say_synthetic(self):
        for name in ("oxide-on-si-site.csv", "wafer-map.csv"):
            first = (ROOT / "examples/fit" / name).read_text().splitlines()[0]
            assert first.startswith("# SYNTHETIC")


def test_map_csv_empty_cells_for_unknown_positions():
    from filmstack.fit import MapResult

    res = MapResult(names=["layers[0].nm"], units=["nm"], site=["a"], x_mm=np.array([np.nan]),
                    y_mm=np.array([np.nan]), values=np.array([[100.0]]),
                    stderr=np.array([[0.5]]), rms=np.array([0.01]), chi2_reduced=None,
                    at_bound=np.array([[False]]), ambiguous=np.array([False]), warnings=[[]])
    assert map_csv(res).splitlines()[1] == "a,,,100.0,0.5,0.01,0,0,"
