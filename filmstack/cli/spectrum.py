"""``filmstack spectrum STACK``: reflectance, transmittance and absorptance over wavelength.

Prints a compact summary (band mean, minimum and maximum with their wavelengths, per angle and
polarisation), and on request writes the spectra (``--out x.csv|x.json``), a plot
(``--plot x.png|x.svg``) or prints JSON (``--json``, the keys of DESIGN.md §5). Every input is
checked before any work; outputs are written only when everything succeeded, each atomically.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from ._common import (AngleDeg, CAUTION_MODEL, FromNm, JsonFlag, MaterialsDir, Pol, StepNm, ToNm,
                      check_angles, check_output, check_wavelengths_in_range, fmt_pct,
                      make_table, material_folders, parse_polarizations, print_cautions,
                      print_json, print_table, wavelength_grid)
from ..errors import InputError

__all__ = ["register", "spectrum_command", "parse_quantities"]

HELP = """\
R, T and A of a coating over wavelength, at one or more angles and polarisations.

Prints the band mean, minimum and maximum (with their wavelengths) per angle and polarisation. On request writes the spectra as CSV or JSON (--out), draws them as PNG or SVG (--plot), or prints JSON on stdout (--json: wavelength_nm, angle_deg, polarization, R, T, A as fractions 0-1, indexed [angle][wavelength]).

Examples:

\b
    filmstack spectrum examples/lens-ar.yaml --from 400 --to 700 --step 5 --plot lens-ar.png
    filmstack spectrum examples/dichroic-45.yaml --to 800 -a 45 -p s -p p --out d45.csv
    filmstack spectrum examples/laser-mirror-1064.yaml --from 900 --to 1200 --json
