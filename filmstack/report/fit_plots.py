"""Figures of fits: measured against fitted spectra with residuals, and a map of a fitted
parameter (e.g. thickness) over a part.

matplotlib is imported inside the functions; no pyplot state is used (plain
:class:`matplotlib.figure.Figure` objects). Values are drawn in percent, labelled "%"; residuals
in percentage points. Render with :func:`filmstack.report.spectrum_plot.figure_bytes`.
"""

from __future__ import annotations

import math

import numpy as np

from .spectrum_plot import DPI, PALETTE, WIDTH_IN, _STYLE

__all__ = ["plot_fit", "plot_map"]


_CAPTION = ("filmstack: ideal homogeneous films with the given optical constants; "
            "verify with measurement.")


def _fmt_value(value: float, stderr: float, unit: str) -> str:
    """``1200.07 ± 0.05 nm`` with the value rounded to the stderr's second significant digit."""
    u = f" {unit}" if unit else ""
    if not math.isfinite(stderr) or stderr <= 0:
        return f"{value:.6g}{u} (no σ)"
    digits = max(0, 1 - int(math.floor(math.log10(stderr))))
    return f"{value:.{digits}f} ± {stderr:.{digits}f}{u}"


def _fine_grid(wl: np.ndarray) -> np.ndarray:
    """A grid over the measured range at most 1 nm apart (at most 3000 points), for a smooth
    fitted curve; the measured wavelengths themselves if they are already that dense."""
    lo, hi = float(wl[0]), float(wl[-1])
    n = int(min(3000, max(wl.size, math.ceil(hi - lo) + 1)))
    return np.linspace(lo, hi, n) if n > wl.size else wl


