"""Mip levels of planar textures: level sizes and the area-weighted box filter.

Level sizes follow the OpenGL / Vulkan / KTX 2.0 rule ``max(1, floor(size / 2**level))`` per axis, to a 1x1
last level. The box filter averages each output texel's exact footprint in the level above: for an even axis
the 2-tap mean, for an odd axis (2m+1 -> m) three taps with weights ``(1 - j/m, 1, (j+1)/m) / (2 + 1/m)``
(the footprint of texel j is ``[j * s, (j+1) * s)`` with ``s = (2m+1)/m``), so odd and non-square sizes keep
every texel's weight and the mean of the map.

This is the one mip module of the project: normal-map chains (:mod:`bakery.normals.mips`), roughness chains
(:mod:`bakery.roughness.antialias`) and colour maps use its sizes and filters.

References
----------
.. [1] Khronos Group, "KTX File Format Specification 2.0", section 4.1 (levelCount, level sizes).
"""

from __future__ import annotations

import numpy as np

from bakery.errors import BakeryError
from bakery.progress import Progress, no_progress, row_bands


def mip_count(width: int, height: int) -> int:
    """Levels in a full chain down to 1x1: ``floor(log2(max(width, height))) + 1``."""
    return int(max(width, height)).bit_length()


def mip_size(width: int, height: int, level: int) -> tuple[int, int]:
    """(width, height) of ``level``: ``max(1, floor(size / 2**level))`` per axis."""
    return max(1, width >> level), max(1, height >> level)


def _halve_axis(a: np.ndarray, axis: int, j0: int = 0, j1: int | None = None) -> np.ndarray:
    """Area-weighted box reduction of one axis to ``max(1, n // 2)`` (float32 in, float32 out); with ``j0``,
    ``j1`` only those output positions along ``axis`` 0 (``a`` still the whole input)."""
    n = a.shape[axis]
    if n == 1:
        return a[j0:j1] if axis == 0 else a
    a = np.moveaxis(a, axis, 0)
    m = n // 2
    j1 = m if j1 is None else j1
    if n % 2 == 0:
        out = (a[2 * j0:2 * j1:2] + a[2 * j0 + 1:2 * j1:2]) * np.float32(0.5)
    else:
        j = np.arange(j0, j1, dtype=np.float64)
        shape = (j1 - j0,) + (1,) * (a.ndim - 1)
        w0 = ((1.0 - j / m) / (2.0 + 1.0 / m)).astype(np.float32).reshape(shape)
        w1 = np.float32(1.0 / (2.0 + 1.0 / m))
        w2 = (((j + 1) / m) / (2.0 + 1.0 / m)).astype(np.float32).reshape(shape)
        out = a[2 * j0:2 * j1:2] * w0 + a[2 * j0 + 1:2 * j1 + 1:2] * w1 + a[2 * j0 + 2:2 * j1 + 1:2] * w2
    return np.moveaxis(out, 0, axis)


#: Output rows :func:`downsample` makes per block (common practice: a few MB of input per block, so large maps
#: stay in the caches and report progress as they go).
DOWNSAMPLE_BLOCK_TEXELS = 1 << 19


