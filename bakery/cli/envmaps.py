"""``bakery env convert`` and ``bakery env diffuse``: thin wrappers over the env-convert and env-diffuse
bakes."""

from __future__ import annotations

from enum import Enum, StrEnum
from pathlib import Path
from typing import Annotated

import typer

from bakery.cli import env_app
from bakery.cli._common import BitsOpt, bits_to_depth, command, echo


class LayoutChoice(StrEnum):
    equirect = "equirect"
    hcross = "hcross"
    vcross = "vcross"
    strip = "strip"
    column = "column"
    faces = "faces"
    ktx2 = "ktx2"


class FilterChoice(StrEnum):
    auto = "auto"
    area = "area"
    bilinear = "bilinear"


class MethodChoice(StrEnum):
    sh = "sh"
    exact = "exact"


class WindowChoice(StrEnum):
    none = "none"
    hann = "hann"


class UnitsChoice(StrEnum):
    reflected = "reflected"
    irradiance = "irradiance"


SOURCE_HELP = ("Environment map: a panorama or cross/strip/column image (.exr .hdr .tif .png .jpg), a .ktx2 "
               "cubemap, or six faces as a pattern holding {face} (px nx py ny pz nz) or {index} (0-5).")


def _value(v):
    return None if v is None else (v.value if isinstance(v, Enum) else v)


def _report(paths: list[Path]) -> None:
    for p in paths:
        echo(f"wrote {p}")


@env_app.command("convert")
@command
def convert(
    source: Annotated[Path, typer.Argument(help=SOURCE_HELP, show_default=False)],
    out: Annotated[Path, typer.Option("-o", "--out", help="Output: an image, a .ktx2 file or a pattern with "
                                      "{face}.", show_default=False)],
    layout_in: Annotated[LayoutChoice | None, typer.Option(
        "--layout-in", help="Layout of a single input image (default: from its aspect ratio).")] = None,
    layout: Annotated[LayoutChoice | None, typer.Option(
        "--layout", help="Layout of a single output image (default: the input's, or hcross). 'equirect' "
                         "with a .ktx2 output writes a 2D panorama.")] = None,
    size: Annotated[int | None, typer.Option(help="Output face edge in texels (default: input face size or "
                                             "panorama width / 4).", min=1, max=16384)] = None,
    width: Annotated[int | None, typer.Option(help="Output panorama width, even (default: input width or "
                                              "4 x face size).", min=2, max=32768)] = None,
    rotate: Annotated[float, typer.Option(help="Turn about the vertical axis in degrees; positive moves the "
                                          "panorama content to the right.")] = 0.0,
    exposure: Annotated[float, typer.Option(help="Exposure change in EV (values x 2^EV).")] = 0.0,
    filter_: Annotated[FilterChoice, typer.Option(
        "--filter", help="auto: area-weighted (energy-keeping) when shrinking, bilinear otherwise.")
    ] = FilterChoice.auto,
    bits: Annotated[BitsOpt | None, typer.Option(
        "--bits", help="Image samples: 8, 16 (PNG/TIFF), half, float (EXR; float also TIFF). Default follows "
        "the input (float input -> half-float EXR).", show_default=False)] = None,
    ktx_format: Annotated[str | None, typer.Option(
        "--ktx-format", help="KTX2 format: rgba16f (default), rgba32f, rg11b10f, rgb9e5, rgba8, rgba16 or a "
                             "VkFormat name.")] = None,
    mips: Annotated[bool, typer.Option("--mips/--no-mips", help="Write the mip chain into .ktx2 outputs.")
                    ] = True,
    repair: Annotated[bool, typer.Option(help="Set NaN/Inf and negative input values to 0 (counted) instead "
                                         "of refusing the input.")] = False,
) -> None:
    """Convert an environment map between panoramas, cube layouts, face files and KTX2 cubemaps."""
    from bakery.bakes import run_bake
    from bakery.envmap.envbakes import ConvertParams
    from bakery.io.ktx2 import get_format

    if ktx_format is not None:
        get_format(ktx_format)  # a clear error before any work
    params = ConvertParams(layout_in=_value(layout_in), layout=_value(layout), size=size, width=width,
                           rotate=rotate, exposure=exposure, filter=_value(filter_), depth=bits_to_depth(bits),
                           ktx_format=ktx_format, mips=mips, repair=repair)
    _report(run_bake("env-convert", {"source": source}, out, params))


@env_app.command("diffuse")
@command
def diffuse(
    source: Annotated[Path, typer.Argument(help=SOURCE_HELP, show_default=False)],
    out: Annotated[Path, typer.Option("-o", "--out", help="Output .json for the SH coefficients; the "
                                      "irradiance cubemap goes beside it (<name>.ktx2 and "
                                      "<name>_{face}.exr).", show_default=False)],
    size: Annotated[int, typer.Option(help="Face edge of the irradiance cubemap.", min=1, max=1024)] = 32,
    method: Annotated[MethodChoice, typer.Option(
        help="Cubemap from the 9 SH coefficients (sh) or from the exact cosine convolution (exact: right for "
             "sharp lights such as a sun).")] = MethodChoice.sh,
    window: Annotated[WindowChoice, typer.Option(
        help="Window the SH coefficients against ringing (hann: weights 1, 0.75, 0.25 for l = 0, 1, 2).")
    ] = WindowChoice.none,
    units: Annotated[UnitsChoice, typer.Option(
        help="Cubemap values: reflected = E/pi, the radiance a white Lambertian surface reflects; "
             "irradiance = E.")] = UnitsChoice.reflected,
    ktx_format: Annotated[str, typer.Option("--ktx-format", help="KTX2 format of the cubemap.")] = "rgba16f",
    repair: Annotated[bool, typer.Option(help="Set NaN/Inf and negative input values to 0 (counted).")
                      ] = False,
) -> None:
    """Diffuse irradiance: 9 spherical-harmonic coefficients per channel (JSON) and a small irradiance
    cubemap (KTX2 and six EXR faces)."""
    from bakery.bakes import run_bake
    from bakery.envmap.envbakes import DiffuseParams
    from bakery.io.ktx2 import get_format

    get_format(ktx_format)
    params = DiffuseParams(size=size, method=method.value, window=window.value, units=units.value,
                           ktx_format=ktx_format, repair=repair)
    _report(run_bake("env-diffuse", {"source": source}, out, params))