"""


def parse_quantities(values: list[str] | None, *, option: str = "--show") -> list[str] | None:
    """R/T/A from a repeatable, comma-separable option; ``None`` when not given."""
    if not values:
        return None
    out: list[str] = []
    for v in values:
        for part in str(v).split(","):
            q = part.strip().upper()
            if not q:
                continue
            if q not in ("R", "T", "A"):
                raise InputError(f"{option} takes R, T or A, got {part.strip()!r}")
            if q not in out:
                out.append(q)
    if not out:
        raise InputError(f"{option} takes R, T or A, got nothing")
    return out


def _describe(stack, path: str) -> str:
    n = len(stack.layers)
    sub = stack.substrate.name + (f" ({stack.substrate_mm:g} mm, both faces)"
                                  if stack.substrate_mm is not None else "")
    back = f", {len(stack.back_layers)} on the back" if stack.back_layers else ""
    return (f"{Path(path).name}: {n} layer{'s' if n != 1 else ''}, {stack.total_nm:.1f} nm "
            f"on {sub}{back}, light from {stack.incident.name}")


def _grid_text(wl, step_nm: float) -> str:
    """'400-700 nm, step 5 nm', or '1064 nm' for a single wavelength."""
    if wl.size == 1:
        return f"{wl[0]:g} nm"
    return f"{wl[0]:g}-{wl[-1]:g} nm, step {step_nm:g} nm"


def _summary_table(spectra, quantities):
    from ..io.spectra_out import band_summary

    table = make_table("angle", "pol", "", ("mean %", "right"), ("min %", "right"),
                       ("at nm", "right"), ("max %", "right"), ("at nm", "right"))
    wl = np.asarray(spectra[0].wavelength_nm, dtype=float)
    angles = np.atleast_1d(np.asarray(spectra[0].angle_deg, dtype=float))
    first = True
    for ia, a in enumerate(angles):
        for s in spectra:
            if not first:
                table.add_section()
            first = False
            for iq, q in enumerate(quantities):
                st = band_summary(wl, np.asarray(getattr(s, q), dtype=float)[ia])
                table.add_row(f"{a:g}°" if iq == 0 else "", s.polarization if iq == 0 else "", q,
                              fmt_pct(st["mean"]), fmt_pct(st["min"]), f"{st['min_nm']:g}",
                              fmt_pct(st["max"]), f"{st['max_nm']:g}")
    return table


def spectrum_command(
    stack_file: Annotated[Path, typer.Argument(metavar="STACK", help="Stack file (YAML).",
                                               show_default=False)],
    from_nm: FromNm = 400.0,
    to_nm: ToNm = 700.0,
    step_nm: StepNm = 1.0,
    angle: AngleDeg = None,
    pol: Pol = None,
    out: Annotated[Path | None, typer.Option(
        "--out", "-o", metavar="FILE.csv|FILE.json",
        help="Write the spectra: CSV (one column per quantity, angle and polarisation) or JSON.",
        show_default=False)] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", metavar="FILE.png|FILE.svg", help="Draw the spectra as PNG or SVG.",
        show_default=False)] = None,
    show: Annotated[list[str] | None, typer.Option(
        "--show", metavar="R,T,A",
        help="Quantities in the table and plot [default: R and T, and A when the stack absorbs].",
        show_default=False)] = None,
    materials_dir: MaterialsDir = None,
    json_out: JsonFlag = False,
) -> None:
    # 1. every option, before any work
    wl = wavelength_grid(from_nm, to_nm, step_nm)
    angles = check_angles(angle)
    pols = parse_polarizations(pol)
    quantities = parse_quantities(show)
    out_target = check_output(out, ("csv", "json"), option="--out")
    plot_target = check_output(plot, ("png", "svg"), option="--plot")
    folders = material_folders(materials_dir)

    # 2. the stack file, then its materials against the grid
    from ..io.stack_file import load_stack

    stack = load_stack(stack_file, search_paths=folders)
    check_wavelengths_in_range(stack, wl, file=str(stack_file))

    # 3. the computation: one call per polarisation, all angles and wavelengths at once
    from ..response import spectrum as compute_spectrum

    spectra = [compute_spectrum(stack, wl, angles, p) for p in pols]
    if quantities is None:
        absorbs = any(float(np.max(s.A)) > 5e-6 for s in spectra)
        quantities = ["R", "T", "A"] if absorbs else ["R", "T"]

    # 4. outputs, rendered in memory first, then each moved into place
    from ..io.atomic import write_files_atomic

    files: list[tuple[Path, object]] = []
    if out_target is not None:
        from ..io.json_out import dumps_json
        from ..io.spectra_out import spectrum_csv, spectrum_json

        path, fmt = out_target
        text = spectrum_csv(spectra) if fmt == "csv" else dumps_json(spectrum_json(spectra)) + "\n"
        files.append((path, text))
    if plot_target is not None:
        from ..report.spectrum_plot import figure_bytes, plot_spectrum

        path, fmt = plot_target
        grid = _grid_text(wl, step_nm)
        fig, _ = plot_spectrum(spectra, quantities, title=f"Spectrum of {stack_file.name}",
                               subtitle=_describe(stack, str(stack_file)).split(": ", 1)[1]
                               + f"; {grid}",
                               caption="filmstack: ideal homogeneous films with the given optical"
                                       " constants; verify with measurement.")
        files.append((path, figure_bytes(fig, fmt)))
    write_files_atomic(files)

    # 5. the answer
    if json_out:
        from ..io.spectra_out import spectrum_json

        print_json(spectrum_json(spectra))
        return
    plural = "s" if wl.size != 1 else ""
    caption = (f"{_grid_text(wl, step_nm)} ({wl.size} wavelength{plural}); "
               "R, T, A in % of the incident power.")
    print_table(_summary_table(spectra, quantities), title=_describe(stack, str(stack_file)),
                caption=caption)
    for path, _ in files:
        typer.echo(f"wrote {path}")
    print_cautions(CAUTION_MODEL)


def register(app: typer.Typer) -> None:
    """Add ``spectrum`` to the app."""
    app.command("spectrum", help=HELP, no_args_is_help=True)(spectrum_command)
