"""Bakes of maps derived from heights, and colour-map mips: ``occlusion``, ``curvature`` and ``mips``.

``occlusion`` and ``curvature`` take the ``normal`` bake's strength parameters (``strength`` or ``relief`` /
``span``, the same kernel), so the relief they see is the normal map's. ``mips`` filters a colour map in
linear light with premultiplied alpha (:func:`bakery.mips.color_mips`) and writes image files or one KTX2.
The pure functions live in :mod:`bakery.relief` and :mod:`bakery.mips`; see docs/derived.md.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from bakery.bakes import Bake, Progress, bake_threads, level_path, one_output, params_to_dict, register, within
from bakery.bakes.normals import (
    HEIGHT_CHANNEL,
    KERNEL,
    RELIEF,
    SPAN,
    STRENGTH,
    STRETCH,
    HeightChannel,
    KernelName,
    check_strength,
    output_bits,
    read_height,
    resolve_strength,
)
from bakery.bakes.params import (
    Bits,
    Edges,
    Params,
    YConvention,
    bits_param,
    edges_param,
    ktx2_format_param,
    loose_param,
    param,
    y_param,
)
from bakery.errors import BakeryError
from bakery.progress import row_bands

IMAGE_FORMATS = ("png", "tiff", "exr")


def check_image_output(output: Path, what: str) -> str:
    """The output's format; these maps go to PNG, TIFF or OpenEXR."""
    from bakery.io.images import image_format

    fmt = image_format(output, writing=True)
    if fmt not in IMAGE_FORMATS:
        raise BakeryError(f"write {what} as .png, .tif or .exr, not {fmt.upper()}", output)
    return fmt


def _height_and_strength(inputs: dict[str, Path], p, flat: str, progress: Progress | None = None):
    """Heights, sample type, data range and ``(s_x, s_y)`` as the ``normal`` bake resolves them."""
    src = inputs["height"]
    h, bits, rng = read_height(src, p.channel, p.stretch, flat=flat, progress=progress)
    sx, sy = resolve_strength(h.shape, p.strength, p.relief, p.span)
    return h, bits, rng, (sx, sy)


# -------------------------------------------------------------------------------------------- occlusion


@dataclass(frozen=True)
class OcclusionParams(Params):
    """Parameters of the ``occlusion`` bake (height map -> ambient occlusion, optional bent normals)."""

    strength: float | None = STRENGTH
    relief: float | None = RELIEF
    span: tuple[float, ...] = SPAN
    kernel: KernelName = KERNEL
    directions: int = param(16, "Azimuths swept for horizons (each costs one pass over the map).", low=4, high=256)
    max_distance: float | None = param(
        None, "Hard cutoff: occluders farther than this many texels are ignored (a sharp limit, not a fade). "
        "Default: none, exact horizons up to one map period away. At most the map's larger side.",
        unit="texels", low=0.0, low_open=True)
    edges: Edges = edges_param()
    bent_normals: bool = param(False, "Also write the bent normals (mean unoccluded direction) to NAME.bent.EXT, "
                               "encoded like the normal bake's maps (n * 0.5 + 0.5).")
    y: YConvention = y_param("Green-channel convention of the bent-normal file: up = +Y up (OpenGL-style, "
                             "glTF 2.0), down = +Y down (DirectX-style).")
    bits: Bits | None = bits_param()
    channel: HeightChannel | None = HEIGHT_CHANNEL
    stretch: bool = STRETCH

    def check(self) -> None:
        check_strength(self)


def bent_path(output: Path) -> Path:
    """``NAME.png`` -> ``NAME.bent.png``."""
    return output.with_name(f"{output.stem}.bent{output.suffix}")


def occlusion_outputs(inputs: dict[str, Path], output: Path, p: OcclusionParams) -> list[Path]:
    from bakery.io.manifest import manifest_path

    check_image_output(output, "occlusion maps")
    return [output] + ([bent_path(output)] if p.bent_normals else []) + [manifest_path(output)]


#: Where each step of an ``occlusion`` bake starts on the progress scale (common practice: shares of the time
#: measured on an 8192^2 16-bit PNG with bent normals).
OCCLUSION_STEPS = {"sweeps": 0.05, "writing": 0.8, "manifest": 0.98}


