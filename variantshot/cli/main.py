"""The ``variantshot`` command: one Typer app, one module per command.

Command modules import their heavy dependencies (numba, the renderer) inside the command
function, so ``variantshot --help`` and ``--version`` stay fast and never import numba.
"""

from __future__ import annotations

import importlib

import typer

from .. import __version__

app = typer.Typer(
    name="variantshot",
    help="Turn a product catalog into finished, checked packshots: one glTF scene per variant, "
    "rendered by a CPU path tracer under a fixed studio rig.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_show_locals=False,
    # markdown: docstring paragraphs wrapped in the source reflow to the terminal's width
    rich_markup_mode="markdown",
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"variantshot {__version__}")
        raise typer.Exit()


@app.callback()
def main(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
) -> None:
    """Turn a product catalog into finished, checked packshots."""


# (command name, "module:function"); each function's docstring's first line is its one-line help.
COMMANDS: list[tuple[str, str]] = [
    ("demo", "variantshot.cli.demo:demo"),
    ("render", "variantshot.cli.render:render"),
    ("check", "variantshot.cli.check:check"),
    ("plan", "variantshot.cli.plan:plan"),
    ("expand", "variantshot.cli.expand:expand"),
    ("qa", "variantshot.cli.qa:qa"),
    ("approve", "variantshot.cli.approve:approve"),
    ("reject", "variantshot.cli.approve:reject"),
    ("sheet", "variantshot.cli.sheet:sheet"),
    ("trace", "variantshot.cli.trace:trace"),
]

for _name, _target in COMMANDS:
    _module, _func = _target.split(":")
    _fn = getattr(importlib.import_module(_module), _func)
    app.command(name=_name)(_fn)
