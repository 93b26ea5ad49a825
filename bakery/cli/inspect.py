"""``bakery inspect``: find common mistakes in maps."""

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
    data = "data"
    environment = "environment"
    color = "color"


@app.command("inspect")
@command
def inspect(
    files: Annotated[list[Path], typer.Argument(help="Maps to check.", show_default=False)],
    as_json: Annotated[bool, typer.Option("--json", help="Print machine-readable JSON.")] = False,
    kind: Annotated[Kind | None, typer.Option(help="Treat every file as this kind of map (default: guess).")]
    = None,
    strict: Annotated[bool, typer.Option(help="Exit with code 1 when any finding is a warning or error.")]
    = False,
) -> None:
    """Check maps for common mistakes: non-unit or sRGB-encoded normals, the green-channel convention,
    terraced or clipped heights, seams at the wrap edges, sizes, and HDR environments that are not HDR."""
    from bakery.inspect import inspect_pixels
    from bakery.io.images import read_image

    limit = None  # read_image applies BAKERY_MAX_PIXELS
    reports = []
    for path in files:
        img = read_image(path, max_pixels=limit, allow_nonfinite=True)
        found_kind, findings = inspect_pixels(img.pixels, bits=img.bits, kind=kind.value if kind else None)
        reports.append({"file": str(path), "kind": found_kind, "findings": [f.as_dict() for f in findings]})
    if as_json:
        typer.echo(json.dumps(reports, indent=2))
    else:
        for i, rep in enumerate(reports):
            if i:
                echo()
            echo(f"{rep['file']}: {rep['kind']} map, {len(rep['findings'])} finding(s)")
            for f in rep["findings"]:
                echo(f"  [{f['severity']}] {f['code']}: {f['message']}")
                echo(f"      hint: {f['hint']}")
    if strict and any(f["severity"] != "info" for rep in reports for f in rep["findings"]):
        raise typer.Exit(1)
