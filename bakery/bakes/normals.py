"""The normal-map bakes: ``normal``, ``height``, ``blend``, ``normal-mips`` and ``normal-fix``.

Each bake reads its inputs through :mod:`bakery.io`, calls the pure functions of :mod:`bakery.normals`, writes
its outputs atomically and a JSON manifest beside them. The CLI (``bakery/cli/normals.py``) and the batch
runner both reach them through :func:`bakery.bakes.run_bake`.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from bakery.bakes import (
    Bake,
    Progress,
    bake_threads,
    level_path,
    no_progress,
    one_output,
    params_to_dict,
    register,
    within,
)
from bakery.bakes.params import (
    Bits,
    Edges,
    Params,
    YConvention,
    bits_param,
    edges_param,
    effort_param,
    ktx2_format_param,
    param,
    parse_numbers,
    y_param,
    zstd_param,
)
from bakery.errors import BakeryError, BakeryWarning
from bakery.progress import maybe_within

KernelName = Literal["scharr", "sobel", "prewitt", "central"]
Effort = Literal["fast", "balanced", "best"]
KTX2_NORMAL_FORMAT = ktx2_format_param(None, "Texel format of a .ktx2 output: rgba8, rgba16, rgba16f ..., bc5 "
                                       "(XY, Z rebuilt by the shader) or compressed (= bc5). Default: the "
                                       "uncompressed format of the sample type.")

ENCODING = "rgb = n * 0.5 + 0.5; integers round to nearest, ties to even"
#: ITU-R BT.709 luma weights, used for ``channel="luminance"`` on the stored (not linearised) values.
LUMA_709 = (0.2126, 0.7152, 0.0722)


# ------------------------------------------------------------------------------------------- shared pieces


def _conventions(y: str) -> dict:
    return {"y": y, "y_meaning": "+Y up (OpenGL-style, glTF 2.0)" if y == "up" else
            "+Y down (DirectX-style): green stores -n.y", "encoding": ENCODING}


def output_bits(output: Path, bits: str | None, input_bits: str) -> str:
    """Sample type of an output: ``bits`` if given, else the input's when the format can hold it, else the
    nearest the format holds (16-bit PNG/TIFF for float input, half EXR for integer input)."""
    from bakery.io.images import WRITABLE, image_format

    fmt = image_format(output, writing=True)
    if bits is not None:
        if bits not in WRITABLE[fmt]:
            raise BakeryError(f"{fmt.upper()} files cannot hold {bits}-bit samples" if bits in ("8", "16") else
                              f"{fmt.upper()} files cannot hold {bits} floats", output)
        return bits
    if input_bits in WRITABLE[fmt]:
        return input_bits
    if fmt in ("png", "tiff"):
        return "16"
    return "float" if input_bits == "float" and "float" in WRITABLE[fmt] else WRITABLE[fmt][0]


def check_output(output: Path) -> str:
    """The output's format; normal and height maps go to PNG, TIFF or OpenEXR."""
    from bakery.io.images import image_format

    fmt = image_format(output, writing=True)
    if fmt not in ("png", "tiff", "exr"):
        raise BakeryError(f"write normal and height maps as .png, .tif or .exr, not {fmt.upper()}", output)
    return fmt


def resolve_strength(shape: tuple[int, int], strength: float | None, relief: float | None,
                     span: tuple[float, ...]) -> tuple[float, float]:
    """``(s_x, s_y)`` from either a plain factor or physical sizes (default: relief = width / 32)."""
    from bakery.normals.from_height import DEFAULT_RELIEF_RATIO, strength_from_size

    if strength is not None:
        if relief is not None or span:
            raise BakeryError("give either a plain strength or a physical relief and span, not both")
        return float(strength), float(strength)
    if len(span) not in (0, 1, 2):
        raise BakeryError(f"span is the texture's physical width, or width and height; got {list(span)}")
    width = span[0] if span else 1.0
    tall = span[1] if len(span) == 2 else None
    if relief is None:
        relief = DEFAULT_RELIEF_RATIO * width
    return strength_from_size(shape, relief, width, tall)


