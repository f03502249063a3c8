"""``filmstack check STACK --spec SPEC``: is a quoted stack compliant, and how many runs will pass?

Prints a table of every requirement (value, limit, signed margin, worst wavelength and angle,
verdict), the spec's limits, the layers each requirement is most sensitive to, and — when the
spec or the options give tolerances — the Monte Carlo yield with its confidence interval. With
``--compare OTHER`` it also compares the stack with a second one (spectral differences, ΔE2000).
``--json`` prints the result as JSON (keys ``pass``, ``requirements``, ``yield``, …).

Exit codes: 0 every requirement and limit passes (and the yield reaches ``--min-yield`` if
given); 1 something does not pass; 2 bad input; 3 internal error.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer

from ..errors import InputError
from ._common import (CAUTION_LASER, CAUTION_MODEL, EXIT_FAILED, JsonFlag, Progress, make_table,
                      print_cautions, print_json, print_table, require_file)

__all__ = ["register", "check_command", "parse_pct_option", "DEFAULT_TRIALS"]

#: Monte Carlo trials when the spec or the options give tolerances and --trials is not given.
DEFAULT_TRIALS = 2000

HELP = """\
Check a quoted stack against a spec: every requirement with its margin, the spec's limits, the layers each requirement is most sensitive to, and the production yield under deposition errors.

A margin is positive when the requirement passes (in % for R, T, A). Each requirement is evaluated on the spec's sampling and on a grid 4x finer, and the worse is reported. The yield is the fraction of Monte Carlo trials that pass every requirement, with an exact (Clopper-Pearson) confidence interval; errors come from the spec's tolerances or from --thickness-pct/--rate-pct/--index-pct. Exit code 0 when everything passes, 1 when anything fails, 2 on bad input.

Examples:

\b
    filmstack check examples/quote-lens-ar-pass.yaml --spec examples/spec-lens-ar.yaml
    filmstack check examples/quote-lens-ar-fail.yaml --spec examples/spec-lens-ar.yaml --json
    filmstack check examples/quote-lens-ar-pass.yaml --spec examples/spec-lens-ar.yaml \\
        --trials 10000 --seed 7 --report check-report
    filmstack check examples/quote-lens-ar-pass.yaml --spec examples/spec-lens-ar.yaml \\
        --compare examples/quote-lens-ar-asbuilt.yaml
