"""Normal-map commands: ``normal``, ``height``, ``blend``, ``normal-mips``, ``normal-fix``.

Thin wrappers: parse options into the bake's parameters and call :func:`bakery.bakes.run_bake`.
"""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import app
from bakery.cli._common import BitsOpt, command, echo, output_path
from bakery.errors import BakeryError

SUFFIXES = (".png", ".tif", ".tiff", ".exr")


class KernelOpt(StrEnum):
    scharr = "scharr"
    sobel = "sobel"
    prewitt = "prewitt"
    central = "central"


class EdgesOpt(StrEnum):
    wrap = "wrap"
    clamp = "clamp"
    mirror = "mirror"


class YOpt(StrEnum):
    up = "up"
    down = "down"


class ChannelOpt(StrEnum):
    r = "r"
    g = "g"
    b = "b"
    a = "a"
    luminance = "luminance"


class BlendOpt(StrEnum):
    reoriented = "reoriented"
    whiteout = "whiteout"
    derivative = "derivative"
    linear = "linear"


def _size(text: str | None) -> tuple[float, ...]:
    if text is None:
        return ()
    parts = text.lower().split("x")
    try:
        vals = tuple(float(p) for p in parts)
    except ValueError:
        raise BakeryError(f"--size takes WIDTH or WIDTHxHEIGHT (numbers); got {text!r}") from None
    if len(vals) not in (1, 2) or any(not v > 0 for v in vals):
        raise BakeryError(f"--size takes WIDTH or WIDTHxHEIGHT (positive numbers); got {text!r}")
    return vals


def _report(paths: list[Path]) -> None:
    for p in paths:
        echo(f"wrote {p}")


def _arg(text: str):
    return Annotated[Path, typer.Argument(dir_okay=False, show_default=False, help=text)]


HeightIn = _arg("Height map (.png, .tif, .exr; 8/16-bit or float; gray, or pick a channel).")
NormalIn = _arg("Normal map (.png, .tif, .exr; RGB, RGBA or two-channel XY).")
Out = Annotated[Path, typer.Option("-o", "--out", help="Output file: .png, .tif or .exr.", show_default=False,
                                   dir_okay=False)]
Strength = Annotated[float | None, typer.Option(
    "--strength", help="Plain strength factor s in n = normalize(-s dh/dx, -s dh/dy, 1), derivatives per texel. "
    "Instead of --depth/--size.", show_default=False)]
Depth = Annotated[float | None, typer.Option(
    "--depth", help="Physical depth the full height range stands for (0..65535 in a 16-bit file), in the unit "
    "of --size. Default: 1/32 of the width.", show_default=False)]
Size = Annotated[str | None, typer.Option(
    "--size", help="Physical size of the texture: WIDTH or WIDTHxHEIGHT, in the unit of --depth. Default 1 "
    "(square texels).", show_default=False)]
Kernel = Annotated[KernelOpt, typer.Option("--kernel", help="Derivative kernel.")]
Edges = Annotated[EdgesOpt, typer.Option("--edges", help="How the texture continues past its borders: wrap "
                                         "(tiles), clamp (edge repeats), mirror.")]
Y = Annotated[YOpt, typer.Option("--y", help="Green-channel convention: up = OpenGL-style (glTF), down = "
                                 "DirectX-style.")]
Bits = Annotated[BitsOpt | None, typer.Option("--bits", help="Output samples: 8, 16 (PNG/TIFF), half, float "
                                              "(EXR; float also TIFF). Default follows the input.",
                                              show_default=False)]


@app.command("normal")
@command
def normal(
    height: HeightIn,
    out: Out,
    strength: Strength = None,
    depth: Depth = None,
    size: Size = None,
    kernel: Kernel = KernelOpt.scharr,
    blur: Annotated[float, typer.Option("--blur", min=0.0, help="Gaussian pre-blur of the heights, standard "
                                        "deviation in texels (0.5-1 hides 8-bit terraces).")] = 0.0,
    edges: Edges = EdgesOpt.wrap,
    y: Y = YOpt.up,
    xy: Annotated[bool, typer.Option("--xy", help="Write two channels (X, Y); readers rebuild Z. Needs .tif "
                                     "or .exr.")] = False,
    bits: Bits = None,
    channel: Annotated[ChannelOpt | None, typer.Option(
        "--channel", help="Which channel of a colour file holds the heights (luminance: BT.709 weights).",
        show_default=False)] = None,
    stretch: Annotated[bool, typer.Option("--stretch", help="Use the data's min..max as the full height range "
                                          "instead of the file's nominal range.")] = False,
) -> None:
    """Make a tangent-space normal map from a height map (Blinn 1978)."""
    from bakery.bakes import run_bake
    from bakery.normals.bakes import NormalParams

    output_path(out, suffixes=SUFFIXES)
    params = NormalParams(strength=strength, depth=depth, size=_size(size), kernel=kernel.value, blur=blur,
                          edges=edges.value, y=y.value, channels=2 if xy else 3,
                          bits=bits.value if bits else None, channel=channel.value if channel else None,
                          stretch=stretch)
    _report(run_bake("normal", {"height": height}, out, params))


