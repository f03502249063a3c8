"""``filmstack design SPEC``: synthesise and refine a stack that meets a spec.

Runs :func:`filmstack.design.synthesize` (needle optimisation, gradual evolution) within a time
limit, writes the design as a stack file (``--out``, read by ``spectrum`` and ``check``), prints
the layer table (material, nm, QWOT) and every requirement's result on the spec's sampling and on
the 4× finer re-evaluation grid, and on request writes report plots (``--report DIR``) or prints
JSON (``--json``: ``merit``, ``layers``, ``total_nm``, ``requirements`` and more).

Progress goes to stderr, one line per improvement (step, layers, merit, elapsed time). The first
Ctrl-C stops the search and keeps the best design so far (it is still written); a second one
aborts. Exit code 0 when every requirement passes on the fine grid, 1 when one does not (the
design is written all the same), 2 for bad input.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from ._common import (CAUTION_LASER, CAUTION_MODEL, EXIT_FAILED, JsonFlag, Progress,
                      check_output, make_table, print_cautions, print_json, print_table,
                      require_file)
from ..errors import InputError

__all__ = ["register", "design_command"]

HELP = """\
Design a coating from a spec: needle synthesis and refinement within a time limit.

Writes the design as a stack file (--out), prints its layers (material, nm, QWOT at the spec's reference wavelength) and each requirement's result, both on the spec's sampling and on a grid four times finer (a design must not hide a spike between samples). Progress (step, layers, merit, elapsed time) goes to stderr; the first Ctrl-C stops the search and keeps the best design so far. Exit code 0 when every requirement passes on the fine grid, 1 when one does not.

Examples:

\b
    filmstack design examples/design-visible-ar.yaml --out ar.yaml --seed 1
    filmstack design examples/design-lwp-edge.yaml --out lwp.yaml --time-limit 60 --report lwp/
    filmstack design examples/design-laser-hr.yaml --out hr.yaml --json
"""

STRATEGY_CHOICES = ("auto", "needle", "evolution", "refine")


def _fmt(x: float, digits: int = 4) -> str:
    if x is None or not math.isfinite(x):
        return "-"
    return f"{x:.{digits}g}"


def _display(req, value, *, signed: bool = False) -> str:
    v = float(np.asarray(req.to_display(value)))
    if not math.isfinite(v):
        return "-"
    unit = req.unit.strip()
    return (f"{v:+.4g}" if signed else f"{v:.4g}") + (f" {unit}" if unit else "")


def layer_rows(result) -> list[dict]:
    """One dict per front layer: index, material, nm, qwot, fixed (JSON-ready)."""
    from ..stack import nm_to_qwot

    stack, problem = result.stack, result.problem
    nb = len(problem.fixed_bottom)
    nf = len(result.design)
    rows = []
    for j, layer in enumerate(stack.layers):
        q = nm_to_qwot(layer.thickness_nm, layer.material, stack.reference_nm)
        rows.append({"index": j, "material": layer.material.name, "nm": layer.thickness_nm,
                     "qwot": q, "fixed": not (nb <= j < nb + nf)})
    return rows


def _requirement_rows(coarse, fine) -> list[dict]:
    rows = []
    for c, f in zip(coarse, fine):
        d = c.to_dict()
        d["fine"] = {"pass": bool(np.asarray(f.passed)), "value": _num(f.value),
                     "margin": _num(f.margin), "worst_wavelength_nm": _num(f.worst_wavelength_nm),
                     "worst_angle_deg": _num(f.worst_angle_deg), "refine": f.refine}
        d["pass"] = bool(d["pass"] and d["fine"]["pass"])
        d["pass_spec_grid"] = bool(np.asarray(c.passed))
        rows.append(d)
    return rows


def _num(x):
    x = float(np.asarray(x))
    return x if math.isfinite(x) else None


def _write_report(report_dir: Path, result, spec, spec_path: Path) -> list[Path]:
    from ..io.atomic import write_bytes_atomic
    from ..report import figure_bytes
    from ..report.design_plots import (design_wavelengths, plot_design_spectra,
                                       plot_index_profile, plot_merit_history,
                                       plot_reflectance_map)

    stack = result.stack
    reqs = [r for r in spec.requirements if r.quantity != "colour"]
    wl = design_wavelengths(reqs, material_range=stack.range_nm) if reqs else None
    caption = ("filmstack: ideal homogeneous films with the given optical constants; verify "
               "with measurement.")
    out = []
    report_dir.mkdir(parents=True, exist_ok=True)
    name = spec_path.stem
    sub = (f"{_layers(len(stack.layers))}, {stack.total_nm:.1f} nm on {stack.substrate.name}; "
           f"merit {result.merit:.4g}")
    figs = []
    if reqs:
        fig, _ = plot_design_spectra(stack, reqs, wavelengths_nm=wl,
                                     title=f"Design for {spec_path.name}", subtitle=sub,
                                     caption=caption)
        figs.append(("spectra.png", fig))
        rt = [r for r in reqs if r.quantity in ("R", "T")]
        q = rt[0].quantity if rt else "R"
        pol = rt[0].polarization if rt else "mean"
        amax = max([max(r.angles_deg) for r in reqs] + [0.0])
        angles = np.linspace(0.0, min(89.0, max(60.0, amax + 15.0)), 61)
        fig, _ = plot_reflectance_map(stack, wl, angles, pol, requirements=reqs, quantity=q,
                                      title=f"{q} over wavelength and angle ({pol}), "
                                            f"{spec_path.name}", caption=caption)
        figs.append((f"{q}-map.png", fig))
    fixed = [row["fixed"] for row in layer_rows(result)]
    fig, _ = plot_index_profile(stack, title=f"Index profile of the design for {spec_path.name}",
                                caption=caption, fixed=fixed)
    figs.append(("index-profile.png", fig))
    if result.history:
        fig, _ = plot_merit_history(result.history, title=f"Merit along the search ({name})")
        figs.append(("merit-history.png", fig))
    for fname, fig in figs:
        path = report_dir / fname
        write_bytes_atomic(path, figure_bytes(fig, "png"))
        out.append(path)
    return out


def design_command(
    spec_file: Annotated[Path, typer.Argument(metavar="SPEC", help="Spec file (YAML).",
                                              show_default=False)],
    out: Annotated[Path, typer.Option(
        "--out", "-o", metavar="DESIGN.yaml",
        help="Write the design here as a stack file (read by spectrum and check).",
        show_default=False)],
    seed: Annotated[int, typer.Option(
        "--seed", metavar="N", help="Seed of the random restarts (same seed, same design).")] = 0,
    time_limit: Annotated[float, typer.Option(
        "--time-limit", metavar="S", help="Wall-time budget in seconds; the best design so far "
                                          "is kept.")] = 60.0,
    report: Annotated[Path | None, typer.Option(
        "--report", metavar="DIR", help="Write plots here: spectra with targets, R over "
                                        "wavelength x angle, index profile, merit history.",
        show_default=False)] = None,
    strategy: Annotated[str, typer.Option(
        "--strategy", metavar="auto|needle|evolution|refine",
        help="auto: needle, then gradual evolution if needed; refine: only refine the spec's "
             "start design.")] = "auto",
    json_out: JsonFlag = False,
) -> None:
    # 1. options, before any work
    out_target = check_output(out, ("yaml", "yml"), option="--out")
    if not (math.isfinite(time_limit) and time_limit > 0):
        raise InputError(f"--time-limit must be a number of seconds > 0, got {time_limit:g}")
    if seed < 0:
        raise InputError(f"--seed must be >= 0, got {seed}")
    if strategy not in STRATEGY_CHOICES:
        raise InputError(f"--strategy must be one of {', '.join(STRATEGY_CHOICES)}, "
                         f"got {strategy!r}")
    if report is not None:
        if report.exists() and not report.is_dir():
            raise InputError("--report must be a folder, got a file", file=str(report))
        from ..io.atomic import check_writable

        check_writable(report / "spectra.png" if report.is_dir() else report)
    require_file(spec_file, what="spec file")

    # 2. the spec (validated as a whole)
    from ..spec import load_spec

    spec = load_spec(spec_file)
    if not spec.materials:
        raise InputError("a design spec needs 'materials': the materials the optimiser may "
                         "use, e.g. materials: [TiO2, SiO2]", file=str(spec_file),
                         key="materials")

    # 3. the search, with progress on stderr
    from ..design import synthesize

    with Progress("designing", total=None, stop_on_interrupt=True) as progress:
        def show(entry):
            progress.note(f"step {entry['step']:3d}  {entry['stage']:<11s} "
                          f"layers {entry['layers']:3d}  total {entry['total_nm']:8.1f} nm  "
                          f"merit {entry['merit']:.5g}  {entry['elapsed_s']:6.1f} s")
            progress.update(status=f"merit {entry['merit']:.4g}, {entry['layers']} layers")

        result = synthesize(spec, seed=seed, time_limit_s=time_limit, strategy=strategy,
                            progress=show, stop=lambda: progress.stop_requested)

    # 4. the verdicts, on the spec's grid and four times finer
    from ..evaluate import evaluate_requirements

    coarse = evaluate_requirements(result.stack, spec, refine=1)
    fine = evaluate_requirements(result.stack, spec, refine=4)
    req_rows = _requirement_rows(coarse, fine)
    all_pass = all(r["pass"] for r in req_rows)

    # 5. outputs
    from ..io.stack_file import save_stack

    path, _ = out_target
    comment = (f"Designed by filmstack design from {spec_file.name} (seed {seed}): "
               f"{_layers(len(result.stack.layers))}, {result.stack.total_nm:.1f} nm, merit "
               f"{result.merit:.4g}; {result.message}.\n"
               f"Every requirement passes on the 4x finer grid: {'yes' if all_pass else 'no'}.")
    save_stack(result.stack, path, comment=comment)
    written = [path]
    if report is not None:
        written += _write_report(report, result, spec, spec_file)

    rows = layer_rows(result)
    if json_out:
        print_json({
            "merit": result.merit, "fine_merit": result.fine_merit,
            "layers": rows, "total_nm": result.stack.total_nm,
            "requirements": req_rows, "pass": all_pass, "success": result.success,
            "message": result.message, "seed": seed, "elapsed_s": result.elapsed_s,
            "evaluations": result.n_evaluations, "history": result.history,
            "not_optimised": [{"key": r.key, "reason": why} for r, why in result.skipped],
            "out": str(path), "files": [str(p) for p in written],
        })
    else:
        _print_tables(result, rows, coarse, fine, spec_file)
        for p in written:
            typer.echo(f"wrote {p}")
    cautions = [CAUTION_MODEL]
    if any(r.quantity in ("GD", "GDD") for r in spec.requirements) or \
            any(r.quantity == "R" and r.op == ">=" and r.limit >= 0.99 for r in spec.requirements):
        cautions.append(CAUTION_LASER)
    print_cautions(*cautions)
    if not all_pass:
        raise typer.Exit(EXIT_FAILED)


def _print_tables(result, rows, coarse, fine, spec_file: Path) -> None:
    stack = result.stack
    table = make_table(("#", "right"), "material", ("nm", "right"), ("QWOT", "right"), "")
    for row in rows:
        table.add_row(str(row["index"] + 1), row["material"], f"{row['nm']:.2f}",
                      f"{row['qwot']:.3f}", "fixed" if row["fixed"] else "")
    sub = stack.substrate.name + (f" ({stack.substrate_mm:g} mm)" if stack.substrate_mm else "")
    print_table(table, title=f"Design for {spec_file.name}: {_layers(len(rows))}, "
                             f"{stack.total_nm:.1f} nm on {sub} (layer 1 touches the substrate)",
                caption=f"QWOT at {stack.reference_nm:g} nm. Merit {result.merit:.4g} "
                        f"({result.message}); {result.elapsed_s:.1f} s.")
    rt = make_table(("#", "right"), "requirement", "at", ("value", "right"),
                    ("margin", "right"), "", ("value 4x", "right"), ("margin 4x", "right"), "")
    for i, (c, f) in enumerate(zip(coarse, fine)):
        req = c.requirement
        rt.add_row(str(i + 1), _short(req), _where(req), _display(req, c.value),
                   _display(req, c.margin, signed=True), "pass" if bool(np.asarray(c.passed)) else "FAIL",
                   _display(req, f.value), _display(req, f.margin, signed=True),
                   "pass" if bool(np.asarray(f.passed)) else "FAIL")
    skipped = ", ".join(r.key for r, _ in result.skipped)
    cap = ("Value: band mean at the worst angle (avg) or the worst sample (every); margin >= 0 "
           "passes. 4x: re-evaluated on a grid four times finer than the spec's sampling.")
    if skipped:
        cap += f" Not optimised (checked only): {skipped}."
    print_table(rt, title="Requirements", caption=cap)


def _layers(n: int) -> str:
    """``1 layer``, ``9 layers``."""
    return f"{n} layer" if n == 1 else f"{n} layers"


def _short(req) -> str:
    """``R <= 0.3% 420–680 nm avg`` (condition, band, average or every)."""
    lo, hi = req.band_nm
    band = f"{lo:g} nm" if lo == hi else f"{lo:g}–{hi:g} nm"
    cond = req.text or f"{req.op} {float(req.to_display(req.limit)):g}{req.unit}"
    return f"{req.quantity} {cond} {band} {'avg' if req.over == 'average' else 'every'}"


def _where(req) -> str:
    """``0, 45° mean`` (angles and polarisation; side for phase quantities)."""
    angles = ", ".join(f"{a:g}" for a in req.angles_deg) + "°"
    side = " transm." if req.side == "transmitted" and req.quantity != "colour" and \
        req.quantity not in ("R", "T", "A") else ""
    return f"{angles} {req.polarization}{side}"


def register(app: typer.Typer) -> None:
    """Add ``design`` to the app."""
    app.command("design", help=HELP, no_args_is_help=True)(design_command)
