"""``filmstack colour``, ``filmstack chart`` and ``filmstack thickness``: colour of coatings and films.

- ``colour STACK``: reflected or transmitted colour (XYZ, CIELAB, LCh, sRGB) at one or more
  angles; ``--compare OTHER`` adds ΔE2000 to a second stack (design vs as-built); ``--plot``
  draws the a*–b* path over angle.
- ``chart``: an image (and optionally a CSV) of the colour of a film on a substrate versus its
  thickness.
- ``thickness``: ranked thickness candidates from an observed colour (colorimeter CIELAB, or an
  sRGB photo with the bare substrate in it), optionally with a second observation.

Every input is checked before any work; files are written atomically. The numerical work is in
:mod:`filmstack.colour`; this module parses, calls and renders.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from ._common import (CAUTION_COLOUR, CAUTION_MODEL, JsonFlag, check_angles, check_output,
                      make_table, parse_range, print_cautions, print_json, print_table, warn)
from ..errors import InputError

__all__ = ["register", "colour_command", "chart_command", "thickness_command", "parse_lab",
           "parse_material", "parse_under"]

COLOUR_HELP = """\
Reflected or transmitted colour of a coating: XYZ, CIELAB, LCh and sRGB, at one or more angles.

CIELAB is relative to the perfect reflecting diffuser under the same illuminant, unless
--white bare-substrate (then relative to the uncoated part). The sRGB hex shows the colour as
seen (adapted to D65); '!' marks a colour outside the sRGB gamut (the hex is clipped).

Example:

    filmstack colour examples/lens-ar.yaml --illuminant D65 --observer 10 --angle 0 --angle 30 --angle 45
"""

CHART_HELP = """\
A chart of the interference colour of a film on a substrate versus its thickness (PNG or SVG),
and optionally the same as CSV.

Example:

    filmstack chart --film SiO2 --substrate Si --range 0:1500 --out oxide-chart.png --csv oxide-chart.csv
"""

THICKNESS_HELP = """\
Film thickness candidates from an observed colour, ranked by CIEDE2000.

Give the colour as CIELAB from a colorimeter (--lab L,a,b; relative to the perfect diffuser
unless --white bare-substrate), or as sRGB picked from a photo together with the bare
substrate's sRGB from the same photo (--srgb HEX --bare-srgb HEX): the camera's white balance
and exposure are then corrected against the computed colour of the bare substrate. Colour
repeats with thickness: a second observation at another angle or under another illuminant
(--lab2 with --angle2 and/or --illuminant2) picks out the right order.

Example:

    filmstack thickness --film SiO2 --substrate Si --lab 44.6,31.4,-36.6 --range 0:1000
