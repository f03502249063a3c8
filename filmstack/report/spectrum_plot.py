"""Plot R, T, A spectra: one panel per quantity, one curve per angle and polarisation.

matplotlib is imported inside the functions (never at module import), and no pyplot state is
used: figures are plain :class:`matplotlib.figure.Figure` objects, safe on machines without a
display and in threads.

The look (filmstack's own): a white page, a faint grid, only the left and bottom spines, colour
by angle of incidence from a muted palette, line style by polarisation (mean solid, s dashed, p
dotted), percent on the vertical axis, a small caption line under the plot.
"""

from __future__ import annotations

import io
from typing import Sequence

import numpy as np

__all__ = ["plot_spectrum", "figure_bytes", "figure_size_px", "PALETTE", "DPI", "WIDTH_IN"]

#: Colours for successive angles of incidence (our own muted set).
PALETTE = ("#1f5f8b", "#d1495b", "#2e8b57", "#edae49", "#6c4f9e", "#00798c", "#8c5e3c",
           "#5d6d7e")
#: Line style per polarisation.
LINESTYLES = {"mean": "-", "s": (0, (5, 2)), "p": (0, (1.2, 1.6))}
#: Axis labels per quantity.
LABELS = {"R": "Reflectance R (%)", "T": "Transmittance T (%)", "A": "Absorptance A (%)"}
DPI = 150
WIDTH_IN = 8.0
_PANEL_IN = 3.1
_EXTRA_IN = 1.1

_STYLE = {
    "font.size": 9.5,
    "axes.titlesize": 11,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 9.5,
    "axes.labelcolor": "#2b2b2b",
    "axes.edgecolor": "#6b6b6b",
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": "#e3e1dc",
    "grid.linewidth": 0.7,
    "xtick.color": "#4a4a4a",
    "ytick.color": "#4a4a4a",
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.frameon": True,
    "legend.framealpha": 0.9,
    "legend.edgecolor": "#d9d6cf",
    "legend.fontsize": 8.5,
    "svg.hashsalt": "filmstack",
    "svg.fonttype": "path",
}


def figure_size_px(n_panels: int, dpi: int = DPI) -> tuple[int, int]:
    """(width, height) in pixels of a PNG from :func:`plot_spectrum` with ``n_panels`` panels."""
    w, h = _figsize(n_panels)
    return int(round(w * dpi)), int(round(h * dpi))


def _figsize(n_panels: int) -> tuple[float, float]:
    return WIDTH_IN, _EXTRA_IN + _PANEL_IN * max(1, n_panels)


def _angle_label(a: float) -> str:
    return f"{a:g}°"


def _limits(values: np.ndarray) -> tuple[float, float]:
    """Vertical limits in percent: from 0 when the data come near it, a small margin above."""
    lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
    span = hi - lo
    pad = 0.06 * span if span > 0 else max(0.5, 0.02 * abs(hi))
    bottom = lo - pad
    if lo >= 0 and (lo <= 0.25 * hi or bottom < 0):
        bottom = 0.0
    top = hi + pad
    if hi <= 100.0 < top and lo > 50.0:
        top = min(top, 100.0 + 0.5 * pad)
    return bottom, top


