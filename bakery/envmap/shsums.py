"""The one pass over a panorama behind its SH projection, folded by the panorama's symmetries (numba).

A panorama's rows are latitudes symmetric about the equator (row r and its mirror row H-1-r), and its
columns longitudes where column p and p + W/2 are half a turn apart. The SH basis up to l = 2 separates into a
function of latitude times a function of longitude, and each factor is even or odd under these reflections,
so the four texels (r, p), (r, p + W/2), (H-1-r, p), (H-1-r, p + W/2) enter every sum only through their four
sign combinations (a 2x2 Hadamard transform). Each combination meets only the latitude functions of its own
parity:

=====  ========================  ============  =============
 k      latitude function         in latitude   in longitude
=====  ========================  ============  =============
 0      solid angle w             even          even
 1      w cos^2(lat)              even          even
 2      w sin(lat)                odd           even
 3      w cos(lat)                even          odd
 4      w sin(lat) cos(lat)       odd           odd
=====  ========================  ============  =============

so four texels cost eight additions and five multiply-adds, where a plain product with five latitude functions
costs twenty multiply-adds; and the five accumulator rows are half as long.

``folded_sums(flat, lat)`` returns, for each k, ``sum over all rows r of lat[k, r] * (x[r, :half] + s_k x[r,
half:])`` with ``s_k = +1`` (longitude-even) or ``-1`` (longitude-odd), lat[k] extended to the lower rows by its
parity; only ``lat[:, :H // 2]`` and the middle row of an odd height are read. Multiplying by a longitude
function of the same parity and summing over the first half-turn of columns gives the full sum over the sphere.

Why compiled: a BLAS product with five rows first copies (packs) the image into cache-sized panels and measured
2.3-4.3x the time of one matrix-vector pass over the same image here; this loop reads each texel once
(``tests/perf/bench_envmaps.py`` shows the ratio). Row pairs are summed in fixed blocks of :data:`BLOCK` in
float32, and the blocks in float64 in a fixed order, so the result does not depend on the number of threads.

numba is imported with this module: import it only when a panorama is projected.
"""

from __future__ import annotations

import os
import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from bakery.errors import BakeryError
from bakery.jit import numba

njit = numba().njit

#: Row pairs summed in float32 before a block's total joins the float64 sum; blocks run on worker threads (a
#: 2048-row panorama is four blocks).
BLOCK = 256

#: Parity of each latitude function under r -> H-1-r, and of the longitude functions it meets under p -> p+W/2.
LAT_PARITY = (1, 1, -1, 1, -1)
LON_PARITY = (1, 1, 1, -1, -1)

_CPUS = min(8, os.cpu_count() or 1)
_POOL: ThreadPoolExecutor | None = None
_POOL_LOCK = threading.Lock()


def _pool() -> ThreadPoolExecutor:
    """The helper threads, started on first use and kept (idle threads wait without using the CPU)."""
    global _POOL
    with _POOL_LOCK:
        if _POOL is None:
            _POOL = ThreadPoolExecutor(max_workers=max(1, _CPUS - 1), thread_name_prefix="bakery-sh")
        return _POOL


def _forget_pool() -> None:
    """Threads do not survive fork(): a child starts its own pool."""
    global _POOL, _POOL_LOCK
    _POOL, _POOL_LOCK = None, threading.Lock()


os.register_at_fork(after_in_child=_forget_pool)


def _compiled(fn):
    """``fn`` compiled without the GIL, its machine code cached on disk where numba finds a writable place."""
    try:
        return njit(nogil=True, cache=True, fastmath={"contract"})(fn)
    except RuntimeError:  # no writable cache location: compile on first use in each process instead
        return njit(nogil=True, fastmath={"contract"})(fn)


