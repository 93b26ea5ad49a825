"""Reading and writing environment maps in every layout: panoramas, cross/strip/column images, six face
files and KTX2 cubemaps.

Layouts (see :mod:`bakery.io.layouts` for the pictures):

- a single image (``.exr``, ``.hdr``, ``.tif``, ``.png``, ``.jpg``): ``equirect``, ``cross-wide``, ``cross-tall``,
  ``row``, ``stack``, detected from the aspect ratio unless given;
- six face files: a path holding ``{face}`` (replaced by x+, x-, y+, y-, z+, z-) or ``{index}`` (0..5);
- ``.ktx2``: a cubemap (level 0 is read; mips are written), or a 2D panorama.

8/16-bit images hold colour data: they are decoded from sRGB on reading and encoded on writing
(IEC 61966-2-1). Float files are linear radiance.
"""

from __future__ import annotations

import contextlib
import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError, BakeryWarning
from bakery.io import layouts as L
from bakery.progress import Progress, maybe_within

LAYOUTS = ("equirect", "cross-wide", "cross-tall", "row", "stack", "files", "ktx2")
HALF_MAX = 65504.0


@dataclass
class Environment:
    """An environment map read from file(s).

    Attributes
    ----------
    kind : {"cube", "equirect"}
    pixels : ndarray, float32
        ``(6, N, N, C)`` for a cube, ``(H, W, C)`` for a panorama; linear radiance.
    layout : str
        The layout it was stored in (one of :data:`LAYOUTS`).
    bits : str
        Sample type of the source ("8", "16", "half", "float"), for output defaults.
    paths : list of Path
        The files read.
    """

    kind: str
    pixels: np.ndarray
    layout: str
    bits: str
    paths: list[Path] = field(default_factory=list)


def is_face_pattern(path: str | os.PathLike) -> bool:
    text = os.fspath(path)
    return "{face}" in text or "{index}" in text


def face_paths(pattern: str | os.PathLike) -> list[Path]:
    """The six paths of a face-file pattern, in storage order (+X, -X, +Y, -Y, +Z, -Z)."""
    text = os.fspath(pattern)
    return [Path(text.replace("{face}", tok).replace("{index}", str(i)))
            for i, tok in enumerate(L.FACE_TOKENS)]


def layout_of_path(path: str | os.PathLike) -> str | None:
    """"files" for a pattern, "ktx2" for a .ktx2 file, None for a single image (layout from its shape)."""
    if is_face_pattern(path):
        return "files"
    if Path(path).suffix.lower() == ".ktx2":
        return "ktx2"
    return None


def _check_values(a: np.ndarray, where: object, repair: bool) -> np.ndarray:
    bad_nan = ~np.isfinite(a)
    neg = np.zeros_like(bad_nan) if not np.any(a < 0) else (a < 0)
    n_bad, n_neg = int(np.count_nonzero(bad_nan)), int(np.count_nonzero(neg))
    if not (n_bad or n_neg):
        return a
    if not repair:
        what = []
        if n_bad:
            what.append(f"{n_bad} NaN/Inf sample(s)")
        if n_neg:
            what.append(f"{n_neg} negative sample(s)")
        raise BakeryError(f"{' and '.join(what)}: radiance must be finite and >= 0 (pass --repair to set "
                          "them to 0)", where)
    a = np.where(bad_nan | neg, np.float32(0), a).astype(np.float32)
    warnings.warn(f"{where}: repaired {n_bad} NaN/Inf and {n_neg} negative sample(s) to 0", BakeryWarning,
                  stacklevel=3)
    return a


def _read_one(path: Path, max_pixels: int | None, progress: Progress | None = None):
    from bakery.io.images import read_image

    img = read_image(path, color="srgb", max_pixels=max_pixels, allow_nonfinite=True, progress=progress)
    px = img.pixels
    if px.shape[2] == 2:
        raise BakeryError("an environment map needs 1, 3 or 4 channels; this image has 2", path)
    return px, img.bits


