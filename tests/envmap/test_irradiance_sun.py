"""Exact irradiance with a sun, against the full-resolution cosine convolution written here; the SH9
poorness estimate.

Reference: E(n) = Σ_t L_t max(0, n·l_t) Ω_t over every texel of the panorama (the definition of
irradiance, e.g. Ramamoorthi & Hanrahan 2001, "An Efficient Representation for Irradiance Environment Maps",
SIGGRAPH, eq. 1, summed with each texel's exact solid angle (2π/W)(sin θ0 − sin θ1)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bakery.envmap import irradiance as I
from tests.envmap.reference import irradiance_reference as reference
from tests.envmap.reference import texels


def sun_sky(w: int, sun_dir, radius_deg: float, radiance: float = 2e4, sky: bool = True) -> np.ndarray:
    """A blue-ish sky over a darker ground, plus a sun disc (each texel's coverage from 8 x 8 sub-samples)."""
    h = w // 2
    d, _ = texels(w, h)
    y = d[..., 1:2]
    env = np.where(y > 0, 0.4 + 0.8 * (1 - y), 0.15 + 0.1 * np.cos(9 * d[..., :1])) * np.array([0.8, 0.9, 1.0])
    if not sky:
        env[:] = 0.2
    s = np.asarray(sun_dir, float)
    s /= np.linalg.norm(s)
    cos_r = math.cos(math.radians(radius_deg))
    near = np.nonzero((d @ s) > math.cos(math.radians(radius_deg) + 4 * math.pi / h))
    sub = 8
    off = (np.arange(sub) + 0.5) / sub - 0.5
    for r, c in zip(*near, strict=True):
        uu = (c + 0.5 + off[None, :]) / w
        vv = (r + 0.5 + off[:, None]) / h
        phi, th = 2 * math.pi * (uu - 0.5), math.pi * (0.5 - vv)
        dd = np.stack(np.broadcast_arrays(np.sin(phi) * np.cos(th), np.sin(th), -np.cos(phi) * np.cos(th)), -1)
        env[r, c] += radiance * np.mean(dd @ s > cos_r) * np.array([1.0, 0.95, 0.85])
    return env.astype(np.float32)


def terminator_normals(s, count=48):
    """Normals 80-92° from the sun direction s (where a spread-out sun errs most)."""
    s = np.asarray(s, float) / np.linalg.norm(s)
    a = np.cross(s, [0.0, 1.0, 0.0])
    a /= np.linalg.norm(a)
    b = np.cross(s, a)
    ang = np.radians(np.linspace(80, 92, 7))
    az = np.linspace(0, 2 * math.pi, count // 7 + 1, endpoint=False)
    g, z = np.meshgrid(ang, az)
    return (np.cos(g)[..., None] * s + np.sin(g)[..., None] * (np.cos(z)[..., None] * a
                                                                + np.sin(z)[..., None] * b)).reshape(-1, 3)


SUN = np.array([0.5, 0.57, -0.65])


def test_exact_irradiance_with_a_half_degree_sun_within_one_percent():
    from bakery import sphere

    env = sun_sky(1024, SUN, 0.5)
    normals = np.concatenate([sphere.cube_directions(8, dtype=np.float64).reshape(-1, 3),
                              terminator_normals(SUN)])
    ref = reference(env, normals)
    got = I.irradiance_exact(env, "equirect", normals)
    rel = np.abs(got - ref) / ref
    assert rel.max() <= 0.01, rel.max()


def test_exact_irradiance_keeps_the_sun_of_a_cube_input():
    from bakery import sphere
    from bakery.envmap.resample import resample

    env = sun_sky(512, SUN, 1.0)
    cube = resample(env, "equirect", "cube", 128, filter="area")
    normals = terminator_normals(SUN, 21)
    # reference: the full-resolution sum over the cube's own texels
    d = sphere.cube_directions(128, dtype=np.float64).reshape(-1, 3)
    om = np.tile(sphere.cube_texel_solid_angles(128, dtype=np.float64).ravel(), 6)
    ref = np.maximum(normals @ d.T, 0) @ (cube.reshape(-1, 3).astype(np.float64) * om[:, None])
    got = I.irradiance_exact(cube, "cube", normals)
    assert (np.abs(got - ref) / ref).max() <= 0.01


def test_progress_of_the_exact_irradiance():
    env = sun_sky(256, SUN, 1.0)
    calls = []
    normals = terminator_normals(SUN)
    a = I.irradiance_exact(env, "equirect", normals, chunk=10, progress=lambda f, s: calls.append(f))
    b = I.irradiance_exact(env, "equirect", normals, chunk=10)
    assert a.tobytes() == b.tobytes()
    assert calls == sorted(calls) and calls[-1] == 1.0 and len(calls) >= 3


def test_sh9_error_estimate():
    # with a sun: the estimate matches the actual worst SH9 error at its normals (it is that error) and is
    # far above R&H 2001's "average errors of only 1%"; without a sun, small
    env = sun_sky(512, SUN, 0.5)
    est = I.sh9_error_estimate(env, "equirect")
    assert est["max_relative"] > 0.05 and est["bright_fraction"] > 0.3
    from bakery import sphere

    n = sphere.cube_directions(8, dtype=np.float64).reshape(-1, 3)
    sh = I.eval_sh(I.irradiance_coefficients(I.project_sh(env, "equirect")), n)
    ref = reference(env, n)
    keep = ref > 1e-3 * ref.max(0)
    actual = (np.abs(sh - ref) / ref)[keep].max()
    assert est["max_relative"] == pytest.approx(actual, rel=0.05)
    calm = I.sh9_error_estimate(sun_sky(512, SUN, 0.5, radiance=0.0), "equirect")
    assert calm["max_relative"] < 0.1 and calm["mean_relative"] < 0.02 and calm["bright_fraction"] < 0.01
