"""Procedural demo data: our own invented scene, worn paving stones under an open sky.

Everything here is generated from a seed, so the demo files in ``samples/`` can be rebuilt exactly
(``python -m bakery.samples samples/``). The data is for demonstrations only; tests of the methods use
analytic cases and published values instead.

Scene
-----
- :func:`paving_height`: a seamlessly tiling height map of irregular stones (Voronoi cells on a torus) with
  bevelled, chipped edges, sunken grout joints and worn tops.
- :func:`paving_exponent`: the matching specular-exponent (shininess) map: polished stone tops, dull joints.
- :func:`sky_panorama`: an equirectangular HDR sky with a gradient from horizon to zenith, a small sun disk of
  known radiance and a ground plane with a tile pattern, in bakery's equirectangular orientation
  (see DEVELOPERS.md: image centre looks along -Z, +Y up, +X a quarter turn to the right).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from bakery.microfacet import alpha_from_exponent


def tiling_noise(shape: tuple[int, int], *, scale: float, seed: int, octaves: int = 4) -> np.ndarray:
    """Smooth, seamlessly tiling noise in about [-1, 1]: white noise filtered in the Fourier domain.

    ``scale`` is the feature size in texels of the first octave; each octave halves it with half the amplitude.
    """
    rng = np.random.default_rng(seed)
    h, w = shape
    fy = np.fft.fftfreq(h)[:, None]
    fx = np.fft.rfftfreq(w)[None, :]
    f2 = fx * fx + fy * fy
    out = np.zeros(shape, dtype=np.float64)
    amp = 1.0
    for o in range(octaves):
        s = scale / (2**o)
        spectrum = np.fft.rfft2(rng.standard_normal(shape))
        spectrum *= np.exp(-0.5 * f2 * (2 * math.pi * s / 2.0) ** 2)
        layer = np.fft.irfft2(spectrum, s=shape)
        layer /= layer.std() + 1e-12
        out += amp * layer
        amp *= 0.5
    out /= 3.0
    return out.astype(np.float32)


def _voronoi_torus(shape: tuple[int, int], cells: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Per texel: the index of the nearest jittered site and the distance gap (d2 - d1) to the border,
    with distances measured on the torus so the pattern tiles."""
    rng = np.random.default_rng(seed)
    h, w = shape
    grid = int(round(math.sqrt(cells)))
    gy, gx = np.mgrid[0:grid, 0:grid]
    sites = np.stack([(gx + 0.15 + 0.7 * rng.random(gx.shape)) / grid,
                      (gy + 0.15 + 0.7 * rng.random(gy.shape)) / grid], axis=-1).reshape(-1, 2)
    ys = (np.arange(h, dtype=np.float32) + 0.5) / h
    xs = (np.arange(w, dtype=np.float32) + 0.5) / w
    d1 = np.full(shape, np.inf, dtype=np.float32)
    d2 = np.full(shape, np.inf, dtype=np.float32)
    idx = np.zeros(shape, dtype=np.int32)
    aspect = w / h
    for i, (sx, sy) in enumerate(sites):
        dx = np.abs(xs - sx)
        dx = np.minimum(dx, 1 - dx) * aspect
        dy = np.abs(ys - sy)
        dy = np.minimum(dy, 1 - dy)
        d = np.sqrt(dy[:, None] ** 2 + dx[None, :] ** 2)
        closer = d < d1
        d2 = np.where(closer, d1, np.minimum(d2, d))
        idx = np.where(closer, i, idx)
        d1 = np.where(closer, d, d1)
    return idx, (d2 - d1) * h


