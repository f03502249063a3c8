"""Figures of a compliance check: spectra against the spec with the Monte Carlo envelope, yield
per requirement, and the thickness sensitivity map.

Every function returns ``(Figure, Axes)`` without pyplot state; render with
:func:`filmstack.report.spectrum_plot.figure_bytes`. matplotlib is imported inside the functions.

A limit on every point is a solid line over its band with the forbidden side lightly shaded
(``<=``: above, ``>=``: below); a limit on the band average is a dashed line (single points may
cross it); an ``=`` target is a band of ± its tolerance. Each limit is labelled with the
requirement's number (1 = the first in the spec) and drawn red when it fails. The Monte Carlo envelope is the 5–95 percentile band of the trials' response at each
wavelength (darker) and the 1–99 band (lighter), around the nominal curve, in the curve's colour.
"""

from __future__ import annotations

import numpy as np

from .spectrum_plot import (DPI, LINESTYLES, PALETTE, WIDTH_IN, _STYLE, add_caption,
                            add_titles, band_wavelengths)

__all__ = ["plot_check_spectra", "plot_yield", "plot_sensitivity", "check_wavelengths",
           "ENVELOPE_TRIALS"]

#: Trials (the first ones of the run) drawn into the envelope.
ENVELOPE_TRIALS = 500

_QLABEL = {"R": "Reflectance R (%)", "T": "Transmittance T (%)", "A": "Absorptance A (%)",
           "phase": "Phase (deg)", "GD": "Group delay (fs)", "GDD": "GDD (fs²)"}
_QSCALE = {"R": 100.0, "T": 100.0, "A": 100.0, "phase": 180.0 / np.pi, "GD": 1.0, "GDD": 1.0}
_LIMIT = "#3b3b3b"
_FORBID = "#d1495b"
_PASS = "#2e8b57"
_FAIL = "#d1495b"


def check_wavelengths(requirements, *, material_range=None) -> np.ndarray:
    """The check report's plotting grid (nm): every band with 8 % of the span each side."""
    return band_wavelengths(requirements, pad=0.08, points=801, material_range=material_range,
                            min_span_fraction=0.1)


def _draw_limit(ax, req, scale, number, failed=False):
    """A limit over its band: solid with the forbidden side shaded for ``every`` point, dashed
    for a band average (which single points may cross), a ± band for ``=``; labelled with the
    requirement's number and red when it fails."""
    lo, hi = float(req.band_nm[0]), float(req.band_nm[1])
    single = lo == hi
    if single:
        x0, x1 = ax.get_xlim()
        w = 0.008 * (x1 - x0)
        lo, hi = lo - w, hi + w
    lim = req.limit * scale
    y0, y1 = ax.get_ylim()
    colour = _FAIL if failed else _LIMIT
    average = req.over == "average" and not single
    if req.op == "=":
        tol = req.tolerance * scale
        ax.fill_between([lo, hi], lim - tol, lim + tol, color=colour, alpha=0.14, lw=0, zorder=1)
        ax.plot([lo, hi], [lim, lim], color=colour, lw=1.2, ls=(0, (4, 2)), zorder=5)
    else:
        if not average:
            top, bottom = (max(y1, lim), lim) if req.op == "<=" else (lim, min(y0, lim))
            ax.fill_between([lo, hi], bottom, top, color=_FORBID, alpha=0.06, lw=0, zorder=1)
        ax.plot([lo, hi], [lim, lim], color=colour, lw=2.2 if not average else 1.8,
                ls="-" if not average else (0, (6, 2.5)), solid_capstyle="butt", zorder=5)
        if single:
            ax.plot([(lo + hi) / 2], [lim], marker="v" if req.op == "<=" else "^", ms=6,
                    color=colour, zorder=6)
    what = "avg " if average else ""
    text = f"{number}: {what}{req.op} {req.to_display(req.limit):g}{req.unit}"
    if req.op == "=":
        text += f" ± {req.to_display(req.tolerance):g}{req.unit}"
    ax.annotate(text + ("  FAIL" if failed else ""), (hi, lim), xytext=(3, 2),
                textcoords="offset points", fontsize=7.5, color=colour, ha="left",
                va="bottom", zorder=7, annotation_clip=False)
    ax.set_ylim(y0, y1)


