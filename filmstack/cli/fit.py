"""``filmstack fit MEASURED --model STACK``: fit free thicknesses and indices to measured spectra.

MEASURED is a CSV file (one sample, or a long table with a ``site`` column) or a folder of CSV
files (one site each). One site gives a table of fitted values with standard errors; many give a
per-site fit and uniformity figures. ``--json`` prints ``parameters`` (each ``{name, value,
stderr}``), ``rms`` and, for many sites, ``sites``. Inputs are checked before any work and
outputs are written atomically at the end.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from ._common import (CAUTION_MODEL, JsonFlag, Progress, check_output, make_table,
                      print_cautions, print_json, print_table, warn)
from ..errors import InputError

__all__ = ["register", "fit_command", "map_csv"]

HELP = """\
Fit the free parameters of a model stack (thicknesses, index scales, Cauchy coefficients) to measured reflectance or transmittance: one sample, or every site of a wafer map.

MEASURED is a CSV file with a wavelength_nm column and an R or T column (fractions 0-1; R_percent or a % in the header for percent; optional sigma, angle_deg, polarization, site, x_mm, y_mm columns) or a folder of such files. Free parameters are marked in the model file, e.g. nm: {fit: 120, min: 50, max: 300}. A global scan over the thickness range comes first, so a poor start value does not land in a wrong interference order. Values are given with 1-sigma standard errors.

Examples:

\b
    filmstack fit examples/fit/oxide-on-si-site.csv --model examples/fit/oxide-on-si.yaml --plot fit.png
    filmstack fit examples/fit/wafer-map.csv --model examples/fit/oxide-on-si.yaml --map map.png --out sites.csv
    filmstack fit examples/fit/oxide-on-si-site.csv --model examples/fit/oxide-on-si.yaml --json
"""


def _num(x: float, digits: int = 6) -> str:
    return "-" if x is None or not math.isfinite(x) else f"{x:.{digits}g}"


def _value_text(value: float, stderr: float) -> tuple[str, str]:
    """Value and ± stderr rounded to the stderr's second significant digit."""
    if not math.isfinite(stderr) or stderr <= 0:
        return _num(value, 7), "-"
    digits = max(0, 1 - int(math.floor(math.log10(stderr))))
    return f"{value:.{digits}f}", f"{stderr:.{digits}f}"


def map_csv(result) -> str:
    """The per-site table of a :class:`~filmstack.fit.MapResult` as CSV text.

    Columns: ``site, x_mm, y_mm``, then ``<name>`` and ``<name>_stderr`` per parameter, ``rms``
    (fraction), ``ambiguous`` (0/1), ``on_bound`` (0/1), ``warnings`` (messages joined by
    `` | ``).
    """
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    head = ["site", "x_mm", "y_mm"]
    for n in result.names:
        head += [n, f"{n}_stderr"]
    w.writerow(head + ["rms", "ambiguous", "on_bound", "warnings"])

    def cell(x):
        return "" if not np.isfinite(x) else repr(float(x))

    for i, sid in enumerate(result.site):
        row = [sid, cell(result.x_mm[i]), cell(result.y_mm[i])]
        for j in range(len(result.names)):
            row += [cell(result.values[i, j]), cell(result.stderr[i, j])]
        row += [cell(result.rms[i]), int(result.ambiguous[i]), int(result.at_bound[i].any()),
                " | ".join(result.warnings[i]) if result.warnings else ""]
        w.writerow(row)
    return buf.getvalue()


def _single_table(result, model_path: Path, measured_path: Path):
    table = make_table("parameter", ("value", "right"), ("± 1σ", "right"), "unit",
                       ("min", "right"), ("max", "right"), "",
                       title=f"Fit of {measured_path.name} with {model_path.name}",
                       caption=_single_caption(result))
    for p in result.parameters:
        v, s = _value_text(p.value, p.stderr)
        table.add_row(p.name, v, s, p.unit, _num(p.lower), _num(p.upper),
                      "on bound" if p.at_bound else "")
    return table


def _single_caption(result) -> str:
    parts = [f"{result.n_points} points; residual RMS {100 * result.rms:.3g} %"]
    if result.chi2_reduced is not None:
        parts.append(f"reduced χ² {result.chi2_reduced:.3g}")
    names = [p.name for p in result.parameters]
    if len(names) > 1:
        pairs = []
        for a in range(len(names)):
            for b in range(a + 1, len(names)):
                rho = result.correlation[a, b]
                if np.isfinite(rho):
                    pairs.append(f"ρ({names[a]}, {names[b]}) = {rho:+.3f}")
        if pairs:
            parts.append("correlations: " + ", ".join(pairs))
    return "; ".join(parts) + "."