def paving_height(size: int = 256, *, seed: int = 7, stones: int = 16) -> np.ndarray:
    """Tiling height map of worn paving stones, float32 ``(size, size)`` in [0, 1].

    Stone tops sit near 0.8 with gentle wear, edges are bevelled over a few percent of the tile, joints
    (grout) sit near 0.1.
    """
    shape = (size, size)
    idx, gap = _voronoi_torus(shape, stones, seed)
    rng = np.random.default_rng(seed + 1)
    stone_level = (0.72 + 0.12 * rng.random(idx.max() + 1)).astype(np.float32)[idx]
    joint = 0.018 * size
    bevel = 0.05 * size
    chip = tiling_noise(shape, scale=size / 24, seed=seed + 2)
    t = np.clip((gap - joint + 0.35 * bevel * chip) / bevel, 0.0, 1.0)
    profile = t * t * (3 - 2 * t)  # smoothstep bevel
    wear = 0.05 * tiling_noise(shape, scale=size / 10, seed=seed + 3, octaves=5)
    grain = 0.012 * tiling_noise(shape, scale=size / 128, seed=seed + 4, octaves=2)
    grout = 0.1 + 0.02 * tiling_noise(shape, scale=size / 40, seed=seed + 5)
    h = grout + profile * (stone_level + wear - grout) + grain * profile
    return np.clip(h, 0.0, 1.0).astype(np.float32)


def paving_exponent(height: np.ndarray, *, seed: int = 7) -> np.ndarray:
    """Blinn-Phong specular exponents matching :func:`paving_height`: about 8 in the joints, 40-400 on the
    polished stone tops. float32, same shape as ``height``."""
    top = np.clip((height - 0.3) / 0.45, 0.0, 1.0)
    polish = 0.5 + 0.5 * tiling_noise(height.shape, scale=height.shape[0] / 12, seed=seed + 9)
    log_n = np.log(8.0) + top * (np.log(40.0) + np.clip(polish, 0, 1) * (np.log(400.0) - np.log(40.0))
                                 - np.log(8.0))
    return np.exp(log_n).astype(np.float32)


def _equirect_directions(width: int, height: int, rows: slice = slice(None),
                         cols: slice = slice(None), sub: int = 1) -> np.ndarray:
    """Directions of texel centres (or of ``sub`` x ``sub`` sub-samples) in bakery's equirect orientation
    (:func:`bakery.sphere.equirect_to_dir`), float64 ``(rows, cols, 3)``."""
    from bakery.sphere import equirect_to_dir

    y0, y1, _ = rows.indices(height)
    x0, x1, _ = cols.indices(width)
    ys = y0 + (np.arange((y1 - y0) * sub) + 0.5) / sub
    xs = x0 + (np.arange((x1 - x0) * sub) + 0.5) / sub
    return equirect_to_dir((xs / width)[None, :], (ys / height)[:, None])


def sun_direction(elevation_deg: float = 35.0, azimuth_deg: float = 60.0) -> np.ndarray:
    """Unit vector toward the sun: azimuth measured from -Z (the panorama centre) toward +X."""
    el, az = math.radians(elevation_deg), math.radians(azimuth_deg)
    return np.array([math.sin(az) * math.cos(el), math.sin(el), -math.cos(az) * math.cos(el)])


