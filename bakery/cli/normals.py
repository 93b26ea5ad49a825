"""Normal-map commands: ``normal``, ``height``, ``blend``, ``normal-mips``, ``normal-fix``.

Generated from the bakes' parameter declarations (:mod:`bakery.cli._build`).
"""

from __future__ import annotations

from bakery.cli import app
from bakery.cli._build import bake_command

HEIGHT = "Height map (.png, .tif, .exr; 8/16-bit or float; gray, or pick a channel)."
NORMAL = "Normal map (.png, .tif, .exr; RGB, RGBA or two-channel XY)."
IMAGE_OUT = ("Output file (.png, .tif, .exr), a folder ending in / (names from the inputs), or a name template "
             "such as out/{stem}_normal.png.")

bake_command(app, "normal", "normal", "Make a tangent-space normal map from a height map (Blinn 1978).",
             inputs_help={"height": HEIGHT}, output_help=IMAGE_OUT)
bake_command(app, "height", "height", "Integrate a normal map back into a height map; takes the strength options "
             "of `normal`.", inputs_help={"normal": NORMAL}, output_help=IMAGE_OUT)
bake_command(app, "blend", "blend", "Layer a detail normal map over a base normal map.",
             inputs_help={"base": "Base normal map.", "detail": "Detail normal map, the same size as the base."},
             output_help="Output file (.png, .tif, .exr).")
bake_command(app, "normal-mips", "normal-mips", "Write a normal map's mip chain: OUT is level 0, then "
             "NAME.mip01.ext, NAME.mip02.ext ... (and NAME.length.mip01.ext ...); or one KTX2 texture with all "
             "levels when OUT ends in .ktx2 (lengths in NAME.length.ktx2).", inputs_help={"normal": NORMAL},
             output_help="Output: level 0 as .png/.tif/.exr (the other levels beside it), a .ktx2 file with every "
             "level, or a folder ending in /.")
bake_command(app, "normal-fix", "normal-fix", "Small repairs of a normal map: flip green, renormalize, 2 <-> 3 "
             "channels, 8 <-> 16-bit.", inputs_help={"normal": NORMAL}, output_help=IMAGE_OUT)
