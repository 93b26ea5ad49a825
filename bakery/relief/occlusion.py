"""Ambient occlusion (and bent normals) of a height field, from exact horizons along lines.

The occlusion of a texel is the cosine-weighted fraction of its sky that the relief does not hide:

    A = (1/pi) * integral over the upper hemisphere of V(w) * max(0, n . w) dw

with n the texel's normal (the normal map's, same derivative kernel and strength) and V(w) = 1 where the ray
leaves the height field. Directions below the horizontal plane are never sky (far enough away, every tiling or
clamped height field rises above them). In polar coordinates about the vertical axis (azimuth psi, angle theta
from the vertical) a height field hides exactly the rays below the horizon of each azimuth, so V is 1 for
``theta < pi/2 - alpha(psi)`` and the integral over theta has a closed form: the slice integral of Jimenez, Wu,
Pesce & Jarabo (2016, eq. 10, with the view vector the vertical axis, where it is exact). With
``t = tan(alpha)``, ``u = 1 / (1 + t^2)`` and ``n_psi = n . (cos psi, sin psi, 0)``:

    I(psi) = 1/2 * [ n_z * u + n_psi * (pi/2 - atan(t) - t * u) ],   t >= max(0, -n_psi / n_z)

(the bound keeps the arc inside the normal's hemisphere), and ``A = (2/N) * sum of I(psi_k)`` over ``N``
azimuths ``psi_k = 2 pi k / N``. A flat texel has t = 0 everywhere and A = 1. The cosine-weighted mean
unoccluded direction (the bent normal) has a closed form per azimuth too (module code, :func:`_bent_terms`).

Horizons (Timonen & Westerholm 2010): for each azimuth the map is swept along parallel lines, one per texel of
the minor axis, one sample per texel of the major axis (heights interpolated linearly between the two texels
across the line). The horizon of a sample is the steepest line to any earlier sample; it touches the upper
convex hull of the earlier samples, and that hull is kept on a stack (Andrew's monotone chain), so a line of
n samples costs O(n) whatever its relief. Each texel takes the horizon of the line sample nearest to it (at most
half a texel across the line). Line slopes are whole numbers of texels per map period, so with ``wrap`` a line
closes on itself after whole periods: it is walked as one loop, from its highest sample when the loop is at most
:data:`WALK_LINES` periods long (then the horizons are exactly those of the endless tiling: nothing before the
highest sample rises above the line to it), else in stretches of that many periods, each after one period of
warm-up; horizons see at least one map period back, and a 2x2 tiled map gives the 2x2 tile of the result.
The azimuths psi and psi + pi (an even number of them) share their lines: one sheared copy of the map is
walked forward for psi and backward for psi + pi, and one pass adds both slice integrals. (The lines of
psi + pi thus lie where those of psi do, a fraction of a texel from where its own sweep would put them: the
same nearest-sample rule, not the same numbers.)
With ``clamp`` or ``mirror`` each line starts one map period beyond the border (the edge texel repeated, or the
mirror image). With ``max_distance`` the horizon is a hard cutoff: occluders farther away
are ignored (those samples are searched one by one, O(n * distance)).

Units. Heights are in height units; ``strength = (s_x, s_y)`` is that of :func:`bakery.normals.normal_from_height`
(texels per height unit, :func:`bakery.normals.strength_from_size` from physical sizes), so the relief the
occlusion sees is the relief the normal map shows. One texel is ``1/s_x`` height units wide and ``1/s_y`` tall.

Bent normals are unit vectors in the normal map's tangent space: +X right (u), +Y up (v, toward the top row),
+Z out of the surface.

References
----------
.. [1] J. Jimenez, X. Wu, A. Pesce, A. Jarabo, "Practical Realtime Strategies for Accurate Indirect Occlusion",
   Activision technical report ATVI-TR-16-01, 2016, eq. 10 (slice integral) and section 5 (bent normals).
.. [2] V. Timonen, J. Westerholm, "Scalable Height Field Self-Shadowing", Computer Graphics Forum 29(2),
   723-731, 2010 (horizons along lines through a convex hull kept on a stack).
.. [3] A. M. Andrew, "Another efficient algorithm for convex hulls in two dimensions", Information Processing
   Letters 9(5), 216-219, 1979 (monotone chain).
.. [4] M. Abramowitz, I. A. Stegun, "Handbook of Mathematical Functions", 1964, eq. 4.4.49 (the arctangent
   polynomial of the integral pass).
"""

