"""``filmstack check``: verdicts and exit codes, JSON against the Python API, seeds, reports,
comparison, and bad input (exit code 2, one line, nothing written)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from filmstack.check import check_stack, monte_carlo
from filmstack.cli import app
from filmstack.io.stack_file import load_stack
from filmstack.spec import load_spec

ROOT = Path(__file__).resolve().parents[1]
EX = ROOT / "examples"
SPEC = EX / "spec-lens-ar.yaml"
PASS = EX / "quote-lens-ar-pass.yaml"
FAIL = EX / "quote-lens-ar-fail.yaml"
runner = CliRunner()


def run(*args):
    return runner.invoke(app, ["check", *map(str, args)])


def run_json(*args):
    res = run(*args, "--json")
    return res, json.loads(res.stdout)


class TestVerdictAndExitCodes:
    def test_pass_example_exits_0(self):
        res = run(PASS, "--spec", SPEC, "--trials", 100)
        assert res.exit_code == 0, res.output
        assert "PASS" in res.stdout and "verdict: PASS" in res.stdout

    def test_fail_example_exits_1(self):
        res = run(FAIL, "--spec", SPEC, "--trials", 0)
        assert res.exit_code == 1, res.output
        assert "FAIL" in res.stdout and "verdict: FAIL" in res.stdout

    def test_laser_mirror_example_passes(self):
        res = run(EX / "quote-laser-mirror.yaml", "--spec", EX / "spec-laser-mirror.yaml",
                  "--trials", 50)
        assert res.exit_code == 0, res.output
        assert "ISO 21254" in res.stderr          # the laser caution (DESIGN.md §7)

    def test_min_yield_turns_a_low_yield_into_exit_1(self):
        # the passing quote's yield under the spec's tolerances is about 93 %
        ok = run(PASS, "--spec", SPEC, "--trials", 300, "--min-yield", 0.5)
        low = run(PASS, "--spec", SPEC, "--trials", 300, "--min-yield", 0.99)
        assert ok.exit_code == 0 and low.exit_code == 1
        assert "is below --min-yield" in low.stdout


class TestJson:
    def test_keys_and_values_equal_the_python_api(self):
        res, out = run_json(PASS, "--spec", SPEC, "--trials", 200, "--seed", 4)
        assert res.exit_code == 0
        assert out["pass"] is True
        spec, stack = load_spec(SPEC), load_stack(PASS)
        ref = check_stack(stack, spec)
        assert len(out["requirements"]) == len(ref.requirements)
        for j, r in zip(out["requirements"], ref.requirements):
            assert {"pass", "value", "limit", "margin"} <= set(j)
            assert j["value"] == pytest.approx(r.value, rel=1e-12)
            assert j["margin"] == pytest.approx(r.margin, rel=1e-12)
            assert j["limit"] == r.limit                       # fractions, not percent
        mc = monte_carlo(stack, spec, trials=200, seed=4)
        assert out["yield"]["yield"] == mc.yield_
        assert out["yield"]["ci"] == pytest.approx(list(mc.ci))
        assert out["yield"]["ci_method"].startswith("Clopper-Pearson")
        assert len(out["sensitivity"]) == 2 and out["sensitivity"][0]["method"] == "analytic"

    def test_fail_json_and_no_yield_without_trials(self):
        res, out = run_json(FAIL, "--spec", SPEC, "--trials", 0)
        assert res.exit_code == 1
        assert out["pass"] is False and out["yield"] is None
        assert [r["pass"] for r in out["requirements"]] == [False, True]
        assert out["requirements"][0]["margin"] < 0

    def test_same_seed_same_yield(self):
        _, a = run_json(FAIL, "--spec", SPEC, "--trials", 300, "--seed", 9)
        _, b = run_json(FAIL, "--spec", SPEC, "--trials", 300, "--seed", 9)
        _, c = run_json(FAIL, "--spec", SPEC, "--trials", 300, "--seed", 10)
        assert a["yield"]["yield"] == b["yield"]["yield"]
        assert a["yield"]["requirements"] == b["yield"]["requirements"]
        assert a["yield"]["requirements"] != c["yield"]["requirements"]

    def test_tolerance_options_override_the_spec(self):
        _, out = run_json(PASS, "--spec", SPEC, "--trials", 50, "--thickness-pct", 0,
                          "--rate-pct", 0, "--index-pct", "TiO2=0")
        assert out["yield"]["yield"] == 1.0            # zero errors: every trial is nominal
        assert out["yield"]["tolerances"]["thickness_pct"] == 0


class TestReportAndCompare:
    def test_report_files(self, tmp_path):
        folder = tmp_path / "rep"
        res = run(PASS, "--spec", SPEC, "--trials", 100, "--report", folder)
        assert res.exit_code == 0, res.output
        for name in ("spectra.png", "yield.png", "sensitivity.png"):
            assert (folder / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        saved = json.loads((folder / "check.json").read_text())
        assert saved["pass"] is True and saved["yield"]["trials"] == 100

    def test_compare(self):
        res, out = run_json(PASS, "--spec", SPEC, "--trials", 0, "--compare",
                            EX / "quote-lens-ar-asbuilt.yaml")
        assert res.exit_code == 0
        cmp = out["compare"]
        assert cmp["summary"]["R"]["max_abs_diff"] > 0
        assert len(cmp["delta_e2000"]) == 3 and all(d > 0 for d in cmp["delta_e2000"])
        assert cmp["pass_a"] is True


class TestBadInput:
    def _bad(self, *args):
        res = run(*args)
        assert res.exit_code == 2, res.output
        lines = [l for l in res.stderr.splitlines() if l.strip()]
        assert len(lines) == 1 and "Traceback" not in res.output
        return lines[0]

    def test_spec_mistake_names_file_key_line(self, tmp_path):
        bad = tmp_path / "spec.yaml"
        bad.write_text(SPEC.read_text().replace("angles_deg:", "angle_deg:"))
        msg = self._bad(PASS, "--spec", bad)
        assert "spec.yaml:" in msg and "requirements[0].angle_deg" in msg
        assert "did you mean 'angles_deg'" in msg

    def test_missing_files_and_bad_options(self, tmp_path):
        assert "no such" in self._bad(tmp_path / "none.yaml", "--spec", SPEC)
        assert "--trials" in self._bad(PASS, "--spec", SPEC, "--trials", -1)
        assert "--rate-pct" in self._bad(PASS, "--spec", SPEC, "--rate-pct", "TiO2=abc")
        assert "--min-yield" in self._bad(PASS, "--spec", SPEC, "--min-yield", 2)

    def test_negative_seed_and_too_many_trials_are_input_errors(self):
        # a negative seed reached numpy's generator (exit 3); a billion trials were drawn up
        # front and ran the machine out of memory
        assert "--seed" in self._bad(PASS, "--spec", SPEC, "--seed", -1)
        assert "--trials" in self._bad(PASS, "--spec", SPEC, "--trials", 10**9)

    def test_band_outside_the_quotes_material_data(self, tmp_path):
        spec = tmp_path / "spec.yaml"
        spec.write_text(SPEC.read_text().replace("[430, 670]", "[300, 670]"))
        msg = self._bad(PASS, "--spec", spec)
        assert "300" in msg

    def test_nothing_written_on_bad_input(self, tmp_path):
        folder = tmp_path / "rep"
        bad = tmp_path / "spec.yaml"
        bad.write_text(SPEC.read_text().replace('"<= 0.35%"', '"<= 0.35 %%"'))
        self._bad(PASS, "--spec", bad, "--report", folder)
        assert not folder.exists()


def test_help_examples_name_shipped_files():
    import re

    from filmstack.cli.check import HELP
    names = set(re.findall(r"examples/[\w.-]+\.yaml", HELP))
    assert len(names) >= 4 and all((ROOT / n).is_file() for n in names)
