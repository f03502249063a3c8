"""Reading measured spectra (reflectance, transmittance) from CSV files.

A measured file is a CSV table with a header line. Lines starting with ``#`` are comments; a
comment of the form ``# key: value`` with one of the keys ``angle_deg``, ``polarization``,
``site``, ``x_mm``, ``y_mm`` sets that value for the whole file (any other comment is free text,
e.g. ``# synthetic data``). Columns are separated by commas (or semicolons, or tabs: whichever
the header uses); with semicolons or tabs a decimal comma (``44,92``) is read as a decimal point.
Files as instruments export them are read as they are: free-text lines before the header (the
header is the first line naming a wavelength column), a trailing separator on every line (an
empty last column), Windows line endings, a UTF-8 byte-order mark, UTF-16 with a byte-order
mark, or Windows-1252 text. Column names are matched without regard to case or spaces:

========================  ==========================================================================
column                    meaning
========================  ==========================================================================
``wavelength_nm``         vacuum wavelength in nm (also ``wavelength``, ``wavelength (nm)``,
                          ``lambda_nm``, ``wl_nm``); required
``R`` / ``T``             reflectance / transmittance as a *fraction* 0–1 (also
                          ``reflectance``, ``transmittance``)
``R_percent``, ``R (%)``  the same in percent (any ``%`` in the name, or ``_percent``/``_pct``)
``R_s``, ``T_p``, …       a value column for one polarisation (``s``, ``p`` or ``mean``)
``sigma``                 1σ uncertainty of the one value column, in its unit (``sigma_percent``
                          or ``sigma (%)`` for percent); with several value columns,
                          ``R_sigma``, ``T_s_sigma``, … name the column they belong to
``angle_deg``             angle of incidence in degrees (also ``angle``, ``aoi_deg``): several
                          angles in one long table
``polarization``          ``s``, ``p`` or ``mean`` per row (also ``polarisation``, ``pol``)
``site``                  a site id: a long table of many sites (also ``site_id``)
``x_mm``, ``y_mm``        the site's position on the part in mm (also ``x``, ``y``)
========================  ==========================================================================

Values in fraction or percent are told by the header; ``percent=True``/``False`` (the CLI's
``--percent``/``--fraction``) decides for columns whose name says neither, and contradicting a
header that says ``%`` is an error. Every value is returned as a fraction 0–1.

A noisy measurement may stray slightly outside 0–1: values down to ``-NOISE_ALLOWANCE`` and up
to ``1 + NOISE_ALLOWANCE`` are accepted; anything beyond (``R = 35`` read as a fraction, a
negative reflectance) is an :class:`~filmstack.errors.InputError` naming file, line and column.

:func:`read_measured` takes one CSV file or a folder of them (``*.csv``, one site per file unless
the file has a ``site`` column; the site id defaults to the file name without ``.csv``).
:func:`check_wavelength_range` compares the measured wavelengths with the model's materials.
"""

from __future__ import annotations

import csv
import gc
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError, OutOfRangeError

__all__ = [
    "Channel", "Measurement", "MeasuredSet", "read_measured", "read_measured_text",
    "check_wavelength_range", "NOISE_ALLOWANCE",
]

#: How far (as a fraction) a measured value may lie outside 0–1 and still be read as noise.
NOISE_ALLOWANCE = 0.02

_POLARIZATIONS = ("s", "p", "mean")
_META_KEYS = ("angle_deg", "polarization", "site", "x_mm", "y_mm")


@dataclass(frozen=True)
class Channel:
    """One measured curve: one quantity at one angle and polarisation.

    Attributes
    ----------
    quantity
        ``"R"`` or ``"T"``.
    angle_deg
        Angle of incidence in degrees.
    polarization
        ``"s"``, ``"p"`` or ``"mean"``.
    wavelength_nm
        Wavelengths in nm, shape (W,), strictly increasing.
    value
        Measured values as fractions 0–1, shape (W,).
    sigma
        1σ uncertainties as fractions, shape (W,), or ``None`` when the file gives none.
    line
        1-based line of each point in its file, shape (W,) (for messages).
    """

    quantity: str
    angle_deg: float
    polarization: str
    wavelength_nm: np.ndarray
    value: np.ndarray
    sigma: np.ndarray | None = None
    line: np.ndarray | None = None

    @property
    def label(self) -> str:
        """A short name such as ``R 8° mean``."""
        return f"{self.quantity} {self.angle_deg:g}° {self.polarization}"


