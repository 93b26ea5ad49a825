"""``bakery info``: what a file holds."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import app
from bakery.cli._common import command, echo


@app.command("info")
@command
def info(
    files: Annotated[list[Path], typer.Argument(help="Image files to describe.", show_default=False)],
) -> None:
    """Print format, size, channels, sample type, value range, NaN/Inf counts and a guess of the map kind."""
    from bakery.info import describe

    limit = None  # read_image applies BAKERY_MAX_PIXELS
    for i, path in enumerate(files):
        if i:
            echo()
        for line in describe(path, max_pixels=limit):
            echo(line)
