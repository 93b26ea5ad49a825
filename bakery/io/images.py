"""Reading and writing images: PNG, TIFF, OpenEXR, Radiance HDR (RGBE), JPEG (read only).

The only door between files and arrays. In memory every image is ``float32`` of shape ``(H, W, C)``, channels
in RGB(A) order, rows top to bottom. Integer files map to [0, 1] (``v / 255`` or ``v / 65535``) and are written
back with round-to-nearest, so integer data round-trips bit-exactly at its bits. Float data is never rescaled.

Backends (chosen per format, never by guessing from the extension inside a library):

========  ==========================  ============================================
format    read                        write
========  ==========================  ============================================
PNG       OpenCV (8/16-bit, 1/3/4 ch)  :mod:`bakery.io.png` (8/16-bit, 1/3/4 ch)
          or :mod:`bakery.io.png`
          (large, with progress)
TIFF      tifffile (+imagecodecs)      tifffile, deflate strips (8/16-bit, float32)
OpenEXR   ASWF ``OpenEXR``             ``OpenEXR``, ZIP, half or float
HDR       OpenCV (float32)             OpenCV (RGBE, Ward 1991)
JPEG      OpenCV (8-bit)               --
========  ==========================  ============================================

RGBE follows the variant of Ward's encoding that scales the mantissa by 256 and decodes ``c * 2**(E - 136)``
(Ward 1991, "Real Pixels", Graphics Gems II): (1, 0.5, 0.25) <-> (128, 64, 32, 129).
"""

from __future__ import annotations

import contextlib
import gc
import os
import struct
import sys
import threading
import warnings
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

import numpy as np

from bakery.color import linear_to_srgb, srgb_to_linear
from bakery.errors import BakeryError, BakeryWarning
from bakery.io.atomic import atomic_output
from bakery.progress import maybe_within, row_bands
from bakery.types import Bits

Color = Literal["data", "srgb"]

#: Largest image (in pixels) read by default: 16384 x 16384. Override with ``max_pixels=`` or the
#: ``BAKERY_MAX_PIXELS`` environment variable (read by the CLI).
DEFAULT_MAX_PIXELS = 16384 * 16384

FORMATS = {
    ".png": "png",
    ".tif": "tiff",
    ".tiff": "tiff",
    ".exr": "exr",
    ".hdr": "hdr",
    ".pic": "hdr",
    ".jpg": "jpeg",
    ".jpeg": "jpeg",
}
WRITABLE = {"png": ("8", "16"), "tiff": ("8", "16", "float"), "exr": ("half", "float"), "hdr": ("float",)}
DEFAULT_BITS: dict[str, Bits] = {"png": "8", "tiff": "16", "exr": "half", "hdr": "float"}
INTEGER_MAX = {"8": 255, "16": 65535}
_INTEGER_DTYPES = {np.dtype(np.uint8): "8", np.dtype(np.uint16): "16"}


@dataclass(frozen=True)
class Image:
    """An image read from a file.

    Attributes
    ----------
    pixels : ndarray, float32, shape (H, W, C)
        RGB(A) order; integer files scaled to [0, 1]; colour-decoded to linear only when read with
        ``color="srgb"``.
    bits : {"8", "16", "half", "float"}
        The file's sample type, so outputs can default to it (RGBE files report "float").
    format : {"png", "tiff", "exr", "hdr", "jpeg"}
    path : Path
    """

    pixels: np.ndarray
    bits: Bits
    format: str
    path: Path

    @property
    def channels(self) -> int:
        return self.pixels.shape[2]

    @property
    def is_float(self) -> bool:
        return self.bits in ("half", "float")


def image_format(path: str | os.PathLike, *, writing: bool = False) -> str:
    """The format name for a path, from its extension; a clear error for unknown ones."""
    suffix = Path(path).suffix.lower()
    fmt = FORMATS.get(suffix)
    if fmt is None or (writing and fmt not in WRITABLE):
        known = sorted(k for k, v in FORMATS.items() if not writing or v in WRITABLE)
        verb = "write" if writing else "read"
        raise BakeryError(f"cannot {verb} '{suffix or 'no extension'}' files; use one of {', '.join(known)}",
                          path)
    return fmt


# ---------------------------------------------------------------------------------------------- reading


