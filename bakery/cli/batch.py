"""``bakery batch RECIPE``: run a recipe over a texture library (see docs/batch.md)."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

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
              report=report, progress=progress, inspect=inspect)
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
        _contact_sheet(Path(rep.output))
    if rep.exit_code:
        raise typer.Exit(rep.exit_code)


def _contact_sheet(output: Path) -> None:
    """The contact sheet of a batch's output folder, in OUTPUT/.bakery/ (a hidden folder, so later sheets and
    runs never take its pictures for maps)."""
    from bakery.cli._common import progress_lines
    from bakery.preview.sheet import collect_maps, find_maps, make_sheet

    page = output / ".bakery" / "sheet.html"
    if not find_maps(output):
        echo("contact sheet: no maps in the output folder")
        return
    page.parent.mkdir(exist_ok=True)
    make_sheet(collect_maps([output], page), page, source=str(output), title=f"bakery batch: {output.name}",
               progress=progress_lines("maps"))
    echo(f"contact sheet: {page}")
