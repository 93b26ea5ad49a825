"""The specular prefilter at any input and output size, against a brute-force sum written here.

The quantity (Karis 2013, SIGGRAPH course notes, "Physically Based Shading in Theory and Practice", split
sum with v = r = n):

    P(n) = Σ_t L_t w_t Ω_t / Σ_t w_t Ω_t,   w = max(n·l, 0) D(h),   h = normalize(n + l),

over every panorama texel t, with D the GGX distribution D = α² / (π ((n·h)² (α² − 1) + 1)²) (Walter et al.
2007, "Microfacet Models for Refraction through Rough Surfaces", EGSR, eq. 33) and the texel solid angle
Ω = (2π/W)(sin θ0 − sin θ1) between the row's edge latitudes (exact area of a latitude-longitude cell). The
reference (tests/envmap/reference.py) computes h and D from these formulas itself; it shares no code with
bakery's prefilter.
"""

from __future__ import annotations

import numpy as np
import pytest

from bakery.envmap import specular as sp
from tests.envmap.reference import prefilter_reference as reference


def sky(w: int) -> np.ndarray:
    """A sky with sharp structure at every scale: the demo scene (a 0.5° sun of 2·10⁴, a horizon edge, a
    ground pattern) at width w."""
    from bakery.samples import sky_panorama

    return sky_panorama(w)


def cube_texel_dirs(size: int) -> tuple[np.ndarray, np.ndarray]:
    """Texel centres of a cube level in bakery's directions and their solid angles (via bakery.sphere: the
    face table is tested in tests/envmap/test_sample.py; the reference integral is what matters here)."""
    from bakery import sphere

    d = sphere.cube_directions(size, dtype=np.float64).reshape(-1, 3)
    om = np.tile(sphere.cube_texel_solid_angles(size, dtype=np.float64).ravel(), 6)
    return d, om


def errors(value, ref, om):
    rms = np.sqrt((om[:, None] * (value - ref) ** 2).sum(0) / (om[:, None] * ref ** 2).sum(0)).max()
    rel = np.abs(value - ref) / ref
    return float(rms), float(np.percentile(rel, 99))


#: Bounds per quality (relative RMS, 99th percentile): "final" (the default) promises 0.05 % and 0.5 %; the
#: bounds here are the figures measured on these panoramas (docs/envlight.md), about doubled: worst 0.010 % /
#: 0.051 % for "final" and "high", 0.15 % / 0.97 % for "draft".
BOUNDS = {"draft": (2e-3, 1.5e-2), "final": (2e-4, 1e-3), "high": (2e-4, 1e-3)}


@pytest.mark.parametrize("quality", ["draft", "final", "high"])
@pytest.mark.parametrize("size", [64, 128, 256])
@pytest.mark.parametrize("width", [128, 256, 512])
def test_any_size_against_the_brute_force(quality, width, size):
    env = sky(width)
    res = sp.prefilter_specular(env, size, quality=quality)
    rng = np.random.default_rng(width + size)
    bound_rms, bound_p99 = BOUNDS[quality]
    for k in range(1, len(res.levels)):
        s = size >> k
        d, om = cube_texel_dirs(s)
        pick = rng.choice(len(d), min(len(d), 60), replace=False)
        ref = reference(env, d[pick], float(res.roughness[k]) ** 2)
        rms, p99 = errors(res.levels[k].reshape(-1, 3)[pick].astype(np.float64), ref, om[pick])
        assert rms <= bound_rms and p99 <= bound_p99, (k, res.band_limits[k], rms, p99)


def test_narrow_lobe_on_a_small_panorama_uses_a_window():
    # r = 1/8 on a 512 x 256 panorama: the lobe needs a band limit above W/2; the level is summed over a
    # window around each texel plus a band-limited far part, and matches the reference at every texel of a
    # face tile
    env = sky(512)
    res = sp.prefilter_specular(env, 64, levels=2, roughness=[0, 0.125])
    assert 0 < res.window_degrees[1] < 30
    d, om = cube_texel_dirs(32)
    pick = np.arange(4 * 32 * 32, 4 * 32 * 32 + 256)  # a block of face +Z: the panorama's centre, the horizon
    ref = reference(env, d[pick], 0.125 ** 2)
    rms, p99 = errors(res.levels[1].reshape(-1, 3)[pick].astype(np.float64), ref, om[pick])
    assert rms < 5e-4 and p99 < 5e-3, (rms, p99)


def test_progress_rises_within_levels_and_changes_nothing():
    env = sky(256)
    plain = sp.prefilter_specular(env, 64)
    calls: list[tuple[float, str]] = []
    res = sp.prefilter_specular(env, 64, progress=lambda f, label: calls.append((f, label)))
    for a, b in zip(plain.levels, res.levels, strict=True):
        assert a.tobytes() == b.tobytes()
    fr = [f for f, _ in calls]
    assert all(0.0 <= f <= 1.0 for f in fr) and fr == sorted(fr) and fr[-1] == 1.0
    assert all(isinstance(label, str) and 0 < len(label) < 80 for _, label in calls)
    # called within the steps: several different fractions under the transform's label and under level 1's
    by_label: dict[str, set[float]] = {}
    for f, label in calls:
        by_label.setdefault(label, set()).add(f)
    assert len(by_label[next(lb for lb in by_label if lb.startswith("levels"))]) >= 3
    assert len(by_label[next(lb for lb in by_label if lb.startswith("level 1"))]) >= 3