@dataclass(frozen=True)
class Measurement:
    """The measured spectra of one sample or one site of a map.

    Attributes
    ----------
    channels
        The measured curves (at least one).
    site
        The site id (file name for a single file).
    x_mm, y_mm
        Position on the part in mm, or ``None``.
    file
        The file it was read from.
    """

    channels: tuple[Channel, ...]
    site: str = ""
    x_mm: float | None = None
    y_mm: float | None = None
    file: str | None = None

    @property
    def n_points(self) -> int:
        """Number of measured values over all channels."""
        return int(sum(c.wavelength_nm.size for c in self.channels))

    @property
    def has_sigma(self) -> bool:
        """True if every channel carries uncertainties."""
        return all(c.sigma is not None for c in self.channels)

    @property
    def wavelength_range_nm(self) -> tuple[float, float]:
        """(min, max) measured wavelength over all channels, nm."""
        lo = min(float(c.wavelength_nm[0]) for c in self.channels)
        hi = max(float(c.wavelength_nm[-1]) for c in self.channels)
        return lo, hi

    def layout_key(self) -> tuple:
        """A hashable description of the channels' quantities, angles, polarisations and
        wavelengths: sites with equal keys can be fitted together in one batch."""
        return tuple((c.quantity, c.angle_deg, c.polarization, c.sigma is not None,
                      c.wavelength_nm.tobytes()) for c in self.channels)


@dataclass(frozen=True)
class MeasuredSet:
    """Everything read from a file or folder: one or more sites.

    ``is_map`` is true for more than one site or when sites carry x, y positions.
    """

    sites: tuple[Measurement, ...]
    source: str = ""

    def __len__(self) -> int:
        return len(self.sites)

    @property
    def is_map(self) -> bool:
        return len(self.sites) > 1

    @property
    def has_positions(self) -> bool:
        """True if every site has x and y."""
        return all(s.x_mm is not None and s.y_mm is not None for s in self.sites)


# --- header parsing ----------------------------------------------------------------------------
_PCT_RE = re.compile(r"(?:[_\s]*(?:\(%\)|\[%\]|%|percent|pct))$")


def _norm(name: str) -> str:
    return " ".join(name.strip().lower().split())


def _strip_pct(name: str) -> tuple[str, bool]:
    """Remove a percent marker from a normalised column name; return (rest, had_marker)."""
    n = name
    if n.startswith("%"):
        return n[1:].strip(" _"), True
    m = _PCT_RE.search(n)
    if m and m.start() > 0:
        return n[:m.start()].strip(" _"), True
    return n, False


_WAVELENGTH_NAMES = {"wavelength_nm", "wavelength", "wavelength (nm)", "wavelength [nm]",
                     "wavelength nm", "lambda_nm", "lambda", "lambda (nm)", "wl_nm", "wl",
                     "wl (nm)", "nm"}
_WAVELENGTH_OTHER_UNIT = re.compile(r"^(wavelength|lambda|wl)[\s_]*[(\[]?\s*(um|µm|μm|micron|"
                                    r"microns|a|å|angstrom|cm-1|1/cm|ev)\s*[)\]]?$")
_ANGLE_NAMES = {"angle_deg", "angle", "aoi_deg", "aoi", "angle (deg)", "angle [deg]"}
_POL_NAMES = {"polarization", "polarisation", "pol"}
_SITE_NAMES = {"site", "site_id", "site id"}
_X_NAMES = {"x_mm", "x", "x (mm)", "x [mm]"}
_Y_NAMES = {"y_mm", "y", "y (mm)", "y [mm]"}
#: Columns that are not values, by role (first match wins).
_ROLE_NAMES = (("angle", _ANGLE_NAMES), ("polarization", _POL_NAMES), ("site", _SITE_NAMES),
               ("x", _X_NAMES), ("y", _Y_NAMES))
_VALUE_RE = re.compile(r"^(r|t|reflectance|transmittance)(?:[_\s]?(s|p|mean))?$")
_SIGMA_RE = re.compile(r"^(?:(?:sigma|u|uncertainty)(?:[_\s]?(r|t)(?:[_\s]?(s|p|mean))?)?"
                       r"|(r|t)(?:[_\s]?(s|p|mean))?[_\s](?:sigma|u|uncertainty))$")

_RECOGNISED = ("wavelength_nm; R, T (fractions) or R_percent, T_percent, 'R (%)'; R_s, R_p, "
               "T_s, T_p; sigma or R_sigma (uncertainty); angle_deg; polarization; site; "
               "x_mm; y_mm")