def read_environment(path: str | os.PathLike, *, layout: str | None = None, repair: bool = False,
                     max_pixels: int | None = None, progress: Progress | None = None) -> Environment:
    """Read an environment map in any layout (module docstring).

    Parameters
    ----------
    path : path-like
        A single image, a ``.ktx2`` file or a face pattern holding ``{face}``/``{index}``.
    layout : str, optional
        Force the layout of a single image (default: detected from its aspect ratio).
    repair : bool
        Set NaN/Inf and negative samples to 0 with a warning that counts them (default: refuse them).
    progress : callable, optional
        ``progress(fraction, "reading")``, rising to 1 (OpenEXR strip by strip, face files one by one).

    Raises
    ------
    BakeryError
        Missing or unreadable files, an aspect ratio that matches no layout, faces of different sizes or
        non-square faces, NaN/Inf or negative radiance (unless ``repair``).
    """
    path_layout = layout_of_path(path)
    if layout in ("files", "ktx2") and path_layout != layout:
        need = "a pattern with {face}" if layout == "files" else "a .ktx2"
        raise BakeryError(f"layout {layout!r} needs {need} path", path)
    if path_layout == "files":
        paths = face_paths(path)
        faces, depths, size = [], [], None
        for i, p in enumerate(paths):
            px, bits = _read_one(p, max_pixels, maybe_within(progress, i / 6, (i + 1) / 6))
            h, w = px.shape[:2]
            if h != w:
                raise BakeryError(f"cube faces must be square; this one is {w}x{h}", p)
            if size is not None and (h != size or px.shape[2] != faces[0].shape[2]):
                raise BakeryError(f"faces differ in size or channels: {w}x{h}x{px.shape[2]} here, "
                                  f"{size}x{size}x{faces[0].shape[2]} in {paths[0]}", p)
            size = h
            faces.append(px)
            depths.append(bits)
        cube = np.stack(faces)
        cube = _check_values(cube, path, repair)
        return Environment("cube", cube, "files", max(depths, key=_BITS_ORDER.index), paths)
    p = Path(path)
    if path_layout == "ktx2":
        tex = read_ktx2_limited(p, max_pixels)
        px = tex.levels[0]
        bits = "float" if tex.format.name.startswith("R32") else ("half" if tex.format.is_float else
                                                               ("16" if tex.format.bits == 16 else "8"))
        if px.shape[-1] == 4 and np.all(px[..., 3] == 1):  # RGB stored as RGBA: the alpha carries nothing
            px = px[..., :3]
        if tex.cubemap:
            return Environment("cube", _check_values(px, p, repair), "ktx2", bits, [p])
        img = px
    else:
        img, bits = _read_one(p, max_pixels, maybe_within(progress, 0.0, 0.9))
    h, w = img.shape[:2]
    lay = layout or L.detect_layout(w, h, where=p)
    if lay not in L.IMAGE_LAYOUTS:
        raise BakeryError(f"layout {lay!r} does not apply to a single image; use one of "
                          + ", ".join(L.IMAGE_LAYOUTS), p)
    img = _check_values(img, p, repair)
    if progress is not None:
        progress(1.0, "reading")
    if lay == "equirect":
        if w != 2 * h:
            raise BakeryError(f"a panorama must be twice as wide as high; got {w}x{h}", p)
        return Environment("equirect", img, "equirect", bits, [p])
    return Environment("cube", L.split(img, lay, where=p), lay, bits, [p])


_BITS_ORDER = ["8", "16", "half", "float"]


def clamp_for(pixels: np.ndarray, limit: float, where: object, what: str, advice: str) -> np.ndarray:
    """Clamp values above ``limit`` with a warning that counts them (overshoots within 0.1% of the limit,
    from filtering, are clamped silently)."""
    over = int(np.count_nonzero(pixels > limit * 1.001))
    if np.any(pixels > limit):
        pixels = np.minimum(pixels, np.float32(limit))
    if over:
        warnings.warn(f"{where}: {over} sample(s) above {limit:g}, the largest value {what} holds, were "
                      f"clamped; {advice}", BakeryWarning, stacklevel=3)
        return np.minimum(pixels, np.float32(limit))
    return pixels


def _prepare_image(path: object, px: np.ndarray, bits: str) -> np.ndarray:
    if bits == "half":
        return clamp_for(px, HALF_MAX, path, "a half float", "write float32 (--bits float) to keep them")
    if bits in ("8", "16"):
        return clamp_for(px, 1.0, path, f"a {bits[1:]}-bit image",
                         "write .exr or .hdr to keep HDR values, or lower --exposure")
    return px


def output_bits(path: str | os.PathLike, bits: str | None, source_bits: str) -> str:
    """The sample type for an image output: as asked, else follow the source where the format can hold it
    (float sources give half-float EXR, 8/16-bit sources keep their bits), else the format's default."""
    from bakery.io.images import DEFAULT_BITS, WRITABLE, image_format

    fmt = image_format(path, writing=True)
    if bits is not None:
        if bits not in WRITABLE[fmt]:
            raise BakeryError(f"{fmt.upper()} files cannot hold {bits} samples; use one of "
                              f"{', '.join(WRITABLE[fmt])}", path)
        return bits
    if source_bits in WRITABLE[fmt] and not (fmt == "exr" and source_bits == "float"):
        return source_bits
    if fmt == "exr":
        return "half"
    if fmt == "tiff" and source_bits in ("half", "float"):
        return "float"
    return DEFAULT_BITS[fmt]


