"""``filmstack field STACK``: the electric field |E|² through a stack at one wavelength.

For laser optics: where the standing-wave peaks sit relative to the interfaces, and how strong
they are in each layer. Prints a table per layer (outer surface first), and on request writes
the profile (``--out x.csv|x.json``), draws it over the index profile (``--plot x.png|x.svg``)
or prints JSON (``--json``). Carries the laser caution of DESIGN.md §7: no damage threshold is
predicted.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from ._common import (CAUTION_LASER, CAUTION_MODEL, JsonFlag, MaterialsDir, check_angles,
                      check_output, check_wavelengths_in_range, make_table, material_folders,
                      parse_polarization, print_cautions, print_json, print_table)
from ..errors import InputError

__all__ = ["register", "field_command"]

HELP = """\
The electric field |E|² through a coating at one wavelength, relative to the incident wave.

Prints, for each layer from the outer surface in, the peak |E|² and its depth and |E|² at the layer's outer interface; writes the profile as CSV or JSON (--out), draws it over the layers (--plot), or prints JSON (--json: wavelength_nm, angle_deg, polarization, depth_nm, e2, interfaces_nm, layers). Depth is measured from the outer surface; layers are numbered from 1 at the substrate. A thick substrate is taken as semi-infinite here (the field of the front coating).

Examples:

\b
    filmstack field examples/laser-mirror-1064.yaml --wavelength 1064 --plot mirror-field.png
    filmstack field examples/laser-mirror-1064.yaml --wavelength 1064 --angle 45 --pol p --json
"""


def field_command(
    stack_file: Annotated[Path, typer.Argument(metavar="STACK", help="Stack file (YAML).",
                                               show_default=False)],
    wavelength: Annotated[float, typer.Option(
        "--wavelength", "-w", metavar="NM", help="Vacuum wavelength, nm.",
        show_default=False)] = ...,
    angle: Annotated[float, typer.Option(
        "--angle", "-a", metavar="DEG",
        help="Angle of incidence in degrees, 0 <= angle < 90.")] = 0.0,
    pol: Annotated[str, typer.Option("--pol", "-p", metavar="s|p",
                                     help="Polarisation, s or p.")] = "s",
    step: Annotated[float, typer.Option("--step", metavar="NM",
                                        help="Depth sampling step, nm.")] = 1.0,
    out: Annotated[Path | None, typer.Option(
        "--out", "-o", metavar="FILE.csv|FILE.json", help="Write the profile as CSV or JSON.",
        show_default=False)] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", metavar="FILE.png|FILE.svg", help="Draw |E|² over the layers.",
        show_default=False)] = None,
    materials_dir: MaterialsDir = None,
    json_out: JsonFlag = False,
) -> None:
    # 1. every option, before any work
    wl = _wavelength(wavelength)
    angle_deg = float(check_angles([angle])[0])
    polarization = parse_polarization(pol)
    if polarization == "mean":
        raise InputError("--pol must be s or p for a field profile (the fields of s and p "
                         "differ; run once for each)")
    if not (np.isfinite(step) and step > 0):
        raise InputError(f"--step must be a number > 0 nm, got {step:g}")
    out_target = check_output(out, ("csv", "json"), option="--out")
    plot_target = check_output(plot, ("png", "svg"), option="--plot")
    folders = material_folders(materials_dir)

    # 2. the stack, its materials at this wavelength
    from ..io.stack_file import load_stack

    stack = load_stack(stack_file, search_paths=folders)
    check_wavelengths_in_range(stack, np.array([wl]), file=str(stack_file),
                               options="--wavelength")
    total = stack.total_nm
    if total / step > 2_000_000:
        raise InputError(f"--step {step:g} nm gives more than 2,000,000 points over "
                         f"{total:g} nm of layers; choose a larger step")

    # 3. the computation
    from ..response import field_profile

    profile = field_profile(stack, wl, angle_deg, polarization, step)

    # 4. outputs, rendered in memory first, then each moved into place
    from ..io.atomic import write_files_atomic
    from ..io.field_out import field_csv, field_json, layer_peaks

    files: list[tuple[Path, object]] = []
    if out_target is not None:
        from ..io.json_out import dumps_json

        path, fmt = out_target
        files.append((path, field_csv(profile) if fmt == "csv"
                      else dumps_json(field_json(profile, stack)) + "\n"))
    setting = f"{wl:g} nm, {angle_deg:g}°, {polarization}"
    if plot_target is not None:
        from ..report.field_plot import plot_field
        from ..report.spectrum_plot import figure_bytes

        path, fmt = plot_target
        fig, _ = plot_field(profile, stack, title=f"Electric field in {stack_file.name}",
                            subtitle=f"{setting}; |E|² relative to the incident wave",
                            caption="filmstack: ideal homogeneous films; no damage threshold is "
                                    "predicted (measure it by ISO 21254).")
        files.append((path, figure_bytes(fig, fmt)))
    write_files_atomic(files)

    # 5. the answer
    if json_out:
        print_json(field_json(profile, stack))
        return
    table = make_table("layer", "material", ("nm", "right"), ("peak |E|²", "right"),
                       ("at depth nm", "right"), ("|E|² outer interface", "right"))
    for row in layer_peaks(profile, stack):
        table.add_row(str(row["layer"]), row["material"], f"{row['nm']:.2f}",
                      f"{row['peak_e2']:.3f}", f"{row['peak_depth_nm']:.1f}",
                      f"{row['outer_interface_e2']:.3f}")
    surface = float(np.interp(0.0, profile.depth_nm, profile.e2))
    thick = " (thick substrate taken as semi-infinite)" if stack.substrate_mm else ""
    print_table(table, title=f"{stack_file.name}: |E|² at {setting}{thick}",
                caption=f"Relative to the incident wave's |E|². At the outer surface {surface:.3f}; "
                        f"largest anywhere {float(np.max(profile.e2)):.3f}. Layer 1 touches the "
                        "substrate; depth from the outer surface.")
    for path, _ in files:
        typer.echo(f"wrote {path}")
    print_cautions(CAUTION_LASER, CAUTION_MODEL)


def _wavelength(value: float) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(f"--wavelength must be a number in nm, got {value!r}") from None
    if not (np.isfinite(x) and x > 0):
        raise InputError(f"--wavelength must be a number > 0 nm, got {value!r}")
    return x


def register(app: typer.Typer) -> None:
    """Add ``field`` to the app."""
    app.command("field", help=HELP, no_args_is_help=True)(field_command)