def plot_check_spectra(stack, requirements, *, check=None, mc=None, wavelengths_nm=None,
                       envelope_trials: int = ENVELOPE_TRIALS, title=None, subtitle=None,
                       caption=None):
    """The quote's response with the spec's limits and, optionally, the Monte Carlo envelope.

    Parameters
    ----------
    stack
        The quoted :class:`~filmstack.stack.Stack`.
    requirements
        The spec's requirements (colour requirements are skipped).
    check
        Optional :class:`~filmstack.check.CheckResult`: failing requirements' limits are red.
    mc
        Optional :class:`~filmstack.check.YieldResult`: its first ``envelope_trials`` trials
        are drawn as percentile bands (R, T, A panels).
    wavelengths_nm
        Plot grid (W,), nm; default :func:`check_wavelengths`.

    Returns
    -------
    (Figure, array of Axes), one panel per quantity (R, T, A, phase, GD, GDD present).
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    from ..evaluate import _scale_n
    from ..response import phase_response, spectrum

    reqs_all = list(requirements)
    reqs = [r for r in reqs_all if r.quantity in _QLABEL]
    if not reqs:
        raise ValueError("no requirement on R, T, A, phase, GD or GDD to plot")
    failed = set()
    if check is not None:
        failed = {r.requirement.key for r in check.requirements if not bool(r.passed)}
    wl = (check_wavelengths(reqs, material_range=stack.range_nm)
          if wavelengths_nm is None else np.asarray(wavelengths_nm, dtype=float))
    order = [q for q in ("R", "T", "A", "phase", "GD", "GDD") if any(r.quantity == q
                                                                    for r in reqs)]
    env_d = env_s = None
    if mc is not None and mc.trials > 0:
        k = min(int(envelope_trials), mc.trials)
        env_d = mc.thicknesses_nm[:k]
        env_s = None if mc.index_scale is None else mc.index_scale[:k]
    base_idx = stack.layer_indices(wl) if env_s is not None else None

    with rc_context(_STYLE):
        fig = Figure(figsize=(WIDTH_IN + 2.2, 1.0 + 2.7 * len(order)), dpi=DPI,
                     layout="constrained")
        axes = fig.subplots(len(order), 1, sharex=True, squeeze=False)[:, 0]
        for ax, q in zip(axes, order):
            qreqs = [r for r in reqs if r.quantity == q]
            curves = []
            for r in qreqs:
                for a in r.angles_deg:
                    key = (float(a), r.polarization,
                           r.side if q in ("phase", "GD", "GDD") else "")
                    if key not in curves:
                        curves.append(key)
            angles_all = sorted({c[0] for c in curves})
            allv = []
            for a, pol, side in curves:
                colour = PALETTE[angles_all.index(a) % len(PALETTE)]
                if q in ("R", "T", "A"):
                    vals = np.asarray(getattr(spectrum(stack, wl, [a], pol), q))[0] * _QSCALE[q]
                    if env_d is not None:
                        trials = []
                        for i0 in range(0, env_d.shape[0], 100):
                            li = None if env_s is None else _scale_n(base_idx,
                                                                    env_s[i0:i0 + 100])
                            sp = spectrum(stack, wl, [a], pol, thicknesses_nm=env_d[i0:i0 + 100],
                                          layer_indices=li)
                            trials.append(np.asarray(getattr(sp, q))[:, 0, :])
                        tv = np.concatenate(trials) * _QSCALE[q]
                        p = np.percentile(tv, [1, 5, 95, 99], axis=0)
                        ax.fill_between(wl, p[0], p[3], color=colour, alpha=0.10, lw=0,
                                        zorder=2)
                        ax.fill_between(wl, p[1], p[2], color=colour, alpha=0.22, lw=0,
                                        zorder=2)
                        allv += [p[1], p[2]]
                else:
                    pr = phase_response(stack, wl, a, pol, side=side)
                    vals = {"phase": pr.phase_rad, "GD": pr.gd_fs,
                            "GDD": pr.gdd_fs2}[q] * _QSCALE[q]
                label = f"{a:g}°  {pol}" + (f"  {side}" if side else "")
                ax.plot(wl, vals, color=colour, linestyle=LINESTYLES.get(pol, "-"), lw=1.5,
                        label=label, zorder=4)
                allv.append(vals)
            v = np.concatenate(allv)
            lims = np.array([r.limit * _QSCALE[q] for r in qreqs])
            tols = np.array([r.tolerance * _QSCALE[q] for r in qreqs])
            lo = float(np.nanmin(np.r_[v, lims - tols]))
            hi = float(np.nanmax(np.r_[v, lims + tols]))
            if q in ("R", "T", "A"):
                lo, hi = max(lo, 0.0), min(hi, 100.0)
            if hi - lo < 1e-9:
                hi = lo + (1.0 if q in ("R", "T", "A") else max(1.0, abs(lo) * 0.1))
            pad = 0.08 * (hi - lo)
            ax.set_xlim(wl[0], wl[-1])
            ax.set_ylim(lo - pad if q not in ("R", "T", "A") or lo - pad > 0 else 0.0,
                        hi + pad if q not in ("R", "T", "A") else min(hi + pad, 100.5))
            # requirements drawn as the same line (s and p of a beam splitter with one limit)
            # get one line and one label "1, 2: ..." (two labels overprinted each other)
            drawn: dict = {}
            for r in qreqs:
                shape = (tuple(map(float, r.band_nm)), r.op, r.limit, r.tolerance, r.over)
                drawn.setdefault(shape, []).append(r)
            for group in drawn.values():
                _draw_limit(ax, group[0], _QSCALE[q],
                            ", ".join(str(reqs_all.index(r) + 1) for r in group),
                            failed=any(r.key in failed for r in group))
            ax.set_ylabel(_QLABEL[q])
            handles, labels = ax.get_legend_handles_labels()
            if env_d is not None and q in ("R", "T", "A"):
                from matplotlib.patches import Patch
                handles += [Patch(color="#777777", alpha=0.35),
                            Patch(color="#777777", alpha=0.12)]
                labels += [f"Monte Carlo 5–95 % ({env_d.shape[0]} trials)", "1–99 %"]
            ax.legend(handles, labels, loc="upper left", bbox_to_anchor=(1.1, 1.0),
                      title="angle  polarisation", title_fontsize=8, borderaxespad=0.0)
        axes[-1].set_xlabel("Wavelength (nm, vacuum)")
        add_titles(axes[0], title, subtitle)
        add_caption(fig, caption)
    return fig, axes


def _req_label(number, req):
    """Short label: ``1: R <= 0.35% avg 420–680 nm``."""
    lo, hi = req.band_nm
    where = f"at {lo:g} nm" if lo == hi else \
        f"{'avg' if req.over == 'average' else 'every'} {lo:g}–{hi:g} nm"
    return f"{number}: {req.quantity} {req.text} {where}"


def plot_yield(mc, *, title=None, subtitle=None, caption=None):
    """Monte Carlo pass fraction of each requirement and the overall yield, with their exact
    (Clopper–Pearson) confidence intervals.

    Returns
    -------
    (Figure, Axes)
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    def lo_text(v):
        return max(v - 1.5, 8.0)

    rows = [("all requirements (yield)", mc.yield_, mc.ci)]
    rows += [(_req_label(i + 1, r.requirement), r.pass_fraction, r.ci)
             for i, r in enumerate(mc.requirements)]
    n = len(rows)
    with rc_context(_STYLE):
        fig = Figure(figsize=(WIDTH_IN, 1.3 + 0.42 * n), dpi=DPI, layout="constrained")
        ax = fig.subplots()
        y = np.arange(n)[::-1]
        vals = np.array([r[1] for r in rows]) * 100
        lo = np.array([r[2][0] for r in rows]) * 100
        hi = np.array([r[2][1] for r in rows]) * 100
        colours = [_PASS if v >= 99.95 else ("#edae49" if v >= 50 else _FAIL) for v in vals]
        colours[0] = "#1f5f8b"
        ax.barh(y, vals, color=colours, height=0.62, zorder=3)
        ax.errorbar(vals, y, xerr=[vals - lo, hi - vals], fmt="none", ecolor="#2b2b2b",
                    capsize=3, lw=1, zorder=4)
        for yi, v, h in zip(y, vals, hi):
            inside = h > 86
            ax.text(h + 1.2 if not inside else lo_text(v), yi, f"{v:.1f} %", va="center",
                    ha="left" if not inside else "right", fontsize=8.5,
                    color="#2b2b2b" if not inside else "white", zorder=5)
        ax.set_yticks(y, [r[0] for r in rows])
        ax.set_xlim(0, 100)
        ax.set_xlabel(f"Trials passing (%), {mc.trials} trials, seed {mc.seed}; bars: "
                      f"{mc.confidence * 100:g} % interval (Clopper–Pearson)")
        ax.grid(axis="y", visible=False)
        add_titles(ax, title, subtitle)
        add_caption(fig, caption)
    return fig, ax