def test_message_only_progress_still_gets_lines():
    lines: list[str] = []
    sp.prefilter_specular(np.ones((32, 64, 3), np.float32), 8, progress=lines.append)
    assert lines and all(isinstance(x, str) for x in lines) and len(set(lines)) == len(lines)


def test_cubic_lookup_is_exact_on_quadratics_and_third_order():
    # Keys 1981, "Cubic convolution interpolation for digital image processing", IEEE Trans. ASSP 29(6): the
    # kernel with a = -1/2 (eq. 15) reproduces polynomials up to degree two exactly and its interpolation
    # error falls as h^3 (section III). The a = -3/4 kernel of OpenCV's bicubic remap does neither.
    from bakery.envmap.shsums import cubic_lookup

    rng = np.random.default_rng(1981)
    yy, xx = np.mgrid[0:40, 0:50].astype(np.float64)
    quad = (0.3 + 0.02 * xx - 0.05 * yy + 0.004 * xx * xx - 0.003 * xx * yy + 0.006 * yy * yy)[..., None]
    x = rng.uniform(2, 47, 500)
    y = rng.uniform(2, 37, 500)
    out = np.empty((500, 1))
    cubic_lookup(np.ascontiguousarray(quad), x, y, out)
    want = 0.3 + 0.02 * x - 0.05 * y + 0.004 * x * x - 0.003 * x * y + 0.006 * y * y
    np.testing.assert_allclose(out[:, 0], want, rtol=0, atol=1e-12)

    def error(n: int) -> float:  # a smooth function sampled n texels per unit length
        g = np.arange(4 * n + 8, dtype=np.float64)
        img = np.sin(g / n)[None, :, None] * np.cos(g / n)[:, None, None]
        px, py = rng.uniform(3, 4 * n + 3, 2000), rng.uniform(3, 4 * n + 3, 2000)
        res = np.empty((2000, 1))
        cubic_lookup(np.ascontiguousarray(img), px, py, res)
        return float(np.abs(res[:, 0] - np.sin(px / n) * np.cos(py / n)).max())

    order = np.log2(error(8) / error(16))
    assert 2.6 < order < 3.4, order


def _reduction_factors(monkeypatch) -> list[int]:
    """Records the factors by which the prefilter area-reduces the panorama for the transform."""
    seen: list[int] = []
    real = sp.reduce_equirect

    def spy(img, fy=2, fx=None):
        seen.append(fy)
        return real(img, fy, fx)

    monkeypatch.setattr(sp, "reduce_equirect", spy)
    return seen


def test_reduced_panorama_within_the_bound(monkeypatch):
    # 2048 x 1024 -> 64²: the transform reads the panorama area-reduced (its band limit, 191 at level 1, needs
    # far fewer rings than 1024); level 1 (r = 1/6) and level 2 hold the default quality's bounds against the
    # brute-force sum (0.079 % RMS at level 1 when the panorama was reduced to 256 rings)
    seen = _reduction_factors(monkeypatch)
    env = sky(2048)
    res = sp.prefilter_specular(env, 64, levels=3)
    assert seen and np.prod(seen) >= 2
    rng = np.random.default_rng(64)
    for k, count in ((1, 120), (2, 60)):
        d, om = cube_texel_dirs(64 >> k)
        pick = rng.choice(len(d), count, replace=False)
        ref = reference(env, d[pick], float(res.roughness[k]) ** 2)
        rms, p99 = errors(res.levels[k].reshape(-1, 3)[pick].astype(np.float64), ref, om[pick])
        assert rms <= 5e-4 and p99 <= 5e-3, (k, rms, p99)


def test_damping_estimate_bounds_the_reduction_error():
    # the reduction's error against the brute-force sum stays within sp.reduction_damping: the panorama
    # reduced as far as the band limit allows (to 256 rings for r = 1/6), a sky without its sun (the sun is
    # summed exactly, so the sky is what the area means damp)
    from bakery.samples import sky_panorama

    env = sky_panorama(2048, sun_radiance=1.0)
    loose = sp.Quality(tolerance=1e-4, bright_factor=16.0, max_bright=2048, reduction_error=1.0)
    r = 1 / 6
    res = sp.prefilter_specular(env, 64, levels=2, roughness=[0, r], quality=loose)
    g = sp._kernel("ggx", r, r * r, 1e-4, 1023)
    estimate = sp.reduction_damping(g, 256)
    d, om = cube_texel_dirs(32)
    pick = np.random.default_rng(6).choice(len(d), 100, replace=False)
    ref = reference(env, d[pick], r * r)
    rms, _ = errors(res.levels[1].reshape(-1, 3)[pick].astype(np.float64), ref, om[pick])
    assert 2.5e-4 < rms <= estimate, (rms, estimate)  # the reduction does damp: 0.05 % measured, 0.23 % estimated