from __future__ import annotations

import math
import os
import threading
import warnings
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from bakery.edges import check_edges, edge_index
from bakery.errors import BakeryError, BakeryWarning
from bakery.normals.kernels import DEFAULT_KERNEL
from bakery.progress import maybe_within


def _atan(t):
    """arctan(t) for float32 t >= 0: Abramowitz & Stegun (1964) eq. 4.4.49 on [0, 1] (|error| <= 2e-8), and
    pi/2 - arctan(1/t) above."""
    one = np.float32(1.0)
    x = min(t, one / t)
    x2 = x * x
    p = np.float32(0.0028662257)
    p = p * x2 - np.float32(0.0161657367)
    p = p * x2 + np.float32(0.0429096138)
    p = p * x2 - np.float32(0.0752896400)
    p = p * x2 + np.float32(0.1065626393)
    p = p * x2 - np.float32(0.1420889944)
    p = p * x2 + np.float32(0.1999355085)
    p = p * x2 - np.float32(0.3333314528)
    a = x * (one + p * x2)
    return a if t <= one else np.float32(0.5 * math.pi) - a


def _gather(acc, bent, T, T2, nx, ny, nz, i0, i1, cpsi, spsi, two, want_bent):
    """Adds I(psi) of rows ``i0 <= i < i1`` for the horizon tangents ``T`` (module docstring), and with
    ``two`` I(psi + pi) for those in ``T2`` (n_psi changes sign); with ``want_bent`` also the bent-normal
    integrals. A plain pass over contiguous planes (vectorised), the normals read once for both."""
    W = T.shape[1]
    zero, one, half, hpi = np.float32(0.0), np.float32(1.0), np.float32(0.5), np.float32(0.5 * math.pi)
    c32, s32 = np.float32(cpsi), np.float32(spsi)
    for i in range(i0, i1):
        for j in range(W):  # float32 throughout: the lanes of a vector are twice as many
            npsi = nx[i, j] * c32 + ny[i, j] * s32
            z = nz[i, j]
            t = max(T[i, j], zero, -npsi / z)
            u = one / (one + t * t)
            a = half * (z * u + npsi * (hpi - _atan(t) - t * u))
            if two:
                t = max(T2[i, j], zero, npsi / z)
                u = one / (one + t * t)
                a += half * (z * u - npsi * (hpi - _atan(t) - t * u))
            acc[i, j] += a
        if want_bent:
            for j in range(W):
                npsi = nx[i, j] * cpsi + ny[i, j] * spsi
                z = nz[i, j]
                t = max(T[i, j], 0.0, -npsi / z)
                bz, bd = _bent_terms(t, 1.0 / (1.0 + t * t), z, npsi)
                if two:
                    t = max(T2[i, j], 0.0, npsi / z)
                    bz2, bd2 = _bent_terms(t, 1.0 / (1.0 + t * t), z, -npsi)
                    bz += bz2
                    bd -= bd2
                bent[i, j, 0] += bd * cpsi
                bent[i, j, 1] += bd * spsi
                bent[i, j, 2] += bz


def _collect(T, src, i0, i1, kmaj, rmaj, transposed):
    """Wrap edges: the horizons of rows ``i0 <= i < i1`` in texel order, ``T[i, j]``, from those of the line
    samples, ``src[line, k]``. The texel whose major coordinate is m takes sample ``k = kmaj[m]`` of the line
    ``minor - rmaj[m]`` (modulo the minor size): the sample nearest to it."""
    W = T.shape[1]
    nmin = src.shape[0]
    stride = src.shape[1]
    flat = src.reshape(-1)
    for i in range(i0, i1):
        row = T[i]
        if transposed:  # unsigned indices: no test for negative ones
            k = kmaj[i]
            sh = rmaj[i]
            for j in range(sh):
                row[j] = flat[np.uint64((j - sh + nmin) * stride + k)]
            for j in range(sh, W):
                row[j] = flat[np.uint64((j - sh) * stride + k)]
        else:
            for j in range(W):
                line = i - rmaj[j]
                line = line + nmin if line < 0 else line
                row[j] = flat[np.uint64(line * stride + kmaj[j])]