def read_image(
    path: str | os.PathLike,
    *,
    color: Color = "data",
    max_pixels: int | None = None,
    allow_nonfinite: bool = False,
    progress: Callable[[float, str], None] | None = None,
) -> Image:
    """Read an image file into float32 ``(H, W, C)`` RGB(A).

    Parameters
    ----------
    path : path-like
    color : {"data", "srgb"}
        ``"data"`` (default) leaves values as stored: right for height, normal, roughness and exponent maps and
        for HDR files. ``"srgb"`` decodes 8/16-bit colour channels from sRGB to linear (IEC 61966-2-1); alpha
        is never converted and float files are never converted.
    max_pixels : int, optional
        Refuse images larger than this many pixels before decoding them (decompression-bomb guard).
        Default: :func:`pixel_limit` (``BAKERY_MAX_PIXELS``, else :data:`DEFAULT_MAX_PIXELS`).
    allow_nonfinite : bool
        Float files holding NaN or Inf are refused unless this is true (``bakery info`` uses it to count them).
    progress : callable, optional
        ``progress(fraction, "reading")``, rising to 1: OpenEXR files report once per strip of scanlines,
        large PNG files once per strip of rows (:func:`bakery.io.png.read_png`), TIFF files per group of
        strips or tiles, HDR and JPEG once decoded; then the conversion to float reports per band of rows.
        The pixels never depend on it.

    Raises
    ------
    BakeryError
        Missing, unreadable, truncated or corrupt file, unsupported format, too many pixels, NaN/Inf.
    """
    path = Path(path)
    fmt = image_format(path)
    if not path.exists():
        raise BakeryError("file not found", path)
    if not path.is_file():
        raise BakeryError("not a regular file", path)
    if not os.access(path, os.R_OK):
        raise BakeryError("file is not readable (permission denied)", path)
    with quiet_decoders():
        width, height = _peek_size(path, fmt)
    if width <= 0 or height <= 0:
        raise BakeryError(f"the header declares an empty image ({width}x{height})", path)
    check_pixel_limit(width, height, path, max_pixels)
    problem = None
    with quiet_decoders():
        try:
            reader = _READERS[fmt]
            step = maybe_within(progress, 0.0, 0.9)
            raw, bits = reader(path, progress=step) if fmt in _STRIP_READERS else reader(path)
        except BakeryError:
            raise
        except Exception as exc:  # decoder libraries raise many types for corrupt data
            problem = f"cannot decode {fmt.upper()} data ({_short(exc)})"
            exc.__traceback__ = None  # free the decoder's objects now: some print as they are destroyed
            del exc
            gc.collect()
    if problem is not None:
        raise BakeryError(problem, path)
    if raw.ndim == 2:
        raw = raw[:, :, None]
    if raw.ndim != 3 or raw.shape[2] not in (1, 2, 3, 4) or raw.size == 0:
        raise BakeryError(f"unsupported image shape {raw.shape}", path)
    if color not in ("data", "srgb"):
        raise BakeryError(f"color must be 'data' or 'srgb'; got {color!r}")
    decode = (3 if raw.shape[2] >= 3 else 1) if color == "srgb" and bits in INTEGER_MAX else 0
    pixels = _to_float(raw, bits, decode, maybe_within(progress, 0.9, 1.0))
    if bits in ("half", "float") and not allow_nonfinite:
        bad = int(np.count_nonzero(~np.isfinite(pixels)))
        if bad:
            raise BakeryError(f"{bad} sample(s) are NaN or Inf; repair the file before baking", path)
    if progress is not None:
        progress(1.0, "reading")
    return Image(np.ascontiguousarray(pixels), bits, fmt, path)


@contextlib.contextmanager
def quiet_decoders() -> Iterator[None]:
    """Silence what decoder libraries print (libpng warnings, OpenCV ``imdecode_`` lines, OpenEXR messages, on
    stderr or stdout, from C or through Python) while a file is read: bakery reports a bad file in its own one
    ``error:`` line. File descriptors 1 and 2 point at the null device meanwhile, and ``sys.stdout`` /
    ``sys.stderr`` at a sink. ``BAKERY_DECODER_MESSAGES=1`` keeps the lines (``bakery --debug`` sets it for its
    run)."""
    if os.environ.get("BAKERY_DECODER_MESSAGES") == "1":
        yield
        return
    global _QUIET_DEPTH
    with _QUIET_LOCK:
        if _QUIET_DEPTH == 0:
            saved = []
            for stream in (sys.stdout, sys.stderr):
                with contextlib.suppress(Exception):
                    stream.flush()
            for fd in (1, 2):
                try:
                    keep = os.dup(fd)
                except OSError:  # no such stream: nothing to silence
                    continue
                null = os.open(os.devnull, os.O_WRONLY)
                os.dup2(null, fd)
                os.close(null)
                saved.append((fd, keep))
            _QUIET_STATE.append((saved, sys.stdout, sys.stderr))
            sys.stdout = sys.stderr = _Sink()
        _QUIET_DEPTH += 1
    try:
        yield
    finally:
        with _QUIET_LOCK:
            _QUIET_DEPTH -= 1
            if _QUIET_DEPTH == 0:
                saved, sys.stdout, sys.stderr = _QUIET_STATE.pop()
                for fd, keep in saved:
                    os.dup2(keep, fd)
                    os.close(keep)


class _Sink:
    """A text stream that keeps nothing."""

    def write(self, text: str) -> int:
        return len(text)

    def flush(self) -> None:
        pass


