"""``bakery env specular`` and ``bakery env lut``: glossy image-based lighting (split sum), generated from the
bakes' parameter declarations."""

from __future__ import annotations

from bakery.cli import env_app
from bakery.cli._build import bake_command
from bakery.cli.envmaps import ENVIRONMENT, LIGHTS

bake_command(env_app, "specular", "env-specular", "Prefilter an environment into a specular cubemap mip chain for "
             "the split-sum approximation.", inputs_help={"environment": "HDR " + ENVIRONMENT[0].lower()
                                                          + ENVIRONMENT[1:], "lights": LIGHTS},
             output_help="Output KTX2 cubemap with mips (.ktx2), or a folder ending in /.")
bake_command(env_app, "lut", "env-lut", "Write the split-sum BRDF table: scale (R) and bias (G) of F0 over n.v "
             "(across) and roughness.", inputs_help={},
             output_help="Output table: .png (16-bit RGB, B = 0), .exr (R, G float) or .ktx2 (R16G16_SFLOAT).")
