"""The map classifier on a labelled set of procedural maps of every kind.

The set mixes maps from bakery's own procedural generators (:mod:`bakery.samples`) with maps made here
independently of bakery: Gaussian-filtered white noise (scipy.ndimage), analytic domes, ridges and cones,
skies evaluated per direction from the equirectangular mapping, normal maps from heights by
``numpy.gradient`` and n = normalize(-dh/dx, -dh/dy, 1) (Blinn 1978, "Simulation of Wrinkled Surfaces",
SIGGRAPH), colour textures from palettes, and perceptual roughness from Blinn-Phong exponents by the
peak-matching rule alpha = sqrt(2 / (n + 2)) (Walter et al. 2007, "Microfacet Models for Refraction through
Rough Surfaces", EGSR, section 5.2) with r = sqrt(alpha) (Burley 2012, "Physically-Based Shading at
Disney", SIGGRAPH course notes). Files are quantised the way they would be stored (8/16-bit, half floats).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.ndimage import gaussian_filter

from bakery import samples
from bakery.classify import faces_kind, map_kind
from bakery.color import linear_to_srgb

N = 96  # map side: small keeps the set fast, large enough for the statistics


def _q(a, bits):
    """Store as a file would: 8/16-bit integers, half floats or float32."""
    a = np.asarray(a, np.float32)
    if bits == "8":
        return np.round(np.clip(a, 0, 1) * 255) / np.float32(255)
    if bits == "16":
        return np.round(np.clip(a, 0, 1) * 65535) / np.float32(65535)
    if bits == "half":
        return a.astype(np.float16).astype(np.float32)
    return a


def _ch(a):
    return a[..., None] if a.ndim == 2 else a


def _unit(a):
    lo, hi = float(a.min()), float(a.max())
    return ((a - lo) / (hi - lo)).astype(np.float32)


def _noise(seed, sigma, shape=(N, N)):
    """Tiling smooth noise in [0, 1] (Gaussian-filtered white noise, wrapped borders)."""
    return _unit(gaussian_filter(np.random.default_rng(seed).standard_normal(shape), sigma, mode="wrap"))


def _grid(shape=(N, N)):
    y, x = np.mgrid[0:shape[0], 0:shape[1]].astype(np.float64)
    return x / shape[1], y / shape[0]


def _normal_map(h, strength, y_down=False, flip_x=False):
    dy_rows, dx = np.gradient(h.astype(np.float64))
    n = np.stack([-strength * dx, strength * dy_rows, np.ones_like(h, dtype=np.float64)], axis=-1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    if y_down:
        n[..., 1] *= -1
    if flip_x:
        n[..., 0] *= -1
    return (n * 0.5 + 0.5).astype(np.float32)


def _heights():
    x, y = _grid()
    out = []
    for i, kind in enumerate(["stones", "planks", "dimples", "tiles", "stones", "dimples"]):
        out.append((f"material-{kind}-{i}", samples.material_height(kind, N, seed=40 + i)))
    out.append(("paving", samples.paving_height(N, seed=3)))
    out.append(("paving-b", samples.paving_height(N, seed=9, stones=9)))
    out.append(("grain", _unit(samples.stone_grain_height(N, seed=4))))
    out.append(("tiling-noise", _unit(samples.tiling_noise((N, N), scale=N / 4, seed=5))))
    for s, sigma in enumerate([3, 5, 8, 12]):
        out.append((f"scipy-noise-{sigma}", 0.05 + 0.9 * _noise(100 + s, sigma)))
    for k, (cx, cy, r) in enumerate([(0.5, 0.5, 0.2), (0.3, 0.6, 0.15), (0.7, 0.3, 0.25)]):
        out.append((f"dome-{k}", _unit(np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / r**2))))
    out.append(("cone", _unit(np.maximum(0, 0.4 - np.hypot(x - 0.5, y - 0.5)))))
    out.append(("ridges", _unit(np.sin(2 * np.pi * (2 * x + 3 * y)) + 0.5 * np.cos(2 * np.pi * (x - y)))))
    out.append(("bumps", _unit(np.sin(2 * np.pi * 3 * x) * np.sin(2 * np.pi * 2 * y))))
    bits = ["16", "8", "16", "half", "float"]
    return [(name, _ch(_q(h, bits[i % len(bits)])), bits[i % len(bits)]) for i, (name, h) in enumerate(out)]


def _roughness():
    out = []
    for i, (kind, lo, hi) in enumerate([("stones", 6, 120), ("planks", 8, 60), ("brushed", 60, 900),
                                        ("dimples", 40, 700), ("tiles", 30, 800), ("stones", 20, 500)]):
        n = samples.material_exponent(samples.material_height(kind, N, seed=60 + i), lo, hi, seed=60 + i)
        alpha = np.sqrt(2.0 / (n.astype(np.float64) + 2.0))  # Walter et al. 2007, section 5.2
        out.append((f"from-exponent-{kind}-{i}", np.sqrt(alpha)))  # Burley 2012
    rng = np.random.default_rng(7)
    for i, (base, amp, sigma) in enumerate([(0.4, 0.15, 1.0), (0.6, 0.1, 0.7), (0.3, 0.2, 1.5), (0.7, 0.1, 2.0),
                                            (0.5, 0.25, 1.2), (0.25, 0.1, 0.8)]):
        out.append((f"grain-{i}", base + amp * (_noise(200 + i, sigma) - 0.5) * 2))
    for i in range(4):  # worn: smooth patches in a rough field, with fine speckle
        patches = _noise(300 + i, 6) > 0.55
        speckle = rng.random((N, N)) * 0.08
        out.append((f"worn-{i}", np.where(patches, 0.2, 0.65) + speckle))
    for i in range(3):  # scratches: a rough base with thin smooth lines
        r = np.full((N, N), 0.55) + 0.05 * _noise(400 + i, 1.0)
        for _ in range(12):
            row = int(rng.integers(0, N))
            r[row, :] = 0.25
        out.append((f"scratched-{i}", r))
    out.append(("constant", np.full((N, N), 0.5) + 0.01 * _noise(500, 2)))
    bits = ["8", "8", "16", "8"]
    return [(name, _ch(_q(r, bits[i % 4])), bits[i % 4]) for i, (name, r) in enumerate(out)]


def _normals():
    heights = [(n, h[..., 0]) for n, h, _ in _heights()][:12]
    out = []
    for i, (name, h) in enumerate(heights):
        strength = [4.0, 10.0, 20.0][i % 3] * N / 32
        variant = i % 4
        px = _normal_map(h, strength, y_down=variant == 1, flip_x=variant == 2)
        out.append((f"normals-{name}-{variant}", px, ["8", "16"][i % 2]))
    from bakery.normals import normal_from_height

    for i, kind in enumerate(["stones", "tiles", "dimples", "planks"]):
        n = normal_from_height(samples.material_height(kind, N, seed=80 + i), strength=8.0)
        out.append((f"bakery-normal-{kind}", n * 0.5 + 0.5, "8"))
    for name, h in heights[:4]:  # saved through the sRGB curve by mistake
        out.append((f"srgb-{name}", linear_to_srgb(_normal_map(h, 6.0 * N / 32)), "8"))
    for name, h in heights[4:8]:  # two-channel XY maps
        out.append((f"xy-{name}", _normal_map(h, 6.0 * N / 32)[..., :2], "16"))
    return [(name, _q(px, bits), bits) for name, px, bits in out]


def _sky(width, *, sun=True, seed=0, ground=(0.25, 0.2, 0.15), zenith=(0.2, 0.35, 0.8),
         horizon=(0.8, 0.85, 0.9), sun_dir=(0.3, 0.5, -0.8), clouds=0.0, everywhere=False):
    """An analytic sky per direction of the equirectangular mapping (DEVELOPERS.md): a vertical gradient,
    a ground, a sun disc and optional clouds (noise in the sky's direction field)."""
    hgt = width // 2
    u = (np.arange(width) + 0.5) / width
    v = (np.arange(hgt) + 0.5) / hgt
    phi = 2 * np.pi * (u - 0.5)
    theta = np.pi * (0.5 - v)
    el = np.broadcast_to(np.sin(theta)[:, None], (hgt, width))
    d = np.stack([np.sin(phi)[None] * np.cos(theta)[:, None], el, -np.cos(phi)[None] * np.cos(theta)[:, None]],
                 axis=-1)
    t = np.clip(el, 0, 1)[..., None]
    sky = np.array(horizon) * (1 - t) + np.array(zenith) * t
    img = np.where(el[..., None] > 0, sky, np.array(ground) * (0.6 + 0.4 * np.clip(-el, 0, 1))[..., None])
    if clouds:
        rng = np.random.default_rng(seed)
        k = rng.standard_normal((6, 3))
        field = sum(np.sin(d @ k[i] * (3 + i) + i) for i in range(6)) / 6
        img = img + clouds * np.clip(field, 0, 1)[..., None] * ((el[..., None] > 0) | everywhere)
    if sun:
        s = np.array(sun_dir) / np.linalg.norm(sun_dir)
        img = img + 200.0 * (d @ s > np.cos(np.radians(1.5)))[..., None]
    return img.astype(np.float32)


def _environments():
    out = []
    for i, (el, az) in enumerate([(35, 60), (10, -40), (60, 120), (5, 170)]):
        sky = samples.sky_panorama(2 * N, sun_elevation_deg=el, sun_azimuth_deg=az)
        out.append((f"bakery-sky-{i}", _q(sky, "half"), "half"))
        out.append((f"bakery-sky-clipped-{i}", np.minimum(sky, 1.0), "float"))
        out.append((f"bakery-sky-ldr-{i}", _q(linear_to_srgb(np.clip(sky, 0, 1)), "8"), "8"))
    for i in range(4):
        sky = _sky(2 * N, seed=i, clouds=0.3 * i, sun_dir=(0.2 + i, 0.4, -1.0))
        out.append((f"analytic-sky-{i}", sky, "float"))
        out.append((f"analytic-sky-ldr-{i}", _q(linear_to_srgb(np.clip(sky, 0, 1)), "8"), "8"))
        out.append((f"analytic-sky-clipped-{i}", _q(np.minimum(sky, 1.0), "half"), "half"))
    return out


def _cubes():
    """Six faces of a cube sampled from an analytic sky (HDR and LDR), each labelled environment."""
    from bakery.sphere import cube_directions

    out = []
    for i, ldr in enumerate([False, True, True]):
        d = cube_directions(32)  # (6, n, n, 3) unit directions, +X -X +Y -Y +Z -Z
        el = d[..., 1]
        t = np.clip(el, 0, 1)[..., None]
        img = np.array([0.8, 0.85, 0.9]) * (1 - t) + np.array([0.2, 0.35, 0.8]) * t
        img = np.where(el[..., None] > 0, img, 0.2)
        img = img + 0.2 * i * np.clip(np.sin(d @ np.array([3.0, 5.0, 2.0])), 0, 1)[..., None]
        s = np.array([0.3, 0.6, -0.7]) / np.linalg.norm([0.3, 0.6, -0.7])
        img = img + 100.0 * (d @ s > np.cos(np.radians(3)))[..., None]
        faces = _q(linear_to_srgb(np.clip(img, 0, 1)), "8") if ldr else _q(img, "half")
        out.append((f"cube-{i}", [f.astype(np.float32) for f in faces], "8" if ldr else "half"))
    return out


def _colors():
    out = []
    palettes = [((0.55, 0.35, 0.2), (0.8, 0.6, 0.4)), ((0.2, 0.4, 0.15), (0.5, 0.7, 0.3)),
                ((0.5, 0.1, 0.1), (0.9, 0.4, 0.3)), ((0.3, 0.3, 0.35), (0.7, 0.7, 0.75)),
                ((0.1, 0.2, 0.5), (0.4, 0.6, 0.9)), ((0.6, 0.5, 0.1), (0.95, 0.85, 0.4))]
    for i, (a, b) in enumerate(palettes):
        t = _noise(600 + i, [2, 4, 6][i % 3])[..., None]
        out.append((f"albedo-noise-{i}", np.array(a) * (1 - t) + np.array(b) * t, "8"))
    for i, (a, b) in enumerate(palettes):  # 2:1 textures (not panoramas)
        t = _noise(700 + i, 3, (N // 2, N))[..., None]
        out.append((f"albedo-wide-{i}", np.array(a) * (1 - t) + np.array(b) * t, "8"))
    x, y = _grid()
    for i, (a, b) in enumerate(palettes[:4]):  # bricks / checkers with mortar
        cells = ((np.floor(x * 4 + 0.5 * (np.floor(y * 8) % 2)) + np.floor(y * 8)) % 2)[..., None]
        mortar = ((np.mod(y * 8, 1) < 0.1) | (np.mod(x * 4 + 0.5 * (np.floor(y * 8) % 2), 1) < 0.05))[..., None]
        img = np.where(mortar, 0.7, np.array(a) * (1 - cells) + np.array(b) * cells)
        out.append((f"bricks-{i}", img + 0.05 * _noise(800 + i, 1)[..., None], "8"))
    for i in range(4):  # colour from bakery's height generators through a palette
        h = samples.material_height(["stones", "planks", "tiles", "dimples"][i], N, seed=90 + i)[..., None]
        a, b = palettes[i + 1]
        out.append((f"tinted-{i}", np.array(a) * (1 - h) + np.array(b) * h, "16"))
    for i in range(3):  # float (linear) colour textures
        t = _noise(900 + i, 3)[..., None]
        out.append((f"linear-albedo-{i}", np.array(palettes[i][0]) * (1 - t) + 0.2 * t, "half"))
    return [(name, _q(linear_to_srgb(np.clip(img, 0, 1)) if bits == "8" else img, bits), bits)
            for name, img, bits in out]


def _data():
    out = []
    for i, (kind, lo, hi) in enumerate([("stones", 6, 120), ("planks", 8, 60), ("brushed", 60, 900),
                                        ("dimples", 40, 700), ("tiles", 30, 800), ("stones", 4, 40)]):
        n = samples.material_exponent(samples.material_height(kind, N, seed=20 + i), lo, hi, seed=20 + i)
        out.append((f"exponent-{kind}-{i}", _ch(_q(n, "half")), "half"))
    for i, depth in enumerate([2.5, 12.0, 40.0, 150.0]):  # heights in physical units
        out.append((f"metres-{i}", _ch(_q(_noise(1000 + i, 5) * depth, "float")), "float"))
    return out


def labelled_set():
    """(name, pixels, bits, kind) for every map of the set; a cube's faces share their group's entry."""
    items = []
    for kind, maps in (("height", _heights()), ("roughness", _roughness()), ("normal", _normals()),
                       ("environment", _environments()), ("color", _colors()), ("data", _data())):
        items += [(name, px, bits, kind) for name, px, bits in maps]
    return items


def _classify_all():
    results = [(name, kind, map_kind(px, is_float=bits in ("half", "float"))) for name, px, bits, kind
               in labelled_set()]
    for name, faces, bits in _cubes():
        got = faces_kind(faces, is_float=bits in ("half", "float"))
        results += [(f"{name}-face{i}", "environment", got) for i in range(6)]
    return results


def test_the_labelled_set_has_every_kind_and_over_a_hundred_maps():
    results = _classify_all()
    kinds = {k for _, k, _ in results}
    assert kinds == {"height", "roughness", "normal", "environment", "color", "data"}
    assert len(results) >= 100
    assert all(sum(k == kind for _, k, _ in results) >= 10 for kind in kinds)


def test_classifier_accuracy_on_the_labelled_set():
    """Measured: 139 of 139 maps right (100 %), 121 images and three cubes of six faces; at least 95 % must be."""
    results = _classify_all()
    wrong = [(name, want, got) for name, want, got in results if want != got]
    accuracy = 1 - len(wrong) / len(results)
    assert accuracy >= 0.95, (f"{accuracy:.1%}", wrong)


@pytest.mark.parametrize("kind", ["height", "roughness", "normal", "environment", "color", "data"])
def test_each_kind_is_recognised_on_most_of_its_maps(kind):
    results = [r for r in _classify_all() if r[1] == kind]
    right = sum(want == got for _, want, got in results)
    assert right / len(results) >= 0.9, [r for r in results if r[1] != r[2]]


def test_a_panorama_is_an_environment_only_with_its_pole_rows():
    """The same LDR sky (clouds over every direction) is an environment as a 2:1 panorama; rolled by a quarter
    of its height, so that its first and last rows look 45 degrees below the horizon, it is a colour image."""
    sky = _q(linear_to_srgb(np.clip(_sky(2 * N, clouds=0.4, everywhere=True), 0, 1)), "8")
    assert map_kind(sky, is_float=False) == "environment"
    assert map_kind(np.roll(sky, N // 4, axis=0), is_float=False) == "color"


def test_the_six_faces_of_an_ldr_cube_share_one_kind():
    name, faces, bits = _cubes()[1]
    alone = {map_kind(f, is_float=False) for f in faces}
    assert "color" in alone  # a single LDR face holds no clue of its own
    assert faces_kind(faces, is_float=False) == "environment"


def test_a_file_name_decides_between_heights_and_material_data():
    """Values alone mistake a shallow height map for roughness data (used range under HEIGHT_MIN_RANGE); the
    name's words decide for single-channel maps, and only for them."""
    rng = np.random.default_rng(4)
    shallow = gaussian_filter(rng.random((128, 128)), 6, mode="wrap").astype(np.float32)
    shallow = (0.45 + 0.2 * (shallow - shallow.min()) / np.ptp(shallow))[..., None]  # 0.45 .. 0.65
    assert map_kind(shallow, is_float=False) == "roughness"
    assert map_kind(shallow, is_float=False, name="brushed_height.png") == "height"
    assert map_kind(shallow, is_float=False, name="metal/brushedHeight.tif") == "height"
    steep = np.clip((shallow - 0.45) * 5, 0, 1).astype(np.float32)  # the same relief over the full range
    assert map_kind(steep, is_float=False) == "height"
    assert map_kind(steep, is_float=False, name="oak_roughness.png") == "roughness"
    assert map_kind(steep, is_float=False, name="oak_gloss_height.png") == "height"  # both words: the values
    assert map_kind(steep, is_float=False, name="chaos.png") == "height"
    rgb = np.repeat(steep, 3, axis=2) * np.array([1.0, 0.5, 0.2], np.float32)
    assert map_kind(rgb, is_float=False, name="oak_roughness.png") == "color"  # colour: the name is not asked


def test_info_says_how_a_grey_map_is_stored():
    from bakery.classify import guess_kind

    g = gaussian_filter(np.random.default_rng(6).random((64, 64)), 3, mode="wrap").astype(np.float32)[..., None]
    g = (g - g.min()) / np.ptp(g)
    assert guess_kind(g, is_float=False) == "height map (single channel)"
    assert guess_kind(np.repeat(g, 3, 2), is_float=False) == "height map (grey, R = G = B)"
    rgba = np.concatenate([np.repeat(g, 3, 2), np.ones_like(g)], 2)
    assert guess_kind(rgba, is_float=False) == "height map (grey, R = G = B, with alpha)"
    said = guess_kind(g, is_float=False, name="x_gloss.png")
    assert said == "material data: roughness, gloss or a mask (single channel)"