def read_height(path: Path, channel: str | None = None, stretch: bool = False, *,
                flat: str = "the normal map is flat", progress: Progress | None = None):
    """A height map from a file: (H, W) float32 and the file's sample type.

    Gray files, and colour files whose colour channels are equal, are read as gray; other colour files need
    ``channel``. Warns when the heights are constant (``flat`` says what that makes of the result).
    """
    import numpy as np

    from bakery.io.images import read_image

    img = read_image(path, progress=progress)
    px = img.pixels
    c = px.shape[2]
    names = {"r": 0, "g": 1, "b": 2, "a": 3}  # RGB(A) order
    if channel == "luminance":
        if c < 3:
            raise BakeryError("luminance needs an RGB file; this one is gray", path)
        w = np.asarray(LUMA_709, np.float32)
        h = px[:, :, 0] * w[0] + px[:, :, 1] * w[1] + px[:, :, 2] * w[2]
    elif channel is not None:
        if c <= 2:  # gray (+ alpha): r, g and b all name the gray channel
            idx = (1 if channel == "a" else 0) if c == 2 else (None if channel == "a" else 0)
        else:
            idx = names[channel] if names[channel] < c else None
        if idx is None:
            raise BakeryError(f"has no {channel.upper()} channel ({c} channel(s))", path)
        h = px[:, :, idx]
    elif c <= 2:  # gray, or gray + alpha
        h = px[:, :, 0]
    else:
        if not (np.array_equal(px[:, :, 0], px[:, :, 1]) and np.array_equal(px[:, :, 1], px[:, :, 2])):
            raise BakeryError("colour channels differ, so it is not a plain height map; pick one with "
                              "--channel r|g|b|a or use --channel luminance", path)
        h = px[:, :, 0]
    h = np.ascontiguousarray(h, dtype=np.float32)
    lo, hi = float(h.min()), float(h.max())
    if lo == hi:
        warnings.warn(f"{path}: the height map is constant ({lo:.6g} everywhere): {flat}",
                      BakeryWarning, stacklevel=2)
    elif stretch:
        h -= np.float32(lo)
        h *= np.float32(1.0 / (hi - lo))
    return h, img.bits, (lo, hi)


#: Shares of :func:`read_normals`' time (measured on an 8192^2 16-bit PNG: decoding the file 60 %, rebuilding
#: the vectors 15 %, the unit check 25 %).
READ_NORMAL_STEPS = {"decode": 0.6, "check": 0.75}


def read_normals(path: Path, y: str, progress: Progress | None = None):
    """Unit normals (H, W, 3) (+Y up) from a file, its sample type and channel count; warns (naming the file)
    and renormalizes when the stored vectors are not unit length. A 2D KTX2 file gives its level 0 (a BC5 map
    its X and Y; Z is rebuilt). ``progress(fraction, "reading")`` after each of its steps, ending at 1."""
    from bakery.io.images import Image, read_image
    from bakery.normals.encode import decode_normals, unit_normals

    if Path(path).suffix.lower() == ".ktx2":
        import numpy as np

        from bakery.io.ktx2 import read_ktx2

        tex = read_ktx2(path)
        if tex.cubemap:
            raise BakeryError("is a cubemap; a normal map is a 2D texture", path)
        f = tex.format
        bits = "half" if f.is_float else "16" if (f.block is None and f.bits == 16) else "8"
        px = np.ascontiguousarray(tex.levels[0], dtype=np.float32)
        if f.channels == 4 and f.block is None:
            px = px[..., :3]  # RGBA chains store XYZ with alpha 1
        img = Image(px, bits, "ktx2", Path(path))
    else:
        img = read_image(path, progress=maybe_within(progress, 0.0, READ_NORMAL_STEPS["decode"]))
    if img.channels == 1:
        raise BakeryError("has one channel: a normal map needs 2 (XY), 3 (RGB) or 4 (RGBA)", path)
    progress = progress or no_progress
    progress(READ_NORMAL_STEPS["decode"], "reading")
    n = decode_normals(img.pixels, y=y)
    progress(READ_NORMAL_STEPS["check"], "reading")
    n = unit_normals(n, what=str(path), progress=within(progress, READ_NORMAL_STEPS["check"], 0.98))
    progress(1.0, "reading")
    return n, img