def _sweep(A, T, r0, r1, nwarm, nout, colk, flk, fk, rowfold, rowbase, nmin, wrap, reach, inv_len,
           stack_k, stack_y, tops):
    """Lines ``r0 <= r < r1`` (at most ``len(tops)`` of them, neighbours), all advanced one step at a time so
    the samples of a step sit side by side in memory. Each line: ``nwarm`` warm-up samples before the map
    (through the edge mode), then ``nout`` samples on it. reach = 0: each sample's horizon by the
    monotone-chain hull of the samples before it; reach > 0: the steepest of the ``reach`` samples before.
    Each texel gets the horizon tangent (rise over run, can be negative) of the line sample nearest to it,
    written into ``T``."""
    nl = r1 - r0
    for l in range(nl):
        tops[l] = -1
    for k in range(nwarm + nout):
        c = colk[k]
        f = fk[k]
        g = 1.0 - f
        base = r0 + flk[k] + rowbase
        near = 1 if f >= 0.5 else 0
        for l in range(nl):
            m = base + l
            y = g * A[rowfold[m], c] + f * A[rowfold[m + 1], c]
            t = 0.0
            if reach == 0:
                top = tops[l]
                while top >= 1:
                    k1 = stack_k[l, top]
                    y1 = stack_y[l, top]
                    k0 = stack_k[l, top - 1]
                    y0 = stack_y[l, top - 1]
                    if (y1 - y0) * (k - k0) <= (y - y0) * (k1 - k0):
                        top -= 1
                    else:
                        break
                if k >= nwarm:
                    t = (stack_y[l, top] - y) / (k - stack_k[l, top]) * inv_len
                top += 1
                stack_k[l, top] = k
                stack_y[l, top] = y
                tops[l] = top
            else:
                stack_y[l, k] = y
                if k >= nwarm:
                    best = -1e30
                    for j in range(max(0, k - reach), k):
                        v = (stack_y[l, j] - y) / (k - j)
                        if v > best:
                            best = v
                    t = best * inv_len
            if k >= nwarm:
                raw = m - rowbase + near
                if wrap or 0 <= raw < nmin:
                    T[rowfold[raw + rowbase], c] = t


def _shear(AT, BT, k0, k1, flm, fk, colk, nmin):
    """Wrap edges: sample k of line r is ``(1 - f) A[r + fl, col] + f A[r + fl + 1, col]`` (rows modulo
    ``nmin``). Written transposed, ``BT[k, r]`` from row ``col`` of ``AT`` (= A transposed), so each step k of
    all the lines is a cyclic shift of one contiguous row: two plain loops that vectorise."""
    for k in range(k0, k1):
        a = AT[colk[k]]
        b = BT[k]
        sh = flm[k]
        f = fk[k]
        g = np.float32(1.0) - f
        n1 = np.uint64(nmin - 1 - sh)  # r < n1: both rows inside; unsigned: no test for negative indices
        ush, un = np.uint64(sh), np.uint64(nmin)
        for r in range(n1):
            b[r] = g * a[r + ush] + f * a[r + ush + np.uint64(1)]
        b[n1] = g * a[nmin - 1] + f * a[0]
        for r in range(n1 + np.uint64(1), un):
            b[r] = g * a[r + ush - un] + f * a[r + ush + np.uint64(1) - un]


def _split(normals, nx, ny, nz, i0, i1):
    """The three components of rows ``i0 <= i < i1`` of ``normals`` (H, W, 3) as three planes."""
    for i in range(i0, i1):
        for j in range(normals.shape[1]):
            nx[i, j] = normals[i, j, 0]
            ny[i, j] = normals[i, j, 1]
            nz[i, j] = normals[i, j, 2]


def _unit_bent(bent, normals, i0, i1):
    """Rows ``i0 <= i < i1`` of the summed bent vectors made unit length in place; a zero sum takes the
    texel's normal."""
    for i in range(i0, i1):
        for j in range(bent.shape[1]):
            x = bent[i, j, 0]
            y = bent[i, j, 1]
            z = bent[i, j, 2]
            length = np.float32(math.sqrt((x * x + y * y) + z * z))
            if length > 0:
                bent[i, j, 0] = x / length
                bent[i, j, 1] = y / length
                bent[i, j, 2] = z / length
            else:
                bent[i, j, 0] = normals[i, j, 0]
                bent[i, j, 1] = normals[i, j, 1]
                bent[i, j, 2] = normals[i, j, 2]


