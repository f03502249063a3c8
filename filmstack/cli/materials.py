"""``filmstack materials``: the materials library — list it, show n and k with the source, plot.

``materials list`` prints every material (bundled, and from ``--materials-dir`` folders) with its
model, valid range and source; ``materials show NAME`` prints n, k over a wavelength grid with
the published source (``--json``: ``name``, ``source``, ``wavelength_nm``, ``n``, ``k``);
``materials plot NAME --out n.png`` draws n and k. NAME is a library name or alias, a material
file (.yaml, or a measured .csv with columns wavelength_nm,n,k) or ``catalog:shelf/book/page``
(optional extra ``filmstack[catalog]``). No physics here: everything comes from
:mod:`filmstack.materials`.
"""

from __future__ import annotations

import warnings
from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from ._common import (FromNm, JsonFlag, MaterialsDir, StepNm, ToNm, check_output, make_table,
                      material_folders, print_json, print_table, stdout_console, wavelength_grid)
from ..errors import ExtrapolationWarning, InputError, OutOfRangeError

__all__ = ["register", "materials_app"]

materials_app = typer.Typer(
    name="materials", no_args_is_help=True, add_completion=False,
    help="The materials library: list it, show n and k of one material with its source, plot.")

Extrapolate = Annotated[bool, typer.Option(
    "--extrapolate", help="Evaluate outside the material's valid range (warned; at your own "
                          "risk).")]
NameArg = Annotated[str, typer.Argument(
    metavar="NAME", help="Library name or alias (case-insensitive), a .yaml/.csv file, or "
                         "catalog:shelf/book/page.", show_default=False)]


def _load(name: str, dirs):
    from ..materials import get_material

    return get_material(name, material_folders(dirs))


def _fmt_range(r) -> str:
    lo, hi = r
    return f"{lo:g}–{hi:g}" if np.isfinite(hi) else f"≥ {lo:g}" if lo > 0 else "all"


def _nk(material, wl, extrapolate: bool) -> np.ndarray:
    try:
        return material.nk(wl, extrapolate=extrapolate)
    except OutOfRangeError as exc:
        raise OutOfRangeError(exc.message.split(" (choose")[0] + "; choose --from/--to inside "
                              "its range, or --extrapolate") from None


LIST_HELP = """\
List the materials: the bundled library and your own folders (--materials-dir).

Shows each material's model, valid wavelength range and source; --json prints a list of {name, aliases, model, range_nm, source}.

Examples:

\b
    filmstack materials list
    filmstack materials list --materials-dir ./my-materials --json
"""


@materials_app.command("list", help=LIST_HELP)
def list_command(materials_dir: MaterialsDir = None, json_out: JsonFlag = False) -> None:
    from ..materials import get_material, list_materials

    folders = material_folders(materials_dir)
    rows = []
    for name in list_materials(folders):
        m = get_material(name, folders)
        rows.append({"name": m.name, "aliases": list(m.aliases), "model": m.model,
                     "range_nm": [m.range_nm[0], m.range_nm[1] if np.isfinite(m.range_nm[1])
                                  else None],
                     "source": m.source, "origin": m.origin})
    if json_out:
        print_json([{k: v for k, v in r.items() if k != "origin"} for r in rows])
        return
    cells = [(r["name"], ", ".join(r["aliases"]), r["model"],
              _fmt_range((r["range_nm"][0], float("inf") if r["range_nm"][1] is None
                          else r["range_nm"][1])), r["source"]) for r in rows]
    table = make_table("name", "also", "model", ("range nm", "right"), "source")
    # fixed widths: every column but the source shown in full, the source cut to the rest
    widths = [max([len(table.columns[i].header)] + [len(c[i]) for c in cells]) for i in range(4)]
    widths.append(max(20, stdout_console().width - sum(widths) - 2 * 4 - 3))
    for col, width in zip(table.columns, widths):
        col.no_wrap, col.width, col.overflow = True, width, "ellipsis"
    from rich.text import Text

    for c in cells:
        table.add_row(*(Text(x) for x in c))        # user text, never rich markup
    # title and caption as whole lines (a rich table caption is cut to the table's columns)
    print_table(table, title=f"{len(rows)} materials (names and aliases are case-insensitive)",
                caption="'filmstack materials show NAME' prints n, k and the full source. "
                        "Film data depend on the deposition process: use your own measured "
                        "data for real designs.")


SHOW_HELP = """\
n and k of one material over a wavelength grid, with its published source.

NAME is a library name or alias (case-insensitive), a material .yaml file, a measured .csv (wavelength_nm,n,k) or catalog:shelf/book/page. --json prints {name, source, wavelength_nm, n, k}.

Examples:

\b
    filmstack materials show TiO2 --from 400 --to 800 --step 10
    filmstack materials show silicon --from 500 --to 700 --step 50 --json
    filmstack materials show ./my-materials/TiO2-ion.yaml
"""


