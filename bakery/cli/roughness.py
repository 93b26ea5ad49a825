"""``bakery roughness`` and ``bakery antialias``: thin shells over :mod:`bakery.roughness.bakes`."""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import app
from bakery.cli._common import BitsOpt, bits_to_depth, command, echo, output_path


class QuantityChoice(StrEnum):
    exponent = "exponent"
    gloss_linear = "gloss-linear"
    gloss_exp = "gloss-exp"
    smoothness = "smoothness"
    roughness = "roughness"
    alpha = "alpha"
    beckmann = "beckmann"


class ModelChoice(StrEnum):
    blinn_phong = "blinn-phong"
    phong = "phong"


class RuleChoice(StrEnum):
    peak = "peak"
    width = "width"


class ChannelChoice(StrEnum):
    R = "R"
    G = "G"
    B = "B"
    A = "A"


class MethodChoice(StrEnum):
    vmf = "vmf"
    toksvig = "toksvig"


class LobeChoice(StrEnum):
    ggx = "ggx"
    beckmann = "beckmann"


IMAGE_SUFFIXES = (".png", ".tif", ".tiff", ".exr")


def _value(choice):
    return None if choice is None else choice.value


@app.command("roughness")
@command
def roughness(
    src: Annotated[Path, typer.Argument(metavar="IN", help="Specular-exponent, gloss or smoothness map.",
                                        show_default=False)],
    out: Annotated[Path, typer.Option("-o", "--out", help="Output image (.png, .tif, .exr).",
                                      show_default=False)],
    source: Annotated[QuantityChoice | None, typer.Option(
        "--from", help="What IN holds. Default: exponent for float files; 8/16-bit files must be told "
        "(gloss-linear, gloss-exp, smoothness, roughness, alpha).")] = None,
    target: Annotated[QuantityChoice, typer.Option(
        "--to", help="What to write: roughness (perceptual, r = sqrt(alpha)), alpha (GGX), beckmann (m), "
        "smoothness, or back to exponent / gloss-linear / gloss-exp.")] = QuantityChoice.roughness,
    model: Annotated[ModelChoice, typer.Option(
        help="Lobe of the exponent: blinn-phong (about the half vector) or phong (about the mirror "
        "direction, counted as a 4x smaller Blinn-Phong exponent).")] = ModelChoice.blinn_phong,
    rule: Annotated[RuleChoice, typer.Option(
        help="Match the lobes' peak heights (alpha = sqrt(2/(n+2)), Walter et al. 2007) or their "
        "half-maximum angles.")] = RuleChoice.peak,
    exponent_range: Annotated[tuple[float, float] | None, typer.Option(
        "--exponent-range", metavar="LO HI", help="gloss-linear: exponent = LO + g (HI - LO).",
        show_default=False)] = None,
    gloss_base: Annotated[float | None, typer.Option(
        help="gloss-exp: exponent = BASE ** (g * SCALE).", show_default=False)] = None,
    gloss_scale: Annotated[float | None, typer.Option(
        help="gloss-exp: exponent = BASE ** (g * SCALE).", show_default=False)] = None,
    clamp: Annotated[bool, typer.Option(
        "--clamp", help="Clip out-of-range input values (NaN -> roughest) with a warning instead of "
        "stopping.")] = False,
    channel: Annotated[ChannelChoice | None, typer.Option(case_sensitive=False,
        help="Channel of IN to read (default: the only one, or equal R, G, B).", show_default=False)] = None,
    bits: Annotated[BitsOpt | None, typer.Option(
        "--bits", help="Output samples: 8, 16 (PNG/TIFF), half, float (EXR; float also TIFF). Default: follows "
        "IN, or the image to pack into.", show_default=False)] = None,
    pack_into: Annotated[Path | None, typer.Option(
        help="Write the result into one channel of a copy of this image (glTF 2.0 metallic-roughness: "
        "roughness in G, metalness in B). The image itself is not modified.", show_default=False)] = None,
    pack_channel: Annotated[ChannelChoice, typer.Option(
        help="Channel that receives the result when packing.")] = ChannelChoice.G,
) -> None:
    """Convert a specular-exponent (gloss) map into roughness, or roughness back into exponents."""
    from bakery.bakes import run_bake
    from bakery.roughness.bakes import RoughnessParams

    output_path(out, suffixes=IMAGE_SUFFIXES)
    params = RoughnessParams(
        source=_value(source), target=target.value, model=model.value, rule=rule.value,
        exponent_range=exponent_range, gloss_base=gloss_base, gloss_scale=gloss_scale, clamp=clamp,
        channel=_value(channel), depth=bits_to_depth(bits), pack_channel=pack_channel.value)
    written = run_bake("roughness", {"map": src, "pack": pack_into}, out, params)
    echo(f"wrote {written[0]}")


@app.command("antialias")
@command
def antialias(
    normal: Annotated[Path, typer.Argument(
        metavar="NORMAL", help="Tangent-space normal map (RGB, RGBA or two-channel XY).", show_default=False)],
    rough: Annotated[Path | None, typer.Argument(
        metavar="[ROUGHNESS]", help="Perceptual roughness map of the same size (else --roughness).",
        show_default=False)] = None,
    out: Annotated[Path, typer.Option(
        "-o", "--out", help="Output: NAME.png/.tif/.exr writes NAME.mip00.png ... one file per level; "
        "NAME.ktx2 writes one KTX2 file with every level.", show_default=False)] = ...,
    roughness: Annotated[float | None, typer.Option(
        "--roughness", help="Constant perceptual roughness when no ROUGHNESS map is given.", min=0.0, max=1.0,
        show_default=False)] = None,
    method: Annotated[MethodChoice, typer.Option(
        help="Normal spread from the averaged normal length |Na|: vmf (von Mises-Fisher fit, Banerjee et al. "
        "2005) or toksvig (Toksvig 2005).")] = MethodChoice.vmf,
    lobe: Annotated[LobeChoice, typer.Option(
        help="Distribution the roughness drives in the renderer (sets how spread adds to alpha^2).")
    ] = LobeChoice.ggx,
    levels: Annotated[int | None, typer.Option(
        help="Number of mip levels (default: the full chain to 1x1).", min=1, show_default=False)] = None,
    ktx2: Annotated[bool, typer.Option(
        "--ktx2", help="With an image OUT, also write NAME.ktx2 beside the loose levels.")] = False,
    channel: Annotated[ChannelChoice | None, typer.Option(case_sensitive=False,
        help="Channel of ROUGHNESS to read (G for a glTF metallic-roughness map).", show_default=False)] = None,
    bits: Annotated[BitsOpt | None, typer.Option(
        "--bits", help="Samples of the levels: 8, 16, half, float (default: follows ROUGHNESS, else 16).",
        show_default=False)] = None,
) -> None:
    """Write a roughness mip chain whose coarser levels keep the bumps the normal map's mips average away."""
    from bakery.bakes import run_bake
    from bakery.roughness.bakes import AntialiasParams

    output_path(out, suffixes=IMAGE_SUFFIXES + (".ktx2",))
    params = AntialiasParams(roughness=roughness, method=method.value, lobe=lobe.value, levels=levels,
                             ktx2=ktx2, channel=_value(channel), depth=bits_to_depth(bits))
    written = run_bake("antialias", {"normal": normal, "roughness": rough}, out, params)
    images = [p for p in written if not p.name.endswith(".json")]
    echo(f"wrote {len(images)} file(s): {images[0]}" + (f" ... {images[-1]}" if len(images) > 1 else ""))
