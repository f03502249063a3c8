"""The ``filmstack`` program itself: help, version, exit codes and one-line error messages.

DESIGN.md §5 fixes the exit codes: 0 success, 1 a requirement that did not pass, 2 bad input or
usage (one line on stderr, no traceback), 3 an internal error (traceback only with --debug).
The error mapping is tested on a small app built on the real root group class, with commands
that raise on purpose; the real program is tested through CliRunner and a subprocess.
"""

from __future__ import annotations

import os
import subprocess
import sys
import warnings
from pathlib import Path

import pytest
import typer
from typer.testing import CliRunner

import filmstack
from filmstack.cli import _FilmstackGroup, app
from filmstack.cli._common import STATE
from filmstack.errors import ExtrapolationWarning, InputError

ROOT = Path(__file__).resolve().parents[1]
runner = CliRunner()


def _command_paths():
    """Every (sub)command path of the real app, e.g. ['spectrum'], ['materials', 'show']."""
    root = typer.main.get_command(app)
    paths = []

    def walk(cmd, prefix):
        sub = getattr(cmd, "commands", None)
        if sub:
            for name, c in sub.items():
                walk(c, prefix + [name])
        elif prefix:
            paths.append(prefix)

    walk(root, [])
    return paths


# -- help and version ------------------------------------------------------------------------
class TestHelp:
    def test_root_help_shows_an_example_and_exit_codes(self):
        result = runner.invoke(app, ["--help"])
        assert result.exit_code == 0
        assert "Example" in result.stdout
        assert "filmstack spectrum examples/lens-ar.yaml" in result.stdout
        assert "2 bad input" in result.stdout

    def test_no_arguments_prints_help_and_succeeds(self):
        result = runner.invoke(app, [])
        assert result.exit_code == 0
        assert "Usage:" in result.stdout and "Commands:" in result.stdout

    def test_spectrum_is_registered(self):
        assert ["spectrum"] in _command_paths()

    @pytest.mark.parametrize("path", _command_paths(), ids=" ".join)
    def test_every_subcommand_help_shows_an_example(self, path):
        result = runner.invoke(app, [*path, "--help"])
        assert result.exit_code == 0, result.output
        assert "Example" in result.stdout, f"'filmstack {' '.join(path)} --help' has no example"
        assert "filmstack " + path[0] in result.stdout.split("Example", 1)[1]

    def test_short_help_option(self):
        assert runner.invoke(app, ["-h"]).exit_code == 0

    def test_version(self):
        result = runner.invoke(app, ["--version"])
        assert result.exit_code == 0
        assert result.stdout.strip() == f"filmstack {filmstack.__version__}"


# -- usage errors of the real program -----------------------------------------------------------
class TestUsageErrors:
    @pytest.mark.parametrize("args", [
        ["no-such-command"],
        ["spectrum", "x.yaml", "--no-such-option"],
        ["spectrum", "x.yaml", "--from", "abc"],
        ["spectrum", "x.yaml", "--angle"],
        ["spectrum"],        # prints help: no STACK given is asking for help, exit 0
    ])
    def test_usage_error_is_one_line_exit_2(self, args):
        result = runner.invoke(app, args)
        if args == ["spectrum"]:
            assert result.exit_code == 0 and "Usage:" in result.stdout
            return
        assert result.exit_code == 2
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1, result.stderr
        assert lines[0].startswith("filmstack: error: ")
        assert "--help" in lines[0]
        assert "Traceback" not in result.output
        assert result.stdout == ""


# -- the mapping of exceptions to exit codes, on a small app with the real group class --------------
def _demo_app():
    demo = typer.Typer(cls=_FilmstackGroup, rich_markup_mode=None, add_completion=False)

    @demo.callback()
    def root(debug: bool = typer.Option(False, "--debug")):
        """Demo."""

    @demo.command()
    def bad_input():
        """Raise an InputError."""
        raise InputError("thickness must be >= 0 nm, got -5", file="part.yaml",
                         key="layers[1].nm", line=7)

    @demo.command()
    def multiline():
        """Raise an InputError with a line break in it."""
        raise InputError("first\nsecond")

    @demo.command()
    def caret():
        """Raise an InputError with a caret display under the input."""
        raise InputError("unknown symbol 'X' at column 8: \"(HL)^7 X\"\n  (HL)^7 X\n         ^")

    @demo.command()
    def crash():
        """Raise an unexpected error."""
        raise ZeroDivisionError("division by zero in the demo")

    @demo.command()
    def interrupt():
        """Simulate Ctrl-C."""
        raise KeyboardInterrupt

    @demo.command()
    def verdict():
        """A requirement failed."""
        raise typer.Exit(1)

    @demo.command()
    def warn():
        """Issue a warning, then succeed."""
        warnings.warn("material 'X' extrapolated below 400 nm", ExtrapolationWarning)
        typer.echo("done")

    return demo


