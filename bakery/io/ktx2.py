"""KTX 2.0 textures: 2D textures and cubemaps with mip levels, uncompressed and BCn block-compressed formats,
optionally Zstandard-supercompressed.

Follows the Khronos KTX File Format Specification, version 2.0 [1]_ (identifier, header, index, level index,
Data Format Descriptor, key/value data, alignment and level order, the Zstandard supercompression scheme 2)
with the basic Data Format Descriptor block of the Khronos Data Format Specification 1.3/1.4 [2]_. Array
textures, 3D textures and other supercompression schemes are not written, and are refused on reading with a
clear message; so are files whose DFD does not describe their vkFormat, and level data that lies in the
header, overlaps, or is misaligned.

In memory a texture is a list of levels, level 0 (largest) first. A 2D level is float32 ``(H, W, C)``, a
cubemap level float32 ``(6, N, N, C)`` with faces in the order +X, -X, +Y, -Y, +Z, -Z (see
:mod:`bakery.sphere`); rows run top to bottom (KTXorientation "rd"). Values are linear; formats ending in
``_SRGB`` are encoded with the sRGB curve on writing and decoded on reading.

Formats (``name``: VkFormat number, channels):

=============================  =====  ===  ===============================================
name                           vk     ch   notes
=============================  =====  ===  ===============================================
R8_UNORM                       9      1    [0, 1], round to nearest
R8G8_UNORM                     16     2
R8G8B8A8_UNORM                 37     4
R8G8B8A8_SRGB                  43     4    colour sRGB-encoded, alpha linear
R16_UNORM                      70     1
R16G16_UNORM                   77     2
R16G16B16A16_UNORM             91     4
R16G16_SFLOAT                  83     2    e.g. a BRDF table
R16G16B16A16_SFLOAT            97     4    default for HDR; |v| <= 65504
R32G32B32A32_SFLOAT            109    4    masters
B10G11R11_UFLOAT_PACK32        122    3    v in [0, 65024] (R, G), [0, 64512] (B)
E5B9G9R9_UFLOAT_PACK32         123    3    v in [0, 65408]
BC1_RGB_UNORM_BLOCK ("bc1")    131    3    4x4 blocks of 8 bytes; ``_SRGB`` 132 ("bc1-srgb")
BC3_UNORM_BLOCK ("bc3")        137    4    16-byte blocks, RGBA; ``_SRGB`` 138 ("bc3-srgb")
BC4_UNORM_BLOCK ("bc4")        139    1    8-byte blocks: roughness, height, masks
BC5_UNORM_BLOCK ("bc5")        141    2    16-byte blocks: normal-map XY
BC6H_UFLOAT_BLOCK ("bc6h")     143    3    16-byte blocks, HDR in [0, 65504]
BC7_UNORM_BLOCK ("bc7")        145    4    16-byte blocks; ``_SRGB`` 146 ("bc7-srgb")
=============================  =====  ===  ===============================================

Block formats are encoded by :mod:`bakery.io.blockcodec`; :mod:`bakery.io.texcompress` builds mips from
float data and reports the compression error.

Out-of-range values are clamped with one :class:`~bakery.errors.BakeryWarning` that counts them; NaN/Inf are
refused (callers check inputs before).

References
----------
.. [1] The Khronos Group, "KTX File Format Specification, version 2.0" (2021), sections 3 (file structure),
   3.1 (identifier), 3.4 (header), 3.9 (level index), 3.10 (DFD), 3.11 (key/value data), 3.12 (level data
   order and mipPadding), 4.2 (faceCount), 5.2 (KTXorientation), 5.9 (KTXwriter).
.. [2] The Khronos Group, "Khronos Data Format Specification, version 1.3", section 5 (basic descriptor
   block), section 5.16 examples for B10G11R11 and E5B9G9R9.
.. [3] The Khronos Group, "Vulkan 1.3 Specification", sections on the packed 11/10-bit unsigned floats and
   the shared-exponent format ("Unsigned 11-Bit Floating-Point Numbers", "Shared Exponent" in the
   Fundamentals and Image Operations chapters, from EXT_texture_shared_exponent).
"""

from __future__ import annotations

import math
import os
import struct
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError, BakeryWarning
from bakery.io.ktx2_formats import (  # noqa: F401  (re-exported: the format table is part of this module's API)
    BLOCK_BYTES,
    FORMAT_ALIASES,
    FORMATS,
    FORMATS_BY_VK,
    SHORT_NAMES,
    Format,
    get_format,
)
from bakery.progress import Progress, maybe_within, row_bands

IDENTIFIER = bytes([0xAB, 0x4B, 0x54, 0x58, 0x20, 0x32, 0x30, 0xBB, 0x0D, 0x0A, 0x1A, 0x0A])
HEADER_SIZE = 80
LEVEL_INDEX_ENTRY = 24

# DFD constants (Khronos Data Format Specification, basic descriptor block)
KHR_DF_MODEL_RGBSDA = 1
KHR_DF_PRIMARIES_BT709 = 1
KHR_DF_TRANSFER_LINEAR = 1
KHR_DF_TRANSFER_SRGB = 2
KHR_DF_VERSION = 2
Q_LINEAR, Q_EXPONENT, Q_SIGNED, Q_FLOAT = 0x1, 0x2, 0x4, 0x8  # the top nibble of sample word 0
CH_R, CH_G, CH_B, CH_A = 0, 1, 2, 15
#: colorModel of the block formats (Data Format spec section 5.6, "KHR_DF_MODEL_BC1A" .. "KHR_DF_MODEL_BC7")
BLOCK_MODELS = {"bc1": 128, "bc3": 130, "bc4": 131, "bc5": 132, "bc6h": 133, "bc7": 134}
U32_MAX = 0xFFFFFFFF
F32_ONE, F32_MINUS_ONE = 0x3F800000, 0xBF800000

HALF_MAX = 65504.0
B10G11R11_MAX = (65024.0, 65024.0, 64512.0)  # (2 - 2^-6) 2^15 and (2 - 2^-5) 2^15
RGB9E5_MAX = 511 / 512 * 2.0**16  # 65408


