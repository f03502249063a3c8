"""Figures of a design: spectra against the spec's targets, R over wavelength × angle, the index
profile, and the merit along the search.

Every function returns ``(Figure, Axes)`` without pyplot state (see :mod:`filmstack.report`);
render with :func:`filmstack.report.figure_bytes`. matplotlib is imported inside the functions.

Targets are drawn the same way everywhere: the band of a requirement is a thick line at its limit
with the forbidden side lightly shaded (``<=``: above, ``>=``: below); an ``=`` target is a band of
± its tolerance. R, T, A are in percent, GD in fs, GDD in fs², phase in degrees.
"""

from __future__ import annotations

import numpy as np

from .spectrum_plot import (DPI, LINESTYLES, PALETTE, WIDTH_IN, _STYLE, add_caption,
                            add_titles, band_wavelengths)

__all__ = ["plot_design_spectra", "plot_reflectance_map", "plot_index_profile",
           "plot_merit_history", "design_wavelengths"]

_QLABEL = {"R": "Reflectance R (%)", "T": "Transmittance T (%)", "A": "Absorptance A (%)",
           "phase": "Phase (deg)", "GD": "Group delay (fs)", "GDD": "GDD (fs²)"}
_QSCALE = {"R": 100.0, "T": 100.0, "A": 100.0, "phase": 180.0 / np.pi, "GD": 1.0, "GDD": 1.0}
_TARGET = "#3b3b3b"
_FORBID = "#d1495b"


def design_wavelengths(requirements, *, material_range=None) -> np.ndarray:
    """The design report's plotting grid (nm): every band with 10 % of the span each side."""
    return band_wavelengths(requirements, material_range=material_range)


def _draw_target(ax, req, scale):
    """Draw one requirement: ``every`` as a thick limit line with the forbidden side shaded,
    ``average`` as a dash-dot line (the band mean must stay on its side, single points may
    cross it), ``=`` as a band of ± the tolerance; each labelled at its right end."""
    lo, hi = float(req.band_nm[0]), float(req.band_nm[1])
    if lo == hi:
        lo, hi = lo - 1.0, hi + 1.0
    lim = req.limit * scale
    y0, y1 = ax.get_ylim()
    unit = req.unit.strip()
    unit = unit if unit == "%" else (" " + unit if unit else "")
    text = f"{'mean ' if req.over == 'average' else ''}{req.op} {req.to_display(req.limit):g}"
    if req.op == "=":
        tol = req.tolerance * scale
        ax.fill_between([lo, hi], lim - tol, lim + tol, color=_TARGET, alpha=0.10, lw=0,
                        zorder=1)
        ax.plot([lo, hi], [lim, lim], color=_TARGET, lw=1.0, ls=(0, (4, 2)), zorder=3)
        text += f" ± {req.to_display(req.tolerance):g}"
    elif req.over == "average":
        ax.plot([lo, hi], [lim, lim], color=_TARGET, lw=1.6, ls=(0, (6, 2, 1, 2)), zorder=3)
    else:
        if req.op == "<=":
            ax.fill_between([lo, hi], lim, max(y1, lim), color=_FORBID, alpha=0.08, lw=0,
                            zorder=1)
        else:
            ax.fill_between([lo, hi], min(y0, lim), lim, color=_FORBID, alpha=0.08, lw=0,
                            zorder=1)
        ax.plot([lo, hi], [lim, lim], color=_TARGET, lw=2.2, solid_capstyle="butt", zorder=3)
    text += unit
    ax.annotate(text, (hi, lim), xytext=(3, 2), textcoords="offset points", fontsize=7.5,
                color=_TARGET, ha="left", va="bottom", zorder=5, annotation_clip=False)
    ax.set_ylim(y0, y1)


def _draw_band_means(ax, wl, curves_by_angle, reqs, scale):
    """Short dotted lines at the achieved band mean of every ``average`` requirement."""
    for r in reqs:
        if r.over != "average" or r.band_nm[0] == r.band_nm[1]:
            continue
        lo, hi = r.band_nm
        inside = (wl >= lo) & (wl <= hi)
        for key, (vals, colour) in curves_by_angle.items():
            if key[0] not in [float(a) for a in r.angles_deg] or key[1] != r.polarization:
                continue
            mean = np.trapezoid(vals[inside], wl[inside]) / (wl[inside][-1] - wl[inside][0])
            ax.plot([lo, hi], [mean, mean], color=colour, lw=1.0, ls=(0, (1, 1.5)), zorder=3)