@_compiled
def _block(flat, lat, p0, p1, acc):
    """The folded sums of the row pairs p0 <= r < p1 (with their mirrors) into ``acc (5, N/2)`` float32."""
    h, n = flat.shape
    m = n // 2
    acc[:] = 0
    a0, a1, a2, a3, a4 = acc[0], acc[1], acc[2], acc[3], acc[4]
    r = p0
    while r < p1:
        r2 = r + 1 if r + 1 < p1 else r  # two row pairs per step; a lone last pair runs with zero weights
        k = np.float32(1.0) if r2 > r else np.float32(0.0)
        ta, tb, ua, ub = flat[r, :m], flat[r, m:], flat[h - 1 - r, :m], flat[h - 1 - r, m:]
        va, vb, wa, wb = flat[r2, :m], flat[r2, m:], flat[h - 1 - r2, :m], flat[h - 1 - r2, m:]
        f0, f1, f2, f3, f4 = lat[0, r], lat[1, r], lat[2, r], lat[3, r], lat[4, r]
        g0, g1, g2, g3, g4 = k * lat[0, r2], k * lat[1, r2], k * lat[2, r2], k * lat[3, r2], k * lat[4, r2]
        for j in range(m):
            s1, d1, s2, d2 = ta[j] + ua[j], ta[j] - ua[j], tb[j] + ub[j], tb[j] - ub[j]
            s3, d3, s4, d4 = va[j] + wa[j], va[j] - wa[j], vb[j] + wb[j], vb[j] - wb[j]
            ee, oe, eo, oo = s1 + s2, d1 + d2, s1 - s2, d1 - d2
            ee2, oe2, eo2, oo2 = s3 + s4, d3 + d4, s3 - s4, d3 - d4
            a0[j] += f0 * ee + g0 * ee2
            a1[j] += f1 * ee + g1 * ee2
            a2[j] += f2 * oe + g2 * oe2
            a3[j] += f3 * eo + g3 * eo2
            a4[j] += f4 * oo + g4 * oo2
        r += 2


def folded_sums(flat: np.ndarray, lat: np.ndarray, *, threads: int | None = None) -> np.ndarray:
    """The five folded column sums ``(5, N/2)`` (float64) of a float32 image ``flat (H, N)`` with ``N`` even,
    against the latitude functions ``lat (5, H)`` (see the module docstring; parities in :data:`LAT_PARITY` and
    :data:`LON_PARITY`).

    threads: threads to use, the calling one included (default: the number of CPUs, at most 8); the result
    does not depend on it.
    """
    flat = np.ascontiguousarray(flat, dtype=np.float32)
    lat = np.ascontiguousarray(lat, dtype=np.float32)
    h, n = flat.shape
    if n % 2 or lat.shape != (5, h):
        raise BakeryError(f"need an even row length and latitude functions of shape (5, {h}); "
                         f"got {n} and {lat.shape}")
    half, m = h // 2, n // 2
    starts = range(0, half, BLOCK)
    parts = np.empty((len(starts), 5, m), dtype=np.float32)
    nthreads = min(threads or _CPUS, _CPUS, len(starts))
    todo = iter(range(len(starts)))  # shared: next() on it is atomic under the GIL

    def work() -> None:
        for i in todo:
            _block(flat, lat, starts[i], min(half, starts[i] + BLOCK), parts[i])

    # the calling thread works too, helped by nthreads - 1 threads of a pool kept between calls: starting
    # threads on each call cost about a fifth of the pass here
    helpers = [_pool().submit(work) for _ in range(nthreads - 1)]
    work()
    for f in helpers:
        f.result()
    total = np.zeros((5, m), dtype=np.float64)
    for p in parts:  # blocks in order
        total += p
    if h % 2:  # the middle row has no mirror
        left, right = flat[half, :m].astype(np.float64), flat[half, m:].astype(np.float64)
        for k in range(5):
            total[k] += float(lat[k, half]) * (left + LON_PARITY[k] * right)
    return total


# ------------------------------------------------------------------------------ windowed prefilter sums