class TestExitCodes:
    demo = _demo_app()

    def test_input_error_is_exit_2_with_file_key_and_line(self):
        result = runner.invoke(self.demo, ["bad-input"])
        assert result.exit_code == 2
        assert result.stderr == ("filmstack: error: part.yaml:7, key 'layers[1].nm': thickness "
                                 "must be >= 0 nm, got -5\n")

    def test_input_error_message_is_kept_on_one_line(self):
        result = runner.invoke(self.demo, ["multiline"])
        assert result.exit_code == 2
        assert result.stderr == "filmstack: error: first second\n"

    def test_caret_display_is_dropped_from_the_one_line(self):
        result = runner.invoke(self.demo, ["caret"])
        assert result.exit_code == 2
        assert result.stderr == "filmstack: error: unknown symbol 'X' at column 8: \"(HL)^7 X\"\n"

    def test_internal_error_is_exit_3_without_traceback(self):
        result = runner.invoke(self.demo, ["crash"])
        assert result.exit_code == 3
        assert "internal error: ZeroDivisionError: division by zero in the demo" in result.stderr
        assert "--debug" in result.stderr
        assert "Traceback" not in result.stderr
        assert len(result.stderr.strip().splitlines()) == 1

    def test_internal_error_with_debug_shows_traceback(self):
        result = runner.invoke(self.demo, ["--debug", "crash"])
        assert result.exit_code == 3
        assert "Traceback (most recent call last)" in result.stderr
        assert "ZeroDivisionError" in result.stderr

    def test_debug_also_works_after_the_subcommand(self):
        result = runner.invoke(self.demo, ["crash", "--debug"])
        assert result.exit_code == 3
        assert "Traceback" in result.stderr

    def test_debug_from_environment(self):
        result = runner.invoke(self.demo, ["crash"], env={"FILMSTACK_DEBUG": "1"})
        assert "Traceback" in result.stderr

    def test_debug_does_not_stick_to_the_next_run(self):
        runner.invoke(self.demo, ["--debug", "crash"])
        result = runner.invoke(self.demo, ["crash"])
        assert "Traceback" not in result.stderr
        assert STATE.debug is False

    def test_ctrl_c_is_exit_130(self):
        result = runner.invoke(self.demo, ["interrupt"])
        assert result.exit_code == 130
        assert "interrupted" in result.stderr
        assert "Traceback" not in result.stderr

    def test_a_failed_requirement_keeps_exit_1(self):
        assert runner.invoke(self.demo, ["verdict"]).exit_code == 1

    def test_warning_is_one_line_on_stderr(self):
        result = runner.invoke(self.demo, ["warn"])
        assert result.exit_code == 0
        assert result.stdout == "done\n"
        assert result.stderr == ("filmstack: warning: material 'X' extrapolated below 400 nm "
                                 "[ExtrapolationWarning]\n")


# -- the installed entry points (a real process) ------------------------------------------------
class TestProcess:
    def _run(self, *args):
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        return subprocess.run([sys.executable, "-m", "filmstack", *args], capture_output=True,
                              text=True, env=env, cwd=ROOT, timeout=120)

    def test_python_m_filmstack_bad_input_exit_2_one_line(self, tmp_path):
        proc = self._run("spectrum", str(tmp_path / "missing.yaml"))
        assert proc.returncode == 2
        assert proc.stderr.count("\n") == 1
        assert "missing.yaml" in proc.stderr and "not found" in proc.stderr
        assert "Traceback" not in proc.stderr

    def test_stdout_closed_by_reader_is_quiet_exit_141(self):
        # `filmstack spectrum … | head`: no traceback, no "exit 1" (our code for a failed check)
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        proc = subprocess.Popen([sys.executable, "-m", "filmstack", "spectrum",
                                 "examples/lens-ar.yaml", "--step", "5"], cwd=ROOT, env=env,
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        proc.stdout.close()                      # the reader is gone before anything is written
        err = proc.stderr.read().decode()
        assert proc.wait(timeout=120) == 141
        assert "Traceback" not in err and "error" not in err

    def test_python_m_filmstack_version(self):
        proc = self._run("--version")
        assert proc.returncode == 0
        assert proc.stdout.strip() == f"filmstack {filmstack.__version__}"

    def test_help_does_not_import_heavy_libraries(self):
        # start-up budget: matplotlib, scipy.optimize and colour only inside the commands
        code = ("import sys; from filmstack.cli import main\n"
                "try:\n    main(['--help'])\nexcept SystemExit:\n    pass\n"
                "heavy = [m for m in ('matplotlib', 'scipy.optimize', 'colour') "
                "if m in sys.modules]\n"
                "print('HEAVY', heavy)")
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                              env=env, cwd=ROOT, timeout=120)
        assert proc.returncode == 0, proc.stderr
        assert "HEAVY []" in proc.stdout