def _transpose(src, dst, i0, i1):
    """``dst[j, i] = src[i, j]`` for rows ``i0 <= i < i1`` of ``src``, in tiles of 64 x 64."""
    W = src.shape[1]
    for a in range(i0, i1, 64):
        for b in range(0, W, 64):
            for j in range(np.uint64(b), np.uint64(min(W, b + 64))):  # unsigned: no test for negative indices
                for i in range(np.uint64(a), np.uint64(min(i1, a + 64))):
                    dst[j, i] = src[i, j]


def _walk_line(B, T, nk, c0, q, nmin, j, k, count, skip, step, inv_len, stack_k, stack_y):
    """Walks ``count`` samples from sample k of line ``c0 + j q`` (mod nmin), one step ``step`` (+1 or -1)
    at a time; line ``c0 + j q`` continues as line ``c0 + (j + step) q``. Writes each sample's horizon
    tangent after the first ``skip`` samples. The upper hull of the samples so far is the stack, its top
    kept in ``y1, k1``."""
    top = -1
    y1 = 0.0
    k1 = 0.0
    K = 0.0
    done = 0
    while done < count:
        line = (c0 + j * q) % nmin
        b = B[line]
        tb = T[line]
        seg = min(nk - k if step > 0 else k + 1, count - done)
        out = done >= skip
        for s in range(seg):
            kk = np.uint64(k + s * step)  # unsigned indices: no test for negative ones on the hull's path
            y = np.float64(b[kk])
            while top >= 1:
                k0 = stack_k[np.uint64(top - 1)]
                y0 = stack_y[np.uint64(top - 1)]
                if (y1 - y0) * (K - k0) <= (y - y0) * (k1 - k0):
                    top -= 1
                    y1 = y0
                    k1 = k0
                else:
                    break
            if out:
                tb[kk] = (y1 - y) / (K - k1) * inv_len if top >= 0 else 0.0
            top += 1
            stack_k[np.uint64(top)] = K
            stack_y[np.uint64(top)] = y
            y1 = y
            k1 = K
            K += 1.0
        done += seg
        j += step
        k = 0 if step > 0 else nk - 1


def _walk(B, Tf, Tr, nk, tasks, t0, t1, q, nmin, per_cycle, inv_len, two, stack_k, stack_y):
    """Wrap edges, no distance limit. Line r continues, one map period later, as line ``r + q``, and the
    lines ``c0 + j q`` (mod nmin), ``0 <= j < per_cycle``, close into a cycle. A task walks lines
    ``j_lo <= j < j_hi`` of a cycle as one long line and writes each sample's horizon tangent (rise over run
    per step, times ``inv_len``) into ``Tf``; with ``two`` it walks them backward too, into ``Tr`` (the
    azimuth psi + pi). A whole cycle is walked from its highest sample: nothing before that sample can rise
    above the line to it, so those horizons are the exact ones of the endless tiling. Part of a cycle starts
    with a warm-up on the line before it (after it, backward). Lines are the first ``nk`` samples of the
    rows of ``B``."""
    for i in range(t0, t1):
        c0 = tasks[i, 0]
        j_lo = tasks[i, 1]
        j_hi = tasks[i, 2]
        if j_hi - j_lo == per_cycle:
            best = -np.inf
            start = 0
            for j in range(per_cycle):
                b = B[(c0 + j * q) % nmin]
                for k in range(nk):
                    if b[k] > best:
                        best = b[k]
                        start = j * nk + k
            js = start // nk
            ks = start - js * nk
            _walk_line(B, Tf, nk, c0, q, nmin, js, ks, per_cycle * nk, 0, 1, inv_len, stack_k, stack_y)
            if two:
                _walk_line(B, Tr, nk, c0, q, nmin, js, ks, per_cycle * nk, 0, -1, inv_len, stack_k, stack_y)
        else:
            count = (j_hi - j_lo + 1) * nk
            _walk_line(B, Tf, nk, c0, q, nmin, j_lo - 1, 0, count, nk, 1, inv_len, stack_k, stack_y)
            if two:
                _walk_line(B, Tr, nk, c0, q, nmin, j_hi, nk - 1, count, nk, -1, inv_len, stack_k, stack_y)


