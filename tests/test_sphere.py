"""Cube-map and equirectangular geometry (bakery.sphere).

Sources: the Vulkan 1.3 specification, section 16.5.4 "Cube Map Face Selection" (face table); the KTX 2.0
specification's cubemap-orientation appendix (the table is left-handed); closed-form texel solid angles
(docs/references.md, section 11, computed values); Archimedes' hat-box theorem for equirect rows.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bakery import sphere as S

FLIP = np.array([1.0, 1.0, -1.0])  # table (left-handed) <-> bakery (right-handed), module docstring

# Vulkan 1.3 spec, "Cube Map Face Selection" table, worked by hand: direction in the TABLE's space of
# the face centre, the corner (s, t) = (0, 0) (s_c = t_c = -1) and the corner (1, 1) (s_c = t_c = +1).
FACE_TABLE_POINTS = {
    0: [(1, 0, 0), (1, 1, 1), (1, -1, -1)],      # +X: s_c = -rz, t_c = -ry
    1: [(-1, 0, 0), (-1, 1, -1), (-1, -1, 1)],   # -X: s_c = +rz, t_c = -ry
    2: [(0, 1, 0), (-1, 1, -1), (1, 1, 1)],      # +Y: s_c = +rx, t_c = +rz
    3: [(0, -1, 0), (-1, -1, 1), (1, -1, -1)],   # -Y: s_c = +rx, t_c = -rz
    4: [(0, 0, 1), (-1, 1, 1), (1, -1, 1)],      # +Z: s_c = +rx, t_c = -ry
    5: [(0, 0, -1), (1, 1, -1), (-1, -1, -1)],   # -Z: s_c = -rx, t_c = -ry
}


@pytest.mark.parametrize("face", range(6))
def test_face_table_centre_and_corners(face):
    # Vulkan 1.3, 16.5.4 (table above); bakery directions are the table's with z negated.
    centre, c00, c11 = (np.array(p, dtype=np.float64) * FLIP for p in FACE_TABLE_POINTS[face])
    for (s, t), want in (((0.5, 0.5), centre), ((0.0, 0.0), c00), ((1.0, 1.0), c11)):
        d = S.face_to_dir(face, np.float64(s), np.float64(t))
        np.testing.assert_allclose(d, want / np.linalg.norm(want), atol=1e-12)
    f, s, t = S.dir_to_face(centre)
    assert int(f) == face and float(s) == 0.5 and float(t) == 0.5
    f, s, t = S.dir_to_face(c11 * np.array([1 - 1e-9, 1 - 1e-9, 1 - 1e-9]) + 1e-9 * centre)
    assert int(f) == face
    np.testing.assert_allclose([s, t], [1.0, 1.0], atol=1e-8)


@pytest.mark.parametrize("table_dir, face, st_", [
    # docs/references.md, section 11 (computed from the Vulkan table)
    ((1, 0.2, 0.3), 0, (0.35, 0.4)),
    ((-0.2, -0.9, 0.4), 3, (0.388889, 0.277778)),
    ((0.3, 0.5, -0.7), 5, (0.285714, 0.142857)),
])
def test_face_selection_worked_values(table_dir, face, st_):
    f, s, t = S.dir_to_face(np.array(table_dir) * FLIP)
    assert int(f) == face
    np.testing.assert_allclose([s, t], st_, atol=1e-6)


def test_handedness_every_face_unmirrored_from_inside():
    # KTX 2.0 spec, cubemap-orientation appendix: the face table is left-handed; after bakery's flip, each
    # face seen from inside (looking along its centre, up = decreasing t) has s growing to the viewer's
    # right, where right = forward x up in a right-handed space (-Z forward, +Y up -> +X right).
    for f in range(6):
        c = S.face_to_dir(f, np.float64(0.5), np.float64(0.5))
        right = S.face_to_dir(f, np.float64(0.51), np.float64(0.5)) - c
        up = S.face_to_dir(f, np.float64(0.5), np.float64(0.49)) - c
        assert np.dot(np.cross(c, up), right) > 0, S.FACE_NAMES[f]


def test_panorama_front_lands_on_plus_z_face_right_way_round():
    # Bakery's equirect orientation (DEVELOPERS.md): the centre looks along -Z; a marker up and to the right
    # of the centre must land on face +Z (layer 4) up (t < 0.5) and right (s > 0.5); a marker a quarter
    # width to the right lands on +X (layer 0) facing the same way.
    d = S.equirect_to_dir(np.float64(0.5 + 0.03), np.float64(0.5 - 0.05))
    f, s, t = S.dir_to_face(d)
    assert int(f) == 4 and s > 0.5 and t < 0.5
    d = S.equirect_to_dir(np.float64(0.75 + 0.03), np.float64(0.5 - 0.05))
    f, s, t = S.dir_to_face(d)
    assert int(f) == 0 and s > 0.5 and t < 0.5
    np.testing.assert_allclose(S.equirect_to_dir(np.float64(0.75), np.float64(0.5)), [1, 0, 0], atol=1e-12)
    np.testing.assert_allclose(S.equirect_to_dir(np.float64(0.5), np.float64(0.0)), [0, 1, 0], atol=1e-12)


def test_cube_directions_round_trip():
    d = S.cube_directions(16, dtype=np.float64)
    f, s, t = S.dir_to_face(d)
    c = S.face_texel_coords(16, np.float64)
    assert (f == np.arange(6)[:, None, None]).all()
    np.testing.assert_allclose(s, np.broadcast_to(c[None, None, :], s.shape), atol=1e-12)
    np.testing.assert_allclose(t, np.broadcast_to(c[None, :, None], t.shape), atol=1e-12)
    np.testing.assert_allclose(np.linalg.norm(d, axis=-1), 1, atol=1e-12)


@settings(max_examples=200, deadline=None)
@given(st.floats(-1, 1), st.floats(-1, 1), st.floats(-1, 1))
def test_direction_round_trips(x, y, z):
    v = np.array([x, y, z])
    if np.linalg.norm(v) < 1e-3:
        return
    v = v / np.linalg.norm(v)
    f, s, t = S.dir_to_face(v)
    assert 0 <= s <= 1 and 0 <= t <= 1
    np.testing.assert_allclose(S.face_to_dir(f, s, t), v, atol=1e-12)
    u, w = S.dir_to_equirect(v)
    np.testing.assert_allclose(S.equirect_to_dir(u, w), v, atol=1e-9)


def test_equirect_round_trip_next_to_the_pole():
    # a direction 1.4e-8 rad from +Y: arcsin(y) would lose half the digits there (d asin/dy -> inf)
    v = np.array([0.0, 1.0, 1.4e-8])
    v = v / np.linalg.norm(v)
    np.testing.assert_allclose(S.equirect_to_dir(*S.dir_to_equirect(v)), v, atol=1e-12)


@pytest.mark.parametrize("n", [1, 2, 4, 7, 64, 512])
def test_cube_solid_angles_sum_to_4pi(n):
    # closed form A(x, y) = atan2(xy, sqrt(x^2+y^2+1)) (docs/references.md, section 11): 6 faces sum to 4 pi
    # Tolerances: float64 reaches 9e-16 (measured), so 4e-15 (about 20 ulps); each float32 texel carries a
    # relative rounding error of at most 2^-24 = 6.0e-8 (IEEE 754 round to nearest), so its float64 sum stays
    # within 6e-8 of 4 pi (measured: 2.8e-8)
    total = 6 * S.cube_texel_solid_angles(n, dtype=np.float64).sum()
    assert abs(total / (4 * math.pi) - 1) < 4e-15
    assert abs(6 * float(S.cube_texel_solid_angles(n).sum(dtype=np.float64)) / (4 * math.pi) - 1) < 2.0 ** -24


def test_cube_solid_angle_values():
    # docs/references.md, section 11 (computed): w = 4, corner 0.0814555876, centre 0.2013579208
    w = S.cube_texel_solid_angles(4, dtype=np.float64)
    assert w[0, 0] == pytest.approx(0.0814555876, abs=1e-10)
    assert w[1, 1] == pytest.approx(0.2013579208, abs=1e-10)
    np.testing.assert_allclose(w, w[::-1, ::-1])


def test_cube_solid_angle_against_numeric_integration():
    # independent check: integrate the projected-area density (1 + x^2 + y^2)^(-3/2) over one texel with
    # scipy's dblquad (the solid angle of a planar patch seen from distance 1)
    from scipy.integrate import dblquad

    n = 5
    w = S.cube_texel_solid_angles(n, dtype=np.float64)
    e = np.linspace(-1, 1, n + 1)
    val, _ = dblquad(lambda y, x: (1 + x * x + y * y) ** -1.5, e[0], e[1], e[2], e[3])
    assert w[2, 0] == pytest.approx(val, rel=1e-9)


@pytest.mark.parametrize("w,h", [(64, 32), (4096, 2048), (10, 5), (3, 1)])
def test_equirect_solid_angles_sum_to_4pi(w, h):
    # Archimedes' hat-box theorem: a zone between latitudes has area 2 pi (sin a - sin b). Tolerances as for
    # the cube above: float64 exact here (measured 0), float32 within one rounding 2^-24 (measured 2.8e-8)
    assert abs(S.equirect_solid_angles(w, h, dtype=np.float64).sum() / (4 * math.pi) - 1) < 4e-15
    assert abs(float(S.equirect_solid_angles(w, h).sum(dtype=np.float64)) / (4 * math.pi) - 1) < 2.0 ** -24


def test_equirect_row_values():
    # docs/references.md, section 11 (computed): 64x32 pole row 4.727384e-4, equator row 9.622810e-3
    r = S.equirect_row_solid_angles(64, 32, dtype=np.float64)
    assert r[0] == pytest.approx(4.727384e-4, rel=1e-6)
    assert r[15] == pytest.approx(9.622810e-3, rel=1e-6)


def test_equirect_orientation_and_texel_centres():
    # DEVELOPERS.md convention: centre -Z, top +Y, a quarter right of centre +X
    d = S.equirect_directions(8, 4, dtype=np.float64)
    u, v = S.dir_to_equirect(d)
    np.testing.assert_allclose(u, np.broadcast_to((np.arange(8) + 0.5) / 8, (4, 8)), atol=1e-12)
    np.testing.assert_allclose(v, np.broadcast_to(((np.arange(4) + 0.5) / 4)[:, None], (4, 8)), atol=1e-12)


def test_chosen_texel_directions_are_the_texel_centres():
    # the centre of texel (row, col) of a W x H panorama sits at u = (col + 1/2) / W, v = (row + 1/2) / H,
    # longitude 2 pi (u - 1/2), latitude pi (1/2 - v) (the convention of DEVELOPERS.md)
    rows, cols = np.array([0, 3, 1, 2]), np.array([7, 0, 4, 5])
    d = S.equirect_texel_directions(8, 4, rows, cols)
    lon, lat = 2 * np.pi * ((cols + 0.5) / 8 - 0.5), np.pi * (0.5 - (rows + 0.5) / 4)
    expect = np.stack([np.sin(lon) * np.cos(lat), np.sin(lat), -np.cos(lon) * np.cos(lat)], axis=-1)
    np.testing.assert_allclose(d, expect, atol=1e-15)
    assert np.array_equal(d, S.equirect_directions(8, 4, dtype=np.float64)[rows, cols])


def test_rotation_moves_front_to_the_right():
    r = S.rotation_y(90)
    np.testing.assert_allclose(np.array([0, 0, -1.0]) @ r.T, [1, 0, 0], atol=1e-12)
    np.testing.assert_allclose(r @ r.T, np.eye(3), atol=1e-12)
    assert np.linalg.det(r) == pytest.approx(1)


def test_float32_in_float32_out():
    d = S.cube_directions(4)
    assert d.dtype == np.float32
    f, s, t = S.dir_to_face(d)
    assert s.dtype == np.float32 and t.dtype == np.float32
    assert S.equirect_directions(8, 4).dtype == np.float32