def plot_design_spectra(stack, requirements, *, wavelengths_nm=None, title=None, subtitle=None,
                        caption=None):
    """The design's response with the spec's targets, one panel per quantity.

    Parameters
    ----------
    stack
        The design (:class:`~filmstack.stack.Stack`).
    requirements
        The spec's requirements (colour requirements are skipped).
    wavelengths_nm
        Plot grid (W,), nm; default :func:`design_wavelengths`.
    title, subtitle, caption
        Texts as in :func:`~filmstack.report.plot_spectrum`.

    Returns
    -------
    (Figure, array of Axes), one panel per quantity present (R, T, A, phase, GD, GDD), each
    showing every (angle, polarisation) the requirements on it name.
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    from ..response import phase_response, spectrum

    reqs = [r for r in requirements if r.quantity in _QLABEL]
    if not reqs:
        raise ValueError("no requirement on R, T, A, phase, GD or GDD to plot")
    wl = design_wavelengths(reqs) if wavelengths_nm is None else np.asarray(wavelengths_nm, float)
    order = [q for q in ("R", "T", "A", "phase", "GD", "GDD") if any(r.quantity == q for r in reqs)]
    with rc_context(_STYLE):
        fig = Figure(figsize=(WIDTH_IN, 0.9 + 2.6 * len(order)), dpi=DPI, layout="constrained")
        axes = fig.subplots(len(order), 1, sharex=True, squeeze=False)[:, 0]
        for ax, q in zip(axes, order):
            qreqs = [r for r in reqs if r.quantity == q]
            curves = []                     # (angle, pol, side)
            for r in qreqs:
                for a in r.angles_deg:
                    key = (float(a), r.polarization, r.side if q in ("phase", "GD", "GDD")
                           else "")
                    if key not in curves:
                        curves.append(key)
            angles_all = sorted({c[0] for c in curves})
            allv = []
            drawn = {}
            for a, pol, side in curves:
                colour = PALETTE[angles_all.index(a) % len(PALETTE)]
                if q in ("R", "T", "A"):
                    sp = spectrum(stack, wl, [a], pol)
                    vals = np.asarray(getattr(sp, q))[0] * _QSCALE[q]
                else:
                    pr = phase_response(stack, wl, a, pol, side=side)
                    vals = {"phase": pr.phase_rad, "GD": pr.gd_fs, "GDD": pr.gdd_fs2}[q] \
                        * _QSCALE[q]
                label = f"{a:g}°  {pol}" + (f"  {side}" if side else "")
                ax.plot(wl, vals, color=colour, linestyle=LINESTYLES.get(pol, "-"), lw=1.5,
                        label=label, zorder=4)
                allv.append(vals)
                drawn[(a, pol)] = (vals, colour)
            ax.set_ylim(*_panel_limits(q, wl, allv, qreqs))
            for r in qreqs:
                _draw_target(ax, r, _QSCALE[q])
            if q in ("R", "T", "A") and any(r.over == "average" for r in qreqs):
                _draw_band_means(ax, wl, drawn, qreqs, _QSCALE[q])
                ax.plot([], [], color="#6b6b6b", lw=1.0, ls=(0, (1, 1.5)),
                        label="achieved band mean")
            ax.set_ylabel(_QLABEL[q])
            ax.set_xlim(wl[0], wl[-1])
            ax.legend(loc="best", title="angle  polarisation", title_fontsize=8,
                      ncols=1 if len(curves) <= 5 else 2)
        axes[-1].set_xlabel("Wavelength (nm, vacuum)")
        add_titles(axes[0], title, subtitle)
        add_caption(fig, caption)
    return fig, axes


def _panel_limits(q, wl, curves, reqs):
    """Vertical range from the values inside the requirement bands and the limits (± tolerance),
    so that a target is readable even when the curve swings far outside its bands."""
    scale = _QSCALE[q]
    inside = np.zeros(wl.size, bool)
    marks = []
    for r in reqs:
        lo, hi = r.band_nm
        inside |= (wl >= lo - 1e-9) & (wl <= hi + 1e-9)
        marks += [r.limit * scale - r.tolerance * scale, r.limit * scale + r.tolerance * scale]
    vals = np.concatenate([c[inside] for c in curves] + [np.asarray(marks)])
    vals = vals[np.isfinite(vals)]
    vmin, vmax = float(vals.min()), float(vals.max())
    span = vmax - vmin
    if q in ("R", "T", "A"):
        span = max(span, 0.5)
    elif span <= 0:
        span = max(abs(vmax), 1.0)
    lo, hi = vmin - 0.3 * span, vmax + 0.3 * span
    if q in ("R", "T", "A"):
        lo, hi = max(lo, 0.0), min(hi, 100.0)
    return lo, hi


def plot_reflectance_map(stack, wavelengths_nm, angles_deg, polarization: str = "mean", *,
                         requirements=(), quantity: str = "R", title=None, caption=None):
    """R (or T) in percent over wavelength × angle of incidence as an image.

    Parameters
    ----------
    stack
        The design.
    wavelengths_nm, angles_deg
        Grids (W,) nm and (A,) degrees.
    polarization
        's', 'p' or 'mean'.
    requirements
        Requirements on R, T or A are outlined (band × angle span) and labelled.
    quantity
        'R' or 'T'.

    Returns
    -------
    (Figure, Axes)
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure
    from matplotlib import patheffects
    from matplotlib.patches import Rectangle

    from ..response import spectrum

    wl = np.asarray(wavelengths_nm, float)
    ang = np.asarray(angles_deg, float)
    vals = 100.0 * np.asarray(getattr(spectrum(stack, wl, ang, polarization), quantity))
    vmax = max(float(np.nanmax(vals)), 1e-3)
    # an upper limit on this quantity: scale the colours to what matters near the targets
    uppers = [r for r in requirements if r.quantity == quantity and r.op == "<="]
    if uppers:
        inside = np.zeros(vals.shape, bool)
        for r in uppers:
            lo, hi = r.band_nm
            inside |= ((wl >= lo) & (wl <= hi))[None, :] & \
                (ang <= max(r.angles_deg) + 1e-9)[:, None]
        near = max(3.0 * 100.0 * max(r.limit for r in uppers),
                   1.5 * float(np.max(vals[inside])) if inside.any() else 0.0)
        vmax = min(vmax, max(near, 1e-3))
    extend = "max" if vmax < float(np.nanmax(vals)) else "neither"
    with rc_context(_STYLE):
        fig = Figure(figsize=(WIDTH_IN, 4.6), dpi=DPI, layout="constrained")
        ax = fig.subplots()
        ax.grid(False)
        im = ax.pcolormesh(wl, ang, vals, shading="nearest", cmap="magma", vmin=0.0, vmax=vmax)
        cb = fig.colorbar(im, ax=ax, pad=0.01, extend=extend)
        cb.set_label(f"{'Reflectance R' if quantity == 'R' else 'Transmittance T'} (%), "
                     f"{polarization}")
        # one outline and one label per box: requirements on the same band and angles (s and p
        # of a beam splitter, say) share it, their labels joined (drawn apart they overlapped)
        boxes: dict = {}
        for r in requirements:
            if r.quantity not in ("R", "T", "A"):
                continue
            box = (*map(float, r.band_nm), min(r.angles_deg), max(r.angles_deg))
            cond = r.text or f"{r.op} {float(r.to_display(r.limit)):g}%"
            pol = f" ({r.polarization})" if r.polarization != polarization else ""
            boxes.setdefault(box, []).append(f"{r.quantity} {cond}{pol}")
        for (lo, hi, a0, a1), labels in boxes.items():
            ax.add_patch(Rectangle((lo, a0 - 1.0), max(hi - lo, 1.0), (a1 - a0) + 2.0,
                                   fill=False, ec="#7fd1ff", lw=1.4, ls=(0, (4, 2))))
            ax.annotate("; ".join(dict.fromkeys(labels)), (lo, a1 + 1.0), xytext=(2, 2),
                        textcoords="offset points", fontsize=7.5, color="#7fd1ff",
                        ha="left", va="bottom",
                        path_effects=[patheffects.withStroke(linewidth=2, foreground="#1a1a1a")])
        ax.set_xlabel("Wavelength (nm, vacuum)")
        ax.set_ylabel("Angle of incidence (deg)")
        if title:
            ax.set_title(title)
        add_caption(fig, caption)
    return fig, ax


