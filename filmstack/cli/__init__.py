"""The ``filmstack`` command: one typer app, one module per subcommand.

Each module ``filmstack/cli/<name>.py`` listed in ``_COMMAND_MODULES`` defines
``register(app: typer.Typer) -> None`` that adds its subcommand(s). This package holds no physics.
(Skeleton: the command-line issue writes error handling, output helpers and ``main``.)
"""

from __future__ import annotations

import importlib
import importlib.util

import typer

_COMMAND_MODULES = ("spectrum", "materials", "colour", "design", "check", "fit")

app = typer.Typer(name="filmstack", no_args_is_help=True, add_completion=False,
                  help="Design and verify thin-film interference coatings.")

for _name in _COMMAND_MODULES:
    if importlib.util.find_spec(f"{__name__}.{_name}") is not None:
        importlib.import_module(f"{__name__}.{_name}").register(app)


def main() -> None:
    """Console-script entry point."""
    app()