def write_environment(path: str | os.PathLike, pixels: np.ndarray, kind: str, *, layout: str | None = None,
                      bits: str | None = None, source_bits: str = "float", ktx_format: str | None = None,
                      mips: list[np.ndarray] | None = None, key_values: dict[str, str] | None = None,
                      effort: str = "fast", zstd: int | None = None, threads: int | None = None,
                      quality: dict | None = None, progress: Progress | None = None) -> list[Path]:
    """Write a cube ``(6, N, N, C)`` or panorama ``(H, W, C)`` in a layout; returns the written paths.

    ``layout`` defaults from the path (pattern -> faces, .ktx2 -> ktx2) or the kind (cube -> cross-wide,
    panorama -> equirect). For KTX2, ``mips`` are the levels after level 0 (optional). All files are written
    to temporary names first and renamed only when every one succeeded. Block-compressed and supercompressed
    KTX2 formats (``ktx_format`` ``bc6h``, ``compressed``, or ``zstd``) go through
    :func:`bakery.io.texcompress.write_texture`; its quality report lands in ``quality[file name]``.
    ``progress(fraction, label)`` rises to 1 as it writes (PNG per strip of rows, KTX2 block formats per strip
    of block rows, faces one by one); the bytes do not depend on it.
    """
    from bakery.io.atomic import atomic_output
    from bakery.io.images import write_image

    path_layout = layout_of_path(path)
    lay = path_layout or layout or ("cross-wide" if kind == "cube" else "equirect")
    if path_layout and layout and layout != path_layout and not (path_layout == "ktx2" and layout in
                                                                ("equirect",)):
        raise BakeryError(f"layout {layout!r} does not match the output path", path)
    if lay == "ktx2" and layout == "equirect":
        lay = "ktx2-2d"
    if kind == "equirect" and lay not in ("equirect", "ktx2-2d"):
        if path_layout == "ktx2":
            lay = "ktx2-2d"
        else:
            raise BakeryError(f"a panorama cannot be written as {lay!r}", path)
    if kind == "cube" and lay == "equirect":
        raise BakeryError("a cubemap cannot be written as a panorama here; convert it first", path)
    if lay in ("ktx2", "ktx2-2d"):
        from bakery.io.texcompress import resolve_format, write_texture

        fmt = resolve_format(ktx_format or "R16G16B16A16_SFLOAT", "hdr")
        levels = [pixels] + list(mips or [])
        p = Path(path)
        kind = "hdr" if fmt.is_float else "color" if fmt.srgb else "data"
        _, q = write_texture(p, levels, fmt, kind=kind, cubemap=(lay == "ktx2"), key_values=key_values,
                             effort=effort, zstd=zstd, threads=threads, progress=progress)
        if q and quality is not None:
            quality[p.name] = q
        return [p]
    if lay == "files":
        paths = face_paths(path)
        d = output_bits(paths[0], bits, source_bits)
        faces = list(_prepare_image(path, np.asarray(pixels), d))
        with contextlib.ExitStack() as stack:
            tmps = [stack.enter_context(atomic_output(p)) for p in paths]
            for f, (tmp, face) in enumerate(zip(tmps, faces, strict=True)):
                write_image(tmp, face, bits=d, color="srgb" if d in ("8", "16") else "data",
                            progress=maybe_within(progress, f / 6, (f + 1) / 6), threads=threads)
        return paths
    p = Path(path)
    img = pixels if kind == "equirect" else L.assemble(pixels, lay)
    d = output_bits(p, bits, source_bits)
    img = _prepare_image(p, img, d)
    if progress is not None:
        progress(0.1, "writing")
    write_image(p, img, bits=d, color="srgb" if d in ("8", "16") else "data", progress=maybe_within(progress, 0.1, 1),
                threads=threads)
    return [p]


def read_ktx2_limited(path: str | os.PathLike, max_pixels: int | None = None):
    """:func:`bakery.io.ktx2.read_ktx2` behind the pixel limit (``max_pixels`` or
    :func:`bakery.io.images.pixel_limit`): level 0's texels over every face and layer, from the header
    (KTX 2.0 specification: pixelWidth, pixelHeight at bytes 20-27, layerCount and faceCount at 32-39),
    refused before any level is read."""
    import struct

    from bakery.io import ktx2
    from bakery.io.images import check_pixel_limit

    path = Path(path)
    if not path.is_file():
        raise BakeryError("file not found", path)
    with open(path, "rb") as f:
        head = f.read(40)
    if len(head) == 40 and head[:12] == b"\xabKTX 20\xbb\r\n\x1a\n":  # the KTX 2.0 file identifier
        width, height, _depth, layers, faces = struct.unpack("<5I", head[20:40])
        check_pixel_limit(width, max(height, 1) * max(layers, 1) * max(faces, 1), path, max_pixels)
    return ktx2.read_ktx2(path)
