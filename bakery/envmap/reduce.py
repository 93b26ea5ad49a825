"""Exact reductions of environment maps: 2 x 2 texels -> 1 weighted by their solid angles (an area-weighted
box, so no energy is lost or gained), the row filter of panoramas, the lookup coordinates from cube faces into a
panorama (pure array functions; representations as in
:mod:`bakery.envmap.sample`). Texel solid angles in closed form: :func:`bakery.sphere.cube_texel_solid_angles`.
"""

from __future__ import annotations

import numpy as np

from bakery import sphere
from bakery.envmap.sample import _check_cube, _cv2
from bakery.errors import BakeryError
from bakery.progress import Progress

# ----------------------------------------------------------------------------------- exact reduction


def reduce_cube(cube: np.ndarray, factor: int = 2, progress: Progress | None = None) -> np.ndarray:
    """Shrink every face by an integer ``factor`` (N divisible by it): each output texel is the average
    of its ``factor x factor`` texels weighted by their solid angles, so energy is kept exactly. Face by face;
    ``progress(fraction, "mips")`` after each."""
    _check_cube(cube)
    n = cube.shape[1]
    if n % factor:
        raise BakeryError(f"face size {n} is not divisible by {factor}")
    m = n // factor
    w = sphere.cube_texel_solid_angles(n, dtype=np.float64)
    wsum = w.reshape(m, factor, m, factor).sum(axis=(1, 3))
    out = np.empty((6, m, m, cube.shape[3]), np.float32)
    for f in range(6):
        acc = (cube[f].astype(np.float64) * w[:, :, None]).reshape(m, factor, m, factor, -1).sum(axis=(1, 3))
        out[f] = acc / wsum[:, :, None]
        if progress is not None:
            progress((f + 1) / 6, "mips")
    return out


def reduce_equirect(img: np.ndarray, fy: int = 2, fx: int | None = None) -> np.ndarray:
    """Shrink a panorama by integer factors (rows by ``fy``, columns by ``fx``, default the same): each
    output texel is the solid-angle weighted average of its block, so energy is kept exactly."""
    fx = fy if fx is None else fx
    h, w, c = img.shape
    if h % fy or w % fx:
        raise BakeryError(f"panorama {w}x{h} is not divisible by {fx}x{fy}")
    rw = sphere.equirect_row_solid_angles(w, h, dtype=np.float64)
    den = rw.reshape(h // fy, fy).sum(axis=1)
    img = np.asarray(img, dtype=np.float32)
    if fx > 1:  # the columns of each block averaged first (OpenCV's area filter at an integer factor is
        # the plain box mean), in one multithreaded pass over the image
        cv2 = _cv2()
        cols = np.empty((h, w // fx, c), dtype=np.float32)
        for ch in range(0, c, 4):
            part = np.ascontiguousarray(img[:, :, ch:ch + 4])
            res = cv2.resize(part, (w // fx, h), interpolation=cv2.INTER_AREA)
            cols[:, :, ch:ch + 4] = res.reshape(h, w // fx, -1)
    else:
        cols = img
    acc = np.zeros((h // fy, w // fx, c), dtype=np.float32)
    for i in range(fy):  # row i of every block times that row's weight
        acc += cols[i::fy] * (rw[i::fy] / den).astype(np.float32)[:, None, None]
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