def run_occlusion(inputs: dict[str, Path], output: Path, p: OcclusionParams, progress: Progress) -> list[Path]:
    from bakery.bakes.normals import _conventions, write_normals
    from bakery.io.images import write_image
    from bakery.io.manifest import write_manifest
    from bakery.relief import occlusion_from_height

    check_image_output(output, "occlusion maps")
    progress(0.0, "reading")
    h, in_bits, (lo, hi), (sx, sy) = _height_and_strength(inputs, p, "the occlusion is 1 everywhere",
                                                          within(progress, 0.0, OCCLUSION_STEPS["sweeps"]))
    rows, cols = h.shape
    if p.max_distance is not None and p.max_distance > max(rows, cols):
        raise BakeryError(f"--max-distance must be at most the map's larger side ({max(rows, cols)} texels); got "
                          f"{p.max_distance:g}", inputs["height"])
    bits = output_bits(output, p.bits, in_bits)
    res = occlusion_from_height(h, strength=(sx, sy), directions=p.directions, max_distance=p.max_distance,
                                edges=p.edges, kernel=p.kernel, bent_normals=p.bent_normals,
                                threads=bake_threads(),
                                progress=within(progress, OCCLUSION_STEPS["sweeps"], OCCLUSION_STEPS["writing"]))
    ao, bent = res if p.bent_normals else (res, None)
    writing = within(progress, OCCLUSION_STEPS["writing"], OCCLUSION_STEPS["manifest"])
    split = 0.25 if bent is not None else 1.0  # the bent normals: three channels to the occlusion's one
    written = [write_image(output, ao, bits=bits, threads=bake_threads(), progress=within(writing, 0.0, split))]
    extra = {"meaning": "ambient occlusion: cosine-weighted visible sky over each texel, 1 = open, 0 = closed "
                        "(Jimenez et al. 2016, eq. 10, on horizons of the height field)",
             "strength_used": {"x": sx, "y": sy}, "directions": p.directions,
             "max_distance": {"texels": p.max_distance, "kind": "hard cutoff" if p.max_distance else "none"},
             "height_range": {"nominal": [0.0, 1.0], "data": [lo, hi], "stretched": p.stretch},
             "sample_type": bits}
    if bent is not None:
        written.append(write_normals(bent_path(output), bent, y=p.y, channels=3, bits=bits,
                                     progress=within(writing, split, 1.0)))
        extra["bent_normals"] = {"file": bent_path(output).name, "conventions": _conventions(p.y),
                                 "meaning": "normalised cosine-weighted mean unoccluded direction, tangent space"}
    progress(OCCLUSION_STEPS["manifest"], "manifest")
    manifest = write_manifest(output, bake="occlusion", inputs={"height": inputs["height"]},
                              params=params_to_dict(p), outputs=written, extra=extra)
    progress(1.0, "done")
    return written + [manifest]


# -------------------------------------------------------------------------------------------- curvature

CURVATURE_MAPS = {
    "curvature": "signed encoding 0.5 - 0.5 * clip(H * radius, -1, 1): 0.5 flat, above 0.5 convex, below concave",
    "convexity": "clip(-H * radius, 0, 1): 1 on ridges, edges and domes, 0 elsewhere",
    "concavity": "clip(H * radius, 0, 1): 1 in grooves, joints and bowls, 0 elsewhere",
    "cavity": "1 - concavity: 1 on open and convex relief, darker in crevices",
}


@dataclass(frozen=True)
class CurvatureParams(Params):
    """Parameters of the ``curvature`` bake (height map -> a curvature map or mask)."""

    strength: float | None = STRENGTH
    relief: float | None = RELIEF
    span: tuple[float, ...] = SPAN
    kernel: KernelName = param("scharr", "Smoothing of the 3x3 differences used with --scale 0 (the normal "
                               "map's kernels).")
    scale: float = param(1.0, "Standard deviation of the Gaussian the derivatives are taken at: features much "
                         "smaller do not count (0: 3x3 differences, finest detail).", unit="texels", low=0.0,
                         high=256.0)
    radius: float | None = param(
        None, "Radius of curvature that fills a mask (a surface bent this tightly or more gives 1), in the unit "
        "of --span (height units with --strength). Default: 4 texels.", unit="span unit", low=0.0, low_open=True)
    map: Literal["curvature", "convexity", "concavity", "cavity"] = param(
        "curvature", "Map written, all in [0, 1]: curvature (0.5 = flat, above 0.5 convex, below concave), "
        "convexity (1 on ridges), concavity (1 in grooves), cavity (1 - concavity).")
    edges: Edges = edges_param()
    bits: Bits | None = bits_param()
    channel: HeightChannel | None = HEIGHT_CHANNEL
    stretch: bool = STRETCH

    def check(self) -> None:
        check_strength(self)