@_compiled
def _window_block(dirs, i0, i1, vals, h, w, lat, slat, clat, sphi, cphi, table, cos_c, out):
    """Near-part sums for output directions i0 <= i < i1 (see :func:`window_sums`)."""
    c1 = vals.shape[1]
    theta_c = np.arccos(cos_c)
    scale = (table.shape[0] - 1) / np.sqrt(1.0 - cos_c)
    last = table.shape[0] - 1
    acc = np.zeros(c1)
    for i in range(i0, i1):
        nx, ny, nz = dirs[i, 0], dirs[i, 1], dirs[i, 2]
        latc = np.arcsin(min(1.0, max(-1.0, ny)))
        phic = np.arctan2(nx, -nz)
        slc, clc = np.sin(latc), np.cos(latc)
        r0 = max(0, int(np.floor((0.5 - (latc + theta_c) / np.pi) * h - 0.5)))
        r1 = min(h - 1, int(np.ceil((0.5 - (latc - theta_c) / np.pi) * h - 0.5)))
        xc = (phic / (2 * np.pi) + 0.5) * w - 0.5
        acc[:] = 0.0
        a0 = a1 = a2 = a3 = 0.0
        for r in range(r0, r1 + 1):
            num = cos_c - slat[r] * slc
            den = clat[r] * clc
            if den < 1e-12:
                if num > 0:
                    continue
                half = np.pi
            else:
                ratio = num / den
                if ratio >= 1.0:
                    continue
                half = np.pi if ratio <= -1.0 else np.arccos(ratio)
            lo = int(np.ceil(xc - half * w / (2 * np.pi)))
            hi = int(np.floor(xc + half * w / (2 * np.pi)))
            if hi - lo + 1 >= w:
                lo, hi = 0, w - 1
            sr, cr = slat[r], clat[r]
            ax, az, ay = nx * cr, -nz * cr, ny * sr
            base = r * w
            x = lo
            while x <= hi:  # the columns in at most two runs that do not wrap
                x0 = x % w
                x1 = min(w, x0 + (hi - x) + 1)
                for xx in range(x0, x1):
                    mu = ax * sphi[xx] + az * cphi[xx] + ay
                    if mu > cos_c:
                        u = np.sqrt(1.0 - mu) * scale
                        k = min(int(u), last - 1)
                        wgt = table[k] + (u - k) * (table[k + 1] - table[k])
                        row = vals[base + xx]
                        if c1 == 4:
                            a0 += wgt * row[0]
                            a1 += wgt * row[1]
                            a2 += wgt * row[2]
                            a3 += wgt * row[3]
                        else:
                            for ch in range(c1):
                                acc[ch] += wgt * row[ch]
                x += x1 - x0
        if c1 == 4:
            acc[0], acc[1], acc[2], acc[3] = a0, a1, a2, a3
        for ch in range(c1):
            out[i, ch] = acc[ch]


def window_sums(dirs: np.ndarray, vals: np.ndarray, height: int, width: int, table: np.ndarray,
                cos_c: float, *, threads: int | None = None, progress=None, chunk: int = 2048) -> np.ndarray:
    """``Σ_t k(n·l_t) vals_t`` over the texels t of a ``width`` x ``height`` panorama whose centres lie within
    θc = arccos(``cos_c``) of each direction n of ``dirs (N, 3)``; ``vals (H W, K)`` float64 (already times
    each texel's solid angle); returns ``(N, K)`` float64.

    The weight k, zero beyond θc, is given by ``table (M,)``: its values at u = sqrt((1 − n·l)/(1 − cos θc)) =
    0, 1/(M−1), ..., 1 (u is about the angle over θc), interpolated linearly. Each direction visits only the rows
    within θc of its latitude and, per row, the columns within θc (the spherical law of cosines solved for the
    longitude), so the work is about N times the texels in one window. Each direction's sum runs in a fixed
    order on one thread: the result does not depend on ``threads``. ``progress(fraction)`` is called after
    each round of ``chunk`` directions per thread.
    """
    dirs = np.ascontiguousarray(dirs, dtype=np.float64).reshape(-1, 3)
    vals = np.ascontiguousarray(vals, dtype=np.float64)
    table = np.ascontiguousarray(table, dtype=np.float64)
    h, w = int(height), int(width)
    if vals.shape[0] != h * w:
        raise BakeryError(f"need one row of values per texel ({h * w}); got {vals.shape[0]}")
    lat = np.pi * (0.5 - (np.arange(h) + 0.5) / h)
    phi = 2 * np.pi * ((np.arange(w) + 0.5) / w - 0.5)
    slat, clat, sphi, cphi = np.sin(lat), np.cos(lat), np.sin(phi), np.cos(phi)
    out = np.zeros((dirs.shape[0], vals.shape[1]))
    n = dirs.shape[0]
    starts = list(range(0, n, chunk))
    nthreads = max(1, min(threads or _CPUS, _CPUS, len(starts)))

    def run(s: int) -> None:
        _window_block(dirs, s, min(n, s + chunk), vals, h, w, lat, slat, clat, sphi, cphi, table,
                      float(cos_c), out)

    for g in range(0, len(starts), nthreads):
        group = starts[g:g + nthreads]
        helpers = [_pool().submit(run, s) for s in group[1:]]
        run(group[0])
        for f in helpers:
            f.result()
        if progress is not None:
            progress(min(1.0, (g + len(group)) / len(starts)))
    return out