#: Supercompression schemes (KTX 2.0 spec, section 3.4 supercompressionScheme): written and read here.
SCHEME_NONE, SCHEME_ZSTD = 0, 2


@dataclass
class Ktx2Texture:
    """A decoded KTX2 texture.

    Attributes
    ----------
    levels : list of ndarray, float32
        Level 0 first; 2D ``(H, W, C)``, cubemap ``(6, N, N, C)``.
    format : Format
    cubemap : bool
    key_values : dict of str to bytes
        Key/value data as stored (values include their terminating NUL where the writer put one).
    supercompression : int
        The file's supercompressionScheme (0 none, 2 Zstandard).
    """

    levels: list[np.ndarray]
    format: Format
    cubemap: bool
    key_values: dict[str, bytes] = field(default_factory=dict)
    supercompression: int = 0

    @property
    def block_compressed(self) -> bool:
        """True when the file held GPU blocks (BCn), decoded here to float32."""
        return self.format.block_compressed

    @property
    def supercompressed(self) -> bool:
        """True when the levels were Zstandard-deflated in the file (supercompressionScheme 2)."""
        return self.supercompression != SCHEME_NONE

    @property
    def width(self) -> int:
        return int(self.levels[0].shape[-2])

    @property
    def height(self) -> int:
        return int(self.levels[0].shape[-3])


@dataclass(frozen=True)
class Ktx2Header:
    """Header and index fields of a KTX2 file (read without decoding pixels)."""

    vk_format: int
    type_size: int
    width: int
    height: int
    depth: int
    layers: int
    faces: int
    levels: int
    supercompression: int
    dfd: tuple[int, int]
    kvd: tuple[int, int]
    sgd: tuple[int, int]
    level_index: tuple[tuple[int, int, int], ...]


# --------------------------------------------------------------------------------------- packed floats


def pack_ufloat(v: np.ndarray, exp_bits: int, man_bits: int) -> np.ndarray:
    """Unsigned small floats (5-bit exponent, bias 15, no sign; ref. [3]) from non-negative values already
    clamped to the format's range; round to nearest, ties to even. Returns uint32 bit patterns.

    Examples
    --------
    >>> hex(int(pack_ufloat(np.array([1.0]), 5, 6)[0]))   # 1.0: exponent 15, mantissa 0
    '0x3c0'
    """
    bias = (1 << (exp_bits - 1)) - 1
    v = np.asarray(v, dtype=np.float64)
    _, e2 = np.frexp(v)  # v = m 2^e2, m in [0.5, 1)
    e = np.maximum(e2 - 1, 1 - bias)  # unbiased exponent, denormals share the smallest one
    q = np.ldexp(1.0, e - man_bits)
    n = np.rint(v / q).astype(np.int64)  # exact division by a power of two; rint ties to even
    carry = n >= (2 << man_bits)
    e = np.where(carry, e + 1, e)
    n = np.where(carry, n >> 1, n)
    normal = n >= (1 << man_bits)
    exp_field = np.where(normal, e + bias, 0)
    man = np.where(normal, n - (1 << man_bits), n)
    return ((exp_field << man_bits) | man).astype(np.uint32)


def unpack_ufloat(bits: np.ndarray, exp_bits: int, man_bits: int) -> np.ndarray:
    """Inverse of :func:`pack_ufloat` (exponent all ones decodes to Inf or NaN as in ref. [3])."""
    bias = (1 << (exp_bits - 1)) - 1
    bits = np.asarray(bits, dtype=np.int64)
    e = (bits >> man_bits) & ((1 << exp_bits) - 1)
    m = bits & ((1 << man_bits) - 1)
    normal = np.ldexp(1.0 + m / (1 << man_bits), e - bias)
    denorm = np.ldexp(m / (1 << man_bits), 1 - bias)
    out = np.where(e == 0, denorm, normal)
    top = (1 << exp_bits) - 1
    out = np.where(e == top, np.where(m == 0, np.inf, np.nan), out)
    return out.astype(np.float32)


def pack_b10g11r11(rgb: np.ndarray) -> np.ndarray:
    """B10G11R11_UFLOAT_PACK32 words from (..., 3) values in range: R bits 0-10, G 11-21, B 22-31.

    Examples
    --------
    >>> hex(int(pack_b10g11r11(np.array([1.0, 1.0, 1.0]))))
    '0x781e03c0'
    """
    rgb = np.asarray(rgb, dtype=np.float64)
    r = pack_ufloat(rgb[..., 0], 5, 6)
    g = pack_ufloat(rgb[..., 1], 5, 6)
    b = pack_ufloat(rgb[..., 2], 5, 5)
    return (r | (g << np.uint32(11)) | (b << np.uint32(22))).astype(np.uint32)


def unpack_b10g11r11(words: np.ndarray) -> np.ndarray:
    w = np.asarray(words, dtype=np.uint32)
    return np.stack([unpack_ufloat(w & 0x7FF, 5, 6), unpack_ufloat((w >> 11) & 0x7FF, 5, 6),
                     unpack_ufloat((w >> 22) & 0x3FF, 5, 5)], axis=-1)


def pack_rgb9e5(rgb: np.ndarray) -> np.ndarray:
    """E5B9G9R9_UFLOAT_PACK32 words from (..., 3) values clamped to [0, 65408]: R mantissa bits 0-8, G 9-17,
    B 18-26, shared exponent 27-31 (bias 15). The encoding of ref. [3] (EXT_texture_shared_exponent):
    ``exp' = max(-B - 1, floor(log2(max))) + 1 + B``; if ``floor(max / 2^(exp' - B - N) + 0.5) = 2^N``
    the exponent grows by one; each mantissa is ``floor(c / 2^(exp - B - N) + 0.5)`` (ties round up).

    Examples
    --------
    >>> hex(int(pack_rgb9e5(np.array([1.0, 0.5, 0.25]))))
    '0x81010100'
    """
    n_bits, bias = 9, 15
    rgb = np.clip(np.asarray(rgb, dtype=np.float64), 0.0, RGB9E5_MAX)
    mx = rgb.max(axis=-1)
    _, e2 = np.frexp(mx)
    fl = np.where(mx > 0, e2 - 1, -bias - 1).astype(np.int64)
    exp_p = np.maximum(-bias - 1, fl) + 1 + bias
    max_s = np.floor(mx / np.ldexp(1.0, exp_p - bias - n_bits) + 0.5)
    exp_s = np.where(max_s >= (1 << n_bits), exp_p + 1, exp_p)
    scale = np.ldexp(1.0, exp_s - bias - n_bits)[..., None]
    m = np.floor(rgb / scale + 0.5).astype(np.int64)
    m = np.minimum(m, (1 << n_bits) - 1)
    words = m[..., 0] | (m[..., 1] << 9) | (m[..., 2] << 18) | (exp_s.astype(np.int64) << 27)
    return words.astype(np.uint32)