def curvature_outputs(inputs: dict[str, Path], output: Path, p: CurvatureParams) -> list[Path]:
    check_image_output(output, "curvature maps")
    return one_output(inputs, output, p)


def run_curvature(inputs: dict[str, Path], output: Path, p: CurvatureParams, progress: Progress) -> list[Path]:
    from bakery.io.images import write_image
    from bakery.io.manifest import write_manifest
    from bakery.normals.from_height import DEFAULT_RELIEF_RATIO
    from bakery.relief import curvature_maps

    check_image_output(output, "curvature maps")
    progress(0.0, "reading")
    h, in_bits, (lo, hi), (sx, sy) = _height_and_strength(inputs, p, "the surface is flat (curvature 0 everywhere)",
                                                          within(progress, 0.0, 0.1))
    if p.strength is not None:
        relief, unit = 1.0, "height units"
    else:
        relief = p.relief if p.relief is not None else DEFAULT_RELIEF_RATIO * (p.span[0] if p.span else 1.0)
        unit = "span unit"
    bits = output_bits(output, p.bits, in_bits)
    progress(0.1, "curvature")
    maps = curvature_maps(h, strength=(sx, sy), relief=relief, scale=p.scale, radius=p.radius, edges=p.edges,
                          kernel=p.kernel, progress=within(progress, 0.1, 0.5))
    chosen = maps.encoded if p.map == "curvature" else getattr(maps, p.map)
    progress(0.5, "writing")
    written = [write_image(output, chosen, bits=bits, progress=within(progress, 0.5, 0.95), threads=bake_threads())]
    radius = p.radius if p.radius is not None else 4.0 / max(abs(sx), abs(sy)) * relief
    extra = {"map": p.map, "encoding": CURVATURE_MAPS[p.map],
             "mean_curvature": "H of the graph z = h(x, y) (do Carmo 1976, section 3-3); a dome has H < 0",
             "radius_used": {"value": radius, "unit": unit}, "relief_used": {"value": relief, "unit": unit},
             "strength_used": {"x": sx, "y": sy}, "scale_texels": p.scale,
             "height_range": {"nominal": [0.0, 1.0], "data": [lo, hi], "stretched": p.stretch},
             "sample_type": bits}
    manifest = write_manifest(output, bake="curvature", inputs={"height": inputs["height"]},
                              params=params_to_dict(p), outputs=written, extra=extra)
    progress(1.0, "done")
    return written + [manifest]


# ------------------------------------------------------------------------------------------------- mips

#: sRGB KTX2 formats a colour chain stored in sRGB may be written as.
SRGB_KTX2 = ("rgba8-srgb", "bc1-srgb", "bc3-srgb", "bc7-srgb")


@dataclass(frozen=True)
class ColorMipsParams(Params):
    """Parameters of the ``mips`` bake (a colour map's mip chain, filtered in linear light)."""

    transfer: Literal["srgb", "linear"] | None = param(
        None, "How the colour channels are stored: srgb (IEC 61966-2-1) or linear; alpha is always linear. "
        "Default: srgb for 8/16-bit files, linear for float files.")
    kernel: Literal["box", "kaiser", "lanczos3"] = param(
        "box", "Filter: box (each texel's exact footprint), kaiser (Kaiser-windowed sinc) or lanczos3; the "
        "sinc filters are sharper and ring (results clipped to the stored range).")
    edges: Edges = edges_param("How the sinc filters continue past the borders: wrap (the texture tiles), clamp "
                               "(the edge repeats), mirror. The box never leaves the map.")
    levels: int | None = param(None, "Levels including level 0. Default: down to 1x1.", low=1, high=16)
    coverage: bool = param(False, "Keep the alpha-tested coverage of level 0 on every level (foliage, fences): "
                           "each level's alpha is scaled so the same fraction of texels passes --alpha-cutoff.")
    alpha_cutoff: float = param(0.5, "The alpha test's threshold (alpha >= cutoff passes), for --coverage.",
                                low=0.0, high=1.0, low_open=True)
    bits: Bits | None = bits_param()
    ktx2_format: str | None = ktx2_format_param(
        None, "Texel format of a .ktx2 output: rgba8-srgb (default for sRGB colour), rgba8 (linear 8-bit), "
        "rgba16f (linear float), or a block format (bc7-srgb, bc1-srgb, bc3-srgb, bc7, bc6h ...); see "
        "docs/formats.md.")
    loose: bool = loose_param()

    def check(self) -> None:
        if self.alpha_cutoff >= 1.0:
            raise BakeryError(f"alpha-cutoff must be below 1; got {self.alpha_cutoff:g}")
        if self.ktx2_format is not None:
            from bakery.io.ktx2_formats import get_format

            get_format(self.ktx2_format)


