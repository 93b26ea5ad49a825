"""Tangent-space normal maps from height maps by gradient perturbation (Blinn 1978).

For a height field h(x, y) the surface normal is ``n = normalize(-s_x dh/dx, -s_y dh/dy, 1)``, with the
derivatives taken in height units per texel and ``s`` the number of texels that one full height unit spans
vertically... more plainly, with the strength given physically::

    s_x = D / (W_phys / W_texels)        s_y = D / (H_phys / H_texels)

where D is the physical relief that the full height range (0 .. 1 in bakery's units: 0 .. 65535 in a 16-bit
file) stands for, and W_phys x H_phys the physical size of the texture, all in one unit of the user's choice.
x runs right (u) and y runs up (v, toward the top image row): the OpenGL / glTF 2.0 convention.

The work runs in horizontal strips with a halo, so memory beyond the output stays small and two cores can share
it; every texel gets the same arithmetic wherever it lies (checked by the tests), so a tiled height gives a tiled
normal map bit for bit.

References
----------
.. [1] J. F. Blinn, "Simulation of Wrinkled Surfaces", SIGGRAPH '78, Computer Graphics 12(3), 286-292, 1978.
.. [2] Khronos Group, "glTF 2.0 Specification", material.normalTexture: +X right, +Y up, +Z toward the viewer.
"""

from __future__ import annotations

import math
import os
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from bakery.edges import check_edges, edge_index
from bakery.errors import BakeryError
from bakery.normals.kernels import DEFAULT_KERNEL, Kernel, get_kernel, slopes
from bakery.progress import Progress

#: Default relief when no strength is given: the full height range is 1/32 of the texture's width deep.
#: A choice of ours (docs/normals.md), independent of resolution.
DEFAULT_RELIEF_RATIO = 1.0 / 32.0


def strength_from_size(shape: tuple[int, int], relief: float, width: float,
                       height: float | None = None) -> tuple[float, float]:
    """Strengths ``(s_x, s_y)`` from physical sizes (Blinn 1978 with derivatives in texels).

    Parameters
    ----------
    shape : (rows, cols)
        Texture size in texels.
    relief : float
        Physical relief that the full height range (0 .. 1) stands for.
    width : float
        Physical width of the texture (along u), in the unit of ``relief``.
    height : float, optional
        Physical height of the texture (along v). Default: square texels, ``width * rows / cols``.

    Returns
    -------
    (s_x, s_y) : tuple of float
        ``s_x = relief * cols / width``, ``s_y = relief * rows / height``.

    Examples
    --------
    >>> strength_from_size((512, 1024), relief=0.05, width=2.0)
    (25.6, 25.6)
    """
    rows, cols = shape
    for name, v in (("relief", relief), ("width", width), ("height", height)):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise BakeryError(f"physical {name} must be a positive number; got {v!r}")
    if height is None:
        height = width * rows / cols
    return relief * cols / width, relief * rows / height


def _strengths(strength: float | tuple[float, float]) -> tuple[float, float]:
    if np.ndim(strength) == 0:
        sx = sy = float(strength)
    else:
        sx, sy = (float(v) for v in strength)
    if not (math.isfinite(sx) and math.isfinite(sy)):
        raise BakeryError(f"strength must be finite; got {strength!r}")
    return sx, sy


def normal_from_height(
    height: np.ndarray,
    *,
    strength: float | tuple[float, float] = 1.0,
    kernel: str = DEFAULT_KERNEL,
    blur: float = 0.0,
    edges: str = "wrap",
    threads: int | None = None,
    out: np.ndarray | None = None,
    progress: Progress | None = None,
) -> np.ndarray:
    """Unit tangent-space normals from a height map: ``n = normalize(-s_x dh/dx, -s_y dh/dy, 1)``.

    Parameters
    ----------
    height : ndarray, (H, W) or (H, W, 1)
        Heights, any real values (file data in [0, 1] maps the full nominal range to 1).
    strength : float or (float, float)
        ``s`` (or ``(s_x, s_y)``): texels per height unit, see :func:`strength_from_size` to derive it from
        physical sizes. Negative values invert the relief.
    kernel : {"scharr", "sobel", "prewitt", "central"}
        Derivative kernel (:mod:`bakery.normals.kernels`). Default Scharr (most isotropic).
    blur : float
        Standard deviation in texels of a Gaussian applied to the heights first (0 = none); 0.5-1 hides the
        terraces of 8-bit heights. The blur honours ``edges``.
    edges : {"wrap", "clamp", "mirror"}
        How the texture continues past its borders: tiles (default), edge texel repeats, or mirrored.
    threads : int, optional
        Worker threads (default: the number of CPUs, at most 8). The result does not depend on it.
    out : ndarray, float32 (H, W, 3), optional
        Where to write the result.
    progress : callable, optional
        ``progress(fraction, "strips")`` as strips finish, rising to 1; the result does not depend on it.

    Returns
    -------
    ndarray, float32, (H, W, 3)
        Unit normals in [-1, 1], +X right, +Y up (toward the top row), +Z out of the surface.

    References
    ----------
    .. [1] J. F. Blinn, "Simulation of Wrinkled Surfaces", SIGGRAPH '78, 1978.

    Examples
    --------
    >>> import numpy as np
    >>> ramp = np.tile(np.arange(16, dtype=np.float32), (8, 1))  # rises by 1 per texel to the right
    >>> n = normal_from_height(ramp, strength=1.0, edges="clamp")
    >>> [round(float(v), 6) + 0.0 for v in n[4, 8]]
    [-0.707107, 0.0, 0.707107]
    """
    h = _as_height(height)
    rows, cols = h.shape
    if out is None:
        out = np.empty((rows, cols, 3), np.float32)
    elif out.shape != (rows, cols, 3) or out.dtype != np.float32:
        raise ValueError(f"out must be float32 of shape {(rows, cols, 3)}; got {out.dtype} {out.shape}")
    run_strips(h, strength=strength, kernel=kernel, blur=blur, edges=edges, threads=threads,
               target=lambda r0, r1: out[r0:r1], finish=None if progress is None else rows_done(progress, rows))
    return out


