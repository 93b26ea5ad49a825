"""Metalness, occlusion and directional lights of the preview shading, against analytic values on a flat
surface.

References (written out here, not taken from the renderer):
- Lambert, J. H. (1760). Photometria: a Lambertian surface of albedo c under irradiance E at incidence θ
  reflects radiance c·E·cos θ / π (also Pharr, Jakob & Humphreys 2016, "Physically Based Rendering", 3rd ed.,
  section 8.3).
- Walter, B., Marschner, S. R., Li, H., Torrance, K. E. (2007). Microfacet Models for Refraction through Rough
  Surfaces. EGSR: the BRDF D·G·F / (4 |n·l| |n·v|) (eq. 20) and GGX D = α² / (π cos⁴θm (α² + tan²θm)²) (eq. 33).
- Heitz, E. (2014). Understanding the Masking-Shadowing Function in Microfacet-Based BRDFs. JCGT 3(2):
  height-correlated G2 = 1 / (1 + Λ(v) + Λ(l)), Λ = (−1 + sqrt(1 + α² tan²θ)) / 2 (eqs. 72, 99).
- Schlick, C. (1994). An Inexpensive BRDF Model for Physically-based Rendering: F = F0 + (1 − F0)(1 − v·h)⁵.
- glTF 2.0 specification, appendix B: f = F·D·V + (1 − F)·c_diff/π, F0 = 0.04(1 − m) + c·m, c_diff = c(1 − m);
  section 3.9.3: occlusion applies to the indirect (environment) light only.
- Karis 2013 (split sum): in a constant environment L the specular term is L·(F0·A + B), with A, B computed by
  the independent quadrature of tests/preview/envtools.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bakery.preview.shading import DirectionalLight, Lighting, Material, shade
from tests.preview import envtools


def _constant_lighting(value: float, lights=()) -> Lighting:
    src = np.full((6, 8, 8, 3), value, np.float32)
    return Lighting((src, src.copy()), np.array([0.0, 1.0]), envtools.split_sum_table(32),
                    envtools.sh_project(src), lights=lights)


def _ggx(cos_h, a):
    tan2 = (1 - cos_h ** 2) / cos_h ** 2
    return a * a / (math.pi * cos_h ** 4 * (a * a + tan2) ** 2)


def _g2(cos_v, cos_l, a):
    lam = [(-1 + math.sqrt(1 + a * a * (1 - c * c) / (c * c))) / 2 for c in (cos_v, cos_l)]
    return 1 / (1 + lam[0] + lam[1])


def _directions(theta_deg: float, phi_deg: float = 0.0) -> np.ndarray:
    t, p = math.radians(theta_deg), math.radians(phi_deg)
    return np.array([math.sin(t) * math.cos(p), math.cos(t), math.sin(t) * math.sin(p)])


@pytest.mark.parametrize("theta_l, theta_v, phi_v, rough, metal", [
    (30.0, 0.0, 0.0, 0.6, 0.0), (50.0, 40.0, 180.0, 0.4, 0.0), (20.0, 35.0, 150.0, 0.7, 1.0),
    (60.0, 10.0, 90.0, 1.0, 0.5)])
def test_one_directional_light_on_a_flat_surface(theta_l, theta_v, phi_v, rough, metal):
    c = np.array([0.8, 0.5, 0.2])
    e = np.array([3.0, 2.0, 1.0])
    l_dir, v_dir = _directions(theta_l), _directions(theta_v, phi_v)
    light = DirectionalLight(tuple(l_dir), tuple(e))
    lighting = _constant_lighting(0.0, (light,))  # a black environment: only the light
    n = np.array([[0.0, 1.0, 0.0]], np.float32)
    got, _ = shade(n, v_dir[None].astype(np.float32), np.array([rough], np.float32), c.astype(np.float32),
                   metal, lighting)
    a = rough * rough
    h = (l_dir + v_dir) / np.linalg.norm(l_dir + v_dir)
    cos_l, cos_v, cos_h, cos_d = l_dir[1], v_dir[1], h[1], float(h @ l_dir)
    f0 = 0.04 * (1 - metal) + c * metal
    f = f0 + (1 - f0) * (1 - cos_d) ** 5
    spec = _ggx(cos_h, a) * _g2(cos_v, cos_l, a) * f / (4 * cos_l * cos_v)
    diffuse = (1 - f) * c * (1 - metal) / math.pi
    expected = (spec + diffuse) * e * cos_l
    np.testing.assert_allclose(got[0], expected, rtol=2e-5)  # float32 arithmetic: measured 3e-7 relative


def test_lambert_term_of_the_light():
    # Lambert 1760: with F0 = 0.04 at v·h, the diffuse layer (1 − F)·c·E·cos θ/π; α = 1 keeps the GGX part
    # small, so subtracting it written out leaves exactly the Lambert term
    c, e = 0.5, 2.0
    for theta in (0.0, 30.0, 60.0, 89.0):
        l_dir = _directions(theta)
        v_dir = _directions(0.0)
        lighting = _constant_lighting(0.0, (DirectionalLight(tuple(l_dir), (e, e, e)),))
        got, _ = shade(np.array([[0.0, 1.0, 0.0]], np.float32), v_dir[None].astype(np.float32),
                       np.array([1.0], np.float32), np.full(3, c, np.float32), 0.0, lighting)
        h = (l_dir + v_dir) / np.linalg.norm(l_dir + v_dir)
        f = 0.04 + 0.96 * (1 - h @ l_dir) ** 5
        spec = _ggx(h[1], 1.0) * _g2(1.0, l_dir[1], 1.0) * f / (4 * l_dir[1]) * e * l_dir[1]
        lambert = c * e * math.cos(math.radians(theta)) / math.pi
        np.testing.assert_allclose(got[0, 0] - spec, (1 - f) * lambert, rtol=1e-5, atol=1e-7)
    # a light below the horizon adds nothing
    lighting = _constant_lighting(0.0, (DirectionalLight((0.0, -1.0, 0.0), (5.0, 5.0, 5.0)),))
    got, _ = shade(np.array([[0.0, 1.0, 0.0]], np.float32), np.array([[0.0, 1.0, 0.0]], np.float32),
                   np.array([0.5], np.float32), np.full(3, 0.5, np.float32), 0.0, lighting)
    assert np.all(got == 0)


def test_metalness_in_a_constant_environment():
    # Karis 2013 split sum in a constant environment L: metal m = 1 reflects L·(c·A + B), no diffuse;
    # a dielectric white surface reflects L (white furnace: diffuse gets 1 − (0.04·A + B))
    L, c = 2.0, np.array([0.9, 0.6, 0.3], np.float32)
    lighting = _constant_lighting(L)
    n = np.array([[0.0, 1.0, 0.0]] * 3, np.float32)
    v = np.stack([_directions(t) for t in (0.0, 40.0, 70.0)]).astype(np.float32)
    rough = np.array([0.3, 0.5, 0.8], np.float32)
    metal = np.array([1.0, 1.0, 0.0], np.float32)  # a metalness map: two metal points, one dielectric
    got, nv = shade(n, v, rough, c, metal, lighting)
    for i in range(2):
        a_ref, b_ref = envtools.split_sum_terms(float(nv[i]), float(rough[i]))
        np.testing.assert_allclose(got[i], L * (c * a_ref + b_ref), rtol=0.02)  # 32² table, bilinear: 0.6 %
    white, _ = shade(n[2:], v[2:], rough[2:], np.ones(3, np.float32), 0.0, lighting)
    np.testing.assert_allclose(white[0], L, rtol=0.02)


def test_occlusion_multiplies_the_environment_only():
    light = DirectionalLight((0.0, 1.0, 0.0), (1.5, 1.5, 1.5))
    lighting = _constant_lighting(1.0, (light,))
    dark = _constant_lighting(0.0, (light,))
    n = np.array([[0.0, 1.0, 0.0]] * 3, np.float32)
    v = np.stack([_directions(t) for t in (10.0, 30.0, 50.0)]).astype(np.float32)
    r = np.full(3, 0.5, np.float32)
    c = np.full(3, 0.6, np.float32)
    ao = np.array([1.0, 0.5, 0.0], np.float32)
    full, _ = shade(n, v, r, c, 0.0, lighting)
    light_only, _ = shade(n, v, r, c, 0.0, dark)
    got, _ = shade(n, v, r, c, 0.0, lighting, occlusion=ao)
    np.testing.assert_allclose(got, ao[:, None] * (full - light_only) + light_only, rtol=1e-5, atol=1e-7)


def test_maps_on_the_rendered_tile():
    # a tile seen from straight above in a constant environment: texels with occlusion 0 are black,
    # metal texels take the base colour's hue, dielectric ones stay grey-white
    from bakery.preview.render import render_tile

    ao = np.ones((8, 8), np.float32)
    ao[:, :4] = 0
    metal = np.zeros((8, 8), np.float32)
    metal[:4] = 1
    mat = Material(roughness=0.5, base_color=(1.0, 0.5, 0.25), metallic=metal, occlusion=ao)
    r = render_tile(mat, _constant_lighting(1.0), size=64, pitch=90.0, repeat=1.0, supersample=1)
    rad = r.radiance
    left, right = rad[20:44, 12:22], rad[20:44, 42:52]  # u < 0.5 | u > 0.5 (the top rows are the far edge)
    assert left.max() < 1e-6
    top, bottom = rad[14:20, 42:52].mean(axis=(0, 1)), rad[44:50, 42:52].mean(axis=(0, 1))
    # image rows 0..3 (v > 0.5, far side = top of the picture) are metal: L·(c·A + B); the others dielectric:
    # L·(s + c·(1 − s)), s = 0.04·A + B (split sum, Karis 2013; A, B at n·v ≈ 1 seen from straight above:
    # the perspective tilts the view by up to 14° there, measured agreement 1-3 %)
    c = np.array([1.0, 0.5, 0.25])
    a_ref, b_ref = envtools.split_sum_terms(0.98, 0.5)
    np.testing.assert_allclose(top, c * a_ref + b_ref, rtol=0.05)
    s_ref = 0.04 * a_ref + b_ref
    np.testing.assert_allclose(bottom, s_ref + c * (1 - s_ref), rtol=0.05)
    assert right.min() > 0


def test_bad_maps_and_lights_are_refused():
    from bakery.errors import BakeryError

    with pytest.raises(BakeryError, match="metalness"):
        Material(metallic=np.full((4, 4), 1.5, np.float32))
    with pytest.raises(BakeryError, match="occlusion"):
        Material(occlusion=0.5)
    with pytest.raises(BakeryError, match="direction"):
        DirectionalLight((0.0, 0.0, 0.0), (1.0, 1.0, 1.0))
    with pytest.raises(BakeryError, match="irradiance"):
        DirectionalLight((0.0, 1.0, 0.0), (-1.0, 1.0, 1.0))
