"""Resampling environment maps between layouts and sizes (pure array functions; representations as in
:mod:`bakery.envmap.sample`). Values are radiance; every filter is an average weighted by solid angle, so the
total energy ``sum(L * solid_angle)`` is kept. Also the mip chains of cubemaps and panoramas and their energy.

From a source to a destination of given size (:func:`resample`):

1. While the destination texels are at least twice as large (in angle) as the source's, the source is
   reduced exactly (:mod:`bakery.envmap.reduce`).
2. Shrinking (destination texels more than 1.25 x the source's): the conservative area-weighted filter of
   :func:`area_resample` -- energy kept to rounding, a single bright texel included.
3. Otherwise (enlarging or about equal density): one bilinear lookup per destination texel; for a panorama
   source, rows whose texels are narrower than the destination's (toward the poles) are first averaged
   along the row by a circular box of matching width (each row keeps its sum).
"""

from __future__ import annotations

import math

import numpy as np

from bakery import sphere
from bakery.envmap.reduce import _row_box_filter, cube_equirect_uv, reduce_cube, reduce_equirect
from bakery.envmap.sample import (
    _check_cube,
    pad_equirect,
    remap_bilinear,
    sample_cube,
    sample_equirect,
    sample_equirect_uv,
)
from bakery.errors import BakeryError
from bakery.progress import Progress, maybe_within

# ------------------------------------------------------------------------------------------ resampling


def texel_angle_cube(n: int) -> float:
    """Typical angular size (radians) of a cube texel: sqrt(4 pi / (6 n^2))."""
    return math.sqrt(4 * math.pi / (6 * n * n))


def texel_angle_equirect(w: int, h: int) -> float:
    """Typical angular size (radians) of a panorama texel: sqrt(4 pi / (w h))."""
    return math.sqrt(4 * math.pi / (w * h))


FILTERS = ("auto", "area", "bilinear")
#: Largest source (after the exact 2 x 2 reductions) the area filter takes: 9 matrix entries per texel,
#: about 0.8 GB at this size. Larger inputs fall back to bilinear lookups with a warning.
AREA_MAX_TEXELS = 12_000_000
#: Over-relaxation of the balancing's column steps (1 = plain Sinkhorn).
OMEGA = 1.8
#: Above this ratio of destination to source texel size, "auto" uses the area filter.
AREA_THRESHOLD = 1.25


def _lookup(src: np.ndarray, kind: str, dirs: np.ndarray) -> np.ndarray:
    if kind == "cube":
        return sample_cube(src, dirs)
    return sample_equirect(src, dirs)


def _rotate(dirs: np.ndarray, rotation_deg: float, *, inverse: bool = True) -> np.ndarray:
    if not rotation_deg:
        return dirs
    r = sphere.rotation_y(rotation_deg).astype(np.float32)
    # an output direction d shows the source at R^-1 d = d @ R; a source direction goes to R d = d @ R^T
    return dirs @ r if inverse else dirs @ r.T


def _texel_angle(src: np.ndarray, kind: str) -> float:
    if kind == "cube":
        return texel_angle_cube(src.shape[1])
    return texel_angle_equirect(src.shape[1], src.shape[0])


def _source_ratio(src: np.ndarray, kind: str, dst_angle: float) -> float:
    if kind == "cube":
        return dst_angle / texel_angle_cube(src.shape[1])
    return dst_angle / texel_angle_equirect(src.shape[1], src.shape[0])


def _source_points(src_shape: tuple[int, ...], kind: str) -> tuple[np.ndarray, np.ndarray]:
    """Directions ``(n, 3)`` and solid angles ``(n,)`` of every source texel, in storage order."""
    if kind == "cube":
        n = src_shape[1]
        d = sphere.cube_directions(n).reshape(-1, 3)
        w = np.broadcast_to(sphere.cube_texel_solid_angles(n, dtype=np.float64)[None], (6, n, n)).reshape(-1)
    else:
        h, w_ = src_shape[:2]
        d = sphere.equirect_directions(w_, h).reshape(-1, 3)
        w = np.repeat(sphere.equirect_row_solid_angles(w_, h, dtype=np.float64), w_)
    return d, w