_QUIET_LOCK = threading.Lock()
_QUIET_DEPTH = 0
_QUIET_STATE: list = []


def pixel_limit() -> int:
    """The most pixels an image may have: ``BAKERY_MAX_PIXELS`` when set (a positive whole number), else
    :data:`DEFAULT_MAX_PIXELS`. Every reader of bakery applies it before decoding."""
    value = os.environ.get("BAKERY_MAX_PIXELS")
    if value is None or not value.strip():
        return DEFAULT_MAX_PIXELS
    try:
        n = int(value)
    except ValueError:
        raise BakeryError(f"BAKERY_MAX_PIXELS must be a whole number; got {value!r}") from None
    if n <= 0:
        raise BakeryError(f"BAKERY_MAX_PIXELS must be positive; got {n}")
    return n


def check_pixel_limit(width: int, height: int, path: str | os.PathLike, max_pixels: int | None = None) -> None:
    """Refuse an image of ``width`` x ``height`` over the pixel limit (``max_pixels`` or :func:`pixel_limit`)."""
    limit = pixel_limit() if max_pixels is None else int(max_pixels)
    if width * height > limit:
        raise BakeryError(
            f"image is {width}x{height} = {width * height} pixels, over the limit of {limit} "
            "(raise BAKERY_MAX_PIXELS if the file is trusted)", path)


def image_size(path: str | os.PathLike) -> tuple[int, int]:
    """(width, height) of an image file from its header, without decoding the pixels."""
    path = Path(path)
    fmt = image_format(path)
    if not path.is_file():
        raise BakeryError("file not found", path)
    return _peek_size(path, fmt)


def _short(exc: BaseException) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) < 160 else text[:157] + "..."


#: Samples converted to float per band of rows (about): the unit of the conversion's progress.
FLOAT_BAND_SAMPLES = 1 << 22


def _to_float(raw: np.ndarray, bits: str, srgb_channels: int = 0,
              progress: Callable[[float, str], None] | None = None) -> np.ndarray:
    """float32 pixels of ``raw`` (H, W, C): integers scaled to [0, 1] (``v / 255``, ``v / 65535``), the first
    ``srgb_channels`` of them decoded from sRGB through a table of every code value (the numbers
    :func:`srgb_to_linear` gives each sample: it is elementwise); float data copied. In bands of rows, each
    reported; a band changes no value."""
    if bits not in INTEGER_MAX:
        return np.array(raw, dtype=np.float32, copy=True)
    top = INTEGER_MAX[bits]
    scale = np.float32(1.0 / top)
    table = srgb_to_linear(np.arange(top + 1, dtype=np.float32) * scale) if srgb_channels else None
    height = raw.shape[0]
    out = np.empty(raw.shape, np.float32)
    for r0, r1 in row_bands(height, raw[0].size, FLOAT_BAND_SAMPLES):
        np.multiply(raw[r0:r1], scale, out=out[r0:r1], dtype=np.float32)
        if table is not None:
            np.take(table, raw[r0:r1, :, :srgb_channels], out=out[r0:r1, :, :srgb_channels])
        if progress is not None:
            progress(r1 / height, "reading")
    return out


def _bgr_to_rgb(a: np.ndarray) -> np.ndarray:
    """Swap the first and third channels (BGR(A) <-> RGB(A)) into a new C-contiguous array in one pass
    (numpy fancy indexing on the last axis gives a non-contiguous result that writers copy again)."""
    if a.ndim == 3 and a.shape[2] >= 3:
        cv2 = _cv2()
        a = cv2.cvtColor(np.ascontiguousarray(a), cv2.COLOR_BGR2RGB if a.shape[2] == 3 else cv2.COLOR_BGRA2RGBA)
    return a


def _cv2():
    import cv2

    return cv2


def _read_cv2(path: Path) -> tuple[np.ndarray, str]:
    cv2 = _cv2()
    data = np.fromfile(path, dtype=np.uint8)
    a = cv2.imdecode(data, cv2.IMREAD_UNCHANGED)
    if a is None:
        raise BakeryError("file is corrupt or truncated (decoder returned no image)", path)
    bits = {np.dtype(np.uint8): "8", np.dtype(np.uint16): "16", np.dtype(np.float32): "float"}.get(a.dtype)
    if bits is None:
        raise BakeryError(f"unsupported sample type {a.dtype}", path)
    return _bgr_to_rgb(a), bits


