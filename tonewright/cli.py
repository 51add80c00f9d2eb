"""The ``tonewright`` command line: one sub-command per job, each in ``tonewright.commands``."""

from __future__ import annotations

import importlib

import typer

__all__ = ["app", "main"]

app = typer.Typer(
    name="tonewright",
    help="Design, tune and document tuned percussion bars, tubes and strings.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    # help texts are plain: "[target]" is a part file's table, not rich markup to eat
    rich_markup_mode=None,
)

# Each module defines register(app). Order here is the order in --help.
_COMMAND_MODULES = [
    "modes",
    "design",
    "verify",
    "shop",
    "advise",
    "instrument",
    "listen",
    "calibrate",
    "sound",
    "workbench",
]

for _name in _COMMAND_MODULES:
    importlib.import_module(f"tonewright.commands.{_name}").register(app)


def main() -> None:
    app()