def _dst_splat(d: np.ndarray, kind: str, size: int, cells: np.ndarray | None = None
               ) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """For each direction, the 3 x 3 destination texels around it and their quadratic B-spline weights
    (which sum to 1): 9 index arrays and 9 weight arrays, each ``(n,)``. A neighbour beyond a cube face edge
    is the nearest texel of the next face; a panorama wraps around and continues over the poles.

    The quadratic B-spline's weights for an offset d in [-0.5, 0.5] from the nearest texel centre are
    ``(0.5 - d)^2 / 2, 0.75 - d^2, (0.5 + d)^2 / 2`` (de Boor, "A Practical Guide to Splines", 1978)."""
    if kind == "cube":
        f, s, t = sphere.dir_to_face(d)
        x = s.astype(np.float64) * size - 0.5
        y = t.astype(np.float64) * size - 0.5
        base = f.astype(np.int64) * size * size
        w, h = size, size
    else:
        w, h = size, size // 2
        u, v = sphere.dir_to_equirect(d)
        y = v.astype(np.float64) * h - 0.5
        row = np.clip(np.rint(y).astype(np.int64), 0, h - 1)
        m = cells[row]  # texels per cell in this row (see _equirect_cells)
        x = u.astype(np.float64) * (w // m) - 0.5
        w = w // m  # cells per row, now per sample
        base = np.zeros(x.shape, np.int64)
    x0 = np.rint(x)
    y0 = np.rint(y)
    dx = x - x0
    dy = y - y0
    wx = (0.5 * (0.5 - dx) ** 2, 0.75 - dx * dx, 0.5 * (0.5 + dx) ** 2)
    wy = (0.5 * (0.5 - dy) ** 2, 0.75 - dy * dy, 0.5 * (0.5 + dy) ** 2)
    x0 = x0.astype(np.int64)
    y0 = y0.astype(np.int64)
    if kind == "cube":
        wt = [wy[a] * wx[b] for a in range(3) for b in range(3)]
        cols = []
        for a in (-1, 0, 1):
            for b in (-1, 0, 1):
                xi, yi = x0 + b, y0 + a
                ix = base + np.clip(yi, 0, h - 1) * w + np.clip(xi, 0, w - 1)
                out = (xi < 0) | (xi >= w) | (yi < 0) | (yi >= h)
                if np.any(out):  # a texel beyond the face edge: the neighbouring face's nearest texel
                    fo = (base[out] // (w * h))
                    dd = sphere.face_to_dir(fo, (xi[out] + 0.5) / w, (yi[out] + 0.5) / h)
                    f2, s2, t2 = sphere.dir_to_face(dd)
                    j2 = np.clip((s2 * w).astype(np.int64), 0, w - 1)
                    i2 = np.clip((t2 * h).astype(np.int64), 0, h - 1)
                    ix[out] = f2.astype(np.int64) * w * h + i2 * w + j2
                cols.append(ix)
        return cols, wt
    # panorama cells: row r holds size // cells[r] cells; cell index = row * size + cell (sparse ids)
    xs = [x0 + k for k in (-1, 0, 1)]
    # rows toward a pole hold less solid angle: share each sample among rows in proportion to their area
    # too, so a uniform source covers every row evenly from the start (balancing then converges quickly)
    row_om = sphere.equirect_row_solid_angles(size, h, dtype=np.float64)
    ry = [np.where(y0 + a < 0, -1 - (y0 + a), np.where(y0 + a >= h, 2 * h - 1 - (y0 + a), y0 + a))
          for a in (-1, 0, 1)]
    wy2 = [wy[k] * row_om[ry[k]] for k in range(3)]
    tot = wy2[0] + wy2[1] + wy2[2]
    wy2 = [q / tot for q in wy2]
    wt = [wy2[a] * wx[b] for a in range(3) for b in range(3)]
    cols = []
    for a in (-1, 0, 1):
        yi = y0 + a
        over = (yi < 0) | (yi >= h)  # beyond a pole: the same row half a turn away
        yi = np.where(yi < 0, -1 - yi, np.where(yi >= h, 2 * h - 1 - yi, yi))
        ncell = size // cells[yi]
        for b in range(3):
            # the row of a neighbouring sample may have other cells: map by longitude
            turn = (xs[b] + 0.5) / w + np.where(over, 0.5, 0.0)
            xc = np.mod(np.floor(turn * ncell).astype(np.int64), ncell)
            cols.append(yi * size + xc)
    return cols, wt


def _equirect_cells(size: int, src_angle: float) -> np.ndarray:
    """Texels per area-filter cell in each row of a ``size``-wide panorama: toward the poles, where a
    row's texels are narrower than the source's, whole runs of texels share one cell (a divisor of the
    width), so the destination is nowhere finer than the source along a row."""
    h = size // 2
    lat = np.pi * (0.5 - (np.arange(h) + 0.5) / h)
    width = (2 * np.pi / size) * np.cos(lat)
    want = np.maximum(1.0, src_angle / width)
    divisors = np.array([k for k in range(1, size + 1) if size % k == 0])
    return divisors[np.searchsorted(divisors, want, side="right") - 1].astype(np.int64)


def _cells_to_texels(vals: np.ndarray, cells: np.ndarray, size: int) -> np.ndarray:
    """Cell values ``(h * size, C)`` (cell ids row * size + cell) to texels ``(h, size, C)``: each cell's
    value spread over its texels, then smoothed along the row by a circular box as wide as the cell (both
    steps keep each row's sum)."""
    h = size // 2
    c = vals.shape[-1]
    grid = vals.reshape(h, size, c)
    out = np.empty((h, size, c), dtype=np.float64)
    for m in np.unique(cells):
        rows = np.nonzero(cells == m)[0]
        ncell = size // m
        rep = np.repeat(grid[rows, :ncell], m, axis=1)
        if m > 1:  # box of width m, centred (halves at both ends for even m)
            half = m // 2
            ext = np.concatenate([rep[:, -half - 1:], rep, rep[:, :half + 1]], axis=1)
            cs = np.concatenate([np.zeros((len(rows), 1, c)), np.cumsum(ext, axis=1)], axis=1)
            lo = np.arange(size) + 1
            hi = lo + 2 * half + 1
            full = cs[:, hi] - cs[:, lo]
            if m % 2 == 0:
                full = full - 0.5 * (ext[:, lo] + ext[:, hi - 1])
            rep = full / m
        out[rows] = rep
    return out


def _dst_solid_angles(kind: str, size: int) -> np.ndarray:
    if kind == "cube":
        return np.broadcast_to(sphere.cube_texel_solid_angles(size, dtype=np.float64)[None],
                               (6, size, size)).reshape(-1)
    return np.repeat(sphere.equirect_row_solid_angles(size, size // 2, dtype=np.float64), size)


def area_resample(src: np.ndarray, kind: str, dst_kind: str, size: int, *, rotation_deg: float = 0.0,
                  iterations: int = 40, tol: float = 1e-3, progress=None) -> np.ndarray:
    """Conservative (area-weighted) resampling: each destination texel is an average of the source texels
    around it, weighted by solid angle, and no energy is created or lost.

    Each source texel hands its solid angle to the 3 x 3 destination texels around its centre with
    quadratic B-spline weights (a smooth estimate of the overlap areas, as in first-order conservative
    remapping [2]_). The weights are then balanced by alternate row and column scaling (Sinkhorn [1]_) so
    that every source texel hands out exactly its own solid angle and every destination texel receives its
    own to ``tol``. Hence the total energy ``sum(L * solid angle)`` is kept to rounding, a single bright
    texel included, and a constant environment stays constant to ``tol``. Toward a panorama's poles, runs
    of destination texels share one cell so that no cell is finer than the source.

    Cost: a sparse matrix with 9 entries per source texel; meant for shrinking (the source is first
    reduced exactly by 2 x 2 while it is more than twice as fine, see :func:`resample`).

    Parameters
    ----------
    src : ndarray, float32
        Cubemap ``(6, N, N, C)`` or panorama ``(H, W, C)``.
    kind, dst_kind : {"cube", "equirect"}
    size : int
        Destination face size (cube) or width (panorama, height = width // 2).
    progress : callable, optional
        ``progress(fraction)``, rising, within the work: per chunk of the overlap matrix (the first 30 %),
        per balancing step (up to 95 %), at the end 1.0. The result does not depend on it.

    Returns
    -------
    ndarray, float32: ``(6, size, size, C)`` or ``(size // 2, size, C)``.

    References
    ----------
    .. [1] R. Sinkhorn, "A Relationship Between Arbitrary Positive Matrices and Doubly Stochastic
       Matrices", Ann. Math. Statist. 35(2), 1964.
    .. [2] P. W. Jones, "First- and Second-Order Conservative Remapping Schemes for Grids in Spherical
       Coordinates", Monthly Weather Review 127(9), 1999 (first-order conservative remapping: weights =
       overlap areas).
    """
    import scipy.sparse as sp

    c = src.shape[-1]
    n_src = src.size // c
    d, w = _source_points(src.shape, kind)
    cells = None
    omega_dst = _dst_solid_angles(dst_kind, size)
    if dst_kind == "equirect":
        cells = _equirect_cells(size, _texel_angle(src, kind))
        # cell solid angles at ids row * size + cell; unused ids get 0
        ncell = size // cells
        omega_dst = omega_dst.reshape(size // 2, size) * cells[:, None]
        omega_dst = np.where(np.arange(size)[None, :] < ncell[:, None], omega_dst, 0.0).reshape(-1)
    n_dst = omega_dst.size
    # the sparse overlap matrix: 9 entries per source texel, built in chunks to bound temporaries
    indices = np.empty((n_src, 9), dtype=np.int32)
    data = np.empty((n_src, 9), dtype=np.float32)
    step = 1 << 19
    for i0 in range(0, n_src, step):
        i1 = min(n_src, i0 + step)
        idx, wt = _dst_splat(_rotate(d[i0:i1], rotation_deg, inverse=False), dst_kind, size, cells)
        for k in range(9):
            indices[i0:i1, k] = idx[k]
            data[i0:i1, k] = wt[k] * w[i0:i1]
        if progress is not None:
            progress(0.3 * i1 / n_src)
    del d
    mat = sp.csr_matrix((data.reshape(-1), indices.reshape(-1), np.arange(0, 9 * n_src + 1, 9)),
                        shape=(n_src, n_dst))
    mt = mat.T  # CSC view: products with it need no conversion
    omega_src = w.astype(np.float32)
    col = mt @ np.ones(n_src, dtype=np.float32)
    covered = (col > 0) & (omega_dst > 0)
    target = np.where(covered, omega_dst, 0.0)
    # balance so that row sums = source solid angles and column sums = destination solid angles
    target = (target * (omega_src.sum(dtype=np.float64) / target.sum())).astype(np.float32)
    a = np.ones(n_src, dtype=np.float32)
    b = np.ones(n_dst, dtype=np.float32)
    for it in range(iterations):
        if it:
            col = mt @ a
            if np.all(np.abs(b * col - target) <= tol * target):
                break  # the last step fixed the rows: energy is exact
        b_new = np.divide(target, col, out=np.zeros_like(col), where=col > 0)
        # over-relaxed column step (exponent OMEGA, a common acceleration of Sinkhorn's iteration); the row
        # step below stays exact, so energy is kept whatever the number of iterations
        b = b_new if it == 0 else b * np.power(np.divide(b_new, b, out=np.ones_like(b), where=b > 0),
                                               np.float32(OMEGA))
        row = mat @ b
        a = np.divide(omega_src, row, out=np.ones_like(row), where=row > 0)
        if progress is not None:
            progress(0.3 + 0.65 * (it + 1) / iterations)
    flat = src.reshape(n_src, c).astype(np.float32)
    out = ((mt @ (flat * a[:, None])) * b[:, None]).astype(np.float64)
    out = np.divide(out, omega_dst[:, None], out=np.zeros_like(out), where=covered[:, None])
    if dst_kind == "cube":
        res = out.reshape(6, size, size, c).astype(np.float32)
        holes = ~covered
    else:
        ncell = size // cells
        used = (np.arange(size)[None, :] < ncell[:, None]).reshape(-1)
        holes_cells = used & ~covered
        res = _cells_to_texels(out, cells, size).astype(np.float32)
        # a texel is a hole when its cell is
        cell_of = (np.arange(size)[None, :] // cells[:, None])
        holes = np.take_along_axis(holes_cells.reshape(size // 2, size), cell_of, axis=1).reshape(-1)
    if holes.any():  # destination texels no source sample reached: bilinear (negligible energy)
        if dst_kind == "cube":
            dirs = sphere.cube_directions(size).reshape(-1, 3)[holes]
        else:
            dirs = sphere.equirect_directions(size, size // 2).reshape(-1, 3)[holes]
        vals = _lookup(src, kind, _rotate(dirs, rotation_deg))
        res.reshape(-1, c)[holes] = vals
    if progress is not None:
        progress(1.0)
    return res


def reduction_factor(shape: tuple[int, ...], kind: str, dst_kind: str, size: int) -> int:
    """The power-of-two factor of the exact reductions :func:`resample` applies before its lookups: the
    source is halved while the output's texels stay at least twice as large as the halved source's (and
    the size stays even). A caller may reduce by this factor (or a divisor of it) itself beforehand and
    get the same result."""
    dst_angle = texel_angle_cube(size) if dst_kind == "cube" else texel_angle_equirect(size, size // 2)
    factor = 1
    if kind == "cube":
        n = shape[1]
        while n % (2 * factor) == 0 and dst_angle / texel_angle_cube(n // factor) >= 2:
            factor *= 2
    else:
        h, w = shape[:2]
        while (h % (2 * factor) == 0 and w % (2 * factor) == 0
               and dst_angle / texel_angle_equirect(w // factor, h // factor) >= 2):
            factor *= 2
    return factor


def resample(src: np.ndarray, kind: str, dst_kind: str, size: int, *, rotation_deg: float = 0.0,
             filter: str = "auto", progress=None) -> np.ndarray:
    """Resample a cubemap or panorama to a cubemap of face ``size`` or a panorama of width ``size``.

    Parameters
    ----------
    src : ndarray, float32
        ``(6, N, N, C)`` cubemap (``kind="cube"``) or ``(H, W, C)`` panorama (``kind="equirect"``),
        radiance in any range.
    kind, dst_kind : {"cube", "equirect"}
    size : int
        Face edge (cube) or width (panorama; height is width // 2, width even).
    rotation_deg : float
        Turn the environment about the vertical axis; positive moves content to the right in a panorama
        (:func:`bakery.sphere.rotation_y`).
    filter : {"auto", "area", "bilinear"}
        "bilinear": one seamless bilinear lookup per output texel (after exact 2x2 reductions while the
        output is at least twice as coarse, and row boxes toward a panorama's poles). "area": conservative
        area-weighted resampling (:func:`area_resample`) after the same exact reductions, whenever the
        output is coarser than the input (enlarging stays bilinear). "auto" (default):
        "area" when output texels are more than :data:`AREA_THRESHOLD` times larger than the input's
        (shrinking), else "bilinear".
    progress : callable, optional
        ``progress(fraction)`` within the area filter's work (:func:`area_resample`), the last 1.0 (the
        bilinear path, one pass of lookups, reports nothing).

    Returns
    -------
    ndarray, float32: ``(6, size, size, C)`` or ``(size // 2, size, C)``.
    """
    if filter not in FILTERS:
        raise BakeryError(f"filter must be one of {FILTERS}; got {filter!r}")
    src = np.asarray(src, dtype=np.float32)
    if kind == "cube":
        _check_cube(src)
    if dst_kind == "equirect" and (size < 2 or size % 2):
        raise BakeryError(f"panorama width must be even and >= 2; got {size}")
    same = (kind == dst_kind == "cube" and src.shape[1] == size) or (
        kind == dst_kind == "equirect" and src.shape[:2] == (size // 2, size))
    if same and not rotation_deg:
        return src.copy()
    dst_angle = texel_angle_cube(size) if dst_kind == "cube" else texel_angle_equirect(size, size // 2)
    ratio0 = _source_ratio(src, kind, dst_angle)
    # the area filter needs an output coarser than the input; enlarging is always bilinear
    use_area = ratio0 > 1 and (filter == "area" or (filter == "auto" and ratio0 > AREA_THRESHOLD))
    # exact 2x2 reductions while the output is at least twice as coarse, done as one reduction
    factor = reduction_factor(src.shape, kind, dst_kind, size)
    if factor > 1:
        src = reduce_cube(src, factor) if kind == "cube" else reduce_equirect(src, factor)
    if use_area and src.size // src.shape[-1] > AREA_MAX_TEXELS:
        import warnings

        from bakery.errors import BakeryWarning

        warnings.warn(f"the area filter would need a {src.size // src.shape[-1]}-texel sparse system (limit "
                      f"{AREA_MAX_TEXELS}); using bilinear lookups, which keep the total energy but may move a "
                      "few percent of a single bright texel's", BakeryWarning, stacklevel=2)
        use_area = False
    if use_area:
        return area_resample(src, kind, dst_kind, size, rotation_deg=rotation_deg, progress=progress)
    if dst_kind == "cube" and kind == "equirect":  # the row filter writes into the padded copy: one copy
        h, w = src.shape[:2]
        x, y = cube_equirect_uv(size, rotation_deg, scale=(w, h), offset=0.5)
        padded = pad_equirect(src, rows_filter=lambda out: _row_box_filter(src, dst_angle, out=out))
        return remap_bilinear(padded, x, y)
    if kind == "equirect":
        src = _row_box_filter(src, dst_angle, dst_width=size if dst_kind == "equirect" else None)
    if kind == dst_kind == "equirect":
        # same layout: sample by coordinates (no trigonometry); a turn is a shift of u
        h = size // 2
        u = (np.arange(size, dtype=np.float64) + 0.5) / size - rotation_deg / 360.0
        v = (np.arange(h, dtype=np.float64) + 0.5) / h
        uu, vv = np.broadcast_arrays(u[None, :].astype(np.float32), v[:, None].astype(np.float32))
        return sample_equirect_uv(src, uu, vv)
    if dst_kind == "cube":
        dirs = sphere.cube_directions(size)
    else:
        dirs = sphere.equirect_directions(size, size // 2)
    return _lookup(src, kind, _rotate(dirs, rotation_deg))


def energy(env: np.ndarray, kind: str) -> np.ndarray:
    """Total energy per channel, ``sum(L * solid angle)`` (float64), of a cubemap or panorama."""
    env = np.asarray(env)
    if kind == "cube":
        w = sphere.cube_texel_solid_angles(env.shape[1], dtype=np.float64)
        return np.einsum("fijc,ij->c", env.astype(np.float64), w)
    w = sphere.equirect_row_solid_angles(env.shape[1], env.shape[0], dtype=np.float64)
    return np.einsum("ijc,i->c", env.astype(np.float64), w)


def cube_mip_chain(cube: np.ndarray, levels: int | None = None,
                   progress: Progress | None = None) -> list[np.ndarray]:
    """Level 0 and its smaller levels down to 1 x 1 (or ``levels`` in all): each level the solid-angle
    weighted 2 x 2 average of the one before (:func:`reduce_cube`), or the area-weighted resampling
    (:func:`area_resample`) where a face size is odd. ``progress(fraction, "mips")`` after each level, by the
    texels read (level 1 reads three quarters of them), rising to 1."""
    _check_cube(cube)
    out = [np.asarray(cube, dtype=np.float32)]
    total = levels or int(cube.shape[1]).bit_length()
    while len(out) < total and out[-1].shape[1] > 1:
        cur = out[-1]
        n = cur.shape[1]
        step = maybe_within(progress, 1 - 4.0 ** -(len(out) - 1), min(1.0, 1 - 4.0 ** -len(out)))
        out.append(reduce_cube(cur, progress=step) if n % 2 == 0 else area_resample(cur, "cube", "cube", n // 2))
        if progress is not None:
            progress(min(1.0, 1 - 4.0 ** -(len(out) - 1)), "mips")
    if progress is not None:
        progress(1.0, "mips")
    return out


def equirect_mip_chain(img: np.ndarray, progress: Progress | None = None) -> list[np.ndarray]:
    """Level 0 and its smaller levels down to 1 x 1 (sizes ``max(1, W >> i) x max(1, H >> i)`` as KTX2
    expects), each the solid-angle weighted average of the one before (:func:`reduce_equirect`) or, where a
    size is odd, the area-weighted resampling; energy is kept at every level. ``progress`` as
    :func:`cube_mip_chain`'s."""
    out = [np.asarray(img, dtype=np.float32)]
    h0, w0 = out[0].shape[:2]
    level = 1
    while max(w0 >> (level - 1), h0 >> (level - 1)) > 1:
        cur = out[-1]
        h, w = cur.shape[:2]
        nh, nw = max(1, h0 >> level), max(1, w0 >> level)
        if h % nh == 0 and w % nw == 0:
            nxt = reduce_equirect(cur, h // nh, w // nw)
        elif nw == 2 * nh and nw % 2 == 0:
            nxt = area_resample(cur, "equirect", "equirect", nw)
        else:  # a last, tiny level: the solid-angle mean over all texels
            mean = energy(cur, "equirect") / (4 * math.pi)
            nxt = np.broadcast_to(mean.astype(np.float32), (nh, nw, cur.shape[2])).copy()
        out.append(nxt)
        level += 1
        if progress is not None:
            progress(min(1.0, 1 - 4.0 ** -(level - 1)), "mips")
    if progress is not None:
        progress(1.0, "mips")
    return out