@dataclass
class _ValueCol:
    index: int
    name: str
    quantity: str
    polarization: str | None
    percent: bool | None       # True/False from the header, None if it says neither
    sigma_index: int | None = None
    sigma_name: str | None = None
    sigma_percent: bool | None = None


@dataclass
class _Columns:
    wavelength: int
    values: list[_ValueCol]
    angle: int | None = None
    polarization: int | None = None
    site: int | None = None
    x: int | None = None
    y: int | None = None
    names: list[str] = field(default_factory=list)


def _parse_header(names: list[str], file: str, line: int) -> _Columns:
    """Map header names to roles; InputError for unknown, repeated or missing columns."""
    roles: dict[str, int] = {}
    values: list[_ValueCol] = []
    sigmas: list[tuple[int, str, str | None, str | None, bool]] = []
    unknown: list[str] = []

    def put(role: str, i: int):
        if role in roles:
            raise InputError(f"columns '{names[roles[role]]}' and '{names[i]}' both give the "
                             f"{role.replace('_', ' ')}; keep one", file=file, line=line)
        roles[role] = i

    for i, raw in enumerate(names):
        n = _norm(raw)
        if not n:
            raise InputError(f"column {i + 1} has no name in the header", file=file, line=line)
        if n in _WAVELENGTH_NAMES:
            put("wavelength", i)
            continue
        if _WAVELENGTH_OTHER_UNIT.match(n):
            raise InputError(f"column '{raw}': wavelengths must be given in nm "
                             "(name the column wavelength_nm)", file=file, line=line)
        role = next((r for r, names in _ROLE_NAMES if n in names), None)
        if role is not None:
            put(role, i)
            continue
        base, pct = _strip_pct(n)
        m = _VALUE_RE.match(base)
        if m:
            values.append(_ValueCol(i, raw.strip(), m.group(1)[0].upper(), m.group(2),
                                    True if pct else None))
            continue
        m = _SIGMA_RE.match(base)
        if m:
            q = m.group(1) or m.group(3)
            p = m.group(2) or m.group(4)
            sigmas.append((i, raw.strip(), q.upper() if q else None, p, pct))
            continue
        unknown.append(raw.strip())

    found = ", ".join(n.strip() for n in names)
    if "wavelength" not in roles:
        raise InputError("no wavelength column: expected a column named wavelength_nm "
                         f"(found: {found})", file=file, line=line)
    if unknown:
        raise InputError(f"unknown column '{unknown[0]}'; recognised columns: {_RECOGNISED}",
                         file=file, line=line)
    if not values:
        raise InputError("no measured value column: expected R or T (fractions 0-1) or "
                         f"R_percent / T_percent (found: {', '.join(n.strip() for n in names)})",
                         file=file, line=line)
    keys = [(v.quantity, v.polarization) for v in values]
    for k in set(keys):
        if keys.count(k) > 1:
            dup = [v.name for v in values if (v.quantity, v.polarization) == k]
            raise InputError(f"columns {', '.join(repr(d) for d in dup)} give the same quantity; "
                             "keep one", file=file, line=line)
    if "polarization" in roles and any(v.polarization for v in values):
        raise InputError("a polarization column and value columns named for a polarisation "
                         "(R_s, R_p) cannot be combined", file=file, line=line)
    for i, raw, q, p, pct in sigmas:
        if q is None:
            if len(values) != 1:
                raise InputError(f"column '{raw}': with several value columns, name the "
                                 "uncertainty after its column (e.g. R_sigma, T_s_sigma)",
                                 file=file, line=line)
            target = values[0]
        else:
            match = [v for v in values if v.quantity == q and v.polarization == p]
            if not match:
                raise InputError(f"uncertainty column '{raw}' has no value column "
                                 f"{q}{'_' + p if p else ''}", file=file, line=line)
            target = match[0]
        if target.sigma_index is not None:
            raise InputError(f"columns '{target.sigma_name}' and '{raw}' both give the "
                             f"uncertainty of '{target.name}'", file=file, line=line)
        target.sigma_index, target.sigma_name = i, raw
        target.sigma_percent = True if pct else None
    return _Columns(wavelength=roles["wavelength"], values=values, angle=roles.get("angle"),
                    polarization=roles.get("polarization"), site=roles.get("site"),
                    x=roles.get("x"), y=roles.get("y"), names=[n.strip() for n in names])


