"""``bakery pack``: channels of several maps into one texture, generated from the ``pack`` bake's declarations
(:mod:`bakery.cli._build`): ``--r/--g/--b/--a FILE`` name the maps, ``--r-channel``, ``--r-role``,
``--r-invert``, ``--r-constant`` ... say what each output channel takes."""

from __future__ import annotations

from pathlib import Path

from bakery.cli import app
from bakery.cli._build import bake_command, quality_lines
from bakery.cli._common import echo


def _written(written: list[Path]) -> None:
    images = [p for p in written if not p.name.endswith(".json")]
    echo(f"wrote {len(images)} file(s): {images[0]}" + (f" ... {images[-1]}" if len(images) > 1 else ""))
    quality_lines(written)


def _map(letter: str) -> str:
    return (f"Map whose channel goes into {letter.upper()} (--{letter}-channel picks it; the same file may feed "
            "several channels).")


bake_command(app, "pack", "pack", "Pack channels of several maps, or constants, into one texture (R, G, B and "
             "optionally A), each output channel with a role that sets its mip rule: e.g. occlusion, roughness, "
             "metalness in R, G, B. Level 0 copies every source channel exactly.",
             inputs_help={x: _map(x) for x in "rgba"},
             output_help="Output: .png, .tif, .exr (with --mips, NAME.mip01.ext ... beside it) or .ktx2 (every "
             "level inside).", report=_written)