def rows_done(progress: Progress, rows: int, label: str = "strips") -> Callable[[int, int, np.ndarray], None]:
    """A ``finish`` callback for :func:`run_strips` that reports the share of ``rows`` done (strips finish on
    several threads; the count and the call share one lock, so fractions rise)."""
    lock, done = threading.Lock(), [0]

    def finish(r0: int, r1: int, block: np.ndarray) -> None:
        with lock:
            done[0] += r1 - r0
            progress(done[0] / rows, label)

    return finish


def _as_height(height: np.ndarray) -> np.ndarray:
    h = np.asarray(height)
    if h.ndim == 3 and h.shape[2] == 1:
        h = h[:, :, 0]
    if h.ndim != 2 or h.size == 0:
        raise BakeryError(f"a height map must be (H, W) or (H, W, 1); got shape {np.shape(height)}")
    if h.dtype != np.float32:
        h = h.astype(np.float32)
    return h


def strip_rows(cols: int, halo: int) -> int:
    """Rows per strip: about 128 K texels per strip (32 rows of a 4096-wide map) was fastest in
    tests/perf/bench_normals.py: its planes stay in the caches and per-call overheads stay small."""
    return int(max(4 * halo, 8, min(256, (1 << 17) // max(cols, 1))))


def run_strips(
    h: np.ndarray,
    *,
    strength: float | tuple[float, float],
    kernel: str | Kernel,
    blur: float,
    edges: str,
    threads: int | None,
    target: Callable[[int, int], np.ndarray],
    finish: Callable[[int, int, np.ndarray], None] | None = None,
    rows: int | None = None,
) -> None:
    """Compute normals strip by strip. ``target(r0, r1)`` gives a float32 (r1-r0, W, 3) array to write rows
    r0..r1 into; ``finish(r0, r1, block)`` (optional) is called once the block is complete (e.g. to encode it).
    Strips run on worker threads; each strip is written by exactly one call."""
    h = _as_height(h)
    sx, sy = _strengths(strength)
    k = get_kernel(kernel) if isinstance(kernel, str) else kernel
    check_edges(edges)
    blur = float(blur)
    if not (math.isfinite(blur) and blur >= 0):
        raise BakeryError(f"blur must be zero or a positive number of texels; got {blur!r}")
    H, W = h.shape
    radius = int(4.0 * blur + 0.5) if blur > 0 else 0  # scipy.ndimage default truncate = 4 sigma
    halo = 1 + radius
    step = rows or strip_rows(W, halo)
    colidx = edge_index(-halo, W + halo, W, edges) + halo
    local = threading.local()
    import cv2  # cv2.merge interleaves the three planes (a pure copy, no arithmetic)

    def buffers() -> dict[str, np.ndarray]:
        b = getattr(local, "buf", None)
        if b is None:
            e = np.empty
            b = local.buf = {"blk": e((step + 2 * halo, W + 2 * halo), np.float32),
                             "bx": e((step + 2, W + 2), np.float32), "by": e((step + 2, W + 2), np.float32),
                             "inv": e((step, W), np.float32), "tmp": e((step, W), np.float32)}
        return b

    def work(r0: int) -> None:
        r1 = min(H, r0 + step)
        n = r1 - r0
        b = buffers()
        blk = b["blk"][: n + 2 * halo]
        inv, tmp = b["inv"][:n], b["tmp"][:n]
        lo, hi = r0 - halo, r1 + halo
        if lo >= 0 and hi <= H:
            blk[:, halo:halo + W] = h[lo:hi]
        else:
            blk[:, halo:halo + W] = h[edge_index(lo, hi, H, edges)]
        blk[:, :halo] = blk[:, colidx[:halo]]
        blk[:, halo + W:] = blk[:, colidx[halo + W:]]
        p = blk
        if radius:
            from scipy.ndimage import gaussian_filter1d

            p = gaussian_filter1d(blk, blur, axis=0, mode="nearest", truncate=4.0)
            p = gaussian_filter1d(p, blur, axis=1, mode="nearest", truncate=4.0)
            p = p[radius:-radius, radius:-radius]
        gx, gy = slopes(p, k, -sx, -sy, b["bx"][: n + 2], b["by"][: n + 2])  # -s_x dh/dx, -s_y dh/dy
        np.multiply(gx, gx, out=inv)
        np.multiply(gy, gy, out=tmp)
        inv += tmp
        inv += np.float32(1.0)
        np.sqrt(inv, out=inv)
        np.divide(np.float32(1.0), inv, out=inv)
        gx *= inv
        gy *= inv
        dst = target(r0, r1)
        cv2.merge([gx, gy, inv], dst=dst)
        if finish is not None:
            finish(r0, r1, dst)

    starts = range(0, H, step)
    nthreads = threads or min(8, os.cpu_count() or 1)
    if nthreads <= 1 or len(starts) == 1:
        for r0 in starts:
            work(r0)
        return
    with ThreadPoolExecutor(max_workers=nthreads) as pool:
        for f in [pool.submit(work, r0) for r0 in starts]:
            f.result()