def _map_table(result, model_path: Path, measured_path: Path):
    table = make_table("parameter", ("mean", "right"), ("min", "right"), ("max", "right"),
                       ("range", "right"), ("σ", "right"), ("non-unif. %", "right"),
                       ("median ±1σ", "right"), "unit",
                       title=f"Map fit of {measured_path.name} with {model_path.name}: "
                             f"{len(result)} sites",
                       caption=(f"residual RMS over sites "
                                f"{100 * float(np.sqrt(np.nanmean(result.rms**2))):.3g} %"
                                f"; non-uniformity = (max - min)/(2 mean); "
                                f"{int(result.ambiguous.sum())} ambiguous site(s), "
                                f"{int(result.at_bound.any(axis=1).sum())} on a bound, "
                                f"{int(result.poor_fit.sum())} poor fit(s)."))
    for j, name in enumerate(result.names):
        u = result.uniformity(name)
        se = result.stderr[:, j]
        se = se[np.isfinite(se)]
        table.add_row(name, _num(u.mean), _num(u.minimum), _num(u.maximum), _num(u.range, 4),
                      _num(u.sigma, 4), f"{100 * u.nonuniformity:.2f}",
                      _num(float(np.median(se)), 3) if se.size else "-", result.units[j])
    return table


def fit_command(
    measured: Annotated[Path, typer.Argument(
        metavar="MEASURED", help="Measured CSV file, or a folder of CSV files (one site each).",
        show_default=False)],
    model: Annotated[Path, typer.Option(
        "--model", "-m", metavar="STACK",
        help="Model stack file (YAML) with free parameters marked {fit: .., min: .., max: ..}.",
        show_default=False)],
    percent: Annotated[bool | None, typer.Option(
        "--percent/--fraction",
        help="Values in columns named only R or T are percent / fractions [default: as the "
             "header says; a bare R is a fraction].", show_default=False)] = None,
    angle: Annotated[float | None, typer.Option(
        "--angle", "-a", metavar="DEG",
        help="Angle of incidence where the file gives none [default: 0].",
        show_default=False)] = None,
    pol: Annotated[str | None, typer.Option(
        "--pol", "-p", metavar="s|p|mean",
        help="Polarisation where the file gives none [default: mean].",
        show_default=False)] = None,
    fit_shift: Annotated[bool, typer.Option(
        "--fit-shift", help="Also fit a wavelength-axis correction (-5 to 5 nm).")] = False,
    fit_scale: Annotated[bool, typer.Option(
        "--fit-scale", help="Also fit a photometric scale factor (0.5 to 1.5).")] = False,
    absolute_sigma: Annotated[bool, typer.Option(
        "--absolute-sigma",
        help="Take the file's uncertainties as absolute (standard errors not scaled by the "
             "residual variance).")] = False,
    local_only: Annotated[bool, typer.Option(
        "--local-only", help="Skip the global thickness scan; start from the model's values.")
    ] = False,
    plot: Annotated[Path | None, typer.Option(
        "--plot", metavar="FILE.png|FILE.svg",
        help="Draw measured against fitted spectra with residuals (for many sites: the site "
             "with the largest residual RMS).", show_default=False)] = None,
    map_out: Annotated[Path | None, typer.Option(
        "--map", metavar="FILE.png|FILE.svg",
        help="Draw a map of the first fitted parameter over the sites' x, y.",
        show_default=False)] = None,
    map_param: Annotated[str | None, typer.Option(
        "--map-param", metavar="NAME", help="Parameter to map, e.g. layers[0].nm.",
        show_default=False)] = None,
    out: Annotated[Path | None, typer.Option(
        "--out", "-o", metavar="FILE.csv",
        help="Write the per-site (or single) results as CSV.", show_default=False)] = None,
    seed: Annotated[int, typer.Option(
        "--seed", help="Seed of the scan's quasi-random points (many free thicknesses).")] = 0,
    json_out: JsonFlag = False,
) -> None:
    # 1. options and output paths, before any work
    from ._common import check_angles, parse_polarization

    pol_v = parse_polarization(pol) if pol is not None else None
    angle_v = float(check_angles([angle])[0]) if angle is not None else None
    plot_target = check_output(plot, ("png", "svg"), option="--plot")
    map_target = check_output(map_out, ("png", "svg"), option="--map")
    out_target = check_output(out, ("csv",), option="--out")
    if not model.exists():
        raise InputError("no such model file", file=str(model))

    # 2. inputs: the model, then the measured files
    from ..fit import fit_map, fit_spectrum, load_fit_model
    from ..io.measured import read_measured

    fit_model = load_fit_model(model, fit_shift=fit_shift, fit_scale=fit_scale)
    data = read_measured(measured, percent=percent, angle_deg=angle_v, polarization=pol_v)
    if map_param is not None and map_param not in fit_model.names:
        raise InputError(f"--map-param {map_param!r} is not a free parameter of the model "
                         f"({', '.join(fit_model.names)})")
    single = len(data.sites) == 1
    if map_target is not None and (single or not data.has_positions):
        raise InputError("--map needs many sites with x_mm and y_mm positions",
                         file=str(measured))

    # 3. the fit
    files: list[tuple[Path, object]] = []
    if single:
        result = fit_spectrum(fit_model, data.sites[0], global_search=not local_only, seed=seed)
        plot_result = result
    else:
        with Progress("fitting sites", total=len(data.sites), stop_on_interrupt=True) as prog:
            result = fit_map(fit_model, data, global_search=not local_only, seed=seed,
                             progress=lambda done, total: prog.update(done),
                             stop=lambda: prog.stop_requested)
        plot_result = None
        if plot_target is not None:
            worst = int(np.nanargmax(result.rms))
            plot_result = fit_spectrum(fit_model, data.sites[worst],
                                       global_search=not local_only, seed=seed)

    # 4. outputs, rendered in memory, then moved into place
    from ..io.atomic import write_files_atomic

    if plot_target is not None:
        from ..report.fit_plots import plot_fit
        from ..report.spectrum_plot import figure_bytes

        path, fmt = plot_target
        m = plot_result.measurement
        sub = f"model {model.name}; {m.n_points} points from {Path(m.file or measured).name}"
        if not single:
            sub += " (the site with the largest residual RMS)"
        fig, _ = plot_fit(plot_result, title=f"Fit of site {m.site}", subtitle=sub)
        files.append((path, figure_bytes(fig, fmt)))
    if map_target is not None:
        from ..report.fit_plots import plot_map
        from ..report.spectrum_plot import figure_bytes

        path, fmt = map_target
        fig, _ = plot_map(result, map_param, title=f"{map_param or result.names[0]} over "
                                                   f"{Path(measured).name}")
        files.append((path, figure_bytes(fig, fmt)))
    if out_target is not None:
        path, _ = out_target
        if single:
            from ..fit import MapResult

            r = result
            as_map = MapResult(
                names=[p.name for p in r.parameters], units=[p.unit for p in r.parameters],
                site=[r.measurement.site],
                x_mm=np.array([np.nan if r.measurement.x_mm is None else r.measurement.x_mm]),
                y_mm=np.array([np.nan if r.measurement.y_mm is None else r.measurement.y_mm]),
                values=r.x[None], stderr=np.array([[p.stderr for p in r.parameters]]),
                rms=np.array([r.rms]), chi2_reduced=None,
                at_bound=np.array([[p.at_bound for p in r.parameters]]),
                ambiguous=np.array([r.ambiguous]), warnings=[list(r.warnings)])
            files.append((path, map_csv(as_map)))
        else:
            files.append((path, map_csv(result)))
    write_files_atomic(files)

    # 5. the answer
    if single:
        for w in result.warnings:
            warn(w)
    else:
        n_flag = sum(1 for w in result.warnings if w)
        if n_flag:
            first = next(i for i, w in enumerate(result.warnings) if w)
            warn(f"{n_flag} of {len(result)} sites have warnings (see --out or --json); "
                 f"e.g. site {result.site[first]}: {result.warnings[first][0]}")
        if result.interrupted:
            warn("stopped early (Ctrl-C): the values are the best so far")
    if json_out:
        doc = result.as_dict()
        if single:
            doc["site"] = result.measurement.site
        print_json(doc)
    else:
        if single:
            print_table(_single_table(result, model, measured))
        else:
            print_table(_map_table(result, model, measured))
        for path, _ in files:
            typer.echo(f"wrote {path}")
    print_cautions(CAUTION_MODEL)


def register(app: typer.Typer) -> None:
    """Add ``fit`` to the app."""
    app.command("fit", help=HELP, no_args_is_help=True)(fit_command)
