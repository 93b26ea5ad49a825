"""Bakes ``roughness`` (exponent/gloss maps -> roughness) and ``antialias`` (roughness mip chains that keep
the normal variance lost by mipmapping): read, call the pure functions in :mod:`bakery.roughness`, write.

No heavy imports at module level (the batch planner imports every bake module).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal

from bakery.bakes import Bake, Progress, bake_threads, level_path, one_output, params_to_dict, register, within
from bakery.bakes.params import (
    Bits,
    Channel,
    Params,
    bits_param,
    channel_param,
    effort_param,
    ktx2_format_param,
    loose_param,
    param,
    parse_numbers,
    zstd_param,
)
from bakery.errors import BakeryError, BakeryWarning

if TYPE_CHECKING:
    import numpy as np

Quantity = Literal["exponent", "gloss-linear", "gloss-exp", "smoothness", "roughness", "alpha", "beckmann"]
CHANNELS = ("r", "g", "b", "a")

#: glTF 2.0, material.pbrMetallicRoughness.metallicRoughnessTexture: roughness in G, metalness in B, linear.
GLTF_ROUGHNESS_CHANNEL = "g"


# ------------------------------------------------------------------------------------------------ helpers


def pick_channel(pixels: np.ndarray, channel: str | None, path: Path, what: str) -> np.ndarray:
    """One channel (H, W) of an image: the named one, or the only one / the grey value of equal R, G, B."""
    import numpy as np

    c = pixels.shape[2]
    if channel is not None:
        i = CHANNELS.index(channel)
        if i >= c:
            raise BakeryError(f"{what} has {c} channel(s); it has no {channel.upper()} channel", path)
        return pixels[:, :, i]
    if c <= 2:  # grey, or grey + alpha
        return pixels[:, :, 0]
    if np.array_equal(pixels[:, :, 0], pixels[:, :, 1]) and np.array_equal(pixels[:, :, 1], pixels[:, :, 2]):
        return pixels[:, :, 0]
    raise BakeryError(f"{what} holds different values in R, G and B; say which channel to read "
                      "(--channel r|g|b|a)", path)


def output_bits(out: Path, requested: str | None, source_bits: str, *, bounded: bool) -> str:
    """The output sample type: the requested one, else the source's when the format holds it, else the
    nearest the format holds. Unbounded values (exponents, Beckmann m) need float samples."""
    from bakery.io.images import WRITABLE, image_format

    fmt = image_format(out, writing=True)
    if requested is not None:
        bits = requested
        if bits not in WRITABLE[fmt]:
            raise BakeryError(f"{fmt.upper()} files cannot hold {bits} samples; use one of "
                              f"{', '.join(WRITABLE[fmt])}", out)
    elif source_bits in WRITABLE[fmt]:
        bits = source_bits
    elif source_bits in ("half", "float"):  # float source, format without that float: keep the most precision
        bits = "float" if "float" in WRITABLE[fmt] else "16"
    else:  # integer source into a float-only format
        bits = "half" if "half" in WRITABLE[fmt] else "float"
    if not bounded and bits in ("8", "16"):
        raise BakeryError("exponents and Beckmann widths are unbounded and need a float file (.exr or .tif "
                          "with --bits float)", out)
    return bits


def clip_for_integers(values: np.ndarray, bits: str, path: Path, what: str) -> np.ndarray:
    """Integer files hold [0, 1]: clip, and warn with a count when anything was outside."""
    import numpy as np

    if bits not in ("8", "16"):
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
class RoughnessParams(Params):
    """Parameters of the ``roughness`` bake (see :func:`bakery.roughness.convert.convert_specular`).

    ``source`` None means "exponent" for float files; integer files hold [0, 1] and must be told their mapping.
    ``pack_channel`` is used only when a ``pack`` input is given: the output is that image with this channel
    replaced (glTF 2.0 metallic-roughness textures keep roughness in G and metalness in B).
    """

    source: Quantity | None = param(
        None, "What the input map holds: exponent (default for float files), gloss-linear, gloss-exp, "
        "smoothness, roughness, alpha or beckmann. 8/16-bit files must be told.")
    target: Quantity = param(
        "roughness", "What to write: roughness (perceptual, r = sqrt(alpha)), alpha (GGX), beckmann (m), "
        "smoothness, or back to exponent / gloss-linear / gloss-exp.")
    model: Literal["blinn-phong", "phong"] = param(
        "blinn-phong", "Lobe of the exponent: blinn-phong (about the half vector) or phong (about the mirror "
        "direction, counted as a 4x smaller Blinn-Phong exponent).")
    rule: Literal["peak", "width"] = param(
        "peak", "Match the lobes' peak heights (alpha = sqrt(2/(n+2)), Walter et al. 2007) or their "
        "half-maximum angles.")
    exponent_range: tuple[float, float] | None = param(
        None, "LO,HI: the exponents gloss 0 and 1 stand for; gloss-linear: n = LO + g (HI - LO); gloss-exp: "
        "n = LO (HI/LO)^g.", low=0.0, parse=parse_numbers, metavar="LO,HI")
    clamp: bool = param(False, "Clip out-of-range input values (NaN -> roughest) with a warning instead of "
                        "stopping.")
    channel: Channel | None = channel_param()
    bits: Bits | None = bits_param()
    pack_channel: Channel = param(GLTF_ROUGHNESS_CHANNEL, "Channel of the --pack image that receives the result "
                                  "(glTF 2.0 metallic-roughness: g).")
    ktx2_format: str | None = ktx2_format_param(None, "Texel format of a .ktx2 output (a mip chain): r8/r16 by "
                                                "--bits, rgba8/rgba16 when packing, bc4, bc7 or compressed.")
    effort: Literal["fast", "balanced", "best"] = effort_param()
    zstd: int | None = zstd_param()


INTEGER_HINT = ("--source gloss-linear --exponent-range LO,HI, --source gloss-exp --exponent-range LO,HI, "
                "--source smoothness or --source roughness")


def _source_quantity(params: RoughnessParams, bits: str, path: Path) -> str:
    if params.source is not None:
        if params.source in ("exponent", "beckmann") and bits in ("8", "16"):
            bits = 8 if bits == "8" else 16
            raise BakeryError(
                f"an {bits}-bit file holds values in [0, 1], not raw {params.source} values; for stored integers "
                f"0..{2**bits - 1} use --source gloss-linear --exponent-range 0,{2**bits - 1}", path)
        return params.source
    if bits in ("8", "16"):
        bits = 8 if bits == "8" else 16
        raise BakeryError(f"an {bits}-bit map does not say how it encodes exponents; give its mapping: "
                          f"{INTEGER_HINT}", path)
    return "exponent"


def run_roughness(inputs: dict[str, Path], output: Path, params: RoughnessParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.io import read_image, write_image, write_manifest
    from bakery.roughness.convert import QUANTITIES, convert_specular

    src_path = inputs["specular"]
    progress(0.0, "reading")
    img = read_image(src_path, allow_nonfinite=True, progress=within(progress, 0.0, 0.2 if "pack" in inputs
                                                                     and inputs["pack"] else 0.25))
    source = _source_quantity(params, img.bits, src_path)
    values = pick_channel(img.pixels, params.channel, src_path, "the map")
    target = QUANTITIES[params.target]
    pack = inputs.get("pack")
    packed = None
    if pack is not None:
        packed = read_image(pack, progress=within(progress, 0.2, 0.25))
        if packed.pixels.shape[:2] != values.shape:
            ph, pw = packed.pixels.shape[:2]
            raise BakeryError(f"image to pack into is {pw}x{ph} but the map is {values.shape[1]}x"
                              f"{values.shape[0]}; they must be the same size", pack)
        if packed.channels < 3:
            raise BakeryError(f"image to pack into has {packed.channels} channel(s); packing needs 3 or 4 "
                              "(glTF 2.0: roughness in G, metalness in B)", pack)
        if CHANNELS.index(params.pack_channel) >= packed.channels:
            raise BakeryError(f"image to pack into has no {params.pack_channel} channel", pack)
    ktx2 = output.suffix.lower() == ".ktx2"
    if ktx2:  # a mip chain (area box) of the result, from the float values
        if not math.isfinite(target.high):
            raise BakeryError("exponents and Beckmann widths are unbounded; a KTX2 chain holds [0, 1]", output)
        bits = params.bits or ("8" if (packed.bits if packed is not None else img.bits) == "8" else "16")
        if bits not in KTX2_FORMATS:
            raise BakeryError("KTX2 outputs hold 8 or 16-bit samples here (or a block format); use --bits 8 or 16",
                              output)
    else:
        bits = output_bits(output, params.bits, packed.bits if packed is not None else img.bits,
                             bounded=math.isfinite(target.high))
    # shares of the time (measured on an 8192^2 16-bit PNG, 4.2 s): reading 25 %, converting 10 %, writing 65 %
    progress(0.25, "converting")
    try:
        result = convert_specular(values, source=source, target=params.target, model=params.model,
                                  rule=params.rule, exponent_range=params.exponent_range, clamp=params.clamp,
                                  progress=lambda f: progress(0.25 + 0.09 * f, "converting"))
    except BakeryError as exc:
        raise _reraise(exc, src_path) from None
    result = clip_for_integers(result, bits, output, params.target)
    if bits == "half":
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
    quality = None
    progress(0.35, "writing")
    if ktx2:
        from bakery.io.texcompress import build_levels, resolve_format, write_texture

        px = pixels if pixels.ndim == 3 else pixels[:, :, None]
        names = {1: "r", 3: "rgba", 4: "rgba"}
        fmt = resolve_format(params.ktx2_format or f"{names.get(px.shape[2], 'rgba')}{bits}", "data", px.shape[2])
        _, quality = write_texture(output, build_levels(px, kind="data"), fmt, kind="data", effort=params.effort,
                                   zstd=params.zstd, threads=bake_threads(),
                                   key_values={"bakery.roughness": target.summary},
                                   progress=within(progress, 0.35, 0.95))
    else:
        write_image(output, pixels, bits=bits, progress=within(progress, 0.35, 0.95),  # data, never sRGB-encoded
                    threads=bake_threads())
    p = params_to_dict(params)
    p["source"] = source
    conventions = {
        "transfer": "linear",
        "target": target.summary,
        "roughness": "perceptual roughness r; GGX alpha = r^2 (Burley 2012)",
    }
    if packed is not None:
        conventions["packing"] = (f"roughness in {params.pack_channel.upper()} of {pack.name} "
                                  "(glTF 2.0 metallicRoughness)")
    extra = {"conventions": conventions}
    if quality:
        extra["quality"] = {output.name: quality}
    manifest = write_manifest(output, bake="roughness", inputs=inputs, params=p, outputs=[output], extra=extra)
    progress(1.0, "done")
    return [output, manifest]


register(Bake(
    name="roughness",
    summary="specular-exponent, gloss or smoothness map -> roughness (or back)",
    inputs=("specular", "pack?"),
    params=RoughnessParams,
    outputs=one_output,
    run=run_roughness,
))


# ------------------------------------------------------------------------------------------------ antialias


@dataclass(frozen=True)
class AntialiasParams(Params):
    """Parameters of the ``antialias`` bake (see :func:`bakery.roughness.antialias.roughness_mips`).

    ``roughness`` is a constant perceptual roughness used when no roughness map is given. ``loose`` also writes
    every level as an image file when the output is ``NAME.ktx2``. ``channel`` picks the roughness map's channel.
    """

    roughness: float | None = param(None, "Constant perceptual roughness when no roughness map is given.",
                                    low=0.0, high=1.0)
    method: Literal["vmf", "toksvig"] = param(
        "vmf", "Normal spread from the averaged normal length |Na|: vmf (von Mises-Fisher fit, Banerjee et al. "
        "2005) or toksvig (Toksvig 2005).")
    lobe: Literal["ggx", "beckmann"] = param(
        "ggx", "Distribution the roughness drives in the renderer (sets how spread adds to alpha^2).")
    levels: int | None = param(None, "Number of mip levels (default: the full chain to 1x1).", low=1, high=16)
    loose: bool = loose_param()
    channel: Channel | None = channel_param("Channel of the roughness map to read (g for a glTF "
                                            "metallic-roughness map); default: the only one, or equal r, g, b.")
    bits: Bits | None = bits_param("Samples of the levels: 8, 16, half, float (default: follows the roughness "
                                   "map, else 16).")
    ktx2_format: str | None = ktx2_format_param(None, "Texel format of a .ktx2 output: r8, r16 (by --bits), bc4 or "
                                                "compressed (= bc4).")
    effort: Literal["fast", "balanced", "best"] = effort_param()
    zstd: int | None = zstd_param()


KTX2_FORMATS = {"8": "R8_UNORM", "16": "R16_UNORM"}


def _roughness_format(name: str | None, bits: str, output: Path):
    """The texel format of a one-channel KTX2 chain: R8/R16 by the sample type, or bc4 (``compressed``)."""
    from bakery.io.texcompress import resolve_format

    fmt = resolve_format(name or KTX2_FORMATS[bits], "data", 1)
    if fmt.channels != 1 and fmt.block is None:
        raise BakeryError(f"a roughness chain has one channel; {fmt.short_name} has {fmt.channels}", output)
    return fmt


def level_paths(output: Path, count: int, loose: bool = False) -> list[Path]:
    """``NAME.png`` -> ``NAME.png`` (level 0), ``NAME.mip01.png``, ...; ``NAME.ktx2`` -> itself, plus
    ``NAME.png``, ``NAME.mip01.png`` ... with ``loose``."""
    if output.suffix.lower() == ".ktx2":
        image = output.with_suffix(".png")
        return [output] + ([level_path(image, k) for k in range(count)] if loose else [])
    return [level_path(output, k) for k in range(count)]


def antialias_outputs(inputs: dict[str, Path], output: Path, params: AntialiasParams) -> list[Path]:
    from bakery.io.images import image_size
    from bakery.io.manifest import manifest_path
    from bakery.mips import level_count

    w, h = image_size(inputs["normal"])
    if params.loose and output.suffix.lower() != ".ktx2":
        raise BakeryError("--loose goes with a .ktx2 output (an image output already writes every level as a "
                          "file)", output)
    return level_paths(output, level_count(w, h, params.levels), params.loose) + [manifest_path(output)]


def run_antialias(inputs: dict[str, Path], output: Path, params: AntialiasParams, progress: Progress) -> list[Path]:
    import contextlib

    import numpy as np

    from bakery.bakes.normals import read_normals
    from bakery.io import atomic_output, check_distinct, read_image, write_image, write_manifest
    from bakery.roughness.antialias import roughness_mips

    normal_path = inputs["normal"]
    rough_path = inputs.get("roughness")
    if rough_path is None and params.roughness is None:
        raise BakeryError("give a roughness map (second argument) or a constant roughness (--roughness R)",
                          normal_path)
    if rough_path is not None and params.roughness is not None:
        raise BakeryError("give either a roughness map or --roughness, not both", rough_path)
    progress(0.0, "reading")
    normals, _ = read_normals(normal_path, "up", within(progress, 0.0, 0.55))  # Y does not change lengths
    source_bits = "16"
    if rough_path is not None:
        rough_img = read_image(rough_path, progress=within(progress, 0.55, 0.6))
        if rough_img.pixels.shape[:2] != normals.shape[:2]:
            (rh, rw), (nh, nw) = rough_img.pixels.shape[:2], normals.shape[:2]
            raise BakeryError(f"roughness map is {rw}x{rh} but the normal map {normal_path.name} is {nw}x{nh}; "
                              "they must be the same size", rough_path)
        base = pick_channel(rough_img.pixels, params.channel, rough_path, "the roughness map")
        outside = int(np.count_nonzero(~((base >= 0) & (base <= 1))))
        if outside:
            raise BakeryError(f"{outside} roughness value(s) outside [0, 1]; perceptual roughness maps hold "
                              "[0, 1]", rough_path)
        source_bits = rough_img.bits
    else:
        base = float(params.roughness)
    ktx2 = output.suffix.lower() == ".ktx2"
    if ktx2:
        bits = params.bits or ("8" if source_bits == "8" else "16")
        if bits not in KTX2_FORMATS:
            raise BakeryError("KTX2 roughness chains are stored as R8_UNORM or R16_UNORM (or --ktx2-format bc4); "
                              "use --bits 8 or 16", output)
        fmt = _roughness_format(params.ktx2_format, bits, output)
    else:
        bits = output_bits(output, params.bits, source_bits, bounded=True)
    # shares of the time (measured on an 8192^2 16-bit normal map with PNG levels, 12 s): reading and the unit
    # check 65 %, the chain 20 %, writing the levels 15 %
    progress(0.65, "levels")
    try:
        chain = roughness_mips(normals, base, levels=params.levels, method=params.method, lobe=params.lobe,
                               progress=lambda f: progress(0.65 + 0.19 * f, "levels"))
    except BakeryError as exc:
        raise _reraise(exc, normal_path) from None
    paths = level_paths(output, len(chain), params.loose)
    check_distinct(paths, [p for p in (normal_path, rough_path) if p is not None])
    images = paths[1:] if ktx2 else paths
    describe = (f"perceptual roughness r (GGX alpha = r^2, Burley 2012); level k adds the normal spread under its "
                f"footprint: alpha^2 = mean(alpha_0^2) + c * v(|Na|), method {params.method}, lobe {params.lobe}")
    # writing: each level's share by its texels (level 0 about three quarters); a KTX2 chain counts as much
    # as its images
    sizes = [lv.size for lv in chain]
    shares = [n / sum(sizes) for n in sizes] if images else []
    if ktx2:
        shares = [0.5 * f for f in shares] if images else []
    done = 0.85
    with contextlib.ExitStack() as stack:  # every file renamed into place only after all were written
        for level, path, share in zip(chain, images, shares, strict=False):
            progress(done, f"writing {path.name}")
            tmp = stack.enter_context(atomic_output(path))
            write_image(tmp, level, bits=bits, threads=bake_threads(),
                        progress=within(progress, done, done + 0.14 * share))
            done += 0.14 * share
        quality = None
        if ktx2:
            from bakery.io.texcompress import write_texture

            progress(done, f"writing {output.name}")
            tmp = stack.enter_context(atomic_output(output))
            _, quality = write_texture(tmp, [lv[:, :, None] for lv in chain], fmt, kind="data",
                                       key_values={"bakery.roughness": describe}, effort=params.effort,
                                       zstd=params.zstd, threads=bake_threads(),
                                       progress=within(progress, done, 0.99))
    conventions = {"roughness": describe, "transfer": "linear",
                   "levels": [{"level": k, "size": [int(lv.shape[1]), int(lv.shape[0])]}
                              for k, lv in enumerate(chain)]}
    extra = {"conventions": conventions}
    if quality:
        extra["quality"] = {output.name: quality}
    manifest = write_manifest(output, bake="antialias", inputs={k: v for k, v in inputs.items() if v},
                              params=params_to_dict(params), outputs=paths, extra=extra)
    progress(1.0, "done")
    return paths + [manifest]


register(Bake(
    name="antialias",
    summary="normal map (+ roughness) -> roughness mip chain widened by the normal spread of each level",
    inputs=("normal", "roughness?"),
    params=AntialiasParams,
    outputs=antialias_outputs,
    run=run_antialias,
))
