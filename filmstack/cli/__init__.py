"""The ``filmstack`` command: one typer app, one module per subcommand.

Each module ``filmstack/cli/<name>.py`` listed in ``_COMMAND_MODULES`` defines
``register(app: typer.Typer) -> None`` that adds its subcommand(s); shared helpers are in
:mod:`filmstack.cli._common`. This package holds no physics.

Errors become exit codes here, in one place (DESIGN.md §5):

- 0 success; 1 a check or requirement that did not pass (commands raise ``typer.Exit(1)``);
- 2 bad input or usage — :class:`~filmstack.errors.InputError` or a command-line usage error —
  printed as one line on stderr, never with a traceback;
- 3 any other exception: a short message, the traceback only with ``--debug``
  (or ``FILMSTACK_DEBUG=1``);
- 130 interrupted with Ctrl-C; 141 stdout closed by its reader (``filmstack … | head``).

The same handling runs under ``filmstack``, ``python -m filmstack`` and typer's ``CliRunner``
(it lives in the click group's ``main``).
"""

from __future__ import annotations

import importlib
import importlib.util
import os
import sys
import traceback
import warnings

import typer
from typer.core import TyperGroup

try:        # typer >= 0.26 carries its own copy of click
    from typer._click import exceptions as _cx
except ImportError:  # pragma: no cover - older typer on top of click
    from click import exceptions as _cx

from ..errors import InputError
from ._common import (EXIT_INPUT, EXIT_INTERNAL, EXIT_INTERRUPTED, EXIT_OK, EXIT_PIPE_CLOSED,
                      STATE)

__all__ = ["app", "main"]

_COMMAND_MODULES = ("spectrum", "field", "materials", "colour", "design", "check", "fit")

_PROG = "filmstack"


def _one_line(text: str) -> str:
    """The message on one line. A caret display (a line echoing the input, then a line of
    ``^``) is dropped: the message names the column already."""
    lines = str(text).splitlines()
    keep: list[str] = []
    for ln in lines:
        if ln.strip() and set(ln.strip()) <= set("^~"):
            if keep:
                keep.pop()          # the echoed input above the caret
            continue
        keep.append(ln)
    return " ".join(" ".join(keep).split())


def _error_line(message: str) -> None:
    sys.stderr.write(f"{_PROG}: error: {_one_line(message)}\n")
    sys.stderr.flush()


def _usage_message(exc: _cx.UsageError) -> str:
    msg = _one_line(exc.format_message())
    ctx = getattr(exc, "ctx", None)
    path = ctx.command_path if ctx is not None else _PROG
    return f"{msg} (see '{path} --help')"


def _show_warning(message, category, filename, lineno, file=None, line=None):
    """Warnings as one line on stderr (no source line, no file position)."""
    name = getattr(category, "__name__", "Warning")
    sys.stderr.write(f"{_PROG}: warning: {_one_line(str(message))} [{name}]\n")


def _pop_debug(args: list[str]) -> tuple[bool, list[str]]:
    """Remove ``--debug`` wherever it stands (before a ``--``), so it works after a subcommand."""
    if "--" in args:
        cut = args.index("--")
        head, tail = args[:cut], args[cut:]
    else:
        head, tail = args, []
    debug = "--debug" in head
    return debug, [a for a in head if a != "--debug"] + tail


class _Interrupted(Exception):
    """Ctrl-C inside a command (typer would turn a KeyboardInterrupt into a silent exit 130)."""


class _PipeClosed(Exception):
    """stdout was closed by the reader (``filmstack … | head``); typer would exit 1 for it."""