def write_normals(path: Path, n, *, y: str, channels: int, bits: str, progress: Progress | None = None) -> Path:
    from bakery.io.images import write_image
    from bakery.normals.encode import encode_normals

    return write_image(path, encode_normals(n, y=y, channels=channels), bits=bits, progress=progress,
                       threads=bake_threads())


# ------------------------------------------------------------------------------------------------- normal

STRENGTH = param(None, "Plain strength factor s in n = normalize(-s dh/dx, -s dh/dy, 1), derivatives per texel; "
                 "instead of --relief/--span.", low=0.0)
RELIEF = param(None, "Physical relief the full height range stands for (0..65535 in a 16-bit file), in the unit "
               "of --span. Default: 1/32 of the width.", unit="span unit", low=0.0, low_open=True)
SPAN = param((), "Physical size the texture covers: WIDTH or WIDTHxHEIGHT, in the unit of --relief. Default 1 "
             "(square texels).", unit="span unit", low=0.0, low_open=True, parse=parse_numbers,
             metavar="W[xH]")
KERNEL = param("scharr", "Derivative kernel (Scharr 2000, Sobel in Duda & Hart 1973, Prewitt 1970, central "
               "differences).")

HeightChannel = Literal["r", "g", "b", "a", "luminance"]
HEIGHT_CHANNEL = param(None, "Which channel of a colour file holds the heights (luminance: BT.709 weights); "
                       "default: gray files, or colour files with equal channels.")
STRETCH = param(False, "Use the data's min..max as the full height range instead of the file's nominal range.")


def check_strength(p) -> None:
    if p.strength is not None and (p.relief is not None or p.span):
        raise BakeryError("give either --strength or a physical --relief and --span, not both")
    if len(p.span) > 2:
        raise BakeryError(f"span is the texture's physical width, or width and height; got {list(p.span)}")


@dataclass(frozen=True)
class NormalParams(Params):
    """Parameters of the ``normal`` bake (height map -> normal map). See docs/normals.md."""

    strength: float | None = STRENGTH
    relief: float | None = RELIEF
    span: tuple[float, ...] = SPAN
    kernel: KernelName = KERNEL
    blur: float = param(0.0, "Gaussian pre-blur of the heights, standard deviation in texels (0.5-1 hides "
                        "8-bit terraces); at most a quarter of the map's shorter side.", unit="texels", low=0.0)
    edges: Edges = edges_param()
    y: YConvention = y_param()
    channels: Literal[2, 3] = param(3, "Channels written: 3 (XYZ) or 2 (XY; readers rebuild Z; .tif or .exr).")
    bits: Bits | None = bits_param()
    channel: HeightChannel | None = HEIGHT_CHANNEL
    stretch: bool = STRETCH
    ktx2_format: str | None = KTX2_NORMAL_FORMAT
    effort: Effort = effort_param()
    zstd: int | None = zstd_param()

    def check(self) -> None:
        check_strength(self)


def check_blur(blur: float, rows: int, cols: int, where: Path) -> None:
    """The pre-blur's kernel reaches 4 standard deviations each way (scipy.ndimage's default truncation):
    beyond a quarter of the shorter side it spans the whole map, which a blur cannot sensibly mean (and
    whose halo would not fit in memory for huge values)."""
    limit = min(rows, cols) / 4
    if blur > limit:
        raise BakeryError(f"--blur {blur:g} is too large for a {cols}x{rows} map: at most {limit:g} texels (a "
                          "quarter of its shorter side)", where)


#: Where each step of an integer ``normal`` bake starts on the progress scale, in proportion to the time it took
#: for an 8192^2 16-bit PNG in and out (measured: read 1.8 s, strips 0.6 s, PNG write 3.9 s, manifest hashes
#: 0.55 s), so the bar moves at an even pace.
NORMAL_STEPS = {"strips": 0.25, "writing": 0.35, "manifest": 0.93}