"""

Illuminant = Annotated[str, typer.Option("--illuminant", metavar="D65|D50|A|F2|F11",
                                         help="CIE illuminant.")]
Observer = Annotated[str, typer.Option("--observer", metavar="2|10",
                                       help="CIE standard observer: 2 (1931) or 10 (1964).")]
White = Annotated[str, typer.Option("--white", metavar="diffuser|bare-substrate",
                                    help="Reference white of CIELAB.")]
Film = Annotated[str, typer.Option("--film", metavar="MATERIAL", show_default=False,
                                   help="Film material: a library name or a number (index n).")]
Substrate = Annotated[str, typer.Option("--substrate", metavar="MATERIAL", show_default=False,
                                        help="Substrate material: a library name or a number.")]
Under = Annotated[list[str] | None, typer.Option(
    "--under", metavar="MATERIAL:NM", show_default=False,
    help="A fixed layer under the film, e.g. Si3N4:80; repeat, substrate side first.")]
Incident = Annotated[str, typer.Option("--incident", metavar="MATERIAL",
                                       help="Medium the light comes from.")]


# --- parsing ----------------------------------------------------------------------------------
def parse_material(text: str, *, option: str):
    """A material from a library name, a file path, or a plain number (a constant index n)."""
    from ..materials import Constant, get_material

    s = str(text).strip()
    if not s:
        raise InputError(f"{option} needs a material name, got nothing")
    try:
        n = float(s)
    except ValueError:
        try:
            return get_material(s)
        except InputError as exc:
            raise InputError(f"{option}: {exc.message}") from None
    if not (math.isfinite(n) and n > 0):
        raise InputError(f"{option}: an index must be a positive number, got {s}")
    return Constant(name=f"n={n:g}", source="command line", n=n)


def parse_under(values: list[str] | None, *, option: str = "--under"):
    """Layers from ``MATERIAL:NM`` items (deposition order: the first touches the substrate)."""
    from ..stack import Layer

    out = []
    for v in values or ():
        name, sep, nm = str(v).rpartition(":")
        if not sep or not name.strip():
            raise InputError(f"{option} must be MATERIAL:NM (e.g. Si3N4:80), got {v!r}")
        try:
            d = float(nm)
        except ValueError:
            raise InputError(f"{option} {v!r}: the thickness after ':' must be a number of "
                             f"nm") from None
        if not (math.isfinite(d) and d >= 0):
            raise InputError(f"{option} {v!r}: the thickness must be >= 0 nm")
        out.append(Layer(parse_material(name, option=option), d))
    return tuple(out)


def parse_lab(text: str | None, *, option: str) -> tuple[float, float, float] | None:
    """``'L,a,b'`` into three finite numbers (L* within 0–100)."""
    if text is None:
        return None
    parts = [p.strip() for p in str(text).replace(";", ",").split(",")]
    if len(parts) != 3:
        raise InputError(f"{option} must be L,a,b (three numbers, e.g. 45.2,30.1,-36.0), "
                         f"got {text!r}")
    try:
        vals = tuple(float(p) for p in parts)
    except ValueError:
        raise InputError(f"{option} must be three numbers L,a,b, got {text!r}") from None
    if not all(math.isfinite(v) for v in vals):
        raise InputError(f"{option} must be finite numbers, got {text!r}")
    if not 0.0 <= vals[0] <= 100.0:
        raise InputError(f"{option}: L* must be within 0-100, got {vals[0]:g}")
    return vals


def _setting(illuminant, observer, *, side="reflected", white="diffuser"):
    from ..colour.stack_colour import ColourSetting

    return ColourSetting(illuminant=illuminant, observer=observer, side=side, white=white)


def _one_angle(value: float, option: str) -> float:
    return float(check_angles([value], option=option)[0])


def _fmt(x, digits=2):
    return "-" if x is None or not math.isfinite(float(x)) else f"{float(x):.{digits}f}"


def _write_all(files):
    from ..io.atomic import write_files_atomic

    write_files_atomic(files)


# --- colour -------------------------------------------------------------------------------------
def colour_command(
    stack_file: Annotated[Path, typer.Argument(metavar="STACK", help="Stack file (YAML).",
                                               show_default=False)],
    illuminant: Illuminant = "D65",
    observer: Observer = "2",
    angle: Annotated[list[float] | None, typer.Option(
        "--angle", "-a", metavar="DEG", show_default=False,
        help="Angle of incidence in degrees; repeat for several [default: 0].")] = None,
    side: Annotated[str, typer.Option("--side", metavar="reflected|transmitted",
                                      help="Which light is seen.")] = "reflected",
    white: White = "diffuser",
    compare: Annotated[Path | None, typer.Option(
        "--compare", metavar="STACK", show_default=False,
        help="A second stack (e.g. as-built): adds ΔE2000 between the two at each angle.")] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", metavar="FILE.png|FILE.svg", show_default=False,
        help="Draw the a*-b* path of the colour over angle (0-80°).")] = None,
    json_out: JsonFlag = False,
) -> None:
    angles = check_angles(angle)
    setting = _setting(illuminant, observer, side=side, white=white)
    plot_target = check_output(plot, ("png", "svg"), option="--plot")

    from ..colour import colorimetry as cm
    from ..colour.stack_colour import colour_wavelengths, stack_colour
    from ..errors import OutOfRangeError
    from ..io.stack_file import load_stack

    stack = load_stack(stack_file)
    other = None if compare is None else load_stack(compare)
    for st, f in ((stack, stack_file), (other, compare)):
        if st is not None:
            try:
                colour_wavelengths(st.materials)
            except OutOfRangeError as exc:
                raise OutOfRangeError(exc.message, file=str(f)) from None
    c = stack_colour(stack, angles, setting)
    de = c2 = None
    if other is not None:
        c2 = stack_colour(other, angles, setting)
        de = cm.delta_e_2000(c.Lab, c2.Lab)

    files = []
    if plot_target is not None:
        from ..report.colour_plots import plot_ab_path
        from ..report.spectrum_plot import figure_bytes

        path, fmt = plot_target
        sweep = np.arange(0.0, 80.0 + 1e-9, 1.0)
        cs = stack_colour(stack, sweep, setting)
        fig, _ = plot_ab_path(cs.Lab, cs.srgb, values=sweep, unit="°", label_every=10,
                              title=f"Colour of {stack_file.name} over angle",
                              subtitle=setting.describe() + "; angle of incidence 0-80°",
                              caption=CAUTION_MODEL)
        files.append((path, figure_bytes(fig, fmt)))
    _write_all(files)

    if json_out:
        d = c.to_dict()
        if de is not None:
            d["compare"] = {"file": str(compare), "Lab": c2.Lab.tolist(),
                            "srgb_hex": c2.srgb_hex.tolist()}
            d["delta_e"] = de.tolist()
        print_json(d)
        return
    cols = ["angle", ("L*", "right"), ("a*", "right"), ("b*", "right"), ("C*", "right"),
            ("h°", "right"), ("X", "right"), ("Y", "right"), ("Z", "right"), "sRGB"]
    if de is not None:
        cols.append(("ΔE00", "right"))
    n = len(stack.layers)
    title = (f"{stack_file.name}: {n} layer{'s' if n != 1 else ''} on "
             f"{stack.substrate.name}; {setting.describe()}")
    caption = ("XYZ on the 0-100 scale (perfect diffuser Y = 100); '!' = outside the sRGB gamut "
               "(hex clipped)." + (f" ΔE00: CIEDE2000 to {compare}." if de is not None else ""))
    table = make_table(*cols)
    for i, a in enumerate(angles):
        L, aa, bb = c.Lab[i]
        row = [f"{a:g}°", _fmt(L), _fmt(aa), _fmt(bb), _fmt(c.LCh[i, 1]), _fmt(c.LCh[i, 2], 1),
               _fmt(c.XYZ[i, 0]), _fmt(c.XYZ[i, 1]), _fmt(c.XYZ[i, 2]),
               c.srgb_hex[i] + ("!" if c.out_of_gamut[i] else "")]
        if de is not None:
            row.append(_fmt(de[i]))
        table.add_row(*row)
    print_table(table, title=title, caption=caption)
    for path, _ in files:
        typer.echo(f"wrote {path}")
    print_cautions(CAUTION_MODEL)


# --- chart --------------------------------------------------------------------------------------
def chart_command(
    film: Film,
    substrate: Substrate,
    out: Annotated[Path, typer.Option("--out", "-o", metavar="FILE.png|FILE.svg",
                                      show_default=False, help="The chart image.")],
    range_: Annotated[str, typer.Option("--range", metavar="NM:NM",
                                        help="Film thickness range, nm.")] = "0:1500",
    under: Under = None,
    illuminant: Illuminant = "D65",
    observer: Observer = "2",
    angle: Annotated[float, typer.Option("--angle", metavar="DEG",
                                         help="Viewing angle (of incidence), degrees.")] = 0.0,
    incident: Incident = "air",
    csv: Annotated[Path | None, typer.Option(
        "--csv", metavar="FILE.csv", show_default=False,
        help="Also write the colours as CSV (thickness_nm, L, a, b, X, Y, Z, srgb_hex).")] = None,
    step: Annotated[float, typer.Option("--step", metavar="NM",
                                        help="Thickness step of the CSV rows, nm.")] = 5.0,
    row: Annotated[float | None, typer.Option(
        "--row", metavar="NM", show_default=False,
        help="Thickness span of one chart row, nm [default: chosen for <= 16 rows].")] = None,
) -> None:
    lo, hi = parse_range(range_)
    out_target = check_output(out, ("png", "svg"), option="--out")
    csv_target = check_output(csv, ("csv",), option="--csv")
    a = _one_angle(angle, "--angle")
    if not (math.isfinite(step) and step > 0):
        raise InputError(f"--step must be > 0 nm, got {step:g}")
    if row is not None and not (math.isfinite(row) and row > 0 and (hi - lo) / row <= 60):
        raise InputError(f"--row must be > 0 nm and give at most 60 rows, got {row:g}")
    setting = _setting(illuminant, observer)
    from ..colour.thickness import FilmSystem, film_colour_table

    system = FilmSystem(parse_material(film, option="--film"),
                        parse_material(substrate, option="--substrate"), parse_under(under),
                        parse_material(incident, option="--incident"))
    fine = (hi - lo) / 1500.0           # 1501 swatches: continuous to the eye
    table = film_colour_table(system, setting, a, (lo, hi), fine)

    from ..report.colour_plots import plot_colour_chart
    from ..report.spectrum_plot import figure_bytes

    path, fmt = out_target
    sub = (f"{setting.side}, illuminant {setting.illuminant}, {setting.observer}° observer, "
           f"{a:g}° incidence, from {system.incident.name}")
    fig, _ = plot_colour_chart(table.thickness_nm, table.srgb,
                               title=f"Interference colour of {system.describe()}",
                               subtitle=sub, caption="filmstack. " + CAUTION_COLOUR,
                               out_of_gamut=table.out_of_gamut, row_nm=row)
    files = [(path, figure_bytes(fig, fmt))]
    if csv_target is not None:
        coarse = film_colour_table(system, setting, a, (lo, hi), step)
        lines = [f"# filmstack colour chart: {system.describe()}; {sub}; CIELAB relative to "
                 "the perfect diffuser; XYZ 0-100",
                 f"# caution: {CAUTION_COLOUR}",
                 "thickness_nm,L,a,b,X,Y,Z,srgb_hex,out_of_gamut"]
        for t, lab, xyz, hx, oog in zip(coarse.thickness_nm, coarse.Lab, coarse.XYZ,
                                        coarse.srgb_hex, coarse.out_of_gamut):
            lines.append(f"{t:.10g}," + ",".join(f"{v:.4f}" for v in (*lab, *xyz))
                         + f",{hx},{int(oog)}")
        files.append((csv_target[0], "\n".join(lines) + "\n"))
    _write_all(files)
    for p, _ in files:
        typer.echo(f"wrote {p}")
    if table.out_of_gamut.any():
        warn(f"{int(table.out_of_gamut.sum())} thicknesses have colours outside the sRGB gamut "
             "(shown clipped)")
    print_cautions(CAUTION_COLOUR)


# --- thickness ----------------------------------------------------------------------------------
def thickness_command(
    film: Film,
    substrate: Substrate,
    lab: Annotated[str | None, typer.Option(
        "--lab", metavar="L,a,b", show_default=False,
        help="Observed CIELAB from a colorimeter.")] = None,
    srgb: Annotated[str | None, typer.Option(
        "--srgb", metavar="HEX", show_default=False,
        help="Film colour picked from a photo, e.g. '#6a5acd'.")] = None,
    bare_srgb: Annotated[str | None, typer.Option(
        "--bare-srgb", metavar="HEX", show_default=False,
        help="Bare substrate's colour from the same photo.")] = None,
    illuminant: Illuminant = "D65",
    observer: Observer = "2",
    angle: Annotated[float, typer.Option("--angle", metavar="DEG",
                                         help="Viewing angle (of incidence), degrees.")] = 0.0,
    range_: Annotated[str, typer.Option("--range", metavar="NM:NM",
                                        help="Film thickness range searched, nm.")] = "0:1500",
    lab2: Annotated[str | None, typer.Option(
        "--lab2", metavar="L,a,b", show_default=False,
        help="A second observed CIELAB of the same spot (another angle or illuminant).")] = None,
    angle2: Annotated[float | None, typer.Option(
        "--angle2", metavar="DEG", show_default=False,
        help="Angle of the second observation [default: --angle].")] = None,
    illuminant2: Annotated[str | None, typer.Option(
        "--illuminant2", metavar="NAME", show_default=False,
        help="Illuminant of the second observation [default: --illuminant].")] = None,
    top: Annotated[int, typer.Option("--top", metavar="N",
                                     help="Number of candidates shown.")] = 5,
    under: Under = None,
    incident: Incident = "air",
    white: White = "diffuser",
    min_separation: Annotated[float, typer.Option(
        "--min-separation", metavar="NM",
        help="Candidates closer than this to a better one are dropped, nm.")] = 20.0,
    step: Annotated[float, typer.Option("--step", metavar="NM",
                                        help="Grid step before local refinement, nm.")] = 1.0,
    plot: Annotated[Path | None, typer.Option(
        "--plot", metavar="FILE.png|FILE.svg", show_default=False,
        help="Draw the a*-b* path over thickness with the observation and candidates.")] = None,
    json_out: JsonFlag = False,
) -> None:
    # 1. options
    photo = srgb is not None or bare_srgb is not None
    if lab is not None and photo:
        raise InputError("give the colour either as --lab or as --srgb with --bare-srgb, "
                         "not both")
    if lab is None and not photo:
        raise InputError("give the observed colour: --lab L,a,b (colorimeter) or --srgb HEX "
                         "--bare-srgb HEX (photo with the bare substrate)")
    if photo and (srgb is None or bare_srgb is None):
        raise InputError("the photo route needs both --srgb (the film) and --bare-srgb (the "
                         "bare substrate, from the same photo)")
    if photo and white != "diffuser":
        raise InputError("--white does not apply to the photo route (it always refers to the "
                         "bare substrate)")
    lab1 = parse_lab(lab, option="--lab")
    lab_2 = parse_lab(lab2, option="--lab2")
    if lab_2 is None and (angle2 is not None or illuminant2 is not None):
        raise InputError("--angle2 and --illuminant2 describe a second observation: give "
                         "--lab2 too")
    lo, hi = parse_range(range_)
    a1 = _one_angle(angle, "--angle")
    a2 = _one_angle(angle2, "--angle2") if angle2 is not None else a1
    if int(top) < 1:
        raise InputError(f"--top must be >= 1, got {top}")
    if not (math.isfinite(min_separation) and min_separation >= 0):
        raise InputError(f"--min-separation must be >= 0 nm, got {min_separation:g}")
    if not (math.isfinite(step) and 0 < step <= (hi - lo) / 4):
        raise InputError(f"--step must be > 0 and at most a quarter of --range, got {step:g}")
    plot_target = check_output(plot, ("png", "svg"), option="--plot")
    s1 = _setting(illuminant, observer, white=white)
    s2 = _setting(illuminant2 or illuminant, observer, white=white)
    from ..colour import colorimetry as cm
    from ..colour.thickness import FilmSystem, Observation, find_thickness, observation_from_photo

    system = FilmSystem(parse_material(film, option="--film"),
                        parse_material(substrate, option="--substrate"), parse_under(under),
                        parse_material(incident, option="--incident"))
    from ..colour.stack_colour import colour_wavelengths

    colour_wavelengths(system.stack(0.0).materials)      # refuses materials without 400-700 nm

    # 2. observations
    notes = []
    correction = None
    if photo:
        correction = observation_from_photo(srgb, bare_srgb, system, s1, a1, label="photo")
        obs = [correction.observation]
        notes.extend(correction.warnings)
        if lab_2 is not None:
            # the photo's Lab is relative to the bare substrate: so is the second reading's
            s2 = _setting(illuminant2 or illuminant, observer, white="bare-substrate")
    else:
        obs = [Observation(lab1, a1, s1, label="observation 1")]
    if lab_2 is not None:
        obs.append(Observation(lab_2, a2, s2, label="observation 2"))

    # 3. search
    result = find_thickness(system, obs, range_nm=(lo, hi), step_nm=step,
                            min_separation_nm=min_separation, top=int(top))

    # 4. outputs
    files = []
    if plot_target is not None:
        from ..colour.thickness import film_colour_table
        from ..report.colour_plots import plot_ab_path
        from ..report.spectrum_plot import figure_bytes

        path, fmt = plot_target
        o = obs[0]
        tab = film_colour_table(system, o.setting, o.angle_deg, (lo, hi), step)
        cands = [(c.thickness_nm, c.Lab[0], f"{c.thickness_nm:.1f} nm, ΔE00 {c.delta_e:.2f}")
                 for c in result.candidates]
        fig, _ = plot_ab_path(tab.Lab, tab.srgb, values=tab.thickness_nm, unit="nm",
                              observed=o.lab, observed_label=o.label, candidates=cands,
                              title=f"{system.describe()}: colour over thickness",
                              subtitle=f"{o.setting.describe()}, {o.angle_deg:g}° incidence; "
                                       f"{lo:g}-{hi:g} nm",
                              caption="filmstack. " + CAUTION_COLOUR)
        files.append((path, figure_bytes(fig, fmt)))
    _write_all(files)

    if json_out:
        d = result.to_dict()
        if correction is not None:
            d["photo"] = {"camera_gains_linear_srgb": correction.gains.tolist(),
                          "corrected_srgb_hex": correction.corrected_srgb_hex,
                          "bare_substrate_srgb_hex": str(cm.srgb_to_hex(
                              correction.bare_srgb_model)),
                          "method": "von Kries-style diagonal scaling in linear sRGB against "
                                    "the computed bare substrate"}
        d["warnings"] = list(notes) + d["warnings"]
        print_json(d)
        return
    o = obs[0]
    head = f"{system.describe()}: thickness candidates"
    seen = [f"{x.label}: {x.setting.describe()}, {x.angle_deg:g}°, L*a*b* = "
            + ", ".join(f"{v:.1f}" for v in x.lab) for x in obs]
    cols = ["#", ("thickness nm", "right"), ("ΔE00", "right")]
    if len(obs) > 1:
        cols += [("ΔE00 obs 1", "right"), ("ΔE00 obs 2", "right")]
    cols += [("L*", "right"), ("a*", "right"), ("b*", "right"), "sRGB"]
    cap = "; ".join(seen) + (f". Searched {lo:g}-{hi:g} nm (step {step:g} nm, refined); "
                             f"candidates at least {min_separation:g} nm apart.")
    if correction is not None:
        g = correction.gains
        cap += (f" Photo white-balanced against bare {system.substrate.name}: linear sRGB gains "
                f"R {g[0]:.2f}, G {g[1]:.2f}, B {g[2]:.2f}; corrected film colour "
                f"{correction.corrected_srgb_hex}.")
    table = make_table(*cols)
    for i, c in enumerate(result.candidates, start=1):
        row = [str(i), f"{c.thickness_nm:.1f}", _fmt(c.delta_e)]
        if len(obs) > 1:
            row += [_fmt(x) for x in c.delta_e_each]
        row += [_fmt(c.Lab[0][0], 1), _fmt(c.Lab[0][1], 1), _fmt(c.Lab[0][2], 1),
                c.srgb_hex[0] + ("!" if c.out_of_gamut[0] else "")]
        table.add_row(*row)
    print_table(table, title=head, caption=cap)
    for path, _ in files:
        typer.echo(f"wrote {path}")
    for w in list(notes) + list(result.warnings):
        warn(w)
    print_cautions(CAUTION_COLOUR)


def register(app: typer.Typer) -> None:
    """Add ``colour``, ``chart`` and ``thickness`` to the app."""
    app.command("colour", help=COLOUR_HELP, no_args_is_help=True)(colour_command)
    app.command("chart", help=CHART_HELP, no_args_is_help=True)(chart_command)
    app.command("thickness", help=THICKNESS_HELP, no_args_is_help=True)(thickness_command)