def plot_spectrum(spectra, quantities: Sequence[str] = ("R", "T"), *, title: str | None = None,
                  subtitle: str | None = None, caption: str | None = None):
    """Plot spectra in percent against wavelength.

    Parameters
    ----------
    spectra
        One spectrum or a list (one per polarisation), each with ``wavelength_nm`` (W,) in nm,
        ``angle_deg`` (A,) in degrees, ``polarization`` and ``R``, ``T``, ``A`` (A, W) as
        fractions 0–1 (e.g. results of :func:`filmstack.spectrum`).
    quantities
        Which of 'R', 'T', 'A' to plot, one panel each, top to bottom.
    title, subtitle
        Text above the first panel (the subtitle in grey, smaller).
    caption
        A small grey line at the bottom of the figure (e.g. the model caution).

    Returns
    -------
    (matplotlib.figure.Figure, matplotlib.axes.Axes) — with several quantities, the second item
    is a numpy array of Axes, one per panel. The figure is ``WIDTH_IN`` inches wide and
    ``figure_size_px(len(quantities))`` pixels at ``DPI``.
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    from ..io.spectra_out import as_spectrum_list

    items = as_spectrum_list(spectra)
    quantities = [str(q).upper() for q in quantities]
    for q in quantities:
        if q not in LABELS:
            raise ValueError(f"unknown quantity {q!r}; expected R, T or A")
    if not quantities:
        raise ValueError("no quantity to plot")
    wl = np.asarray(items[0].wavelength_nm, dtype=float)
    angles = np.atleast_1d(np.asarray(items[0].angle_deg, dtype=float))

    with rc_context(_STYLE):
        fig = Figure(figsize=_figsize(len(quantities)), dpi=DPI, layout="constrained")
        axes = fig.subplots(len(quantities), 1, sharex=True, squeeze=False)[:, 0]
        for ax, q in zip(axes, quantities):
            allv = []
            for ia, a in enumerate(angles):          # legend order: angle, then polarisation
                colour = PALETTE[ia % len(PALETTE)]
                for s in items:
                    vals = 100.0 * np.asarray(getattr(s, q), dtype=float)[ia]
                    style = LINESTYLES.get(s.polarization, "-")
                    label = f"{_angle_label(a)}  {s.polarization}"
                    ax.plot(wl, vals, color=colour, linestyle=style, linewidth=1.6,
                            label=label, solid_capstyle="round",
                            marker="o" if wl.size == 1 else None, markersize=5)
                    allv.append(vals)
            ax.set_ylim(*_limits(np.concatenate(allv)))
            if wl.size > 1:
                ax.set_xlim(wl[0], wl[-1])
            else:                                    # one wavelength: a point in a window
                pad = max(1.0, 0.01 * wl[0])
                ax.set_xlim(wl[0] - pad, wl[0] + pad)
            ax.set_ylabel(LABELS[q])
            ax.tick_params(labelbottom=True)
        axes[-1].set_xlabel("Wavelength (nm, vacuum)")
        for ax in axes[:-1]:
            ax.tick_params(labelbottom=False)
        n_curves = len(items) * angles.size
        handles, labels = axes[0].get_legend_handles_labels()
        axes[0].legend(handles, labels, title="angle  polarisation", loc="best",
                       ncols=1 if n_curves <= 6 else 2, title_fontsize=8.5)
        add_titles(axes[0], title, subtitle)
        add_caption(fig, caption)
    return fig, (axes[0] if len(axes) == 1 else axes)


def add_titles(ax, title, subtitle):
    """A bold title over ``ax`` and, under it, a grey subtitle line (either may be empty)."""
    if title:
        ax.set_title(title, pad=16 if subtitle else 6)
    if subtitle:
        ax.text(0.0, 1.015, subtitle, transform=ax.transAxes, ha="left", va="bottom",
                fontsize=8.5, color="#6b6b6b")


def add_caption(fig, caption):
    """A small grey caption line under the plot (room kept by the constrained layout)."""
    if caption:
        height_in = fig.get_figheight()
        fig.get_layout_engine().set(rect=(0.0, 0.22 / height_in, 1.0, 1.0 - 0.22 / height_in))
        fig.text(0.01, 0.06 / height_in, caption, ha="left", va="bottom", fontsize=7,
                 color="#8a8a8a")


def figure_bytes(fig, fmt: str) -> bytes:
    """Render ``fig`` to PNG or SVG bytes at its own size (no cropping), with stable metadata."""
    from .. import __version__

    fmt = fmt.lower()
    if fmt not in ("png", "svg"):
        raise ValueError(f"unknown image format {fmt!r}; expected 'png' or 'svg'")
    meta = {"Software": f"filmstack {__version__}"} if fmt == "png" else {
        "Creator": f"filmstack {__version__}", "Date": None}
    buf = io.BytesIO()
    from matplotlib import rc_context

    with rc_context(_STYLE):
        fig.savefig(buf, format=fmt, dpi=fig.dpi, metadata=meta, facecolor="white")
    return buf.getvalue()


def band_wavelengths(requirements, *, pad: float = 0.1, points: int = 601,
                     material_range=None, min_span_fraction: float = 0.05) -> np.ndarray:
    """A plotting grid (nm) covering every requirement's band with ``pad`` of the span on each
    side (the span at least ``min_span_fraction`` of the longest wavelength), clipped to
    ``material_range`` (lo, hi) where the materials have data."""
    lo = min(float(r.band_nm[0]) for r in requirements)
    hi = max(float(r.band_nm[1]) for r in requirements)
    span = max(hi - lo, min_span_fraction * hi)
    lo, hi = lo - pad * span, hi + pad * span
    if material_range is not None:
        lo, hi = max(lo, material_range[0]), min(hi, material_range[1])
    return np.linspace(max(lo, 1.0), hi, points)
