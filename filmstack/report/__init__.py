"""Figures and written reports (PNG/SVG, Markdown or HTML).

Plotting functions return ``(Figure, Axes)`` and never touch pyplot's global state; matplotlib is
imported inside them, so importing this package costs nothing. Render a figure to bytes with
:func:`figure_bytes` and write it with :func:`filmstack.io.atomic.write_bytes_atomic`.
"""

from .spectrum_plot import figure_bytes, figure_size_px, plot_spectrum

__all__ = ["plot_spectrum", "figure_bytes", "figure_size_px"]
