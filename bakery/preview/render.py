"""Lit previews of baked maps: a material ball and a flat tile under an image-based environment.

Pure numpy (plus ``cv2.remap`` for bilinear lookups), CPU only. Everything a preview needs arrives as plain
arrays, so the renderer does not care where they came from (baked files, or bakes made in memory):

Lighting, materials and shading: :mod:`bakery.preview.shading`; texture lookups: :mod:`bakery.preview.textures`;
tone mapping: :mod:`bakery.preview.tonemap`.

Geometry: the **ball** is a unit sphere with the usual longitude/latitude UV mapping, repeated ``tiles``
times (u around, v from pole to pole), with tangent ``T = ∂P/∂u`` and bitangent ``B = ∂P/∂v`` normalised
(the frame is orthonormal on a sphere); ``spin`` turns the ball about the vertical axis while camera and
environment stay put, so highlights stay where they are and only the bumps move. The **tile** is a flat square
in the plane y = 0, the texture repeated ``repeat`` times, its top image row at the far edge. Both are seen by a
perspective camera orbiting the object (``yaw``, ``pitch`` in degrees) and lit by the environment turned by
``env_rotation`` degrees about the vertical axis (:func:`bakery.sphere.rotation_y`).

Anti-aliasing: ``supersample`` x ``supersample`` samples per pixel, box-filtered in linear radiance.

Cut-outs: a material with an alpha test (:class:`~bakery.preview.shading.AlphaTest`) is drawn only at the
samples whose opacity passes it; elsewhere the ray goes on to the background, as a miss does. Both objects are
single-sided: the inside of the ball is not drawn through a cut-out (common practice for a material preview).

References
----------
.. [1] Karis, B. (2013). SIGGRAPH course notes, "Physically Based Shading in Theory and
   Practice". (split-sum approximation; the shading itself is in :mod:`bakery.preview.shading`).
.. [2] Williams, L. (1983). Pyramidal parametrics. SIGGRAPH '83 (mip level from the footprint; the lookups are
   in :mod:`bakery.preview.textures`).
"""

from __future__ import annotations

import math

import numpy as np

from bakery import sphere
from bakery.errors import BakeryError
from bakery.preview.shading import Lighting, Material, Render, shade
from bakery.preview.textures import _lod_memo, _Texture
from bakery.preview.tonemap import auto_exposure, display

__all__ = ["preview_image", "render_ball", "render_tile", "turntable_frames"]


# ------------------------------------------------------------------------------------------ camera


def _camera(yaw: float, pitch: float, distance: float, target=(0.0, 0.0, 0.0)):
    """Eye position and orthonormal (right, up, forward) of a camera orbiting ``target``: yaw 0 looks along
    -Z from the +Z side, positive yaw moves the eye toward +X, positive pitch raises it."""
    ya, pa = math.radians(yaw), math.radians(pitch)
    target = np.asarray(target, dtype=np.float64)
    eye = target + distance * np.array([math.sin(ya) * math.cos(pa), math.sin(pa), math.cos(ya) * math.cos(pa)])
    fwd = target - eye
    fwd /= np.linalg.norm(fwd)
    right = np.cross(fwd, [0.0, 1.0, 0.0])
    if np.linalg.norm(right) < 1e-9:  # looking straight down or up
        right = np.array([1.0, 0.0, 0.0])
    right /= np.linalg.norm(right)
    up = np.cross(right, fwd)
    return eye, right, up, fwd


def _rays(n: int, eye, right, up, fwd, tan_half: float) -> np.ndarray:
    """Unit ray directions of an n x n image (rows top to bottom), (n, n, 3) float64."""
    c = ((np.arange(n) + 0.5) / n * 2 - 1) * tan_half
    d = fwd[None, None, :] + c[None, :, None] * right[None, None, :] - c[:, None, None] * up[None, None, :]
    return d / np.linalg.norm(d, axis=-1, keepdims=True)


def _check_view(size: int, supersample: int) -> None:
    if not isinstance(size, int | np.integer) or size < 8 or size > 8192:
        raise BakeryError(f"preview size must be a whole number from 8 to 8192; got {size}")
    if not isinstance(supersample, int | np.integer) or not 1 <= supersample <= 8:
        raise BakeryError(f"supersample must be 1 to 8; got {supersample}")


