"""Specular anti-aliasing checked against directly averaged lobes, published formulas and invariants.

Normals are drawn with scipy.stats.vonmises_fisher (a general-purpose reference library); lobes are written
out here from their published definitions, independently of bakery.
"""

import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.stats import vonmises_fisher

from bakery import BakeryError
from bakery.roughness.antialias import antialias_levels, normal_spread, roughness_mips, toksvig_exponent


def d_ggx(c, a):  # Walter et al. 2007, eq. 33 (Trowbridge & Reitz 1975)
    return np.where(c > 0, a * a / (math.pi * (c * c * (a * a - 1) + 1) ** 2), 0.0)


def d_beckmann(c, a):  # Walter et al. 2007, eq. 25 (equation numbers from memory)
    c = np.clip(c, 1e-9, 1.0)
    t2 = (1 - c * c) / (c * c)
    return np.where(c > 1e-8, np.exp(-t2 / (a * a)) / (math.pi * a * a * c**4), 0.0)


LOBES = {"ggx": d_ggx, "beckmann": d_beckmann}


def half_max(f, peak):
    grid = np.linspace(1e-6, 1.5, 151)
    vals = np.array([f(t) for t in grid]) - peak / 2
    i = np.nonzero(vals > 0)[0][-1]
    return brentq(lambda t: f(t) - peak / 2, grid[i], grid[i + 1], xtol=1e-10)


def vmf_normals(kappa, size, seed):
    rng = np.random.default_rng(seed)
    return vonmises_fisher([0.0, 0.0, 1.0], kappa).rvs(size * size, random_state=rng).reshape(size, size, 3)


