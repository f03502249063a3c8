"""Colour figures: the interference-colour chart and a*–b* paths (over thickness or angle).

matplotlib is imported inside the functions and no pyplot state is used: figures are plain
:class:`matplotlib.figure.Figure` objects (render them with
:func:`filmstack.report.spectrum_plot.figure_bytes`). Inputs are plain arrays; nothing here
computes colour.

The look (filmstack's own): the chart is a stack of continuous colour bands, one per row of
thickness, each with a thin tick every step and a label every few steps, the row's range
written at its left; paths in the a*–b* plane are drawn in their own colours on a light grey
ground, with the neutral axes crossing at the origin.
"""

from __future__ import annotations

from typing import Sequence

import textwrap

import numpy as np

from .spectrum_plot import _STYLE, DPI

__all__ = ["plot_colour_chart", "plot_ab_path", "chart_row_span"]

_NICE = (5, 10, 20, 25, 50, 100, 200, 250, 500, 1000, 2000, 2500, 5000, 10000)
_GROUND = "#f2f1ee"


def chart_row_span(lo: float, hi: float, max_rows: int = 16) -> float:
    """Thickness span of one chart row (nm): the smallest 'nice' span giving <= max_rows rows."""
    span = (hi - lo) / max_rows
    for s in _NICE:
        if s >= span - 1e-9:
            return float(s)
    return float(np.ceil(span / 10000.0) * 10000.0)


def _tick_step(row: float) -> tuple[float, float]:
    """(minor tick step, label step) for a row span."""
    minor = {5: 1, 10: 1, 20: 2, 25: 5, 50: 5, 100: 10, 200: 20, 250: 25, 500: 50,
             1000: 100}.get(int(row), row / 10)
    return float(minor), float(minor * (2 if row / minor >= 10 else 1))


