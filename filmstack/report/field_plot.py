"""Plot the electric field |E|² through a stack, over its index profile.

The layers are drawn as bands shaded by their refractive index (darker is higher), with the
material names along the top; |E|² relative to the incident wave is the curve. Depth runs from
the incident medium (left, negative) through the outer surface (0) into the substrate (right).
Laser users read where the field peaks sit relative to the interfaces.
"""

from __future__ import annotations

import numpy as np

from .spectrum_plot import DPI, PALETTE, WIDTH_IN, _STYLE, add_caption, add_titles

__all__ = ["plot_field"]


def plot_field(profile, stack, *, title: str | None = None, subtitle: str | None = None,
               caption: str | None = None):
    """|E|² versus depth with the layers behind it.

    Parameters
    ----------
    profile
        A :class:`filmstack.response.FieldProfile` of ``stack``.
    stack
        The :class:`filmstack.stack.Stack` it was computed for.
    title, subtitle, caption
        Texts above and below the plot.

    Returns
    -------
    (Figure, Axes)
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    wl = np.array([profile.wavelength_nm])
    n_layers = np.real(stack.layer_indices(wl)[:, 0]) if stack.layers else np.empty(0)
    n_lo = min([1.0, *n_layers]) if n_layers.size else 1.0
    n_hi = max([2.5, *n_layers]) if n_layers.size else 2.5
    tops = np.asarray(profile.interfaces_nm)          # outer surface first
    depth = np.asarray(profile.depth_nm)
    with rc_context({**_STYLE, "axes.grid": False}):
        fig = Figure(figsize=(WIDTH_IN, 3.8), dpi=DPI, layout="constrained")
        ax = fig.add_subplot()
        L = len(stack.layers)
        for i in range(L):                              # i-th layer from the outside
            j = L - 1 - i
            shade = 0.93 - 0.45 * (n_layers[j] - n_lo) / max(n_hi - n_lo, 1e-9)
            ax.axvspan(tops[i], tops[i + 1], color=str(round(shade, 3)), lw=0, zorder=0)
        if L <= 40:
            for i in range(L):
                j = L - 1 - i
                ax.text(0.5 * (tops[i] + tops[i + 1]), 0.98, stack.layers[j].material.name,
                        transform=ax.get_xaxis_transform(), ha="center", va="top",
                        fontsize=6.5, rotation=90 if L > 8 else 0, color="#4a4a4a", zorder=4)
        ax.axvspan(tops[-1], depth[-1], color="#cfd8dc", lw=0, zorder=0)
        ax.plot(depth, profile.e2, color=PALETTE[1], lw=1.4, zorder=3,
                label=f"|E|², {profile.polarization}")
        ax.set_xlim(depth[0], depth[-1])
        ax.set_ylim(0.0, max(1.25 * float(np.max(profile.e2)), 1e-3))   # room for the names
        ax.set_xlabel("Depth from the outer surface (nm); incident medium left, substrate right")
        ax.set_ylabel("|E|² / |E_incident|²")
        add_titles(ax, title, subtitle)
        add_caption(fig, caption)
    return fig, ax