class _FilmstackGroup(TyperGroup):
    """The root group: maps exceptions to exit codes and one-line messages."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except KeyboardInterrupt:
            raise _Interrupted() from None
        except BrokenPipeError:
            raise _PipeClosed() from None

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True,
             **extra):
        args = list(sys.argv[1:] if args is None else args)
        debug, args = _pop_debug(args)
        STATE.debug = debug or os.environ.get("FILMSTACK_DEBUG", "") not in ("", "0")
        old_showwarning = warnings.showwarning
        warnings.showwarning = _show_warning
        try:
            code = self._run(args, prog_name, complete_var, extra)
        finally:
            warnings.showwarning = old_showwarning
        if standalone_mode:
            sys.exit(code)
        return code

    def _run(self, args, prog_name, complete_var, extra) -> int:
        try:
            rv = super().main(args=args, prog_name=prog_name or _PROG,
                              complete_var=complete_var, standalone_mode=False, **extra)
        except _cx.NoArgsIsHelpError as exc:
            text = exc.ctx.get_help()   # a bare command asks for its help: not an error
            if text:
                typer.echo(text)
            return EXIT_OK
        except InputError as exc:
            if STATE.debug:
                traceback.print_exc()
            _error_line(str(exc))
            return EXIT_INPUT
        except _cx.UsageError as exc:
            _error_line(_usage_message(exc))
            return EXIT_INPUT
        except _cx.ClickException as exc:   # e.g. a file option click could not open
            _error_line(exc.format_message())
            return EXIT_INPUT
        except (_Interrupted, KeyboardInterrupt, typer.Abort):
            sys.stderr.write(f"\n{_PROG}: interrupted\n")
            return EXIT_INTERRUPTED
        except typer.Exit as exc:
            return exc.exit_code
        except (_PipeClosed, BrokenPipeError):
            # the reader closed stdout early (e.g. `| head`): stop quietly, as a tool killed by
            # SIGPIPE would (128 + 13), and keep Python from complaining at exit
            try:
                devnull = os.open(os.devnull, os.O_WRONLY)
                os.dup2(devnull, sys.stdout.fileno())
            except (OSError, ValueError, AttributeError):
                pass
            return EXIT_PIPE_CLOSED
        except Exception as exc:  # noqa: BLE001 - the last line of defence
            if STATE.debug:
                traceback.print_exc()
                _error_line(f"internal error: {type(exc).__name__}: {exc}")
            else:
                _error_line(f"internal error: {type(exc).__name__}: {exc} "
                            f"(run again with --debug for the traceback, and please report it)")
            return EXIT_INTERNAL
        if isinstance(rv, int) and not isinstance(rv, bool):
            return rv
        return EXIT_OK


def _version_callback(value: bool) -> None:
    if value:
        from .. import __version__

        typer.echo(f"{_PROG} {__version__}")
        raise typer.Exit()


app = typer.Typer(
    name=_PROG, cls=_FilmstackGroup, no_args_is_help=True, add_completion=False,
    pretty_exceptions_enable=False, rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
    help=(
        "Design and verify thin-film interference coatings: spectra, colour, design, "
        "compliance checks, fits to measured spectra.\n\n"
        "Example:\n\n\b\n"
        "    filmstack spectrum examples/lens-ar.yaml --from 400 --to 700 --step 5 "
        "--plot lens-ar.png\n\n"
        "Every command has --help with an example. Exit codes: 0 done, 1 a requirement "
        "failed, 2 bad input, 3 internal error."),
)


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version_callback,
                                 is_eager=True, help="Print the version and exit."),
    debug: bool = typer.Option(False, "--debug",
                               help="Show tracebacks of internal errors (also FILMSTACK_DEBUG=1)."),
) -> None:
    """Design and verify thin-film interference coatings."""
    if debug:   # normally removed by main() already; kept for direct click use
        STATE.debug = True


def register(target: typer.Typer) -> None:
    """Add every available subcommand module to ``target``."""
    for name in _COMMAND_MODULES:
        if importlib.util.find_spec(f"{__name__}.{name}") is not None:
            importlib.import_module(f"{__name__}.{name}").register(target)


register(app)


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point (``filmstack``, ``python -m filmstack``)."""
    command = typer.main.get_command(app)
    command.main(args=argv, prog_name=_PROG, standalone_mode=True)