def plot_colour_chart(thickness_nm, srgb, *, title: str, subtitle: str = "",
                      caption: str = "", out_of_gamut=None, row_nm: float | None = None):
    """Colour swatches versus thickness: one continuous band per row, labelled in nm.

    Parameters
    ----------
    thickness_nm
        Increasing, evenly spaced thicknesses (N,), nm (1 nm or finer looks continuous).
    srgb
        Encoded sRGB 0–1 (N, 3) of each thickness.
    title, subtitle, caption
        Texts above and below the chart.
    out_of_gamut
        Optional (N,) bool: marked with a thin dark line under the band (clipped colours).
    row_nm
        Span of one row, nm (default: :func:`chart_row_span`).

    Returns
    -------
    (Figure, Axes of the rows)
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    t = np.asarray(thickness_nm, dtype=float)
    rgb = np.clip(np.asarray(srgb, dtype=float), 0.0, 1.0)
    lo, hi = float(t[0]), float(t[-1])
    row = float(row_nm) if row_nm else chart_row_span(lo, hi)
    starts = np.arange(lo, hi, row)
    if starts.size == 0:
        starts = np.array([lo])
    n_rows = starts.size
    minor, major = _tick_step(row)
    oog = None if out_of_gamut is None else np.asarray(out_of_gamut, dtype=bool)
    with rc_context(_STYLE):
        cap = textwrap.fill(caption, 118) if caption else ""
        cap_in = 0.14 * (cap.count("\n") + 1) if cap else 0.0
        fig = Figure(figsize=(8.0, 1.25 + cap_in + 0.52 * n_rows), dpi=DPI)
        top = 1 - 0.95 / fig.get_figheight()
        bottom = (0.36 + cap_in) / fig.get_figheight()
        axes = fig.subplots(n_rows, 1, squeeze=False)[:, 0]
        fig.subplots_adjust(left=0.13, right=0.97, top=top, bottom=bottom, hspace=0.95)
        for ax, s in zip(axes, starts):
            e = s + row
            m = (t >= s - 1e-9) & (t <= e + 1e-9)
            tt, cc = t[m], rgb[m]
            if tt.size == 0:
                ax.set_visible(False)
                continue
            # one image column per sample, edges halfway between samples
            edges = np.concatenate([[tt[0]], 0.5 * (tt[1:] + tt[:-1]), [tt[-1]]]) \
                if tt.size > 1 else np.array([tt[0] - 0.5, tt[0] + 0.5])
            ax.pcolormesh(edges, [0, 1], np.arange(tt.size)[None, :], shading="flat",
                          cmap=_listed(cc), vmin=-0.5, vmax=tt.size - 0.5, rasterized=True)
            if oog is not None and oog[m].any():
                ax.fill_between(tt, -0.16, -0.06, where=oog[m], color="#3a3a3a", lw=0,
                                step="mid")
            ax.set_xlim(s, e)
            ax.set_ylim(-0.18, 1)
            ax.set_yticks([])
            ax.grid(False)
            for sp in ("left", "bottom", "top", "right"):
                ax.spines[sp].set_visible(False)
            ax.set_xticks(np.arange(s, e + 1e-9, minor), minor=True)
            ax.set_xticks(np.arange(s, e + 1e-9, major))
            ax.set_xticklabels([f"{v:g}" for v in np.arange(s, e + 1e-9, major)], fontsize=7.5)
            ax.tick_params(axis="x", which="both", length=3, pad=1.5, color="#8a8a8a")
            ax.text(-0.015, 0.45, f"{s:g}–{e:g} nm", transform=ax.transAxes, ha="right",
                    va="center", fontsize=8, color="#3a3a3a")
        fig.text(0.02, 1 - 0.3 / fig.get_figheight(), title, fontsize=12, fontweight="bold",
                 va="center")
        if subtitle:
            fig.text(0.02, 1 - 0.58 / fig.get_figheight(), subtitle, fontsize=8.8,
                     color="#4a4a4a", va="center")
        if cap:
            fig.text(0.02, 0.12 / fig.get_figheight(), cap, fontsize=7.3, color="#6a6a6a",
                     va="bottom", linespacing=1.3)
    return fig, axes


def _listed(colors):
    from matplotlib.colors import ListedColormap

    return ListedColormap(np.asarray(colors, dtype=float))


def plot_ab_path(Lab, srgb, *, values, unit: str = "nm", label_every: float | None = None,
                 observed=None, observed_label: str = "observed", candidates: Sequence = (),
                 title: str = "", subtitle: str = "", caption: str = ""):
    """A path in the a*–b* plane drawn in its own colours, with labels along it.

    Parameters
    ----------
    Lab
        CIELAB along the path (N, 3) (a thickness sweep or an angle sweep).
    srgb
        Encoded sRGB 0–1 (N, 3) for the colour of each segment.
    values
        The path parameter (N,) (thickness in nm, or angle in degrees).
    unit
        Unit of ``values`` for labels ('nm' or '°').
    label_every
        Put a dot and a label every this many units (default: a nice step, ~10 labels).
    observed
        Optional CIELAB (3,) of an observed colour (a star), or a list of them.
    candidates
        Optional sequence of (value, Lab (3,), text): numbered rings on the path.

    Returns
    -------
    (Figure, Axes)
    """
    from matplotlib import rc_context
    from matplotlib.collections import LineCollection
    from matplotlib.figure import Figure

    lab = np.asarray(Lab, dtype=float)
    v = np.asarray(values, dtype=float)
    rgb = np.clip(np.asarray(srgb, dtype=float), 0, 1)
    a, b = lab[:, 1], lab[:, 2]
    if label_every is None:
        span = (v[-1] - v[0]) / 10 if v.size > 1 else 1.0
        label_every = next((s for s in (1, 2, 5) + _NICE if s >= span), span)
    with rc_context(_STYLE):
        fig = Figure(figsize=(7.2, 7.0), dpi=DPI)
        ax = fig.add_axes((0.11, 0.12, 0.84, 0.74))
        ax.set_facecolor(_GROUND)
        ax.axhline(0, color="#b9b6ae", lw=0.8, zorder=0)
        ax.axvline(0, color="#b9b6ae", lw=0.8, zorder=0)
        if lab.shape[0] > 1:
            seg = np.stack([np.column_stack([a[:-1], b[:-1]]), np.column_stack([a[1:], b[1:]])],
                           axis=1)
            ax.add_collection(LineCollection(seg, colors=0.5 * (rgb[:-1] + rgb[1:]), lw=3.2,
                                             capstyle="round", zorder=2))
        marks = np.flatnonzero(np.isclose(np.mod(v - v[0] + 1e-9, label_every), 0, atol=1e-6)
                               | (np.arange(v.size) == 0))
        for i in marks:
            ax.plot(a[i], b[i], "o", ms=3.2, color="#2b2b2b", zorder=3)
            ax.annotate(f"{v[i]:g}{'' if unit == '°' else ' '}{unit}", (a[i], b[i]),
                        textcoords="offset points", xytext=(4, 3), fontsize=7,
                        color="#3a3a3a", zorder=4)
        obs_list = [] if observed is None else (
            [observed] if np.ndim(observed) == 1 else list(observed))
        for k, o in enumerate(obs_list):
            o = np.asarray(o, dtype=float)
            ax.plot(o[1], o[2], marker="*", ms=15, color="#111111", mfc="white", mew=1.3,
                    zorder=6, label=observed_label if k == 0 else None)
        for n, (val, clab, text) in enumerate(candidates, start=1):
            clab = np.asarray(clab, dtype=float)
            ax.plot(clab[1], clab[2], "o", ms=13, mfc="white", mec="#c0392b", mew=1.6, zorder=5,
                    alpha=0.9)
            ax.annotate(str(n), (clab[1], clab[2]), ha="center", va="center", fontsize=7.5,
                        fontweight="bold", color="#c0392b", zorder=7)
            ax.plot([], [], "o", mfc="none", mec="#c0392b", ms=8, label=f"{n}: {text}")
        ax.set_xlabel("a* (green − / red +)")
        ax.set_ylabel("b* (blue − / yellow +)")
        ax.set_aspect("equal", adjustable="datalim")
        ax.autoscale_view()
        ax.grid(True, color="#ffffff", lw=0.8)
        if obs_list or len(candidates):
            ax.legend(loc="best", fontsize=7.5)
        fig.text(0.02, 0.965, title, fontsize=12, fontweight="bold", va="center")
        if subtitle:
            fig.text(0.02, 0.93, subtitle, fontsize=8.8, color="#4a4a4a", va="center")
        if caption:
            fig.text(0.02, 0.012, textwrap.fill(caption, 125), fontsize=7.3, color="#6a6a6a",
                     va="bottom", linespacing=1.3)
    return fig, ax
