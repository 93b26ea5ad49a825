"""GPU block compression of single texture levels: BC1, BC3, BC4, BC5, BC6H (unsigned), BC7.

Encoding goes through the ``ispc_texcomp`` bindings of Intel's ISPC texture compressor (MIT licence); decoding
through ``imagecodecs.bcn_decode``. Every format here cuts a level into 4x4 texel blocks; a level whose size is
not a multiple of 4 (including levels smaller than a block) is padded by replicating its last row and column,
and the padding texels are dropped again on decoding (KTX 2.0 specification, section 3.12 "levelImages":
``num_blocks = ceil(level_size / 4)``).

Quirks of the encoder library that this module guards (each has a test in ``tests/io/test_blockcodec.py``):

- its BC1 call returns twice the right byte count; the first half holds the blocks, the rest is dropped;
- BC4 and BC5 read the first one or two bytes of each texel of the surface: they get R8 / R8G8 surfaces (an
  RGBA surface gives wrong blocks);
- BC6H reads an RGBA surface of IEEE half floats (8 bytes per texel) despite the 8-bit surface type;
- its ASTC and ETC1 paths are not used (ASTC on sizes that are not block multiples gives wrong blocks).

Blocks are independent, so a level is cut into strips of whole block rows and encoded on a thread pool (the
library releases the GIL); the bytes do not depend on the thread count.

Quality profiles (``quality``): ``"fast"``, ``"balanced"``, ``"best"``. They map to the library's own BC7 and
BC6H settings (BC7: fast / basic / slow; BC6H: fast / basic / slow); BC1/BC3/BC4/BC5 have one setting only.
The default is ``"fast"``: on a 512^2 photo-like image "balanced" gained 0.03-0.05 dB for 2-3x the time and
"best" 0.05 dB for 7-8x (BC7); on an HDR sky BC6H went from 0.0315 to 0.0296 stops for 2.5x
(tests/perf/bench_compress.py; docs/compression.md has the table).
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from bakery.errors import BakeryError
from bakery.io.ktx2_formats import encoder_version  # noqa: F401  (numpy-free: a batch plan reads it)
from bakery.progress import Progress, maybe_within, row_bands

BLOCK = 4
QUALITIES = ("fast", "balanced", "best")
_BC7_PROFILE = {"fast": "fast", "balanced": "basic", "best": "slow"}
_BC7_ALPHA_PROFILE = {"fast": "alpha_fast", "balanced": "alpha_basic", "best": "alpha_slow"}
_BC6H_PROFILE = {"fast": "fast", "balanced": "basic", "best": "slow"}
#: Block rows per strip handed to one encoder call: small enough to spread a 1024-texel-high level over two
#: threads, large enough that call overhead stays negligible (common practice).
STRIP_BLOCK_ROWS = 16
#: At most this many blocks per strip (fewer rows on wide levels): a strip of the slowest encoder (BC7, "best")
#: then takes well under a second, so progress moves (common practice).
STRIP_BLOCKS = 8192


@dataclass(frozen=True)
class Codec:
    """One block format: ``channels`` are the stored channels (and the channels of decoded data)."""

    name: str
    block_bytes: int
    channels: int
    surface_channels: int  # bytes per texel of the encoder's input surface (1, 2, 4; 8 for half floats)
    hdr: bool = False
    decode_id: int = 0  # imagecodecs.bcn_decode format number


CODECS: dict[str, Codec] = {c.name: c for c in (
    Codec("bc1", 8, 3, 4, decode_id=1),
    Codec("bc3", 16, 4, 4, decode_id=3),
    Codec("bc4", 8, 1, 1, decode_id=4),
    Codec("bc5", 16, 2, 2, decode_id=5),
    Codec("bc6h", 16, 3, 8, hdr=True, decode_id=6),
    Codec("bc7", 16, 4, 4, decode_id=7),
)}


def check_quality(quality: str) -> str:
    if quality not in QUALITIES:
        raise BakeryError(f"unknown compression quality {quality!r}; use one of {', '.join(QUALITIES)}")
    return quality


def block_counts(width: int, height: int) -> tuple[int, int]:
    """Blocks across and down a ``width`` x ``height`` level: ``ceil(size / 4)``, at least 1."""
    return max(1, -(-width // BLOCK)), max(1, -(-height // BLOCK))


def level_bytes(codec: Codec, width: int, height: int) -> int:
    bx, by = block_counts(width, height)
    return bx * by * codec.block_bytes


def pad_to_blocks(a: np.ndarray) -> np.ndarray:
    """(H, W, C) -> (ceil(H/4)*4, ceil(W/4)*4, C), the new rows and columns replicating the last ones."""
    h, w = a.shape[:2]
    ph, pw = -h % BLOCK, -w % BLOCK
    if ph == 0 and pw == 0:
        return a
    return np.pad(a, ((0, ph), (0, pw), (0, 0)), mode="edge")


def _settings(codec: Codec, quality: str, has_alpha: bool):
    import ispc_texcomp as itc

    if codec.name == "bc7":
        return itc.BC7EncSettings.from_profile((_BC7_ALPHA_PROFILE if has_alpha else _BC7_PROFILE)[quality])
    if codec.name == "bc6h":
        return itc.BC6HEncSettings.from_profile(_BC6H_PROFILE[quality])
    return None


def _encode_strip(codec: Codec, strip: np.ndarray, settings) -> bytes:
    import ispc_texcomp as itc

    h, w = strip.shape[:2]
    stride = w * codec.surface_channels
    surf = itc.RGBASurface(np.ascontiguousarray(strip), w, h, stride)
    want = (w // BLOCK) * (h // BLOCK) * codec.block_bytes
    if codec.name == "bc1":
        out = itc.compress_blocks_bc1(surf)
        # library quirk: twice the byte count, blocks in the first half
        if len(out) not in (want, 2 * want):
            raise RuntimeError(f"BC1 encoder returned {len(out)} bytes for {want}")
        return bytes(out[:want])
    fn = {"bc3": itc.compress_blocks_bc3, "bc4": itc.compress_blocks_bc4, "bc5": itc.compress_blocks_bc5}.get(
        codec.name)
    out = fn(surf) if fn else getattr(itc, f"compress_blocks_{codec.name}")(surf, settings)
    if len(out) != want:
        raise RuntimeError(f"{codec.name} encoder returned {len(out)} bytes for {want}")
    return bytes(out)


def encode_surface(texels: np.ndarray, codec: Codec | str, *, quality: str = "fast",
                   threads: int | None = None, progress: Progress | None = None) -> bytes:
    """Blocks of an already quantised, block-padded surface.

    ``texels``: uint8 ``(H, W, surface_channels)`` (BC1/BC3/BC7: RGBA, BC4: R, BC5: RG) or float16
    ``(H, W, 4)`` for BC6H, with H and W multiples of 4. Blocks come out row by row, left to right.
    ``progress(fraction, "encoding")`` is called as each strip of block rows is done (in order), rising to 1;
    the bytes do not depend on it.
    """
    codec = CODECS[codec] if isinstance(codec, str) else codec
    check_quality(quality)
    h, w = texels.shape[:2]
    if h % BLOCK or w % BLOCK:
        raise ValueError(f"surface {w}x{h} is not a multiple of the block size")
    settings = _settings(codec, quality, has_alpha=codec.name == "bc7" and bool((texels[..., 3] != 255).any()))
    rows = max(1, min(STRIP_BLOCK_ROWS, STRIP_BLOCKS // max(1, w // BLOCK))) * BLOCK
    strips = [texels[y:y + rows] for y in range(0, h, rows)]
    threads = (os.cpu_count() or 1) if threads is None else max(1, int(threads))
    out = []

    def keep(data: bytes) -> None:
        out.append(data)
        if progress is not None:
            progress(len(out) / len(strips), "encoding")

    if threads == 1 or len(strips) == 1:
        for s in strips:
            keep(_encode_strip(codec, s, settings))
    else:
        with ThreadPoolExecutor(min(threads, len(strips))) as pool:
            for data in pool.map(lambda s: _encode_strip(codec, s, settings), strips):
                keep(data)
    return b"".join(out)


#: Texels :func:`quantize` converts per band of rows (common practice: its temporaries stay a few MB, and a large
#: level reports progress as it goes).
QUANTIZE_BAND_TEXELS = 1 << 20


def quantize(values: np.ndarray, codec: Codec, progress: Progress | None = None) -> tuple[np.ndarray, int]:
    """Block-padded encoder input from float32 ``(H, W, C)`` stored values, and the clamped sample count.

    LDR codecs: ``rint(clip(v, 0, 1) * 255)`` in uint8 (ties to even, as the uncompressed writers); BC1/BC3/BC7
    get RGBA (missing alpha = 255). BC6H: half floats clipped to [0, 65504] (it stores no negative values).
    In bands of rows; ``progress(fraction, "encoding")`` after each.
    """
    v = np.asarray(values, dtype=np.float32)
    h, w, c = v.shape
    if codec.hdr:
        out = np.empty((h, w, 4), np.float16)
        out[:, :, 3] = 1.0
    else:
        out = np.empty((h, w, codec.surface_channels), np.uint8)
    clamped = 0
    for r0, r1 in row_bands(h, w, QUANTIZE_BAND_TEXELS):
        clamped += _quantize_rows(v[r0:r1], codec, out[r0:r1])
        if progress is not None:
            progress(r1 / h, "encoding")
    return pad_to_blocks(out), clamped


def _quantize_rows(v: np.ndarray, codec: Codec, out: np.ndarray) -> int:
    """:func:`quantize` of a band of rows into ``out``; the clamped count."""
    if codec.hdr:
        clamped = int(np.count_nonzero((v < 0) | (v > 65504.0)))
        np.clip(v[:, :, :3], 0.0, 65504.0, out=out[:, :, :3], casting="unsafe")
        return clamped
    sc = codec.surface_channels
    k = min(v.shape[2], sc)
    tmp = np.empty(v.shape[:2] + (k,), np.float32)
    np.copyto(tmp, v[:, :, :k])
    clamped = 0
    if tmp.size and (tmp.min() < 0 or tmp.max() > 1):  # count only when something is out of range
        clamped = int(np.count_nonzero((tmp < 0) | (tmp > 1)))
        np.clip(tmp, 0.0, 1.0, out=tmp)
    tmp *= np.float32(255.0)
    np.rint(tmp, out=tmp)
    out[:, :, :k] = tmp
    if sc == 4 and k < 4:
        out[:, :, k:] = 255
    return clamped


def encode_level(values: np.ndarray, codec: Codec | str, *, quality: str = "fast",
                 threads: int | None = None, progress: Progress | None = None
                 ) -> tuple[bytes, int]:
    """Blocks of one float32 ``(H, W, C)`` level of stored values, and the number of clamped samples
    (``progress``: as :func:`encode_surface`)."""
    codec = CODECS[codec] if isinstance(codec, str) else codec
    surf, clamped = quantize(values, codec, progress=maybe_within(progress, 0.0, 0.1))
    return encode_surface(surf, codec, quality=quality, threads=threads,
                          progress=maybe_within(progress, 0.1, 1.0)), clamped


def decode_level(data: bytes | memoryview, codec: Codec | str, width: int, height: int,
                 block_rows: np.ndarray | None = None) -> np.ndarray:
    """Float32 ``(height, width, channels)`` from the blocks of one level (uint8 values / 255, BC6H half
    floats as they are). ``block_rows`` (increasing block-row indices) decodes only those rows, stacked:
    their texel rows are :func:`texel_rows` of the same indices."""
    import imagecodecs

    codec = CODECS[codec] if isinstance(codec, str) else codec
    bx, by = block_counts(width, height)
    if len(data) != bx * by * codec.block_bytes:
        raise ValueError(f"{len(data)} bytes for {bx}x{by} blocks of {codec.name}")
    row_bytes = bx * codec.block_bytes
    mv = memoryview(data)
    if block_rows is None:
        chunk, n = bytes(mv), by
    else:
        chunk = b"".join(mv[r * row_bytes:(r + 1) * row_bytes] for r in block_rows)
        n = len(block_rows)
    ph, pw = n * BLOCK, bx * BLOCK
    shape = {1: (ph, pw), 2: (ph, pw, 2), 3: (ph, pw, 3 if codec.hdr else 4), 4: (ph, pw, 4)}[codec.channels]
    out = imagecodecs.bcn_decode(chunk, codec.decode_id, shape=shape)
    if out.ndim == 2:
        out = out[:, :, None]
    rows = texel_rows(block_rows, height, padded=True)
    out = out[rows, :width, :codec.channels]
    if codec.hdr:
        return out.astype(np.float32)
    return out.astype(np.float32) * np.float32(1 / 255)


def texel_rows(block_rows: np.ndarray | None, height: int, *, padded: bool = False) -> np.ndarray | slice:
    """Texel rows of a level covered by ``block_rows`` (rows past ``height`` left out); ``padded=True``
    gives their positions in the stacked decoded strips instead."""
    if block_rows is None:
        return slice(0, height)
    t = (np.asarray(block_rows)[:, None] * BLOCK + np.arange(BLOCK)).ravel()
    keep = t < height
    if padded:
        return np.nonzero(keep)[0]
    return t[keep]


def sample_block_rows(width: int, height: int, limit: int | None) -> np.ndarray | None:
    """Block rows to measure for a quality estimate: every ``step``-th block row so that at most about
    ``limit`` texels are read; None (every row) when the level is small or ``limit`` is None."""
    _, by = block_counts(width, height)
    if limit is None or width * height <= limit:
        return None
    step = max(1, math.ceil(width * height / limit))
    return np.arange(0, by, step)