def _read_png(path: Path, progress: Callable[[float, str], None] | None = None) -> tuple[np.ndarray, str]:
    """A PNG file's samples: with ``progress`` and at least :data:`PNG_STRIP_READ_BYTES` of samples through
    :func:`bakery.io.png.read_png` (strip by strip, reported; the same arrays, tests compare them), else, and
    for the files that reader leaves (interlaced, palette, under 8 bits, grey + alpha, tRNS), through OpenCV.
    Small files skip the strip reader: for rows filtered other than Sub it loads numba (~0.4 s), more than
    the decode costs."""
    _check_png_complete(path)
    if progress is not None:
        width, height = _peek_size(path, "png")
        if width * height * 3 >= PNG_STRIP_READ_BYTES:  # about: the header's channels are not read here
            from bakery.io.png import read_png

            decoded = read_png(path, progress=progress)
            if decoded is not None:
                pixels, depth = decoded
                return pixels, str(depth)
    return _read_cv2(path)


#: Samples a PNG needs (about) before a read with progress goes strip by strip: ~0.1 s of decoding.
PNG_STRIP_READ_BYTES = 1 << 24


def _check_png_complete(path: Path) -> None:
    """libpng may hand back a partly decoded image for a truncated file: require the IEND chunk."""
    with open(path, "rb") as f:
        f.seek(0, os.SEEK_END)
        size = f.tell()
        f.seek(max(0, size - 12))
        tail = f.read()
    if b"IEND" not in tail:
        raise BakeryError("PNG file is truncated (no end chunk)", path)


def _read_tiff(path: Path, progress: Callable[[float, str], None] | None = None) -> tuple[np.ndarray, str]:
    import tifffile

    with tifffile.TiffFile(path) as tif:
        page = tif.pages[0]
        photometric = _tiff_photometric(page, path)
        a = _tiff_segments(page, progress) if progress is not None else page.asarray()
        colormap = page.colormap if photometric == PALETTE else None
    if a.ndim == 3 and a.shape[0] in (1, 2, 3, 4) and a.shape[2] > 4:  # planar (C, H, W)
        a = np.moveaxis(a, 0, -1)
    if photometric == MINISWHITE:
        if a.dtype not in (np.uint8, np.uint16):
            raise BakeryError(f"a white-is-zero TIFF must hold 8/16-bit integers; got {a.dtype}", path)
        a = np.iinfo(a.dtype).max - a  # 0 is white (TIFF 6.0, PhotometricInterpretation 0)
    elif photometric == PALETTE:
        a = _tiff_palette(a, colormap, path)
    dtype = a.dtype
    if dtype == np.uint8:
        return a, "8"
    if dtype == np.uint16:
        return a, "16"
    if dtype == np.float32:
        return a, "float"
    if dtype == np.float16:
        return a, "half"
    if dtype == np.float64:
        return a.astype(np.float32), "float"
    raise BakeryError(f"unsupported TIFF sample type {dtype}; use 8/16-bit integer or float32", path)


#: TIFF PhotometricInterpretation values (TIFF 6.0, Adobe 1992, section 3-5): 0 white is zero, 1 black is
#: zero, 2 RGB, 3 palette colour, 6 YCbCr (read when JPEG-compressed: the decoder gives RGB).
MINISWHITE, MINISBLACK, RGB, PALETTE, YCBCR = 0, 1, 2, 3, 6
TIFF_JPEG = 7
TIFF_COLOUR_NAMES = {4: "transparency mask", 5: "CMYK (separated)", 6: "YCbCr without JPEG compression",
                     8: "CIE L*a*b*", 9: "ICC L*a*b*", 10: "ITU L*a*b*", 32844: "LogL", 32845: "LogLuv"}


def _tiff_photometric(page, path: Path) -> int:
    """The page's colour interpretation, refused (naming it) unless it is grey, RGB, palette or JPEG YCbCr:
    CMYK, CIE L*a*b* and the rest would otherwise be taken for RGB(A) values."""
    photometric = int(page.photometric)
    if photometric in (MINISWHITE, MINISBLACK, RGB, PALETTE) or (
            photometric == YCBCR and int(page.compression) == TIFF_JPEG):
        return photometric
    name = TIFF_COLOUR_NAMES.get(photometric) or getattr(page.photometric, "name", str(photometric))
    raise BakeryError(f"TIFF colour interpretation {name} (PhotometricInterpretation {photometric}) is not "
                      "read; save it as grey or RGB(A)", path)


def _tiff_palette(index: np.ndarray, colormap, path: Path) -> np.ndarray:
    """Palette-colour samples to RGB through the TIFF ColorMap (3 x 2^bits entries, 0..65535 each). A map of
    8-bit colours (every entry a multiple of 256 or of 257, or all below 256 as some writers store them) gives
    8-bit RGB, any other 16-bit RGB (common practice, as image libraries read them; not in TIFF 6.0)."""
    if colormap is None or index.ndim != 2 or index.dtype not in (np.uint8, np.uint16):
        raise BakeryError("palette TIFF without a usable colour map (one 8/16-bit index per texel)", path)
    cmap = np.asarray(colormap, dtype=np.uint16)
    if index.size and int(index.max()) >= cmap.shape[1]:
        raise BakeryError(f"palette TIFF index {int(index.max())} beyond its {cmap.shape[1]}-entry colour map",
                          path)
    if int(cmap.max()) < 256:
        cmap = cmap.astype(np.uint8)
    elif not (cmap % 256).any() or not (cmap % 257).any():
        cmap = (cmap >> 8).astype(np.uint8)
    return np.ascontiguousarray(cmap.T[index])


