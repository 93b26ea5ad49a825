"""Seamless sampling and resampling (bakery.envmap.sample).

Checks: equirect -> cube -> equirect on a smooth HDR field stays well under 1% away from the poles;
total energy sum(L * solid angle) within 1% through every conversion; a single bright texel keeps its energy
within 1% when shrinking. Texel solid angles: closed forms of docs/references.md, section 11 (tested in
tests/test_sphere.py). Orientation: bakery's equirect convention (DEVELOPERS.md) and the Vulkan cube-map face
selection table with the handedness flip of bakery.sphere.
"""

import numpy as np
import pytest

from bakery import sphere as S
from bakery.envmap import reduce as RD
from bakery.envmap import resample as RS
from bakery.envmap import sample as E


def smooth_field(d):
    """A smooth, strictly positive HDR field (invented test data)."""
    x, y, z = d[..., 0], d[..., 1], d[..., 2]
    return np.stack([4 + 2 * x + 1.5 * y * z, 3 + np.sin(3 * x) * np.cos(2 * z) + y,
                     2 + 0.8 * x * x - 1.2 * z], axis=-1).astype(np.float32)


EQ = smooth_field(S.equirect_directions(512, 256, dtype=np.float64))


def cube_field(n):
    return smooth_field(S.cube_directions(n, dtype=np.float64))


@pytest.mark.parametrize("size", [48, 96, 128, 200])
def test_equirect_cube_equirect_round_trip(size):
    # error well under 1% away from the poles (|latitude| < 60 degrees)
    cube = RS.resample(EQ, "equirect", "cube", size)
    back = RS.resample(cube, "cube", "equirect", 512)
    lat = np.degrees(np.arcsin(S.equirect_directions(512, 256)[..., 1]))
    rel = np.abs(back - EQ) / EQ
    assert rel[np.abs(lat) < 60].max() < 0.01
    assert rel[np.abs(lat) < 60].mean() < 0.001
    ref = cube_field(size)
    assert (np.abs(cube - ref) / ref).max() < 0.02


CONVERSIONS = [
    ("equirect", "cube", 32), ("equirect", "cube", 64), ("equirect", "cube", 128), ("equirect", "cube", 300),
    ("equirect", "equirect", 128), ("equirect", "equirect", 1024), ("cube", "equirect", 128),
    ("cube", "equirect", 256), ("cube", "equirect", 1000), ("cube", "cube", 24), ("cube", "cube", 50),
    ("cube", "cube", 200),
]


@pytest.mark.parametrize("kind, dst, size", CONVERSIONS)
@pytest.mark.parametrize("rotate", [0.0, 33.0])
def test_total_energy_kept_through_every_conversion(kind, dst, size, rotate):
    # sum(L * solid angle) within 1% (here 0.1%) through every conversion
    src = EQ if kind == "equirect" else cube_field(96)
    out = RS.resample(src, kind, dst, size, rotation_deg=rotate)
    ratio = RS.energy(out, dst) / RS.energy(src, kind)
    np.testing.assert_allclose(ratio, 1.0, atol=1e-3)


@pytest.mark.parametrize("kind, dst, size", [
    ("equirect", "cube", 16), ("equirect", "cube", 40), ("equirect", "cube", 64), ("equirect", "cube", 100),
    ("equirect", "equirect", 128), ("equirect", "equirect", 300), ("cube", "equirect", 64),
    ("cube", "equirect", 256), ("cube", "cube", 16), ("cube", "cube", 40), ("cube", "cube", 96)])
def test_single_bright_texel_keeps_its_energy_when_shrinking(kind, dst, size):
    # area-weighted filtering keeps a single bright texel's energy within 1% when shrinking
    rng = np.random.default_rng(5)
    for _ in range(4):
        if kind == "equirect":
            src = np.zeros((256, 512, 1), np.float32)
            src[rng.integers(0, 256), rng.integers(0, 512)] = 5.0e4
        else:
            src = np.zeros((6, 128, 128, 1), np.float32)
            src[rng.integers(0, 6), rng.integers(0, 128), rng.integers(0, 128)] = 5.0e4
        out = RS.resample(src, kind, dst, size)
        assert RS.energy(out, dst)[0] == pytest.approx(RS.energy(src, kind)[0], rel=0.01)
        assert out.min() >= 0


@pytest.mark.parametrize("filt", ["area", "bilinear"])
def test_constant_environment_stays_constant(filt):
    const = np.full((128, 256, 3), 2.5, np.float32)
    for dst, size in (("cube", 40), ("equirect", 200), ("cube", 200)):
        out = RS.resample(const, "equirect", dst, size, filter=filt)
        np.testing.assert_allclose(out, 2.5, rtol=5e-3)


def test_exact_reductions_keep_energy():
    cube = cube_field(64)
    np.testing.assert_allclose(RS.energy(RD.reduce_cube(cube), "cube"), RS.energy(cube, "cube"), rtol=1e-6)
    np.testing.assert_allclose(RS.energy(RD.reduce_equirect(EQ), "equirect"), RS.energy(EQ, "equirect"),
                               rtol=1e-6)
    np.testing.assert_allclose(RS.energy(RD.reduce_cube(cube, 4), "cube"), RS.energy(cube, "cube"), rtol=1e-6)