# --- reading -----------------------------------------------------------------------------------
def _number(text: str, what: str, file: str, line: int) -> float:
    t = text.strip()
    if not t:
        raise InputError(f"empty cell in column '{what}' (expected a number)", file=file,
                         line=line)
    try:
        x = float(t)
    except ValueError:
        raise InputError(f"column '{what}': {t!r} is not a number", file=file,
                         line=line) from None
    if not math.isfinite(x):
        raise InputError(f"column '{what}': {t!r} is not a finite number", file=file, line=line)
    return x


def _parse_meta(key: str, value: str, file: str, line: int):
    if key == "polarization":
        v = value.strip().lower()
        if v not in _POLARIZATIONS:
            raise InputError(f"polarization must be s, p or mean, got {value.strip()!r}",
                             file=file, line=line)
        return v
    if key == "site":
        return value.strip()
    x = _number(value, key, file, line)
    if key == "angle_deg" and not 0.0 <= x < 90.0:
        raise InputError(f"angle_deg must be in 0 <= angle < 90 degrees, got {x:g}",
                         file=file, line=line)
    return x


#: Measured wavelengths all below this (nm) are taken for µm written in a nm column.
_MIN_PLAUSIBLE_NM = 50.0

#: How many lines of an instrument's free-text preamble are searched for the header line.
_PREAMBLE_LINES = 200

_META_RE = re.compile(r"^#\s*([A-Za-z_]+)\s*[:=]\s*(.*?)\s*$")


def read_measured_text(text: str, name: str = "<text>", *, percent: bool | None = None,
                       angle_deg: float | None = None, polarization: str | None = None,
                       default_site: str | None = None) -> list[Measurement]:
    """Parse the text of one measured CSV file into its sites (see the module docstring).

    Parameters
    ----------
    text
        The file's content.
    name
        The file name, for messages.
    percent
        ``True``: value columns whose name says neither fraction nor percent hold percent;
        ``False``: they hold fractions; ``None``: as the header says (a bare ``R`` is a fraction).
    angle_deg, polarization
        Used where the file gives no angle / polarisation (default 0° and ``"mean"``); a file
        that states a different one is an error.
    default_site
        The site id when the file has no ``site`` column or comment (default: ``name``'s stem).

    Returns
    -------
    list of :class:`Measurement`, one per site, in the order of first appearance.
    """
    # Millions of small lists (the cells) would make Python's cyclic garbage collector run over
    # and over (10x the parsing time for a 10,000-site map); none of them forms a cycle.
    enabled = gc.isenabled()
    gc.disable()
    try:
        return _read_measured_text(text, name, percent=percent, angle_deg=angle_deg,
                                   polarization=polarization, default_site=default_site)
    finally:
        if enabled:
            gc.enable()