def color_level_paths(output: Path, count: int, loose: bool = False) -> list[Path]:
    """``NAME.png`` -> ``NAME.png`` (level 0), ``NAME.mip01.png`` ...; ``NAME.ktx2`` -> itself, plus
    ``NAME.png``, ``NAME.mip01.png`` ... with ``loose``."""
    if output.suffix.lower() == ".ktx2":
        image = output.with_suffix(".png")
        return [output] + ([level_path(image, k) for k in range(count)] if loose else [])
    return [level_path(output, k) for k in range(count)]


def color_mips_outputs(inputs: dict[str, Path], output: Path, p: ColorMipsParams) -> list[Path]:
    from bakery.io.images import image_size
    from bakery.io.manifest import manifest_path
    from bakery.mips import level_count

    if output.suffix.lower() != ".ktx2":
        if p.loose:
            raise BakeryError("--loose goes with a .ktx2 output (an image output already writes every level as "
                              "a file)", output)
        check_image_output(output, "colour mip levels")
    w, h = image_size(inputs["color"])
    return color_level_paths(output, level_count(w, h, p.levels), p.loose) + [manifest_path(output)]


def _refuse_normal_map(pixels, is_float: bool, path: Path) -> None:
    from bakery.classify import map_kind

    if map_kind(pixels, is_float=is_float) == "normal":
        raise BakeryError("looks like a normal map (unit vectors stored as n * 0.5 + 0.5); averaging its colours "
                          "would shorten the vectors: use `bakery normal-mips`", path)


def _ktx2_format(p: ColorMipsParams, transfer: str, in_bits: str, output: Path):
    from bakery.io.ktx2_formats import get_format

    name = p.ktx2_format
    if name is None:
        name = "rgba8-srgb" if transfer == "srgb" else {"8": "rgba8", "16": "rgba16"}.get(in_bits, "rgba16f")
    fmt = get_format(name)
    if transfer == "srgb" and not fmt.srgb and not fmt.is_float:
        raise BakeryError(f"ktx2-format {fmt.short_name} would store sRGB-encoded colour as linear values; use "
                          f"one of {', '.join(SRGB_KTX2)} (or --transfer linear for a linear map)", output)
    return fmt