# --------------------------------------------------------------------- associated Legendre functions


@_compiled
def legendre_block(lmax, ms, x, pmms, out):
    """Fully normalised P̄_lm(x) for the orders ``ms`` (consecutive) and degrees l = ms[0]..lmax into
    ``out (lmax − ms[0] + 1, len(ms), len(x))`` (zero where l < m), each order started from its P̄_mm in
    ``pmms`` and run up by the recurrence in degree of Holmes & Featherstone 2002, eq. 11 (the compiled form of
    :func:`bakery.envmap.zonal._legendre_block`)."""
    m0 = ms[0]
    nl = lmax - m0 + 1
    nx = x.shape[0]
    out[:] = 0.0
    for b in range(ms.shape[0]):
        m = ms[b]
        i0 = m - m0
        if i0 >= nl:
            continue
        for j in range(nx):
            out[i0, b, j] = pmms[b, j]
        if i0 + 1 < nl:
            a = np.sqrt(2.0 * m + 3.0)
            for j in range(nx):
                out[i0 + 1, b, j] = a * x[j] * pmms[b, j]
        for i in range(i0 + 2, nl):
            l = m0 + i
            a = np.sqrt((4.0 * l * l - 1.0) / (l * l - m * m))
            bb = np.sqrt(((l - 1.0) ** 2 - m * m) / (4.0 * (l - 1.0) ** 2 - 1.0))
            for j in range(nx):
                out[i, b, j] = a * (x[j] * out[i - 1, b, j] - bb * out[i - 2, b, j])


# --------------------------------------------------------------------- cubic convolution lookups


@_compiled
def cubic_lookup(src, x, y, out):
    """Cubic convolution of ``src (H, W, C)`` at the points (``x[i]``, ``y[i]``) (column and row, texel
    centres at integers) into ``out (N, C)`` float64, with the kernel of Keys 1981 ("Cubic convolution
    interpolation for digital image processing", IEEE Trans. ASSP 29(6), eq. 15: a = −1/2, the choice whose
    interpolation error is third order). Taps beyond the edges repeat the edge texel; coordinates are used
    exactly (no fixed-point subpixel positions)."""
    h, w, c = src.shape
    for i in range(x.shape[0]):
        fx = np.floor(x[i])
        fy = np.floor(y[i])
        tx = x[i] - fx
        ty = y[i] - fy
        x0 = int(fx) - 1
        y0 = int(fy) - 1
        wx = np.empty(4)
        wy = np.empty(4)
        wx[0] = 0.5 * tx * (-1.0 + tx * (2.0 - tx))
        wx[1] = 1.0 + 0.5 * tx * tx * (-5.0 + 3.0 * tx)
        wx[2] = 0.5 * tx * (1.0 + tx * (4.0 - 3.0 * tx))
        wx[3] = 0.5 * tx * tx * (tx - 1.0)
        wy[0] = 0.5 * ty * (-1.0 + ty * (2.0 - ty))
        wy[1] = 1.0 + 0.5 * ty * ty * (-5.0 + 3.0 * ty)
        wy[2] = 0.5 * ty * (1.0 + ty * (4.0 - 3.0 * ty))
        wy[3] = 0.5 * ty * ty * (ty - 1.0)
        for ch in range(c):
            out[i, ch] = 0.0
        for j in range(4):
            r = min(max(y0 + j, 0), h - 1)
            for k in range(4):
                q = min(max(x0 + k, 0), w - 1)
                wt = wy[j] * wx[k]
                for ch in range(c):
                    out[i, ch] += wt * src[r, q, ch]