def _read_measured_text(text: str, name: str, *, percent, angle_deg, polarization,
                        default_site) -> list[Measurement]:
    """The body of :func:`read_measured_text`."""
    file = name
    meta: dict[str, tuple[object, int]] = {}
    header: list[str] | None = None
    header_line = 0
    data_lines: list[str] = []
    data_line_no: list[int] = []
    delimiter = ","
    all_lines = text.splitlines()
    k = 0
    while k < len(all_lines):                       # comments and the header line
        lineno, s = k + 1, all_lines[k].strip()
        k += 1
        if not s:
            continue
        if s.startswith("#"):
            m = _META_RE.match(s)
            if m and m.group(1).lower() in _META_KEYS:
                key = m.group(1).lower()
                if key in meta:
                    raise InputError(f"'{key}' is given twice in the comments (first on line "
                                     f"{meta[key][1]})", file=file, line=lineno)
                meta[key] = (_parse_meta(key, m.group(2), file, lineno), lineno)
            continue
        delimiter = _delimiter(s)
        header = next(csv.reader([s], delimiter=delimiter))
        header_line = lineno
        if not _names_wavelength(header):
            # An instrument's export often starts with free text (model, operator, date,
            # settings) before the table: the header is the first line naming a wavelength.
            for j in range(k, min(len(all_lines), k + _PREAMBLE_LINES)):
                t = all_lines[j].strip()
                if not t or t.startswith("#"):
                    continue
                d = _delimiter(t)
                cand = next(csv.reader([t], delimiter=d))
                if len(cand) > 1 and _names_wavelength(cand):
                    delimiter, header, header_line, k = d, cand, j + 1, j + 1
                    break
        while len(header) > 1 and not header[-1].strip():
            header.pop()                            # a trailing separator: an empty column
        break
    if header is not None:                          # the data rows: skip blanks and comments
        ncol = len(header)
        rest = all_lines[k:]
        cells = None
        if all(rest) and not any("#" in line for line in rest):
            data_lines = rest                       # the usual file: nothing to skip
            data_line_no = range(k + 1, k + 1 + len(rest))
            cells = _split(data_lines, delimiter, text)
            if any(len(row) != ncol for row in cells):
                cells = _drop_empty_tail(cells, ncol)
            if any(len(row) != ncol for row in cells):
                cells = None                        # e.g. a line of spaces: the careful way
        if cells is None:
            data_idx = [i for i in range(k, len(all_lines))
                        if all_lines[i] and not all_lines[i].isspace()
                        and not all_lines[i].lstrip().startswith("#")]
            data_line_no = [i + 1 for i in data_idx]
            data_lines = [all_lines[i] for i in data_idx]
            cells = _drop_empty_tail(_split(data_lines, delimiter, text), ncol)
        del all_lines, rest
        if any(len(row) != ncol for row in cells):
            kk = next(i for i, row in enumerate(cells) if len(row) != ncol)
            raise InputError(f"{len(cells[kk])} cells where the header has {ncol} columns",
                             file=file, line=data_line_no[kk])
    if header is None:
        raise InputError("no header line: expected column names such as wavelength_nm,R",
                         file=file)
    cols = _parse_header(header, file, header_line)
    if not data_lines:
        raise InputError("no data rows below the header", file=file, line=header_line)

    # Percent or fraction, per value column.
    for v in cols.values:
        if v.percent is True and percent is False:
            raise InputError(f"column '{v.name}' says percent but fractions were asked for "
                             "(--fraction); drop one", file=file, line=header_line)
        if v.percent is None:
            v.percent = bool(percent)
        if v.sigma_index is not None and v.sigma_percent is None:
            v.sigma_percent = v.percent

    # Defaults from comments and options.
    def from_meta(key, option, default, option_name):
        if key in meta:
            val, lineno = meta[key]
            if option is not None and option != val:
                raise InputError(f"the file gives {key} {val} but {option_name} {option} was "
                                 "asked for", file=file, line=lineno)
            return val
        return default if option is None else option

    if polarization is not None and polarization not in _POLARIZATIONS:
        raise InputError(f"polarization must be s, p or mean, got {polarization!r}")
    if cols.angle is not None and "angle_deg" in meta:
        raise InputError("angle given both in a comment and in an angle column; keep one",
                         file=file, line=meta["angle_deg"][1])
    if cols.polarization is not None and "polarization" in meta:
        raise InputError("polarization given both in a comment and in a column; keep one",
                         file=file, line=meta["polarization"][1])
    file_angle = from_meta("angle_deg", angle_deg, 0.0, "angle")
    file_pol = from_meta("polarization", polarization, "mean", "polarization")
    site_default = meta["site"][0] if "site" in meta else (
        default_site if default_site is not None else Path(name).stem)
    x_meta = meta.get("x_mm", (None, 0))[0]
    y_meta = meta.get("y_mm", (None, 0))[0]
    if cols.site is not None and "site" in meta:
        raise InputError("site given both in a comment and in a column; keep one",
                         file=file, line=meta["site"][1])

    # Columns as arrays (one pass per column; a bad cell is then found for its message).
    name_of = cols.names
    line_no = np.asarray(data_line_no, dtype=np.int64)
    text_cols = list(zip(*cells))
    del cells
    n_rows = line_no.size

    def numeric(ci: int) -> np.ndarray:
        txt = text_cols[ci]
        try:
            arr = np.fromiter(map(float, txt), dtype=float, count=len(txt))
        except ValueError:
            arr = None
            if delimiter != ",":                    # a decimal comma ('400,5;44,921')
                try:
                    arr = np.fromiter((float(t.replace(",", ".")) for t in txt), dtype=float,
                                      count=len(txt))
                except ValueError:
                    arr = None
        if arr is None or not np.all(np.isfinite(arr)):
            for ln, t in zip(line_no, txt):          # raises at the first bad cell
                if delimiter != "," and "," in t:
                    t = t.replace(",", ".")
                _number(t, name_of[ci], file, int(ln))
        return arr

    def first(mask) -> int:
        return int(np.argmax(mask))

    wl = numeric(cols.wavelength)
    if np.any(wl <= 0):
        i = first(wl <= 0)
        raise InputError(f"wavelength {wl[i]:g} nm must be > 0", file=file, line=int(line_no[i]))
    if wl.max() < _MIN_PLAUSIBLE_NM:
        raise InputError(f"column '{name_of[cols.wavelength]}': wavelengths {wl.min():g} to "
                         f"{wl.max():g} look like µm; give them in nm (e.g. 400, not 0.4)",
                         file=file, line=int(line_no[0]))
    if cols.angle is not None:
        ang = numeric(cols.angle)
        bad = (ang < 0.0) | (ang >= 90.0)
        if bad.any():
            i = first(bad)
            raise InputError(f"angle {ang[i]:g} must be in 0 <= angle < 90 degrees",
                             file=file, line=int(line_no[i]))
        if angle_deg is not None and np.any(ang != angle_deg):
            i = first(ang != angle_deg)
            raise InputError(f"the file gives angle {ang[i]:g} but angle {angle_deg:g} was "
                             "asked for", file=file, line=int(line_no[i]))
    else:
        ang = np.full(n_rows, float(file_angle))
    if cols.polarization is not None:
        raw_pol = text_cols[cols.polarization]
        pol = np.array([t.strip().lower() for t in raw_pol])
        bad = ~np.isin(pol, _POLARIZATIONS)
        if bad.any():
            i = first(bad)
            raise InputError(f"column '{name_of[cols.polarization]}': {raw_pol[i].strip()!r} "
                             "is not s, p or mean", file=file, line=int(line_no[i]))
        if polarization is not None and np.any(pol != polarization):
            i = first(pol != polarization)
            raise InputError(f"the file gives polarization {pol[i]} but {polarization} was "
                             "asked for", file=file, line=int(line_no[i]))
    else:
        pol = None
    if cols.site is not None:
        lut: dict[str, int] = {}                    # site id -> number, first appearance first
        site_i = np.fromiter((lut.setdefault(t, len(lut))
                              for t in map(str.strip, text_cols[cols.site])),
                             dtype=np.int64, count=n_rows)
        if "" in lut:
            i = first(site_i == lut[""])
            raise InputError(f"empty site id in column '{name_of[cols.site]}'", file=file,
                             line=int(line_no[i]))
        site_names = np.array(list(lut), dtype=object)
    else:
        site_i = np.zeros(n_rows, dtype=np.int64)
        site_names = np.array([str(site_default)], dtype=object)
    site_first = np.full(site_names.size, n_rows, dtype=np.int64)
    np.minimum.at(site_first, site_i, np.arange(n_rows))
    pos = {}
    for key, idx, metaval in (("x", cols.x, x_meta), ("y", cols.y, y_meta)):
        if idx is None:
            pos[key] = None if metaval is None else np.full(site_names.size, float(metaval))
            continue
        v = numeric(idx)
        ref = v[site_first][site_i]
        if np.any(v != ref):
            i = first(v != ref)
            j = site_first[site_i[i]]
            raise InputError(f"site '{site_names[site_i[i]]}' has {key} = {ref[i]:g} mm on "
                             f"line {line_no[j]} but {v[i]:g} mm here; one position per site",
                             file=file, line=int(line_no[i]))
        pos[key] = v[site_first]

    # Every measured value as one point: (site, value column, angle, polarisation, wavelength).
    parts = []
    pol_names = list(_POLARIZATIONS)
    for vi, v in enumerate(cols.values):
        value = numeric(v.index)
        scale = 0.01 if v.percent else 1.0
        frac = value * scale
        bad = (frac < -NOISE_ALLOWANCE) | (frac > 1.0 + NOISE_ALLOWANCE)
        if bad.any():
            i = first(bad)
            _check_value(float(value[i]), scale, v, file, int(line_no[i]))
        sig = None
        if v.sigma_index is not None:
            sig = numeric(v.sigma_index)
            if np.any(sig <= 0):
                i = first(sig <= 0)
                raise InputError(f"column '{v.sigma_name}': uncertainty {sig[i]:g} must be > 0",
                                 file=file, line=int(line_no[i]))
            sig = sig * (0.01 if v.sigma_percent else 1.0)
        if v.polarization is not None:
            p_i = np.full(n_rows, pol_names.index(v.polarization))
        elif pol is not None:
            p_i = np.select([pol == name for name in pol_names], range(len(pol_names)))
        else:
            p_i = np.full(n_rows, pol_names.index(file_pol))
        parts.append((vi, frac, sig, p_i))
    ang_u, ang_i = np.unique(ang, return_inverse=True)
    ang_i = ang_i.ravel()
    rows_idx = np.arange(n_rows)
    out_channels: dict[int, list] = {k: [] for k in range(site_names.size)}
    for vi, frac, sig, p_i in parts:
        v = cols.values[vi]
        order = np.lexsort((wl, p_i, ang_i, site_i))
        key = (site_i * ang_u.size + ang_i) * len(pol_names) + p_i
        ks = key[order]
        cut = np.flatnonzero(np.diff(ks)) + 1
        for g in np.split(order, cut):
            w = wl[g]
            dup = np.flatnonzero(np.diff(w) == 0)
            s_k, a_k, q_k = site_i[g[0]], ang_i[g[0]], p_i[g[0]]
            if dup.size:
                la, lb = sorted((int(line_no[g[dup[0]]]), int(line_no[g[dup[0] + 1]])))
                where = f" for site '{site_names[s_k]}'" if cols.site is not None else ""
                raise InputError(f"wavelength {w[dup[0]]:g} nm appears twice{where} for "
                                 f"{v.quantity} at {ang_u[a_k]:g}° {pol_names[q_k]} (lines "
                                 f"{la} and {lb})", file=file, line=lb)
            ch = Channel(v.quantity, float(ang_u[a_k]), pol_names[q_k], w, frac[g],
                         None if sig is None else sig[g], line_no[g])
            first_pos = int(rows_idx[g].min()) * len(cols.values) + vi
            out_channels[s_k].append((first_pos, ch))

    out = []
    for k in np.argsort(site_first, kind="stable"):
        x = None if pos["x"] is None else float(pos["x"][k])
        y = None if pos["y"] is None else float(pos["y"][k])
        if (x is None) != (y is None):
            raise InputError(f"site '{site_names[k]}' has only one of x_mm, y_mm; give both or "
                             "neither", file=file, line=int(line_no[site_first[k]]))
        chans = tuple(ch for _, ch in sorted(out_channels[k], key=lambda t: t[0]))
        out.append(Measurement(chans, str(site_names[k]), x, y, file))
    return out


