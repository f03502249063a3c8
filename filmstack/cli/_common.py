"""Helpers every ``filmstack`` subcommand shares: options, validation, output, progress.

What lives here (and nowhere else):

- **Exit codes** (DESIGN.md §5): :data:`EXIT_OK`, :data:`EXIT_FAILED` (a requirement did not
  pass), :data:`EXIT_INPUT` (bad input or usage), :data:`EXIT_INTERNAL`, :data:`EXIT_INTERRUPTED`.
  Commands raise :class:`~filmstack.errors.InputError` for anything the user can fix and
  ``typer.Exit(EXIT_FAILED)`` for a verdict; :func:`filmstack.cli.main` turns the rest into
  codes and one-line messages.
- **Validation of common options**, before any work is done: :func:`wavelength_grid`
  (``--from/--to/--step``), :func:`check_angles` (``--angle``), :func:`parse_polarization`
  (``--pol``), :func:`parse_range` (``--range NM:NM``), :func:`check_output` (``--out``,
  ``--plot``, ``--report``), :func:`require_file`, :func:`material_folders`
  (``--materials-dir``), :func:`check_wavelengths_in_range`.
  Reusable option declarations: :data:`FromNm`, :data:`ToNm`, :data:`StepNm`, :data:`AngleDeg`,
  :data:`Pol`, :data:`JsonFlag`, :data:`MaterialsDir`.
- **Output**: :func:`print_json` (pure JSON on stdout; numpy arrays become lists, NaN and ±inf
  become ``null``), :func:`make_table` / :func:`print_table` (rich tables on stdout),
  :func:`print_cautions` and :func:`warn` (stderr), the cautions of DESIGN.md §7 as constants.
- **Progress** for long jobs: :class:`Progress`, on stderr, which survives Ctrl-C and can turn
  the first Ctrl-C into a polite stop request.

Nothing here imports matplotlib, scipy or colour; rich is imported only when something is
printed, so ``filmstack --help`` stays fast.
"""

from __future__ import annotations

import math
import os
import signal
import sys
import threading
from pathlib import Path
from typing import Annotated, Any, Iterable, Sequence

import numpy as np
import typer

from ..errors import InputError, OutOfRangeError
from ..io.json_out import dumps_json, to_jsonable

__all__ = [
    "EXIT_OK", "EXIT_FAILED", "EXIT_INPUT", "EXIT_INTERNAL", "EXIT_INTERRUPTED",
    "EXIT_PIPE_CLOSED",
    "CAUTION_MODEL", "CAUTION_LASER", "CAUTION_COLOUR", "CAUTIONS",
    "FromNm", "ToNm", "StepNm", "AngleDeg", "Pol", "JsonFlag", "MaterialsDir",
    "POLARIZATIONS", "STATE",
    "wavelength_grid", "check_angles", "parse_polarization", "parse_polarizations",
    "parse_range", "check_output", "require_file", "check_wavelengths_in_range",
    "material_folders",
    "to_jsonable", "dumps_json", "print_json", "make_table", "print_table", "stdout_console",
    "stderr_console", "print_cautions", "warn", "Progress", "fmt_pct",
]

# --- exit codes (DESIGN.md §5) -------------------------------------------------------------
EXIT_OK = 0
EXIT_FAILED = 1        # a check or requirement that did not pass
EXIT_INPUT = 2         # bad input or usage: one line on stderr, no traceback
EXIT_INTERNAL = 3      # a bug or an unexpected condition: short message, traceback with --debug
EXIT_INTERRUPTED = 130  # Ctrl-C (128 + SIGINT), as shells report it
EXIT_PIPE_CLOSED = 141  # stdout closed by its reader (128 + SIGPIPE), as `yes | head` reports it

# --- cautions (DESIGN.md §7) ----------------------------------------------------------------
CAUTION_MODEL = (
    "Predictions assume ideal homogeneous films with the given optical constants; real films "
    "differ (packing density, inhomogeneity, absorption, interface layers). Verify with "
    "measurement.")
