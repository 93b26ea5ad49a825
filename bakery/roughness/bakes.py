"""Bakes ``roughness`` (exponent/gloss maps -> roughness) and ``antialias`` (roughness mip chains that keep
the normal variance lost by mipmapping): read, call the pure functions in :mod:`bakery.roughness`, write.

No heavy imports at module level (the batch planner imports every bake module).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

import numpy as np

from bakery.bakes import Bake, params_to_dict, register
from bakery.errors import BakeryError, BakeryWarning

Quantity = Literal["exponent", "gloss-linear", "gloss-exp", "smoothness", "roughness", "alpha", "beckmann"]
Channel = Literal["R", "G", "B", "A"]
Depth = Literal["u8", "u16", "f16", "f32"]
CHANNELS = ("R", "G", "B", "A")

#: glTF 2.0, material.pbrMetallicRoughness.metallicRoughnessTexture: roughness in G, metalness in B, linear.
GLTF_ROUGHNESS_CHANNEL = "G"


# ------------------------------------------------------------------------------------------------ helpers


def pick_channel(pixels: np.ndarray, channel: str | None, path: Path, what: str) -> np.ndarray:
    """One channel (H, W) of an image: the named one, or the only one / the grey value of equal R, G, B."""
    c = pixels.shape[2]
    if channel is not None:
        i = CHANNELS.index(channel)
        if i >= c:
            raise BakeryError(f"{what} has {c} channel(s); it has no {channel} channel", path)
        return pixels[:, :, i]
    if c <= 2:  # grey, or grey + alpha
        return pixels[:, :, 0]
    if np.array_equal(pixels[:, :, 0], pixels[:, :, 1]) and np.array_equal(pixels[:, :, 1], pixels[:, :, 2]):
        return pixels[:, :, 0]
    raise BakeryError(f"{what} holds different values in R, G and B; say which channel to read "
                      "(--channel R|G|B|A)", path)


def output_depth(out: Path, requested: str | None, source_depth: str, *, bounded: bool) -> str:
    """The output sample type: the requested one, else the source's when the format holds it, else the
    nearest the format holds. Unbounded values (exponents, Beckmann m) need float samples."""
    from bakery.io.images import WRITABLE, image_format

    fmt = image_format(out, writing=True)
    if requested is not None:
        depth = requested
        if depth not in WRITABLE[fmt]:
            raise BakeryError(f"{fmt.upper()} files cannot hold {depth} samples; use one of "
                              f"{', '.join(WRITABLE[fmt])}", out)
    elif source_depth in WRITABLE[fmt]:
        depth = source_depth
    elif source_depth in ("f16", "f32"):  # float source, format without that float: keep the most precision
        depth = "f32" if "f32" in WRITABLE[fmt] else "u16"
    else:  # integer source into a float-only format
        depth = "f16" if "f16" in WRITABLE[fmt] else "f32"
    if not bounded and depth in ("u8", "u16"):
        raise BakeryError("exponents and Beckmann widths are unbounded and need a float file (.exr or .tif "
                          "with --bits float)", out)
    return depth


def clip_for_integers(values: np.ndarray, depth: str, path: Path, what: str) -> np.ndarray:
    """Integer files hold [0, 1]: clip, and warn with a count when anything was outside."""
    if depth not in ("u8", "u16"):
        return values
    outside = int(np.count_nonzero((values < 0) | (values > 1)))
    if outside:
        warnings.warn(f"{path}: {outside} {what} value(s) outside [0, 1] were clipped to fit the integer file",
                      BakeryWarning, stacklevel=2)
    return np.clip(values, 0.0, 1.0)


def _reraise(exc: BakeryError, path: Path) -> BakeryError:
    return BakeryError(str(exc), path) if getattr(exc, "path", None) is None else exc


# ------------------------------------------------------------------------------------------------ roughness


@dataclass(frozen=True)
class RoughnessParams:
    """Parameters of the ``roughness`` bake (see :func:`bakery.roughness.convert.convert_specular`).

    ``source`` None means "exponent" for float files; integer files hold [0, 1] and must be told their mapping.
    ``pack_channel`` is used only when a ``pack`` input is given: the output is that image with this channel
    replaced (glTF 2.0 metallic-roughness textures keep roughness in G and metalness in B).
    """

    source: Quantity | None = None
    target: Quantity = "roughness"
    model: Literal["blinn-phong", "phong"] = "blinn-phong"
    rule: Literal["peak", "width"] = "peak"
    exponent_range: tuple[float, float] | None = None
    gloss_base: float | None = None
    gloss_scale: float | None = None
    clamp: bool = False
    channel: Channel | None = None
    depth: Depth | None = None
    pack_channel: Channel = GLTF_ROUGHNESS_CHANNEL


INTEGER_HINT = ("--from gloss-linear --exponent-range LO HI, --from gloss-exp --gloss-base B --gloss-scale K, "
                "--from smoothness or --from roughness")


def _source_quantity(params: RoughnessParams, depth: str, path: Path) -> str:
    if params.source is not None:
        if params.source in ("exponent", "beckmann") and depth in ("u8", "u16"):
            bits = 8 if depth == "u8" else 16
            raise BakeryError(
                f"an {bits}-bit file holds values in [0, 1], not raw {params.source} values; for stored integers "
                f"0..{2**bits - 1} use --from gloss-linear --exponent-range 0 {2**bits - 1}", path)
        return params.source
    if depth in ("u8", "u16"):
        bits = 8 if depth == "u8" else 16
        raise BakeryError(f"an {bits}-bit map does not say how it encodes exponents; give its mapping: "
                          f"{INTEGER_HINT}", path)
    return "exponent"


def run_roughness(inputs: dict[str, Path], output: Path, params: RoughnessParams) -> list[Path]:
    from bakery.io import read_image, write_image, write_manifest
    from bakery.roughness.convert import QUANTITIES, convert_specular

    src_path = inputs["map"]
    img = read_image(src_path, allow_nonfinite=True)
    source = _source_quantity(params, img.depth, src_path)
    values = pick_channel(img.pixels, params.channel, src_path, "the map")
    target = QUANTITIES[params.target]
    pack = inputs.get("pack")
    packed = None
    if pack is not None:
        packed = read_image(pack)
        if packed.pixels.shape[:2] != values.shape:
            ph, pw = packed.pixels.shape[:2]
            raise BakeryError(f"image to pack into is {pw}x{ph} but the map is {values.shape[1]}x"
                              f"{values.shape[0]}; they must be the same size", pack)
        if packed.channels < 3:
            raise BakeryError(f"image to pack into has {packed.channels} channel(s); packing needs 3 or 4 "
                              "(glTF 2.0: roughness in G, metalness in B)", pack)
        if CHANNELS.index(params.pack_channel) >= packed.channels:
            raise BakeryError(f"image to pack into has no {params.pack_channel} channel", pack)
    depth = output_depth(output, params.depth, packed.depth if packed is not None else img.depth,
                         bounded=math.isfinite(target.high))
    try:
        result = convert_specular(values, source=source, target=params.target, model=params.model,
                                  rule=params.rule, exponent_range=params.exponent_range,
                                  gloss_base=params.gloss_base, gloss_scale=params.gloss_scale, clamp=params.clamp)
    except BakeryError as exc:
        raise _reraise(exc, src_path) from None
    result = clip_for_integers(result, depth, output, params.target)
    if depth == "f16":
        big = int(np.count_nonzero(result > 65504.0))
        if big:
            warnings.warn(f"{output}: {big} value(s) above 65504 (the largest half float) stored as 65504; "
                          "write --bits float to keep them", BakeryWarning, stacklevel=2)
            result = np.minimum(result, np.float32(65504.0))
    if packed is not None:
        pixels = packed.pixels.copy()
        pixels[:, :, CHANNELS.index(params.pack_channel)] = result
    else:
        pixels = result
    write_image(output, pixels, depth=depth)  # data, never sRGB-encoded
    p = params_to_dict(params)
    p["source"] = source
    conventions = {
        "transfer": "linear",
        "target": target.summary,
        "roughness": "perceptual roughness r; GGX alpha = r^2 (Burley 2012)",
    }
    if packed is not None:
        conventions["packing"] = f"roughness in {params.pack_channel} of {pack.name} (glTF 2.0 metallicRoughness)"
    manifest = write_manifest(output, bake="roughness", inputs=inputs, params=p, outputs=[output],
                              extra={"conventions": conventions})
    return [output, manifest]


register(Bake(
    name="roughness",
    summary="specular-exponent, gloss or smoothness map -> roughness (or back)",
    inputs=("map", "pack?"),
    params=RoughnessParams,
    run=run_roughness,
))


# ------------------------------------------------------------------------------------------------ antialias


@dataclass(frozen=True)
class AntialiasParams:
    """Parameters of the ``antialias`` bake (see :func:`bakery.roughness.antialias.roughness_mips`).

    ``roughness`` is a constant perceptual roughness used when no roughness map is given. ``ktx2`` also writes
    ``NAME.ktx2`` when the output names loose image files. ``channel`` picks the roughness map's channel.
    """

    roughness: float | None = None
    method: Literal["vmf", "toksvig"] = "vmf"
    lobe: Literal["ggx", "beckmann"] = "ggx"
    levels: int | None = None
    ktx2: bool = False
    channel: Channel | None = None
    depth: Depth | None = None


KTX2_FORMATS = {"u8": "R8_UNORM", "u16": "R16_UNORM"}


def level_paths(output: Path, count: int) -> list[Path]:
    """``NAME.png`` -> ``NAME.mip00.png``, ``NAME.mip01.png``, ...; ``NAME.ktx2`` -> itself."""
    if output.suffix.lower() == ".ktx2":
        return [output]
    return [output.with_name(f"{output.stem}.mip{k:02d}{output.suffix}") for k in range(count)]


def run_antialias(inputs: dict[str, Path], output: Path, params: AntialiasParams) -> list[Path]:
    import contextlib

    from bakery.io import atomic_output, check_distinct, read_image, write_image, write_manifest
    from bakery.normals.bakes import read_normals
    from bakery.roughness.antialias import roughness_mips

    normal_path = inputs["normal"]
    rough_path = inputs.get("roughness")
    if rough_path is None and params.roughness is None:
        raise BakeryError("give a roughness map (second argument) or a constant roughness (--roughness R)",
                          normal_path)
    if rough_path is not None and params.roughness is not None:
        raise BakeryError("give either a roughness map or --roughness, not both", rough_path)
    normals, _ = read_normals(normal_path, "up")  # the Y convention does not change lengths of averages
    source_depth = "u16"
    if rough_path is not None:
        rough_img = read_image(rough_path)
        if rough_img.pixels.shape[:2] != normals.shape[:2]:
            (rh, rw), (nh, nw) = rough_img.pixels.shape[:2], normals.shape[:2]
            raise BakeryError(f"roughness map is {rw}x{rh} but the normal map {normal_path.name} is {nw}x{nh}; "
                              "they must be the same size", rough_path)
        base = pick_channel(rough_img.pixels, params.channel, rough_path, "the roughness map")
        outside = int(np.count_nonzero(~((base >= 0) & (base <= 1))))
        if outside:
            raise BakeryError(f"{outside} roughness value(s) outside [0, 1]; perceptual roughness maps hold "
                              "[0, 1]", rough_path)
        source_depth = rough_img.depth
    else:
        base = float(params.roughness)
        if not 0.0 <= base <= 1.0:
            raise BakeryError(f"--roughness must lie in [0, 1]; got {base:g}")
    ktx2_only = output.suffix.lower() == ".ktx2"
    if ktx2_only:
        depth = params.depth or ("u8" if source_depth == "u8" else "u16")
        if depth not in KTX2_FORMATS:
            raise BakeryError("KTX2 roughness chains are stored as R8_UNORM or R16_UNORM; use --bits 8 or 16",
                              output)
    else:
        depth = output_depth(output, params.depth, source_depth, bounded=True)
    try:
        chain = roughness_mips(normals, base, levels=params.levels, method=params.method, lobe=params.lobe)
    except BakeryError as exc:
        raise _reraise(exc, normal_path) from None
    paths = level_paths(output, len(chain))
    ktx2_path = output if ktx2_only else (output.with_suffix(".ktx2") if params.ktx2 else None)
    if ktx2_path is not None and ktx2_path not in paths:
        paths.append(ktx2_path)
    check_distinct(paths, [p for p in (normal_path, rough_path) if p is not None])
    describe = (f"perceptual roughness r (GGX alpha = r^2, Burley 2012); level k adds the normal spread under its "
                f"footprint: alpha^2 = mean(alpha_0^2) + c * v(|Na|), method {params.method}, lobe {params.lobe}")
    with contextlib.ExitStack() as stack:  # every file renamed into place only after all were written
        if not ktx2_only:
            for level, path in zip(chain, paths, strict=False):
                tmp = stack.enter_context(atomic_output(path))
                write_image(tmp, level, depth=depth)
        if ktx2_path is not None:
            from bakery.io.ktx2 import write_ktx2

            tmp = stack.enter_context(atomic_output(ktx2_path))
            fmt = KTX2_FORMATS[depth if depth in KTX2_FORMATS else "u16"]
            write_ktx2(tmp, [lv[:, :, None] for lv in chain], fmt, cubemap=False,
                       key_values={"bakery.roughness": describe})
    conventions = {"roughness": describe, "transfer": "linear",
                   "levels": [{"level": k, "size": [int(lv.shape[1]), int(lv.shape[0])]}
                              for k, lv in enumerate(chain)]}
    manifest = write_manifest(output, bake="antialias", inputs={k: v for k, v in inputs.items() if v},
                              params=params_to_dict(params), outputs=paths, extra={"conventions": conventions})
    return paths + [manifest]


register(Bake(
    name="antialias",
    summary="normal map (+ roughness) -> roughness mip chain widened by the normal spread of each level",
    inputs=("normal", "roughness?"),
    params=AntialiasParams,
    run=run_antialias,
))