def sky_panorama(
    width: int = 512,
    *,
    sun_radiance: float = 2.0e4,
    sun_radius_deg: float = 0.5,
    sun_elevation_deg: float = 35.0,
    sun_azimuth_deg: float = 60.0,
    sky_low: float = 0.15,
    sky_high: float = 1.2,
    ground: bool = True,
) -> np.ndarray:
    """Equirectangular HDR sky, float32 ``(width // 2, width, 3)`` linear RGB radiance.

    The sky runs from ``sky_high`` (bright, whitish horizon) to ``sky_low`` in the blue channel's opposite
    sense at the zenith, so every channel stays within [sky_low, sky_high]; the sun is a disk of
    ``sun_radius_deg`` with constant radiance ``sun_radiance`` (area-weighted at its rim by 8x8 supersampling).
    With ``ground``, the lower hemisphere is a grey tiled ground plane seen from 1.7 units above it
    (radiance 0.05-0.3), which gives the panorama a readable orientation.
    """
    height = width // 2
    d = _equirect_directions(width, height)
    y = d[..., 1]
    t = np.clip(y, 0.0, 1.0) ** 0.6  # 0 at the horizon, 1 at the zenith
    horizon = np.array([1.2, 1.1, 0.95])
    zenith = np.array([0.15, 0.3, 0.75])
    span = sky_high - sky_low
    colors = sky_low + span * (np.array([horizon, zenith]) - 0.15) / (1.2 - 0.15)
    sky = colors[0] + (colors[1] - colors[0]) * t[..., None]
    img = sky
    if ground:
        below = y < 0
        with np.errstate(divide="ignore", invalid="ignore"):
            dist = np.where(below, 1.7 / np.maximum(-y, 1e-6), 0.0)
        gx = d[..., 0] * dist
        gz = d[..., 2] * dist
        checker = ((np.floor(gx / 2.0) + np.floor(gz / 2.0)) % 2).astype(np.float64)
        fade = np.exp(-dist / 40.0)
        base = 0.08 + 0.14 * checker
        g = (base * fade + 0.12 * (1 - fade))[..., None] * np.array([1.0, 0.95, 0.85]) * 1.2
        img = np.where(below[..., None], g, sky)
    img = img.astype(np.float32)
    # the sun: a disk of constant radiance, coverage from 8x8 sub-samples in a box around it
    s = sun_direction(sun_elevation_deg, sun_azimuth_deg)
    cos_r = math.cos(math.radians(sun_radius_deg))
    lat = math.asin(s[1])
    phi = math.atan2(s[0], -s[2])
    cy = (0.5 - lat / math.pi) * height
    cx = (phi / (2 * math.pi) + 0.5) * width
    ry = math.radians(sun_radius_deg) / math.pi * height + 2
    rx = ry / max(math.cos(lat), 1e-3) + 2
    rows = slice(max(0, int(cy - ry)), min(height, int(cy + ry) + 2))
    cols = slice(max(0, int(cx - rx)), min(width, int(cx + rx) + 2))
    sub = 8
    ds = _equirect_directions(width, height, rows, cols, sub)
    inside = (ds @ s) >= cos_r
    nr, nc = inside.shape[0] // sub, inside.shape[1] // sub
    cover = inside.reshape(nr, sub, nc, sub).mean(axis=(1, 3))
    patch = img[rows, cols]
    patch[...] = patch * (1 - cover[..., None]) + sun_radiance * cover[..., None]
    return img


def stone_grain_height(size: int = 256, *, seed: int = 11) -> np.ndarray:
    """Fine tiling grain for a detail normal map (pitted stone surface), float32 ``(size, size)`` in [0, 1].

    Used by the normal-map demo step to show blending a detail map over the paving's normal map.
    """
    grain = tiling_noise((size, size), scale=max(1.0, size / 96), seed=seed, octaves=3)
    pits = np.clip(tiling_noise((size, size), scale=size / 40, seed=seed + 1) - 0.9, 0.0, None)
    return np.clip(0.5 + 0.35 * grain - 1.5 * pits, 0.0, 1.0).astype(np.float32)


#: The demo gloss map's encoding: gloss g in [0, 1] stands for exponent lo * (hi / lo)^g (bakery's gloss-exp).
GLOSS_EXPONENT_RANGE = (2.0, 3000.0)


def write_samples(folder: str | Path, *, size: int = 256, sky_width: int = 512) -> dict[str, Path]:
    """Write the demo inputs into ``folder``: 16-bit PNG height, float EXR exponents, 8-bit gloss PNG
    (exponent = 2 * 1500^g: exponents 2 to 3000 stored geometrically, see docs/roughness.md), and a Radiance HDR sky."""
    from bakery.io.images import write_image

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    height = paving_height(size)
    exponent = paving_exponent(height)
    lo, hi = GLOSS_EXPONENT_RANGE
    gloss = np.log(np.maximum(exponent, lo) / lo) / np.log(hi / lo)
    files = {
        "height": write_image(folder / "paving_height.png", height, bits="16"),
        "exponent": write_image(folder / "paving_exponent.exr", exponent, bits="half"),
        "gloss": write_image(folder / "paving_gloss.png", gloss, bits="8"),
        "sky": write_image(folder / "sky.hdr", sky_panorama(sky_width)),
    }
    return files


