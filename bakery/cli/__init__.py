"""The ``bakery`` command line: a thin shell over the library.

Each capability lives in its own module under ``bakery/cli/`` and adds its commands to :data:`app` (or to
:data:`env_app` for environment maps) when imported; :data:`COMMAND_MODULES` lists them. Command modules
import heavy libraries inside their functions only, so ``bakery --help`` is fast.
"""

from __future__ import annotations

import importlib
from typing import Annotated

import typer
import typer.core

from bakery._version import __version__
from bakery.cli._common import STATE

# Arguments are described by their help text; typer's type labels (``<list[Path]>``) say nothing to users.
typer.core.TyperArgument.display_type = lambda self, ctx: ""
_OPTION_LABELS = {"<str>": "TEXT", "<path>": "PATH", "<file>": "FILE", "<float>": "NUMBER", "<int>": "INTEGER",
                  "<float range>": "NUMBER", "<int range>": "INTEGER", "<bool>": "", "<list[str]>": "PATTERN",
                  "<dir>": "FOLDER", "<float,float>": "X Y"}
_option_type = typer.core.TyperOption.display_type
typer.core.TyperOption.display_type = lambda self, ctx: (
    _OPTION_LABELS.get(label, label) if isinstance(label := _option_type(self, ctx), str) else label)

app = typer.Typer(
    name="bakery",
    help="Bake texture maps for real-time renderers: normal maps, environment maps, roughness, batches.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_show_locals=False,
    rich_markup_mode=None,
)
env_app = typer.Typer(help="Environment maps: panoramas, cubemaps, prefiltered lighting.", no_args_is_help=True,
                      rich_markup_mode=None)

#: Command modules, imported in this order (each registers its own commands).
COMMAND_MODULES = ["bakery.cli.info", "bakery.cli.inspect", "bakery.cli.demo", "bakery.cli.normals",
                   "bakery.cli.relief", "bakery.cli.roughness", "bakery.cli.envmaps", "bakery.cli.envlight",
                   "bakery.cli.batch", "bakery.cli.preview"]


def _version(value: bool) -> None:
    if value:
        typer.echo(f"bakery {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: Annotated[bool, typer.Option("--version", callback=_version, is_eager=True,
                                          help="Print the version and exit.")] = False,
    debug: Annotated[bool, typer.Option("--debug", help="Show tracebacks instead of one-line errors.")] = False,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="Print only warnings and errors.")] = False,
) -> None:
    STATE["debug"] = debug
    STATE["quiet"] = quiet


for _mod in COMMAND_MODULES:
    importlib.import_module(_mod)
if env_app.registered_commands:
    app.add_typer(env_app, name="env")


#: Options of the whole program; accepted anywhere on the command line (``bakery batch r.toml --quiet``).
GLOBAL_FLAGS = ("--quiet", "-q", "--debug")


def main(argv: list[str] | None = None) -> None:
    import sys

    args = list(sys.argv[1:] if argv is None else argv)
    if "--" not in args:  # after "--" everything is an argument
        front = [a for a in args if a in GLOBAL_FLAGS]
        args = front + [a for a in args if a not in GLOBAL_FLAGS]
    app(args=args, prog_name="bakery")