def _delimiter(line: str) -> str:
    """The separator a header line uses: the most frequent of comma, semicolon and tab."""
    return max((",", ";", "\t"), key=line.count) if any(d in line for d in ",;\t") else ","


def _names_wavelength(cells: list[str]) -> bool:
    """True if a cell of a (candidate) header line names a wavelength column, in nm or not."""
    return any(_norm(c) in _WAVELENGTH_NAMES or _WAVELENGTH_OTHER_UNIT.match(_norm(c))
               for c in cells)


def _drop_empty_tail(cells: list[list[str]], ncol: int) -> list[list[str]]:
    """Rows cut to ``ncol`` cells where the cells beyond are empty (a trailing separator, as
    many instruments and spreadsheets write); other rows are left for the caller to report."""
    return [row[:ncol] if len(row) > ncol and not "".join(row[ncol:]).strip() else row
            for row in cells]


def _split(lines: list[str], delimiter: str, text: str) -> list[list[str]]:
    """Cells of each line: the csv module when the file quotes anything, else a plain split
    (twice as fast, the same result without quotes)."""
    if '"' in text:
        return list(csv.reader(lines, delimiter=delimiter))
    return [line.split(delimiter) for line in lines]


def _check_value(value: float, scale: float, col: _ValueCol, file: str, line: int) -> None:
    frac = value * scale
    what = {"R": "reflectance", "T": "transmittance"}[col.quantity]
    unit = "percent" if col.percent else "a fraction"
    full = "0 to 100" if col.percent else "0 to 1"
    if frac < -NOISE_ALLOWANCE:
        raise InputError(f"column '{col.name}': {value:g} is out of range: {what} as {unit} "
                         f"runs {full} (down to {-NOISE_ALLOWANCE / scale:g} is accepted as "
                         "noise)", file=file, line=line)
    if frac > 1.0 + NOISE_ALLOWANCE:
        hint = ""
        if not col.percent and value <= 100.0 + 100 * NOISE_ALLOWANCE:
            hint = (f"; if the values are percent, name the column {col.quantity}_percent "
                    "or use --percent")
        raise InputError(f"column '{col.name}': {value:g} is out of range: {what} as {unit} "
                         f"runs {full} (up to {(1 + NOISE_ALLOWANCE) / scale:g} is accepted as "
                         f"noise){hint}", file=file, line=line)


