"""``bakery batch RECIPE``: run a recipe over a texture library (see docs/batch.md)."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated, Any

import typer

from bakery.cli import app
from bakery.cli._common import STATE, command, echo


@app.command("batch")
@command
def batch(
    recipe: Annotated[Path | None, typer.Argument(help="The recipe (TOML): source root, output root, rules.",
                                                  show_default=False)] = None,
    dry_run: Annotated[bool, typer.Option("--dry-run", "-n",
                                          help="Print the plan (inputs -> outputs, parameters, why each job "
                                               "runs or is skipped) and write nothing.")] = False,
    jobs: Annotated[int | None, typer.Option("--jobs", "-j", min=1,
                                             help="Local worker processes [default: all cores].",
                                             show_default=False)] = None,
    force: Annotated[bool, typer.Option("--force", help="Run every job, even the up-to-date ones.")] = False,
    only: Annotated[list[str] | None, typer.Option(
        "--only", help="Keep only jobs whose rule name, input or output matches (a name or a pattern with "
                       "* and **); repeat for several.", show_default=False)] = None,
    cluster: Annotated[str | None, typer.Option(
        "--cluster", help="Run the jobs on the Dask scheduler at this address (tcp://host:8786); needs "
                          "bakery[cluster].", show_default=False)] = None,
    report: Annotated[Path | None, typer.Option(
        "--report", help="Write the JSON report here [default: OUTPUT/.bakery/report.json; a dry run writes "
                         "one only when this is given].", show_default=False, dir_okay=False)] = None,
    list_bakes: Annotated[bool, typer.Option(
        "--list-bakes", help="List the bakes a recipe can use, with their inputs and parameters, and exit.")] = False,
    inspect: Annotated[bool, typer.Option(
        "--inspect/--no-inspect", help="Check every image written with `bakery inspect` and list the findings in "
        "the report (--no-inspect saves re-reading the outputs).")] = True,
    remove_stale: Annotated[bool, typer.Option(
        "--remove-stale", help="Delete the stale outputs: files bakery wrote in the output root (unchanged since) "
                               "that no job of the recipe writes now. Without it they are listed and kept.")] = False,
    sheet: Annotated[bool, typer.Option(
        "--sheet", help="After the run, write a contact sheet of the output folder (OUTPUT/.bakery/sheet.html "
                        "and sheet.png): every map, its lit preview and the findings of `bakery inspect`.")] = False,
) -> None:
    """Run a batch recipe: only changed jobs, in parallel, with a JSON report.

    Exit codes: 0 every job ran or was skipped, 1 some jobs failed (the others finished; with --dry-run: some
    would fail), 2 the recipe or the command line is wrong (nothing ran).
    """
    from bakery.batch import run
    from bakery.batch.report import BarProgress, PlainProgress, format_plan
    from bakery.errors import BakeryError

    if list_bakes:
        from bakery.bakes.reference import describe_bakes

        for line in describe_bakes():
            echo(line)
        return
    if recipe is None:
        raise BakeryError("give a RECIPE file (see docs/batch.md), or --list-bakes")
    if cluster is not None and jobs is not None:
        raise BakeryError("--jobs and --cluster exclude each other: the cluster decides how many jobs run at once")
    progress = None
    if not dry_run:
        cls = BarProgress if sys.stderr.isatty() and not STATE["quiet"] else PlainProgress
        progress = cls(sys.stderr, quiet=STATE["quiet"])
    rep = run(recipe, jobs=jobs, force=force, only=tuple(only or ()), dry_run=dry_run, cluster=cluster,
              report=report, progress=progress, inspect=inspect, remove_stale=remove_stale)
    if dry_run:
        for line in format_plan(rep):
            echo(line)
    for note in [] if dry_run else rep.notes:
        echo(note)
    if not dry_run:
        echo(rep.summary())
    if rep.path is not None:
        echo(f"report: {rep.path}")
    if sheet:
        from bakery.batch.recipe import load_recipe

        profile = load_recipe(recipe).profile
        _contact_sheet(Path(rep.output), expect_y=profile.y if profile is not None else None)
    if rep.exit_code:
        raise typer.Exit(rep.exit_code)


def run_plain(argv: list[str]) -> int | None:
    """Run ``[--quiet] [--debug] batch RECIPE [OPTIONS]`` with its options read straight from the declaration
    above (the signature of :func:`batch`), without the option parser's type machinery, whose set-up costs
    more than a batch with nothing to do. Returns the exit code, or None when the line holds anything this
    reader does not take on trust (another command, ``--help``, an unknown, repeated or malformed option, a
    value out of range): the full parser then handles it, with its own messages."""
    import typer

    argv = list(argv)
    flags = set()
    while argv and argv[0] in ("--quiet", "-q", "--debug"):
        flags.add(argv.pop(0))
    if not argv or argv[0] != "batch":
        return None
    kwargs = _plain_options(argv[1:])
    if kwargs is None:
        return None
    from bakery.cli import _root

    _root(version=False, debug="--debug" in flags, quiet=bool(flags & {"--quiet", "-q"}))
    try:
        batch(**kwargs)
    except typer.Exit as exc:
        return exc.exit_code
    return 0


def _plain_options(args: list[str]) -> dict | None:
    import inspect
    import types
    import typing

    fn = batch.__wrapped__
    hints = typing.get_type_hints(fn, include_extras=True)
    names: dict[str, tuple[str, type, bool | None]] = {}  # option -> (parameter, type, flag value)
    info_of: dict[str, Any] = {}
    positional = None
    for name in inspect.signature(fn).parameters:
        base, info = typing.get_args(hints[name])[:2]
        union = isinstance(base, types.UnionType)
        kinds = [a for a in typing.get_args(base) if a is not type(None)] if union else [base]
        kind = kinds[0]
        info_of[name] = info
        if isinstance(info, typer.models.ArgumentInfo):
            positional = (name, kind)
            continue
        for decl in info.param_decls:
            on, _, off = decl.partition("/")
            names[on] = (name, kind, True if kind is bool else None)
            if off:
                names[off] = (name, kind, False)
    kwargs: dict[str, Any] = {}
    i = 0
    while i < len(args):
        a = args[i]
        if a.startswith("--"):
            opt, eq, value = a.partition("=")
        elif a.startswith("-") and len(a) > 2:  # -j2
            opt, eq, value = a[:2], "=", a[2:]
        else:
            opt, eq, value = a, "", ""
        if a == "--" or opt in ("--help", "-h"):
            return None
        if not a.startswith("-") or a == "-":
            if positional is None or positional[0] in kwargs:
                return None
            kwargs[positional[0]] = Path(a)
            i += 1
            continue
        if opt not in names:
            return None
        name, kind, flag = names[opt]
        if kind is bool:
            if eq or name in kwargs:
                return None
            kwargs[name] = flag
            i += 1
            continue
        if not eq:
            if i + 1 >= len(args):
                return None
            value = args[i + 1]
            i += 1
        i += 1
        origin = typing.get_origin(kind)
        if origin is list:
            kwargs.setdefault(name, []).append(value)
            continue
        if name in kwargs:
            return None
        if kind is int:
            try:
                number = int(value)
            except ValueError:
                return None
            low = getattr(info_of[name], "min", None)
            if low is not None and number < low:
                return None
            kwargs[name] = number
        elif kind is Path:
            if Path(value).is_dir() and getattr(info_of[name], "dir_okay", True) is False:
                return None
            kwargs[name] = Path(value)
        elif kind is str:
            kwargs[name] = value
        else:
            return None
    return kwargs


def _contact_sheet(output: Path, *, expect_y: str | None = None) -> None:
    """The contact sheet of a batch's output folder, in OUTPUT/.bakery/ (a hidden folder, so later sheets and
    runs never take its pictures for maps), judged against the recipe's profile (``expect_y``)."""
    from bakery.cli._common import progress_lines
    from bakery.preview.sheet import collect_maps, find_maps, make_sheet

    page = output / ".bakery" / "sheet.html"
    if not find_maps(output):
        echo("contact sheet: no maps in the output folder")
        return
    page.parent.mkdir(exist_ok=True)
    make_sheet(collect_maps([output], page), page, source=str(output), title=f"bakery batch: {output.name}",
               progress=progress_lines("maps"), expect_y=expect_y)
    echo(f"contact sheet: {page}")
