"""Finding the sun (bakery.envmap.sunlight) on synthetic skies with known suns.

Truth: each sun is drawn into the panorama by the test itself (each texel's coverage of the disc from 8 x 8
sub-samples, tests/envmap/test_irradiance_sun.py); its irradiance at normal incidence is the texel sum
Σ L_sun Ω max(0, s·l) of what was drawn (the definition of irradiance, Ramamoorthi & Hanrahan 2001, eq. 1).
The light's direction is the energy centroid (Debevec 2005, "A Median Cut Algorithm for Light Probe
Sampling", SIGGRAPH poster).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bakery import sphere
from bakery.envmap import irradiance as I
from bakery.envmap import specular as sp
from bakery.envmap import sunlight as sl
from tests.envmap.reference import texels
from tests.envmap.test_irradiance_sun import sun_sky


def unit(v):
    v = np.asarray(v, float)
    return v / np.linalg.norm(v)


def sky_and_suns(w, suns, sky=True):
    """The panorama, and per sun its drawn layer's irradiance at normal incidence."""
    base = sun_sky(w, suns[0][0], suns[0][1], radiance=0.0, sky=sky).astype(np.float64)
    env = base.copy()
    truth = []
    d, om = texels(w, w // 2)
    for s, r, rad in suns:
        layer = sun_sky(w, s, r, radiance=rad, sky=sky).astype(np.float64) - base
        env += layer
        mu = np.maximum(d.reshape(-1, 3) @ unit(s), 0)
        truth.append((layer.reshape(-1, 3) * (om * mu)[:, None]).sum(0))
    return env.astype(np.float32), base, truth


def angle_deg(a, b):
    return math.degrees(math.acos(min(1.0, float(np.dot(unit(a), unit(b))))))


def energy(env):
    h, w = env.shape[:2]
    om = sphere.equirect_row_solid_angles(w, h, dtype=np.float64)
    return (env.astype(np.float64) * om[:, None, None]).sum((0, 1))


@pytest.mark.parametrize("radius", [0.25, 0.5, 1.0, 2.0])
@pytest.mark.parametrize("where", ["sky", "horizon"])
def test_one_sun_on_2048(radius, where):
    s = unit([0.4, 0.6, -0.7]) if where == "sky" else unit([0.7, math.sin(math.radians(radius + 0.3)), 0.7])
    rad = 2e4 * (0.5 / radius) ** 2  # the same power at every size
    env, base, truth = sky_and_suns(2048, [(s, radius, rad)])
    lights, rest = sl.find_lights(env)
    assert len(lights) == 1
    li = lights[0]
    assert angle_deg(li.direction, s) < 0.1
    np.testing.assert_allclose(li.irradiance, truth[0], rtol=0.01)
    # bookkeeping: what was taken out is what the light carries (to rounding), and the filled panorama's
    # energy is the sky's within 1 %
    lit = energy(env) - energy(rest)
    e_light = np.asarray(li.radiance) * li.solid_angle
    np.testing.assert_allclose(e_light, lit, rtol=0.01)
    np.testing.assert_allclose(energy(rest), energy(base), rtol=0.01)
    if radius >= 0.5:  # resolved by 3+ texels across: the radius itself
        assert li.angular_radius == pytest.approx(math.radians(radius), rel=0.15)


@pytest.mark.parametrize("w", [512, 1024])
def test_two_suns_on_smaller_panoramas(w):
    a, b = unit([0.4, 0.6, -0.7]), unit([-0.6, 0.3, 0.5])
    env, base, truth = sky_and_suns(w, [(a, 1.0, 5e3), (b, 0.5, 1e4)])
    lights, rest = sl.find_lights(env)
    assert len(lights) == 2
    half_texel = 180 / (w // 2) / 2
    got = sorted(lights, key=lambda x: -np.dot(x.direction, a))
    for li, s, t in zip(got, (a, b), truth, strict=True):
        assert angle_deg(li.direction, s) < half_texel
        np.testing.assert_allclose(li.irradiance, t, rtol=0.01)
    np.testing.assert_allclose(energy(rest), energy(base), rtol=0.01)


def test_no_compact_source_no_light():
    # a sky with a broad bright glow (radius about 20°, 12x the sky) but nothing compact
    env = sun_sky(1024, [0, 1, 0], 0.5, radiance=0.0)
    d = sphere.equirect_directions(1024, 512, dtype=np.float64)
    env = env + (12 * np.exp(-(1 - d @ unit([0.3, 0.4, -0.8])) / (1 - math.cos(math.radians(20)))))[..., None]
    lights, rest = sl.find_lights(env.astype(np.float32))
    assert lights == [] and np.array_equal(rest, env.astype(np.float32))


def test_environment_without_the_sun_plus_the_light_gives_the_original_back():
    s = unit([0.4, 0.6, -0.7])
    env, _, _ = sky_and_suns(1024, [(s, 1.0, 5e3)])
    (li,), rest = sl.find_lights(env)
    # diffuse: exact irradiance, and SH9 through the disc's coefficients
    n = sphere.cube_directions(8, dtype=np.float64).reshape(-1, 3)
    e0 = I.irradiance_exact(env, "equirect", n)
    e1 = I.irradiance_exact(rest, "equirect", n) + sl.light_irradiance(li, n)
    assert (np.abs(e1 - e0) / e0).max() < 0.01
    sh0 = I.project_sh(env, "equirect")
    sh1 = I.project_sh(rest, "equirect") + sl.light_radiance_sh(li)
    np.testing.assert_allclose(sh1, sh0, rtol=0, atol=0.01 * np.abs(sh0).max())
    # specular: levels of roughness >= 0.25 within 1 % relative RMS
    r = [0, 0.125, 0.25, 0.5, 0.75, 1.0]
    a = sp.prefilter_specular(env, 32, levels=6, roughness=r)
    b = sp.prefilter_specular(rest, 32, levels=6, roughness=r)
    for k in range(len(r)):
        back = sl.add_light_to_level(b.levels[k], li, r[k])
        om = np.tile(sphere.cube_texel_solid_angles(32 >> k, dtype=np.float64).ravel(), 6)
        m = sp.error_metrics(back.reshape(-1, 3), a.levels[k].reshape(-1, 3), om)
        if r[k] >= 0.25:
            assert m["rel_rms"].max() < 0.01, (k, m)
        if r[k] == 0:  # mirror level: the energy comes back exactly
            e_a = (a.levels[0] * om.reshape(6, 32, 32)[..., None]).sum((0, 1, 2))
            e_b = (back * om.reshape(6, 32, 32)[..., None]).sum((0, 1, 2))
            np.testing.assert_allclose(e_b, e_a, rtol=1e-3)


def test_disc_formulas():
    # a uniform disc of radius ρ: irradiance at normal incidence L π sin² ρ (closed form of ∫ cos over a cap),
    # which the quadrature reproduces; the SH l = 0 coefficient is L Ω Y_00
    li = sl.Light.from_dict({"direction": [0, 1, 0], "angular_radius_deg": 3.0, "radiance": [100.0, 50, 10]})
    rho = math.radians(3)
    np.testing.assert_allclose(li.irradiance, np.array([100, 50, 10]) * math.pi * math.sin(rho) ** 2)
    pts, wts = sl.disc_points(li)
    assert wts.sum() == pytest.approx(2 * math.pi * (1 - math.cos(rho)), rel=1e-12)
    assert (pts @ np.array([0, 1.0, 0]) * wts).sum() * 100 == pytest.approx(li.irradiance[0], rel=1e-9)
    # across the horizon: against a fine brute-force sum over the disc
    n = unit([1.0, math.sin(math.radians(1)), 0])
    p2, w2 = sl.disc_points(li, 200, 400)
    want = (np.maximum(p2 @ n, 0) * w2).sum() * 100
    assert sl.light_irradiance(li, n[None])[0, 0] == pytest.approx(want, rel=1e-3)
    sh = sl.light_radiance_sh(li)
    assert sh[0, 0] == pytest.approx(100 * li.solid_angle * I.K0, rel=1e-12)
    back = sl.Light.from_dict(li.to_dict())
    assert back.radiance == pytest.approx(li.radiance) and back.direction == pytest.approx(li.direction)
    assert back.angular_radius == pytest.approx(li.angular_radius)
    with pytest.raises(ValueError, match="direction"):
        sl.Light.from_dict({"angular_radius_deg": 1, "radiance": [1]})