def test_cube_sampling_is_seamless_across_edges_and_corners():
    # bilinear lookups along a path crossing face edges and near a corner follow the smooth field
    n = 64
    cube = cube_field(n)
    t = np.linspace(0, 2 * np.pi, 2001)
    rings = [np.stack([np.cos(t), 0.3 * np.ones_like(t), np.sin(t)], -1),
             np.stack([np.cos(t), np.sin(t), 0.999 * np.cos(t)], -1)]  # passes close to cube corners
    for ring in rings:
        d = S.normalize(ring)
        got = E.sample_cube(cube, d.astype(np.float32))
        want = smooth_field(d)
        assert (np.abs(got - want) / want).max() < 0.01
        # no jumps: neighbouring samples differ by no more than the field's own variation
        assert np.abs(np.diff(got, axis=0)).max() < 3 * np.abs(np.diff(want, axis=0)).max() + 1e-3


def test_equirect_sampling_wraps_and_crosses_the_poles():
    img = EQ
    u = np.array([1e-5, 1 - 1e-5], np.float32)
    v = np.array([0.5, 0.5], np.float32)
    a, b = E.sample_equirect_uv(img, u, v)
    np.testing.assert_allclose(a, b, rtol=1e-3)
    # a tiny step over the north pole lands half a turn away, continuously
    d1 = S.normalize(np.array([[0.0, 1.0, -1e-3]]))
    d2 = S.normalize(np.array([[0.0, 1.0, 1e-3]]))
    np.testing.assert_allclose(E.sample_equirect(img, d1), E.sample_equirect(img, d2), rtol=5e-3)


def test_rotation_quarter_turn_moves_front_to_plus_x():
    # bakery.sphere.rotation_y: positive moves content to the right, -Z (front) toward +X
    n = 32
    cube = cube_field(n)
    rot = RS.resample(cube, "cube", "cube", n, rotation_deg=90.0, filter="bilinear")
    np.testing.assert_allclose(rot[0], cube[4], rtol=1e-3)  # new +X face = old front face
    eq = RS.resample(EQ, "equirect", "equirect", 512, rotation_deg=90.0)
    np.testing.assert_allclose(eq, np.roll(EQ, 128, axis=1), rtol=1e-3)


def test_asymmetric_marker_lands_on_front_face_unmirrored():
    # a marker up and to the right of the panorama centre must appear in the +Z face (layer 4, the front,
    # bakery.sphere) in its upper-right quadrant: not mirrored, not upside down
    pano = np.zeros((256, 512, 1), np.float32)
    pano[100:110, 280:290] = 1.0  # right of the centre column 256, above the centre row 128
    cube = RS.resample(pano, "equirect", "cube", 64)
    f, i, j = np.unravel_index(np.argmax(cube[..., 0]), cube.shape[:3])
    assert f == 4 and i < 32 and j > 32
    # a quarter turn right (+X) lands on face 0 the same way up
    pano = np.roll(pano, 128, axis=1)
    cube = RS.resample(pano, "equirect", "cube", 64)
    f, i, j = np.unravel_index(np.argmax(cube[..., 0]), cube.shape[:3])
    assert f == 0 and i < 32 and j > 32


def test_cube_equirect_uv_matches_directions():
    for n, rot in ((16, 0.0), (16, 37.5), (15, -90.0), (1, 0.0), (2, 10.0)):  # odd faces have a middle row
        u, v = RD.cube_equirect_uv(n, rot)
        d = S.cube_directions(n, dtype=np.float64) @ S.rotation_y(rot)
        u2, v2 = S.dir_to_equirect(d)
        pole = np.abs(d[..., 1]) > 1 - 1e-12  # an odd face's centre: every u is the pole
        np.testing.assert_allclose(np.abs((u - u2 + 0.5) % 1 - 0.5)[~pole], 0, atol=1e-6)
        np.testing.assert_allclose(v, v2, atol=1e-6)


def test_mip_chain_keeps_energy_and_shapes():
    chain = RS.cube_mip_chain(cube_field(32))
    assert [c.shape[1] for c in chain] == [32, 16, 8, 4, 2, 1]
    e0 = RS.energy(chain[0], "cube")
    for c in chain[1:]:
        np.testing.assert_allclose(RS.energy(c, "cube"), e0, rtol=1e-5)
    odd = RS.cube_mip_chain(cube_field(12))
    assert [c.shape[1] for c in odd] == [12, 6, 3, 1]


def test_float32_outputs_and_bad_shapes():
    assert RS.resample(EQ, "equirect", "cube", 16).dtype == np.float32
    with pytest.raises(ValueError):
        RS.resample(np.zeros((5, 4, 4, 3), np.float32), "cube", "cube", 4)
    with pytest.raises(ValueError):
        RS.resample(EQ, "equirect", "equirect", 33)


def test_equirect_mip_chain_keeps_energy_and_ktx2_sizes():
    chain = RS.equirect_mip_chain(EQ[::2, ::2].copy())  # 256 x 128
    assert [c.shape[:2] for c in chain] == [(128 >> i or 1, 256 >> i) for i in range(9)]
    e0 = RS.energy(chain[0], "equirect")
    for c in chain[1:]:
        np.testing.assert_allclose(RS.energy(c, "equirect"), e0, rtol=1e-5)
    odd = RS.equirect_mip_chain(np.ones((48, 96, 1), np.float32))
    assert [c.shape[:2] for c in odd] == [(48, 96), (24, 48), (12, 24), (6, 12), (3, 6), (1, 3), (1, 1)]
    np.testing.assert_allclose(odd[-1], 1.0, rtol=1e-6)


def test_area_filter_falls_back_with_a_warning_beyond_its_size_limit(monkeypatch):
    from bakery.errors import BakeryWarning

    monkeypatch.setattr(RS, "AREA_MAX_TEXELS", 1000)
    with pytest.warns(BakeryWarning, match="bilinear"):
        out = RS.resample(EQ, "equirect", "cube", 40)
    np.testing.assert_allclose(RS.energy(out, "cube"), RS.energy(EQ, "equirect"), rtol=1e-2)
