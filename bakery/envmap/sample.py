"""Seamless lookups in environment maps (pure array functions).

Representations
---------------
- **cubemap**: float32 ``(6, N, N, C)``, faces +X, -X, +Y, -Y, +Z, -Z oriented as in :mod:`bakery.sphere`.
- **equirect**: float32 ``(H, W, C)`` panorama in bakery's orientation (centre -Z, top +Y), normally W = 2H.

Lookups are bilinear and seamless: cube faces are padded with one texel taken from their neighbours across
each edge (so a lookup near an edge blends the two faces), panoramas wrap around horizontally and across the
poles (the texel beyond the top row is the top row half a turn away). Exact reductions and mip chains are in
:mod:`bakery.envmap.reduce`, resampling between layouts and sizes in :mod:`bakery.envmap.resample`.
"""

from __future__ import annotations

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
