"""``bakery env convert`` and ``bakery env diffuse``, generated from the bakes' parameter declarations."""

from __future__ import annotations

from bakery.cli import env_app
from bakery.cli._build import bake_command

ENVIRONMENT = ("Environment map: a panorama or cross/row/stack image (.exr .hdr .tif .png .jpg), a .ktx2 cubemap, "
               "or six faces as a pattern holding {face} (x+ x- y+ y- z+ z-) or {index} (0-5).")

LIGHTS = ("Lights file of `bakery env lights` (give the environment without them, NAME.rest.exr): their light "
          "is added back exactly.")

bake_command(env_app, "convert", "env-convert", "Convert an environment map between panoramas, cube layouts, face "
             "files and KTX2 cubemaps.", inputs_help={"environment": ENVIRONMENT},
             output_help="Output: an image, a .ktx2 file, a pattern with {face}, or a folder ending in /.")
bake_command(env_app, "diffuse", "env-diffuse", "Diffuse irradiance: 9 spherical-harmonic coefficients per "
             "channel (JSON) and a small irradiance cubemap (KTX2 and six EXR faces).",
             inputs_help={"environment": ENVIRONMENT, "lights": LIGHTS},
             output_help="Output .json for the SH coefficients; the irradiance cubemap goes beside it "
             "(NAME.ktx2 and NAME.{face}.exr). Or a folder ending in /.")
bake_command(env_app, "lights", "env-lights", "Find the dominant compact lights of an HDR environment (a sun) and "
             "write them as directional lights (JSON), with the environment without them beside it (NAME.rest.exr).",
             inputs_help={"environment": ENVIRONMENT},
             output_help="Output .json for the lights; the environment without them goes beside it "
             "(NAME.rest.exr). Or a folder ending in /.")