def _read_text(p: Path) -> str:
    """The text of a measured file: UTF-8 (with or without a byte-order mark), UTF-16 with a
    byte-order mark (Windows "Unicode text" exports), else Windows-1252 (a degree sign or µ in
    an instrument's header written by an older Windows program)."""
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise InputError("file not found", file=str(p)) from None
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", file=str(p)) from None
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        try:
            return data.decode("utf-16")
        except UnicodeDecodeError as exc:
            raise InputError(f"not UTF-16 text ({exc.reason} at byte {exc.start})",
                             file=str(p)) from None
    if b"\x00" in data:
        raise InputError(f"not a text file (binary data at byte {data.index(0)}); export the "
                         "measurement as CSV text", file=str(p))
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        return data.decode("cp1252", errors="replace")


def read_measured(path, *, percent: bool | None = None, angle_deg: float | None = None,
                  polarization: str | None = None) -> MeasuredSet:
    """Read measured spectra from a CSV file or a folder of CSV files.

    Parameters
    ----------
    path
        A ``.csv`` file (one sample, or a long table with a ``site`` column) or a folder whose
        ``*.csv`` files are read in name order (one site per file, named by the file's stem,
        unless a file has a ``site`` column or ``# site:`` comment).
    percent, angle_deg, polarization
        See :func:`read_measured_text`.

    Returns
    -------
    MeasuredSet
        All sites; values as fractions 0–1, wavelengths in nm.

    Raises
    ------
    InputError
        Naming the file, the line and the column: no wavelength column, a cell that is not a
        number, a value out of range, a repeated wavelength, an empty folder, a site id given
        twice.
    """
    p = Path(path)
    if p.is_dir():
        files = sorted(f for f in p.iterdir() if f.is_file() and f.suffix.lower() == ".csv")
        if not files:
            raise InputError("folder has no .csv files", file=str(p))
    elif p.exists():
        files = [p]
    else:
        raise InputError("no such file or folder", file=str(p))
    sites: list[Measurement] = []
    seen: dict[str, str] = {}
    for f in files:
        for m in read_measured_text(_read_text(f), str(f), percent=percent,
                                    angle_deg=angle_deg, polarization=polarization,
                                    default_site=f.stem):
            if m.site in seen:
                raise InputError(f"site '{m.site}' appears in {seen[m.site]} and in this file; "
                                 "site ids must be unique", file=str(f))
            seen[m.site] = str(f)
            sites.append(m)
    if len(sites) > 1:
        with_pos = [s.x_mm is not None for s in sites]
        if any(with_pos) and not all(with_pos):
            missing = next(s for s in sites if s.x_mm is None)
            raise InputError(f"site '{missing.site}' has no x_mm, y_mm position while other "
                             "sites have one", file=missing.file)
    return MeasuredSet(tuple(sites), str(p))


