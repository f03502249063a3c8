"""``filmstack materials list|show|plot`` through the real app."""

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from filmstack.cli import app
from filmstack.materials import get_material, list_materials

runner = CliRunner()


def run(*args):
    return runner.invoke(app, list(args))


def test_list_names_every_material():
    r = run("materials", "list", "--json")
    assert r.exit_code == 0, r.output
    rows = json.loads(r.stdout)
    assert [row["name"] for row in rows] == list_materials()
    assert all(row["source"] for row in rows)
    assert {"name", "aliases", "model", "range_nm", "source"} <= set(rows[0])


def test_list_table():
    r = run("materials", "list")
    assert r.exit_code == 0 and "fused-silica" in r.stdout and "sellmeier" in r.stdout


def test_list_shows_aliases_and_the_whole_caption():
    # the caption was printed inside the table and lost its middle ("process: use your own
    # measured") when the source column was cut; aliases are what users type (README)
    r = run("materials", "list")
    assert r.exit_code == 0
    rows = {line.split()[0]: line for line in r.stdout.splitlines() if line.strip()}
    assert "silicon" in rows["Si"] and "titania" in rows["TiO2"] and "drude-lorentz" in rows["Al"]
    text = " ".join(r.stdout.split())
    assert ("Film data depend on the deposition process: use your own measured data for real "
            "designs.") in text


def test_show_single_wavelength():
    r = run("materials", "show", "fused-silica", "--from", "587.6", "--to", "587.6", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    # Malitson, J. Opt. Soc. Am. 55, 1205 (1965): n(587.6 nm) = 1.4585
    assert out["wavelength_nm"] == [587.6] and out["n"][0] == pytest.approx(1.4585, abs=1e-4)


def test_plot_needs_a_range(tmp_path):
    out = tmp_path / "n.png"
    r = run("materials", "plot", "Ag", "--from", "500", "--to", "500", "--out", str(out))
    assert r.exit_code == 2 and "--from" in r.stderr and not out.exists()


def test_csv_in_micrometres_says_so(tmp_path):
    p = tmp_path / "film.csv"
    p.write_text("wavelength_nm,n,k\n0.4,2.3,0.01\n0.5,2.2,0\n", encoding="utf-8")
    r = run("materials", "show", str(p), "--from", "400", "--to", "500", "--step", "50")
    assert r.exit_code == 2 and "µm" in r.stderr and "Traceback" not in r.stderr


def test_show_json_keys_and_values():
    r = run("materials", "show", "silicon", "--from", "500", "--to", "700", "--step", "50",
            "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert set(out) == {"name", "source", "wavelength_nm", "n", "k"}
    assert out["name"] == "Si" and "Green" in out["source"]
    assert out["wavelength_nm"] == [500.0, 550.0, 600.0, 650.0, 700.0]
    ref = get_material("Si").nk(np.array(out["wavelength_nm"]))
    assert np.allclose(out["n"], ref.real) and np.allclose(out["k"], ref.imag)


@pytest.mark.parametrize("name", list_materials())
def test_show_prints_the_source_of_every_material(name):
    m = get_material(name)
    lo, hi = m.range_nm
    a = max(lo, 400.0)
    b = min(hi, 800.0)
    r = run("materials", "show", name, "--from", f"{a}", "--to", f"{b}", "--step", f"{b - a}")
    assert r.exit_code == 0, r.output
    assert "Source:" in r.stdout and m.source[:30] in " ".join(r.stdout.split())


def test_show_out_of_range_is_bad_input():
    r = run("materials", "show", "ZnS", "--from", "300", "--to", "500")
    assert r.exit_code == 2
    assert "400 to 1000 nm" in r.stderr and "--extrapolate" in r.stderr


def test_show_unknown_name():
    r = run("materials", "show", "TiO3")
    assert r.exit_code == 2 and "TiO2" in r.stderr


def test_show_user_folder(tmp_path):
    (tmp_path / "larkspur-oxide.yaml").write_text(
        "name: larkspur-oxide\nsource: Larkspur Optics, synthetic data (invented)\n"
        "model: constant\nn: 1.7\n", encoding="utf-8")
    r = run("materials", "show", "larkspur-oxide", "--materials-dir", str(tmp_path), "--json")
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["n"][0] == 1.7


def test_plot_writes_png(tmp_path):
    out = tmp_path / "ag.png"
    r = run("materials", "plot", "Ag", "--from", "400", "--to", "900", "--out", str(out))
    assert r.exit_code == 0, r.output
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert r.stdout == f"wrote {out}\n"          # like every other command that writes files


def test_plot_bad_suffix_writes_nothing(tmp_path):
    out = tmp_path / "ag.gif"
    r = run("materials", "plot", "Ag", "--out", str(out))
    assert r.exit_code == 2 and not out.exists()


def test_user_text_with_brackets_is_printed_as_written(tmp_path):
    # a source like "run [bold] 42 [/x]" is the user's text, not rich markup (it crashed with
    # an internal error, exit 3)
    (tmp_path / "odd.yaml").write_text(
        'name: odd\nsource: "Larkspur run [bold] 42 [/x] (synthetic)"\nmodel: constant\n'
        "n: 1.5\n", encoding="utf-8")
    r = run("materials", "show", "odd", "--materials-dir", str(tmp_path), "--from", "500",
            "--to", "500")
    assert r.exit_code == 0, r.output
    assert "Source: Larkspur run [bold] 42 [/x] (synthetic)" in r.stdout
    (tmp_path / "odd.yaml").write_text(
        'name: odd\nsource: "[/x] run 42"\nmodel: constant\nn: 1.5\n', encoding="utf-8")
    r = run("materials", "list", "--materials-dir", str(tmp_path))
    assert r.exit_code == 0, r.output
    assert "[/x] run 42" in r.stdout


def test_materials_dir_that_is_a_file(tmp_path):
    f = tmp_path / "TiO2-run42.yaml"
    f.write_text("name: x\n", encoding="utf-8")
    r = run("materials", "list", "--materials-dir", str(f))
    assert r.exit_code == 2 and "is a file" in r.stderr and "folder" in r.stderr


def test_show_constant_is_valid_at_every_wavelength():
    r = run("materials", "show", "air", "--from", "500", "--to", "500")
    assert r.exit_code == 0 and "valid at every wavelength" in r.stdout
