"""``bakery roughness`` and ``bakery antialias``, generated from the bakes' parameter declarations."""

from __future__ import annotations

from pathlib import Path

from bakery.cli import app
from bakery.cli._build import bake_command, quality_lines
from bakery.cli._common import echo


def _levels(written: list[Path]) -> None:
    images = [p for p in written if not p.name.endswith(".json")]
    echo(f"wrote {len(images)} file(s): {images[0]}" + (f" ... {images[-1]}" if len(images) > 1 else ""))
    quality_lines(written)


bake_command(app, "roughness", "roughness", "Convert a specular-exponent (gloss) map into roughness, or roughness "
             "back into exponents.",
             inputs_help={"specular": "Specular-exponent, gloss, smoothness or roughness map.",
                          "pack": "Write the result into one channel (--pack-channel) of a copy of this image "
                                  "(glTF 2.0 metallic-roughness: roughness in G, metalness in B); the image "
                                  "itself is not modified."},
             output_help="Output image (.png, .tif, .exr), or a folder ending in /.")
bake_command(app, "antialias", "antialias", "Write a roughness mip chain whose coarser levels keep the bumps the "
             "normal map's mips average away.",
             inputs_help={"normal": "Tangent-space normal map (RGB, RGBA or two-channel XY).",
                          "roughness": "Perceptual roughness map of the same size (else --roughness)."},
             output_help="Output: NAME.png/.tif/.exr is level 0 and NAME.mip01.png ... the others; NAME.ktx2 "
             "writes one KTX2 file with every level.", positional_optional=True, report=_levels)
