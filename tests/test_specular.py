"""The specular prefilter against the brute-force sum of its defining integral, analytic cases and the
published check values.

The quantity (Karis 2013, SIGGRAPH course notes, Physically Based Shading course series, split sum with
v = r = n): P(n) = ∫ L(l) w dl / ∫ w dl with w = max(n·l, 0) D(h), h = normalize(n + l), D the GGX
distribution (Walter et al. 2007, EGSR, eq. 33) or normalised Blinn-Phong (eq. 30). The brute-force sum over
every texel is :func:`tests.envmap.reference.prefilter_reference`, written from those formulas and sharing no
code with bakery's prefilter. Check values for L(ω) = max(0, ω·a) are in docs/references.md, section 7
(computed by exact quadrature).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from bakery import microfacet as mf
from bakery import sphere
from bakery.envmap import specular as sp
from tests.envmap.reference import prefilter_reference


def _smooth_env(h: int, seed: int = 3, sun: bool = True) -> np.ndarray:
    """A smooth random sky (low-order harmonics, radiance about 0.2-1.2) plus a small bright disc."""
    rng = np.random.default_rng(seed)
    d = sphere.equirect_directions(2 * h, h, dtype=np.float64)
    env = np.full(d.shape[:2] + (3,), 0.6)
    for _ in range(6):
        a = rng.normal(size=3)
        a /= np.linalg.norm(a)
        wave = np.cos(rng.integers(1, 4) * (d @ a) + rng.uniform(0, 6))
        env += 0.08 * rng.uniform(0.5, 1, 3) * wave[..., None]
    if sun:
        s = np.array([0.3, 0.6, -0.74])
        s /= np.linalg.norm(s)
        env[(d @ s) > math.cos(math.radians(4))] = 400.0
    return env.astype(np.float32)


def _level_dirs(level):
    s = level.shape[1]
    return sphere.cube_directions(s, dtype=np.float64).reshape(-1, 3), np.tile(
        sphere.cube_texel_solid_angles(s, dtype=np.float64).ravel(), 6)


@pytest.mark.parametrize("lobe", ["ggx", "blinn-phong"])
def test_constant_environment_stays_constant(lobe):
    env = np.ones((64, 128, 3), np.float32) * np.array([0.5, 2.0, 7.0], np.float32)
    res = sp.prefilter_specular(env, 16, lobe=lobe)
    assert len(res.levels) == 5
    for k, lv in enumerate(res.levels):
        assert lv.shape == (6, 16 >> k, 16 >> k, 3) and lv.dtype == np.float32
        assert np.allclose(lv / env[0, 0], 1.0, rtol=1e-4, atol=0), (k, np.abs(lv / env[0, 0] - 1).max())
    # GGX: both paths ran (a window summed texel by texel for the narrow level, SH for the rest)
    if lobe == "ggx":
        assert res.window_degrees[1] > 0 and all(b > 0 for b in res.band_limits[1:])


def test_against_brute_force_small_sky():
    env = _smooth_env(64)
    res = sp.prefilter_specular(env, 32, levels=6)
    for k in range(1, 6):
        d, om = _level_dirs(res.levels[k])
        ref = prefilter_reference(env, d, float(res.params[k]))
        m = sp.error_metrics(res.levels[k].reshape(-1, 3), ref, om)
        # the "final" quality's bounds (0.05 % relative RMS, 0.5 % at the 99th percentile; measured worst
        # over levels 0.015 % / 0.11 %)
        assert m["rel_rms"].max() < 5e-4 and m["p99"].max() < 5e-3, (k, m)


def test_sh_path_against_brute_force():
    # 256 x 128 panorama: band limits up to 127, so every level r >= 0.25 runs through the SH transform
    env = _smooth_env(128, seed=5)
    res = sp.prefilter_specular(env, 16, roughness="linear", levels=5)
    assert all(b > 0 for b in res.band_limits[1:])
    assert res.bright_texels > 0
    for k in range(1, 5):
        d, om = _level_dirs(res.levels[k])
        ref = prefilter_reference(env, d, float(res.params[k]))
        m = sp.error_metrics(res.levels[k].reshape(-1, 3), ref, om)
        # measured worst over levels: 0.011 % RMS, 0.059 % p99
        assert m["rel_rms"].max() < 5e-4 and m["p99"].max() < 2e-3, (k, m)


def test_blinn_phong_against_brute_force():
    env = _smooth_env(128, seed=9)
    res = sp.prefilter_specular(env, 8, lobe="blinn-phong")
    # Walter et al. 2007 peak-matching exponent: n = 2/α² − 2 with α = r², r = 2/3 at level 2 of 4
    assert res.params[2] == pytest.approx(2 / ((2 / 3) ** 2) ** 2 - 2)
    for k in range(1, 4):
        d, om = _level_dirs(res.levels[k])
        ref = prefilter_reference(env, d, float(res.params[k]), lobe="blinn-phong")
        m = sp.error_metrics(res.levels[k].reshape(-1, 3), ref, om)
        # measured worst over levels: 0.013 % RMS, 0.14 % p99
        assert m["rel_rms"].max() < 5e-4 and m["p99"].max() < 5e-3, (k, m)


@pytest.mark.parametrize(("r", "expected"), [
    # docs/references.md, section 7 (computed): L(ω) = max(0, ω·a), output at a
    (0.25, 0.976093), (0.5, 0.867396), (0.75, 0.745131), (1.0, 2 / 3)])
def test_clamped_cosine_check_values(r, expected):
    # level 2 of a 4 x 4 chain is 1 x 1: its texel centre on face +Z is exactly bakery −Z, the axis a
    d = sphere.equirect_directions(512, 256, dtype=np.float64)
    env = np.repeat(np.maximum(0, -d[..., 2:3]), 3, axis=2).astype(np.float32)
    # the brute-force sum of the defining integral reproduces the published values (to 1e-5 here) ...
    ref = prefilter_reference(env, np.array([[0.0, 0.0, -1.0]]), r * r)
    assert ref[0, 0] == pytest.approx(expected, abs=1e-5)
    # ... and the fast path lands within its truncation error: 5e-4 at "final", 1e-4 at "high" (this
    # environment's kink at the horizon is a hard case for a band-limited transform)
    for quality, tol in (("final", 5e-4), ("high", 1e-4)):
        res = sp.prefilter_specular(env, 4, roughness=[0, r / 2, r], quality=quality)
        assert res.levels[2][4, 0, 0] == pytest.approx(np.full(3, expected), abs=tol), quality


@pytest.mark.parametrize("path", ["exact", "sh"])
def test_single_bright_texel_matches_the_lobe(path):
    # one texel of radiance 1e4 on a black panorama: the level must be L Ω w(n·l) / ∫ w, with w built from
    # D directly (Walter et al. 2007 eq. 33) and ∫ w by scipy quadrature
    h, w = 64, 128
    env = np.zeros((h, w, 3), np.float32)
    row, col = 20, 37
    env[row, col] = 1e4
    l = sphere.equirect_directions(w, h, dtype=np.float64)[row, col]
    om = sphere.equirect_row_solid_angles(w, h, dtype=np.float64)[row]
    quality = sp.QUALITY["final"] if path == "exact" else sp.Quality(1e-6, 1e30, 0)
    res = sp.prefilter_specular(env, 8, levels=4, roughness=[0, 0.5, 0.75, 1.0], quality=quality)
    for k in (1, 2, 3):
        r = res.roughness[k]
        a = r * r
        n, _ = _level_dirs(res.levels[k])
        mu = n @ l
        noh = np.sqrt((1 + mu) / 2)
        lobe = np.maximum(mu, 0) * mf.d_ggx(noh, a)
        def weight(m, a=a):
            return max(m, 0) * float(mf.d_ggx(math.sqrt((1 + m) / 2), a))

        z = 2 * math.pi * integrate.quad(weight, -1, 1, points=[0, 1 - 2 * a * a], limit=200)[0]
        want = 1e4 * om * lobe / z
        got = res.levels[k][..., 0].reshape(-1)
        tol = 1e-3 * want.max() if path == "sh" else 1e-4 * want.max()
        assert np.abs(got - want).max() < tol, (k, np.abs(got - want).max() / want.max())


def test_seams():
    # no seam beyond what the exact function has: the seam metric of each level (99th percentile of the change
    # per radian across face edges) stays within 5 % of the same metric of the brute-force level, and the
    # change across edges is about the change inside the faces (on faces of 16 texels or more)
    env = _smooth_env(64, seed=11)
    res = sp.prefilter_specular(env, 32, levels=4)
    for k in range(1, 4):
        across, inside = sp.seam_metric(res.levels[k])
        d, _ = _level_dirs(res.levels[k])
        ref = prefilter_reference(env, d, float(res.params[k])).reshape(res.levels[k].shape)
        ref_across, ref_inside = sp.seam_metric(ref)
        assert across <= 1.05 * ref_across + 1e-3, (k, across, ref_across)
        if res.levels[k].shape[1] >= 16:  # on tiny faces the two sets of pairs sample different places
            assert across <= 1.25 * inside, (k, across, inside)


def test_edge_pairs_are_neighbours():
    b, a, i = sp.edge_pairs(8)
    d = sphere.cube_directions(8, dtype=np.float64).reshape(-1, 3)
    ang_a = np.arccos(np.clip(np.sum(d[b] * d[a], 1), -1, 1))
    ang_i = np.arccos(np.clip(np.sum(d[b] * d[i], 1), -1, 1))
    # across an edge the neighbour is one texel away, about as far as the inward neighbour
    assert ang_a.max() < 1.3 * ang_i.max() and np.all(a != b)


def test_roughness_mappings():
    assert sp.level_roughness(9).tolist() == [k / 8 for k in range(9)]
    # Lagarde & de Rousiers 2014: level = sqrt(r)·(levels − 1)  <=>  r = (level/(levels − 1))²
    r = sp.level_roughness(5, "quadratic")
    assert np.allclose(np.sqrt(r) * 4, np.arange(5))
    assert sp.level_roughness(1).tolist() == [0.0]
    assert sp.lobe_parameter(0.5, "ggx") == 0.25
    # Walter et al. 2007 section 5.2 / docs/references.md, section 5: n = 2/α² − 2; r 0.492479 -> n 32
    assert float(sp.lobe_parameter(0.492479, "blinn-phong")) == pytest.approx(32, rel=1e-4)


@pytest.mark.parametrize(("kwargs", "match"), [
    ({"size": 12}, "power of two"),
    ({"size": 16, "levels": 6}, "at most 5 levels"),
    ({"size": 16, "levels": 3, "roughness": [0, 0.5, 1.2]}, r"\[0, 1\]"),
    ({"size": 16, "levels": 3, "roughness": [0, -0.1, 0.5]}, r"\[0, 1\]"),
    ({"size": 16, "levels": 3, "roughness": [0.1, 0.2, 0.5]}, "mirror"),
    ({"size": 16, "levels": 3, "roughness": [0, 0.6, 0.5]}, "decrease"),
    ({"size": 16, "levels": 3, "roughness": [0, 0.5]}, "one value per level"),
    ({"size": 16, "roughness": "cubic"}, "mapping must be one of"),
    ({"size": 16, "lobe": "phong"}, "lobe must be one of"),
    ({"size": 16, "quality": "best"}, "quality must be one of"),
])
def test_bad_parameters(kwargs, match):
    env = np.ones((16, 32, 3), np.float32)
    size = kwargs.pop("size")
    with pytest.raises(ValueError, match=match):
        sp.prefilter_specular(env, size, **kwargs)


def test_bad_environments():
    with pytest.raises(ValueError, match="equirectangular"):
        sp.prefilter_specular(np.ones((16, 16, 3), np.float32), 8)
    bad = np.ones((16, 32, 3), np.float32)
    bad[3, 4, 1] = np.nan
    with pytest.raises(ValueError, match="NaN"):
        sp.prefilter_specular(bad, 8)


def test_error_metrics_definition():
    # by hand: two texels, Ω = (1, 3); P − R = (0.1, −0.2); R = (1, 2)
    m = sp.error_metrics(np.array([[1.1], [1.8]]), np.array([[1.0], [2.0]]), np.array([1.0, 3.0]))
    assert m["rel_rms"][0] == pytest.approx(math.sqrt((0.01 + 3 * 0.04) / (1 + 12)))
    assert m["max"][0] == pytest.approx(0.1)


@pytest.mark.slow
def test_demo_sky_against_brute_force():
    """The demo sky (radiance 0.15-1.2, sun of 0.5° at 2·10⁴) at 2048 x 1024 -> 256² chain, sampled
    at a few texels per level (tests/perf/bench_specular.py checks >= 2000 plus all edge texels)."""
    from bakery.samples import sky_panorama

    env = sky_panorama(2048)
    res = sp.prefilter_specular(env, 256)
    rng = np.random.default_rng(4)
    for k in range(1, 9):
        d, om = _level_dirs(res.levels[k])
        pick = rng.choice(len(d), min(len(d), 24), replace=False)
        ref = prefilter_reference(env, d[pick], float(res.params[k]))
        m = sp.error_metrics(res.levels[k].reshape(-1, 3)[pick], ref, om[pick])
        assert m["rel_rms"].max() < 0.01 and m["max"].max() < 0.03, (k, m)


def test_cubemap_input():
    # a cubemap input is resampled to a panorama first; on a smooth environment the chain matches the one
    # made from the panorama itself (both judged against the brute-force sum over the panorama)
    from bakery.envmap.resample import resample

    env = _smooth_env(64, seed=13, sun=False)
    cube = resample(env, "equirect", "cube", 48)
    a = sp.prefilter_specular(cube, 16, levels=5)
    for k in range(2, 5):
        d, om = _level_dirs(a.levels[k])
        ref = prefilter_reference(env, d, float(a.params[k]))
        m = sp.error_metrics(a.levels[k].reshape(-1, 3), ref, om)
        # measured worst over levels 0.027 % (the cube -> panorama resampling comes first)
        assert m["rel_rms"].max() < 1e-3, (k, m)


def test_mirror_level_is_the_source():
    # level 0 (roughness 0) is the panorama resampled: on a smooth environment it matches the source's own
    # conservative area average over each texel, and keeps the total energy Σ L Ω
    from bakery.envmap.resample import resample

    env = _smooth_env(128, seed=21, sun=False)
    lv0 = sp.prefilter_specular(env, 32, levels=2).levels[0]
    ref = resample(env, "equirect", "cube", 32, filter="area")
    om = sphere.cube_texel_solid_angles(32, dtype=np.float64)
    m = sp.error_metrics(lv0.reshape(-1, 3), ref.reshape(-1, 3), np.tile(om.ravel(), 6))
    assert m["rel_rms"].max() < 2e-3 and m["max"].max() < 1e-2, m
    e_src = (env * sphere.equirect_solid_angles(256, 128, dtype=np.float64)[..., None]).sum((0, 1))
    e_out = (lv0 * om[None, :, :, None]).sum((0, 1, 2))
    assert np.allclose(e_out / e_src, 1, atol=1e-3)


def test_mirror_level_keeps_a_sun():
    # a texel of 1e4 on a constant sky: level 0 keeps the total energy exactly (the bright texel's excess is
    # deposited, not interpolated) and puts it in the cube texel that contains the texel's centre (Vulkan
    # face selection table, bakery.sphere)
    h, w = 128, 256
    env = np.ones((h, w, 3), np.float32)
    env[40, 170] = 1e4
    lv0 = sp.prefilter_specular(env, 16, levels=2).levels[0]
    om = sphere.cube_texel_solid_angles(16, dtype=np.float64)
    e_src = (env * sphere.equirect_solid_angles(w, h, dtype=np.float64)[..., None]).sum((0, 1))
    e_out = (lv0 * om[None, :, :, None]).sum((0, 1, 2))
    assert np.allclose(e_out / e_src, 1, atol=1e-5)
    f, s, t = sphere.dir_to_face(sphere.equirect_directions(w, h, dtype=np.float64)[40, 170][None])
    peak = np.unravel_index(np.argmax(lv0[..., 0]), lv0.shape[:3])
    assert peak == (int(f[0]), int(t[0] * 16), int(s[0] * 16))


def test_benchmark_oracle_is_the_reference_sum():
    # tests/perf/bench_specular.py judges accuracy with sp.brute_force_prefilter; it is the same sum as the
    # independent reference (float64 both: agreement to rounding, measured 1e-15 relative)
    env = _smooth_env(64, seed=2)
    d = sphere.cube_directions(4, dtype=np.float64).reshape(-1, 3)
    for lobe, param in (("ggx", 0.02), ("ggx", 0.5), ("blinn-phong", 30.0)):
        np.testing.assert_allclose(sp.brute_force_prefilter(env, d, param, lobe=lobe),
                                   prefilter_reference(env, d, param, lobe=lobe), rtol=1e-10)


def test_reduced_panorama_with_bright_texels_replaced():
    # the shared reduction: blocks holding replaced texels equal the solid-angle weighted block mean of the
    # modified panorama, written out here (exact latitude-longitude cell areas, tests/envmap/reference.py)
    from bakery.envmap.reduce import reduce_equirect
    from tests.envmap.reference import texels

    rng = np.random.default_rng(8)
    h, w, f = 64, 128, 8
    env = rng.uniform(0.1, 1.0, (h, w, 3)).astype(np.float32)
    idx = np.array([5 * w + 7, 5 * w + 8, 40 * w + 127, 63 * w + 0])
    env.reshape(-1, 3)[idx] = 2e4
    values = rng.uniform(0, 1, (len(idx), 3)).astype(np.float32)
    omega_row = sphere.equirect_row_solid_angles(w, h, dtype=np.float64)
    got = sp._patch_blocks(env, reduce_equirect(env, f), f, idx, values, omega_row)
    mod = env.astype(np.float64).copy()
    mod.reshape(-1, 3)[idx] = values
    om = texels(w, h)[1].reshape(h, w)
    want = (mod * om[..., None]).reshape(h // f, f, w // f, f, 3).sum((1, 3)) / om.reshape(
        h // f, f, w // f, f).sum((1, 3))[..., None]
    np.testing.assert_allclose(got, want, rtol=2e-6)  # float32 blocks (measured 3e-7)
