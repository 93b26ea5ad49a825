"""Seamless sampling and resampling of environment maps (pure array functions).

Representations
---------------
- **cubemap**: float32 ``(6, N, N, C)``, faces +X, -X, +Y, -Y, +Z, -Z oriented as in :mod:`bakery.sphere`.
- **equirect**: float32 ``(H, W, C)`` panorama in bakery's orientation (centre -Z, top +Y), normally W = 2H.

Values are radiance; every filter here is an average weighted by solid angle, so the total energy
``sum(L * solid_angle)`` is kept.

Method
------
Lookups are bilinear and seamless: cube faces are padded with one texel taken from their neighbours across
each edge (so a lookup near an edge blends the two faces), panoramas wrap around horizontally and across the
poles (the texel beyond the top row is the top row half a turn away).

Resampling from a source to a destination of given size (:func:`resample`):

1. While the destination texels are at least twice as large (in angle) as the source's, the source is
   reduced exactly: 2 x 2 texels -> 1, weighted by their solid angles (an area-weighted box filter, so no
   energy is lost or gained).
2. Shrinking (destination texels more than 1.25 x the source's): the conservative area-weighted filter of
   :func:`area_resample` -- energy kept to rounding, a single bright texel included.
3. Otherwise (enlarging or about equal density): one bilinear lookup per destination texel; for a panorama
   source, rows whose texels are narrower than the destination's (toward the poles) are first averaged
   along the row by a circular box of matching width (each row keeps its sum).

The area-weighted reduction follows the usual solid-angle weighting of cube-map texels (texel solid angle
in closed form, :func:`bakery.sphere.cube_texel_solid_angles`).
"""

from __future__ import annotations

import math

import numpy as np

from bakery import sphere
from bakery.errors import BakeryError

_MAX_MAP = 32000  # cv2.remap needs every dimension of source and maps below 32767


def _cv2():
    import cv2

    return cv2


def _check_cube(cube: np.ndarray) -> None:
    if cube.ndim != 4 or cube.shape[0] != 6 or cube.shape[1] != cube.shape[2]:
        raise BakeryError(f"a cubemap must be (6, N, N, C); got {cube.shape}")