def plot_fit(result, *, title: str | None = None, subtitle: str | None = None,
             caption: str | None = _CAPTION):
    """Measured (points) and fitted (lines) spectra in %, with residuals below.

    Parameters
    ----------
    result
        A :class:`~filmstack.fit.FitResult`.
    title, subtitle, caption
        Text above the plot, and a small grey line at the bottom.

    Returns
    -------
    (Figure, array of two Axes): the spectra and the residuals (measured − model, in
    percentage points).
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    with rc_context(_STYLE):
        n_lines = len(result.parameters) + 1 + (result.chi2_reduced is not None) \
            + result.ambiguous
        fig = Figure(figsize=(WIDTH_IN, 6.0 + 0.16 * n_lines), dpi=DPI, layout="constrained")
        gs = fig.add_gridspec(2, 1, height_ratios=(3, 1.3))
        ax = fig.add_subplot(gs[0])
        axr = fig.add_subplot(gs[1], sharex=ax)
        handles, labels = [], []
        for k, (ch, model) in enumerate(result.curves()):
            colour = PALETTE[k % len(PALETTE)]
            wl = ch.wavelength_nm
            if ch.sigma is not None and wl.size <= 400:
                pts = ax.errorbar(wl, 100 * ch.value, yerr=100 * ch.sigma, fmt="o", ms=2.4,
                                  color=colour, alpha=0.55, elinewidth=0.6)
            else:
                (pts,) = ax.plot(wl, 100 * ch.value, "o", ms=2.4, color=colour, alpha=0.55)
            fine = _fine_grid(wl)
            curve = result.model_at(ch, fine) if (result.model is not None and
                                                  fine.size > wl.size) else model
            (line,) = ax.plot(fine if curve is not model else wl, 100 * curve, "-", lw=1.4,
                              color=colour)
            axr.plot(wl, 100 * (ch.value - model), "o", ms=2.0, color=colour, alpha=0.7)
            handles.append((pts, line))
            labels.append(f"{ch.quantity} at {ch.angle_deg:g}°, {ch.polarization}")
        axr.axhline(0.0, color="#6b6b6b", lw=0.8)
        ax.set_ylabel("Measured and fitted (%)")
        axr.set_ylabel("Residual (% points)")
        axr.set_xlabel("Wavelength (nm)")
        ax.tick_params(labelbottom=False)
        # One entry per curve (points measured, line fitted); beside the panel when several
        # curves fill it, so the legend never hides data.
        where = dict(loc="best") if len(handles) <= 2 else dict(loc="upper left",
                                                               bbox_to_anchor=(1.01, 1.0))
        ax.legend(handles, labels, title="points measured, lines fitted", fontsize=8,
                  title_fontsize=8, **where)
        lines = [f"{p.name} = {_fmt_value(p.value, p.stderr, p.unit)}"
                 + ("  [on bound]" if p.at_bound else "") for p in result.parameters]
        lines.append(f"residual RMS = {100 * result.rms:.3g} %")
        if result.chi2_reduced is not None:
            lines.append(f"reduced χ² = {result.chi2_reduced:.3g}")
        if result.ambiguous:
            lines.append("AMBIGUOUS: another minimum fits almost as well")
        # The fitted values go between the panels, where they cover no data.
        axr.set_title("\n".join(lines), loc="left", fontsize=8.5, family="monospace",
                      fontweight="normal", color="#2b2b2b")
        head = title or f"Fit of {result.measurement.site or 'measurement'}"
        if subtitle:
            ax.set_title(f"{head}\n", loc="left")
            ax.text(0.0, 1.02, subtitle, transform=ax.transAxes, fontsize=9, color="#6b6b6b",
                    va="bottom")
        else:
            ax.set_title(head, loc="left")
        if caption:
            fig.supxlabel(caption, fontsize=7.5, color="#8a8a8a", x=0.01, ha="left")
    return fig, np.array([ax, axr])


def plot_map(result, name: str | None = None, *, title: str | None = None,
             caption: str | None = _CAPTION, wafer_diameter_mm: float | None = None):
    """A map of one fitted parameter over the sites' x, y positions.

    Parameters
    ----------
    result
        A :class:`~filmstack.fit.MapResult` whose sites have positions.
    name
        The parameter (default: the first, usually ``layers[0].nm``).
    title, caption
        Text above and below.
    wafer_diameter_mm
        Draw the part's outline as a circle of this diameter, centred at (0, 0); default: the
        smallest standard wafer size (50, 76.2, 100, 125, 150, 200, 300, 450 mm) enclosing every
        site, or none if the sites are not centred.

    Returns
    -------
    (Figure, Axes)

    Raises
    ------
    ValueError
        If the sites have no positions.
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure
    from matplotlib.patches import Circle
    from matplotlib.tri import Triangulation

    name = result.names[0] if name is None else name
    j = result.names.index(name)
    x, y = np.asarray(result.x_mm), np.asarray(result.y_mm)
    v = result.values[:, j]
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(v)
    if not ok.any():
        raise ValueError("the sites have no x, y positions to map")
    unit = result.units[j]
    u = result.uniformity(name)
    with rc_context({**_STYLE, "axes.grid": False}):
        fig = Figure(figsize=(WIDTH_IN * 0.8, WIDTH_IN * 0.8), dpi=DPI, layout="constrained")
        ax = fig.add_subplot()
        cmap = "viridis"
        vmin, vmax = float(np.min(v[ok])), float(np.max(v[ok]))
        if vmax <= vmin:
            vmin, vmax = vmin - 0.5, vmax + 0.5
        mappable = None
        if ok.sum() >= 6:
            try:
                tri = Triangulation(x[ok], y[ok])
                mappable = ax.tricontourf(tri, v[ok], levels=14, cmap=cmap, vmin=vmin,
                                          vmax=vmax, alpha=0.9)
            except (ValueError, RuntimeError):   # collinear sites: points only
                mappable = None
        if mappable is not None:      # the contours carry the values; sites as small dots
            n = int(ok.sum())                 # smaller dots as sites get denser
            sc = ax.scatter(x[ok], y[ok], s=float(np.clip(4.0 * 300.0 / n, 0.3, 4.0)),
                            c="#2b2b2b", alpha=1.0 if n <= 1000 else 0.5, linewidths=0,
                            zorder=3, label="sites")
        else:
            sc = ax.scatter(x[ok], y[ok], c=v[ok], cmap=cmap, vmin=vmin, vmax=vmax, s=40,
                            edgecolors="#2b2b2b", linewidths=0.4, zorder=3)
        flagged = ok & (np.asarray(result.ambiguous) | np.asarray(result.at_bound).any(axis=1)
                        | np.asarray(result.poor_fit))
        if flagged.any():
            ax.scatter(x[flagged], y[flagged], marker="x", s=30, c="#d1495b", zorder=4,
                       label="ambiguous, on a bound or poor fit")
            ax.legend(loc="upper right", fontsize=8)
        cb = fig.colorbar(mappable if mappable is not None else sc, ax=ax, shrink=0.85)
        cb.set_label(f"{name}" + (f" ({unit})" if unit else ""))
        r = float(np.max(np.hypot(x[ok], y[ok])))
        centred = abs(float(np.mean(x[ok]))) < 0.2 * max(r, 1e-9) and \
            abs(float(np.mean(y[ok]))) < 0.2 * max(r, 1e-9)
        if wafer_diameter_mm is None and centred:
            sizes = (50.0, 76.2, 100.0, 125.0, 150.0, 200.0, 300.0, 450.0)
            wafer_diameter_mm = next((s for s in sizes if s / 2 >= r * 1.0001), None)
        if wafer_diameter_mm:
            ax.add_patch(Circle((0, 0), wafer_diameter_mm / 2, fill=False, ec="#6b6b6b", lw=1.0))
            lim = wafer_diameter_mm / 2 * 1.04
            ax.set_xlim(-lim, lim)
            ax.set_ylim(-lim, lim)
        ax.set_aspect("equal")
        ax.set_xlabel("x (mm)")
        ax.set_ylabel("y (mm)")
        uu = f" {unit}" if unit else ""
        summary = (f"{u.n_sites} sites: mean {u.mean:.5g}{uu}, range {u.range:.4g}{uu} "
                   f"({u.minimum:.5g} to {u.maximum:.5g}), σ {u.sigma:.4g}{uu}\n"
                   f"non-uniformity (max − min)/(2·mean) = {100 * u.nonuniformity:.2f} %")
        fig.suptitle(title or f"Map of {name}", x=0.02, ha="left", fontsize=11,
                     fontweight="bold")
        ax.set_title(summary, loc="left", fontsize=8.5, color="#4a4a4a", fontweight="normal")
        if caption:
            fig.supxlabel(caption, fontsize=7.5, color="#8a8a8a", x=0.01, ha="left")
    return fig, ax