def downsample(v: np.ndarray, progress: Progress | None = None) -> np.ndarray:
    """One mip step of (H, W, C) float32 data: area-weighted box on both axes (see the module notes), in
    blocks of output rows; ``progress(fraction, "reducing")`` after each block, rising to 1."""
    v = np.asarray(v, np.float32)
    h, w = v.shape[:2]
    oh, ow = max(1, h // 2), max(1, w // 2)
    out = np.empty((oh, ow) + v.shape[2:], np.float32)
    for j0, j1 in row_bands(oh, w, DOWNSAMPLE_BLOCK_TEXELS):
        out[j0:j1] = _halve_axis(_halve_axis(v, 0, j0, j1), 1)
        if progress is not None:
            progress(j1 / oh, "reducing")
    return out


def level_count(width: int, height: int, levels: int | None) -> int:
    """The number of mip levels to make: all of them for None, else ``levels`` checked against the size."""
    full = mip_count(width, height)
    levels = full if levels is None else int(levels)
    if not 1 <= levels <= full:
        raise BakeryError(f"a {width}x{height} map has 1 to {full} mip levels; got {levels}")
    return levels


# Colour maps -------------------------------------------------------------------------------------------------

#: Filters of :func:`color_mips`: name -> (support half-width in texels of the smaller level, source).
COLOR_KERNELS: dict[str, tuple[float, str]] = {
    "box": (0.5, "area-weighted box (the exact footprint, see the module notes)"),
    "kaiser": (3.0, "sinc windowed by Kaiser's I0 window, beta = 4 (Kaiser 1966; Kaiser & Schafer 1980)"),
    "lanczos3": (3.0, "Lanczos-3, sinc(x) sinc(x/3) for |x| < 3 (Duchon 1979)"),
}

#: Kaiser window shape parameter of the "kaiser" filter (common practice: about 45 dB of stop-band attenuation
#: by Kaiser's design formula, from memory).
KAISER_BETA = 4.0

#: Degree of the polynomials that carry the sRGB curves (decode within 7.6e-7 of the IEC 61966-2-1 formula,
#: encode within 3.2e-7, in float32: tests/test_mips.py). Polynomials, unlike tables, run 16 lanes at a time.
SRGB_DEGREE = 8


def _srgb_polynomials() -> np.ndarray:
    """Power-basis coefficients (constant first) in ``t`` of the two sRGB curve branches, fitted by Chebyshev
    interpolation in float64 (common practice), and the affine maps to t, as a float32 (4, 10) array:

    - decode: for ``C > 0.04045``, ``((C + 0.055)/1.055)^2.4 = z^9.6`` with ``z = ((C + 0.055)/1.055)^(1/4)``
      (two square roots), z in [z0, 1];
    - encode: for ``L > 0.0031308``, ``1.055 L^(1/2.4) - 0.055`` with ``z = L^(1/8)`` (three square roots).

    In these variables the curves are smooth far from their branch point at 0, so degree 8 reaches float32.
    Rows: decode coefficients, decode (mid, scale), encode coefficients, encode (mid, scale); t = (z - mid) * scale.
    """
    from numpy.polynomial import chebyshev

    def fit(f, lo):
        t = np.cos(np.pi * (np.arange(400) + 0.5) / 400)
        return chebyshev.cheb2poly(chebyshev.chebfit(t, f(lo + (t + 1) / 2 * (1 - lo)), SRGB_DEGREE)), lo

    dec, dlo = fit(lambda z: z ** 9.6, ((0.04045 + 0.055) / 1.055) ** 0.25)
    enc, elo = fit(lambda z: 1.055 * z ** (8 / 2.4) - 0.055, 0.0031308 ** 0.125)
    out = np.zeros((4, SRGB_DEGREE + 2))
    out[0, :SRGB_DEGREE + 1] = dec
    out[1, :2] = ((dlo + 1) / 2, 2 / (1 - dlo))
    out[2, :SRGB_DEGREE + 1] = enc
    out[3, :2] = ((elo + 1) / 2, 2 / (1 - elo))
    return out.astype(np.float32)


def _kernel_weights(name: str, x: np.ndarray) -> np.ndarray:
    """The filter ``name`` at offsets ``x`` (in texels of the smaller level)."""
    if name == "lanczos3":
        return np.where(np.abs(x) < 3.0, np.sinc(x) * np.sinc(x / 3.0), 0.0)
    if name == "kaiser":
        r = COLOR_KERNELS["kaiser"][0]
        inside = np.clip(1.0 - (x / r) ** 2, 0.0, None)
        return np.where(np.abs(x) < r, np.sinc(x) * np.i0(KAISER_BETA * np.sqrt(inside)) / np.i0(KAISER_BETA), 0.0)
    raise AssertionError(name)


def _halve_windowed(a: np.ndarray, name: str, edges: str) -> np.ndarray:
    """``a`` (H, W, C), both sides even, halved on both axes with the windowed-sinc filter ``name``: what
    :func:`_resample_axis` gives for n = 2m, where every output texel sees the same taps (offsets +-1/2, +-3/2 ...
    input texels from its centre), as one separable filter of the padded map sampled at every second texel."""
    import cv2

    from bakery.edges import pad

    half = int(round(2 * COLOR_KERNELS[name][0]))  # taps at -half + 1/2 .. half - 1/2
    w = _kernel_weights(name, (np.arange(2 * half) - half + 0.5) / 2.0)
    k = (w / w.sum()).astype(np.float32)
    h2, w2 = a.shape[0] // 2, a.shape[1] // 2
    # output j = sum_t k[t] a[2j - half + 1 + t]; padded by half, that is P[2j + 1 + t], OpenCV's correlation
    # with the anchor at the first tap, read at rows and columns 1, 3, 5 ...
    f = cv2.sepFilter2D(pad(a, half, edges), -1, k, k, anchor=(0, 0), borderType=cv2.BORDER_CONSTANT)
    if f.ndim == 2:
        f = f[:, :, None]
    return np.ascontiguousarray(f[1:2 * h2:2, 1:2 * w2:2])


def _resample_axis(a: np.ndarray, axis: int, m: int, name: str, edges: str) -> np.ndarray:
    """Reduce ``axis`` of ``a`` from n to m texels with the windowed-sinc filter ``name``, widened by the scale
    n/m: output texel j is centred at input coordinate ``(j + 0.5) n/m - 0.5``; taps past the border fold back
    by ``edges``; weights normalised to sum 1 per output texel."""
    from bakery.edges import edge_index

    n = a.shape[axis]
    if n == m:
        return a
    scale = n / m
    radius = COLOR_KERNELS[name][0] * scale
    centre = (np.arange(m) + 0.5) * scale - 0.5
    first = np.floor(centre - radius).astype(np.int64) + 1
    taps = int(np.ceil(2 * radius)) + 1
    idx = first[:, None] + np.arange(taps)[None, :]
    w = _kernel_weights(name, (idx - centre[:, None]) / scale)
    w /= w.sum(axis=1, keepdims=True)
    lo = int(idx.min())
    fold = edge_index(lo, int(idx.max()) + 1, n, edges)
    idx = fold[idx - lo]
    a = np.ascontiguousarray(np.moveaxis(a, axis, 0))  # whole rows per tap: contiguous copies, not strides
    shape = (m,) + (1,) * (a.ndim - 1)
    out = np.zeros((m,) + a.shape[1:], np.float32)
    for t in range(taps):
        out += a[idx[:, t]] * w[:, t].astype(np.float32).reshape(shape)
    return np.moveaxis(out, 0, axis)


def _horner8(p, t):
    """p[0] + p[1] t + ... + p[8] t^8, written out (a loop here kept the caller from vectorising)."""
    v = p[8] * t + p[7]
    v = v * t + p[6]
    v = v * t + p[5]
    v = v * t + p[4]
    v = v * t + p[3]
    v = v * t + p[2]
    v = v * t + p[1]
    return v * t + p[0]


def _decode_flat(x, out, poly, srgb, alpha_mask):
    """``out[k]`` = stored value ``x[k]`` decoded to linear (sRGB, IEC 61966-2-1) unless ``k`` is an alpha
    position (``k & alpha_mask == alpha_mask``, C = 2 or 4; alpha_mask = -1 for none) or ``srgb`` is off.
    Stored values are clipped to [0, 1] first (for sRGB). Returns the sum of ``|x - clip(x, 0, 1)|`` over
    all values: 0 when every value lies in [0, 1], not finite when one is NaN or infinite (one pass that
    vectorises, unlike a running min and max)."""
    off = np.float32(0.0)
    if not srgb:
        for k in range(x.size):
            c = x[k]
            d = c if c > np.float32(0.0) else np.float32(0.0)
            d = d if d < np.float32(1.0) else np.float32(1.0)
            off += abs(c - d)
            out[k] = c
        return off
    p = (poly[0, 0], poly[0, 1], poly[0, 2], poly[0, 3], poly[0, 4], poly[0, 5], poly[0, 6], poly[0, 7],
         poly[0, 8])
    mid = poly[1, 0]
    sc = poly[1, 1]
    for k in range(x.size):
        c = x[k]
        c = c if c > np.float32(0.0) else np.float32(0.0)  # selects, not min/max: these vectorise
        c = c if c < np.float32(1.0) else np.float32(1.0)
        off += abs(x[k] - c)
        z = np.sqrt(np.sqrt((c + np.float32(0.055)) * np.float32(1.0 / 1.055)))
        v = _horner8(p, (z - mid) * sc)
        v = v if c > np.float32(0.04045) else c * np.float32(1.0 / 12.92)
        out[k] = x[k] if (k & alpha_mask) == alpha_mask else v
    return off


def _encode_flat(x, out, inv, poly, srgb, alpha_mask, kscale):
    """Premultiplied linear ``x`` -> stored ``out`` (flat; C channels, alpha last when alpha_mask >= 0; ``inv``
    holds 1/alpha of each value's texel): colour times 1/alpha, clipped to [0, 1] and
    sRGB-encoded (linear: clipped below at 0), alpha times ``kscale`` clipped to [0, 1]."""
    p = (poly[2, 0], poly[2, 1], poly[2, 2], poly[2, 3], poly[2, 4], poly[2, 5], poly[2, 6], poly[2, 7],
         poly[2, 8])
    mid = poly[3, 0]
    sc = poly[3, 1]
    for k in range(x.size):
        c = x[k]
        v = c * inv[k] if alpha_mask >= 0 else c
        v = v if v > np.float32(0.0) else np.float32(0.0)
        if srgb:
            v = v if v < np.float32(1.0) else np.float32(1.0)
            z = np.sqrt(np.sqrt(np.sqrt(v)))
            e = _horner8(p, (z - mid) * sc)
            v = e if v > np.float32(0.0031308) else v * np.float32(12.92)
        if (k & alpha_mask) == alpha_mask:
            v = c * kscale
            v = v if v > np.float32(0.0) else np.float32(0.0)
            v = v if v < np.float32(1.0) else np.float32(1.0)
        out[k] = v


def _decode_rows(src, dst, i0, i1, poly, srgb, alpha_mask, box, buf):
    """Rows ``i0 <= i < i1`` of ``dst``: stored ``src`` decoded and premultiplied by alpha; with ``box`` each
    dst texel is the mean of a 2x2 block (even sizes). ``buf``: scratch for two decoded source rows. Returns
    the sum of the clipping of ``src`` to [0, 1] (see :func:`_decode_flat`)."""
    W = src.shape[1]
    C = src.shape[2]
    q = np.float32(0.25)
    rows = 2 if box else 1
    off = np.float32(0.0)
    for i in range(i0, i1):
        flat = src[rows * i:rows * i + rows].reshape(-1)
        off += _decode_flat(flat, buf[:rows * W * C], poly, srgb, alpha_mask)
        if box and C == 4 and alpha_mask >= 0:
            _box_rgba(buf, dst[i], W)
            continue
        b = buf[:rows * W * C].reshape(rows, W, C)
        if box:
            for j in range(dst.shape[1]):
                x = 2 * j
                if alpha_mask >= 0:
                    a0 = b[0, x, C - 1]
                    a1 = b[0, x + 1, C - 1]
                    a2 = b[1, x, C - 1]
                    a3 = b[1, x + 1, C - 1]
                    for ch in range(C - 1):
                        dst[i, j, ch] = q * (b[0, x, ch] * a0 + b[0, x + 1, ch] * a1 + b[1, x, ch] * a2
                                             + b[1, x + 1, ch] * a3)
                    dst[i, j, C - 1] = q * (a0 + a1 + a2 + a3)
                else:
                    for ch in range(C):
                        dst[i, j, ch] = q * (b[0, x, ch] + b[0, x + 1, ch] + b[1, x, ch] + b[1, x + 1, ch])
        else:
            for j in range(W):
                a = b[0, j, C - 1] if alpha_mask >= 0 else np.float32(1.0)
                for ch in range(C):
                    dst[i, j, ch] = b[0, j, ch] * a if (alpha_mask < 0 or ch < C - 1) else b[0, j, ch]
    return off


def _box_rgba(buf, row, W):
    """One output row of the premultiplied 2x2 mean of two decoded RGBA rows held flat in ``buf`` (the same
    arithmetic as the general loop, written with the channel count fixed so that it vectorises)."""
    q = np.float32(0.25)
    top = buf[:4 * W]
    bot = buf[4 * W:8 * W]
    out = row.reshape(-1)
    for j in range(W // 2):
        s = 8 * j
        a0 = top[s + 3]
        a1 = top[s + 7]
        a2 = bot[s + 3]
        a3 = bot[s + 7]
        out[4 * j] = q * (top[s] * a0 + top[s + 4] * a1 + bot[s] * a2 + bot[s + 4] * a3)
        out[4 * j + 1] = q * (top[s + 1] * a0 + top[s + 5] * a1 + bot[s + 1] * a2 + bot[s + 5] * a3)
        out[4 * j + 2] = q * (top[s + 2] * a0 + top[s + 6] * a1 + bot[s + 2] * a2 + bot[s + 6] * a3)
        out[4 * j + 3] = q * (a0 + a1 + a2 + a3)


def _encode_one(v, p, mid, sc):
    """Linear ``v`` -> sRGB (IEC 61966-2-1), clipped to [0, 1] first (:func:`_encode_flat`, one value)."""
    v = v if v > np.float32(0.0) else np.float32(0.0)
    v = v if v < np.float32(1.0) else np.float32(1.0)
    e = _horner8(p, (np.sqrt(np.sqrt(np.sqrt(v))) - mid) * sc)
    return e if v > np.float32(0.0031308) else v * np.float32(12.92)


def _encode_rgba(x, out, poly, kscale):
    """:func:`_encode_flat` for premultiplied sRGB RGBA texels, written per texel with the channel count
    fixed (the loop then vectorises over texels, and 1/alpha needs no scratch)."""
    p = (poly[2, 0], poly[2, 1], poly[2, 2], poly[2, 3], poly[2, 4], poly[2, 5], poly[2, 6], poly[2, 7],
         poly[2, 8])
    mid = poly[3, 0]
    sc = poly[3, 1]
    for j in range(x.size // 4):
        s = 4 * j
        a = x[s + 3]
        r = np.float32(1.0) / a if a > np.float32(0.0) else np.float32(0.0)
        out[s] = _encode_one(x[s] * r, p, mid, sc)
        out[s + 1] = _encode_one(x[s + 1] * r, p, mid, sc)
        out[s + 2] = _encode_one(x[s + 2] * r, p, mid, sc)
        k = a * kscale
        k = k if k > np.float32(0.0) else np.float32(0.0)
        out[s + 3] = k if k < np.float32(1.0) else np.float32(1.0)


def _encode_rows(src, dst, i0, i1, poly, srgb, alpha_mask, kscale, inv):
    C = src.shape[2]
    if srgb and C == 4 and alpha_mask >= 0:
        for i in range(i0, i1):
            _encode_rgba(src[i].reshape(-1), dst[i].reshape(-1), poly, kscale)
        return
    for i in range(i0, i1):
        if alpha_mask >= 0:
            for j in range(src.shape[1]):
                a = src[i, j, C - 1]
                r = np.float32(1.0) / a if a > 0 else np.float32(0.0)
                for ch in range(C):
                    inv[j * C + ch] = r
        _encode_flat(src[i].reshape(-1), dst[i].reshape(-1), inv, poly, srgb, alpha_mask, kscale)


_COLOR_KERNELS: dict | None = None


def _compiled() -> dict:
    """The per-texel passes of :func:`color_mips`, compiled by numba on first use (numba is imported here: a
    plain numpy sRGB decode of a 4096^2 RGBA map took longer than the whole target, tests/perf/bench_mips.py)."""
    global _COLOR_KERNELS, _decode_flat, _encode_flat, _box_rgba, _encode_rgba, _encode_one, _horner8
    if _COLOR_KERNELS is None:
        from bakery.jit import numba

        njit = numba().njit

        fast = {"nsz", "arcp", "contract", "afn", "reassoc"}  # no nnan / ninf: NaN checks must stay

        def jit(fn):
            try:
                return njit(nogil=True, cache=True, error_model="numpy", fastmath=fast)(fn)
            except RuntimeError:  # no writable cache location
                return njit(nogil=True, error_model="numpy", fastmath=fast)(fn)

        # callees first: a jitted function binds the globals it calls when it is compiled
        _horner8 = njit(inline="always")(_horner8)
        _encode_one = njit(inline="always")(_encode_one)
        _decode_flat, _encode_flat, _box_rgba = jit(_decode_flat), jit(_encode_flat), jit(_box_rgba)
        _encode_rgba = jit(_encode_rgba)
        _COLOR_KERNELS = {"decode": jit(_decode_rows), "encode": jit(_encode_rows), "poly": _srgb_polynomials(),
                          "decode_flat": _decode_flat, "encode_flat": _encode_flat}
    return _COLOR_KERNELS


def _rows_parallel(fn, rows: int, threads: int, *args) -> list:
    """``fn(i0, i1, *args)`` over blocks of rows on ``threads`` threads; returns the block results in order."""
    from concurrent.futures import ThreadPoolExecutor

    step = max(16, -(-rows // (4 * threads)))
    blocks = [(i0, min(rows, i0 + step)) for i0 in range(0, rows, step)]
    if threads <= 1 or len(blocks) == 1:
        return [fn(a, b, *args) for a, b in blocks]
    with ThreadPoolExecutor(max_workers=threads) as pool:
        return [f.result() for f in [pool.submit(fn, a, b, *args) for a, b in blocks]]


def coverage(alpha: np.ndarray, cutoff: float) -> float:
    """Fraction of texels whose alpha passes an alpha test at ``cutoff`` (``alpha >= cutoff``)."""
    return float(np.count_nonzero(np.asarray(alpha) >= cutoff)) / max(1, np.size(alpha))


def _coverage_scale(alpha: np.ndarray, target: float, cutoff: float) -> float:
    """The factor k for which ``k * alpha >= cutoff`` passes the fraction ``target`` of texels (common practice
    for alpha-tested maps): the alpha of rank ``round(target N)`` from the top is moved onto the cutoff."""
    flat = np.asarray(alpha, np.float32).ravel()
    count = int(round(target * flat.size))
    if count <= 0:
        top = float(flat.max()) if flat.size else 0.0
        return 1.0 if top < cutoff else 0.999 * cutoff / top
    v = float(np.partition(flat, flat.size - count)[flat.size - count])
    return cutoff / max(v, 1e-6)


def color_mips(
    image: np.ndarray,
    *,
    transfer: str = "srgb",
    kernel: str = "box",
    edges: str = "wrap",
    levels: int | None = None,
    alpha_cutoff: float | None = None,
    threads: int | None = None,
    progress: Progress | None = None,
) -> list[np.ndarray]:
    """Mip chain of a colour map, filtered in linear light with premultiplied alpha.

    Each level is filtered from the one above in linear, premultiplied form (colour times alpha), so a
    black/white checkerboard averages to the grey of half the light, not to sRGB code 128, and transparent
    texels lend no colour to their neighbours (no dark fringes); it is then turned back into the stored form
    (straight alpha, encoded colour).

    Parameters
    ----------
    image : ndarray, float32, (H, W, C)
        Colour as stored, in [0, 1]: C = 3 (RGB) or 4 (RGBA; alpha last), also 1 (grey) or 2 (grey + alpha).
        Alpha is always linear.
    transfer : {"srgb", "linear"}
        How the colour channels are stored: sRGB-encoded (IEC 61966-2-1; values clipped to [0, 1]) or linear
        (never clipped above).
    kernel : {"box", "kaiser", "lanczos3"}
        Filter (:data:`COLOR_KERNELS`): the exact-footprint box, a Kaiser-windowed sinc or Lanczos-3, both 3
        texels of the smaller level wide on each side. The sinc filters ring: results are clipped as above.
    edges : {"wrap", "clamp", "mirror"}
        How the sinc filters continue past the borders (the box never leaves the map).
    levels : int, optional
        Levels including level 0; default the full chain to 1x1 (:func:`mip_count`). Odd and non-square
        sizes follow :func:`mip_size`.
    alpha_cutoff : float in (0, 1), optional
        For alpha-tested maps: scale each level's alpha so that the fraction of texels with alpha >= cutoff
        equals level 0's (common practice). Needs an alpha channel.
    threads : int, optional
        Worker threads (default: the number of CPUs, at most 8). The result does not depend on it.
    progress : callable, optional
        ``progress(fraction, label)`` after the pass over level 0 and after each level, rising to 1 (the pass
        over level 0 reads as many texels as all the levels together). The result does not depend on it.

    Returns
    -------
    list of ndarray, float32, (h, w, C)
        Level 0 (the input) first, in the stored encoding: colour in [0, 1] (sRGB) or [0, inf) (linear),
        alpha in [0, 1]. Texels with no alpha at all get colour 0.

    References
    ----------
    .. [1] IEC 61966-2-1:1999, sRGB, section 5 (transfer functions).
    .. [2] J. F. Kaiser, "Digital filters", in F. F. Kuo, J. F. Kaiser (eds.), System Analysis by Digital
       Computer, Wiley, 1966; J. F. Kaiser, R. W. Schafer, "On the use of the I0-sinh window for spectrum
       analysis", IEEE Trans. ASSP 28(1), 105-107, 1980.
    .. [3] C. E. Duchon, "Lanczos Filtering in One and Two Dimensions", Journal of Applied Meteorology 18(8),
       1016-1022, 1979.
    .. [4] T. Porter, T. Duff, "Compositing Digital Images", SIGGRAPH '84, Computer Graphics 18(3), 1984
       (premultiplied alpha).

    Examples
    --------
    A one-texel black and white checkerboard, stored in sRGB: level 1 is linear 0.5, sRGB code 188 of 255.

    >>> import numpy as np
    >>> board = (np.indices((4, 4)).sum(axis=0) % 2).astype(np.float32)[:, :, None].repeat(3, axis=2)
    >>> chain = color_mips(board)
    >>> [lvl.shape[:2] for lvl in chain], int(np.rint(chain[1][0, 0, 0] * 255))
    ([(4, 4), (2, 2), (1, 1)], 188)
    """
    import os
    import warnings

    from bakery.edges import check_edges
    from bakery.errors import BakeryWarning

    img = np.asarray(image)
    if img.ndim == 2:
        img = img[:, :, None]
    if img.ndim != 3 or img.shape[2] not in (1, 2, 3, 4) or img.size == 0:
        raise BakeryError(f"a colour map must be (H, W, C) with C = 1 to 4 channels; got shape {np.shape(image)}")
    img = np.ascontiguousarray(img, dtype=np.float32)
    if transfer not in ("srgb", "linear"):
        raise BakeryError(f"unknown transfer {transfer!r}; must be one of srgb, linear")
    if kernel not in COLOR_KERNELS:
        raise BakeryError(f"unknown mip kernel {kernel!r}; must be one of {', '.join(COLOR_KERNELS)}")
    check_edges(edges)
    h, w, C = img.shape
    alpha = C in (2, 4)
    if alpha_cutoff is not None:
        if not alpha:
            raise BakeryError(f"alpha_cutoff needs a map with alpha (2 or 4 channels); this one has {C}")
        cut = float(alpha_cutoff)
        if not (0.0 < cut < 1.0):
            raise BakeryError(f"alpha_cutoff must be in (0, 1); got {alpha_cutoff!r}")
    levels = level_count(w, h, levels)
    nthreads = max(1, threads or min(8, os.cpu_count() or 1))
    k = _compiled()
    poly = k["poly"]
    srgb = transfer == "srgb"
    amask = C - 1 if alpha else -1
    out = [img]
    step = progress or no_progress
    if levels == 1:
        step(1.0, "level 0")
        return out
    box = kernel == "box"
    fused = box and h % 2 == 0 and w % 2 == 0
    first = np.empty(((h // 2, w // 2) if fused else (h, w)) + (C,), np.float32)

    def decode(i0, i1):
        return k["decode"](img, first, i0, i1, poly, srgb, amask, fused, np.empty(2 * w * C, np.float32))

    off = float(sum(_rows_parallel(decode, first.shape[0], nthreads)))
    if off != 0.0:  # some value outside [0, 1], or not finite: the exact figures (rare, so a second pass)
        if not np.isfinite(img).all():
            raise BakeryError("colour map has NaN or infinite values")
        lo, hi = float(img.min()), float(img.max())
        if (srgb or alpha) and (lo < 0.0 or hi > 1.0):
            warnings.warn(f"colour map values run from {lo:g} to {hi:g}, outside [0, 1]: clipped", BakeryWarning,
                          stacklevel=2)
    target = coverage(img[:, :, C - 1], cut) if alpha_cutoff is not None else None
    step(0.5, "level 0")

    def reduce(a: np.ndarray) -> np.ndarray:
        ah, aw = a.shape[:2]
        mw, mh = mip_size(aw, ah, 1)
        if box:
            if ah % 2 == 0 and aw % 2 == 0 and C in (1, 3, 4):
                import cv2  # the 2x2 mean of an exact halving, on OpenCV's threads

                r = cv2.resize(a, (mw, mh), interpolation=cv2.INTER_AREA)
                return r.reshape(mh, mw, C)
            return downsample(a)
        if ah % 2 == 0 and aw % 2 == 0 and C in (1, 3, 4):
            return _halve_windowed(a, kernel, edges)
        return np.ascontiguousarray(_resample_axis(_resample_axis(a, 0, mh, kernel, edges), 1, mw, kernel, edges))

    cur = first if fused else reduce(first)
    for level in range(1, levels):
        if level > 1:
            cur = reduce(cur)
        ks = 1.0 if target is None else _coverage_scale(cur[:, :, C - 1], target, cut)
        stored = np.empty_like(cur)
        _rows_parallel(lambda i0, i1, cur=cur, stored=stored, ks=ks: k["encode"](
            cur, stored, i0, i1, poly, srgb, amask, np.float32(ks), np.empty(cur.shape[1] * C, np.float32)),
            cur.shape[0], nthreads)
        out.append(stored)
        step(1.0 if level == levels - 1 else 1.0 - 0.5 * 4.0 ** -level, f"level {level}")
    return out