@materials_app.command("show", help=SHOW_HELP, no_args_is_help=True)
def show_command(name: NameArg, from_nm: FromNm = 400.0, to_nm: ToNm = 800.0,
                 step_nm: StepNm = 10.0, materials_dir: MaterialsDir = None,
                 extrapolate: Extrapolate = False, json_out: JsonFlag = False) -> None:
    wl = wavelength_grid(from_nm, to_nm, step_nm)
    m = _load(name, materials_dir)
    nk = _nk(m, wl, extrapolate)
    if json_out:
        print_json({"name": m.name, "source": m.source, "wavelength_nm": wl,
                    "n": nk.real, "k": nk.imag})
        return
    console = stdout_console()
    rng = _fmt_range(m.range_nm)
    valid = "at every wavelength" if rng == "all" else f"{rng} nm"
    from rich.text import Text

    # names, sources and notes are the user's text: never read as rich markup ("[run 42]")
    head = Text(m.name, style="bold")
    head.append(f"  ({m.model}, valid {valid}"
                + (f"; also: {', '.join(m.aliases)}" if m.aliases else "") + ")")
    console.print(head)
    console.print(Text(f"Source: {m.source}"))
    if m.notes:
        console.print(Text(f"Notes: {m.notes}"))
    table = make_table(("wavelength nm", "right"), ("n", "right"), ("k", "right"))
    for w, v in zip(wl, nk):
        table.add_row(f"{w:g}", f"{v.real:.5f}", f"{v.imag:.3e}" if v.imag else "0")
    print_table(table)


PLOT_HELP = """\
Draw n and k of one material over wavelength (PNG or SVG).

Without --from/--to the plot covers the material's valid range within 200-2500 nm.

Examples:

\b
    filmstack materials plot TiO2 --out tio2-nk.png
    filmstack materials plot Ag --from 350 --to 1000 --out ag.svg
"""


@materials_app.command("plot", help=PLOT_HELP, no_args_is_help=True)
def plot_command(
    name: NameArg,
    out: Annotated[Path, typer.Option("--out", "-o", metavar="FILE.png|FILE.svg",
                                      help="Image file to write.", show_default=False)],
    from_nm: Annotated[float | None, typer.Option(
        "--from", metavar="NM", help="First wavelength, nm.", show_default=False)] = None,
    to_nm: Annotated[float | None, typer.Option(
        "--to", metavar="NM", help="Last wavelength, nm.", show_default=False)] = None,
    materials_dir: MaterialsDir = None,
    extrapolate: Extrapolate = False,
) -> None:
    path, fmt = check_output(out, ("png", "svg"), option="--out")
    m = _load(name, materials_dir)
    lo, hi = m.range_nm
    a = float(from_nm) if from_nm is not None else max(lo, 200.0)
    b = float(to_nm) if to_nm is not None else min(hi, 2500.0)
    if from_nm is None and to_nm is None and not b > a:
        a, b = lo, hi
    if not a < b:
        raise InputError(f"--from ({a:g} nm) must be below --to ({b:g} nm) for a plot; "
                         f"'filmstack materials show {name} --from {a:g} --to {a:g}' prints "
                         "one wavelength")
    wl = wavelength_grid(a, b, (b - a) / 600.0 if b > a else 1.0)
    nk = _nk(m, wl, extrapolate)

    from ..io.atomic import write_bytes_atomic, write_text_atomic

    content = _figure(m, wl, nk, fmt)
    if fmt == "png":
        write_bytes_atomic(path, content)
    else:
        write_text_atomic(path, content.decode("utf-8"))
    typer.echo(f"wrote {path}")


def _figure(m, wl, nk, fmt: str) -> bytes:
    """n and k in two stacked panels sharing the wavelength axis; rendered to bytes."""
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    from ..report.spectrum_plot import figure_bytes

    style = {"axes.spines.top": False, "axes.spines.right": False, "axes.grid": True,
             "grid.color": "#e3e1dc", "grid.linewidth": 0.7, "font.size": 9.5,
             "axes.titlelocation": "left", "axes.titleweight": "bold"}
    with rc_context(style):
        fig = Figure(figsize=(7.0, 5.2), dpi=150, layout="constrained")
        ax_n, ax_k = fig.subplots(2, 1, sharex=True)
        ax_n.plot(wl, nk.real, color="#1f5f8b", lw=1.6)
        ax_n.set_ylabel("n")
        ax_n.set_title(f"{m.name}: refractive index n and extinction coefficient k")
        ax_k.plot(wl, nk.imag, color="#d1495b", lw=1.6)
        ax_k.set_ylabel("k")
        ax_k.set_xlabel("wavelength (nm)")
        if np.all(nk.imag == 0):
            ax_k.set_ylim(-0.05, 1.0)
            ax_k.text(0.5, 0.5, "k = 0 (no absorption in the data)", transform=ax_k.transAxes,
                      ha="center", va="center", color="#6b6b6b")
        src = m.source if len(m.source) <= 110 else m.source[:107].rstrip() + "..."
        fig.supxlabel(f"Source: {src}", fontsize=6.5, color="#4a4a4a", x=0.01, ha="left")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ExtrapolationWarning)
        return figure_bytes(fig, fmt)


def register(app: typer.Typer) -> None:
    """Add the ``materials`` sub-app (list, show, plot) to the main app."""
    app.add_typer(materials_app, name="materials")