"""


def parse_pct_option(values: list[str] | None, option: str) -> dict | None:
    """``--rate-pct 0.5`` (every material) or ``--rate-pct TiO2=0.5`` (repeatable) → dict."""
    if not values:
        return None
    out: dict = {}
    for v in values:
        for part in str(v).split(","):
            part = part.strip()
            if not part:
                continue
            name, sep, num = part.rpartition("=")
            name = name.strip() if sep else "*"
            try:
                x = float(num)
            except ValueError:
                raise InputError(f"{option} takes PERCENT or MATERIAL=PERCENT, got {part!r}") \
                    from None
            if not (math.isfinite(x) and 0 <= x <= 50):
                raise InputError(f"{option}: a 1σ percentage must be in 0–50, got {part!r}")
            if not name:
                raise InputError(f"{option}: a material name is missing in {part!r}")
            out[name] = x
    return out


def _fmt(req, x, *, signed=False, digits=4):
    if x is None or not math.isfinite(float(x)):
        return "-"
    v = float(req.to_display(x))
    unit = req.unit.strip()
    text = f"{v:+.{digits}g}" if signed else f"{v:.{digits}g}"
    return f"{text} {unit}".rstrip() if unit != "%" else f"{text} %"


def _limit_text(req):
    lim = _fmt(req, req.limit)
    if req.op == "=":
        return f"= {lim} ± {_fmt(req, req.tolerance)}"
    return f"{req.op} {lim}"


def _where(res):
    parts = []
    if math.isfinite(float(res.worst_wavelength_nm)):
        parts.append(f"{float(res.worst_wavelength_nm):g} nm")
    elif res.requirement.quantity == "colour":
        pass
    elif res.requirement.band_nm[0] != res.requirement.band_nm[1]:
        parts.append("band mean")
    else:
        parts.append(f"{res.requirement.band_nm[0]:g} nm")
    if len(res.requirement.angles_deg) > 1 or res.requirement.angles_deg[0] != 0 or not parts:
        parts.append(f"{float(res.worst_angle_deg):g}°")
    return ", ".join(parts)


def _requirement_table(check, title):
    table = make_table("#", "requirement", ("value", "right"), ("limit", "right"),
                       ("margin", "right"), "worst at", "verdict", title=title)
    for i, r in enumerate(check.requirements):
        req = r.requirement
        lo, hi = req.band_nm
        angles = "/".join(f"{a:g}" for a in req.angles_deg)
        where = f"at {lo:g} nm" if lo == hi else \
            f"{'avg' if req.over == 'average' else 'every'} {lo:g}–{hi:g} nm"
        if req.quantity == "colour":
            where = "(CIELAB)"
        what = f"{req.quantity} {where}, {angles}°, {req.polarization}"
        if req.quantity in ("phase", "GD", "GDD", "colour"):
            what += f", {req.side}"
        table.add_row(str(i + 1), what, _fmt(req, r.value), _limit_text(req),
                      _fmt(req, r.margin, signed=True), _where(r),
                      "pass" if r.passed else "FAIL")
    return table


def _limits_table(check):
    table = make_table("limit", ("value", "right"), ("limit", "right"), "verdict", "detail",
                       title="Limits")
    for l in check.limits:
        if l.name == "materials":
            table.add_row("materials", f"{l.value:g} off-list", "0", "pass" if l.passed else
                          "FAIL", l.detail)
        else:
            op = ">=" if l.name == "thinnest_nm" else "<="
            unit = "" if l.name == "layers" else " nm"
            table.add_row(l.name, f"{l.value:.6g}{unit}", f"{op} {l.limit:g}{unit}",
                          "pass" if l.passed else "FAIL", l.detail)
    return table


def _sensitivity_table(sens, stack, top):
    table = make_table("#", "requirement", "most sensitive layers (per nm; per +1 % thickness)",
                       title="Thickness sensitivity")
    for i, s in enumerate(sens):
        req = s.requirement
        unit = req.unit.strip()
        items = []
        if s.d_value_d_nm.size and np.max(np.abs(s.d_value_d_nm)) < 1e-12:
            table.add_row(str(i + 1), f"{req.quantity} {req.text}",
                          "stationary: no first-order change with any layer")
            continue
        for j in s.ranking[:top]:
            per_nm = float(req.to_display(s.d_value_d_nm[j]))
            per_pct = float(req.to_display(s.per_pct[j]))
            items.append(f"L{j + 1} {stack.layers[j].material.name}: {per_nm:+.3g} {unit}/nm; "
                         f"{per_pct:+.3g} {unit}")
        table.add_row(str(i + 1), f"{req.quantity} {req.text}", "\n".join(items) or "-")
    return table


def _yield_table(mc):
    table = make_table("#", "requirement", ("pass %", "right"), ("interval %", "right"),
                       ("p5", "right"), ("median", "right"), ("p95", "right"),
                       title=(f"Monte Carlo yield {100 * mc.yield_:.1f} % "
                              f"[{100 * mc.ci[0]:.1f}–{100 * mc.ci[1]:.1f}], {mc.trials} "
                              f"trial{'' if mc.trials == 1 else 's'}, "
                              f"seed {mc.seed}"),
                       caption=f"{mc.confidence * 100:g} % exact (Clopper–Pearson) intervals; "
                               "percentiles over the trials")
    for i, r in enumerate(mc.requirements):
        req = r.requirement
        table.add_row(str(i + 1), f"{req.quantity} {req.text}", f"{100 * r.pass_fraction:.1f}",
                      f"{100 * r.ci[0]:.1f}–{100 * r.ci[1]:.1f}", _fmt(req, r.percentiles[5.0]),
                      _fmt(req, r.percentiles[50.0]), _fmt(req, r.percentiles[95.0]))
    return table


def _tolerance_text(tol):
    parts = [f"thickness {tol.thickness_pct:g} % per layer"]
    for what, table in (("rate", tol.rate_pct), ("index n", tol.index_pct)):
        items = [f"{'every material' if k == '*' else k} {v:g} %" for k, v in table.items() if v]
        if items:
            parts.append(f"{what} " + ", ".join(items))
    return "1σ errors: " + "; ".join(parts)


def check_command(
    stack_file: Annotated[Path, typer.Argument(metavar="STACK", show_default=False,
                                               help="The quoted stack file (YAML).")],
    spec_file: Annotated[Path, typer.Option("--spec", "-s", metavar="SPEC", show_default=False,
                                            help="The spec file (YAML).")],
    trials: Annotated[int | None, typer.Option(
        "--trials", "-n", metavar="N", show_default=False,
        help=f"Monte Carlo trials; 0 for none [default: {DEFAULT_TRIALS} when tolerances are "
             "given, else 0].")] = None,
    seed: Annotated[int, typer.Option("--seed", metavar="N",
                                      help="Random seed of the Monte Carlo.")] = 0,
    thickness_pct: Annotated[float | None, typer.Option(
        "--thickness-pct", metavar="PCT", show_default=False,
        help="Random thickness error per layer, 1σ in % (overrides the spec).")] = None,
    rate_pct: Annotated[list[str] | None, typer.Option(
        "--rate-pct", metavar="[MATERIAL=]PCT", show_default=False,
        help="Systematic rate error per material, 1σ in %; repeatable (overrides the spec).")]
    = None,
    index_pct: Annotated[list[str] | None, typer.Option(
        "--index-pct", metavar="[MATERIAL=]PCT", show_default=False,
        help="Index (n) error per material, 1σ in %; repeatable (overrides the spec).")] = None,
    confidence: Annotated[float, typer.Option(
        "--confidence", metavar="C", help="Level of the yield's confidence interval.")] = 0.95,
    min_yield: Annotated[float | None, typer.Option(
        "--min-yield", metavar="FRACTION", show_default=False,
        help="Also fail (exit 1) when the yield is below this fraction, e.g. 0.9.")] = None,
    compare: Annotated[Path | None, typer.Option(
        "--compare", metavar="OTHER_STACK", show_default=False,
        help="Compare with another stack (e.g. the vendor's as-built model): spectral "
             "differences, ΔE2000, both verdicts. The exit code stays that of STACK.")] = None,
    top: Annotated[int, typer.Option("--top", metavar="K",
                                     help="Layers listed per requirement in the sensitivity "
                                          "table.")] = 3,
    report: Annotated[Path | None, typer.Option(
        "--report", metavar="DIR", show_default=False,
        help="Write figures (spectra with limits and Monte Carlo envelope, yield, sensitivity) "
             "and check.json into this folder.")] = None,
    json_out: JsonFlag = False,
) -> None:
    # 1. options, before any work
    from ..check.montecarlo import MAX_TRIALS

    if trials is not None and not 0 <= trials <= MAX_TRIALS:
        raise InputError(f"--trials must be from 0 to {MAX_TRIALS:,}, got {trials}")
    if seed < 0:
        raise InputError(f"--seed must be >= 0, got {seed}")
    if not 0 < confidence < 1:
        raise InputError(f"--confidence must be between 0 and 1, got {confidence:g}")
    if min_yield is not None and not 0 <= min_yield <= 1:
        raise InputError(f"--min-yield is a fraction 0–1, got {min_yield:g}")
    if top < 1:
        raise InputError(f"--top must be >= 1, got {top}")
    if thickness_pct is not None and not (math.isfinite(thickness_pct)
                                          and 0 <= thickness_pct <= 50):
        raise InputError(f"--thickness-pct must be in 0–50, got {thickness_pct:g}")
    rate_opt = parse_pct_option(rate_pct, "--rate-pct")
    index_opt = parse_pct_option(index_pct, "--index-pct")
    if report is not None:
        if report.exists() and not report.is_dir():
            raise InputError("--report must be a folder, and this is a file", file=str(report))
        parent = report if report.exists() else report.parent
        from ..io.atomic import check_writable
        check_writable(parent / "check.json")
    require_file(stack_file, what="stack file")
    require_file(spec_file, what="spec file")
    if compare is not None:
        require_file(compare, what="stack file")

    # 2. the files
    from ..io.stack_file import load_stack
    from ..spec import Tolerances, load_spec

    spec = load_spec(spec_file)
    stack = load_stack(stack_file)
    other = load_stack(compare) if compare is not None else None
    for st, f in ((stack, stack_file),) + (((other, compare),) if other is not None else ()):
        for req in spec.requirements:
            for m in st.materials:
                lo, hi = m.range_nm
                if req.band_nm[0] < lo or req.band_nm[1] > hi:
                    raise InputError(f"material '{m.name}' has data from {lo:g} to {hi:g} nm, "
                                     f"but {req.key} of {spec_file} asks for "
                                     f"{req.band_nm[0]:g}–{req.band_nm[1]:g} nm", file=str(f))

    tol = spec.tolerances
    if thickness_pct is not None or rate_opt is not None or index_opt is not None:
        tol = Tolerances(
            thickness_pct=tol.thickness_pct if thickness_pct is None else thickness_pct,
            rate_pct=tol.rate_pct if rate_opt is None else rate_opt,
            index_pct=tol.index_pct if index_opt is None else index_opt)
    n_trials = trials if trials is not None else (0 if tol.is_zero else DEFAULT_TRIALS)

    # 3. the work
    from ..check import check_stack, compare_stacks, monte_carlo, sensitivities

    verdict = check_stack(stack, spec)
    sens = sensitivities(stack, spec) if stack.layers else []
    mc = None
    if n_trials > 0:
        with Progress("Monte Carlo", total=n_trials, stop_on_interrupt=True) as progress:
            def tick(done, total):
                progress.update(done, status=f"{done}/{total} trials")
                return progress.stop_requested
            mc = monte_carlo(stack, spec, trials=n_trials, seed=seed, tolerances=tol,
                             confidence=confidence, progress=tick,
                             block=max(100, min(1000, n_trials // 20 or 1)))
    cmp = compare_stacks(stack, other, spec) if other is not None else None

    passed = verdict.passed
    yield_ok = True
    if min_yield is not None and mc is not None:
        yield_ok = mc.yield_ >= min_yield
    elif min_yield is not None and mc is None:
        raise InputError("--min-yield needs a Monte Carlo run: give tolerances (in the spec or "
                         "with --thickness-pct) or --trials N")

    result = {
        "pass": bool(passed and yield_ok),
        "stack": str(stack_file), "spec": str(spec_file),
        **{k: v for k, v in verdict.to_dict().items() if k != "pass"},
        "requirements_pass": bool(passed),
        "sensitivity": [s.to_dict(stack, top=None) for s in sens],
        "yield": None if mc is None else mc.to_dict(),
    }
    if min_yield is not None:
        result["min_yield"] = min_yield
        result["yield_pass"] = bool(yield_ok)
    if cmp is not None:
        result["compare"] = {"other": str(compare), **cmp.to_dict()}

    # 4. report files (only after everything succeeded)
    written = []
    if report is not None:
        written = _write_report(report, stack, spec, verdict, sens, mc, result, stack_file,
                                spec_file)

    # 5. the answer
    if json_out:
        print_json(result)
    else:
        _print_human(stack, spec, verdict, sens, mc, cmp, tol, top, stack_file, spec_file,
                     compare, passed, yield_ok, min_yield)
        for p in written:
            typer.echo(f"wrote {p}")
        cautions = [CAUTION_MODEL]
        if any(r.quantity in ("GD", "GDD") for r in spec.requirements) or \
                any(r.quantity == "R" and r.op == ">=" and r.limit >= 0.99
                    for r in spec.requirements):
            cautions.append(CAUTION_LASER)
        print_cautions(*cautions)
    if not (passed and yield_ok):
        raise typer.Exit(EXIT_FAILED)


def _print_human(stack, spec, verdict, sens, mc, cmp, tol, top, stack_file, spec_file, compare,
                 passed, yield_ok, min_yield):
    word = "PASS" if passed else "FAIL"
    title = (f"{Path(stack_file).name} against {Path(spec_file).name}: {word} "
             f"({len(stack.layers)} layer{'' if len(stack.layers) == 1 else 's'}, "
             f"{stack.total_nm:.1f} nm)")
    print_table(_requirement_table(verdict, title))
    if verdict.limits:
        print_table(_limits_table(verdict))
    for note in verdict.notes:
        typer.echo(f"note: {note}")
    if sens:
        print_table(_sensitivity_table(sens, stack, top))
    if mc is not None:
        print_table(_yield_table(mc))
        typer.echo(_tolerance_text(mc.tolerances))
        if mc.interrupted:
            typer.echo(f"note: stopped after {mc.trials} of {mc.requested} trials")
        for note in mc.notes:
            typer.echo(f"note: {note}")
        if min_yield is not None:
            typer.echo(f"yield {100 * mc.yield_:.1f} % "
                       f"{'reaches' if yield_ok else 'is below'} --min-yield "
                       f"{100 * min_yield:g} %")
    if cmp is not None:
        table = make_table("quantity", ("max |Δ| %", "right"), "at", ("RMS Δ %", "right"),
                           title=f"{Path(compare).name} minus {Path(stack_file).name}")
        for q, s in cmp.summary.items():
            table.add_row(q, f"{100 * s['max_abs_diff']:.4g}",
                          f"{s['wavelength_nm']:g} nm, {s['angle_deg']:g}°",
                          f"{100 * s['rms_diff']:.4g}")
        if cmp.delta_e is not None:
            for a, de in zip(cmp.angle_deg, cmp.delta_e):
                table.add_row("ΔE2000 reflected (D65, 2°)", f"{float(de):.3g}", f"{a:g}°", "")
        print_table(table)
        verdict_b = "PASS" if cmp.check_b.passed else "FAIL"
        typer.echo(f"{Path(compare).name} against {Path(spec_file).name}: {verdict_b}")
        for r in cmp.check_b.requirements:
            if not r.passed:
                typer.echo(f"  {r.requirement.key} fails: {_fmt(r.requirement, r.value)} "
                           f"(margin {_fmt(r.requirement, r.margin, signed=True)})")
        for note in cmp.notes:
            typer.echo(f"note: {note}")
    typer.echo(f"verdict: {'PASS' if passed and yield_ok else 'FAIL'}")


def _write_report(folder, stack, spec, verdict, sens, mc, result, stack_file, spec_file):
    from ..io.atomic import write_bytes_atomic
    from ..io.json_out import dumps_json
    from ..report.check_plots import plot_check_spectra, plot_sensitivity, plot_yield
    from ..report.spectrum_plot import figure_bytes

    caption = ("filmstack: ideal homogeneous films with the given optical constants; "
               "verify with measurement.")
    sub = f"{Path(stack_file).name} against {Path(spec_file).name}: " + \
        ("PASS" if verdict.passed else "FAIL")
    files = []
    plottable = [r for r in spec.requirements if r.quantity != "colour"]
    if plottable:
        fig, _ = plot_check_spectra(stack, plottable, check=verdict, mc=mc,
                                    title="Spectra against the spec", subtitle=sub,
                                    caption=caption)
        files.append(("spectra.png", figure_bytes(fig, "png")))
    if mc is not None:
        fig, _ = plot_yield(mc, title="Production yield (Monte Carlo)",
                            subtitle=_tolerance_text(mc.tolerances).replace("1σ errors: ", ""),
                            caption=caption)
        files.append(("yield.png", figure_bytes(fig, "png")))
    if sens:
        fig, _ = plot_sensitivity(sens, stack, title="Thickness sensitivity",
                                  subtitle=sub, caption=caption)
        files.append(("sensitivity.png", figure_bytes(fig, "png")))
    files.append(("check.json", (dumps_json(result, indent=2) + "\n").encode()))
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for name, data in files:
        write_bytes_atomic(folder / name, data)
        written.append(folder / name)
    return written


def register(app: typer.Typer) -> None:
    """Add ``check`` to the app."""
    app.command("check", help=HELP, no_args_is_help=True)(check_command)