# ---------------------------------------------------------------------------------------------- a library

#: The invented materials of :func:`library`: (folder, name, surface kind, seed, exponent range).
MATERIALS = (
    ("stone", "cobble", "stones", 11, (6.0, 120.0)),
    ("stone", "slate", "stones", 12, (10.0, 300.0)),
    ("stone", "granite", "stones", 13, (20.0, 500.0)),
    ("stone", "sandstone", "stones", 14, (4.0, 40.0)),
    ("wood", "oak", "planks", 21, (8.0, 60.0)),
    ("wood", "pine", "planks", 22, (6.0, 40.0)),
    ("wood", "walnut", "planks", 23, (12.0, 160.0)),
    ("metal", "brushed", "brushed", 31, (60.0, 900.0)),
    ("metal", "hammered", "dimples", 32, (40.0, 700.0)),
    ("ceramic", "tile", "tiles", 41, (30.0, 800.0)),
    ("ceramic", "terracotta", "tiles", 42, (5.0, 30.0)),
    ("ceramic", "mosaic", "tiles", 43, (50.0, 1000.0)),
)


def _box_blur_x(a: np.ndarray, radius: int) -> np.ndarray:
    """Mean over 2 radius + 1 texels along x, wrapping (keeps the map tiling)."""
    c = np.cumsum(np.concatenate([a[:, -radius - 1:], a, a[:, :radius]], axis=1), axis=1, dtype=np.float64)
    return ((c[:, 2 * radius + 1:] - c[:, :-2 * radius - 1]) / (2 * radius + 1)).astype(np.float32)


