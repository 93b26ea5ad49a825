"""``bakery inspect``: find common mistakes in maps, files or whole folders."""

from __future__ import annotations

import json
from enum import StrEnum
from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import app
from bakery.cli._common import command, echo


class Kind(StrEnum):
    normal = "normal"
    height = "height"
    roughness = "roughness"
    data = "data"
    environment = "environment"
    color = "color"
    table = "table"
    mask = "mask"


class Y(StrEnum):
    up = "up"
    down = "down"


@app.command("inspect")
@command
def inspect(
    paths: Annotated[list[str], typer.Argument(help="Maps, folders or glob patterns (quote them) to check.",
                                               show_default=False, metavar="PATH...")],
    recursive: Annotated[bool, typer.Option("--recursive", "-r", help="Also look in subfolders (and let ** in "
                                            "patterns match folders).")] = False,
    as_json: Annotated[bool, typer.Option("--json", help="Print machine-readable JSON.")] = False,
    kind: Annotated[Kind | None, typer.Option(help="Treat every file as this kind of map (default: its "
                                              "manifest's, else guessed).")] = None,
    expect_y: Annotated[Y | None, typer.Option("--expect-y", help="The green-channel convention the target "
                                               "expects: normal maps in the other one are the finding "
                                               "(default: what each manifest records, else up).")] = None,
    profile: Annotated[Path | None, typer.Option("--profile", help="A target profile (docs/profiles.md): its "
                                                 "green-channel convention is the one expected (--expect-y "
                                                 "wins).", metavar="FILE", show_default=False)] = None,
    manifests: Annotated[bool, typer.Option(help="Take kinds and conventions from the manifests bakery wrote "
                                            "beside its outputs.")] = True,
    strict: Annotated[bool, typer.Option(help="Exit with code 1 when any finding is a warning or error.")]
    = False,
) -> None:
    """Check maps for common mistakes: non-unit or sRGB-encoded normals, the green- and red-channel
    conventions, terraced or clipped heights, seams at the wrap edges, sizes, and HDR environments that are
    not HDR. Folders and KTX2 files (every level and face) are inspected; files that are not images
    (manifests, reports, recipes) and, in folders, the pictures of contact sheets are skipped."""
    from bakery.errors import BakeryError
    from bakery.inspect_files import collect, inspect_paths

    if expect_y is None and profile is not None:
        from bakery.profiles import load_profile

        expect_y = Y(load_profile(profile).y)
    maps, skipped = collect(paths, recursive=recursive)
    if not maps:
        raise BakeryError(f"no maps to inspect ({len(skipped)} file(s) that are not maps skipped)",
                          paths[0] if len(paths) == 1 else None)
    reports = inspect_paths(maps, expect_y=expect_y.value if expect_y else None,
                            kind=kind.value if kind else None, manifests=manifests)
    unreadable = [r for r in reports if r.kind == "unreadable"]
    if len(unreadable) == len(reports) == 1:
        raise BakeryError(unreadable[0].findings[0].message, unreadable[0].file)
    if as_json:
        typer.echo(json.dumps([r.as_dict() for r in reports], indent=2))
    else:
        for i, rep in enumerate(reports):
            if i:
                echo()
            known = f"from its manifest, bake {rep.facts.bake}" if rep.facts.source == "manifest" else ""
            if rep.kind == "picture":
                known = f"from its manifest, made by {rep.facts.bake}"
            notes = "; ".join(n for n in (rep.layout, known) if n)
            what = "picture" if rep.kind == "picture" else f"{rep.kind} map"
            echo(f"{rep.file}: {what}{f' ({notes})' if notes else ''}, {len(rep.findings)} finding(s)")
            for f in rep.findings:
                echo(f"  [{f.severity}] {f.code}: {f.message}")
                echo(f"      hint: {f.hint}")
    total = sum(len(r.findings) for r in reports)
    summary = (f"inspected {len(reports)} map(s), {total} finding(s)"
               + (f"; skipped {len(skipped)} file(s) that are not maps" if skipped else ""))
    if not as_json and (len(reports) > 1 or skipped):
        echo()
        echo(summary)
    if unreadable:
        raise typer.Exit(1)
    if strict and any(f.severity != "info" for rep in reports for f in rep.findings):
        raise typer.Exit(1)
