"""``bakery demo``: run every capability on procedurally generated demo data."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import app
from bakery.cli._common import command, echo


@app.command("demo")
@command
def demo(
    out: Annotated[Path, typer.Option("-o", "--output", help="Folder for the demo inputs and outputs.",
                                      file_okay=False)] = Path("demo-out"),
    size: Annotated[int, typer.Option(help="Edge length in texels of the generated texture maps.",
                                      min=16, max=4096)] = 256,
) -> None:
    """Generate the demo scene (worn paving stones under an open sky) and bake everything from it."""
    from bakery.demo import run_demo

    summary = run_demo(out, size=size, log=echo)
    echo(f"summary written to {summary}")