def _surface_values(material: Material, u: np.ndarray, v: np.ndarray, lod_fn):
    """Sample the material's maps at (u, v): tangent-space normals (P, 3), roughness (P,), base colour,
    metalness (P,) or a number, occlusion (P,) or None."""
    p = len(u)
    if material.normals is None:
        n_t = np.zeros((p, 3), np.float32)
        n_t[:, 2] = 1
    else:
        tex = _texture(material, "normals")
        n_t = tex.sample(u, v, lod_fn(tex))
        n_t /= np.maximum(np.linalg.norm(n_t, axis=1, keepdims=True), np.float32(1e-8))

    def scalar(name: str):
        value = getattr(material, name)
        if value is None or value.ndim == 0:
            return value if value is None else np.full(p, float(value), np.float32)
        tex = _texture(material, name)
        return np.clip(tex.sample(u, v, lod_fn(tex))[:, 0], 0, 1)

    c = material.base_color
    if c.ndim == 1:
        base = np.broadcast_to(c, (p, 3))
    else:
        tex = _texture(material, "base_color")
        base = tex.sample(u, v, lod_fn(tex))
        if base.shape[1] == 4:  # weighted by the opacity: colour / opacity
            base = base[:, :3] / np.maximum(base[:, 3:], np.float32(1e-6))
    return n_t, scalar("roughness"), base, scalar("metallic"), scalar("occlusion")


def _opacity_passes(material: Material, u: np.ndarray, v: np.ndarray, lod_fn) -> np.ndarray | None:
    """The alpha test at the samples (u, v): True where the surface is drawn; None without cut-outs."""
    if material.alpha_test is None:
        return None
    tex = _texture(material, "opacity")
    return tex.sample(u, v, lod_fn(tex))[:, 0] >= np.float32(material.alpha_test.cutoff)


def _texture(material: Material, name: str) -> _Texture:
    """Mip pyramids are built once per material map (kept while the material lives). ``opacity`` is the alpha
    test's map; a base colour map of the same size under an alpha test is filtered premultiplied
    (colour x opacity, with the opacity as a fourth channel; Porter & Duff 1984)."""
    cache = material.__dict__.setdefault("_pyramids", {})
    if name not in cache:
        cut = material.alpha_test
        if name == "opacity":
            img = cut.opacity
        elif name == "base_color" and cut is not None and cut.opacity.shape == material.base_color.shape[:2]:
            a = cut.opacity[..., None]
            img = np.concatenate([material.base_color * a, a], axis=2)
        else:
            img = getattr(material, name)
        cache[name] = _Texture(img)
    return cache[name]


def _finish(radiance_hi: np.ndarray, hit_hi: np.ndarray, nv_hi: np.ndarray, ss: int) -> Render:
    n = radiance_hi.shape[0] // ss

    def box(a: np.ndarray) -> np.ndarray:
        return a.reshape(n, ss, n, ss, *a.shape[2:]).mean(axis=(1, 3)).astype(np.float32)

    cover = box(hit_hi.astype(np.float32))
    nv_sum = box(np.where(hit_hi, nv_hi, 0))
    with np.errstate(invalid="ignore", divide="ignore"):
        nv = np.where(cover > 0, nv_sum / cover, np.nan).astype(np.float32)
    return Render(box(radiance_hi), cover, nv)


def _background(dirs: np.ndarray, lighting: Lighting, env_rotation: float, blur: float) -> np.ndarray:
    rot = sphere.rotation_y(env_rotation).astype(np.float32)
    d = dirs.reshape(-1, 3).astype(np.float32) @ rot
    return lighting.prefiltered(d, np.full(len(d), blur, np.float32))


