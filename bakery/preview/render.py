"""Lit previews of baked maps: a material ball and a flat tile under an image-based environment.

Pure numpy (plus ``cv2.remap`` for bilinear lookups), CPU only. Everything a preview needs arrives as plain
arrays, so the renderer does not care where they came from (baked files, or bakes made in memory):

- **Lighting** (:class:`Lighting`): the specular prefiltered cube chain (levels ``(6, N_k, N_k, 3)`` with the
  perceptual roughness of each level), the split-sum BRDF table over (n·v, roughness), and nine
  spherical-harmonic coefficients of the environment's radiance per channel.
- **Material** (:class:`Material`): tangent-space unit normals ``(H, W, 3)`` (+X right = +u, +Y up = +v, +Z out
  of the surface: bakery's convention, glTF 2.0), perceptual roughness ``(H, W)`` or a number, linear base colour
  ``(H, W, 3)`` or an RGB triple, and a metallic factor.

Shading (image-based lighting with the split-sum approximation, Karis 2013):

    L_o = P(r, ρ) · (F0·A(n·v, ρ) + B(n·v, ρ)) + c_diff · E(n)/π · (1 − (F0·A + B))

where ``P`` is the prefiltered radiance along the mirror direction ``r = 2(n·v)n − v`` at roughness ρ
(linear interpolation between the two chain levels whose roughness brackets ρ), ``A, B`` are read bilinearly
from the table, ``E`` is the irradiance from the SH coefficients (Ramamoorthi & Hanrahan 2001, eq. 7 with
Â_0 = π, Â_1 = 2π/3, Â_2 = π/4), ``F0 = 0.04·(1 − m) + base·m`` and ``c_diff = base·(1 − m)`` for metallic m
(glTF 2.0 specification, appendix B, metal-roughness material). The factor ``1 − (F0·A + B)`` gives the diffuse
layer the energy the specular layer does not reflect (common practice, a directional-albedo version of the
glTF ``(1 − F)`` weighting).

Geometry: the **ball** is a unit sphere with the usual longitude/latitude UV mapping, repeated ``tiles``
times (u around, v from pole to pole), with tangent ``T = ∂P/∂u`` and bitangent ``B = ∂P/∂v`` normalised
(the frame is orthonormal on a sphere); ``spin`` turns the ball about the vertical axis while camera and
environment stay put, so highlights stay where they are and only the bumps move. The **tile** is a flat square
in the plane y = 0, the texture repeated ``repeat`` times, its top image row at the far edge. Both are seen by a
perspective camera orbiting the object (``yaw``, ``pitch`` in degrees) and lit by the environment turned by
``env_rotation`` degrees about the vertical axis (:func:`bakery.sphere.rotation_y`).

Textures are sampled trilinearly from a box-filtered mip pyramid, with the level chosen per pixel from the
screen-space footprint of the texture coordinates (Williams 1983); normals are renormalised after filtering.
Anti-aliasing: ``supersample`` x ``supersample`` samples per pixel, box-filtered in linear radiance.

Tone mapping: the extended Reinhard operator on luminance (Reinhard et al. 2002, eq. 4), optional automatic
exposure from the log-average luminance and key 0.18 (ibid., eqs. 1-2), then sRGB encoding (IEC 61966-2-1).

References
----------
.. [1] Karis, B. (2013). SIGGRAPH course notes, "Physically Based Shading in Theory and
   Practice". (split-sum approximation).
.. [2] Ramamoorthi, R., Hanrahan, P. (2001). An efficient representation for irradiance environment maps.
   SIGGRAPH 2001 (eqs. 3 and 7; basis constants 0.282095, 0.488603, 1.092548, 0.315392, 0.546274).
.. [3] The Khronos Group. glTF 2.0 Specification, appendix B "BRDF Implementation" (F0 = 0.04 for
   dielectrics, metal-roughness mixing).
.. [4] Reinhard, E., Stark, M., Shirley, P., Ferwerda, J. (2002). Photographic tone reproduction for digital
   images. SIGGRAPH 2002 (eqs. 1, 2 and 4).
.. [5] Williams, L. (1983). Pyramidal parametrics. SIGGRAPH '83 (mip maps, level from the footprint).
.. [6] ITU-R Recommendation BT.709-6, item 3.2 (luminance weights 0.2126, 0.7152, 0.0722).
.. [7] IEC 61966-2-1:1999 (sRGB transfer function).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from bakery import sphere
from bakery.errors import BakeryError

__all__ = [
    "Lighting",
    "Material",
    "Render",
    "auto_exposure",
    "display",
    "irradiance_sh",
    "preview_image",
    "render_ball",
    "render_tile",
    "shade",
    "tonemap_reinhard",
    "turntable_frames",
]

#: Reflectance at normal incidence of dielectrics (glTF 2.0 specification, appendix B).
DIELECTRIC_F0 = 0.04

#: Luminance weights of linear Rec. 709 / sRGB primaries (ITU-R BT.709-6).
LUMA = np.array([0.2126, 0.7152, 0.0722], dtype=np.float32)



# ------------------------------------------------------------------------------------------ inputs


@dataclass(frozen=True, eq=False)
class Lighting:
    """The environment, ready to shade with.

    Attributes
    ----------
    levels : tuple of ndarray, float32, each (6, N_k, N_k, 3)
        Prefiltered radiance cube maps, faces +X, -X, +Y, -Y, +Z, -Z in bakery's orientation
        (:mod:`bakery.sphere`), level 0 the sharpest. Sizes may differ between levels.
    level_roughness : ndarray, float32, (K,)
        Perceptual roughness each level was prefiltered for, strictly increasing, in [0, 1].
    lut : ndarray, float32, (H, W, 2)
        Split-sum table: column j holds n·v = (j + 0.5)/W, row i holds perceptual roughness (i + 0.5)/H
        (roughness grows down the rows); channel 0 is the scale A of F0, channel 1 the bias B.
    sh : ndarray, float32, (9, 3)
        Radiance coefficients L_lm = ∫ L(ω) Y_lm(ω) dω of the environment in the real SH basis of Ramamoorthi &
        Hanrahan 2001 (order: Y00; Y1-1 ∝ y, Y10 ∝ z, Y11 ∝ x; Y2-2 ∝ xy, Y2-1 ∝ yz, Y20 ∝ 3z²−1, Y21 ∝ xz,
        Y22 ∝ x²−y²) with x, y, z the components of bakery's right-handed, +Y-up directions. Radiance, not
        irradiance: a constant environment L has L_00 = 2√π·L.
    """

    levels: tuple[np.ndarray, ...]
    level_roughness: np.ndarray
    lut: np.ndarray
    sh: np.ndarray
    _atlases: list = field(default_factory=list, repr=False)

    def __post_init__(self) -> None:
        levels = tuple(np.ascontiguousarray(lv, dtype=np.float32) for lv in self.levels)
        rough = np.asarray(self.level_roughness, dtype=np.float32).reshape(-1)
        lut = np.ascontiguousarray(self.lut, dtype=np.float32)
        sh = np.asarray(self.sh, dtype=np.float32)
        if not levels:
            raise BakeryError("the prefiltered chain has no levels")
        for k, lv in enumerate(levels):
            if lv.ndim != 4 or lv.shape[0] != 6 or lv.shape[1] != lv.shape[2] or lv.shape[3] != 3:
                raise BakeryError(f"prefiltered level {k} must have shape (6, N, N, 3); got {lv.shape}")
            if not np.all(np.isfinite(lv)):
                raise BakeryError(f"prefiltered level {k} holds NaN or Inf")
        if rough.shape != (len(levels),):
            raise BakeryError(f"need one roughness per prefiltered level ({len(levels)}); got {rough.shape[0]}")
        if np.any(~np.isfinite(rough)) or rough.min() < 0 or rough.max() > 1 or np.any(np.diff(rough) <= 0):
            raise BakeryError("level roughness must increase strictly within [0, 1]; got "
                              f"{np.round(rough, 4).tolist()}")
        if lut.ndim != 3 or lut.shape[2] < 2 or min(lut.shape[:2]) < 2:
            raise BakeryError(f"the BRDF table must have shape (H, W, 2) with H, W >= 2; got {lut.shape}")
        if not np.all(np.isfinite(lut[..., :2])):
            raise BakeryError("the BRDF table holds NaN or Inf")
        if sh.shape != (9, 3) or not np.all(np.isfinite(sh)):
            raise BakeryError(f"need 9 finite SH coefficients per RGB channel, shape (9, 3); got {sh.shape}")
        object.__setattr__(self, "levels", levels)
        object.__setattr__(self, "level_roughness", rough)
        object.__setattr__(self, "lut", np.ascontiguousarray(lut[..., :2]))
        object.__setattr__(self, "sh", sh)
        from bakery.envmap.sample import cube_atlas

        object.__setattr__(self, "_atlases", [cube_atlas(lv) for lv in levels])

    def prefiltered(self, dirs: np.ndarray, roughness: np.ndarray) -> np.ndarray:
        """Prefiltered radiance along ``dirs`` (P, 3) at perceptual ``roughness`` (P,): (P, 3) float32.

        Linear interpolation in the level index between the two levels whose roughness brackets the value
        (clamped to the chain's range); bilinear and seamless within each level
        (:func:`bakery.envmap.sample.sample_cube`).
        """
        from bakery.envmap.sample import sample_cube

        dirs = dirs.astype(np.float32, copy=False)
        idx = np.interp(roughness, self.level_roughness, np.arange(len(self.levels), dtype=np.float32))
        idx = idx.astype(np.float32)
        out = np.zeros((len(idx), 3), np.float32)
        for k, atlas in enumerate(self._atlases):
            w = np.float32(1) - np.abs(idx - np.float32(k))
            sel = np.nonzero(w > 0)[0]
            if sel.size == 0:
                continue
            out[sel] += w[sel, None] * sample_cube(self.levels[k], dirs[sel], padded_atlas=atlas)
        return out

    def brdf_terms(self, n_dot_v: np.ndarray, roughness: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Bilinear split-sum terms (A, B) at (n·v, roughness); coordinates clamp to the table's edge texels."""
        h, w = self.lut.shape[:2]
        x = np.clip(n_dot_v * np.float32(w) - np.float32(0.5), 0, w - 1).astype(np.float32)
        y = np.clip(roughness * np.float32(h) - np.float32(0.5), 0, h - 1).astype(np.float32)
        ab = _remap_points(self.lut, x, y, wrap=False)
        return ab[:, 0], ab[:, 1]

    def irradiance(self, normals: np.ndarray) -> np.ndarray:
        """Irradiance E(n) from the SH coefficients, (P, 3) float32 (may dip below 0 where SH9 rings)."""
        return irradiance_sh(self.sh, normals)


def irradiance_sh(sh: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """Irradiance E(n) = Σ Â_l L_lm Y_lm(n) from radiance coefficients ``sh`` (9, 3) at unit ``normals``
    (..., 3); returns (..., 3) float32 (Ramamoorthi & Hanrahan 2001, eqs. 7-9, through
    :mod:`bakery.envmap.irradiance`).

    Examples
    --------
    >>> sh = np.zeros((9, 3), np.float32); sh[0] = 2 * math.sqrt(math.pi)   # constant radiance 1
    >>> [round(float(v), 5) for v in irradiance_sh(sh, np.array([0.0, 1.0, 0.0]))]   # E = π L
    [3.14159, 3.14159, 3.14159]
    """
    from bakery.envmap.irradiance import eval_sh, irradiance_coefficients

    return eval_sh(irradiance_coefficients(sh), np.asarray(normals, dtype=np.float32)).astype(np.float32)


@dataclass(frozen=True, eq=False)
class Material:
    """What is being previewed; every map is optional.

    Attributes
    ----------
    normals : ndarray, float32, (H, W, 3), optional
        Tangent-space unit normals, +Y up (bakery's convention; decode Y-down files before). None: flat.
    roughness : ndarray (H, W) or float
        Perceptual roughness in [0, 1] (GGX α = r², Burley 2012).
    base_color : ndarray (H, W, 3) or sequence of 3 floats
        Linear base colour in [0, 1].
    metallic : float
        0 = dielectric (F0 = 0.04), 1 = metal (F0 = base colour).
    """

    normals: np.ndarray | None = None
    roughness: np.ndarray | float = 0.5
    base_color: np.ndarray | tuple[float, float, float] = (0.5, 0.5, 0.5)
    metallic: float = 0.0

    def __post_init__(self) -> None:
        if self.normals is not None:
            n = np.asarray(self.normals, dtype=np.float32)
            if n.ndim != 3 or n.shape[2] != 3:
                raise BakeryError(f"normals must have shape (H, W, 3); got {n.shape}")
            if not np.all(np.isfinite(n)):
                raise BakeryError("normals hold NaN or Inf")
            object.__setattr__(self, "normals", n)
        r = np.asarray(self.roughness, dtype=np.float32)
        if r.ndim == 3 and r.shape[2] == 1:
            r = r[..., 0]
        if r.ndim not in (0, 2) or not np.all(np.isfinite(r)) or r.min() < 0 or r.max() > 1:
            raise BakeryError("roughness must be a number or an (H, W) map in [0, 1]")
        object.__setattr__(self, "roughness", r)
        c = np.asarray(self.base_color, dtype=np.float32)
        if not ((c.ndim == 1 and c.shape == (3,)) or (c.ndim == 3 and c.shape[2] == 3)):
            raise BakeryError(f"base colour must be 3 numbers or an (H, W, 3) map; got shape {c.shape}")
        if not np.all(np.isfinite(c)) or c.min() < 0:
            raise BakeryError("base colour must be finite and non-negative")
        object.__setattr__(self, "base_color", c)
        if not 0.0 <= float(self.metallic) <= 1.0:
            raise BakeryError(f"metallic must lie in [0, 1]; got {self.metallic}")


@dataclass(frozen=True)
class Render:
    """A rendered view in linear radiance.

    Attributes
    ----------
    radiance : ndarray, float32, (S, S, 3)
        Linear RGB radiance, background included.
    coverage : ndarray, float32, (S, S)
        Fraction of each pixel covered by the object, in [0, 1].
    n_dot_v : ndarray, float32, (S, S)
        Shading normal · view direction (clamped to ≥ 1e-4) averaged over the covered samples; NaN where the
        pixel misses the object.
    """

    radiance: np.ndarray
    coverage: np.ndarray
    n_dot_v: np.ndarray


# ------------------------------------------------------------------------------------------ lookups


def _remap_points(img: np.ndarray, x: np.ndarray, y: np.ndarray, *, wrap: bool) -> np.ndarray:
    """Bilinear samples of ``img`` (H, W, C) at pixel coordinates (x, y) (centres at integers): (P, C)."""
    from bakery.envmap.sample import remap_bilinear

    if x.shape[0] == 0:
        return np.zeros((0, img.shape[2]), np.float32)
    return remap_bilinear(img, x, y, wrap=wrap)


class _Texture:
    """A tiling texture with a box-filtered mip pyramid, sampled trilinearly with wrap-around."""

    def __init__(self, img: np.ndarray):
        import cv2

        img = np.asarray(img, dtype=np.float32)
        if img.ndim == 2:
            img = img[..., None]
        self.levels = [np.ascontiguousarray(img)]
        while max(self.levels[-1].shape[:2]) > 1:
            h, w = self.levels[-1].shape[:2]
            nh, nw = max(1, h // 2), max(1, w // 2)
            small = cv2.resize(self.levels[-1], (nw, nh), interpolation=cv2.INTER_AREA)
            self.levels.append(np.ascontiguousarray(small.reshape(nh, nw, img.shape[2])))
        self.height, self.width = img.shape[:2]

    def sample(self, u: np.ndarray, v: np.ndarray, lod: np.ndarray) -> np.ndarray:
        """Values at texture coordinates (u, v) (any real numbers: the texture repeats; v grows up the image)
        and level of detail ``lod`` (0 = full size): (P, C)."""
        top = len(self.levels) - 1
        lod = np.clip(lod, 0, top).astype(np.float32)
        uf = (u - np.floor(u)).astype(np.float32)
        vf = (np.float32(1) - (v - np.floor(v))).astype(np.float32)  # image rows run top to bottom
        out = np.zeros((len(u), self.levels[0].shape[2]), np.float32)
        for k in range(int(np.floor(lod.min())), min(top, int(np.ceil(lod.max()))) + 1):
            w = np.float32(1) - np.abs(lod - np.float32(k))
            sel = np.nonzero(w > 0)[0]
            if sel.size == 0:
                continue
            lv = self.levels[k]
            h, wd = lv.shape[:2]
            x = uf[sel] * np.float32(wd) - np.float32(0.5)
            y = vf[sel] * np.float32(h) - np.float32(0.5)
            out[sel] += w[sel, None] * _remap_points(lv, x, y, wrap=True)
        return out


def _footprint_lod(u: np.ndarray, v: np.ndarray, hit: np.ndarray, width: int, height: int) -> np.ndarray:
    """Mip level from the screen-space footprint of (u, v) on a grid (Williams 1983): log2 of the longer of the
    per-pixel steps in texels along x and along y. One-sided differences at silhouettes; u and v are
    periodic with period 1, so steps are taken modulo 1."""
    def step(a: np.ndarray, axis: int) -> np.ndarray:
        d = np.diff(a, axis=axis)
        d = d - np.round(d)
        ok = np.logical_and(np.take(hit, range(0, a.shape[axis] - 1), axis=axis),
                            np.take(hit, range(1, a.shape[axis]), axis=axis))
        d = np.where(ok, np.abs(d), np.inf)
        pad_lo = [(0, 0)] * 2
        pad_hi = [(0, 0)] * 2
        pad_lo[axis] = (1, 0)
        pad_hi[axis] = (0, 1)
        fwd = np.pad(d, pad_hi, constant_values=np.inf)
        bwd = np.pad(d, pad_lo, constant_values=np.inf)
        s = np.minimum(fwd, bwd)
        return np.where(np.isfinite(s), s, 0)

    fx = np.hypot(step(u, 1) * width, step(v, 1) * height)
    fy = np.hypot(step(u, 0) * width, step(v, 0) * height)
    return np.log2(np.maximum(np.maximum(fx, fy), 1e-6)).astype(np.float32)


def _lod_memo(u: np.ndarray, v: np.ndarray, hit: np.ndarray):
    """Per-texture level of detail at the hit samples, computed once per texture size."""
    memo: dict[tuple[int, int], np.ndarray] = {}

    def lod(tex: _Texture) -> np.ndarray:
        key = (tex.width, tex.height)
        if key not in memo:
            memo[key] = _footprint_lod(u, v, hit, tex.width, tex.height)[hit]
        return memo[key]

    return lod


# ------------------------------------------------------------------------------------------ shading


def shade(normals: np.ndarray, view: np.ndarray, roughness: np.ndarray, base_color: np.ndarray,
          metallic: float, lighting: Lighting, *, env_rotation: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Split-sum specular plus SH diffuse for a list of surface points (see the module docstring).

    Parameters
    ----------
    normals : ndarray, float32, (P, 3)
        World-space unit shading normals.
    view : ndarray, float32, (P, 3)
        Unit vectors from the surface toward the eye.
    roughness : ndarray, float32, (P,)
        Perceptual roughness in [0, 1].
    base_color : ndarray, float32, (P, 3) or (3,)
        Linear base colour.
    metallic : float
    lighting : Lighting
    env_rotation : float
        Degrees the environment is turned about the vertical axis (:func:`bakery.sphere.rotation_y`).

    Returns
    -------
    radiance : ndarray, float32, (P, 3)
    n_dot_v : ndarray, float32, (P,)
        n·v clamped to ≥ 1e-4 (the value the table was read at).
    """
    nv = np.maximum(np.sum(normals * view, axis=-1), np.float32(1e-4)).astype(np.float32)
    refl = (2 * nv[:, None] * normals - view).astype(np.float32)
    rot = sphere.rotation_y(env_rotation).astype(np.float32)
    # a turned environment is looked up at the un-turned direction: L'(d) = L(R^T d), i.e. d @ R for rows
    refl_env = refl @ rot
    n_env = normals @ rot
    a, b = lighting.brdf_terms(nv, roughness)
    m = np.float32(metallic)
    base = np.asarray(base_color, dtype=np.float32)
    f0 = np.float32(DIELECTRIC_F0) * (1 - m) + base * m
    spec_albedo = f0 * a[:, None] + b[:, None]
    spec = lighting.prefiltered(refl_env, roughness) * spec_albedo
    e = np.maximum(lighting.irradiance(n_env), 0)
    diffuse = base * (1 - m) * e * np.float32(1 / math.pi) * (1 - spec_albedo)
    return (spec + diffuse).astype(np.float32), nv


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
    """Sample the material's maps at (u, v): tangent-space normals (P, 3), roughness (P,), base colour."""
    p = len(u)
    if material.normals is None:
        n_t = np.zeros((p, 3), np.float32)
        n_t[:, 2] = 1
    else:
        tex = _texture(material, "normals")
        n_t = tex.sample(u, v, lod_fn(tex))
        n_t /= np.maximum(np.linalg.norm(n_t, axis=1, keepdims=True), np.float32(1e-8))
    r = material.roughness
    if r.ndim == 0:
        rough = np.full(p, float(r), np.float32)
    else:
        tex = _texture(material, "roughness")
        rough = np.clip(tex.sample(u, v, lod_fn(tex))[:, 0], 0, 1)
    c = material.base_color
    if c.ndim == 1:
        base = np.broadcast_to(c, (p, 3))
    else:
        tex = _texture(material, "base_color")
        base = tex.sample(u, v, lod_fn(tex))
    return n_t, rough, base


def _texture(material: Material, name: str) -> _Texture:
    """Mip pyramids are built once per material map (kept while the material lives)."""
    cache = material.__dict__.setdefault("_pyramids", {})
    if name not in cache:
        cache[name] = _Texture(getattr(material, name))
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
    n_t, rough, base = _surface_values(material, u[hit], v[hit], lod_fn)
    # T = dP/du and B = dP/dv normalised, from P = (cos lat sin phi, sin lat, cos lat cos phi)
    normal = p_obj[hit]
    px, py, pz = normal[:, 0], normal[:, 1], normal[:, 2]
    cl = np.maximum(np.sqrt(px * px + pz * pz), np.float32(1e-6))
    tangent = np.stack([pz / cl, np.zeros_like(px), -px / cl], axis=-1)
    bitangent = np.stack([-py * px / cl, cl, -py * pz / cl], axis=-1)
    world = (n_t[:, :1] * tangent + n_t[:, 1:2] * bitangent + n_t[:, 2:] * normal) @ spin_m.T
    world = (world / np.linalg.norm(world, axis=1, keepdims=True)).astype(np.float32)
    return _shade_view(world, d, hit, rough, base, material, lighting, env_rotation=env_rotation,
                       background_roughness=background_roughness, n=n, supersample=supersample)


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
    n_t, rough, base = _surface_values(material, u[hit], v[hit], lod_fn)
    # tangent +X (u), bitangent -Z (v), normal +Y
    world = np.stack([n_t[:, 0], n_t[:, 2], -n_t[:, 1]], axis=-1).astype(np.float32)
    return _shade_view(world, d, hit, rough, base, material, lighting, env_rotation=env_rotation,
                       background_roughness=background_roughness, n=n, supersample=supersample)


def _shade_view(world, d, hit, rough, base, material, lighting, *, env_rotation, background_roughness, n,
                supersample):
    """Shade the hit pixels of an n x n view, fill the rest with the background, and finish the image."""
    radiance = np.empty((n, n, 3), np.float32)
    rad, nv = shade(world, (-d[hit]).astype(np.float32), rough, base, material.metallic, lighting,
                    env_rotation=env_rotation)
    radiance[hit] = rad
    radiance[~hit] = _background(d[~hit], lighting, env_rotation, background_roughness)
    nv_full = np.zeros((n, n), np.float32)
    nv_full[hit] = nv
    return _finish(radiance, hit, nv_full, supersample)


# ------------------------------------------------------------------------------------------ display


def auto_exposure(radiance: np.ndarray, weight: np.ndarray | None = None, *, key: float = 0.18) -> float:
    """Exposure in EV that maps the log-average luminance of ``radiance`` to ``key`` (Reinhard et al. 2002,
    eqs. 1-2: L = a/L̄w · Lw with L̄w = exp(mean(log(δ + Lw))), δ = 1e-4). ``weight`` (same (H, W) shape)
    restricts the average, e.g. to the object's coverage."""
    lum = np.asarray(radiance, dtype=np.float64) @ LUMA.astype(np.float64)
    w = np.ones_like(lum) if weight is None else np.asarray(weight, dtype=np.float64)
    if w.sum() <= 0:
        return 0.0
    log_avg = math.exp(float(np.sum(w * np.log(1e-4 + np.maximum(lum, 0))) / w.sum()))
    return math.log2(key / log_avg)


def tonemap_reinhard(radiance: np.ndarray, *, exposure: float = 0.0, white: float | None = None) -> np.ndarray:
    """Extended Reinhard operator on luminance (Reinhard et al. 2002, eq. 4):
    L_d = L (1 + L / L_white²) / (1 + L), colours scaled by L_d / L. ``white=None`` is the simple form
    L / (1 + L). ``exposure`` in EV multiplies the radiance by 2**exposure first. Returns linear display values
    in [0, 1], float32.

    Examples
    --------
    >>> [round(float(v), 4) for v in tonemap_reinhard(np.ones((1, 1, 3), np.float32))[0, 0]]
    [0.5, 0.5, 0.5]
    """
    x = np.asarray(radiance, dtype=np.float32) * np.float32(2.0**exposure)
    lum = np.maximum(x @ LUMA, 0)
    ld = lum / (1 + lum)
    if white is not None:
        if not white > 0:
            raise BakeryError(f"white point must be positive; got {white}")
        ld = lum * (1 + lum / np.float32(white * white)) / (1 + lum)
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(lum > 0, ld / lum, 0)
    return np.clip(x * scale[..., None], 0, 1).astype(np.float32)


def display(radiance: np.ndarray, *, exposure: float = 0.0, white: float | None = None) -> np.ndarray:
    """Tone-mapped and sRGB-encoded (IEC 61966-2-1) values in [0, 1], float32, ready for an 8-bit file."""
    from bakery.color import linear_to_srgb

    return linear_to_srgb(tonemap_reinhard(radiance, exposure=exposure, white=white))


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