@app.command("height")
@command
def height(
    normal: NormalIn,
    out: Out,
    strength: Strength = None,
    depth: Depth = None,
    size: Size = None,
    kernel: Annotated[KernelOpt, typer.Option("--kernel", help="The kernel the map was made with (tiling "
                                              "maps).")] = KernelOpt.scharr,
    edges: Annotated[EdgesOpt, typer.Option("--edges", help="wrap: the map tiles (Frankot-Chellappa); clamp or "
                                            "mirror: it does not (Poisson solve).")] = EdgesOpt.wrap,
    y: Y = YOpt.up,
    bits: Bits = None,
) -> None:
    """Integrate a normal map back into a height map; takes the strength options of `normal`."""
    from bakery.bakes import run_bake
    from bakery.normals.bakes import HeightParams

    output_path(out, suffixes=SUFFIXES)
    params = HeightParams(strength=strength, depth=depth, size=_size(size), kernel=kernel.value,
                          edges=edges.value, y=y.value, bits=bits.value if bits else None)
    _report(run_bake("height", {"normal": normal}, out, params))


@app.command("blend")
@command
def blend(
    base: _arg("Base normal map."),
    detail: _arg("Detail normal map, the same size as the base."),
    out: Out,
    method: Annotated[BlendOpt, typer.Option("--method", help="reoriented (Barre-Brisebois & Hill 2012), "
                                             "whiteout, derivative (slopes add) or linear.")] = BlendOpt.reoriented,
    detail_strength: Annotated[float, typer.Option("--detail-strength", min=0.0, help="Scales the detail's "
                                                   "x and y before blending.")] = 1.0,
    y: Annotated[YOpt, typer.Option("--y", help="Green convention of both inputs and the output.")] = YOpt.up,
    bits: Bits = None,
) -> None:
    """Layer a detail normal map over a base normal map."""
    from bakery.bakes import run_bake
    from bakery.normals.bakes import BlendParams

    output_path(out, suffixes=SUFFIXES)
    params = BlendParams(method=method.value, detail_strength=detail_strength, y=y.value,
                         bits=bits.value if bits else None)
    _report(run_bake("blend", {"base": base, "detail": detail}, out, params))


@app.command("normal-mips")
@command
def normal_mips(
    normal: NormalIn,
    out: Out,
    levels: Annotated[int | None, typer.Option("--levels", min=1, help="Levels including level 0. Default: "
                                               "down to 1x1.", show_default=False)] = None,
    y: Annotated[YOpt, typer.Option("--y", help="Green convention of the input and outputs.")] = YOpt.up,
    bits: Bits = None,
    lengths: Annotated[bool, typer.Option("--lengths/--no-lengths", help="Also write each level's "
                                          "averaged-normal length (for specular anti-aliasing).")] = True,
) -> None:
    """Write a normal map's mip chain: OUT is level 0, then OUT.mip1, OUT.mip2 ... (and OUT.length.mipN);
    or one KTX2 texture with all levels when OUT ends in .ktx2 (lengths in OUT.length.ktx2)."""
    from bakery.bakes import run_bake
    from bakery.normals.bakes import MipsParams

    output_path(out, suffixes=SUFFIXES + (".ktx2",))
    params = MipsParams(levels=levels, y=y.value, bits=bits.value if bits else None, lengths=lengths)
    _report(run_bake("normal-mips", {"normal": normal}, out, params))


@app.command("normal-fix")
@command
def normal_fix(
    normal: NormalIn,
    out: Out,
    flip_green: Annotated[bool, typer.Option("--flip-green", help="Switch between Y-up and Y-down "
                                             "(g' = 1 - g).")] = False,
    renormalize: Annotated[bool, typer.Option("--renormalize", help="Make every vector unit length.")] = False,
    channels: Annotated[int | None, typer.Option("--channels", min=2, max=3, help="2 (XY; Z rebuilt by "
                                                 "readers) or 3 (XYZ).", show_default=False)] = None,
    bits: Bits = None,
) -> None:
    """Small repairs of a normal map: flip green, renormalize, 2 <-> 3 channels, 8 <-> 16-bit."""
    from bakery.bakes import run_bake
    from bakery.normals.bakes import FixParams

    output_path(out, suffixes=SUFFIXES)
    params = FixParams(flip_y=flip_green, renormalize=renormalize, channels=channels,
                       bits=bits.value if bits else None)
    _report(run_bake("normal-fix", {"normal": normal}, out, params))