#: TIFF strips or tiles decoded between two progress calls (about 2 MiB of tifffile's default 256 KiB strips).
TIFF_SEGMENTS_PER_CALL = 8


def _tiff_segments(page, progress: Callable[[float, str], None]) -> np.ndarray:
    """``page.asarray()`` (a test compares them) assembled from tifffile's decoded strips or tiles
    (``TiffPage.segments``, in file order, decoded on its threads), reporting every
    :data:`TIFF_SEGMENTS_PER_CALL` of them; an uncompressed page in one piece is read in one call."""
    if page.is_contiguous or len(page.dataoffsets) < 2:
        return page.asarray()
    page.keyframe.init_decode()
    out = np.empty(page.shaped, np.dtype(page.parent.byteorder + page.dtype.char))  # as asarray gives it
    count = len(page.dataoffsets)
    trim = (page.imagedepth, page.imagelength, page.imagewidth)

    def place(result) -> None:
        segment, (s, d, h, w, _), shape = result
        box = out[s, d:d + shape[0], h:h + shape[1], w:w + shape[2]]
        if segment is None:
            box[...] = page.nodata
        else:
            box[...] = segment[:trim[0] - d, :trim[1] - h, :trim[2] - w]

    for i, _ in enumerate(page.segments(func=place, sort=True), 1):
        if i % TIFF_SEGMENTS_PER_CALL == 0 or i == count:
            progress(i / count, "reading")
    return out.reshape(page.shape)


_EXR_ORDER = ("R", "G", "B", "A")


def _read_exr(path: Path, progress: Callable[[float, str], None] | None = None) -> tuple[np.ndarray, str]:
    import OpenEXR

    channels = _read_exr_strips(path, progress) if progress is not None and hasattr(OpenEXR, "InputFile") else None
    if channels is None:
        with OpenEXR.File(str(path), separate_channels=True, num_threads=1) as f:
            channels = {name: np.array(ch.pixels, copy=True) for name, ch in f.channels().items()}
    if not channels:
        raise BakeryError("OpenEXR file has no channels", path)
    names = _exr_channel_order(list(channels), path)
    planes = [channels[n] for n in names]
    kinds = {p.dtype for p in planes}
    if any(k not in (np.dtype(np.float16), np.dtype(np.float32)) for k in kinds):
        raise BakeryError(f"unsupported OpenEXR channel type(s) {sorted(map(str, kinds))}", path)
    bits = "half" if kinds == {np.dtype(np.float16)} else "float"
    return np.stack([p.astype(np.float32) for p in planes], axis=-1), bits


def _read_exr_strips(path: Path, progress: Callable[[float, str], None]) -> dict[str, np.ndarray]:
    """The channels :func:`_read_exr` reads in one call (a test compares them), read a strip of scanlines at
    a time through the bindings' scanline reader so that each strip can be reported; None for files it leaves
    to the one call (subsampled channels)."""
    import Imath
    import OpenEXR

    f = OpenEXR.InputFile(str(path))
    try:
        hd = f.header()
        dw = hd["dataWindow"]
        w, h = dw.max.x - dw.min.x + 1, dw.max.y - dw.min.y + 1
        kinds = {Imath.PixelType.HALF: np.float16, Imath.PixelType.FLOAT: np.float32,
                 Imath.PixelType.UINT: np.uint32}
        if any(c.xSampling != 1 or c.ySampling != 1 or c.type.v not in kinds for c in hd["channels"].values()):
            return None
        chans = {n: kinds[c.type.v] for n, c in hd["channels"].items()}
        out = {n: np.empty((h, w), t) for n, t in chans.items()}
        for r0 in range(0, h, EXR_STRIP_ROWS):
            r1 = min(h, r0 + EXR_STRIP_ROWS)
            for n, t in chans.items():
                kind = Imath.PixelType(hd["channels"][n].type.v)
                data = f.channel(n, kind, dw.min.y + r0, dw.min.y + r1 - 1)
                out[n][r0:r1] = np.frombuffer(data, dtype=t).reshape(r1 - r0, w)
            progress(r1 / h, "reading")
    finally:
        f.close()
    return out


