"""``filmstack design``: options, outputs (stack file read by spectrum and check, JSON, report
plots), exit codes and bad input.

The designs come from :func:`filmstack.design.synthesize` (tested in test_design_synthesis.py);
these tests check that the command passes the spec through, writes a design that the other
commands read, reports each requirement on the spec's grid and the 4× finer one, and refuses bad
input with exit code 2 before any work (DESIGN.md §5).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from filmstack.cli import app
from filmstack.evaluate import evaluate_requirements
from filmstack.io.stack_file import load_stack
from filmstack.spec import load_spec

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
runner = CliRunner()

SMALL = """\
# a small, quick AR spec (test only)
stack: {incident: air, substrate: {n: 1.52}, reference_nm: 550}
materials: {H: {n: 2.35}, L: {n: 1.46}}
requirements:
  - R: "<= 0.4%"
    band_nm: [450, 650]
    step_nm: 10
    over: average
limits: {total_nm: 350, layers: 8, thinnest_nm: 5}
"""

IMPOSSIBLE = SMALL.replace('"<= 0.4%"', '"<= 0.001%"').replace("layers: 8", "layers: 2")


def run(*args):
    return runner.invoke(app, ["design", *map(str, args)])


@pytest.fixture
def small_spec(tmp_path):
    p = tmp_path / "small.yaml"
    p.write_text(SMALL)
    return p


class TestDesignCommand:
    def test_writes_a_stack_file_that_spectrum_and_check_read(self, small_spec, tmp_path):
        out = tmp_path / "design.yaml"
        res = run(small_spec, "--out", out, "--seed", 1, "--time-limit", 30)
        assert res.exit_code == 0, res.output
        stack = load_stack(out)
        assert 1 <= len(stack.layers) <= 8 and stack.total_nm <= 350 + 1e-6
        assert "QWOT" in res.output and "4x" in res.output
        assert "R <= 0.4% 450–650 nm avg" in res.output
        spec = load_spec(small_spec)
        assert all(bool(r.passed) for r in evaluate_requirements(stack, spec, refine=4))
        sp = runner.invoke(app, ["spectrum", str(out), "--from", "450", "--to", "650",
                                 "--step", "10", "--json"])
        assert sp.exit_code == 0, sp.output
        R = np.array(json.loads(sp.stdout)["R"])[0]
        assert np.trapezoid(R, np.arange(450, 651, 10)) / 200 <= 0.004
        ck = runner.invoke(app, ["check", str(out), "--spec", str(small_spec)])
        assert ck.exit_code == 0, ck.output

    def test_json_keys_and_values(self, small_spec, tmp_path):
        out = tmp_path / "d.yaml"
        res = run(small_spec, "--out", out, "--seed", 1, "--json")
        assert res.exit_code == 0, res.output
        data = json.loads(res.stdout)
        for key in ("merit", "layers", "total_nm", "requirements"):
            assert key in data
        assert data["total_nm"] == pytest.approx(sum(l["nm"] for l in data["layers"]))
        assert {"material", "nm", "qwot", "fixed"} <= set(data["layers"][0])
        req = data["requirements"][0]
        assert {"pass", "value", "limit", "margin", "fine"} <= set(req)
        assert req["limit"] == pytest.approx(0.004)
        assert req["fine"]["refine"] == 4
        stack = load_stack(out)
        np.testing.assert_allclose([l["nm"] for l in data["layers"]], stack.thicknesses_nm,
                                   rtol=1e-6)

    def test_same_seed_same_file(self, small_spec, tmp_path):
        a, b = tmp_path / "a.yaml", tmp_path / "b.yaml"
        assert run(small_spec, "--out", a, "--seed", 4).exit_code == 0
        assert run(small_spec, "--out", b, "--seed", 4).exit_code == 0
        assert load_stack(a) == load_stack(b)

    def test_unmet_spec_exits_1_and_still_writes(self, tmp_path):
        spec = tmp_path / "hard.yaml"
        spec.write_text(IMPOSSIBLE)
        out = tmp_path / "hard-design.yaml"
        res = run(spec, "--out", out, "--time-limit", 10)
        assert res.exit_code == 1, res.output
        assert out.is_file() and "FAIL" in res.output

    def test_report_writes_the_plots(self, small_spec, tmp_path):
        out, rep = tmp_path / "d.yaml", tmp_path / "report"
        res = run(small_spec, "--out", out, "--report", rep, "--seed", 1)
        assert res.exit_code == 0, res.output
        names = sorted(p.name for p in rep.iterdir())
        assert names == ["R-map.png", "index-profile.png", "merit-history.png", "spectra.png"]
        for p in rep.iterdir():
            assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"

    def test_progress_goes_to_stderr(self, small_spec, tmp_path):
        import subprocess
        import sys

        out = tmp_path / "d.yaml"
        proc = subprocess.run([sys.executable, "-m", "filmstack", "design", str(small_spec),
                               "--out", str(out), "--json"], capture_output=True, text=True,
                              cwd=ROOT, timeout=120)
        assert proc.returncode == 0, proc.stderr
        json.loads(proc.stdout)                          # stdout is pure JSON
        lines = [l for l in proc.stderr.splitlines() if l.startswith("step")]
        assert lines and "layers" in lines[0] and "merit" in lines[0] and " s" in lines[0]


class TestBadInput:
    @pytest.mark.parametrize("args, words", [
        (["--time-limit", "-1"], "--time-limit"),
        (["--seed", "-3"], "--seed"),
        (["--strategy", "magic"], "--strategy"),
    ])
    def test_bad_options(self, small_spec, tmp_path, args, words):
        out = tmp_path / "d.yaml"
        res = run(small_spec, "--out", out, *args)
        assert res.exit_code == 2
        assert words in res.output
        assert not out.exists()

    def test_out_must_be_yaml(self, small_spec, tmp_path):
        res = run(small_spec, "--out", tmp_path / "d.csv")
        assert res.exit_code == 2 and ".yaml" in res.output

    def test_missing_spec(self, tmp_path):
        res = run(tmp_path / "nope.yaml", "--out", tmp_path / "d.yaml")
        assert res.exit_code == 2 and "no such" in res.output

    def test_spec_without_materials(self, tmp_path):
        spec = tmp_path / "s.yaml"
        spec.write_text(SMALL.replace("materials: {H: {n: 2.35}, L: {n: 1.46}}\n", ""))
        res = run(spec, "--out", tmp_path / "d.yaml")
        assert res.exit_code == 2 and "materials" in res.output

    def test_typo_in_spec(self, tmp_path):
        spec = tmp_path / "s.yaml"
        spec.write_text(SMALL.replace("over: average", "ovr: average"))
        res = run(spec, "--out", tmp_path / "d.yaml")
        assert res.exit_code == 2 and "ovr" in res.output


class TestExamples:
    NAMES = ["design-visible-ar.yaml", "design-wide-angle-ar.yaml", "design-lwp-edge.yaml",
             "design-dichroic-45.yaml", "design-laser-hr.yaml"]

    @pytest.mark.parametrize("name", NAMES)
    def test_example_specs_load(self, name):
        spec = load_spec(EXAMPLES / name)
        assert len(spec.materials) == 2 and spec.requirements

    def test_visible_ar_example_designs_and_passes(self, tmp_path):
        out = tmp_path / "var.yaml"
        res = run(EXAMPLES / "design-visible-ar.yaml", "--out", out, "--seed", 1)
        assert res.exit_code == 0, res.output
        assert load_stack(out).total_nm <= 500 + 1e-6


class TestInterrupt:
    def test_ctrl_c_keeps_the_best_design_so_far(self, tmp_path):
        import signal
        import subprocess
        import sys
        import time

        spec = tmp_path / "endless.yaml"
        spec.write_text(SMALL.replace('"<= 0.4%"', '"<= 0%"').replace("over: average",
                                                                         "over: every")
                        .replace("step_nm: 10", "step_nm: 2").replace("layers: 8", "layers: 30")
                        .replace("total_nm: 350", "total_nm: 900"))
        out = tmp_path / "d.yaml"
        proc = subprocess.Popen([sys.executable, "-m", "filmstack", "design", str(spec),
                                 "--out", str(out), "--time-limit", "120"], cwd=ROOT,
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        deadline = time.time() + 60
        lines = []
        while time.time() < deadline:        # wait for the first improvements
            line = proc.stderr.readline()
            lines.append(line)
            if line.startswith("step   3"):
                break
        t0 = time.time()
        proc.send_signal(signal.SIGINT)
        stdout, stderr = proc.communicate(timeout=60)
        assert time.time() - t0 < 30
        assert proc.returncode in (0, 1), stderr
        assert "stopped on request" in stdout
        assert out.is_file() and len(load_stack(out).layers) >= 1


def test_map_labels_requirements_sharing_a_box_once():
    # s and p of a 45-degree beam splitter on the same band: one outline, one joined label
    # (two labels drawn on the same spot were unreadable)
    from filmstack.materials import Constant
    from filmstack.report.design_plots import plot_reflectance_map
    from filmstack.spec import Requirement
    from filmstack.stack import AIR, Layer, Stack

    st = Stack(AIR, Constant(name="glass", n=1.52), (Layer(Constant(name="H", n=2.35), 60.0),))
    reqs = [Requirement("R", "=", 0.5, (500, 600), tolerance=0.03, angles_deg=(45.0,),
                        polarization=p, over="every") for p in ("s", "p")]
    _, ax = plot_reflectance_map(st, np.linspace(480, 620, 15), np.linspace(0, 60, 7), "s",
                                 requirements=reqs)
    labels = [t.get_text() for t in ax.texts]
    assert len(labels) == 1 and "(p)" in labels[0] and ";" in labels[0]
    assert len(ax.patches) == 1