def unpack_rgb9e5(words: np.ndarray) -> np.ndarray:
    w = np.asarray(words, dtype=np.int64)
    e = (w >> 27) & 0x1F
    scale = np.ldexp(1.0, e - 15 - 9)
    return np.stack([(w & 0x1FF) * scale, ((w >> 9) & 0x1FF) * scale, ((w >> 18) & 0x1FF) * scale],
                    axis=-1).astype(np.float32)


# ------------------------------------------------------------------------------------------- encoding


def fit_channels(a: np.ndarray, channels: int) -> np.ndarray:
    """Adapt (..., C) data to a format's channel count: gray fills RGB, missing alpha becomes 1, extra
    channels are dropped (RGB(A) -> RG keeps R and G)."""
    c = a.shape[-1]
    if c == channels:
        return a
    if c == 1 and channels in (3, 4):
        a = np.repeat(a, 3, axis=-1)
        c = 3
    if c == 2 and channels in (3, 4):
        a = np.concatenate([a, np.zeros(a.shape[:-1] + (1,), a.dtype)], axis=-1)
        c = 3
    if c == 3 and channels == 4:
        return np.concatenate([a, np.ones(a.shape[:-1] + (1,), a.dtype)], axis=-1)
    if c > channels:
        return a[..., :channels]
    return np.concatenate([a, np.zeros(a.shape[:-1] + (channels - c,), a.dtype)], axis=-1)


def check_block_channels(channels: int, fmt: Format, where: str | os.PathLike | None = None) -> None:
    """BC4 stores one channel and BC5 two: refuse data with more (a colour map does not fit)."""
    if fmt.block in ("bc4", "bc5") and channels > fmt.channels:
        what = "one channel (roughness, height, a mask)" if fmt.block == "bc4" else \
            "two channels (the XY of a tangent-space normal map)"
        raise BakeryError(f"{fmt.short_name} stores {what}; got {channels}-channel data (use bc7 or bc7-srgb "
                          "for colour)", where)


#: Texels per band of rows when :func:`encode_blocks` applies the sRGB curve (a few MiB of temporaries; common
#: practice).
SRGB_BAND_TEXELS = 1 << 18


def encode_blocks(a: np.ndarray, fmt: Format, *, quality: str = "fast", threads: int | None = None,
                  counts: dict[str, int] | None = None,
                  progress: Progress | None = None) -> bytes:
    """Block bytes of a float32 2D ``(H, W, C)`` or cubemap ``(6, N, N, C)`` level (faces one after another,
    KTX 2.0 spec section 3.12), sRGB-encoded first for the ``_SRGB`` formats. ``progress(fraction, label)``
    rises to 1 strip by strip of block rows (face by face)."""
    from bakery.color import linear_to_srgb
    from bakery.io import blockcodec

    codec = blockcodec.CODECS[fmt.block]
    a = np.asarray(a, dtype=np.float32)
    check_block_channels(a.shape[-1], fmt)
    a = fit_channels(a, fmt.channels)
    clamped = 0
    srgb_share = 0.3 if fmt.srgb else 0.0  # the curve costs about as much as the BC7 strips' tenth (measured)
    if fmt.srgb:  # colour outside [0, 1] is counted here, before the sRGB curve clips it
        clamped = int(np.count_nonzero((a[..., :3] < 0) | (a[..., :3] > 1)))
        a = a.copy()
        rows = a.reshape(-1, a.shape[-2], a.shape[-1])  # faces one after another: bands of rows
        for r0, r1 in row_bands(rows.shape[0], a.shape[-2], SRGB_BAND_TEXELS):  # texel by texel: no value changes
            rows[r0:r1, :, :3] = linear_to_srgb(np.clip(rows[r0:r1, :, :3], 0.0, 1.0))
            if progress is not None:
                progress(srgb_share * r1 / rows.shape[0], "encoding")
    faces = a if a.ndim == 4 else a[None]
    out = []
    for f, face in enumerate(faces):
        step = maybe_within(progress, srgb_share + (1 - srgb_share) * f / len(faces),
                            srgb_share + (1 - srgb_share) * (f + 1) / len(faces))
        data, c = blockcodec.encode_level(face, codec, quality=quality, threads=threads, progress=step)
        out.append(data)
        clamped += c
    if counts is not None:
        counts["clamped"] = counts.get("clamped", 0) + clamped
        if codec.hdr:
            counts["negative"] = counts.get("negative", 0) + int(np.count_nonzero(a < 0))
    return b"".join(out)


def decode_blocks(buf: bytes | memoryview, fmt: Format, shape: tuple[int, ...]) -> np.ndarray:
    """Float32 ``shape + (C,)`` from block bytes (inverse of :func:`encode_blocks`, up to the compression)."""
    from bakery.color import srgb_to_linear
    from bakery.io import blockcodec

    codec = blockcodec.CODECS[fmt.block]
    h, w = shape[-2:]
    n = blockcodec.level_bytes(codec, w, h)
    faces = [blockcodec.decode_level(memoryview(buf)[i * n:(i + 1) * n], codec, w, h)
             for i in range(shape[0] if len(shape) == 3 else 1)]
    out = np.stack(faces) if len(shape) == 3 else faces[0]
    if fmt.srgb:
        out[..., :3] = srgb_to_linear(out[..., :3])
    return out


