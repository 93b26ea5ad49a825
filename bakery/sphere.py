"""Directions on the sphere: cube-map faces, equirectangular panoramas, texel solid angles.

The shared geometry of every environment-map capability. Pure functions on numpy arrays.

Conventions
-----------
Directions are ``(..., 3)`` float32 unit vectors in bakery's **right-handed** space, +Y up.

**Equirectangular** (bakery's own orientation; there is no standard). Texel (x, y) of a W x H panorama has
``u = (x + 0.5)/W``, ``v = (y + 0.5)/H``, longitude ``phi = 2 pi (u - 0.5)``, latitude
``theta = pi (0.5 - v)`` and direction ``d = (sin phi cos theta, sin theta, -cos phi cos theta)``. The image
centre looks along -Z, the top row is +Y, a quarter of the width right of the centre is +X: seen from inside
the sphere the panorama is not mirrored.

**Cube faces** are stored in the order +X, -X, +Y, -Y, +Z, -Z (layer 0..5), each face an N x N image whose
rows run top to bottom, oriented by the cube-map face selection table of the Vulkan specification [1]_
(the table KTX 2.0 uses [2]_):

====  =====  ======  ======  ====
face  layer  s_c     t_c     r_c
====  =====  ======  ======  ====
+X    0      -r_z    -r_y    r_x
-X    1      +r_z    -r_y    r_x
+Y    2      +r_x    +r_z    r_y
-Y    3      +r_x    -r_z    r_y
+Z    4      +r_x    -r_y    r_z
-Z    5      -r_x    -r_y    r_z
====  =====  ======  ======  ====

with ``s = 0.5 s_c/|r_c| + 0.5`` (growing to the right) and ``t = 0.5 t_c/|r_c| + 0.5`` (growing down the
rows). That table lives in a left-handed space (KTX 2.0 specification, appendix on cubemap orientation [2]_):
looking along its +Z with +Y up, +X is on the right. bakery's space is right-handed, so one axis flips
between the two. The flip is :data:`CUBE_FROM_WORLD` and is applied in :func:`to_cube_space` /
:func:`from_cube_space` only: **cube-table z = -(bakery z)**. So the face labelled +Z holds the view toward
bakery's -Z, which is the centre of a panorama, and the face labelled +X holds bakery's +X. Every face, seen
from inside the sphere, is the right way round (not mirrored), and a horizontal cross reads
``-X | +Z | +X | -Z`` like the middle band of the panorama.

References
----------
.. [1] The Khronos Group, "Vulkan 1.3 Specification", section 16.5.4 "Cube Map Face Selection",
   table "Cube map face selection and transformations".
.. [2] The Khronos Group, "KTX File Format Specification, version 2.0", section 4.2 (faceCount) and the
   appendix on cubemap orientation.
"""

from __future__ import annotations

import math

import numpy as np

#: Face names in storage order (layer 0..5).
FACE_NAMES: tuple[str, ...] = ("+X", "-X", "+Y", "-Y", "+Z", "-Z")

#: The handedness flip, in one place: multiply a bakery (right-handed) direction by this to get the
#: direction in the left-handed space of the Vulkan face selection table, and back.
CUBE_FROM_WORLD = np.array([1.0, 1.0, -1.0], dtype=np.float32)

# Vulkan face selection table: for each face, (major axis index, sign of major axis, (axis, sign) for s_c,
# (axis, sign) for t_c), in the table's own (left-handed) space.
_FACE_TABLE = (
    (0, +1, (2, -1), (1, -1)),  # +X: s_c = -rz, t_c = -ry
    (0, -1, (2, +1), (1, -1)),  # -X: s_c = +rz, t_c = -ry
    (1, +1, (0, +1), (2, +1)),  # +Y: s_c = +rx, t_c = +rz
    (1, -1, (0, +1), (2, -1)),  # -Y: s_c = +rx, t_c = -rz
    (2, +1, (0, +1), (1, -1)),  # +Z: s_c = +rx, t_c = -ry
    (2, -1, (0, -1), (1, -1)),  # -Z: s_c = -rx, t_c = -ry
)


def to_cube_space(d: np.ndarray) -> np.ndarray:
    """Bakery (right-handed) directions to the left-handed space of the face selection table."""
    return np.asarray(d) * CUBE_FROM_WORLD.astype(np.asarray(d).dtype, copy=False)


def from_cube_space(d: np.ndarray) -> np.ndarray:
    """Directions in the face table's left-handed space back to bakery's right-handed space."""
    return np.asarray(d) * CUBE_FROM_WORLD.astype(np.asarray(d).dtype, copy=False)


def normalize(v: np.ndarray) -> np.ndarray:
    """Unit vectors along the last axis (zero vectors stay zero)."""
    v = np.asarray(v)
    n = np.sqrt(np.sum(v * v, axis=-1, keepdims=True))
    return v / np.where(n > 0, n, 1)


# ------------------------------------------------------------------------------------------ cube faces