def box_mean(a, k):
    """Mean over 2^k x 2^k blocks (power-of-two sizes), in float64."""
    h, w = a.shape[:2]
    s = 2**k
    return a.reshape(h // s, s, w // s, s, *a.shape[2:]).mean(axis=(1, 3), dtype=np.float64)


# ------------------------------------------------------------------------------------------ the averaged lobe


def lobe_ratios(lobe, alpha, kappa, size=64):
    """(peak, half-maximum angle) of D_alpha' at the coarsest level over those of the footprint mean lobe."""
    n = vmf_normals(kappa, size, seed=int(kappa) + int(alpha * 100))
    r = roughness_mips(n.astype(np.float32), math.sqrt(alpha), lobe=lobe)[-1]
    a_wide = float(r[0, 0]) ** 2
    m = n.reshape(-1, 3)
    mean = m.mean(axis=0)
    mean /= np.linalg.norm(mean)
    t1 = np.cross(mean, [1.0, 0.0, 0.0])
    t1 /= np.linalg.norm(t1)
    t2 = np.cross(mean, t1)
    phis = np.linspace(0, 2 * np.pi, 12, endpoint=False)
    d = LOBES[lobe]

    def averaged(theta):  # footprint mean, also averaged over 12 azimuths about the mean normal
        h = (np.sin(theta) * np.cos(phis))[:, None] * t1 + (np.sin(theta) * np.sin(phis))[:, None] * t2
        h = h + np.cos(theta) * mean
        return float(d(h @ m.T, alpha).mean())

    peak = averaged(0.0)
    width = half_max(averaged, peak)
    peak_wide = float(d(np.float64(1.0), a_wide))
    width_wide = half_max(lambda t: float(d(np.float64(math.cos(t)), a_wide)), peak_wide)
    return peak_wide / peak, width_wide / width


@pytest.mark.parametrize(("lobe", "alpha", "kappa"), [
    # GGX: the base lobe carries at least as much spread as the normals (see docs/roughness.md for the rest)
    ("ggx", 0.1, 1000), ("ggx", 0.2, 200), ("ggx", 0.2, 1000), ("ggx", 0.3, 200), ("ggx", 0.5, 50),
    ("beckmann", 0.05, 50), ("beckmann", 0.05, 200), ("beckmann", 0.1, 50), ("beckmann", 0.2, 200),
    ("beckmann", 0.3, 50), ("beckmann", 0.3, 1000),
])
def test_coarse_level_matches_footprint_mean_lobe(lobe, alpha, kappa):
    # the footprint mean of D_alpha(h . n_i) against D_alpha'(h . n_mean): peak and half-maximum
    # angle within 10%. Normals ~ von Mises-Fisher(kappa) (Banerjee et al. 2005), 64 x 64, coarsest level.
    peak, width = lobe_ratios(lobe, alpha, kappa)
    assert peak == pytest.approx(1.0, rel=0.10)
    assert width == pytest.approx(1.0, rel=0.10)


def test_vmf_concentration_estimate():
    # Banerjee et al. 2005: kappa ~ (3r - r^3)/(1 - r^2) for the mean resultant length r of a vMF on the sphere,
    # whose exact r is coth(kappa) - 1/kappa. Toksvig's 1/sigma^2 = r/(1 - r) is the same for r -> 1 only.
    for kappa in (2.0, 5.0, 20.0, 100.0, 1000.0):
        r = 1 / math.tanh(kappa) - 1 / kappa
        assert 1 / float(normal_spread(np.float64(r))) == pytest.approx(kappa, rel=0.06)
    r = 1 / math.tanh(2.0) - 0.5  # kappa = 2: Toksvig's estimate r/(1 - r) = 1.1613 is 42% low (measured here)
    assert 1 / float(normal_spread(np.float64(r), method="toksvig")) == pytest.approx(r / (1 - r), rel=1e-12)
    assert r / (1 - r) < 0.6 * 2.0
    # docs/references.md, section 6 (computed): averaging (+-0.6, 0, 0.8) gives |Na| = 0.8, sigma^2 = 0.25,
    # kappa = 5.244444
    assert float(normal_spread(np.float64(0.8), method="toksvig")) == pytest.approx(0.25, rel=1e-12)
    assert 1 / float(normal_spread(np.float64(0.8))) == pytest.approx(5.244444, abs=1e-6)


@pytest.mark.parametrize(("s", "na", "expect"), [
    # Toksvig 2005, s' = ft s, ft = |Na| / (|Na| + s (1 - |Na|)); docs/references.md, section 6 (computed)
    (16, 0.99, 13.7739), (128, 0.99, 55.8238), (1024, 0.99, 90.2725),
    (16, 0.90, 5.7600), (128, 0.90, 8.4088), (1024, 0.90, 8.9216),
    (16, 0.50, 0.9412), (128, 0.50, 0.9922), (1024, 0.50, 0.9990)])
def test_toksvig_exponent(s, na, expect):
    assert float(toksvig_exponent(s, na)) == pytest.approx(expect, abs=5e-5)


def test_toksvig_method_is_toksvig_in_alpha():
    # With the lobe-equivalent exponent s = c/alpha^2, Toksvig's 1/s' = 1/s + sigma^2 is alpha'^2 = alpha^2 +
    # c sigma^2 (Toksvig 2005; c = 4 for GGX, see bakery.roughness.antialias).
    lengths = [np.ones((2, 2), np.float32), np.full((1, 1), 0.95, np.float32)]
    r = antialias_levels(lengths, 0.4, method="toksvig")[1][0, 0]
    a2 = 0.4**4
    s = 4 / a2
    s_wide = float(toksvig_exponent(s, 0.95))
    assert float(r) ** 4 == pytest.approx(4 / s_wide, rel=1e-5)


# ------------------------------------------------------------------------------------------ invariants


def test_flat_normals_leave_roughness_unchanged():
    # a flat normal map adds nothing at any level; roughness levels are box means of alpha^2 = r^4.
    rng = np.random.default_rng(3)
    r = rng.random((32, 32)).astype(np.float32)
    flat = np.zeros((32, 32, 3), np.float32)
    flat[..., 2] = 1
    chain = roughness_mips(flat, r)
    assert len(chain) == 6
    np.testing.assert_array_equal(chain[0], r)
    for k, level in enumerate(chain):
        np.testing.assert_allclose(level, box_mean(r.astype(np.float64) ** 4, k) ** 0.25, rtol=2e-6)
    const = roughness_mips(flat, 0.37)
    for level in const:
        np.testing.assert_allclose(level, 0.37, rtol=1e-6)
    tilted = np.broadcast_to(np.array([0.6, 0.0, 0.8], np.float32), (32, 32, 3))  # parallel, not flat
    for level in roughness_mips(tilted, 0.37):
        np.testing.assert_allclose(level, 0.37, rtol=1e-6)


def test_mips_average_alpha_squared_not_perceptual():
    # alpha^2 (the NDF's variance) is averaged. Checker of r = 0 and r = 1: level 1 has alpha^2 = 1/2,
    # r = (1/2)^(1/4) = 0.840896, not the perceptual mean 0.5.
    r = (np.indices((8, 8)).sum(axis=0) % 2).astype(np.float32)
    flat = np.zeros((8, 8, 3), np.float32)
    flat[..., 2] = 1
    np.testing.assert_allclose(roughness_mips(flat, r)[1], 0.5**0.25, rtol=1e-6)


def test_monotonic_in_level():
    # the result grows with the level. Normals ~ vMF with kappa varying across the map, random base.
    rng = np.random.default_rng(11)
    n = np.concatenate([vmf_normals(k, 32, seed=i) for i, k in enumerate((10, 40, 160, 640))], axis=1)
    n = np.concatenate([n, n[:, ::-1]], axis=0)[:, :64].astype(np.float32)  # 64 x 64
    r = (0.1 + 0.8 * rng.random((64, 64))).astype(np.float32)
    chain = roughness_mips(n, r)
    means = [float(level.astype(np.float64).__pow__(4).mean()) for level in chain]
    assert all(b >= a for a, b in zip(means, means[1:], strict=False))
    for fine, coarse in zip(chain, chain[1:], strict=False):
        h, w = coarse.shape
        children = fine.reshape(h, 2, w, 2) ** 4
        assert np.all(coarse**4 >= children.mean(axis=(1, 3)) * (1 - 1e-6))  # never below its children's mean


def test_level_sizes_follow_ktx2():
    # KTX 2.0 specification, section 4.1: level sizes max(1, floor(size / 2^k)) down to 1x1.
    n = np.zeros((5, 12, 3), np.float32)
    n[..., 2] = 1
    assert [lv.shape for lv in roughness_mips(n, 0.5)] == [(5, 12), (2, 6), (1, 3), (1, 1)]
    assert len(roughness_mips(n, 0.5, levels=2)) == 2


def test_bad_input():
    flat = np.zeros((8, 8, 3), np.float32)
    flat[..., 2] = 1
    with pytest.raises(BakeryError, match="same size"):
        roughness_mips(flat, np.zeros((4, 8), np.float32))
    with pytest.raises(BakeryError, match=r"\[0, 1\]"):
        roughness_mips(flat, 1.5)
    with pytest.raises(BakeryError, match="1 to 4 mip levels"):
        roughness_mips(flat, 0.5, levels=5)
    with pytest.raises(BakeryError, match="zero-length"):
        roughness_mips(np.zeros((8, 8, 3), np.float32), 0.5)
    with pytest.raises(BakeryError, match="must be one of"):
        roughness_mips(flat, 0.5, method="average")


def test_nan_normals_are_refused():
    n = np.zeros((8, 8, 3), np.float32)
    n[..., 2] = 1
    n[3, 4, 0] = np.nan
    with pytest.raises(BakeryError, match="NaN or Inf"):
        roughness_mips(n, 0.5)
    with pytest.raises(BakeryError, match="NaN or Inf"):
        roughness_mips(n[:7, :5], 0.5)  # odd sizes take the other path


def test_lengths_agree_with_the_normal_map_mip_chain():
    # The fast even-size path and bakery.normals.mips.normal_mips average the same footprints.
    from bakery.normals.mips import normal_mips
    from bakery.roughness.antialias import _normal_lengths

    n = vmf_normals(30.0, 32, seed=9).astype(np.float32)
    ours = _normal_lengths(n, 6)
    theirs = [length for _, length in normal_mips(n)]
    for a, b in zip(ours[1:], theirs[1:], strict=True):
        np.testing.assert_allclose(a, b, atol=2e-6)
    for k in range(1, 6):  # and both are the footprint means of the unit normals (float64 reference)
        np.testing.assert_allclose(ours[k], np.linalg.norm(box_mean(n.astype(np.float64), k), axis=-1), atol=2e-6)


@pytest.mark.parametrize(("lobe", "alpha"), [("ggx", 0.001), ("ggx", 0.05), ("ggx", 0.2), ("beckmann", 0.001),
                                             ("beckmann", 0.05), ("beckmann", 0.2)])
def test_lobe_spread_factor_from_the_lobe_itself(lobe, alpha):
    # The factor c that turns a per-axis angular variance v into alpha^2 (alpha'^2 = alpha^2 + c v), pinned
    # independently of bakery.roughness: near its peak a lobe is a Gaussian exp(-theta^2 / (2 s^2)) in the
    # angle, so s^2 = -1 / (d^2 ln D / d theta^2 at 0), measured here by a central second difference of the
    # distributions of Walter et al. 2007 (eqs. 25, 33), and c = alpha^2 / s^2. Derived here (docs/references.md,
    # section 6): GGX ln D = const - 2 ln(alpha^2 cos^2 + sin^2) gives c = 4 (1 - alpha^2); Beckmann
    # -tan^2/alpha^2 - 4 ln cos gives c = 2 (1 - 2 alpha^2). Their small-lobe limits 4 and 2 are the constants
    # bakery uses (Han et al. 2007: kappa ~ 2 / alpha^2 for Beckmann).
    from bakery.roughness.antialias import LOBE_SPREAD

    t = 1e-3 * alpha
    ln_d = [math.log(float(LOBES[lobe](np.float64(math.cos(x)), alpha))) for x in (-t, 0.0, t)]
    measured = alpha * alpha * -(ln_d[0] - 2 * ln_d[1] + ln_d[2]) / (t * t)
    closed = 4 * (1 - alpha**2) if lobe == "ggx" else 2 * (1 - 2 * alpha**2)
    assert measured == pytest.approx(closed, rel=1e-4)
    if alpha <= 1e-3:
        assert measured == pytest.approx(LOBE_SPREAD[lobe], rel=1e-4)


def _rising_to_one(seen):
    return bool(seen) and seen[-1] == 1.0 and all(a <= b for a, b in zip(seen, seen[1:], strict=False))


def test_progress_within_the_chain_and_no_change_to_it():
    # 2048^2 normals: level 1's reduction reports every 64 strips (16 rows each), then each level
    normals = vmf_normals(40.0, 2048, seed=5).astype(np.float32)
    seen = []
    with_progress = roughness_mips(normals, 0.3, progress=seen.append)
    plain = roughness_mips(normals, 0.3)
    assert _rising_to_one(seen) and len(seen) >= 12  # one per level (12) plus the strips of level 1
    assert sum(f < 0.7 for f in seen) >= 1  # reports inside the first reduction (its share is 0..0.7)
    for a, b in zip(with_progress, plain, strict=True):
        assert np.array_equal(a, b)


def test_bakes_report_progress_and_write_the_same_bytes(tmp_path):
    from bakery.bakes import run_bake
    from bakery.bakes.roughness import AntialiasParams, RoughnessParams
    from bakery.io import write_image

    n = vmf_normals(40.0, 64, seed=6).astype(np.float32)
    write_image(tmp_path / "n.png", n * 0.5 + 0.5, bits="16")
    write_image(tmp_path / "s.png", np.linspace(0, 1, 64 * 64, dtype=np.float32).reshape(64, 64), bits="16")
    cases = [("antialias", {"normal": tmp_path / "n.png"}, AntialiasParams(roughness=0.4), "png"),
             ("antialias", {"normal": tmp_path / "n.png"}, AntialiasParams(roughness=0.4, loose=True), "ktx2"),
             ("roughness", {"specular": tmp_path / "s.png"}, RoughnessParams(source="smoothness"), "png")]
    for i, (bake, inputs, params, ext) in enumerate(cases):
        seen = []
        a = run_bake(bake, inputs, tmp_path / f"a{i}.{ext}", params, progress=lambda f, label, s=seen: s.append(f))
        b = run_bake(bake, inputs, tmp_path / f"b{i}.{ext}", params)
        assert _rising_to_one(seen) and len(seen) > 3, (bake, seen)
        assert a[0].read_bytes() == b[0].read_bytes()


def test_progress_within_a_roughness_conversion_changes_nothing():
    from bakery.roughness.convert import convert_specular

    x = np.linspace(0.0, 1.0, 5_000_000, dtype=np.float32)  # 153 blocks of 32 K values: reports at 64 and 128
    seen = []
    a = convert_specular(x, source="smoothness", target="alpha", progress=seen.append)
    assert len(seen) == 2 and 0 < seen[0] < seen[1] < 1
    assert np.array_equal(a, convert_specular(x, source="smoothness", target="alpha"))