def remap_bilinear(src: np.ndarray, x: np.ndarray, y: np.ndarray, *, wrap: bool = False) -> np.ndarray:
    """Bilinear lookups of float32 ``(h, w, C)`` at pixel coordinates (x, y) (texel centres at integers),
    clamped at the source border (``wrap``: continued periodically). ``x``, ``y`` may have any shape; returns
    ``x.shape + (C,)``. Any number of points and channels: the lookups run in tiles that OpenCV's ``remap``
    accepts (every dimension below 32767, at most 4 channels)."""
    cv2 = _cv2()
    border = cv2.BORDER_WRAP if wrap else cv2.BORDER_REPLICATE
    shape = x.shape
    n = x.size
    c = src.shape[2]
    src = np.ascontiguousarray(src, dtype=np.float32)
    x = np.ascontiguousarray(x, dtype=np.float32).reshape(-1)
    y = np.ascontiguousarray(y, dtype=np.float32).reshape(-1)
    cols = min(n, 4096) or 1
    rows = -(-n // cols)
    pad = rows * cols - n
    if pad:
        x = np.concatenate([x, np.zeros(pad, np.float32)])
        y = np.concatenate([y, np.zeros(pad, np.float32)])
    x = x.reshape(rows, cols)
    y = y.reshape(rows, cols)
    if c <= 4 and rows <= _MAX_MAP:  # one call, no copies
        out = cv2.remap(src, x, y, cv2.INTER_LINEAR, borderMode=border)
        return out.reshape(rows * cols, c)[:n].reshape(shape + (c,))
    out = np.empty((rows, cols, c), dtype=np.float32)
    for r0 in range(0, rows, _MAX_MAP):
        r1 = min(rows, r0 + _MAX_MAP)
        for c0 in range(0, c, 4):  # OpenCV handles up to 4 channels per call
            part = cv2.remap(np.ascontiguousarray(src[:, :, c0:c0 + 4]), x[r0:r1], y[r0:r1],
                             cv2.INTER_LINEAR, borderMode=border)
            out[r0:r1, :, c0:c0 + 4] = part.reshape(r1 - r0, cols, -1)
    return out.reshape(rows * cols, c)[:n].reshape(shape + (c,))


# ------------------------------------------------------------------------------------------- lookups


def pad_equirect(img: np.ndarray, *, rows_filter=None) -> np.ndarray:
    """A panorama with one texel of border on each side, continued across the wrap and over the poles
    (the texel above row 0 at column x is row 0 at column x + W/2). ``rows_filter(out)``, if given, may
    rewrite rows of the copy (``out`` is the ``(H, W, C)`` interior) before the border is filled."""
    h, w, c = img.shape
    out = np.empty((h + 2, w + 2, c), dtype=np.float32)
    inner = out[1:-1, 1:-1]
    inner[...] = img  # one copy (numpy's strided copy was twice as fast as OpenCV's copyMakeBorder here)
    if rows_filter is not None:
        rows_filter(inner)
    out[1:-1, 0] = inner[:, -1]
    out[1:-1, -1] = inner[:, 0]
    half = w // 2
    for row, src_row in ((0, 1), (h + 1, h)):
        line = np.roll(out[src_row, 1:-1], -half, axis=0)
        out[row, 1:-1] = line
        out[row, 0] = line[-1]
        out[row, -1] = line[0]
    return out


def sample_equirect(img: np.ndarray, dirs: np.ndarray) -> np.ndarray:
    """Bilinear radiance of a panorama ``(H, W, C)`` in directions ``(..., 3)``; returns ``(..., C)``.

    Seamless across the left/right wrap and over the poles.
    """
    h, w, _ = img.shape
    u, v = sphere.dir_to_equirect(np.asarray(dirs, dtype=np.float32))
    return sample_equirect_uv(img, u, v)


def sample_equirect_uv(img: np.ndarray, u: np.ndarray, v: np.ndarray, *, wrapped: bool = False) -> np.ndarray:
    """Bilinear lookups at panorama coordinates (u, v) in [0, 1] (u wraps; pass ``wrapped=True`` when u is
    already in [0, 1))."""
    h, w, _ = img.shape
    x = np.asarray(u, dtype=np.float32)
    x = x * np.float32(w) if wrapped else np.mod(x, np.float32(1)) * np.float32(w)
    x += np.float32(0.5)  # +1 for the border, -0.5 for texel centres
    y = np.asarray(v, dtype=np.float32) * np.float32(h)
    y += np.float32(0.5)
    return remap_bilinear(pad_equirect(np.asarray(img, dtype=np.float32)), x, y)


_ATLAS = ((0, 0), (0, 1), (0, 2), (1, 0), (1, 1), (1, 2))  # (row, col) of each face in a 2 x 3 atlas


def _atlas(faces: np.ndarray, border: int) -> np.ndarray:
    _, n, _, c = faces.shape
    m = n + 2 * border
    out = np.zeros((2 * m, 3 * m, c), dtype=np.float32)
    for f, (r, q) in enumerate(_ATLAS):
        out[r * m + border: r * m + border + n, q * m + border: q * m + border + n] = faces[f]
    return out


def pad_cube(cube: np.ndarray) -> np.ndarray:
    """Faces with one texel of border, ``(6, N+2, N+2, C)``, the border taken from the neighbouring faces
    (bilinear lookups at the directions of the border texel centres)."""
    _check_cube(cube)
    n = cube.shape[1]
    idx = np.arange(-1, n + 1)
    # border texels of the padded (n+2)^2 grid, in padded coordinates
    ring = [(i, j) for i in (0, n + 1) for j in range(n + 2)] + [(i, j) for i in range(1, n + 1)
                                                                  for j in (0, n + 1)]
    ri = np.array([p[0] for p in ring])
    rj = np.array([p[1] for p in ring])
    s = (idx[rj] + 0.5) / n
    t = (idx[ri] + 0.5) / n
    f = np.repeat(np.arange(6), len(ring))
    d = sphere.face_to_dir(f, np.tile(s, 6).astype(np.float64), np.tile(t, 6).astype(np.float64))
    face, ss, tt = sphere.dir_to_face(d)
    atlas = _atlas(cube.astype(np.float32, copy=False), 0)
    rows = np.array([_ATLAS[k][0] for k in range(6)])[face]
    cols = np.array([_ATLAS[k][1] for k in range(6)])[face]
    x = np.clip(ss * n - 0.5, 0, n - 1) + cols * n
    y = np.clip(tt * n - 0.5, 0, n - 1) + rows * n
    vals = remap_bilinear(atlas, x.astype(np.float32), y.astype(np.float32))
    out = np.zeros((6, n + 2, n + 2, cube.shape[3]), dtype=np.float32)
    out[:, 1:-1, 1:-1] = cube
    out[f, np.tile(ri, 6), np.tile(rj, 6)] = vals
    return out


def sample_cube(cube: np.ndarray, dirs: np.ndarray, *, padded_atlas: np.ndarray | None = None) -> np.ndarray:
    """Bilinear radiance of a cubemap ``(6, N, N, C)`` in directions ``(..., 3)``; returns ``(..., C)``.

    Seamless across face edges and corners. ``padded_atlas`` (from :func:`cube_atlas`) saves rebuilding the
    padded faces when sampling the same cubemap many times.
    """
    _check_cube(cube)
    n = cube.shape[1]
    atlas = cube_atlas(cube) if padded_atlas is None else padded_atlas
    face, s, t = sphere.dir_to_face(np.asarray(dirs, dtype=np.float32))
    return _sample_atlas(atlas, n, face, s, t)


def cube_atlas(cube: np.ndarray) -> np.ndarray:
    """The padded faces of a cubemap arranged in a 2 x 3 atlas (for repeated :func:`sample_cube` calls)."""
    padded = pad_cube(cube)
    n2 = padded.shape[1]
    out = np.empty((2 * n2, 3 * n2, cube.shape[3]), dtype=np.float32)
    for f, (r, q) in enumerate(_ATLAS):
        out[r * n2:(r + 1) * n2, q * n2:(q + 1) * n2] = padded[f]
    return out


def _sample_atlas(atlas: np.ndarray, n: int, face: np.ndarray, s: np.ndarray, t: np.ndarray) -> np.ndarray:
    m = n + 2
    rows = np.array([r for r, _ in _ATLAS], dtype=np.float32)[face]
    cols = np.array([q for _, q in _ATLAS], dtype=np.float32)[face]
    x = s * np.float32(n) + np.float32(0.5) + cols * np.float32(m)
    y = t * np.float32(n) + np.float32(0.5) + rows * np.float32(m)
    return remap_bilinear(atlas, x, y)


# ----------------------------------------------------------------------------------- exact reduction


def reduce_cube(cube: np.ndarray, factor: int = 2) -> np.ndarray:
    """Shrink every face by an integer ``factor`` (N divisible by it): each output texel is the average
    of its ``factor x factor`` texels weighted by their solid angles, so energy is kept exactly."""
    _check_cube(cube)
    n = cube.shape[1]
    if n % factor:
        raise BakeryError(f"face size {n} is not divisible by {factor}")
    m = n // factor
    w = sphere.cube_texel_solid_angles(n, dtype=np.float64)
    wsum = w.reshape(m, factor, m, factor).sum(axis=(1, 3))
    acc = (cube.astype(np.float64) * w[None, :, :, None]).reshape(6, m, factor, m, factor, -1)
    acc = acc.sum(axis=(2, 4))
    return (acc / wsum[None, :, :, None]).astype(np.float32)


def reduce_equirect(img: np.ndarray, fy: int = 2, fx: int | None = None) -> np.ndarray:
    """Shrink a panorama by integer factors (rows by ``fy``, columns by ``fx``, default the same): each
    output texel is the solid-angle weighted average of its block, so energy is kept exactly."""
    fx = fy if fx is None else fx
    h, w, c = img.shape
    if h % fy or w % fx:
        raise BakeryError(f"panorama {w}x{h} is not divisible by {fx}x{fy}")
    rw = sphere.equirect_row_solid_angles(w, h, dtype=np.float64)
    den = rw.reshape(h // fy, fy).sum(axis=1)
    acc = np.zeros((h // fy, w // fx, c), dtype=np.float32)
    for i in range(fy):  # row i of every block, its columns summed, times that row's weight
        rows = np.asarray(img[i::fy], dtype=np.float32)
        colsum = rows[:, 0::fx].copy()
        for j in range(1, fx):
            colsum += rows[:, j::fx]
        acc += colsum * (rw[i::fy] / (den * fx)).astype(np.float32)[:, None, None]
    return acc


def _row_box_filter(img: np.ndarray, target: float, *, dst_width: int | None = None,
                    out: np.ndarray | None = None) -> np.ndarray:
    """Average each panorama row along its length with a circular box as wide as ``target`` radians,
    where the row's texels are narrower than that (toward the poles). Each row keeps its sum. For a
    panorama destination of ``dst_width``, the box is as wide as a destination texel of the same row.
    ``out``: an array holding a copy of ``img`` whose filtered rows are rewritten (default: a new copy, or
    ``img`` itself when no row needs filtering)."""
    h, w, c = img.shape
    if dst_width is not None:
        m = np.full(h, max(1, w // dst_width), dtype=np.int64)
    else:
        lat = np.pi * (0.5 - (np.arange(h) + 0.5) / h)
        width = (2 * np.pi / w) * np.cos(lat)
        m = np.minimum(np.floor(target / np.maximum(width, 1e-12)).astype(np.int64), w)
    rows = np.nonzero(m >= 2)[0]
    if rows.size == 0:
        return img if out is None else out
    if out is None:
        out = img.copy()
    whole = rows[m[rows] >= w - 1]
    if whole.size:
        out[whole] = img[whole].astype(np.float64).mean(axis=1, keepdims=True).astype(np.float32)
    rows = rows[m[rows] < w - 1]
    if rows.size == 0:
        return out
    cv2 = _cv2()
    # bands of rows sharing one width (the width grows toward the poles); an odd box of that width, made
    # circular by wrapping the band (cv2.blur keeps each row's sum then)
    widths = m[rows] - (m[rows] % 2 == 0)  # odd: centred on the texel
    start = 0
    while start < rows.size:
        stop = start
        while stop + 1 < rows.size and widths[stop + 1] == widths[start] and rows[stop + 1] == rows[stop] + 1:
            stop += 1
        k = int(widths[start])
        band = rows[start:stop + 1]
        if k > 1:
            half = k // 2
            block = np.ascontiguousarray(img[band[0]:band[-1] + 1])
            ext = np.concatenate([block[:, w - half:], block, block[:, :half]], axis=1)
            if c <= 4:
                sm = cv2.blur(ext, (k, 1), borderType=cv2.BORDER_REPLICATE).reshape(ext.shape)
            else:
                cs = np.cumsum(ext.astype(np.float64), axis=1)
                cs = np.concatenate([np.zeros((ext.shape[0], 1, c)), cs], axis=1)
                sm = np.zeros_like(ext)
                sm[:, half:half + w] = (cs[:, k:k + w] - cs[:, :w]) / k
            out[band[0]:band[-1] + 1] = sm[:, half:half + w]
        start = stop + 1
    return out


def _unfold(q: np.ndarray, n: int, col, row, both) -> np.ndarray:
    """An ``(n, n)`` array from its quadrant ``q`` of the first ``(n + 1) // 2`` rows and columns: the other
    three are ``col(q)`` mirrored left-right, ``row(q)`` mirrored top-bottom and ``both(q)`` mirrored both ways
    (an odd n's middle row and column are written twice, with equal values)."""
    h = q.shape[0]
    out = np.empty((n, n), dtype=q.dtype)
    out[:h, :h] = q
    out[:h, n - h:] = col(q[:, ::-1])
    out[n - h:, :h] = row(q[::-1])
    out[n - h:, n - h:] = both(q[::-1, ::-1])
    return out


def cube_equirect_uv(n: int, rotation_deg: float = 0.0, *, scale: tuple[int, int] = (1, 1),
                     offset: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Panorama coordinates (u, v) of the texel centres of a cubemap of face ``n``, ``(6, n, n)`` each,
    float32; the same as :func:`bakery.sphere.dir_to_equirect` of :func:`bakery.sphere.cube_directions`
    but with a quarter of the trigonometry: the four side faces are quarter turns of one another (u shifts by
    1/4), the bottom face mirrors the top one, and within a face the angles of the other three quadrants
    follow from the first one's by reflections. ``rotation_deg`` shifts u by ``-rotation_deg / 360`` (where
    an output texel finds its source after :func:`bakery.sphere.rotation_y`). With ``scale = (W, H)`` and
    ``offset`` the results are ``u W + offset`` and ``v H + offset`` (remap coordinates)."""
    c = (2 * sphere.face_texel_coords(n, np.float64) - 1).astype(np.float32)
    h = (n + 1) // 2
    cq = c[:h]  # <= 0
    sx, sy, off = np.float32(scale[0]), np.float32(scale[1]), np.float32(offset)
    shift = -rotation_deg / 360.0
    last = np.float32(np.nextafter(np.float32(1), np.float32(0)))
    u = np.empty((6, n, n), dtype=np.float32)
    v = np.empty((6, n, n), dtype=np.float32)
    # side faces: face +Z (layer 4) looks along bakery -Z, direction (s_c, -t_c, -1); u depends on the
    # column only; v = 1/2 + atan(t_c / sqrt(s_c^2 + 1)) / pi, even in s_c and v -> 1 - v with t_c -> -t_c
    u_front = np.arctan(c.astype(np.float64)) / (2 * np.pi) + 0.5
    vq = np.float32(0.5) + np.arctan(cq[:, None] / np.sqrt(cq[None, :] * cq[None, :] + np.float32(1))) * np.float32(
        1 / np.pi)
    v_side = _unfold(vq, n, lambda a: a, lambda a: 1 - a, lambda a: 1 - a) * sy + off
    for f, centre in ((0, 0.75), (1, 0.25), (4, 0.5), (5, 1.0)):
        uu = np.minimum(np.mod(u_front + (centre - 0.5) + shift, 1.0), np.nextafter(1.0, 0.0))
        u[f] = (uu * sx + off).astype(np.float32)[None, :]
        v[f] = v_side
    # +Y (layer 2): direction (s_c, 1, -t_c): latitude atan2(1, r) = pi/2 - atan(r), r = |(s_c, t_c)|, the
    # same in all four quadrants; u = atan2(s_c, t_c) / 2pi + 1/2 (in turns: w -> -w with s_c -> -s_c,
    # 1/2 - w with t_c -> -t_c). -Y (layer 3): direction (s_c, -1, t_c), the top face mirrored top-bottom.
    rq = np.sqrt(cq[:, None] * cq[:, None] + cq[None, :] * cq[None, :])
    latq = np.float32(0.5) - np.arctan(rq) * np.float32(1 / np.pi)  # latitude / pi
    lat = _unfold(latq, n, lambda a: a, lambda a: a, lambda a: a)
    v[2] = (np.float32(0.5) - lat) * sy + off
    v[3] = (np.float32(0.5) + lat) * sy + off
    wq = np.arctan2(cq[None, :], cq[:, None]) * np.float32(0.5 / np.pi)
    top = _unfold(wq, n, lambda a: -a, lambda a: 0.5 - a, lambda a: a + 0.5)
    if n % 2:  # an odd face's centre texel looks at the pole: atan2(0, 0) = 0, as the direction gives
        top[h - 1, h - 1] = 0
    top += np.float32(0.5 + shift)
    top -= np.floor(top)
    np.minimum(top, last, out=top)
    u[2] = top * sx + off
    u[3] = u[2][::-1]
    return u, v


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
                  iterations: int = 40, tol: float = 1e-3) -> np.ndarray:
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
    return res


def resample(src: np.ndarray, kind: str, dst_kind: str, size: int, *, rotation_deg: float = 0.0,
             filter: str = "auto") -> np.ndarray:
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
    # exact 2x2 reductions while the output is at least twice as coarse
    while True:
        ratio = _source_ratio(src, kind, dst_angle)
        if ratio < 2:
            break
        if kind == "cube" and src.shape[1] % 2 == 0:
            src = reduce_cube(src)
        elif kind == "equirect" and src.shape[0] % 2 == 0 and src.shape[1] % 2 == 0:
            src = reduce_equirect(src)
        else:
            break
    if use_area and src.size // src.shape[-1] > AREA_MAX_TEXELS:
        import warnings

        from bakery.errors import BakeryWarning

        warnings.warn(f"the area filter would need a {src.size // src.shape[-1]}-texel sparse system (limit "
                      f"{AREA_MAX_TEXELS}); using bilinear lookups, which keep the total energy but may move a "
                      "few percent of a single bright texel's", BakeryWarning, stacklevel=2)
        use_area = False
    if use_area:
        return area_resample(src, kind, dst_kind, size, rotation_deg=rotation_deg)
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


def cube_mip_chain(cube: np.ndarray, levels: int | None = None) -> list[np.ndarray]:
    """Level 0 and its smaller levels down to 1 x 1 (or ``levels`` in all): each level the solid-angle
    weighted 2 x 2 average of the one before (:func:`reduce_cube`), or the area-weighted resampling
    (:func:`area_resample`) where a face size is odd."""
    _check_cube(cube)
    out = [np.asarray(cube, dtype=np.float32)]
    total = levels or int(cube.shape[1]).bit_length()
    while len(out) < total and out[-1].shape[1] > 1:
        cur = out[-1]
        n = cur.shape[1]
        out.append(reduce_cube(cur) if n % 2 == 0 else area_resample(cur, "cube", "cube", n // 2))
    return out


def equirect_mip_chain(img: np.ndarray) -> list[np.ndarray]:
    """Level 0 and its smaller levels down to 1 x 1 (sizes ``max(1, W >> i) x max(1, H >> i)`` as KTX2
    expects), each the solid-angle weighted average of the one before (:func:`reduce_equirect`) or, where a
    size is odd, the area-weighted resampling; energy is kept at every level."""
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
    return out
