"""The ``bakery`` command line: a thin shell over the library.

Each capability lives in its own module under ``bakery/cli/`` and adds its commands to :data:`app` (or to
:data:`env_app` for environment maps) when imported; :data:`COMMAND_MODULES` lists them. Command modules
import heavy libraries inside their functions only, so ``bakery --help`` is fast.
"""

from __future__ import annotations

import importlib
import sys
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
                   "bakery.cli.roughness", "bakery.cli.envmaps", "bakery.cli.envlight", "bakery.cli.batch",
                   "bakery.cli.preview"]


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


def _usage_line(exc) -> str:
    """A click usage error as one line: ``--opt: message`` when an option or argument is to blame."""
    import click

    if isinstance(exc, click.BadParameter) and exc.param is not None:
        names = getattr(exc.param, "opts", None) or [exc.param.name or "value"]
        where = max(names, key=len) if exc.param.param_type_name == "option" else (exc.param.name or "").upper()
        return f"{where}: {' '.join(exc.format_message().split(': ', 1)[-1].split())}"
    return " ".join(exc.format_message().split())


def run(args: list[str] | None = None) -> int:
    """Run the command line and return its exit code. Usage mistakes (unknown option, bad option value,
    missing argument) are one ``error: ...`` line and exit code 2; Ctrl-C is one line and exit code 130.
    ``--debug`` shows click's full usage text and tracebacks instead."""
    import click

    argv = list(sys.argv[1:] if args is None else args)
    debug = "--debug" in argv[:argv.index("--")] if "--" in argv else "--debug" in argv
    try:
        rv = app(args=argv, prog_name="bakery", standalone_mode=False)
    except click.UsageError as exc:
        if debug:
            exc.show()
            return 2
        typer.echo(f"error: {_usage_line(exc)}", err=True)
        return 2
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except (click.Abort, KeyboardInterrupt):
        typer.echo("error: interrupted; no output was left half-written", err=True)
        return 130
    except click.ClickException as exc:
        typer.echo(f"error: {' '.join(exc.format_message().split())}", err=True)
        return exc.exit_code
    return rv if isinstance(rv, int) else 0


def main() -> None:
    sys.exit(run())