def dir_to_face(d: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cube face and face coordinates of directions.

    Parameters
    ----------
    d : ndarray, (..., 3)
        Directions in bakery's space (need not be unit length; must not be zero).

    Returns
    -------
    face : ndarray of int8, (...)
        Layer 0..5 (+X, -X, +Y, -Y, +Z, -Z). Ties between equal major components go to x before y before z.
    s, t : ndarray, (...)
        Face coordinates in [0, 1]; s grows to the right, t grows down the rows (Vulkan table, ref. [1]
        of the module).

    Examples
    --------
    >>> f, s, t = dir_to_face(np.array([0.0, 0.0, -1.0]))   # bakery -Z: the panorama centre
    >>> int(f), float(s), float(t)
    (4, 0.5, 0.5)
    """
    c = to_cube_space(np.asarray(d, dtype=np.float64 if np.asarray(d).dtype == np.float64 else np.float32))
    x, y, z = c[..., 0], c[..., 1], c[..., 2]
    ax, ay, az = np.abs(x), np.abs(y), np.abs(z)
    is_x = (ax >= ay) & (ax >= az)
    is_y = ~is_x & (ay >= az)
    face = np.where(is_x, np.where(x >= 0, 0, 1), np.where(is_y, np.where(y >= 0, 2, 3),
                                                           np.where(z >= 0, 4, 5))).astype(np.int8)
    ma = np.where(is_x, ax, np.where(is_y, ay, az))
    ma = np.where(ma > 0, ma, 1)
    # s_c and t_c per face (Vulkan table)
    sc = np.select([face == 0, face == 1, face == 4, face == 5], [-z, z, x, -x], default=x)
    tc = np.select([face == 2, face == 3], [z, -z], default=-y)
    half = c.dtype.type(0.5)
    s = half * sc / ma + half
    t = half * tc / ma + half
    return face, s, t


def face_to_dir(face: np.ndarray | int, s: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Unit directions (bakery space) of face coordinates; inverse of :func:`dir_to_face`.

    ``s`` and ``t`` may run outside [0, 1]: the direction then extends the face plane beyond its edge (used
    for seamless borders).
    """
    s = np.asarray(s)
    dtype = np.float64 if s.dtype == np.float64 else np.float32
    s = s.astype(dtype, copy=False)
    t = np.asarray(t, dtype=dtype)
    face = np.asarray(face)
    sc = 2 * s - 1
    tc = 2 * t - 1
    sc, tc, face = np.broadcast_arrays(sc, tc, face)
    out = np.zeros(sc.shape + (3,), dtype=dtype)
    for f, (major, sign, (sa, ss), (ta, ts)) in enumerate(_FACE_TABLE):
        m = face == f
        out[..., major][m] = sign
        out[..., sa][m] = ss * sc[m]
        out[..., ta][m] = ts * tc[m]
    return normalize(from_cube_space(out)).astype(dtype, copy=False)


def face_texel_coords(n: int, dtype=np.float32) -> np.ndarray:
    """Centres of n texels along a face axis in [0, 1]: ``(i + 0.5)/n``."""
    return ((np.arange(n, dtype=np.float64) + 0.5) / n).astype(dtype)


def cube_directions(n: int, *, dtype=np.float32) -> np.ndarray:
    """Directions of the texel centres of all six faces, ``(6, n, n, 3)`` (bakery space).

    ``[f, i, j]`` is face f, row i (t), column j (s).
    """
    c = 2 * face_texel_coords(n, np.float64) - 1  # s_c along columns, t_c along rows
    sc = np.broadcast_to(c[None, :], (n, n))
    tc = np.broadcast_to(c[:, None], (n, n))
    inv = 1.0 / np.sqrt(sc * sc + tc * tc + 1.0)
    out = np.empty((6, n, n, 3), dtype=dtype)
    flip = CUBE_FROM_WORLD.astype(np.float64)
    for f, (major, sign, (sa, ss), (ta, ts)) in enumerate(_FACE_TABLE):
        out[f, :, :, major] = sign * inv * flip[major]
        out[f, :, :, sa] = ss * sc * inv * flip[sa]
        out[f, :, :, ta] = ts * tc * inv * flip[ta]
    return out


def face_centers() -> np.ndarray:
    """The direction each face looks along, ``(6, 3)`` in bakery space."""
    return face_to_dir(np.arange(6), np.full(6, 0.5), np.full(6, 0.5))


def _area_element(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    return np.arctan2(x * y, np.sqrt(x * x + y * y + 1))


def cube_texel_solid_angles(n: int, *, dtype=np.float32) -> np.ndarray:
    """Solid angle of each texel of one cube face, ``(n, n)`` (the same for every face), in steradians.

    Closed form: with ``A(x, y) = atan2(x y, sqrt(x^2 + y^2 + 1))`` on the face plane at distance 1 (x, y in
    [-1, 1]), a texel spanning [x0, x1] x [y0, y1] subtends ``A(x0,y0) - A(x0,y1) - A(x1,y0) + A(x1,y1)``
    (the solid angle of a rectangle seen from a point above one corner, integrated). The six faces sum to
    4 pi at any n.

    References
    ----------
    .. [1] A. Van Oosterom, J. Strackee, "The Solid Angle of a Plane Triangle", IEEE Trans. Biomed. Eng.
       BME-30(2), 1983 (the planar-rectangle case this antiderivative follows from).

    Examples
    --------
    >>> w = cube_texel_solid_angles(4, dtype=np.float64)
    >>> round(float(w[0, 0]), 10), round(float(w[1, 1]), 10)
    (0.0814555876, 0.2013579208)
    """
    e = np.linspace(-1.0, 1.0, n + 1)
    x0, x1 = e[None, :-1], e[None, 1:]
    y0, y1 = e[:-1, None], e[1:, None]
    w = _area_element(x0, y0) - _area_element(x0, y1) - _area_element(x1, y0) + _area_element(x1, y1)
    return np.abs(w).astype(dtype)


# ------------------------------------------------------------------------------------- equirectangular


def dir_to_equirect(d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Equirectangular coordinates (u, v) in [0, 1] of directions (bakery orientation, see module doc).

    u = 0.5 at -Z, 0.75 at +X; v = 0 at +Y (top), 1 at -Y. u is in [0, 1) up to rounding.
    """
    d = np.asarray(d)
    dtype = np.float64 if d.dtype == np.float64 else np.float32
    x, y, z = d[..., 0], d[..., 1], d[..., 2]
    phi = np.arctan2(x, -z)
    lat = np.arctan2(y, np.hypot(x, z))  # well conditioned at the poles, unlike arcsin(y / |d|)
    u = phi / (2 * np.pi) + 0.5
    v = 0.5 - lat / np.pi
    return u.astype(dtype, copy=False), v.astype(dtype, copy=False)


def equirect_to_dir(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Unit directions of equirectangular coordinates (u, v) in [0, 1] (bakery orientation)."""
    u = np.asarray(u)
    dtype = np.float64 if u.dtype == np.float64 else np.float32
    v = np.asarray(v, dtype=dtype)
    phi = 2 * np.pi * (u.astype(np.float64) - 0.5)
    lat = np.pi * (0.5 - v.astype(np.float64))
    cl = np.cos(lat)
    phi, lat, cl = np.broadcast_arrays(phi, lat, cl)
    return np.stack([np.sin(phi) * cl, np.sin(lat), -np.cos(phi) * cl], axis=-1).astype(dtype)


def equirect_directions(width: int, height: int, *, dtype=np.float32) -> np.ndarray:
    """Directions of the texel centres of a ``width`` x ``height`` panorama, ``(height, width, 3)``."""
    u = (np.arange(width, dtype=np.float64) + 0.5) / width
    v = (np.arange(height, dtype=np.float64) + 0.5) / height
    return equirect_to_dir(u[None, :], v[:, None]).astype(dtype)


def equirect_texel_directions(width: int, height: int, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Directions (float64, ``rows.shape + (3,)``) of the centres of chosen texels of a ``width`` x ``height``
    panorama: the values :func:`equirect_directions` has there, without the whole map."""
    rows, cols = np.asarray(rows), np.asarray(cols)
    return equirect_to_dir((cols + 0.5) / width, (rows + 0.5) / height)


def equirect_row_solid_angles(width: int, height: int, *, dtype=np.float32) -> np.ndarray:
    """Solid angle of one texel in each row of a ``width`` x ``height`` panorama, ``(height,)``.

    A row between latitudes theta0 > theta1 holds W texels of ``(2 pi / W)(sin theta0 - sin theta1)``
    each (the area of a spherical zone, Archimedes' hat-box theorem, split evenly in longitude).

    Examples
    --------
    >>> w = equirect_row_solid_angles(64, 32, dtype=np.float64)
    >>> round(float(w[0]), 10), round(float(w[15]), 9)
    (0.0004727384, 0.00962281)
    """
    edges = np.pi * (0.5 - np.arange(height + 1, dtype=np.float64) / height)
    s = np.sin(edges)
    return ((2 * np.pi / width) * (s[:-1] - s[1:])).astype(dtype)


def equirect_solid_angles(width: int, height: int, *, dtype=np.float32) -> np.ndarray:
    """Solid angle of every texel of a panorama, ``(height, width)``; sums to 4 pi."""
    return np.repeat(equirect_row_solid_angles(width, height, dtype=dtype)[:, None], width, axis=1)


# ------------------------------------------------------------------------------------------- rotation


def rotation_y(degrees: float) -> np.ndarray:
    """3x3 matrix turning the environment about the vertical axis so a panorama's content moves to the
    right by ``degrees`` (360 = one full width): the panorama centre (-Z) goes toward +X.

    In right-handed terms this is a rotation by ``-degrees`` about +Y. Apply as ``d_new = d @ R.T``.
    """
    a = math.radians(-degrees)
    c, s = math.cos(a), math.sin(a)
    return np.array([[c, 0.0, s], [0.0, 1.0, 0.0], [-s, 0.0, c]])