def _exr_channel_order(names: list[str], path: Path) -> list[str]:
    upper = {n.upper(): n for n in names}
    if "R" in upper and "G" in upper and "B" in upper:
        order = ["R", "G", "B"] + (["A"] if "A" in upper else [])
        return [upper[k] for k in order]
    if "Y" in upper:
        return [upper["Y"]] + ([upper["A"]] if "A" in upper else [])
    if len(names) == 1:
        return names
    if set(upper) == {"R", "G"} or set(upper) == {"X", "Y"}:
        return [upper[k] for k in (("R", "G") if "R" in upper else ("X", "Y"))]
    raise BakeryError(f"cannot map OpenEXR channels {sorted(names)} to R, G, B(, A) or Y", path)


def _read_hdr(path: Path) -> tuple[np.ndarray, str]:
    a, bits = _read_cv2(path)
    if bits != "float":
        raise BakeryError("Radiance HDR file did not decode to float data", path)
    return a, "float"


_READERS = {"png": _read_png, "tiff": _read_tiff, "exr": _read_exr, "hdr": _read_hdr, "jpeg": _read_cv2}
_STRIP_READERS = {"png", "tiff", "exr"}


def _peek_size(path: Path, fmt: str) -> tuple[int, int]:
    """Width and height from the file header, without decoding pixels."""
    try:
        if fmt == "png":
            with open(path, "rb") as f:
                head = f.read(24)
            if len(head) < 24 or head[:8] != b"\x89PNG\r\n\x1a\n" or head[12:16] != b"IHDR":
                raise BakeryError("not a PNG file (bad signature or header)", path)
            w, h = struct.unpack(">II", head[16:24])
            return w, h
        if fmt == "tiff":
            import tifffile

            with tifffile.TiffFile(path) as tif:
                page = tif.pages[0]
                return int(page.imagewidth), int(page.imagelength)
        if fmt == "exr":
            with open(path, "rb") as f:
                magic = f.read(4)
            if magic != b"\x76\x2f\x31\x01":
                raise BakeryError("not an OpenEXR file (bad magic number)", path)
            import OpenEXR

            with OpenEXR.File(str(path), header_only=True) as f:
                lo, hi = f.header()["dataWindow"]
            return int(hi[0] - lo[0] + 1), int(hi[1] - lo[1] + 1)
        if fmt == "hdr":
            return _hdr_size(path)
        if fmt == "jpeg":
            from PIL import Image as PILImage

            PILImage.MAX_IMAGE_PIXELS = None  # we apply our own limit
            with PILImage.open(path) as im:
                return im.size
    except BakeryError:
        raise
    except Exception as exc:
        raise BakeryError(f"cannot read {fmt.upper()} header ({_short(exc)})", path) from exc
    raise AssertionError(fmt)


def _hdr_size(path: Path) -> tuple[int, int]:
    with open(path, "rb") as f:
        head = f.read(4096)
    if not (head.startswith(b"#?RADIANCE") or head.startswith(b"#?RGBE")):
        raise BakeryError("not a Radiance HDR file (missing #?RADIANCE signature)", path)
    end = head.find(b"\n\n")
    if end < 0:
        raise BakeryError("Radiance HDR header is incomplete", path)
    line = head[end + 2:].split(b"\n", 1)[0].split()
    if len(line) != 4 or not line[1].isdigit() or not line[3].isdigit():
        raise BakeryError("Radiance HDR resolution line is malformed", path)
    axes = {line[0][1:2]: int(line[1]), line[2][1:2]: int(line[3])}
    if set(axes) != {b"X", b"Y"}:
        raise BakeryError("Radiance HDR resolution line is malformed", path)
    return axes[b"X"], axes[b"Y"]


# ---------------------------------------------------------------------------------------------- writing


