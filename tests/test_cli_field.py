"""``filmstack field``: the electric field through a stack, its files, and bad input."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

import filmstack
from filmstack import Constant, Layer, Stack
from filmstack.cli import app

ROOT = Path(__file__).resolve().parents[1]
MIRROR = ROOT / "examples" / "laser-mirror-1064.yaml"
runner = CliRunner()


def run(*args):
    return runner.invoke(app, ["field", *map(str, args)])


def quarter_wave_mirror(pairs=4):
    H, L = Constant(name="H", n=2.3), Constant(name="L", n=1.45)
    layers = []
    for _ in range(pairs):
        layers += [Layer(H, 1064 / 4 / 2.3), Layer(L, 1064 / 4 / 1.45)]
    layers.append(Layer(H, 1064 / 4 / 2.3))
    return Stack(incident=filmstack.AIR, substrate=Constant(name="glass", n=1.5),
                 layers=layers)


class TestPhysics:
    def test_surface_field_is_one_plus_r(self):
        # Tangential E is continuous at the outer surface, where the incident and reflected
        # waves add: |E|² = |1 + r|² at normal incidence, s (Born & Wolf, Principles of Optics,
        # §1.5.2, boundary conditions).
        st = quarter_wave_mirror()
        r = filmstack.spectrum(st, [1064.0], 0.0, "s").r[0, 0]
        prof = filmstack.field_profile(st, 1064.0, 0.0, "s", step_nm=0.5)
        assert np.interp(0.0, prof.depth_nm, prof.e2) == pytest.approx(abs(1 + r) ** 2, abs=1e-9)
        # a high-index outer layer of a quarter-wave mirror puts a node at the surface
        # (r ≈ −1; Macleod, Thin-Film Optical Filters, ch. on high reflectors)
        assert abs(1 + r) ** 2 < 0.05

    def test_substrate_field_is_t_squared(self):
        # Only the transmitted wave travels in a semi-infinite, lossless substrate: |E|² = |t|²
        # everywhere in it (s, normal incidence; t the full-field amplitude ratio).
        st = quarter_wave_mirror(2)
        t = filmstack.spectrum(st, [900.0], 0.0, "s").t[0, 0]
        prof = filmstack.field_profile(st, 900.0, 0.0, "s")
        inside = prof.layer_index == len(st.layers)
        np.testing.assert_allclose(prof.e2[inside], abs(t) ** 2, rtol=1e-9)

    def test_table_matches_the_profile(self):
        res = run(MIRROR, "--wavelength", 1064, "--json")
        assert res.exit_code == 0, res.output
        d = json.loads(res.stdout)
        st = filmstack.load_stack(MIRROR)
        prof = filmstack.field_profile(st, 1064.0, 0.0, "s")
        np.testing.assert_allclose(d["e2"], prof.e2)
        np.testing.assert_allclose(d["depth_nm"], prof.depth_nm)
        assert set(d) == {"wavelength_nm", "angle_deg", "polarization", "depth_nm", "e2",
                          "interfaces_nm", "layers"}
        # layers listed outer surface first, numbered from 1 at the substrate
        assert [row["layer"] for row in d["layers"]] == list(range(len(st.layers), 0, -1))
        top = d["layers"][0]
        in_top = prof.layer_index == len(st.layers) - 1
        assert top["peak_e2"] == pytest.approx(prof.e2[in_top].max())


class TestOutputs:
    def test_table_plot_and_csv(self, tmp_path):
        png, csv = tmp_path / "f.png", tmp_path / "f.csv"
        res = run(MIRROR, "-w", 1064, "--angle", 45, "--pol", "p", "--plot", png, "--out", csv)
        assert res.exit_code == 0, res.output
        assert "peak |E|²" in res.stdout and "ISO 21254" in res.stderr
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        lines = csv.read_text().splitlines()
        assert lines[1] == "depth_nm,layer,E2_relative"
        rows = np.array([[float(x) for x in ln.split(",")] for ln in lines[2:]])
        assert rows[0, 1] == 0 and rows[-1, 1] == len(filmstack.load_stack(MIRROR).layers) + 1

    @pytest.mark.parametrize("args,words", [
        (["--pol", "mean"], "s or p"),
        (["--wavelength", "100"], "100"),
        (["--angle", "95"], "angle"),
        (["--step", "0"], "--step"),
        (["--wavelength", "-3"], "--wavelength"),
    ])
    def test_bad_input_exits_2_and_writes_nothing(self, tmp_path, args, words):
        out = tmp_path / "f.csv"
        base = ["--wavelength", "1064"] if "--wavelength" not in args else []
        res = run(MIRROR, *base, *args, "--out", out)
        assert res.exit_code == 2, res.output
        assert words in res.stderr
        assert len(res.stderr.strip().splitlines()) == 1
        assert not out.exists()

    def test_wavelength_is_required(self):
        res = run(MIRROR)
        assert res.exit_code == 2