def run_color_mips(inputs: dict[str, Path], output: Path, p: ColorMipsParams, progress: Progress) -> list[Path]:
    import contextlib
    import warnings

    import numpy as np

    from bakery.errors import BakeryWarning
    from bakery.io import atomic_output, read_image, write_image, write_manifest
    from bakery.mips import color_mips, coverage

    src = inputs["color"]
    progress(0.0, "reading")
    img = read_image(src, progress=within(progress, 0.0, 0.05))
    px = img.pixels
    is_float = img.bits in ("half", "float")
    _refuse_normal_map(px, is_float, src)
    has_alpha = img.channels in (2, 4)
    if p.coverage and not has_alpha:
        raise BakeryError(f"--coverage needs an alpha channel; this map has {img.channels} channel(s) and no alpha",
                          src)
    transfer = p.transfer or ("linear" if is_float else "srgb")
    ktx2 = output.suffix.lower() == ".ktx2"
    fmt = _ktx2_format(p, transfer, img.bits, output) if ktx2 else None
    bits = output_bits(output.with_suffix(".png") if ktx2 else output, p.bits, img.bits)
    progress(0.05, "levels")
    chain = color_mips(px, transfer=transfer, kernel=p.kernel, edges=p.edges, levels=p.levels,
                       alpha_cutoff=p.alpha_cutoff if p.coverage else None, threads=bake_threads(),
                       progress=within(progress, 0.05, 0.4))
    progress(0.4, "writing")
    paths = color_level_paths(output, len(chain), p.loose)
    if bits in ("8", "16") and (not ktx2 or p.loose):
        over = int(np.count_nonzero(chain[0] > 1.0))
        if over:
            warnings.warn(f"{src}: {over} sample(s) above 1 are clipped in the {bits}-bit level files; write "
                          ".exr to keep them", BakeryWarning, stacklevel=2)
    images = paths[1:] if ktx2 else paths
    report = None
    # each file's share of the writing by its texels; a KTX2 file counts as much as its level images
    shares = np.cumsum([0] + [lv.shape[0] * lv.shape[1] for lv in chain[:len(images)]]
                       + ([sum(lv.shape[0] * lv.shape[1] for lv in chain)] if ktx2 else []), dtype=np.float64)
    shares /= shares[-1]
    writing = within(progress, 0.4, 0.97)
    with contextlib.ExitStack() as stack:  # every file renamed into place only after all were written
        for level, path, lo, hi in zip(chain, images, shares[:-1], shares[1:], strict=False):
            tmp = stack.enter_context(atomic_output(path))
            write_image(tmp, level, bits=bits, threads=bake_threads(), progress=within(writing, lo, hi))
        if ktx2:
            levels = chain
            part = within(writing, shares[-2], 1.0)  # the KTX2 file: linear colour first (a tenth), then encoding
            if fmt.srgb or fmt.is_float:  # these formats take linear colour (sRGB formats encode it on writing)
                levels = [_linear(lv, transfer, within(part, 0.1 * (1 - 4.0 ** -k), 0.1 * (1 - 4.0 ** -(k + 1))))
                          for k, lv in enumerate(chain)]
            tmp = stack.enter_context(atomic_output(output))
            note = {"bakery.color": f"colour mips: {p.kernel} filter in linear light, premultiplied alpha"
                                    + (f"; alpha-tested coverage kept at cutoff {p.alpha_cutoff:g}" if p.coverage
                                       else "")}
            if fmt.block is not None:
                from bakery.io.texcompress import write_compressed_ktx2

                kind = "hdr" if fmt.block == "bc6h" else "color"
                res = write_compressed_ktx2(tmp, levels, fmt, kind=kind, threads=bake_threads(), key_values=note,
                                            progress=within(part, 0.1, 1.0))
                report = res.report
            else:
                from bakery.io.ktx2 import write_ktx2

                write_ktx2(tmp, levels, fmt, cubemap=False, key_values=note, progress=within(part, 0.1, 1.0))
    level_info = []
    for k, lv in enumerate(chain):
        entry = {"level": k, "size": [int(lv.shape[1]), int(lv.shape[0])]}
        if has_alpha:
            entry["coverage"] = coverage(lv[:, :, -1], p.alpha_cutoff)
        level_info.append(entry)
    extra = {"transfer": transfer,
             "filter": f"{p.kernel}, in linear light with premultiplied alpha (Porter & Duff 1984); colour "
                       "stored " + ("sRGB-encoded (IEC 61966-2-1)" if transfer == "srgb" else "linear"),
             "coverage": {"kept": p.coverage, "alpha_cutoff": p.alpha_cutoff} if has_alpha else None,
             "sample_type": bits if not ktx2 or p.loose else None,
             "ktx2_format": fmt.short_name if fmt is not None else None, "levels": level_info}
    if report is not None:
        extra["compression"] = report
    manifest = write_manifest(output, bake="mips", inputs={"color": src}, params=params_to_dict(p),
                              outputs=paths, extra=extra)
    progress(1.0, "done")
    return paths + [manifest]


#: Texels per band of rows when a colour level turns linear for KTX2 (common practice: a few MiB).
LINEAR_BAND_TEXELS = 1 << 18


def _linear(level, transfer: str, progress: Progress):
    """A stored level in linear colour (alpha untouched), in bands of rows (texel by texel: the bands change
    no value) with ``progress`` after each."""
    if transfer == "linear":
        progress(1.0, "writing")
        return level
    from bakery.color import srgb_to_linear

    out = level.copy()
    c = 1 if level.shape[2] in (1, 2) else 3
    for r0, r1 in row_bands(level.shape[0], level.shape[1], LINEAR_BAND_TEXELS):
        out[r0:r1, :, :c] = srgb_to_linear(level[r0:r1, :, :c])
        progress(r1 / level.shape[0], "writing")
    return out


register(Bake("occlusion", "height map -> ambient occlusion (horizon-based), optional bent normals", ("height",),
              OcclusionParams, occlusion_outputs, run_occlusion))
register(Bake("curvature", "height map -> mean curvature map, or a convexity, concavity or cavity mask",
              ("height",), CurvatureParams, curvature_outputs, run_curvature))
register(Bake("mips", "colour-map mip chain filtered in linear light (image files or one KTX2)", ("color",),
              ColorMipsParams, color_mips_outputs, run_color_mips))