def check_wavelength_range(measured: MeasuredSet | Measurement, stack, *,
                           margin_nm: tuple[float, float] = (0.0, 0.0),
                           model_file: str | None = None) -> None:
    """Raise :class:`~filmstack.errors.OutOfRangeError` if a material of ``stack`` has no data
    over the measured wavelengths.

    Parameters
    ----------
    measured
        A measured set or one measurement.
    stack
        The model :class:`~filmstack.stack.Stack`.
    margin_nm
        (below, above) extra wavelength range the model will be evaluated at, nm (e.g. the
        bounds of a fitted wavelength shift).
    model_file
        The stack file, named in the message.
    """
    sites = measured.sites if isinstance(measured, MeasuredSet) else (measured,)
    lo = min(s.wavelength_range_nm[0] for s in sites) + min(0.0, margin_nm[0])
    hi = max(s.wavelength_range_nm[1] for s in sites) + max(0.0, margin_nm[1])
    first = sites[0].file
    for m in stack.materials:
        mlo, mhi = m.range_nm
        if lo < mlo or hi > mhi:
            where = f" of the model{(' ' + model_file) if model_file else ''}"
            raise OutOfRangeError(
                f"measured wavelengths {lo:g}-{hi:g} nm lie outside the data of material "
                f"'{m.name}'{where} ({mlo:g}-{mhi:g} nm); trim the measured range or use a "
                "material with data there", file=first)