def level_byte_length(fmt: Format, shape: tuple[int, ...]) -> int:
    """Bytes of one level of ``shape`` (``(H, W)`` or ``(6, N, N)``) before supercompression."""
    h, w = shape[-2:]
    faces = shape[0] if len(shape) == 3 else 1
    if fmt.block is not None:
        bx, by = -(-w // 4), -(-h // 4)
        return faces * bx * by * fmt.texel_bytes
    return faces * h * w * fmt.texel_bytes


def encode_texels(a: np.ndarray, fmt: Format, *, counts: dict[str, int] | None = None) -> bytes:
    """Texel bytes (little-endian) of float32 ``(..., C)`` data in an uncompressed ``fmt``, with clamping
    counted into ``counts["clamped"]``."""
    from bakery.color import linear_to_srgb

    a = fit_channels(np.asarray(a, dtype=np.float32), fmt.channels)
    clamped = 0
    if fmt.kind == "unorm":
        clamped = int(np.count_nonzero((a < 0) | (a > 1)))  # before the sRGB curve, which clips colour
        if fmt.srgb:
            a = a.copy()
            a[..., :3] = linear_to_srgb(np.clip(a[..., :3], 0.0, 1.0))
        top = (1 << fmt.bits) - 1
        q = np.rint(np.clip(a, 0.0, 1.0) * np.float32(top))
        data = q.astype("<u1" if fmt.bits == 8 else "<u2")
    elif fmt.kind == "sfloat":
        if fmt.bits == 16:
            clamped = int(np.count_nonzero(np.abs(a) > HALF_MAX))
            data = np.clip(a, -HALF_MAX, HALF_MAX).astype("<f2")
        else:
            data = a.astype("<f4")
    elif fmt.kind == "b10g11r11":
        lim = np.array(B10G11R11_MAX, dtype=np.float32)
        clamped = int(np.count_nonzero((a < 0) | (a > lim)))
        data = pack_b10g11r11(np.clip(a, 0.0, lim)).astype("<u4")
    else:
        clamped = int(np.count_nonzero((a < 0) | (a > RGB9E5_MAX)))
        data = pack_rgb9e5(a).astype("<u4")
    if counts is not None:
        counts["clamped"] = counts.get("clamped", 0) + clamped
    return np.ascontiguousarray(data).tobytes()


def decode_texels(buf: bytes | memoryview, fmt: Format, shape: tuple[int, ...]) -> np.ndarray:
    """Float32 ``shape + (C,)`` from texel bytes (inverse of :func:`encode_texels`)."""
    from bakery.color import srgb_to_linear

    n = int(np.prod(shape))
    if fmt.kind == "unorm":
        raw = np.frombuffer(buf, dtype="<u1" if fmt.bits == 8 else "<u2", count=n * fmt.channels)
        out = raw.astype(np.float32) / np.float32((1 << fmt.bits) - 1)
        out = out.reshape(shape + (fmt.channels,))
        if fmt.srgb:
            out[..., :3] = srgb_to_linear(out[..., :3])
        return out
    if fmt.kind == "sfloat":
        raw = np.frombuffer(buf, dtype="<f2" if fmt.bits == 16 else "<f4", count=n * fmt.channels)
        return raw.astype(np.float32).reshape(shape + (fmt.channels,))
    words = np.frombuffer(buf, dtype="<u4", count=n)
    out = unpack_b10g11r11(words) if fmt.kind == "b10g11r11" else unpack_rgb9e5(words)
    return out.reshape(shape + (3,))


def dfd_samples(fmt: Format) -> list[tuple[int, int, int, int, int, int]]:
    """The DFD samples of ``fmt``: (bitOffset, bitLength, channelId, qualifiers, sampleLower, sampleUpper)."""
    samples: list[tuple[int, int, int, int, int, int]] = []
    if fmt.block is not None:
        # Data Format spec 1.3, section 5.6 (one 64- or 128-bit sample per block part) and the KTX 2.0 spec's
        # rule that an sRGB format's alpha sample is LINEAR. Channel ids: BC1A_COLOR 0, BC3 COLOR 0 / ALPHA 15,
        # BC4 DATA 0, BC5 RED 0 / GREEN 1, BC6H COLOR 0, BC7 COLOR 0. UNORM bounds 0 .. UINT32_MAX; BC6H
        # unsigned float bounds 0.0 .. 1.0 (float bits; from memory, matching the Khronos example descriptors).
        b = fmt.block
        if b == "bc1":
            samples.append((0, 64, 0, 0, 0, U32_MAX))
        elif b == "bc3":
            samples.append((0, 64, CH_A, Q_LINEAR if fmt.srgb else 0, 0, U32_MAX))
            samples.append((64, 64, 0, 0, 0, U32_MAX))
        elif b == "bc4":
            samples.append((0, 64, 0, 0, 0, U32_MAX))
        elif b == "bc5":
            samples.append((0, 64, CH_R, 0, 0, U32_MAX))
            samples.append((64, 64, CH_G, 0, 0, U32_MAX))
        elif b == "bc6h":
            samples.append((0, 128, 0, Q_FLOAT, 0, F32_ONE))
        else:
            samples.append((0, 128, 0, 0, 0, U32_MAX))
    elif fmt.kind == "unorm":
        ids = {1: [CH_R], 2: [CH_R, CH_G], 4: [CH_R, CH_G, CH_B, CH_A]}[fmt.channels]
        top = (1 << fmt.bits) - 1
        for i, ch in enumerate(ids):
            q = Q_LINEAR if (fmt.srgb and ch == CH_A) else 0
            samples.append((i * fmt.bits, fmt.bits, ch, q, 0, top))
    elif fmt.kind == "sfloat":
        ids = {2: [CH_R, CH_G], 4: [CH_R, CH_G, CH_B, CH_A]}[fmt.channels]
        for i, ch in enumerate(ids):
            samples.append((i * fmt.bits, fmt.bits, ch, Q_FLOAT | Q_SIGNED, F32_MINUS_ONE, F32_ONE))
    elif fmt.kind == "b10g11r11":
        for off, bits, ch in ((0, 11, CH_R), (11, 11, CH_G), (22, 10, CH_B)):
            samples.append((off, bits, ch, Q_FLOAT, 0, F32_ONE))
    else:  # E5B9G9R9: mantissa then exponent per channel, ref. [2] example
        for off, ch in ((0, CH_R), (9, CH_G), (18, CH_B)):
            samples.append((off, 9, ch, 0, 0, 8448))
            samples.append((27, 5, ch, Q_EXPONENT, 15, 31))
    return samples


def dfd_bytes(fmt: Format) -> bytes:
    """The Data Format Descriptor: dfdTotalSize then one basic descriptor block (ref. [2]).

    Supercompressed files carry the same descriptor: the KTX 2.0 specification's section "DFD for
    Supercompressed Data" (document revision 5 draft text) keeps ``bytesPlane0`` of the pre-deflation data; earlier
    revisions asked for 0, and the reader accepts both.
    """
    samples = dfd_samples(fmt)
    block_size = 24 + 16 * len(samples)
    transfer = KHR_DF_TRANSFER_SRGB if fmt.srgb else KHR_DF_TRANSFER_LINEAR
    model = BLOCK_MODELS[fmt.block] if fmt.block else KHR_DF_MODEL_RGBSDA
    dims = 3 if fmt.block else 0  # texel block 4x4x1x1 (or 1x1x1x1), stored minus one
    out = bytearray()
    out += struct.pack("<I", 4 + block_size)
    out += struct.pack("<I", 0)  # vendorId 0 (Khronos), descriptorType 0 (basic)
    out += struct.pack("<HH", KHR_DF_VERSION, block_size)
    out += struct.pack("<BBBB", model, KHR_DF_PRIMARIES_BT709, transfer, 0)
    out += struct.pack("<BBBB", dims, dims, 0, 0)
    out += struct.pack("<8B", fmt.texel_bytes, 0, 0, 0, 0, 0, 0, 0)
    for off, bits, ch, q, lo, hi in samples:
        out += struct.pack("<I", off | ((bits - 1) << 16) | (ch << 24) | (q << 28))
        out += struct.pack("<I", 0)  # sample position 0,0,0,0
        out += struct.pack("<II", lo, hi)
    return bytes(out)


def check_dfd(data: bytes | memoryview, off: int, length: int, fmt: Format, supercompressed: bool,
              where: str | os.PathLike | None = None) -> None:
    """Refuse a DFD that is malformed or does not describe ``fmt`` (KTX 2.0 spec section 3.10: the DFD must
    match vkFormat): colour model, transfer function, texel block size, bytesPlane0 (0 also accepted for
    supercompressed data, the rule of earlier revisions), and every sample's offset, length, channel and
    qualifiers. Primaries, flags and sample bounds are not checked."""
    def bad(why: str) -> BakeryError:
        return BakeryError(f"KTX2 Data Format Descriptor is invalid for {fmt.name}: {why}", where)

    if length < 4 + 24:
        raise bad(f"{length} bytes, a basic descriptor block needs at least 28")
    (total,) = struct.unpack_from("<I", data, off)
    if total != length:
        raise bad(f"dfdTotalSize {total} but dfdByteLength {length}")
    vendor_type, version, block_size = struct.unpack_from("<IHH", data, off + 4)
    if vendor_type != 0 or version != KHR_DF_VERSION:
        raise bad("not a Khronos basic descriptor block, version 2")
    if block_size < 24 or (block_size - 24) % 16 or 4 + block_size > length:
        raise bad(f"descriptorBlockSize {block_size}")
    model, _, transfer, _ = struct.unpack_from("<4B", data, off + 12)
    dims = tuple(struct.unpack_from("<4B", data, off + 16))
    planes = tuple(struct.unpack_from("<8B", data, off + 20))
    want = dfd_bytes(fmt)
    w_model, _, w_transfer, _ = struct.unpack_from("<4B", want, 12)
    if model != w_model:
        raise bad(f"colorModel {model}, expected {w_model}")
    if transfer != w_transfer:
        raise bad(f"transferFunction {transfer}, expected {w_transfer} "
                  f"({'sRGB' if w_transfer == KHR_DF_TRANSFER_SRGB else 'linear'})")
    if dims != tuple(want[16:20]):
        raise bad(f"texelBlockDimension {dims}")
    if planes[1:] != (0,) * 7 or not (planes[0] == fmt.texel_bytes or (supercompressed and planes[0] == 0)):
        raise bad(f"bytesPlane {planes}")
    samples = [struct.unpack_from("<I", data, off + 28 + 16 * i)[0] for i in range((block_size - 24) // 16)]
    w_samples = [struct.unpack_from("<I", want, 28 + 16 * i)[0] for i in range((len(want) - 28) // 16)]
    if samples != w_samples:
        raise bad(f"{len(samples)} sample(s) that do not match the format's channels")


def kv_bytes(key_values: dict[str, bytes | str]) -> bytes:
    """Key/value data: entries sorted by key bytes, each ``length, key NUL value`` padded to 4 bytes."""
    out = bytearray()
    for key in sorted(key_values, key=lambda k: k.encode("utf-8")):
        v = key_values[key]
        value = (v.encode("utf-8") + b"\0") if isinstance(v, str) else bytes(v)
        kv = key.encode("utf-8") + b"\0" + value
        out += struct.pack("<I", len(kv)) + kv
        out += b"\0" * (-len(kv) % 4)
    return bytes(out)


def _align(n: int, a: int) -> int:
    return (n + a - 1) // a * a


def mip_count(size: int) -> int:
    """Levels of a full mip chain down to 1 texel: ``floor(log2(size)) + 1``."""
    return int(size).bit_length()


def check_levels(levels: list[np.ndarray], cubemap: bool) -> tuple[int, int]:
    """(width, height) of level 0 after checking the chain's shapes (each level half the one before)."""
    if not levels:
        raise BakeryError("a KTX2 texture needs at least one level")
    first = levels[0]
    if cubemap:
        if first.ndim != 4 or first.shape[0] != 6 or first.shape[1] != first.shape[2]:
            raise BakeryError(f"cubemap levels must be (6, N, N, C); got {first.shape}")
        h, w = first.shape[1], first.shape[2]
    else:
        if first.ndim != 3:
            raise BakeryError(f"2D levels must be (H, W, C); got {first.shape}")
        h, w = first.shape[0], first.shape[1]
    for i, lv in enumerate(levels):
        want = (max(1, h >> i), max(1, w >> i))
        got = lv.shape[1:3] if cubemap else lv.shape[:2]
        if tuple(got) != want or lv.ndim != first.ndim:
            raise BakeryError(f"level {i} is {lv.shape}; expected size {want}")
    if len(levels) > mip_count(max(h, w)):
        raise BakeryError("more levels than a full mip chain")
    return int(w), int(h)


def encode_levels(levels: list[np.ndarray], fmt: Format, *, quality: str = "fast",
                  threads: int | None = None, counts: dict[str, int] | None = None,
                  progress: Progress | None = None) -> list[bytes]:
    """The bytes of each level (level 0 first) before supercompression. ``progress(fraction, label)`` rises
    to 1 in proportion to the texels done (block formats: strip by strip; others: level by level)."""
    sizes = np.cumsum([0] + [lv.size for lv in levels]) / max(1, sum(lv.size for lv in levels))
    out = []
    for i, lv in enumerate(levels):
        step = maybe_within(progress, float(sizes[i]), float(sizes[i + 1]))
        if fmt.block is not None:
            out.append(encode_blocks(lv, fmt, quality=quality, threads=threads, counts=counts, progress=step))
        else:
            out.append(encode_texels(lv, fmt, counts=counts))
            if step is not None:
                step(1.0, "encoding")
    return out


def zstd_levels(payloads: list[bytes], level: int) -> list[bytes]:
    """Each level deflated on its own with Zstandard (KTX 2.0 spec, "Zstandard" supercompression scheme)."""
    import imagecodecs

    if not 1 <= int(level) <= 22:
        raise BakeryError(f"zstd level must be 1 to 22; got {level}")
    return [bytes(imagecodecs.zstd_encode(p, level=int(level))) for p in payloads]


def assemble_ktx2(payloads: list[bytes], fmt: Format, width: int, height: int, *, cubemap: bool,
                  key_values: dict[str, bytes | str] | None = None, writer_keys: bool = True,
                  zstd: int | None = None) -> bytes:
    """A KTX2 file from level bytes (level 0 first). With ``zstd`` (a Zstandard level, 1-22) every level is
    deflated on its own, supercompressionScheme is 2, the level index records the compressed and the
    uncompressed byte lengths, and levels are not padded (alignment 1; KTX 2.0 spec section 3.12 "mipPadding"
    applies to uncompressed schemes only)."""
    from bakery._version import __version__

    kv: dict[str, bytes | str] = (
        {"KTXorientation": "rd", "KTXwriter": f"bakery {__version__}"} if writer_keys else {})
    kv.update(key_values or {})
    dfd = dfd_bytes(fmt)
    kvd = kv_bytes(kv)
    n = len(payloads)
    dfd_off = HEADER_SIZE + LEVEL_INDEX_ENTRY * n
    kvd_off = dfd_off + len(dfd)
    pos = kvd_off + len(kvd)
    stored = payloads if zstd is None else zstd_levels(payloads, zstd)
    align = math.lcm(fmt.texel_bytes, 4) if zstd is None else 1
    offsets = [0] * n
    body = bytearray()
    for i in reversed(range(n)):  # smallest level first in the file
        pad = _align(pos, align) - pos
        body += b"\0" * pad
        pos += pad
        offsets[i] = pos
        body += stored[i]
        pos += len(stored[i])
    scheme = SCHEME_NONE if zstd is None else SCHEME_ZSTD
    head = bytearray(IDENTIFIER)
    head += struct.pack("<9I", fmt.vk, fmt.type_size, width, height, 0, 0, 6 if cubemap else 1, n, scheme)
    head += struct.pack("<4I2Q", dfd_off, len(dfd), kvd_off if kvd else 0, len(kvd), 0, 0)
    for i in range(n):
        head += struct.pack("<3Q", offsets[i], len(stored[i]), len(payloads[i]))
    return bytes(head) + dfd + kvd + bytes(body)


def encode_ktx2(levels: list[np.ndarray], fmt: Format | str, *, cubemap: bool,
                key_values: dict[str, bytes | str] | None = None, writer_keys: bool = True,
                quality: str = "fast", zstd: int | None = None, threads: int | None = None
                ) -> tuple[bytes, int]:
    """The bytes of a KTX2 file holding ``levels``, and the number of clamped samples.

    Parameters
    ----------
    levels : list of ndarray
        Level 0 first, each half the size of the one before (rounded down, at least 1).
        2D: ``(H, W, C)``; cubemap: ``(6, N, N, C)``. Channels are fitted to the format
        (:func:`fit_channels`; BC4 and BC5 refuse more channels than they store).
    fmt : Format or str
    cubemap : bool
    key_values : dict, optional
        Extra key/value entries (str values are stored NUL-terminated, bytes as given).
    writer_keys : bool
        Add "KTXorientation" = "rd" and "KTXwriter" = "bakery <version>" (default), unless given.
    quality : {"fast", "balanced", "best"}
        Block encoder profile (block-compressed formats only; see :mod:`bakery.io.blockcodec`).
    zstd : int, optional
        Zstandard level (1-22) for supercompression; None writes levels as they are.
    threads : int, optional
        Block encoder threads (None: one per core). The bytes do not depend on it.
    """
    fmt = get_format(fmt) if isinstance(fmt, str | int) else fmt
    w, h = check_levels(levels, cubemap)
    counts: dict[str, int] = {}
    payloads = encode_levels(levels, fmt, quality=quality, threads=threads, counts=counts)
    data = assemble_ktx2(payloads, fmt, w, h, cubemap=cubemap, key_values=key_values, writer_keys=writer_keys,
                         zstd=zstd)
    return data, counts.get("clamped", 0)


def warn_clamped(path: str | os.PathLike, fmt: Format, counts: dict[str, int], stacklevel: int = 3) -> None:
    """One :class:`BakeryWarning` counting the samples that were clamped to the format's range."""
    clamped = counts.get("clamped", 0)
    if not clamped:
        return
    if fmt.block == "bc6h":
        neg = counts.get("negative", 0)
        warnings.warn(f"{path}: {clamped} sample(s) outside the range of bc6h (0 .. 65504) were clamped"
                      f"{f', {neg} of them negative (BC6H unsigned stores none)' if neg else ''}",
                      BakeryWarning, stacklevel=stacklevel)
    elif fmt.block is not None:
        warnings.warn(f"{path}: {clamped} sample(s) outside [0, 1] were clamped for {fmt.short_name}",
                      BakeryWarning, stacklevel=stacklevel)
    else:
        warnings.warn(f"{path}: {clamped} sample(s) outside the range of {fmt.name} were clamped; "
                      "use R32G32B32A32_SFLOAT (rgba32f) to keep them", BakeryWarning, stacklevel=stacklevel)


def write_ktx2(path: str | os.PathLike, levels: list[np.ndarray], fmt: Format | str = "R16G16B16A16_SFLOAT",
               *, cubemap: bool, key_values: dict[str, bytes | str] | None = None, quality: str = "fast",
               zstd: int | None = None, threads: int | None = None,
               progress: Progress | None = None) -> Path:
    """Write a KTX2 file atomically (see :func:`encode_ktx2`); warn with a count when values were clamped
    to the format's range. ``progress(fraction, label)`` rises to 1 as levels are encoded (block formats: per
    strip of block rows) and written. For block compression with a quality report, see
    :func:`bakery.io.texcompress.write_compressed_ktx2`."""
    from bakery.io.atomic import atomic_output

    path = Path(path)
    fmt = get_format(fmt) if isinstance(fmt, str | int) else fmt
    for lv in levels:
        if not np.all(np.isfinite(lv)):
            raise BakeryError("cannot store NaN or Inf values in a KTX2 texture", path)
    if fmt.block is not None:
        check_block_channels(levels[0].shape[-1], fmt, path)
    w, h = check_levels(levels, cubemap)
    counts: dict[str, int] = {}
    payloads = encode_levels(levels, fmt, quality=quality, threads=threads, counts=counts,
                             progress=maybe_within(progress, 0.0, 0.9))
    data = assemble_ktx2(payloads, fmt, w, h, cubemap=cubemap, key_values=key_values, zstd=zstd)
    warn_clamped(path, fmt, counts)
    with atomic_output(path) as tmp:
        tmp.write_bytes(data)
    if progress is not None:
        progress(1.0, "writing")
    return path


# ------------------------------------------------------------------------------------------- decoding


def parse_header(data: bytes | memoryview, where: str | os.PathLike | None = None) -> Ktx2Header:
    """Check the identifier, header, index and level index of KTX2 bytes; every offset is bounds-checked."""
    size = len(data)
    if size < 12 or bytes(data[:12]) != IDENTIFIER:
        raise BakeryError("not a KTX2 file (wrong identifier)", where)
    if size < HEADER_SIZE:
        raise BakeryError(f"KTX2 file is truncated ({size} bytes, header needs {HEADER_SIZE})", where)
    vk, type_size, w, h, d, layers, faces, levels, scheme = struct.unpack_from("<9I", data, 12)
    dfd_off, dfd_len, kvd_off, kvd_len, sgd_off, sgd_len = struct.unpack_from("<4I2Q", data, 48)
    n = max(levels, 1)
    if n > 32:
        raise BakeryError(f"KTX2 header is inconsistent: levelCount {levels}", where)
    end_index = HEADER_SIZE + LEVEL_INDEX_ENTRY * n
    if size < end_index:
        raise BakeryError("KTX2 file is truncated (level index incomplete)", where)
    index = tuple(struct.unpack_from("<3Q", data, HEADER_SIZE + LEVEL_INDEX_ENTRY * i) for i in range(n))
    for name, off, length in (("DFD", dfd_off, dfd_len), ("key/value data", kvd_off, kvd_len),
                              ("supercompression data", sgd_off, sgd_len)):
        if length and (off < end_index or off + length > size):
            raise BakeryError(f"KTX2 file is truncated or corrupt ({name} at {off}+{length} is outside the "
                              f"{size}-byte file)", where)
    for i, (off, length, _) in enumerate(index):
        if off + length > size:
            raise BakeryError(f"KTX2 file is truncated (level {i} needs bytes up to {off + length}, file has "
                              f"{size})", where)
    return Ktx2Header(vk, type_size, w, h, d, layers, faces, levels, scheme, (dfd_off, dfd_len),
                      (kvd_off, kvd_len), (sgd_off, sgd_len), index)


def parse_key_values(data: bytes | memoryview, off: int, length: int,
                     where: str | os.PathLike | None = None) -> dict[str, bytes]:
    out: dict[str, bytes] = {}
    pos, end = off, off + length
    while pos + 4 <= end:
        (n,) = struct.unpack_from("<I", data, pos)
        pos += 4
        if n == 0 or pos + n > end:
            raise BakeryError("KTX2 key/value data is corrupt (entry runs past its end)", where)
        entry = bytes(data[pos:pos + n])
        nul = entry.find(b"\0")
        if nul < 0:
            raise BakeryError("KTX2 key/value data is corrupt (key without terminator)", where)
        out[entry[:nul].decode("utf-8", "replace")] = entry[nul + 1:]
        pos += _align(n, 4)
    return out


def check_level_placement(hd: Ktx2Header, fmt: Format, where: str | os.PathLike | None = None) -> None:
    """Refuse level data that the KTX 2.0 spec forbids: levels that start inside the header, index, DFD,
    key/value or supercompression data (section 3: the level array follows them), that overlap, that are not
    aligned to lcm(texel block size, 4) without supercompression (section 3.12), or whose
    uncompressedByteLength differs from byteLength without supercompression (section 3.9)."""
    n = max(hd.levels, 1)
    meta_end = HEADER_SIZE + LEVEL_INDEX_ENTRY * n
    for off, length in (hd.dfd, hd.kvd, hd.sgd):
        if length:
            meta_end = max(meta_end, off + length)
    align = math.lcm(fmt.texel_bytes, 4)
    spans = []
    for i, (off, length, raw) in enumerate(hd.level_index[:n]):
        if off < meta_end:
            raise BakeryError(f"KTX2 level {i} data at byte {off} lies inside the header and metadata "
                              f"(which end at byte {meta_end})", where)
        if hd.supercompression == SCHEME_NONE:
            if off % align:
                raise BakeryError(f"KTX2 level {i} at byte {off} is not aligned to {align} bytes", where)
            if raw != length:
                raise BakeryError(f"KTX2 level {i}: uncompressedByteLength {raw} differs from byteLength "
                                  f"{length} without supercompression", where)
        spans.append((off, off + length, i))
    spans.sort()
    for (_, end0, i0), (start1, _, i1) in zip(spans, spans[1:], strict=False):
        if start1 < end0:
            raise BakeryError(f"KTX2 levels {i0} and {i1} overlap", where)


def _inflate(data: bytes | memoryview, off: int, length: int, want: int, level: int,
             where: str | os.PathLike | None) -> bytes:
    import imagecodecs

    try:
        out = imagecodecs.zstd_decode(bytes(memoryview(data)[off:off + length]), out=bytearray(want))
    except Exception as exc:  # imagecodecs raises its own error types for corrupt frames
        raise BakeryError(f"KTX2 level {level}: Zstandard data is corrupt ({exc})", where) from None
    if len(out) != want:
        raise BakeryError(f"KTX2 level {level} inflates to {len(out)} bytes; it needs {want}", where)
    return bytes(out)


def decode_ktx2(data: bytes | memoryview, where: str | os.PathLike | None = None) -> Ktx2Texture:
    """Decode KTX2 bytes written in one of :data:`FORMATS` (2D or cubemap; no supercompression or Zstandard).
    Block-compressed levels are decoded to float32 (``imagecodecs.bcn_decode``)."""
    hd = parse_header(data, where)
    fmt = FORMATS_BY_VK.get(hd.vk_format)
    if fmt is None:
        raise BakeryError(f"KTX2 vkFormat {hd.vk_format} is not supported; supported: "
                          + ", ".join(f"{f.name} ({f.vk})" for f in FORMATS.values()), where)
    if hd.supercompression not in (SCHEME_NONE, SCHEME_ZSTD):
        raise BakeryError(f"KTX2 supercompression scheme {hd.supercompression} is not supported (only none "
                          "and Zstandard, scheme 2)", where)
    if hd.depth:
        raise BakeryError("3D KTX2 textures are not supported", where)
    if hd.layers:
        raise BakeryError("KTX2 array textures are not supported", where)
    if hd.faces not in (1, 6):
        raise BakeryError(f"KTX2 header is inconsistent: faceCount {hd.faces} (must be 1 or 6)", where)
    if hd.width == 0 or hd.height == 0:
        raise BakeryError("KTX2 header is inconsistent: zero width or height (1D textures are not supported)",
                          where)
    cube = hd.faces == 6
    if cube and hd.width != hd.height:
        raise BakeryError(f"KTX2 header is inconsistent: cubemap faces are {hd.width}x{hd.height}, "
                          "not square", where)
    if hd.levels > mip_count(max(hd.width, hd.height)):
        raise BakeryError(f"KTX2 header is inconsistent: {hd.levels} levels for a {hd.width}x{hd.height} "
                          "texture", where)
    if hd.type_size != fmt.type_size:
        raise BakeryError(f"KTX2 header is inconsistent: typeSize {hd.type_size} for {fmt.name}", where)
    if hd.width > 16384 or hd.height > 16384:
        raise BakeryError(f"KTX2 texture is {hd.width}x{hd.height}; at most 16384 per side is read", where)
    check_dfd(data, *hd.dfd, fmt, hd.supercompression != SCHEME_NONE, where)
    check_level_placement(hd, fmt, where)
    levels = []
    for i, (off, length, raw) in enumerate(hd.level_index[: max(hd.levels, 1)]):
        h, w = max(1, hd.height >> i), max(1, hd.width >> i)
        shape = (6, h, w) if cube else (h, w)
        want = level_byte_length(fmt, shape)
        if hd.supercompression == SCHEME_ZSTD:
            if raw != want:
                raise BakeryError(f"KTX2 level {i}: uncompressedByteLength {raw}; a {w}x{h}"
                                  f"{' cubemap' if cube else ''} level of {fmt.name} needs {want}", where)
            buf: bytes | memoryview = _inflate(data, off, length, want, i, where)
        else:
            if length != want:
                raise BakeryError(f"KTX2 level {i} holds {length} bytes; a {w}x{h}"
                                  f"{' cubemap' if cube else ''} level of {fmt.name} needs {want}", where)
            buf = memoryview(data)[off:off + length]
        if fmt.block is not None:
            levels.append(decode_blocks(buf, fmt, shape))
        else:
            levels.append(decode_texels(buf, fmt, shape))
    kv = parse_key_values(data, *hd.kvd, where) if hd.kvd[1] else {}
    return Ktx2Texture(levels, fmt, cube, kv, supercompression=hd.supercompression)


def read_ktx2_header(path: str | os.PathLike) -> Ktx2Header:
    """Header fields of a KTX2 file (for ``bakery info``)."""
    path = Path(path)
    data = _read_bytes(path)
    return parse_header(data, path)


def read_ktx2(path: str | os.PathLike) -> Ktx2Texture:
    """Read a KTX2 file; malformed files raise :class:`BakeryError` naming the problem."""
    path = Path(path)
    return decode_ktx2(_read_bytes(path), path)


def _read_bytes(path: Path) -> bytes:
    if not path.exists():
        raise BakeryError("file not found", path)
    if not path.is_file():
        raise BakeryError("not a regular file", path)
    try:
        return path.read_bytes()
    except OSError as exc:
        raise BakeryError(f"cannot read file ({exc.strerror})", path) from None
