"""``bakery env specular`` and ``bakery env lut``: glossy image-based lighting (split sum)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import env_app
from bakery.cli._common import command, echo, output_path


@env_app.command("specular")
@command
def specular(
    source: Annotated[Path, typer.Argument(
        help="HDR environment: a panorama, a cross/strip/column image, a KTX2 cubemap, or six face files "
             "given as a pattern holding {face}.", show_default=False)],
    output: Annotated[Path, typer.Option("-o", "--out", help="Output KTX2 cubemap with mips.",
                                         show_default=False)],
    size: Annotated[int, typer.Option(help="Face size of level 0 (a power of two).")] = 256,
    levels: Annotated[int, typer.Option(help="Mip levels; 0 = all, down to 1 x 1.")] = 0,
    lobe: Annotated[str, typer.Option(
        help="Lobe: ggx or blinn-phong (normalized, exponent per level).")] = "ggx",
    roughness: Annotated[str, typer.Option(
        help="Roughness per level: linear (r = k/(levels-1)), quadratic (r = (k/(levels-1))^2), or a list "
             "of values such as 0,0.2,0.45,0.7,1.")] = "linear",
    quality: Annotated[str, typer.Option(
        help="draft, final or high (errors in docs/envlight.md).")] = "final",
    fmt: Annotated[str, typer.Option(
        "--format", help="KTX2 texel format: rgba16f, rgba32f, rg11b10f, rgb9e5.")
                   ] = "rgba16f",
    loose: Annotated[bool, typer.Option("--loose", help="Also write every level's faces as OpenEXR files.")
                     ] = False,
    layout: Annotated[str, typer.Option(
        "--layout-in", help="Layout of a single input image (default: from its aspect ratio): equirect, "
                            "hcross, vcross, strip, column.")] = "",
) -> None:
    """Prefilter an environment into a specular cubemap mip chain for the split-sum approximation."""
    from bakery.bakes import run_bake
    from bakery.envmap.glossy_bakes import SpecularParams, check_specular_params

    output_path(output, suffixes=(".ktx2",))
    params = SpecularParams(size=size, levels=levels, lobe=lobe, roughness=roughness, quality=quality,
                            format=fmt, loose=loose, layout=layout)
    check_specular_params(params)
    written = run_bake("env-specular", {"env": source}, output, params)
    for p in written:
        echo(f"wrote {p}")


@env_app.command("lut")
@command
def lut(
    output: Annotated[Path, typer.Option("-o", "--out", help="Output table: .png (16-bit RGB, B = 0), "
                                         ".exr (R, G float) or .ktx2 (R16G16_SFLOAT).", show_default=False)],
    size: Annotated[int, typer.Option(help="Texels along each axis.", min=2, max=4096)] = 128,
    roughness_grows: Annotated[str, typer.Option(
        help="down: the first stored row is roughness 0; up: the last row is.")] = "down",
) -> None:
    """Write the split-sum BRDF table: scale (R) and bias (G) of F0 over n.v (across) and roughness."""
    from bakery.bakes import run_bake
    from bakery.envmap.glossy_bakes import LutParams

    output_path(output, suffixes=(".png", ".exr", ".ktx2"))
    written = run_bake("env-lut", {}, output, LutParams(size=size, roughness_grows=roughness_grows))
    for p in written:
        echo(f"wrote {p}")