def plot_index_profile(stack, wavelength_nm: float | None = None, *, title=None, caption=None,
                       fixed=None):
    """Real refractive index against height above the substrate (nm), at one wavelength.

    The substrate is drawn to the left of 0, the incident medium to the right of the top; each
    layer is labelled with its material when there is room. ``fixed`` (a boolean per layer)
    hatches the layers the design kept fixed.

    Returns
    -------
    (Figure, Axes)
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    wl = float(stack.reference_nm if wavelength_nm is None else wavelength_nm)
    d = stack.thicknesses_nm
    n_layers = np.real(stack.layer_indices([wl]))[:, 0] if d.size else np.zeros(0)
    n_sub = float(np.real(stack.substrate.nk(np.array([wl]))[0]))
    n_inc = float(np.real(stack.incident.nk(np.array([wl]))[0]))
    total = float(d.sum())
    side = max(0.08 * total, 20.0)
    edges = np.concatenate([[0.0], np.cumsum(d)])
    names = sorted({l.material.name for l in stack.layers})
    colours = {nm: PALETTE[i % len(PALETTE)] for i, nm in enumerate(names)}
    with rc_context(_STYLE):
        fig = Figure(figsize=(WIDTH_IN, 3.6), dpi=DPI, layout="constrained")
        ax = fig.subplots()
        base = min(1.0, n_inc) * 0.9
        ax.fill_between([-side, 0], 0, n_sub, color="#b9b4aa", step="post", lw=0)
        ax.text(-side / 2, base + 0.03, stack.substrate.name, ha="center", va="bottom",
                rotation=90, fontsize=7.5, color="#2b2b2b", clip_on=True)
        ax.fill_between([total, total + side], 0, n_inc, color="#e6e3dc", lw=0)
        ax.text(total + side / 2, n_inc + 0.03, stack.incident.name, ha="center",
                va="bottom", rotation=90, fontsize=7.5, color="#4a4a4a", clip_on=True)
        for j, layer in enumerate(stack.layers):
            x0, x1 = edges[j], edges[j + 1]
            hatch = "///" if fixed is not None and fixed[j] else None
            ax.fill_between([x0, x1], 0, n_layers[j], color=colours[layer.material.name],
                            alpha=0.85, lw=0, hatch=hatch, edgecolor="white")
        x = np.concatenate([[-side], edges, [total + side]])
        y = np.concatenate([[n_sub], n_layers, [n_inc, n_inc]])
        ax.step(x, y, where="post", color="#2b2b2b", lw=0.9)
        handles = [ax.fill_between([], [], [], color=colours[nm], alpha=0.85, label=nm)
                   for nm in names]
        if fixed is not None and any(fixed):
            handles.append(ax.fill_between([], [], [], color="#9a9a9a", hatch="///",
                                           edgecolor="white", label="fixed layer"))
        if handles:
            ax.legend(handles=handles, loc="upper right", ncols=min(4, len(handles)))
        top = max(np.r_[n_layers, n_sub, n_inc]) if d.size else max(n_sub, n_inc)
        ax.set_ylim(base, top * 1.18)
        ax.set_xlim(-side, total + side)
        ax.set_xlabel("Height above the substrate (nm); light arrives from the right")
        ax.set_ylabel(f"Refractive index n at {wl:g} nm")
        ax.set_title(title or f"Index profile: {d.size} layers, {total:.1f} nm")
        add_caption(fig, caption)
    return fig, ax


def plot_merit_history(history, *, title=None):
    """Merit (log scale) against elapsed time, with the layer count, from a design history.

    ``history`` is :attr:`filmstack.design.DesignResult.history` (dicts with ``elapsed_s``,
    ``merit``, ``layers``).

    Returns
    -------
    (Figure, Axes) — the merit axes (the layer count is on a twin axis).
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    t = np.array([h["elapsed_s"] for h in history], float)
    m = np.array([h["merit"] for h in history], float)
    n = np.array([h["layers"] for h in history], float)
    with rc_context(_STYLE):
        fig = Figure(figsize=(WIDTH_IN, 3.4), dpi=DPI, layout="constrained")
        ax = fig.subplots()
        pos = np.where(m > 0, m, np.nan)
        ax.step(t, pos, where="post", color=PALETTE[0], lw=1.6, label="merit")
        ax.plot(t, pos, "o", color=PALETTE[0], ms=3)
        if np.any(np.isfinite(pos)):
            ax.set_yscale("log")
        zero = np.flatnonzero(m <= 0)
        if zero.size and np.any(np.isfinite(pos)):
            y = np.nanmin(pos)
            ax.plot(t[zero[0]], y, "v", color=PALETTE[2], ms=8)
            ax.annotate("merit 0: every target met", (t[zero[0]], y), xytext=(-6, 8),
                        textcoords="offset points", ha="right", fontsize=8, color=PALETTE[2])
        ax.set_xlabel("Elapsed time (s)")
        ax.set_ylabel("Merit (R, T, A deviations in % points, squared)")
        ax2 = ax.twinx()
        ax2.step(t, n, where="post", color=PALETTE[1], lw=1.0, ls=(0, (4, 2)))
        ax2.set_ylabel("Layers", color=PALETTE[1])
        ax2.grid(False)
        ax2.spines["right"].set_visible(True)
        ax.set_title(title or "Merit along the search")
    return fig, ax