def plot_sensitivity(sens, stack, *, title=None, subtitle=None, caption=None):
    """Map of each requirement's thickness sensitivity: the change of its value for +1 % of
    each layer's thickness, each row scaled to its largest entry (units differ between rows;
    the row's scale is printed at its right).

    Returns
    -------
    (Figure, Axes)
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    L = len(stack.layers)
    rows = [s for s in sens if s.d_value_d_nm.size == L]
    if not rows or L == 0:
        raise ValueError("nothing to plot: no layers or no sensitivities")
    M = np.array([s.per_pct * _QSCALE.get(s.requirement.quantity, 1.0) for s in rows])
    scale = np.max(np.abs(M), axis=1)
    scale[scale == 0] = 1.0
    with rc_context(_STYLE):
        fig = Figure(figsize=(WIDTH_IN, 1.6 + 0.45 * len(rows)), dpi=DPI, layout="constrained")
        ax = fig.subplots()
        im = ax.imshow(M / scale[:, None], aspect="auto", cmap="RdBu_r", vmin=-1, vmax=1,
                       interpolation="nearest")
        ax.set_yticks(range(len(rows)), [_req_label(sens.index(s) + 1, s.requirement)
                                         for s in rows])
        if L <= 16:
            for i in range(len(rows)):
                for j in range(L):
                    x = M[i, j] / scale[i]
                    ax.text(j, i, f"{M[i, j]:+.2g}", ha="center", va="center", fontsize=7,
                            color="white" if abs(x) > 0.6 else "#2b2b2b")
        step = max(1, L // 20)
        names = [l.material.name for l in stack.layers]
        ax.set_xticks(range(0, L, step), [f"{i + 1}\n{names[i]}" if L <= 16 else str(i + 1)
                                          for i in range(0, L, step)])
        ax.set_xlabel("Layer (1 = next to the substrate); cells: value change for +1 % of "
                      "the layer's thickness")
        ax.grid(False)
        for i, s in enumerate(rows):
            unit = s.requirement.unit.strip() or "units"
            ax.text(1.01, i, f"scale {scale[i]:.3g} {unit}", transform=ax.get_yaxis_transform(),
                    va="center", fontsize=7.5, color="#4a4a4a")
        cb = fig.colorbar(im, ax=ax, shrink=0.9, pad=0.12)
        cb.set_label("value change for +1 % thickness\n(each row / its scale)", fontsize=8)
        add_titles(ax, title, subtitle)
        add_caption(fig, caption)
    return fig, ax