def _bent_terms(t, u, nz, npsi):
    """Vertical and along-psi parts of the integral of w (n . w) sin(theta) over 0 <= theta <= h, with
    h = pi/2 - atan(t): cos h = t sqrt(u), sin h = sqrt(u)."""
    sh = math.sqrt(u)
    ch = t * sh
    sh3 = sh * sh * sh
    ch3 = ch * ch * ch
    z = nz * (1.0 - ch3) / 3.0 + npsi * sh3 / 3.0
    d = nz * sh3 / 3.0 + npsi * (2.0 / 3.0 - ch + ch3 / 3.0)
    return z, d


_KERNELS: dict | None = None


def _kernels() -> dict:
    """The sweeps compiled by numba (imported here, on first use: it costs ~0.4 s)."""
    global _KERNELS
    if _KERNELS is None:
        from bakery.jit import numba

        njit = numba().njit

        def jit(fn, **kw):
            try:
                return njit(nogil=True, cache=True, error_model="numpy", **kw)(fn)
            except RuntimeError:  # no writable cache location
                return njit(nogil=True, error_model="numpy", **kw)(fn)

        # callees first: a jitted function binds the globals it calls when it is compiled
        fast = {"nsz", "arcp", "contract", "afn", "reassoc"}  # no nnan/ninf: 1/0 = inf is relied on
        g = globals()
        for name in ("_atan", "_bent_terms"):
            g[name] = jit(g[name], fastmath=fast)
        g["_walk_line"] = jit(_walk_line)
        _KERNELS = {"sweep": jit(_sweep), "gather": jit(_gather, fastmath=fast),
                    "collect": jit(_collect), "shear": jit(_shear, fastmath=fast),
                    "transpose": jit(_transpose), "split": jit(_split), "unit_bent": jit(_unit_bent),
                    "walk": jit(_walk)}
    return _KERNELS


#: Neighbouring lines advanced together by one call of the sweep.
LANES = 32

#: Extra samples at the end of each row of the line buffers (and of the transposed copies), so that a column
#: of them does not fall into one cache set when the size is a power of two.
PAD = 16

#: Wrapped lines walked as one (each walk starts with a warm-up of one line: 1/64 more work).
WALK_LINES = 64


def _strengths(strength) -> tuple[float, float]:
    if np.ndim(strength) == 0:
        sx = sy = float(strength)
    else:
        vals = [float(v) for v in np.ravel(strength)]
        if len(vals) != 2:
            raise BakeryError(f"strength must be a number or a pair (s_x, s_y); got {strength!r}")
        sx, sy = vals
    if not (math.isfinite(sx) and math.isfinite(sy)) or sx == 0 or sy == 0 or (sx > 0) != (sy > 0):
        raise BakeryError(f"strength must be finite, non-zero and of one sign on both axes; got {strength!r}")
    return sx, sy


def _directions(directions) -> int:
    if isinstance(directions, bool) or not isinstance(directions, (int, np.integer)) or directions < 4:
        raise BakeryError(f"directions must be a whole number of azimuths >= 4; got {directions!r}")
    return int(directions)