def write_image(
    path: str | os.PathLike,
    pixels: np.ndarray,
    *,
    bits: Bits | None = None,
    color: Color = "data",
    progress: Callable[[float, str], None] | None = None,
    threads: int | None = None,
) -> Path:
    """Write float32 ``(H, W)`` or ``(H, W, C)`` RGB(A) pixels atomically.

    Parameters
    ----------
    path : path-like
        ``.png``, ``.tif``/``.tiff``, ``.exr`` or ``.hdr``.
    pixels : ndarray
        Float data; integer outputs take values in [0, 1] (clipped) and round to nearest, ties to even
        (``numpy.rint``). ``uint8`` / ``uint16`` arrays are taken as already quantised and written as they are
        (PNG and TIFF; lets big images be encoded strip by strip without a float copy).
    bits : {"8", "16", "half", "float"}, optional
        Sample type; default per format: PNG u8, TIFF u16, EXR f16, HDR (RGBE) f32.
    color : {"data", "srgb"}
        ``"srgb"`` encodes colour channels with the IEC 61966-2-1 curve before quantising (never alpha).
    progress : callable, optional
        ``progress(fraction, "writing")`` as the file is written, fractions rising to 1 (PNG and OpenEXR report
        once per strip of rows, TIFF per group of strips, HDR once at the end). Default: silent. The bytes never
        depend on it.
    threads : int, optional
        Threads a PNG or TIFF write may compress on (default: the CPU count; bakes pass ``bakes.bake_threads()``).
        The bytes never depend on it.

    Returns
    -------
    Path
        The written path.
    """
    path = Path(path)
    fmt = image_format(path, writing=True)
    stored = _INTEGER_DTYPES.get(np.asarray(pixels).dtype)
    if stored is not None:  # already quantised: written exactly as given
        if bits not in (None, stored) or color != "data":
            raise BakeryError(f"{stored} pixels are written as stored; got bits={bits!r}, color={color!r}")
        bits = stored
    bits = bits or DEFAULT_BITS[fmt]
    if bits not in WRITABLE[fmt]:
        raise BakeryError(f"{fmt.upper()} files cannot hold {bits} samples; use one of "
                          f"{', '.join(WRITABLE[fmt])}", path)
    a = np.asarray(pixels) if stored else np.asarray(pixels, dtype=np.float32)
    if a.ndim == 2:
        a = a[:, :, None]
    if a.ndim != 3 or a.shape[2] not in (1, 2, 3, 4):
        raise BakeryError(f"cannot write an array of shape {np.shape(pixels)} as an image", path)
    if color == "srgb":
        a = a.copy()
        nc = 3 if a.shape[2] >= 3 else 1
        a[:, :, :nc] = linear_to_srgb(np.clip(a[:, :, :nc], 0.0, 1.0))
    if fmt in ("png", "hdr") and a.shape[2] == 2:
        raise BakeryError(f"{fmt.upper()} files cannot hold 2 channels; use .exr or .tif", path)
    if fmt == "hdr" and np.any(a < 0):
        raise BakeryError("Radiance HDR cannot store negative values; clamp them or write .exr", path)
    if fmt == "hdr" and a.shape[2] != 3:
        a = np.repeat(a[:, :, :1], 3, axis=2) if a.shape[2] == 1 else a[:, :, :3]
    if bits == "half":
        a = clamp_to_half(a, path)
    with atomic_output(path) as tmp:
        if fmt == "hdr":
            _WRITERS[fmt](tmp, a, bits)
        else:
            _WRITERS[fmt](tmp, a, bits, progress=progress, threads=threads)
    if progress is not None and fmt == "hdr":
        progress(1.0, "writing")
    return path


def quantize(a: np.ndarray, bits: Bits) -> np.ndarray:
    """Float [0, 1] -> unsigned integers of ``bits``, round to nearest, ties to even (``numpy.rint``)."""
    if _INTEGER_DTYPES.get(a.dtype) == bits:
        return a
    top = INTEGER_MAX[bits]
    out = np.empty(a.shape, dtype=np.uint8 if bits == "8" else np.uint16)
    scaled = np.clip(a, 0.0, 1.0) * np.float32(top)
    np.rint(scaled, out=scaled)
    out[...] = scaled
    return out


def _write_png(tmp: Path, a: np.ndarray, bits: str, *, progress: Callable[[float, str], None] | None = None,
               threads: int | None = None) -> None:
    from bakery.io.png import write_png

    write_png(tmp, quantize(a, bits), progress=progress, threads=threads)


#: TIFF strips compressed between two progress calls (about 2 MiB of samples).
TIFF_STRIPS_PER_CALL = 8


