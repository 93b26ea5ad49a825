"""Commands for maps derived from heights, and colour-map mips: ``occlusion``, ``curvature``, ``mips``.

Generated from the bakes' parameter declarations (:mod:`bakery.cli._build`).
"""

from __future__ import annotations

from bakery.cli import app
from bakery.cli._build import bake_command
from bakery.cli.normals import HEIGHT, IMAGE_OUT

COLOR = "Colour map (.png, .tif, .exr; gray, gray + alpha, RGB or RGBA)."

bake_command(app, "occlusion", "occlusion", "Bake ambient occlusion from a height map (1 = open sky, 0 = closed), "
             "with the relief of `normal` (same strength options); --bent-normals also writes NAME.bent.EXT.",
             inputs_help={"height": HEIGHT}, output_help=IMAGE_OUT)
bake_command(app, "curvature", "curvature", "Bake a curvature map (0.5 = flat, above convex) or a convexity, "
             "concavity or cavity mask from a height map, with the relief of `normal`.",
             inputs_help={"height": HEIGHT}, output_help=IMAGE_OUT)
bake_command(app, "mips", "mips", "Write a colour map's mip chain, filtered in linear light with premultiplied "
             "alpha: OUT is level 0, then NAME.mip01.ext ...; or one KTX2 texture with all levels when OUT ends in "
             ".ktx2. Normal maps go to `normal-mips`.", inputs_help={"color": COLOR},
             output_help="Output: level 0 as .png/.tif/.exr (the other levels beside it), a .ktx2 file with every "
             "level, or a folder ending in /.")
