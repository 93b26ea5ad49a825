"""Checks of the preview renderer against the split-sum approximation it implements and analytic cases.

Sources named beside each check. Reference inputs (the split-sum table, prefiltered levels, SH coefficients)
are built in ``tests/preview/envtools.py`` independently of the renderer.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bakery.errors import BakeryError
from bakery.inspect import green_convention
from bakery.preview.render import preview_image, render_ball, render_tile, turntable_frames
from bakery.preview.shading import Lighting, Material, irradiance_sh
from bakery.preview.tonemap import auto_exposure, display, tonemap_reinhard
from tests.preview import envtools

SH_CONST = 2 * math.sqrt(math.pi)  # L_00 of a constant radiance 1: ∫ 0.282095 dω = 4π · 0.282095


@pytest.fixture(scope="module")
def table() -> np.ndarray:
    return envtools.split_sum_table(64)


def constant_lighting(radiance, table, sizes=(16, 8, 4, 2), roughness=(0.0, 0.3, 0.6, 1.0)) -> Lighting:
    """A constant environment: every prefiltered level is the constant (a constant environment stays
    constant at every level), SH holds only L_00."""
    c = np.asarray(radiance, np.float32).reshape(3)
    levels = tuple(np.broadcast_to(c, (6, n, n, 3)).copy() for n in sizes)
    sh = np.zeros((9, 3), np.float32)
    sh[0] = SH_CONST * c
    return Lighting(levels, np.array(roughness), table, sh)


def test_split_sum_quadrature_matches_published_values():
    # docs/references.md, section 7 (exact quadrature, height-correlated Smith; Karis 2013 table definition):
    # the test's own table generator must reproduce them before it judges the renderer: to 1e-5 (measured
    # 6e-6; the published values carry 5-6 digits).
    for (nv, r), (a, b) in {(0.5, 0.0): (0.96875, 0.03125), (0.5, 0.5): (0.834916, 0.022347),
                            (0.25, 0.75): (0.716508, 0.027948), (0.5, 1.0): (0.44771, 0.00299),
                            (1.0, 0.5): (0.915785, 0.0000274)}.items():
        got = envtools.split_sum_terms(nv, r)
        assert got == pytest.approx((a, b), abs=1e-5)


@pytest.mark.parametrize("base", [(0.0, 0.0, 0.0), (0.5, 0.25, 0.1)])
def test_flat_mirror_tile_under_constant_environment_is_split_sum(table, base):
    # flat normal map, roughness 0, constant environment L. The split-sum result (Karis 2013) is
    # L·(F0·A + B) with (A, B) at the pixel's n·v; at roughness 0 the table reduces to Schlick's Fresnel,
    # F0 + (1 − F0)(1 − n·v)^5 (Schlick 1994, eq. 15), F0 = 0.04 (glTF 2.0, appendix B). The diffuse layer adds
    # base · E/π · (1 − (F0·A + B)) with E = πL for a constant environment (Ramamoorthi & Hanrahan 2001).
    L = np.array([0.8, 1.0, 1.3], np.float32)
    light = constant_lighting(L, table)
    flat = np.zeros((8, 8, 3), np.float32)
    flat[..., 2] = 1
    mat = Material(normals=flat, roughness=0.0, base_color=base)
    r = render_tile(mat, light, size=48, supersample=1, pitch=35)
    inside = r.coverage == 1
    assert inside.sum() > 0.3 * inside.size
    nv = r.n_dot_v[inside].astype(np.float64)
    ab = envtools.split_sum_terms(nv, 0.0)
    spec = 0.04 * ab[:, 0] + ab[:, 1]
    np.testing.assert_allclose(spec, 0.04 + 0.96 * (1 - nv) ** 5, atol=1e-9)  # the mirror limit
    expected = L[None, :] * spec[:, None] + np.array(base)[None, :] * L[None, :] * (1 - spec[:, None])
    # tolerance: the renderer reads a 64² table bilinearly; (1 − n·v)^5 between table columns is off by up to
    # about 0.2% of the result here (measured 0.21% at base 0)
    np.testing.assert_allclose(r.radiance[inside], expected, rtol=3e-3, atol=1e-5)
    # the view angle varies across the tile, so the shading does too: the check is not vacuous
    assert nv.max() - nv.min() > 0.2


def test_rough_ball_under_constant_environment_is_split_sum(table):
    # Same expectation on the ball at roughness 0.5 (Karis 2013 split sum), A and B from the test quadrature at
    # each pixel's n·v; the renderer reads a 64² table bilinearly, so allow the table's interpolation error.
    L = np.array([1.0, 1.0, 1.0], np.float32)
    light = constant_lighting(L, table)
    mat = Material(roughness=0.5, base_color=(0.0, 0.0, 0.0))
    r = render_ball(mat, light, size=40, supersample=1)
    inside = r.coverage == 1
    nv = r.n_dot_v[inside].astype(np.float64)
    keep = nv > 0.1
    ab = envtools.split_sum_terms(nv[keep], 0.5)
    expected = 0.04 * ab[:, 0] + ab[:, 1]
    np.testing.assert_allclose(r.radiance[inside][keep][:, 1], expected, rtol=5e-3)


def test_white_furnace(table):
    # A white dielectric in a constant environment reflects exactly the environment: specular albedo S plus
    # diffuse (1 − S) = 1 at any roughness (energy balance of the module's shading; common practice "furnace").
    light = constant_lighting([2.0, 2.0, 2.0], table)
    for rough in (0.0, 0.4, 1.0):
        r = render_ball(Material(roughness=rough, base_color=(1.0, 1.0, 1.0)), light, size=24, supersample=1)
        np.testing.assert_allclose(r.radiance[r.coverage == 1], 2.0, rtol=1e-5)


def test_sh_irradiance_closed_forms():
    # Ramamoorthi & Hanrahan 2001: constant L gives E = πL; L(ω) = ω_z (band 1 only, L_10 = ∫ z · 0.488603 z dω
    # = 0.488603 · 4π/3) gives E = (2π/3) n_z.
    sh = np.zeros((9, 3), np.float32)
    sh[0] = SH_CONST * 1.5
    n = np.array([[0.0, 0.0, 1.0], [1.0, 0.0, 0.0], [0.0, -0.6, 0.8]], np.float32)
    np.testing.assert_allclose(irradiance_sh(sh, n), 1.5 * math.pi, rtol=1e-5)
    sh = np.zeros((9, 3), np.float32)
    sh[2] = 0.488603 * 4 * math.pi / 3
    np.testing.assert_allclose(irradiance_sh(sh, n)[:, 0], 2 * math.pi / 3 * n[:, 2], rtol=1e-4, atol=1e-6)


def _sky(d: np.ndarray) -> np.ndarray:
    """A smooth sky with a bright patch toward +X+Y (our own test scene)."""
    up = np.clip(d[..., 1], 0, 1)[..., None]
    patch = np.exp(12 * (d @ np.array([0.6, 0.64, 0.48]) - 1))[..., None]
    return 0.2 + 0.8 * up * np.array([0.5, 0.7, 1.0]) + 6 * patch * np.array([1.0, 0.9, 0.7])


@pytest.fixture(scope="module")
def sky_lighting(table) -> Lighting:
    src = envtools.cube_from_function(_sky, 16)
    rough = np.array([0.0, 0.25, 0.5, 0.75, 1.0])
    levels = [src] + [envtools.brute_prefilter(src, r, s) for r, s in zip(rough[1:], (8, 8, 4, 4), strict=True)]
    return Lighting(tuple(levels), rough, table, envtools.sh_project(src))


def _bumps(size: int = 64) -> np.ndarray:
    """Normals of a height field with cross terms, h = sin(2πx/P) sin(2πy/P) + 0.5 sin(2π(x + 2y)/P)/2, from
    central differences (Blinn 1978: n = normalize(−s ∂h/∂x, −s ∂h/∂y, 1)), +y up = up the image."""
    y, x = np.mgrid[0:size, 0:size].astype(np.float64)
    y = size - 1 - y  # +y up
    w = 2 * math.pi / (size / 2)
    hx = w * np.cos(w * x) * np.sin(w * y) + 0.25 * w * np.cos(w * (x + 2 * y))
    hy = w * np.sin(w * x) * np.cos(w * y) + 0.5 * w * np.cos(w * (x + 2 * y))
    s = 2.0
    n = np.stack([-s * hx, -s * hy, np.ones_like(hx)], -1)
    return (n / np.linalg.norm(n, axis=-1, keepdims=True)).astype(np.float32)


def test_y_down_map_read_as_y_up_visibly_differs_and_inspect_flags_it(sky_lighting):
    # The Y-down file stores g' = 1 − g (docs/references.md, section 1, a trade convention); decoding it as
    # Y-up flips every normal's y. The two renders must differ visibly (mean difference of several 8-bit
    # levels on the objects), while the correctly decoded file renders identically.
    n_up = _bumps()
    stored_down = n_up * 0.5 + 0.5
    stored_down[..., 1] = 1 - stored_down[..., 1]
    wrong = stored_down * 2 - 1  # read as if Y-up
    right = wrong * np.array([1, -1, 1], np.float32)

    def pic(n):
        return preview_image(Material(normals=n, roughness=0.35), sky_lighting, size=96, supersample=1)[0]

    ref, bad, good = pic(n_up), pic(wrong), pic(right)
    np.testing.assert_allclose(good, ref, atol=1e-6)
    diff = np.abs(bad - ref) * 255
    assert diff.mean() > 3.0
    assert np.mean(diff > 4) > 0.2
    # bakery.inspect tells the conventions apart from the curl of the implied slopes
    assert green_convention(stored_down * 2 - 1)[0] == "y-down"
    assert green_convention(n_up)[0] == "y-up"


def _marker_lighting(table, direction) -> Lighting:
    src = envtools.cube_from_function(lambda d: 0.1 + 5.0 * (d @ np.asarray(direction) > 0.95)[..., None]
                                      * np.ones(3), 16)
    sh = envtools.sh_project(src)
    return Lighting((src, envtools.brute_prefilter(src, 0.5, 4)), np.array([0.0, 0.5]), table, sh)


def test_mirror_ball_reflection_side_and_environment_rotation(table):
    # Geometry of reflection (r = 2(n·v)n − v): looking along −Z at a mirror ball, a light toward +X shows on the
    # right half. sphere.rotation_y turns the panorama centre (−Z) toward +X, so a marker at −Z turned by 90°
    # shows on the right as well, and by −90° on the left.
    mat = Material(roughness=0.0, base_color=(0.0, 0.0, 0.0))

    def bright_side(light, **kw):
        r = render_ball(mat, light, size=64, supersample=1, pitch=0.0, background_roughness=0.5, **kw)
        lum = r.radiance[..., 1] * (r.coverage == 1)
        ys, xs = np.nonzero(lum > 0.1)
        return xs.mean() - 31.5

    assert bright_side(_marker_lighting(table, [1.0, 0.0, 0.0])) > 10
    marker = _marker_lighting(table, [0.0, 0.0, -1.0])
    assert bright_side(marker, env_rotation=90.0) > 10
    assert bright_side(marker, env_rotation=-90.0) < -10


def test_spin_moves_bumps_not_highlights(sky_lighting):
    # A smooth uniform ball is rotation-symmetric: turning it changes nothing (highlights stay put). With a normal
    # map the surface detail moves (5 frames: with 4 repeats around the ball a quarter turn would shift the
    # pattern by exactly one repeat); a full turn comes back to the start.
    plain = Material(roughness=0.3)
    a = render_ball(plain, sky_lighting, size=48, supersample=1, spin=0.0).radiance
    b = render_ball(plain, sky_lighting, size=48, supersample=1, spin=77.0).radiance
    np.testing.assert_allclose(a, b, rtol=1e-4, atol=1e-5)
    bumpy = Material(normals=_bumps(), roughness=0.3)
    frames, _ = turntable_frames(bumpy, sky_lighting, 5, size=48, supersample=1)
    assert len(frames) == 5 and frames[0].shape == (48, 48, 3)
    assert np.abs(frames[1] - frames[0]).mean() > 1 / 255
    full = render_ball(bumpy, sky_lighting, size=48, supersample=1, spin=360.0).radiance
    ref = render_ball(bumpy, sky_lighting, size=48, supersample=1, spin=0.0).radiance
    np.testing.assert_allclose(full, ref, rtol=1e-3, atol=1e-4)


def test_texture_orientation_on_ball_and_tile(table):
    # The texture is not mirrored: on the tile the top image row lies at the far edge (top of the picture); on
    # the ball (one repeat) the left half of the image shows on the left of the ball, the top half on top.
    light = constant_lighting([1.0, 1.0, 1.0], table)
    img = np.zeros((8, 8, 3), np.float32)
    img[:4, :, 0] = 1  # top half red
    img[:, :4, 2] = 1  # left half blue
    mat = Material(base_color=img, roughness=1.0)
    t = render_tile(mat, light, size=64, supersample=1, repeat=1.0, pitch=60).radiance
    assert t[22, 32, 0] > t[44, 32, 0] + 0.3  # far edge (upper in the picture) is red
    assert t[32, 18, 2] > t[32, 46, 2] + 0.3  # left is blue
    b = render_ball(mat, light, size=64, supersample=1, pitch=0.0, tiles=(1.0, 1.0)).radiance
    assert b[20, 32, 0] > b[44, 32, 0] + 0.3
    assert b[32, 22, 2] > b[32, 42, 2] + 0.3


def test_minified_texture_is_filtered_not_aliased(table):
    # Mip mapping (Williams 1983): a fine checker repeated far below one texel per pixel averages to its mean
    # instead of aliasing into noise.
    light = constant_lighting([1.0, 1.0, 1.0], table)
    checker = (np.indices((64, 64)).sum(axis=0) % 2).astype(np.float32)[..., None].repeat(3, axis=2)
    r = render_tile(Material(base_color=checker, roughness=1.0), light, size=64, supersample=1, repeat=8.0)
    inside = r.coverage == 1
    vals = r.radiance[inside][:, 0]
    assert vals.std() < 0.05 * vals.mean()


def test_reinhard_tone_mapping_and_exposure():
    # Reinhard et al. 2002, eq. 4: L/(1 + L) maps 1 to 1/2; with L_white = L the result is 1. Eqs. 1-2: the
    # automatic exposure maps the log-average luminance to the key 0.18.
    one = np.ones((2, 2, 3), np.float32)
    np.testing.assert_allclose(tonemap_reinhard(one), 0.5, rtol=1e-6)
    np.testing.assert_allclose(tonemap_reinhard(4 * one, white=4.0), 1.0, rtol=1e-6)
    np.testing.assert_allclose(tonemap_reinhard(one, exposure=1.0), 2 / 3, rtol=1e-6)
    ev = auto_exposure(3 * one)
    assert 3 * 2**ev == pytest.approx(0.18, rel=1e-3)
    # sRGB output (IEC 61966-2-1): display value of linear 0.5 is 0.735357
    assert float(display(one)[0, 0, 0]) == pytest.approx(0.735357, abs=1e-5)


def test_preview_layout_and_dtype(sky_lighting):
    img, ev = preview_image(Material(), sky_lighting, size=32, supersample=2)
    assert img.shape == (32, 64, 3) and img.dtype == np.float32 and ev == 0.0
    assert 0 <= img.min() and img.max() <= 1
    one, _ = preview_image(Material(), sky_lighting, size=32, views="tile", exposure=None)
    assert one.shape == (32, 32, 3)


def test_bad_inputs_are_refused(table, sky_lighting):
    cube = np.ones((6, 4, 4, 3), np.float32)
    sh = np.zeros((9, 3), np.float32)
    with pytest.raises(BakeryError, match="shape"):
        Lighting((np.ones((6, 4, 5, 3), np.float32),), [0.0], table, sh)
    with pytest.raises(BakeryError, match="increase"):
        Lighting((cube, cube), [0.5, 0.5], table, sh)
    with pytest.raises(BakeryError, match="one roughness"):
        Lighting((cube,), [0.0, 1.0], table, sh)
    with pytest.raises(BakeryError, match="NaN"):
        Lighting((cube * np.nan,), [0.0], table, sh)
    with pytest.raises(BakeryError, match="SH"):
        Lighting((cube,), [0.0], table, np.zeros((4, 3)))
    with pytest.raises(BakeryError, match="roughness"):
        Material(roughness=1.5)
    with pytest.raises(BakeryError, match="normals"):
        Material(normals=np.zeros((4, 4, 2), np.float32))
    with pytest.raises(BakeryError, match="size"):
        render_ball(Material(), sky_lighting, size=4)
    with pytest.raises(BakeryError, match="frame count"):
        turntable_frames(Material(), sky_lighting, 1)