def render_ball(material: Material, lighting: Lighting, *, size: int = 512, yaw: float = 0.0,
                pitch: float = 15.0, spin: float = 0.0, env_rotation: float = 0.0,
                tiles: tuple[float, float] = (4.0, 2.0), supersample: int = 2,
                background_roughness: float = 0.35) -> Render:
    """Render the material ball.

    Parameters
    ----------
    material : Material
    lighting : Lighting
    size : int
        Output width and height in pixels.
    yaw, pitch : float
        Camera orbit in degrees (yaw 0 looks along -Z, the direction at the centre of an equirect panorama).
    spin : float
        Degrees the ball is turned about its vertical axis (camera and environment fixed).
    env_rotation : float
        Degrees the environment is turned about the vertical axis.
    tiles : (float, float)
        Texture repeats around the ball (u) and from pole to pole (v). The default 4 x 2 keeps texels square
        at the equator.
    supersample : int
        Samples per pixel along each axis.
    background_roughness : float
        The environment behind the ball is shown at this prefilter roughness (0 = sharp).

    Returns
    -------
    Render
    """
    _check_view(size, supersample)
    n = size * supersample
    distance = 4.0
    eye, right, up, fwd = _camera(yaw, pitch, distance)
    tan_half = math.tan(math.asin(1 / distance)) / 0.92  # the ball fills 92% of the frame
    d = _rays(n, eye, right, up, fwd, tan_half).astype(np.float32)
    eye = eye.astype(np.float32)
    b = d @ eye
    disc = b * b - np.float32(eye @ eye - 1)
    hit = disc > 0
    t = -b - np.sqrt(np.where(hit, disc, 0))
    spin_m = sphere.rotation_y(-spin).astype(np.float32)  # object turns by +spin about +Y: p_obj = R^T p
    p_obj = (eye[None, None, :] + t[..., None] * d) @ spin_m  # on the unit sphere where hit
    phi = np.arctan2(p_obj[..., 0], p_obj[..., 2])
    lat = np.arcsin(np.clip(p_obj[..., 1], -1, 1))
    tu, tv = float(tiles[0]), float(tiles[1])
    if not (tu > 0 and tv > 0 and math.isfinite(tu) and math.isfinite(tv)):
        raise BakeryError(f"tiles must be positive numbers; got {tiles}")
    u = np.float32(tu) * (phi * np.float32(1 / (2 * np.pi)) + np.float32(0.5))
    v = np.float32(tv) * (lat * np.float32(1 / np.pi) + np.float32(0.5))
    lod_fn = _lod_memo(u, v, hit)
    keep = _opacity_passes(material, u[hit], v[hit], lod_fn)
    n_t, *values = _surface_values(material, u[hit], v[hit], lod_fn)
    # T = dP/du and B = dP/dv normalised, from P = (cos lat sin phi, sin lat, cos lat cos phi)
    normal = p_obj[hit]
    px, py, pz = normal[:, 0], normal[:, 1], normal[:, 2]
    cl = np.maximum(np.sqrt(px * px + pz * pz), np.float32(1e-6))
    tangent = np.stack([pz / cl, np.zeros_like(px), -px / cl], axis=-1)
    bitangent = np.stack([-py * px / cl, cl, -py * pz / cl], axis=-1)
    world = (n_t[:, :1] * tangent + n_t[:, 1:2] * bitangent + n_t[:, 2:] * normal) @ spin_m.T
    world = (world / np.linalg.norm(world, axis=1, keepdims=True)).astype(np.float32)
    return _shade_view(world, d, hit, values, lighting, env_rotation=env_rotation,
                       background_roughness=background_roughness, n=n, supersample=supersample, keep=keep)


def render_tile(material: Material, lighting: Lighting, *, size: int = 512, yaw: float = 0.0,
                pitch: float = 40.0, env_rotation: float = 0.0, repeat: float = 2.0, supersample: int = 2,
                background_roughness: float = 0.35) -> Render:
    """Render the flat tile: a 2 x 2 square in the plane y = 0 (normal +Y), the texture repeated ``repeat``
    times along each side, its top image row at the far (-Z) edge, seen from ``pitch`` degrees above the plane.

    Parameters are those of :func:`render_ball`; ``pitch`` must lie in [5, 90] so the tile is seen from above.
    """
    _check_view(size, supersample)
    if not 5.0 <= pitch <= 90.0:
        raise BakeryError(f"tile pitch must lie in [5, 90] degrees; got {pitch}")
    if not (repeat > 0 and math.isfinite(repeat)):
        raise BakeryError(f"repeat must be a positive number; got {repeat}")
    n = size * supersample
    eye, right, up, fwd = _camera(yaw, pitch, 4.0)
    corners = np.array([[x, 0.0, z] for x in (-1, 1) for z in (-1, 1)]) - eye
    depth = corners @ fwd
    extent = np.max(np.abs(np.stack([corners @ right, corners @ up]) / depth))
    d = _rays(n, eye, right, up, fwd, extent / 0.94).astype(np.float32)
    eye = eye.astype(np.float32)
    down = d[..., 1] < 0
    t = -eye[1] / np.where(down, d[..., 1], np.float32(-1))
    px = eye[0] + t * d[..., 0]
    pz = eye[2] + t * d[..., 2]
    hit = down & (np.abs(px) <= 1) & (np.abs(pz) <= 1)
    u = np.float32(repeat / 2) * (px + 1)
    v = np.float32(repeat / 2) * (1 - pz)

    lod_fn = _lod_memo(u, v, hit)
    keep = _opacity_passes(material, u[hit], v[hit], lod_fn)
    n_t, *values = _surface_values(material, u[hit], v[hit], lod_fn)
    # tangent +X (u), bitangent -Z (v), normal +Y
    world = np.stack([n_t[:, 0], n_t[:, 2], -n_t[:, 1]], axis=-1).astype(np.float32)
    return _shade_view(world, d, hit, values, lighting, env_rotation=env_rotation,
                       background_roughness=background_roughness, n=n, supersample=supersample, keep=keep)