def material_height(kind: str, size: int = 256, *, seed: int = 1) -> np.ndarray:
    """A seamlessly tiling height map in [0, 1], float32 ``(size, size)``, for one invented surface kind.

    ``kind``: ``"stones"`` (irregular paving, :func:`paving_height`), ``"planks"`` (wood boards with grain
    and seams), ``"brushed"`` (fine streaks along x), ``"dimples"`` (hammered metal: dents sunk from ridges),
    ``"tiles"`` (square tiles with bevels and grout).
    """
    rng = np.random.default_rng(seed)
    shape = (size, size)
    y, x = np.mgrid[0:size, 0:size].astype(np.float32) / np.float32(size)
    if kind == "stones":
        h = paving_height(size, seed=seed, stones=int(rng.integers(9, 26)))
    elif kind == "planks":
        boards = 4
        warp = tiling_noise(shape, scale=size / 6, seed=seed)
        grain = 0.5 + 0.5 * np.sin(2 * np.pi * (int(rng.integers(10, 20)) * y + 0.6 * warp))
        seam = np.minimum(np.mod(y * boards, 1.0), 1 - np.mod(y * boards, 1.0)) * size / boards
        profile = np.clip(seam / 2.5, 0, 1)
        h = (0.15 + 0.75 * profile * (0.85 + 0.15 * grain)).astype(np.float32)
    elif kind == "brushed":
        n = tiling_noise(shape, scale=2.0, seed=seed, octaves=2)
        h = 0.5 + 0.4 * _box_blur_x(n, max(2, size // 16)) + 0.05 * tiling_noise(shape, scale=size / 4, seed=seed + 1)
    elif kind == "dimples":
        _, gap = _voronoi_torus(shape, int(rng.integers(20, 40)), seed)
        r = size / 12
        h = 0.9 - 0.55 * np.sqrt(np.clip(gap / r, 0, 1)) + 0.03 * tiling_noise(shape, scale=size / 32, seed=seed)
    elif kind == "tiles":
        count = int(rng.choice([2, 4, 8]))
        fx, fy = np.mod(x * count, 1.0), np.mod(y * count, 1.0)
        edge = np.minimum(np.minimum(fx, 1 - fx), np.minimum(fy, 1 - fy)) * size / count
        t = np.clip((edge - 1.5) / max(2.0, 0.06 * size / count), 0, 1)
        level = (0.7 + 0.2 * rng.random((count, count))).astype(np.float32)
        cell = level[np.minimum((y * count).astype(int), count - 1), np.minimum((x * count).astype(int), count - 1)]
        h = 0.1 + t * t * (3 - 2 * t) * (cell - 0.1) + 0.01 * tiling_noise(shape, scale=size / 20, seed=seed)
    else:
        raise ValueError(f"unknown surface kind {kind!r}")
    return np.clip(h, 0.0, 1.0).astype(np.float32)


def material_exponent(height: np.ndarray, lo: float, hi: float, *, seed: int = 1) -> np.ndarray:
    """Blinn-Phong specular exponents in [lo, hi] following the height (raised parts are more polished),
    log-spaced, float32, same shape as ``height``."""
    polish = 0.5 + 0.5 * tiling_noise(height.shape, scale=height.shape[0] / 10, seed=seed + 9)
    t = np.clip(0.6 * height + 0.4 * polish, 0.0, 1.0)
    return np.exp(np.log(lo) + t * (np.log(hi) - np.log(lo))).astype(np.float32)


def _slope_normals(height: np.ndarray, scale: float) -> np.ndarray:
    """Demo normal map from a height map by wrapped central differences, encoded n/2 + 1/2 (+Y up): invented
    "authored" data for the sample library, not the normal bake."""
    gx = (np.roll(height, -1, axis=1) - np.roll(height, 1, axis=1)) * (0.5 * scale)
    gy = (np.roll(height, 1, axis=0) - np.roll(height, -1, axis=0)) * (0.5 * scale)  # rows run downward
    n = np.stack([-gx, -gy, np.ones_like(height)], axis=-1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    return (0.5 * n + 0.5).astype(np.float32)


def library(folder: str | Path, *, size: int = 256, sky_width: int = 512,
            materials: tuple = MATERIALS) -> dict[str, Path]:
    """Write an invented texture library into ``folder``.

    - Legacy materials (every group but ``ceramic``): ``<group>/<name>_height.png`` (16-bit) and
      ``<group>/<name>_exponent.exr`` (half-float Blinn-Phong exponents).
    - Authored materials (``ceramic``): ``ceramic/<name>_normal.png`` (8-bit, +Y up) and
      ``ceramic/<name>_roughness.png`` (8-bit perceptual roughness), except ``mosaic``, which has no roughness
      map (a pairing gap for batch recipes to report).
    - ``details/crackle_normal.png``: a fine detail normal map to blend over the authored ones.
    - ``skies/clear_sky.hdr``: an HDR panorama (:func:`sky_panorama`).

    Returns the written files by ``"<name>_<map>"``, ``"crackle_normal"`` and ``"sky"``. Every file is rebuilt
    exactly from the seeds in :data:`MATERIALS`.
    """
    from bakery.io.images import write_image

    folder = Path(folder)
    files: dict[str, Path] = {}
    for group, name, kind, seed, (lo, hi) in materials:
        (folder / group).mkdir(parents=True, exist_ok=True)
        h = material_height(kind, size, seed=seed)
        exponent = material_exponent(h, lo, hi, seed=seed)
        if group != "ceramic":
            files[f"{name}_height"] = write_image(folder / group / f"{name}_height.png", h, bits="16")
            files[f"{name}_exponent"] = write_image(folder / group / f"{name}_exponent.exr", exponent, bits="half")
            continue
        files[f"{name}_normal"] = write_image(folder / group / f"{name}_normal.png",
                                              _slope_normals(h, 0.05 * size), bits="8")
        if name != "mosaic":
            # perceptual roughness r = sqrt(alpha) (Burley 2012) of the peak-matching alpha (Walter et al. 2007)
            r = np.sqrt(alpha_from_exponent(exponent.astype(np.float64)))
            files[f"{name}_roughness"] = write_image(folder / group / f"{name}_roughness.png", r, bits="8")
    (folder / "details").mkdir(parents=True, exist_ok=True)
    crackle = material_height("dimples", size, seed=99) * 0.3 + 0.02 * tiling_noise((size, size), scale=2.0, seed=98)
    files["crackle_normal"] = write_image(folder / "details" / "crackle_normal.png",
                                          _slope_normals(crackle, 0.08 * size), bits="8")
    (folder / "skies").mkdir(parents=True, exist_ok=True)
    files["sky"] = write_image(folder / "skies" / "clear_sky.hdr",
                               sky_panorama(sky_width, sun_elevation_deg=50.0, sun_azimuth_deg=-30.0))
    return files


#: The batch recipe over :func:`library` (``samples/library.toml`` is this text; see docs/batch.md).
LIBRARY_RECIPE = """\
# A batch recipe over the sample library (see docs/batch.md).
#   python -m bakery.samples --library samples/library   # writes the library (invented, procedural)
#   bakery batch samples/library.toml --dry-run           # the plan (a graph: "@normals" reads rule normals' outputs)
#   bakery batch samples/library.toml                     # bake it; run it again: nothing to do
# samples/library/stone/bakery-folder.toml overrides a parameter for the stone materials.

source = "library"
output = "library-baked"

# For every rule that runs the "normal" bake.
[defaults.normal]
strength = 6.0
kernel = "scharr"

# The occlusion sees the relief the normal maps show.
[defaults.occlusion]
strength = 6.0

# Legacy materials: height maps -> tangent-space normal maps (16-bit, like their heights).
[[rule]]
name = "normals"
bake = "normal"
match = "**/{material}_height.png"
output = "{dir}/{material}_normal.png"

# Legacy materials: Blinn-Phong specular exponents -> perceptual roughness, 8-bit.
[[rule]]
name = "roughness"
bake = "roughness"
match = "**/{material}_exponent.exr"
output = "{dir}/{material}_roughness.png"
params = { bits = "8" }

# Chained: every normal map the "normals" rule makes -> its mip chain, block-compressed (BC5) in one KTX2 file,
# with the averaged-normal lengths beside it (NAME.length.ktx2).
[[rule]]
name = "normal-chains"
bake = "normal-mips"
match = "@normals"
output = "{dir}/{stem}.ktx2"
params = { ktx2-format = "compressed" }

# Chained: the normal map of "normals" + the roughness map of "roughness" (paired by material) -> anti-aliased
# roughness mips (NAME.png, NAME.mip01.png ...): each level widened by the normals the level averages.
[[rule]]
name = "roughness-chains"
bake = "antialias"
match = "@normals/**/{material}_normal.png"
inputs.roughness = "@roughness/{dir}/{material}_roughness.png"
output = "{dir}/{material}_roughness_aa.png"

# Legacy materials: ambient occlusion from the same heights (the normal bake's strength, from the defaults below).
[[rule]]
name = "occlusion"
bake = "occlusion"
match = "**/{material}_height.png"
output = "{dir}/{material}_occlusion.png"

# Legacy materials: occlusion (R), the anti-aliased roughness chain (G) and no metal (B) in one texture with mips;
# each level's G is the chain's own level, R is averaged.
[[rule]]
name = "orm"
bake = "pack"
match = "@occlusion/**/{material}_occlusion.png"
inputs.g = "@roughness-chains/{dir}/{material}_roughness_aa.png"
output = "{dir}/{material}_orm.png"
params = { g-role = "roughness", b-constant = 0.0, b-role = "metalness", mips = true }

# Authored materials: the crackle detail layered over each normal map (one fixed partner for all).
[[rule]]
name = "crackle"
bake = "blend"
match = "ceramic/{material}_normal.png"
inputs.detail = "details/crackle_normal.png"
output = "{dir}/{material}_normal_crackle.png"
params = { detail-strength = 0.5 }

# Authored materials: normal map + roughness map -> anti-aliased roughness mips (NAME.png, NAME.mip01.png ...), the two
# maps paired by material name; a missing roughness map fails the job.
[[rule]]
name = "roughness-mips"
bake = "antialias"
match = "ceramic/{material}_normal.png"
exclude = "ceramic/mosaic_*"
inputs.roughness = "{dir}/{material}_roughness.png"
unpaired = "fail"
output = "{dir}/{material}_roughness_aa.png"

# Mosaic was authored without a roughness map: a constant roughness under its mips.
[[rule]]
name = "mosaic-roughness-mips"
bake = "antialias"
match = "ceramic/mosaic_normal.png"
output = "{dir}/mosaic_roughness_aa.png"
params = { roughness = 0.3 }

# Sky panoramas -> KTX2 cubemaps with their mip chains.
[[rule]]
name = "sky-cubemaps"
bake = "env-convert"
match = "skies/{sky}.hdr"
output = "skies/{sky}_cube.ktx2"
params = { face-size = 64 }

# Sky panoramas -> diffuse irradiance (SH9 coefficients in JSON, a small irradiance cubemap beside them), by the
# exact cosine convolution because the skies hold a sun.
[[rule]]
name = "sky-irradiance"
bake = "env-diffuse"
match = "skies/{sky}.hdr"
output = "skies/{sky}_irradiance.json"
params = { face-size = 16, method = "exact" }

# Sky panoramas -> specular prefiltered cubemap chains (GGX, roughness linear in mip) for split-sum lighting.
[[rule]]
name = "sky-specular"
bake = "env-specular"
match = "skies/{sky}.hdr"
output = "skies/{sky}_specular.ktx2"
params = { face-size = 32 }

# The split-sum BRDF table: a bake without input files, so one job and no match.
[[rule]]
name = "brdf-table"
bake = "env-lut"
output = "tables/brdf_lut.png"
params = { size = 64 }
"""

#: Per-folder override files of the sample library, by folder.
LIBRARY_FOLDER_FILES = {"stone": """\
# Stone has deeper relief than the rest of the library: steeper normals for every stone material.
[bake.normal]
strength = 10.0
"""}


def write_library_recipe(folder: str | Path) -> Path:
    """Write :data:`LIBRARY_RECIPE` as ``<folder>.toml`` beside the library ``folder`` (its source root;
    outputs go to ``<folder>-baked``) and the folder files into ``folder``; return the recipe path."""
    from bakery.io.atomic import atomic_output

    folder = Path(folder)
    text = LIBRARY_RECIPE.replace('source = "library"', f'source = "{folder.name}"')
    text = text.replace('output = "library-baked"', f'output = "{folder.name}-baked"')
    files = {folder.parent / f"{folder.name}.toml": text}
    files |= {folder / sub / "bakery-folder.toml": t for sub, t in LIBRARY_FOLDER_FILES.items()}
    for target, content in files.items():
        target.parent.mkdir(parents=True, exist_ok=True)
        with atomic_output(target) as tmp:
            tmp.write_text(content, encoding="utf-8")
    return folder.parent / f"{folder.name}.toml"

def main(argv: list[str] | None = None) -> None:
    """``python -m bakery.samples [FOLDER]`` writes the demo inputs; ``--library [FOLDER]`` the sample library."""
    import argparse

    ap = argparse.ArgumentParser(prog="python -m bakery.samples",
                                 description="Write bakery's procedural sample data (an invented scene).")
    ap.add_argument("folder", nargs="?", help="where to write (default: samples, or samples/library)")
    ap.add_argument("--library", action="store_true", help="write the sample library: a dozen materials, a sky, "
                    "the recipe and folder files beside them")
    args = ap.parse_args(argv)
    if args.library:
        folder = Path(args.folder or "samples/library")
        made = library(folder)
        made["recipe"] = write_library_recipe(folder)
    else:
        made = write_samples(args.folder or "samples")
    for name, p in made.items():
        print(f"{name}: {p}")


if __name__ == "__main__":
    main()