def _write_tiff(tmp: Path, a: np.ndarray, bits: str, *, progress: Callable[[float, str], None] | None = None,
                threads: int | None = None) -> None:
    """Deflate-compressed strips of about 256 KiB (tifffile's own choice), no predictor (TIFF 6.0, Adobe 1992:
    strips, RowsPerStrip, StripOffsets/StripByteCounts; Compression 8, Adobe Deflate, of Adobe's TIFF
    Technical Note 2 / the deflate supplement; from memory). The strips are compressed here, on up to
    ``threads`` threads, and handed to tifffile already encoded, so that each group can be reported: the file
    is byte for byte the one ``tifffile.imwrite`` writes from the whole array (a test compares them)."""
    import tifffile

    data = np.ascontiguousarray(quantize(a, bits) if bits in INTEGER_MAX else a.astype(np.float32))
    if data.shape[2] == 1:
        data = data[:, :, 0]
    photometric = "minisblack" if data.ndim == 2 or data.shape[2] == 2 else "rgb"
    extrasamples = ["unassalpha"] if data.ndim == 3 and data.shape[2] in (2, 4) else None
    rows = max(1, min(data.shape[0], TIFF_STRIP_BYTES // (data[0].size * data.itemsize)))
    tifffile.imwrite(tmp, _deflate_strips(data, rows, progress, threads), shape=data.shape, dtype=data.dtype,
                     photometric=photometric, compression="zlib", rowsperstrip=rows,
                     extrasamples=extrasamples, metadata=None)
    if progress is not None:
        progress(1.0, "writing")


#: Uncompressed bytes per TIFF strip: tifffile's default for compressed strips (262144 // row bytes rows).
TIFF_STRIP_BYTES = 262144


def _deflate_strips(data: np.ndarray, rows: int, progress: Callable[[float, str], None] | None,
                    threads: int | None) -> Iterator[bytes]:
    """Each strip of ``rows`` rows deflated with the codec and level tifffile uses (imagecodecs' deflate at
    its default level), in order; ``progress(fraction, "writing")`` after every
    :data:`TIFF_STRIPS_PER_CALL` strips are in the file (tifffile asks for no strip past the last, so the
    caller reports the end)."""
    from collections import deque
    from concurrent.futures import ThreadPoolExecutor

    import imagecodecs

    height = data.shape[0]
    starts = range(0, height, rows)
    workers = max(1, min(threads or os.cpu_count() or 1, len(starts)))
    queued = iter(starts)
    with ThreadPoolExecutor(workers, thread_name_prefix="bakery-tiff") as pool:
        pending: deque = deque()

        def submit() -> None:
            r0 = next(queued, None)
            if r0 is not None:
                pending.append((r0, pool.submit(imagecodecs.deflate_encode, data[r0:r0 + rows])))

        for _ in range(2 * workers):  # keep memory to a few strips
            submit()
        while pending:
            r0, fut = pending.popleft()
            submit()
            if progress is not None and r0 and (r0 // rows) % TIFF_STRIPS_PER_CALL == 0:
                progress(r0 / height, "writing")  # the strips above are in the file
            yield fut.result()


#: Scanlines an OpenEXR write hands over per call when it reports progress: a multiple of the 16 lines one ZIP
#: block holds (OpenEXR file layout), about 2 MiB of samples for an 8192-wide RGB half image.
EXR_STRIP_ROWS = 64


def _write_exr(tmp: Path, a: np.ndarray, bits: str, *, progress: Callable[[float, str], None] | None = None,
               threads: int | None = None) -> None:
    import OpenEXR

    dtype = np.float16 if bits == "half" else np.float32
    names = {1: ("Y",), 2: ("R", "G"), 3: ("R", "G", "B"), 4: ("R", "G", "B", "A")}[a.shape[2]]
    data = a.astype(dtype)
    if progress is not None and hasattr(OpenEXR, "OutputFile"):
        _write_exr_strips(tmp, data, names, progress)
        return
    channels = {n: np.ascontiguousarray(data[:, :, i]) for i, n in enumerate(names)}
    header = {"compression": OpenEXR.ZIP_COMPRESSION, "type": OpenEXR.scanlineimage}
    with OpenEXR.File(header, channels) as f:
        f.write(str(tmp))


def _write_exr_strips(tmp: Path, data: np.ndarray, names: tuple[str, ...],
                      progress: Callable[[float, str], None]) -> None:
    """The same file as :func:`_write_exr`'s one call (a test compares the bytes), written a strip of
    scanlines at a time through the bindings' scanline writer so that each strip can be reported."""
    import Imath
    import OpenEXR

    h, w = data.shape[:2]
    header = OpenEXR.Header(w, h)
    header["compression"] = Imath.Compression(Imath.Compression.ZIP_COMPRESSION)
    kind = Imath.PixelType(Imath.PixelType.HALF if data.dtype == np.float16 else Imath.PixelType.FLOAT)
    header["channels"] = {n: Imath.Channel(kind) for n in names}
    header["type"] = b"scanlineimage"
    out = OpenEXR.OutputFile(str(tmp), header)
    try:
        for r0 in range(0, h, EXR_STRIP_ROWS):
            r1 = min(h, r0 + EXR_STRIP_ROWS)
            out.writePixels({n: np.ascontiguousarray(data[r0:r1, :, i]).tobytes() for i, n in enumerate(names)},
                            r1 - r0)
            progress(r1 / h, "writing")
    finally:
        out.close()


HALF_MAX = 65504.0


def clamp_to_half(a: np.ndarray, where: str | os.PathLike = "output") -> np.ndarray:
    """Clamp values beyond the binary16 range (+-65504, IEEE 754-2008) with a warning that counts them."""
    over = int(np.count_nonzero(np.abs(a) > HALF_MAX))
    if over:
        warnings.warn(f"{where}: {over} sample(s) exceed the half-float range and were clamped to "
                      f"+-{HALF_MAX:g}; write float32 (--bits float) to keep them", BakeryWarning, stacklevel=3)
        a = np.clip(a, -HALF_MAX, HALF_MAX)
    return a


def _write_hdr(tmp: Path, a: np.ndarray, bits: str) -> None:
    cv2 = _cv2()
    if not cv2.imwrite(str(tmp), np.ascontiguousarray(_bgr_to_rgb(a))):
        raise BakeryError("OpenCV failed to write the HDR file", tmp)


_WRITERS = {"png": _write_png, "tiff": _write_tiff, "exr": _write_exr, "hdr": _write_hdr}