def _plan(psi: float, sx: float, sy: float, shape: tuple[int, int], edges: str, max_distance: float | None
          ) -> dict:
    """Sweep of one azimuth: the walk steps one texel along the major axis and ``s = q / n_major`` texels
    across (q whole, so a line through the tiling map closes on itself after whole periods), against psi so
    that the samples already seen lie toward psi."""
    H, W = shape
    dcol, drow = -sx * math.cos(psi), sy * math.sin(psi)  # texel steps against psi; rows run down, v up
    transposed = abs(dcol) < abs(drow)
    nmaj, nmin = (H, W) if transposed else (W, H)
    major, minor = (drow, dcol) if transposed else (dcol, drow)
    sgn = 1 if major > 0 else -1
    q = int(round(minor / abs(major) * nmaj))
    s = q / nmaj
    if transposed:  # walk step in physical units: (x, y up) = (s / sx, -sgn / sy)
        wx, wy = s / sx, -sgn / sy
    else:
        wx, wy = sgn / sx, -s / sy
    step_len = math.hypot(wx, wy)
    plan = dict(transposed=transposed, nmaj=nmaj, nmin=nmin, sgn=sgn, q=q, inv_len=1.0 / step_len,
                cpsi=-wx / step_len, spsi=-wy / step_len)
    if edges == "wrap" and max_distance is None:
        k = np.arange(nmaj)
        num = k * q
        fl = num // nmaj
        fk = (num - fl * nmaj) / nmaj
        rnd = fl + (2 * (num - fl * nmaj) >= nmaj)
        g = math.gcd(abs(q), nmin)
        per_cycle = nmin // g
        tasks = [(c0, j0, min(per_cycle, j0 + WALK_LINES)) for c0 in range(g) for j0 in range(0, per_cycle, WALK_LINES)]
        colk = (k if sgn > 0 else nmaj - 1 - k).astype(np.int64)  # its own inverse: major coordinate -> k
        plan.update(kind="walk", colk=colk, flm=np.mod(fl, nmin).astype(np.int64), fk=fk.astype(np.float32),
                    rmaj=np.mod(rnd, nmin).astype(np.int64)[colk], tasks=np.array(tasks, np.int64),
                    per_cycle=per_cycle)
        return plan
    if max_distance is None:
        nwarm, reach = nmaj, 0
    else:  # max_distance in texels along u: one step is step_len * sx of them
        reach = max(1, int(math.floor(max_distance / (step_len * sx) + 1e-9)))
        nwarm = min(nmaj, reach)
    k = np.arange(nwarm + nmaj)
    pos = k - nwarm if sgn > 0 else nmaj - 1 + nwarm - k
    colk = edge_index(-nwarm, nmaj + nwarm, nmaj, edges)[pos + nwarm].astype(np.int64)
    num = (k - nwarm) * q
    flk = num // nmaj
    fk = (num - flk * nmaj) / nmaj
    span = abs(q) + 2
    r_lo, r_hi = (0, nmin) if edges == "wrap" else (-span, nmin + span)
    rowbase = span + abs(q) * 2 + 4
    plan.update(kind="lines", nwarm=nwarm, reach=reach, colk=colk, flk=flk.astype(np.int64), fk=fk,
                rowfold=edge_index(-rowbase, nmin + rowbase, nmin, edges).astype(np.int64), rowbase=rowbase,
                r_lo=r_lo, r_hi=r_hi)
    return plan