def run_normal(inputs: dict[str, Path], output: Path, p: NormalParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.io.images import INTEGER_MAX, quantize, write_image
    from bakery.io.manifest import write_manifest
    from bakery.normals.encode import encode_normals
    from bakery.normals.from_height import normal_from_height, rows_done, run_strips

    ktx2 = output.suffix.lower() == ".ktx2"
    if not ktx2:
        check_output(output)
    src = inputs["height"]
    progress(0.0, "reading")
    h, in_bits, (lo, hi) = read_height(src, p.channel, p.stretch,
                                       progress=within(progress, 0.0, NORMAL_STEPS["strips"]))
    rows, cols = h.shape
    check_blur(p.blur, rows, cols, src)
    sx, sy = resolve_strength(h.shape, p.strength, p.relief, p.span)
    opts = dict(strength=(sx, sy), kernel=p.kernel, blur=p.blur, edges=p.edges)
    extra = {"conventions": _conventions(p.y),
             "strength_used": {"x": sx, "y": sy,
                               "formula": "n = normalize(-s_x dh/dx, -s_y dh/dy, 1), derivatives per texel"},
             "height_range": {"nominal": [0.0, 1.0], "data": [lo, hi], "stretched": p.stretch}}
    if ktx2:  # the mip chain from the float normals, not from a rounded file
        from bakery.normals.mips import normal_mips

        n = normal_from_height(h, threads=bake_threads(), progress=within(progress, NORMAL_STEPS["strips"], 0.35),
                               **opts)
        del h
        chain = [u for u, _ in normal_mips(n, progress=within(progress, 0.35, 0.5))]
        fmt, q = write_normal_ktx2(output, chain, p, p.channels, in_bits, progress=within(progress, 0.5, 0.97))
        extra["sample_type"] = fmt.name
        if q:
            extra["quality"] = {output.name: q}
        manifest = write_manifest(output, bake="normal", inputs={"height": src}, params=params_to_dict(p),
                                  outputs=[output], extra=extra)
        progress(1.0, "done")
        return [output, manifest]
    bits = output_bits(output, p.bits, in_bits)
    if p.channels == 2 and output.suffix.lower() == ".png":
        raise BakeryError("PNG files cannot hold 2 channels; write the XY map as .tif or .exr", output)
    # encode strip by strip into the output image (integer samples quantised there): no second full-size copy
    integer = bits in INTEGER_MAX
    q = np.empty((rows, cols, p.channels), {"8": np.uint8, "16": np.uint16}.get(bits, np.float32))
    scratch = {}

    strips = rows_done(within(progress, NORMAL_STEPS["strips"], NORMAL_STEPS["writing"]), rows)

    def finish(r0: int, r1: int, block: np.ndarray) -> None:
        import threading

        if not integer:
            encode_normals(block, y=p.y, channels=p.channels, out=q[r0:r1])
            strips(r0, r1, block)
            return
        key = threading.get_ident()
        buf = scratch.get(key)
        if buf is None or buf.shape[0] < r1 - r0:
            buf = scratch[key] = np.empty(block.shape[:2] + (p.channels,), np.float32)
        e = encode_normals(block, y=p.y, channels=p.channels, out=buf[: r1 - r0])
        q[r0:r1] = quantize(e, bits)
        strips(r0, r1, block)

    blocks: dict[int, np.ndarray] = {}

    def target(r0: int, r1: int) -> np.ndarray:
        import threading

        key = threading.get_ident()
        b = blocks.get(key)
        if b is None or b.shape[0] < r1 - r0:
            b = blocks[key] = np.empty((r1 - r0, cols, 3), np.float32)
        return b[: r1 - r0]

    run_strips(h, target=target, finish=finish, threads=bake_threads(), **opts)
    del h
    progress(NORMAL_STEPS["writing"], "writing")
    write_image(output, q, bits=None if integer else bits, threads=bake_threads(),
                progress=within(progress, NORMAL_STEPS["writing"], NORMAL_STEPS["manifest"]))
    extra["sample_type"] = bits
    progress(NORMAL_STEPS["manifest"], "manifest")
    manifest = write_manifest(output, bake="normal", inputs={"height": src}, params=params_to_dict(p),
                              outputs=[output], extra=extra)
    progress(1.0, "done")
    return [output, manifest]


# ------------------------------------------------------------------------------------------------- height


@dataclass(frozen=True)
class HeightParams(Params):
    """Parameters of the ``height`` bake (normal map -> height map)."""

    strength: float | None = STRENGTH
    relief: float | None = RELIEF
    span: tuple[float, ...] = SPAN
    kernel: KernelName = param("scharr", "The kernel the map was made with (tiling maps).")
    edges: Edges = param("wrap", "wrap: the map tiles (Frankot-Chellappa 1988); clamp or mirror: it does not "
                         "(least-squares Poisson solve).")
    y: YConvention = y_param()
    bits: Bits | None = bits_param()

    def check(self) -> None:
        check_strength(self)


def run_height(inputs: dict[str, Path], output: Path, p: HeightParams, progress: Progress) -> list[Path]:
    from bakery.io.images import INTEGER_MAX, write_image
    from bakery.io.manifest import write_manifest
    from bakery.normals.integrate import fit_height, height_from_normal

    check_output(output)
    src = inputs["normal"]
    progress(0.0, "reading")
    n, img = read_normals(src, p.y, within(progress, 0.0, 0.2))
    progress(0.2, "integrating")
    sx, sy = resolve_strength(n.shape[:2], p.strength, p.relief, p.span)
    bits = output_bits(output, p.bits, img.bits)
    if p.edges == "wrap" and min(n.shape[:2]) >= 16:
        from bakery.inspect import SEAM_LIMIT, tiling_score

        score = tiling_score(n[..., :2])
        if score > SEAM_LIMIT:
            warnings.warn(f"{src}: the normal map does not tile (the jump across a wrap edge is {score:.1f}x "
                          "the largest inside), but --edges wrap integrates it as a tiling map, which bends the "
                          "relief near the borders; use --edges clamp for a map that does not tile",
                          BakeryWarning, stacklevel=2)
    z = height_from_normal(n, strength=(sx, sy), kernel=p.kernel, edges=p.edges, checked=True,
                           progress=within(progress, 0.2, 0.65))
    h, offset, scale = fit_height(z, unit_range=bits in INTEGER_MAX)
    if scale != 1.0:
        warnings.warn(f"{output}: the relief spans {1 / scale:.4g} times the full height range; scaled by "
                      f"{scale:.4g} to fit (use this strength times {1 / scale:.4g} to get the same normals, "
                      "or write float .exr/.tif)", BakeryWarning, stacklevel=2)
    progress(0.7, "writing")
    write_image(output, h, bits=bits, progress=within(progress, 0.7, 0.95), threads=bake_threads())
    extra = {"conventions": _conventions(p.y),
             "method": "Frankot-Chellappa 1988 (FFT)" if p.edges == "wrap" else
             "least-squares Poisson, Neumann borders (DCT; Simchony, Chellappa & Shao 1990)",
             "strength_used": {"x": sx, "y": sy},
             "fit": {"offset": offset, "scale": scale,
                     "meaning": "stored = (integrated height + offset) * scale, integrated height has mean 0"},
             "sample_type": bits}
    manifest = write_manifest(output, bake="height", inputs={"normal": src}, params=params_to_dict(p),
                              outputs=[output], extra=extra)
    progress(1.0, "done")
    return [output, manifest]


# -------------------------------------------------------------------------------------------------- blend


@dataclass(frozen=True)
class BlendParams(Params):
    """Parameters of the ``blend`` bake (detail normal map over a base normal map)."""

    method: Literal["reoriented", "whiteout", "derivative", "linear"] = param(
        "reoriented", "reoriented (Barre-Brisebois & Hill 2012), whiteout, derivative (slopes add) or linear.")
    detail_strength: float = param(1.0, "Scales the detail's x and y before blending.", low=0.0, high=100.0)
    y: YConvention = y_param("Green-channel convention of both inputs and the output: up (OpenGL-style, "
                             "glTF 2.0) or down (DirectX-style).")
    channels: Literal[2, 3] | None = param(None, "Channels written: 3 or 2 (XY); default: the base's.")
    bits: Bits | None = bits_param()


def run_blend(inputs: dict[str, Path], output: Path, p: BlendParams, progress: Progress) -> list[Path]:
    from bakery.io.manifest import write_manifest
    from bakery.normals.blend import blend_normals

    check_output(output)
    progress(0.0, "reading")
    base, bimg = read_normals(inputs["base"], p.y, within(progress, 0.0, 0.15))
    detail, _ = read_normals(inputs["detail"], p.y, within(progress, 0.15, 0.3))
    if base.shape != detail.shape:
        raise BakeryError(f"detail is {detail.shape[1]}x{detail.shape[0]} but the base is "
                          f"{base.shape[1]}x{base.shape[0]}; they must match", inputs["detail"])
    channels = p.channels or (2 if bimg.channels == 2 else 3)
    bits = output_bits(output, p.bits, bimg.bits)
    r = blend_normals(base, detail, method=p.method, detail_strength=p.detail_strength, checked=True,
                      progress=within(progress, 0.3, 0.6))
    progress(0.6, "writing")
    write_normals(output, r, y=p.y, channels=channels, bits=bits, progress=within(progress, 0.6, 0.97))
    manifest = write_manifest(output, bake="blend", inputs={"base": inputs["base"], "detail": inputs["detail"]},
                              params=params_to_dict(p), outputs=[output],
                              extra={"conventions": _conventions(p.y), "sample_type": bits})
    progress(1.0, "done")
    return [output, manifest]


# -------------------------------------------------------------------------------------------- normal-mips


@dataclass(frozen=True)
class MipsParams(Params):
    """Parameters of the ``normal-mips`` bake (a normal map's mip chain + averaged-normal lengths)."""

    levels: int | None = param(None, "Levels including level 0. Default: down to 1x1.", low=1, high=16)
    y: YConvention = y_param("Green-channel convention of the input and outputs: up (OpenGL-style, glTF 2.0) "
                             "or down (DirectX-style).")
    bits: Bits | None = bits_param()
    lengths: bool = param(True, "Also write each level's averaged-normal length (for specular anti-aliasing).")
    ktx2_format: str | None = KTX2_NORMAL_FORMAT
    effort: Effort = effort_param()
    zstd: int | None = zstd_param()


def mip_paths(output: Path, levels: int) -> tuple[list[Path], list[Path]]:
    """Level files ``name.mip01.ext`` .. and length files ``name.length.mip01.ext`` .. beside ``output``
    (level 0 is ``output`` itself; its length is 1)."""
    lv = [level_path(output, i) for i in range(levels)]
    ln = [level_path(output, i, tag="length") for i in range(1, levels)]
    return lv, ln


def mips_outputs(inputs: dict[str, Path], output: Path, p: MipsParams) -> list[Path]:
    from bakery.io.images import image_size
    from bakery.io.manifest import manifest_path
    from bakery.mips import level_count

    w, h = image_size(inputs["normal"])
    count = level_count(w, h, p.levels)
    if output.suffix.lower() == ".ktx2":
        files = [output] + ([output.with_name(f"{output.stem}.length.ktx2")] if p.lengths else [])
    else:
        check_output(output)
        levels, lengths = mip_paths(output, count)
        files = levels + (lengths if p.lengths else [])
    return files + [manifest_path(output)]


#: KTX2 formats for normal-map mip chains: (bits, channels) -> VkFormat name. KTX2 has no 3-channel formats
#: here, so XYZ maps are stored as RGBA with alpha 1.
KTX2_NORMAL_FORMATS = {("8", 3): "R8G8B8A8_UNORM", ("8", 2): "R8G8_UNORM", ("16", 3): "R16G16B16A16_UNORM",
                       ("16", 2): "R16G16_UNORM", ("half", 3): "R16G16B16A16_SFLOAT",
                       ("half", 2): "R16G16_SFLOAT", ("float", 3): "R32G32B32A32_SFLOAT",
                       ("float", 2): "R32G32B32A32_SFLOAT"}


def write_normal_ktx2(output: Path, units: list, p, channels: int, source_bits: str,
                      progress: Progress | None = None):
    """A normal-map chain (unit vectors per level, level 0 first) as one KTX2 file in ``p.ktx2_format`` (default:
    the uncompressed format of the sample type); returns (format, quality report or None)."""
    from bakery.io.texcompress import resolve_format, write_texture
    from bakery.normals.encode import encode_normals

    if p.ktx2_format is None:
        bits = p.bits or ("16" if source_bits == "16" else "8" if source_bits == "8" else "half")
        fmt = resolve_format(KTX2_NORMAL_FORMATS[(bits, channels)], "normal")
    else:
        fmt = resolve_format(p.ktx2_format, "normal")
    if fmt.block is not None and fmt.block != "bc5":
        raise BakeryError(f"normal maps go to bc5 (XY, Z rebuilt) or an uncompressed format, not {fmt.short_name}",
                          output)
    note = {"bakeryNormalMap": f"{ENCODING}; +Y {p.y}; level data = renormalized averages"}
    levels = [encode_normals(u, y=p.y, channels=channels) for u in units]
    _, q = write_texture(output, levels, fmt, kind="normal", key_values=note, effort=p.effort, zstd=p.zstd,
                         threads=bake_threads(), progress=progress)
    return fmt, q


#: Where each step of a ``normal-mips`` bake starts on the progress scale (common practice: shares of the time
#: measured on an 8192^2 16-bit PNG in, PNG levels out).
MIPS_STEPS = {"levels": 0.2, "writing": 0.35, "manifest": 0.95}


def run_mips(inputs: dict[str, Path], output: Path, p: MipsParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.io.manifest import write_manifest
    from bakery.normals.mips import normal_mips

    ktx2 = output.suffix.lower() == ".ktx2"
    progress(0.0, "reading")
    n, img = read_normals(inputs["normal"], p.y, within(progress, 0.0, MIPS_STEPS["levels"]))
    channels = 2 if img.channels == 2 else 3
    chain = normal_mips(n, levels=p.levels, progress=within(progress, MIPS_STEPS["levels"], MIPS_STEPS["writing"]))
    del n
    writing = within(progress, MIPS_STEPS["writing"], MIPS_STEPS["manifest"])
    written: list[Path] = []
    quality = {}
    if ktx2:
        from bakery.io.ktx2 import write_ktx2

        fmt, q = write_normal_ktx2(output, [u for u, _ in chain], p, channels, img.bits,
                                   progress=within(writing, 0.0, 0.8 if p.lengths else 1.0))
        written.append(output)
        if q:
            quality[output.name] = q
        names = [output.name] * len(chain)
        length_names = [None] * len(chain)
        if p.lengths:
            lpath = output.with_name(f"{output.stem}.length.ktx2")
            written.append(write_ktx2(lpath, [ln[:, :, None] for _, ln in chain], "R16_UNORM", cubemap=False,
                                      key_values={"bakeryNormalMap": "length of the averaged unit normal"},
                                      progress=within(writing, 0.8, 1.0)))
            length_names = [lpath.name] * len(chain)
        bits = fmt.name
    else:
        from bakery.io.images import write_image

        fmt_name = check_output(output)
        bits = output_bits(output, p.bits, img.bits)
        levels, lengths = mip_paths(output, len(chain))
        len_bits = {"png": "16", "tiff": "16", "exr": "float"}.get(fmt_name, "float")
        # each file's share of the writing by its samples (texels x channels written)
        files = [(path, unit, channels) for path, (unit, _) in zip(levels, chain, strict=True)]
        if p.lengths:
            files += [(path, length, 1) for path, (_, length) in zip(lengths, chain[1:], strict=True)]
        bounds = np.cumsum([0] + [a.shape[0] * a.shape[1] * c for _, a, c in files], dtype=np.float64)
        bounds /= bounds[-1]
        for (path, a, c), lo, hi in zip(files, bounds[:-1], bounds[1:], strict=True):
            step = within(writing, float(lo), float(hi))
            if a.ndim == 3:
                written.append(write_normals(path, a, y=p.y, channels=c, bits=bits, progress=step))
            else:
                written.append(write_image(path, a, bits=len_bits, progress=step, threads=bake_threads()))
        names = [lv.name for lv in levels]
        length_names = [None] + ([ln.name for ln in lengths] if p.lengths else [None] * len(lengths))
    extra = {"conventions": _conventions(p.y), "sample_type": bits,
             "filter": "area-weighted box over each texel's footprint, vectors averaged then renormalized",
             "levels": [{"level": i, "size": [int(u.shape[1]), int(u.shape[0])], "normals": names[i],
                         "length": length_names[i], "mean_length": float(ln.mean(dtype="float64"))}
                        for i, (u, ln) in enumerate(chain)],
             "length_meaning": "|average of the level-0 unit normals under the texel| (Toksvig 2005)"}
    if quality:
        extra["quality"] = quality
    progress(MIPS_STEPS["manifest"], "manifest")
    manifest = write_manifest(output, bake="normal-mips", inputs={"normal": inputs["normal"]},
                              params=params_to_dict(p), outputs=written, extra=extra)
    progress(1.0, "done")
    return written + [manifest]


# --------------------------------------------------------------------------------------------- normal-fix


@dataclass(frozen=True)
class FixParams(Params):
    """Parameters of the ``normal-fix`` bake: small repairs of an existing normal map."""

    flip_y: bool = param(False, "Switch between Y-up and Y-down (g' = 1 - g).")
    renormalize: bool = param(False, "Make every vector unit length.")
    channels: Literal[2, 3] | None = param(None, "Channels written: 2 (XY; Z rebuilt by readers) or 3 (XYZ); "
                                           "default: the input's.")
    bits: Bits | None = bits_param()


def run_fix(inputs: dict[str, Path], output: Path, p: FixParams, progress: Progress) -> list[Path]:
    import numpy as np

    from bakery.io.images import read_image, write_image
    from bakery.io.manifest import write_manifest
    from bakery.normals.encode import decode_normals, encode_normals, normalize

    check_output(output)
    src = inputs["normal"]
    progress(0.0, "reading")
    img = read_image(src, progress=within(progress, 0.0, 0.3))
    if img.channels == 1:
        raise BakeryError("has one channel: a normal map needs 2 (XY), 3 (RGB) or 4 (RGBA)", src)
    c_in = 2 if img.channels == 2 else 3
    channels = p.channels or c_in
    bits = output_bits(output, p.bits, img.bits)
    if not (p.flip_y or p.renormalize or channels != c_in or bits != img.bits):
        raise BakeryError("nothing to do: ask for --flip-y, --renormalize, --channels or --bits")
    px = img.pixels
    alpha = px[:, :, 3:4] if img.channels == 4 else None
    if alpha is not None and channels == 2:
        warnings.warn(f"{src}: the alpha channel is dropped in a two-channel map", BakeryWarning, stacklevel=2)
        alpha = None
    if p.renormalize or channels == 3 and c_in == 2:
        n = decode_normals(px)
        if p.renormalize:
            n, length = normalize(n, out=n)
        if p.flip_y:
            np.negative(n[:, :, 1], out=n[:, :, 1])
        enc = encode_normals(n, channels=channels)
    else:  # pure channel edits keep the stored values exactly
        enc = np.array(px[:, :, :channels], dtype=np.float32)
        if p.flip_y:
            np.subtract(np.float32(1.0), enc[:, :, 1], out=enc[:, :, 1])
    if alpha is not None:
        enc = np.concatenate([enc, alpha], axis=2)
    extra = {"encoding": ENCODING, "sample_type": bits}
    y_in = recorded_y(src)
    if y_in:  # the input's manifest records its convention: record the one written
        extra["y"] = {"up": "down", "down": "up"}[y_in] if p.flip_y else y_in
    progress(0.4, "writing")
    write_image(output, enc, bits=bits, progress=within(progress, 0.4, 0.95), threads=bake_threads())
    manifest = write_manifest(output, bake="normal-fix", inputs={"normal": src}, params=params_to_dict(p),
                              outputs=[output], extra=extra)
    progress(1.0, "done")
    return [output, manifest]


def recorded_y(path: Path) -> str | None:
    """The green-channel convention the manifest of the normal map ``path`` records, if one still matches it."""
    from bakery.inspect import facts_from_manifest
    from bakery.io.manifest import manifest_for

    data = manifest_for(path)
    facts = facts_from_manifest(data, path.name) if data else None
    return facts.y if facts else None


register(Bake("normal", "height map -> tangent-space normal map (Blinn 1978)", ("height",), NormalParams,
              one_output, run_normal))
register(Bake("height", "normal map -> height map (Frankot-Chellappa 1988 / Poisson)", ("normal",), HeightParams,
              one_output, run_height))
register(Bake("blend", "detail normal map over a base (reoriented, whiteout, derivative, linear)", ("base", "detail"),
              BlendParams, one_output, run_blend))
register(Bake("normal-mips", "normal-map mip chain with averaged-normal lengths (image files or one KTX2)",
              ("normal",), MipsParams, mips_outputs, run_mips))
register(Bake("normal-fix", "flip green, renormalize, 2 <-> 3 channels, 8 <-> 16-bit", ("normal",), FixParams,
              one_output, run_fix))