CAUTION_LASER = (
    "For laser optics the field profile is shown, but filmstack does not predict laser-induced "
    "damage thresholds; those are measured by the standard test methods (ISO 21254). Laser "
    "measurements follow laser-safety practice (IEC 60825-1) and local rules.")
CAUTION_COLOUR = (
    "Thickness from colour is indicative; colour repeats with thickness, cameras shift colour. "
    "Process decisions use a measured spectrum or ellipsometry, and local codes and qualified "
    "practice.")
CAUTIONS = (CAUTION_MODEL, CAUTION_LASER, CAUTION_COLOUR)

POLARIZATIONS = ("s", "p", "mean")


class _State:
    """Process-wide CLI settings, set by the root command (``--debug``)."""

    debug: bool = False


STATE = _State()

# --- reusable option declarations -------------------------------------------------------------
# Each command gives its own default, e.g. ``from_nm: FromNm = 400.0``.
FromNm = Annotated[float, typer.Option("--from", metavar="NM",
                                       help="First wavelength, nm (vacuum).")]
ToNm = Annotated[float, typer.Option("--to", metavar="NM",
                                     help="Last wavelength, nm (included if on the grid).")]
StepNm = Annotated[float, typer.Option("--step", metavar="NM", help="Wavelength step, nm.")]
AngleDeg = Annotated[list[float] | None, typer.Option(
    "--angle", "-a", metavar="DEG",
    help="Angle of incidence in degrees, 0 <= angle < 90; repeat for several.")]
Pol = Annotated[list[str] | None, typer.Option(
    "--pol", "-p", metavar="s|p|mean",
    help="Polarisation: s, p or mean (unpolarised); repeat for several.")]
JsonFlag = Annotated[bool, typer.Option(
    "--json", help="Print the result as JSON on stdout (nothing else goes to stdout).")]
MaterialsDir = Annotated[list[Path] | None, typer.Option(
    "--materials-dir", "-m", metavar="DIR",
    help="Folder of your own material files, searched before the bundled library; repeat for "
         "several (later ones first).", show_default=False)]