def occlusion_from_height(
    height: np.ndarray,
    *,
    strength: float | tuple[float, float] = 1.0,
    directions: int = 16,
    max_distance: float | None = None,
    edges: str = "wrap",
    kernel: str = DEFAULT_KERNEL,
    bent_normals: bool = False,
    threads: int | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> np.ndarray | tuple[np.ndarray, np.ndarray]:
    """Ambient occlusion of a height map: cosine-weighted visibility of the sky over each texel.

    Parameters
    ----------
    height : ndarray, (H, W) or (H, W, 1)
        Heights in height units (file data in [0, 1]: the full nominal range is 1).
    strength : float or (float, float)
        Texels per height unit, ``(s_x, s_y)``, exactly as for :func:`bakery.normals.normal_from_height`
        (use :func:`bakery.normals.strength_from_size` for physical sizes). Negative values (both axes)
        invert the relief.
    directions : int
        Number of azimuths ``N >= 4``, ``psi_k = 2 pi k / N`` (physical directions, +X right, +Y up); each
        costs one sweep of the map.
    max_distance : float, optional
        Cutoff: occluders farther than this many texels (widths of one texel along u) are ignored. Default:
        no limit (exact horizons, up to one map period away). Must be > 0 and at most the map's larger side.
    edges : {"wrap", "clamp", "mirror"}
        How the relief continues past the borders: tiles (default), edge texel repeats, or mirrored.
    kernel : str
        Derivative kernel of the normals (:mod:`bakery.normals.kernels`); default that of the normal map.
    bent_normals : bool
        Also return the bent normals (the normalised cosine-weighted mean unoccluded direction).
    threads : int, optional
        Worker threads (default: the number of CPUs, at most 8). The result does not depend on it.
    progress : callable(fraction, label), optional
        Called after the normals, as the lines of each horizon walk are done and after each azimuth, with increasing
        fractions in (0, 1], the last one 1.0. The result does not depend on it.

    Returns
    -------
    occlusion : ndarray, float32, (H, W)
        In [0, 1]: 1 = the whole sky is seen, 0 = none of it.
    bent : ndarray, float32, (H, W, 3)
        Only with ``bent_normals=True``: unit vectors in [-1, 1], tangent space, +X right, +Y up, +Z out.

    References
    ----------
    .. [1] J. Jimenez, X. Wu, A. Pesce, A. Jarabo, "Practical Realtime Strategies for Accurate Indirect
       Occlusion", ATVI-TR-16-01, 2016, eq. 10.
    .. [2] V. Timonen, J. Westerholm, "Scalable Height Field Self-Shadowing", CGF 29(2), 2010.

    Examples
    --------
    A V-groove whose walls rise at 45 degrees: at its bottom the sky seen is cos(45 deg) = 0.7071.

    >>> import numpy as np
    >>> x = np.arange(64, dtype=np.float32)
    >>> groove = np.minimum(np.abs(x - 32), 20)[None, :].repeat(16, axis=0)  # 1 height unit per texel
    >>> ao = occlusion_from_height(groove, strength=1.0, directions=64)
    >>> round(float(ao[8, 32]), 2), round(float(ao[8, 0]), 3)
    (0.71, 1.0)
    """
    from bakery.normals.from_height import _as_height, normal_from_height

    h = _as_height(height)
    sx, sy = _strengths(strength)
    n = _directions(directions)
    check_edges(edges)
    H, W = h.shape
    if max_distance is not None:
        md = float(max_distance)
        if not (math.isfinite(md) and 0 < md <= max(H, W)):
            raise BakeryError(f"max_distance must be a number of texels in (0, {max(H, W)}] (the map's "
                              f"larger side); got {max_distance!r}")
        max_distance = md
    if sx < 0:
        h, sx, sy = -h, -sx, -sy
    if not np.isfinite(h).all():
        raise BakeryError("height map has NaN or infinite values")
    if h.size and float(h.max()) == float(h.min()):
        warnings.warn("height map is constant: occlusion is 1 everywhere", BakeryWarning, stacklevel=2)
    normals = normal_from_height(h, strength=(sx, sy), kernel=kernel, edges=edges, threads=threads,
                                 progress=maybe_within(progress, 0.0, 0.05 / n))
    h = np.ascontiguousarray(h)
    nthreads = max(1, threads or min(8, os.cpu_count() or 1))
    kern = _kernels()
    acc = np.zeros((H, W), np.float32)
    bent = np.zeros((H, W, 3) if bent_normals else (1, 1, 3), np.float32)
    nx, ny, nz = (np.empty((H, W), np.float32) for _ in range(3))
    tan, tan2 = np.empty((H, W), np.float32), np.empty((H, W), np.float32)
    local = threading.local()

    def buffers(size: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        b = getattr(local, "buf", None)
        if b is None or b[0].shape[1] < size:
            b = local.buf = (np.empty((LANES, size), np.int64), np.empty((LANES, size), np.float32),
                             np.empty(LANES, np.int64))
        return b

    def sweep(r0, r1, p, A, T):
        size = p["nwarm"] + p["nmaj"] + 1
        kern["sweep"](A, T, r0, r1, p["nwarm"], p["nmaj"], p["colk"], p["flk"], p["fk"], p["rowfold"],
                      p["rowbase"], p["nmin"], edges == "wrap", p["reach"], p["inv_len"], *buffers(size))

    def walk(t0, t1, p, B, Tf, Tr, two):
        size = (WALK_LINES + 1) * p["nmaj"] + 1
        stacks = getattr(local, "stacks", None)
        if stacks is None or stacks.shape[1] < size:
            stacks = local.stacks = np.empty((2, size), np.float64)
        stack_k, stack_y = stacks
        kern["walk"](B, Tf, Tr, p["nmaj"], p["tasks"], t0, t1, p["q"], p["nmin"], p["per_cycle"], p["inv_len"], two,
                     stack_k, stack_y)

    def transpose(i0, i1, src, dst):
        kern["transpose"](src, dst, i0, i1)

    def padded(rows: int, cols: int) -> np.ndarray:
        """rows apart by other than a power of two: a column does not fall into one cache set"""
        return np.empty((rows, cols + PAD), np.float32)[:, :cols]

    def shear(k0, k1, p, AT, BT):
        kern["shear"](AT, BT, k0, k1, p["flm"], p["fk"], p["colk"], p["nmin"])

    def gather_lines(i0, i1, p, Tf, Tr, two):
        for c0 in range(i0, i1, 16):  # 16 rows at a time: the horizons collected are still in cache
            c1 = min(i1, c0 + 16)
            kern["collect"](tan, Tf, c0, c1, p["colk"], p["rmaj"], p["transposed"])
            if two:
                kern["collect"](tan2, Tr, c0, c1, p["colk"], p["rmaj"], p["transposed"])
            kern["gather"](acc, bent, tan, tan2, nx, ny, nz, c0, c1, p["cpsi"], p["spsi"], two, bool(bent_normals))

    def gather(i0, i1, p):
        kern["gather"](acc, bent, tan, tan, nx, ny, nz, i0, i1, p["cpsi"], p["spsi"], False, bool(bent_normals))

    rows = [(i0, min(H, i0 + 64)) for i0 in range(0, H, 64)]
    pool = ThreadPoolExecutor(max_workers=nthreads) if nthreads > 1 else None

    def each(fn, ranges, *args, tick=None):
        """``fn(a, b, *args)`` for every range, on the pool; ``tick(i, count)`` after the i-th has finished."""
        if pool is None:
            for i, (a, b) in enumerate(ranges):
                fn(a, b, *args)
                if tick is not None:
                    tick(i + 1, len(ranges))
        else:
            for i, f in enumerate([pool.submit(fn, a, b, *args) for a, b in ranges]):
                f.result()
                if tick is not None:
                    tick(i + 1, len(ranges))

    def ticks(done):
        """Progress as the lines of a walk or sweep are done: most of an azimuth's (or a pair's) time."""
        if progress is None:
            return None
        return lambda i, m: progress((done + 0.1 + 0.4 * i / m) / n, f"occlusion: azimuth {done + 1} of {n}")

    # Azimuths psi and psi + pi sweep the same lines in opposite orders: with wrap edges and no limit one
    # sheared copy serves both, walked forward and backward.
    paired = edges == "wrap" and max_distance is None and n % 2 == 0
    order = [(d, d + n // 2) for d in range(n // 2)] if paired else [(d, None) for d in range(n)]
    line_buffers = {}
    hT = tanT = None
    done = 0
    try:
        each(lambda i0, i1: kern["split"](normals, nx, ny, nz, i0, i1), rows)
        if progress is not None:
            progress(0.1 / n, "occlusion: normals")
        for d, d2 in order:
            p = _plan(2.0 * math.pi * d / n, sx, sy, (H, W), edges, max_distance)
            if hT is None:  # the height indexed [major, minor] for the azimuths along u
                hT = padded(W, H)
                each(transpose, rows, h, hT)
            if p["kind"] == "walk":
                nmin, nmaj = p["nmin"], p["nmaj"]
                if (nmin, nmaj) not in line_buffers:
                    line_buffers[nmin, nmaj] = (*(padded(nmin, nmaj).base for _ in range(3)), padded(nmaj, nmin))
                B, Tf, Tr, BT = line_buffers[nmin, nmaj]
                steps = [(k0, min(nmaj, k0 + 64)) for k0 in range(0, nmaj, 64)]
                each(shear, steps, p, h if p["transposed"] else hT, BT)
                each(transpose, steps, BT, B)
                per = max(1, len(p["tasks"]) // (4 * nthreads))
                each(walk, [(t0, min(len(p["tasks"]), t0 + per)) for t0 in range(0, len(p["tasks"]), per)],
                     p, B, Tf, Tr, d2 is not None, tick=ticks(done))
                each(gather_lines, rows, p, Tf, Tr, d2 is not None)
            else:  # the sweeps index [minor, major]: the map as is, or transposed
                if tanT is None:
                    tanT = np.empty((W, H), np.float32)
                A, T = (hT, tanT) if p["transposed"] else (h, tan)
                each(sweep, [(r0, min(p["r_hi"], r0 + LANES)) for r0 in range(p["r_lo"], p["r_hi"], LANES)],
                     p, A, T, tick=ticks(done))
                if T is tanT:
                    each(transpose, [(i0, min(W, i0 + 64)) for i0 in range(0, W, 64)], tanT, tan)
                each(gather, rows, p)
            for _ in range(1 if d2 is None else 2):
                done += 1
                if progress is not None:
                    progress(done / n, f"occlusion: azimuth {done} of {n}")
        if bent_normals:
            each(lambda i0, i1: kern["unit_bent"](bent, normals, i0, i1), rows)
    finally:
        if pool is not None:
            pool.shutdown()
    acc *= np.float32(2.0 / n)
    occ = np.clip(acc, np.float32(0.0), np.float32(1.0), out=acc)
    return (occ, bent) if bent_normals else occ
