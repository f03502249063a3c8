"""Write computed spectra: JSON with the keys of DESIGN.md §5, CSV with units in the header.

The input is one or more spectra of the same wavelengths and angles, one per polarisation, each
with ``wavelength_nm`` (W,), ``angle_deg`` (A,), ``polarization`` ('s', 'p' or 'mean') and ``R``,
``T``, ``A`` shaped (A, W) as fractions 0–1 (the :class:`filmstack.response.Spectrum` of
:func:`filmstack.spectrum`, or anything with those attributes).

JSON (:func:`spectrum_json`): ``wavelength_nm``, ``angle_deg``, ``polarization``, ``R``, ``T``,
``A``, with R, T, A indexed [angle][wavelength]. With several polarisations, ``polarization`` is
a list and R, T, A gain a leading axis: [polarization][angle][wavelength].

CSV (:func:`spectrum_csv`): one row per wavelength; the first column ``wavelength_nm``, then per
polarisation and angle the columns ``R_<pol>_<angle>deg_fraction`` and likewise T and A, e.g.
``R_mean_0deg_fraction``. Numbers carry 10 significant digits.
"""

from __future__ import annotations

import io
import os
from typing import Sequence

import numpy as np

from .atomic import write_text_atomic

__all__ = ["QUANTITIES", "spectrum_json", "spectrum_csv", "write_spectrum", "band_summary",
           "as_spectrum_list"]

QUANTITIES = ("R", "T", "A")


def as_spectrum_list(spectra) -> list:
    """A list of spectra from one spectrum or a sequence; checks they share their grids."""
    items = list(spectra) if isinstance(spectra, (list, tuple)) else [spectra]
    if not items:
        raise ValueError("no spectra given")
    wl0 = np.asarray(items[0].wavelength_nm, dtype=float)
    an0 = np.atleast_1d(np.asarray(items[0].angle_deg, dtype=float))
    for s in items[1:]:
        if not (np.array_equal(np.asarray(s.wavelength_nm, dtype=float), wl0)
                and np.array_equal(np.atleast_1d(np.asarray(s.angle_deg, dtype=float)), an0)):
            raise ValueError("spectra to write together must share wavelengths and angles")
    for s in items:
        for q in QUANTITIES:
            shape = np.shape(getattr(s, q))
            if shape != (an0.size, wl0.size):
                raise ValueError(f"{q} has shape {shape}; expected (angles, wavelengths) = "
                                 f"{(an0.size, wl0.size)}")
    return items


def spectrum_json(spectra) -> dict:
    """The JSON result of DESIGN.md §5 as a dict of numpy arrays and strings.

    Pass it through :func:`filmstack.cli._common.to_jsonable` (or ``dumps_json``) to serialise.
    """
    items = as_spectrum_list(spectra)
    first = items[0]
    out: dict = {
        "wavelength_nm": np.asarray(first.wavelength_nm, dtype=float),
        "angle_deg": np.atleast_1d(np.asarray(first.angle_deg, dtype=float)),
    }
    if len(items) == 1:
        out["polarization"] = first.polarization
        for q in QUANTITIES:
            out[q] = np.asarray(getattr(first, q), dtype=float)
    else:
        out["polarization"] = [s.polarization for s in items]
        for q in QUANTITIES:
            out[q] = np.stack([np.asarray(getattr(s, q), dtype=float) for s in items])
    return out


def _column(q: str, pol: str, angle: float) -> str:
    return f"{q}_{pol}_{angle:g}deg_fraction"


def spectrum_csv(spectra, quantities: Sequence[str] = QUANTITIES) -> str:
    """CSV text: ``wavelength_nm`` then R, T, A (fractions 0–1) per polarisation and angle."""
    items = as_spectrum_list(spectra)
    wl = np.asarray(items[0].wavelength_nm, dtype=float)
    angles = np.atleast_1d(np.asarray(items[0].angle_deg, dtype=float))
    header = ["wavelength_nm"]
    cols = [wl]
    for s in items:
        for ia, a in enumerate(angles):
            for q in quantities:
                header.append(_column(q, s.polarization, float(a)))
                cols.append(np.asarray(getattr(s, q), dtype=float)[ia])
    buf = io.StringIO()
    buf.write(",".join(header) + "\n")
    data = np.column_stack(cols)
    for row in data:
        buf.write(f"{row[0]:.10g}," + ",".join(f"{x:.10g}" for x in row[1:]) + "\n")
    return buf.getvalue()


def write_spectrum(path: str | os.PathLike, spectra, fmt: str | None = None) -> None:
    """Write spectra to ``path`` atomically as ``'csv'`` or ``'json'`` (from the suffix if None)."""
    from .json_out import dumps_json

    fmt = (fmt or os.path.splitext(os.fspath(path))[1].lstrip(".")).lower()
    if fmt == "csv":
        text = spectrum_csv(spectra)
    elif fmt == "json":
        text = dumps_json(spectrum_json(spectra)) + "\n"
    else:
        raise ValueError(f"unknown spectrum file format {fmt!r}; expected 'csv' or 'json'")
    write_text_atomic(path, text)


def band_summary(wavelength_nm, values) -> dict:
    """Mean, minimum and maximum of ``values`` over the band, with the wavelengths of the extremes.

    Parameters
    ----------
    wavelength_nm
        Shape (W,), nm.
    values
        Shape (..., W); the statistics run over the last axis (the first extreme wins a tie).

    Returns
    -------
    dict with ``mean``, ``min``, ``min_nm``, ``max``, ``max_nm``, each of shape (...,).
    The mean is the plain mean of the samples (the band mean on an even grid).
    """
    wl = np.asarray(wavelength_nm, dtype=float)
    v = np.asarray(values, dtype=float)
    imin = np.argmin(v, axis=-1)
    imax = np.argmax(v, axis=-1)
    return {
        "mean": v.mean(axis=-1),
        "min": np.take_along_axis(v, imin[..., None], axis=-1)[..., 0],
        "min_nm": wl[imin],
        "max": np.take_along_axis(v, imax[..., None], axis=-1)[..., 0],
        "max_nm": wl[imax],
    }
