"""The ``bakery`` command line: a thin shell over the library.

Each capability lives in its own module under ``bakery/cli/`` and adds its commands to :data:`app` (or to
:data:`env_app` for environment maps) when imported; :data:`COMMAND_MODULES` lists them. Command modules
import heavy libraries inside their functions only, so ``bakery --help`` is fast.
"""

from __future__ import annotations

import importlib
import os
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
                   "bakery.cli.relief", "bakery.cli.roughness", "bakery.cli.envmaps", "bakery.cli.envlight",
                   "bakery.cli.batch", "bakery.cli.preview", "bakery.cli.pack"]


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
    # --debug keeps what decoder libraries print about a bad file (bakery.io.images.quiet_decoders); set for
    # this run only, as several runs can share one process (tests, scripts calling bakery.cli.run)
    if debug:
        os.environ["BAKERY_DECODER_MESSAGES"] = "1"
    else:
        os.environ.pop("BAKERY_DECODER_MESSAGES", None)
    STATE["quiet"] = quiet


for _mod in COMMAND_MODULES:
    importlib.import_module(_mod)
if env_app.registered_commands:
    app.add_typer(env_app, name="env")


#: Options of the whole program; accepted anywhere on the command line (``bakery batch r.toml --quiet``).
GLOBAL_FLAGS = ("--quiet", "-q", "--debug")


def _usage_line(exc) -> str:
    """A usage error of the option parser as one line, naming the option or argument: ``--blur: ...``."""
    param = getattr(exc, "param", None)
    if param is None:
        return " ".join(exc.format_message().split())
    if param.param_type_name == "option":
        where = max(param.opts, key=len)
    else:
        where = (param.name or "argument").removeprefix("in_").upper()
    message = " ".join(str(exc.message or "").split()).removeprefix("Value error, ")
    if type(exc).__name__ == "MissingParameter":
        message = "missing" if not message else message
    return f"{where}: {message}"


def run(args: list[str] | None = None) -> int:
    """Run the command line and return its exit code. Usage mistakes (unknown option, bad option value,
    missing argument) are one ``error: ...`` line and exit code 2; Ctrl-C is one line and exit code 130.
    ``--debug`` shows the parser's full usage text instead."""
    errors = sys.modules[typer.BadParameter.__module__]  # click's exceptions, wherever typer takes them from
    argv = list(sys.argv[1:] if args is None else args)
    if "--" not in argv:  # the program's own flags anywhere on the line (``bakery batch r.toml --quiet``)
        argv = [a for a in argv if a in GLOBAL_FLAGS] + [a for a in argv if a not in GLOBAL_FLAGS]
    debug = "--debug" in argv[:argv.index("--")] if "--" in argv else "--debug" in argv
    from bakery.cli.batch import run_plain

    rv = run_plain(argv)  # a plain batch line skips the option parser's set-up (a no-change run is start-up only)
    if rv is not None:
        return rv
    try:
        rv = app(args=argv, prog_name="bakery", standalone_mode=False)
    except errors.UsageError as exc:
        if debug or type(exc).__name__ == "NoArgsIsHelpError":
            exc.show()
            return exc.exit_code
        typer.echo(f"error: {_usage_line(exc)}", err=True)
        return 2
    except typer.Exit as exc:
        return exc.exit_code
    except (typer.Abort, KeyboardInterrupt):
        typer.echo("error: interrupted; no output was left half-written", err=True)
        return 130
    except errors.ClickException as exc:
        typer.echo(f"error: {' '.join(exc.format_message().split())}", err=True)
        return exc.exit_code
    return rv if isinstance(rv, int) else 0


def main(argv: list[str] | None = None) -> None:
    sys.exit(run(argv))