def _shade_view(world, d, hit, values, lighting, *, env_rotation, background_roughness, n, supersample,
                keep=None):
    """Shade the hit samples of an n x n view (``values``: roughness, base colour, metalness and occlusion
    there), fill the rest with the background, and finish the image. ``keep`` (per hit sample, from the alpha
    test) drops the samples that fail it: they show the background, as misses do."""
    if keep is not None:
        p = len(keep)
        hit = hit.copy()
        hit[hit] = keep
        world = world[keep]
        values = [x[keep] if isinstance(x, np.ndarray) and x.ndim >= 1 and len(x) == p else x for x in values]
    rough, base, metal, occlusion = values
    radiance = np.empty((n, n, 3), np.float32)
    rad, nv = shade(world, (-d[hit]).astype(np.float32), rough, base, metal, lighting,
                    env_rotation=env_rotation, occlusion=occlusion)
    radiance[hit] = rad
    radiance[~hit] = _background(d[~hit], lighting, env_rotation, background_roughness)
    nv_full = np.zeros((n, n), np.float32)
    nv_full[hit] = nv
    return _finish(radiance, hit, nv_full, supersample)


# ------------------------------------------------------------------------------------------ previews


def preview_image(material: Material, lighting: Lighting, *, size: int = 512, yaw: float = 0.0,
                  pitch: float = 15.0, env_rotation: float = 0.0, tiles: tuple[float, float] = (4.0, 2.0),
                  repeat: float = 2.0, tile_pitch: float = 40.0, supersample: int = 2,
                  exposure: float | None = 0.0, white: float | None = None, views: str = "both"
                  ) -> tuple[np.ndarray, float]:
    """The preview picture: the ball and the tile side by side, ``(size, 2·size, 3)`` (one view:
    ``(size, size, 3)``), sRGB-encoded float32 in [0, 1].

    ``exposure=None`` picks it automatically (:func:`auto_exposure` over the objects); the exposure used is
    returned with the image. ``views`` is "both", "ball" or "tile".
    """
    if views not in ("both", "ball", "tile"):
        raise BakeryError(f"views must be 'both', 'ball' or 'tile'; got {views!r}")
    renders = []
    if views in ("both", "ball"):
        renders.append(render_ball(material, lighting, size=size, yaw=yaw, pitch=pitch,
                                   env_rotation=env_rotation, tiles=tiles, supersample=supersample))
    if views in ("both", "tile"):
        renders.append(render_tile(material, lighting, size=size, yaw=yaw, pitch=tile_pitch,
                                   env_rotation=env_rotation, repeat=repeat, supersample=supersample))
    rad = np.concatenate([r.radiance for r in renders], axis=1)
    if exposure is None:
        exposure = auto_exposure(rad, np.concatenate([r.coverage for r in renders], axis=1))
    return display(rad, exposure=exposure, white=white), float(exposure)


def turntable_frames(material: Material, lighting: Lighting, frames: int, *, size: int = 256, yaw: float = 0.0,
                     pitch: float = 15.0, env_rotation: float = 0.0, tiles: tuple[float, float] = (4.0, 2.0),
                     supersample: int = 2, exposure: float | None = 0.0, white: float | None = None,
                     progress=None) -> tuple[list[np.ndarray], float]:
    """The ball turning once about its vertical axis under the fixed environment: ``frames`` pictures
    ``(size, size, 3)`` sRGB-encoded float32, spins 0, 360/frames, ... degrees. The highlights stay put and the
    bumps travel with the surface. ``exposure=None`` is chosen once, on the first frame. ``progress``, if given,
    is called with the frame index after each frame."""
    if not isinstance(frames, int | np.integer) or not 2 <= frames <= 720:
        raise BakeryError(f"turntable frame count must be 2 to 720; got {frames}")
    out = []
    for i in range(frames):
        r = render_ball(material, lighting, size=size, yaw=yaw, pitch=pitch, spin=360.0 * i / frames,
                        env_rotation=env_rotation, tiles=tiles, supersample=supersample)
        if exposure is None:
            exposure = auto_exposure(r.radiance, r.coverage)
        out.append(display(r.radiance, exposure=exposure, white=white))
        if progress is not None:
            progress(i)
    return out, float(exposure)