# --- validation -----------------------------------------------------------------------------
def _finite(value: float, option: str, unit: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{option} must be a number of {unit}, got {value!r}") from None
    if not math.isfinite(x):
        raise InputError(f"{option} must be a finite number of {unit}, got {value!r}")
    return x


def wavelength_grid(from_nm: float, to_nm: float, step_nm: float, *,
                    names: tuple[str, str, str] = ("--from", "--to", "--step"),
                    max_points: int = 1_000_001) -> np.ndarray:
    """The wavelength grid ``from_nm, from_nm + step_nm, …`` up to ``to_nm`` (included if on it).

    Parameters
    ----------
    from_nm, to_nm, step_nm
        First and last wavelength and the step, nm (vacuum). Need 0 < from <= to, step > 0;
        from = to gives that one wavelength.
    names
        The option names, for messages.
    max_points
        Refuse grids larger than this (a step typed in the wrong unit).

    Returns
    -------
    numpy.ndarray, shape (W,), float, nm; values rounded to 1e-9 nm so that 400 + 3·0.1 prints
    as 400.3.
    """
    f_name, t_name, s_name = names
    lo = _finite(from_nm, f_name, "nm")
    hi = _finite(to_nm, t_name, "nm")
    step = _finite(step_nm, s_name, "nm")
    if lo <= 0:
        raise InputError(f"{f_name} must be a wavelength > 0 nm, got {lo:g}")
    if lo > hi:
        raise InputError(f"{f_name} ({lo:g} nm) must not be above {t_name} ({hi:g} nm); "
                         f"the same value for both gives one wavelength")
    if step <= 0:
        raise InputError(f"{s_name} must be > 0 nm, got {step:g}")
    if lo == hi:
        return np.array([lo])
    n = int(math.floor((hi - lo) / step + 1e-9)) + 1
    if n > max_points:
        raise InputError(f"{s_name} {step:g} nm gives {n} wavelengths from {lo:g} to {hi:g} nm; "
                         f"at most {max_points} are allowed (use a larger {s_name})")
    return np.round(lo + step * np.arange(n), 9)


def check_angles(angles_deg: Iterable[float] | None, *, option: str = "--angle",
                 default: Sequence[float] = (0.0,)) -> np.ndarray:
    """Angles of incidence in degrees, checked: finite, 0 <= angle < 90. Shape (A,).

    ``None`` or an empty list gives ``default``. Order is kept; exact repeats are dropped.
    """
    values = list(default) if not angles_deg else list(angles_deg)
    out: list[float] = []
    for a in values:
        x = _finite(a, option, "degrees")
        if not 0.0 <= x < 90.0:
            raise InputError(f"{option} must be in 0 <= angle < 90 degrees (angle of incidence), "
                             f"got {x:g}")
        if x not in out:
            out.append(x)
    return np.asarray(out, dtype=float)


def parse_polarization(value: str, *, option: str = "--pol") -> str:
    """``'s'``, ``'p'`` or ``'mean'`` (case-insensitive); anything else is an InputError."""
    v = str(value).strip().lower()
    if v not in POLARIZATIONS:
        raise InputError(f"{option} must be s, p or mean, got {value!r}")
    return v


def parse_polarizations(values: Iterable[str] | None, *, option: str = "--pol",
                        default: Sequence[str] = ("mean",)) -> list[str]:
    """A list of polarisations from a repeatable option; commas also separate (``s,p``)."""
    items = [part for v in (values or ()) for part in str(v).split(",") if part.strip()]
    out: list[str] = []
    for item in items or list(default):
        p = parse_polarization(item, option=option)
        if p not in out:
            out.append(p)
    return out


def parse_range(text: str, *, option: str = "--range", unit: str = "nm",
                allow_zero: bool = True) -> tuple[float, float]:
    """Parse ``'LO:HI'`` (e.g. ``'0:1200'``) into two finite numbers with 0 <= LO < HI."""
    parts = str(text).split(":")
    if len(parts) != 2:
        raise InputError(f"{option} must be LO:HI in {unit} (e.g. 0:1000), got {text!r}")
    lo = _finite(parts[0].strip(), option, unit)
    hi = _finite(parts[1].strip(), option, unit)
    if lo < 0 or (lo == 0 and not allow_zero):
        raise InputError(f"{option} must start at {'>= 0' if allow_zero else '> 0'} {unit}, "
                         f"got {text!r}")
    if lo >= hi:
        raise InputError(f"{option}: LO must be below HI, got {text!r}")
    return lo, hi


def check_output(path: str | os.PathLike | None, suffixes: Sequence[str], *,
                 option: str) -> tuple[Path, str] | None:
    """Check an output file option before any work: its suffix and that its folder is writable.

    Returns ``(path, suffix)`` with the suffix lower-case and without the dot, or ``None`` when
    the option was not given.
    """
    if path is None:
        return None
    from ..io.atomic import check_writable

    p = Path(path)
    suffix = p.suffix.lower().lstrip(".")
    if suffix not in [s.lower().lstrip(".") for s in suffixes]:
        wanted = " or ".join("." + s.lstrip(".") for s in suffixes)
        raise InputError(f"{option} must be a file ending in {wanted}, got '{path}'")
    check_writable(p)
    return p, suffix


def require_file(path: str | os.PathLike, *, what: str = "file") -> Path:
    """``path`` as a :class:`Path` if it is an existing readable file; else an InputError."""
    p = Path(path)
    if not p.exists():
        raise InputError(f"no such {what}", file=str(path))
    if p.is_dir():
        raise InputError(f"is a folder; expected a {what}", file=str(path))
    if not os.access(p, os.R_OK):
        raise InputError(f"cannot read {what}: no permission", file=str(path))
    return p


def material_folders(dirs: Iterable[str | os.PathLike] | None, *,
                     option: str = "--materials-dir") -> tuple[Path, ...]:
    """The folders of ``--materials-dir``, each checked to exist (order kept)."""
    out = []
    for d in dirs or ():
        p = Path(d).expanduser()
        if p.is_file():
            raise InputError(f"{option}: '{d}' is a file; expected a folder of material files "
                             "(a single material file is named in the stack file instead)")
        if not p.is_dir():
            raise InputError(f"{option}: folder not found: {d}")
        out.append(p)
    return tuple(out)


def check_wavelengths_in_range(stack, wavelength_nm, *, file: str | None = None,
                               options: str = "--from/--to") -> None:
    """Check a stack against a wavelength grid before any computation, naming the stack file.

    Raises :class:`OutOfRangeError` if a material of ``stack`` has no data at some wavelength
    (with a hint when the grid looks like µm), and :class:`InputError` (key ``incident``) if the
    incident medium absorbs on the grid: light must arrive through a transparent medium.
    """
    wl = np.asarray(wavelength_nm, dtype=float)
    if wl.size == 0:
        return
    wmin, wmax = float(wl.min()), float(wl.max())
    for m in stack.materials:
        lo, hi = m.range_nm
        if wmin < lo or wmax > hi:
            asked = f"{wmin:g} nm" if wmin == wmax else f"{wmin:g}-{wmax:g} nm"
            hint = ""
            if wmax * 100 <= lo:
                hint = f"; wavelengths are in nm ({wmin:g} µm is {wmin * 1000:g} nm)"
            raise OutOfRangeError(
                f"material '{m.name}' has data from {lo:g} to {hi:g} nm, but {asked} was asked "
                f"for (change {options}){hint}", file=file)
    k_in = np.asarray(stack.incident.nk(wl), dtype=complex).imag
    if np.any(k_in > 0):
        i = int(np.argmax(k_in))
        raise InputError(f"the incident medium '{stack.incident.name}' absorbs (k = "
                         f"{k_in[i]:.3g} at {wl[i]:g} nm): light must arrive through a "
                         "transparent medium such as air, glass or water", file=file,
                         key="incident")


# --- JSON ---------------------------------------------------------------------------------
def print_json(obj: Any) -> None:
    """Print ``obj`` as one JSON document on stdout (the only thing on stdout with ``--json``)."""
    sys.stdout.write(dumps_json(obj) + "\n")
    sys.stdout.flush()


# --- tables and messages -------------------------------------------------------------------
def _console_class():
    from rich.console import Console

    class _Console(Console):
        def on_broken_pipe(self) -> None:
            # rich would exit 1 here (our code for a failed requirement): let the CLI decide
            self.quiet = True
            raise BrokenPipeError

    return _Console


def stdout_console():
    """A rich Console on the current stdout (100 columns wide when not a terminal)."""
    console_cls = _console_class()
    console = console_cls(file=sys.stdout, highlight=False, soft_wrap=False)
    if not console.is_terminal and "COLUMNS" not in os.environ:
        console = console_cls(file=sys.stdout, highlight=False, width=100)
    return console


def stderr_console():
    """A rich Console on the current stderr."""
    from rich.console import Console

    return Console(file=sys.stderr, highlight=False)


def make_table(*columns: str | tuple[str, str], title: str | None = None,
               caption: str | None = None):
    """A rich Table with our look. A column is a header or ``(header, justify)``."""
    from rich import box
    from rich.table import Table

    table = Table(title=title, caption=caption, box=box.SIMPLE_HEAD, title_justify="left",
                  caption_justify="left", header_style="bold", pad_edge=False,
                  show_edge=False)
    for col in columns:
        header, justify = (col, "left") if isinstance(col, str) else col
        table.add_column(header, justify=justify)
    return table


def print_table(table, *, title: str | None = None, caption: str | None = None) -> None:
    """Print a rich renderable (a table) on stdout, with a title line above and a caption below.

    Title and caption are printed as whole lines (wrapped at the terminal, not at the table).
    """
    console = stdout_console()
    if title:
        console.print(title, style="bold", markup=False)
    console.print(table)
    if caption:
        console.print(caption, style="dim", markup=False)


def print_cautions(*texts: str) -> None:
    """Print cautions (DESIGN.md §7) on stderr, one paragraph each, so stdout stays clean."""
    for text in texts:
        sys.stderr.write(f"Caution: {text}\n")
    sys.stderr.flush()


def warn(message: str) -> None:
    """A one-line warning on stderr."""
    sys.stderr.write(f"filmstack: warning: {' '.join(str(message).split())}\n")
    sys.stderr.flush()


def fmt_pct(fraction: float, digits: int = 3) -> str:
    """A fraction 0–1 as a percent string, e.g. ``0.00312 -> '0.312'``; NaN as ``'-'``."""
    if fraction is None or not math.isfinite(fraction):
        return "-"
    pct = 100.0 * float(fraction)
    if abs(pct) < 0.5 * 10.0 ** -digits:
        pct = 0.0           # no "-0.000" from round-off in 1 - R - T
    return f"{pct:.{digits}f}"


# --- progress --------------------------------------------------------------------------------
class Progress:
    """A progress display on stderr for long jobs (optimisation, Monte Carlo, batch fits).

    Use as a context manager. The display is shown only when stderr is a terminal, and is always
    taken down cleanly, also when Ctrl-C or an error ends the block.

    With ``stop_on_interrupt=True`` the first Ctrl-C does not raise: it sets
    :attr:`stop_requested`, which the job checks between steps to finish early with its best
    result so far; a second Ctrl-C raises :class:`KeyboardInterrupt` as usual.

    Examples
    --------
    >>> with Progress("refining", total=200, stop_on_interrupt=True) as progress:  # doctest: +SKIP
    ...     for i in range(200):
    ...         if progress.stop_requested:
    ...             break
    ...         step()
    ...         progress.advance(status=f"merit {merit:.4g}")
    """

    def __init__(self, description: str, total: float | None = None, *,
                 stop_on_interrupt: bool = False, enabled: bool | None = None):
        self.description = description
        self.total = total
        self.stop_on_interrupt = stop_on_interrupt
        self.enabled = sys.stderr.isatty() if enabled is None else enabled
        self.stop_requested = False
        self._progress = None
        self._task = None
        self._old_handler = None

    # context management
    def __enter__(self) -> "Progress":
        if self.enabled:
            from rich.console import Console
            from rich.progress import (BarColumn, Progress as _RichProgress, SpinnerColumn,
                                       TaskProgressColumn, TextColumn, TimeElapsedColumn)

            self._progress = _RichProgress(
                SpinnerColumn(), TextColumn("[bold]{task.description}"), BarColumn(),
                TaskProgressColumn(), TimeElapsedColumn(), TextColumn("{task.fields[status]}"),
                console=Console(file=sys.stderr), transient=True)
            self._progress.start()
            self._task = self._progress.add_task(self.description, total=self.total, status="")
        if self.stop_on_interrupt and threading.current_thread() is threading.main_thread():
            self._old_handler = signal.signal(signal.SIGINT, self._on_sigint)
        return self

    def __exit__(self, exc_type, exc, tb) -> bool:
        if self._old_handler is not None:
            signal.signal(signal.SIGINT, self._old_handler)
            self._old_handler = None
        if self._progress is not None:
            try:
                self._progress.stop()
            finally:
                self._progress = None
        return False

    def _on_sigint(self, signum, frame):
        if self.stop_requested:
            raise KeyboardInterrupt
        self.stop_requested = True
        self.note("stopping after this step with the best result so far "
                  "(Ctrl-C again to abort)")

    # updates
    def advance(self, n: float = 1, *, status: str | None = None) -> None:
        """Count ``n`` more steps done; ``status`` is a short text shown after the bar."""
        if self._progress is not None:
            kwargs = {} if status is None else {"status": status}
            self._progress.update(self._task, advance=n, **kwargs)

    def update(self, completed: float | None = None, *, total: float | None = None,
               status: str | None = None, description: str | None = None) -> None:
        """Set the absolute progress, the total, the status text or the description."""
        if self._progress is not None:
            kwargs: dict[str, Any] = {}
            if completed is not None:
                kwargs["completed"] = completed
            if total is not None:
                kwargs["total"] = total
            if status is not None:
                kwargs["status"] = status
            if description is not None:
                kwargs["description"] = description
            self._progress.update(self._task, **kwargs)

    def note(self, message: str) -> None:
        """A line of text on stderr above the bar (or alone when the bar is not shown)."""
        if self._progress is not None:
            self._progress.console.print(message, highlight=False, markup=False)
        else:
            sys.stderr.write(message + "\n")
            sys.stderr.flush()
