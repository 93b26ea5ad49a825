"""What a preview is lit by and made of, and the split-sum shading of one surface point.

- :class:`Lighting`: the specular prefiltered cube chain (levels ``(6, N_k, N_k, 3)`` with the perceptual
  roughness of each level), the split-sum BRDF table over (n·v, roughness), and nine spherical-harmonic
  coefficients of the environment's radiance per channel.
- :class:`Material`: tangent-space unit normals ``(H, W, 3)`` (+X right = +u, +Y up = +v, +Z out of the surface:
  bakery's convention, glTF 2.0), perceptual roughness ``(H, W)`` or a number, linear base colour ``(H, W, 3)``
  or an RGB triple, metalness (a number or an ``(H, W)`` map), an optional ambient-occlusion map ``(H, W)`` and
  an optional :class:`AlphaTest` (an opacity map and its cutoff: cut-outs, drawn by the renderer).

Shading (image-based lighting with the split-sum approximation, Karis 2013):

    L_o = P(r, ρ) · (F0·A(n·v, ρ) + B(n·v, ρ)) + c_diff · E(n)/π · (1 − (F0·A + B))

where ``P`` is the prefiltered radiance along the mirror direction ``r = 2(n·v)n − v`` at roughness ρ
(linear interpolation between the two chain levels whose roughness brackets ρ), ``A, B`` are read bilinearly
from the table, ``E`` is the irradiance from the SH coefficients (Ramamoorthi & Hanrahan 2001, eq. 7 with
Â_0 = π, Â_1 = 2π/3, Â_2 = π/4), ``F0 = 0.04·(1 − m) + base·m`` and ``c_diff = base·(1 − m)`` for metallic m
(glTF 2.0 specification, appendix B, metal-roughness material). The factor ``1 − (F0·A + B)`` gives the diffuse
layer the energy the specular layer does not reflect (common practice, a directional-albedo version of the
glTF ``(1 − F)`` weighting). An occlusion map ``ao`` multiplies this environment term (glTF 2.0 specification,
section 3.9.3, occlusionTexture: it applies to indirect lighting only).

Directional lights (the compact lights of ``bakery env lights``, irradiance ``E`` at normal incidence toward
direction ``l``) add the microfacet BRDF of Walter et al. 2007 (eq. 20) with the GGX distribution (ibid., eq. 33),
height-correlated Smith visibility (Heitz 2014, eq. 99) and Schlick's Fresnel, over a Lambertian diffuse layer
(glTF 2.0, appendix B: ``f = F·D·V + (1 − F)·c_diff/π``):

    L_o += (F·D·V + (1 − F)·c_diff/π) · E · max(n·l, 0)

with ``F = F(v·h)``, ``h = normalize(l + v)``. GGX α is kept at least :data:`MIN_LIGHT_ALPHA` so a mirror-like
surface shows a small bright highlight instead of an infinitely thin one (common practice). Lights are not
occluded (no shadows).

References
----------
.. [1] Karis, B. (2013). SIGGRAPH course notes, "Physically Based Shading in Theory and
   Practice". (split-sum approximation).
.. [2] Ramamoorthi, R., Hanrahan, P. (2001). An efficient representation for irradiance environment maps.
   SIGGRAPH 2001 (eqs. 3 and 7; basis constants 0.282095, 0.488603, 1.092548, 0.315392, 0.546274).
.. [3] The Khronos Group. glTF 2.0 Specification, appendix B "BRDF Implementation" (F0 = 0.04 for
   dielectrics, metal-roughness mixing, the (1 − F) diffuse weight); section 3.9.3 (occlusion).
.. [4] Walter, B., Marschner, S. R., Li, H., Torrance, K. E. (2007). Microfacet Models for Refraction through
   Rough Surfaces. EGSR 2007 (eq. 20: the microfacet BRDF; eq. 33: GGX).
.. [5] Heitz, E. (2014). Understanding the Masking-Shadowing Function in Microfacet-Based BRDFs. JCGT 3(2)
   (eq. 99)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from bakery import sphere
from bakery.errors import BakeryError
from bakery.preview.textures import _remap_points

#: Reflectance at normal incidence of dielectrics (glTF 2.0 specification, appendix B).
DIELECTRIC_F0 = 0.04
#: Smallest GGX alpha used for directional lights (common practice: keeps a mirror's highlight finite).
MIN_LIGHT_ALPHA = 2e-3


@dataclass(frozen=True)
class DirectionalLight:
    """A distant light: unit ``direction`` (3,) from the surface toward the light in the environment's frame
    (bakery's right-handed, +Y-up directions) and ``irradiance`` (3,) per RGB channel on a surface facing it."""

    direction: tuple[float, float, float]
    irradiance: tuple[float, float, float]

    def __post_init__(self) -> None:
        d = np.asarray(self.direction, dtype=np.float64).reshape(-1)
        e = np.asarray(self.irradiance, dtype=np.float64).reshape(-1)
        if d.shape != (3,) or not np.all(np.isfinite(d)) or np.linalg.norm(d) < 1e-9:
            raise BakeryError(f"a light direction needs 3 finite numbers, not all zero; got {self.direction}")
        if e.shape == (1,):
            e = np.repeat(e, 3)
        if e.shape != (3,) or not np.all(np.isfinite(e)) or e.min() < 0:
            raise BakeryError(f"a light's irradiance needs 1 or 3 finite non-negative numbers; got {self.irradiance}")
        object.__setattr__(self, "direction", tuple(float(v) for v in d / np.linalg.norm(d)))
        object.__setattr__(self, "irradiance", tuple(float(v) for v in e))



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
    lights : tuple of DirectionalLight
        Distant lights added to the environment (e.g. the sun taken out of it by ``bakery env lights``).
    """

    levels: tuple[np.ndarray, ...]
    level_roughness: np.ndarray
    lut: np.ndarray
    sh: np.ndarray
    lights: tuple[DirectionalLight, ...] = ()
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
        lights = tuple(self.lights)
        if not all(isinstance(lt, DirectionalLight) for lt in lights):
            raise BakeryError("lights must be DirectionalLight objects")
        object.__setattr__(self, "lights", lights)
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
class AlphaTest:
    """Cut-outs (alpha testing, as foliage and fences are drawn): a sample whose ``opacity`` is below ``cutoff``
    is not drawn, so what lies behind the surface shows through; ``opacity >= cutoff`` passes (the test whose
    coverage ``bakery mips --coverage`` keeps).

    Attributes
    ----------
    opacity : ndarray (H, W)
        Opacity (a colour map's alpha) in [0, 1], sampled like the other maps (trilinear, from its box-filtered
        mip pyramid) and tested per sample.
    cutoff : float
        The threshold, in (0, 1].
    """

    opacity: np.ndarray
    cutoff: float = 0.5

    def __post_init__(self) -> None:
        a = _unit_map(self.opacity, "opacity")
        if a.ndim != 2:
            raise BakeryError("opacity must be an (H, W) map in [0, 1]")
        cut = float(self.cutoff)
        if not 0 < cut <= 1:
            raise BakeryError(f"the alpha cutoff must lie in (0, 1]; got {self.cutoff}")
        object.__setattr__(self, "opacity", a)
        object.__setattr__(self, "cutoff", cut)


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
    metallic : ndarray (H, W) or float
        Metalness in [0, 1]: 0 = dielectric (F0 = 0.04), 1 = metal (F0 = base colour).
    occlusion : ndarray (H, W), optional
        Ambient occlusion in [0, 1], multiplying the environment's light (not the directional lights).
    alpha_test : AlphaTest, optional
        Cut-outs: samples whose opacity fails the test are not drawn. A base colour map of the opacity's size
        is then filtered weighted by the opacity (premultiplied, Porter & Duff 1984), so the colour of
        transparent texels does not bleed into the edges.
    """

    normals: np.ndarray | None = None
    roughness: np.ndarray | float = 0.5
    base_color: np.ndarray | tuple[float, float, float] = (0.5, 0.5, 0.5)
    metallic: np.ndarray | float = 0.0
    occlusion: np.ndarray | None = None
    alpha_test: AlphaTest | None = None

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
        object.__setattr__(self, "metallic", _unit_map(self.metallic, "metalness"))
        if self.occlusion is not None:
            ao = _unit_map(self.occlusion, "occlusion")
            if ao.ndim != 2:
                raise BakeryError("occlusion must be an (H, W) map in [0, 1]")
            object.__setattr__(self, "occlusion", ao)
        if self.alpha_test is not None and not isinstance(self.alpha_test, AlphaTest):
            raise BakeryError("alpha_test must be an AlphaTest")


def _unit_map(value, what: str) -> np.ndarray:
    """A number or an (H, W) / (H, W, 1) map with values in [0, 1], as float32 (0-d or 2-d)."""
    a = np.asarray(value, dtype=np.float32)
    if a.ndim == 3 and a.shape[2] == 1:
        a = a[..., 0]
    if a.ndim not in (0, 2):
        raise BakeryError(f"{what} must be a number or an (H, W) map; got shape {a.shape}")
    if not np.all(np.isfinite(a)) or a.min() < 0 or a.max() > 1:
        raise BakeryError(f"{what} values must lie in [0, 1]")
    return a


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


# ------------------------------------------------------------------------------------------ shading


def shade(normals: np.ndarray, view: np.ndarray, roughness: np.ndarray, base_color: np.ndarray,
          metallic: np.ndarray | float, lighting: Lighting, *, env_rotation: float = 0.0,
          occlusion: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Split-sum specular plus SH diffuse, times the occlusion, plus the directional lights, for a list of
    surface points (see the module docstring).

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
    metallic : float or ndarray, float32, (P,)
        Metalness in [0, 1].
    lighting : Lighting
    env_rotation : float
        Degrees the environment (and its lights) is turned about the vertical axis
        (:func:`bakery.sphere.rotation_y`).
    occlusion : ndarray, float32, (P,), optional
        Ambient occlusion in [0, 1] multiplying the environment term.

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
    m = np.asarray(metallic, dtype=np.float32)
    m = m[:, None] if m.ndim == 1 else m
    base = np.asarray(base_color, dtype=np.float32)
    f0 = np.float32(DIELECTRIC_F0) * (1 - m) + base * m
    c_diff = base * (1 - m)
    spec_albedo = f0 * a[:, None] + b[:, None]
    spec = lighting.prefiltered(refl_env, roughness) * spec_albedo
    e = np.maximum(lighting.irradiance(n_env), 0)
    out = spec + c_diff * e * np.float32(1 / math.pi) * (1 - spec_albedo)
    if occlusion is not None:
        out *= np.asarray(occlusion, dtype=np.float32).reshape(-1, 1)
    if lighting.lights:
        out += light_radiance(n_env, view @ rot, roughness, f0, c_diff, lighting.lights)
    return out.astype(np.float32), nv


def light_radiance(normals: np.ndarray, view: np.ndarray, roughness: np.ndarray, f0: np.ndarray,
                   c_diff: np.ndarray, lights) -> np.ndarray:
    """Radiance (P, 3) reflected from distant lights: Σ (F·D·V + (1 − F)·c_diff/π) · E · max(n·l, 0)
    (Walter et al. 2007, eq. 20, GGX eq. 33; Heitz 2014, eq. 99; Schlick 1994; glTF 2.0 appendix B).

    ``normals``, ``view`` (P, 3) unit vectors in the lights' frame; ``roughness`` (P,) perceptual (GGX
    α = r², at least :data:`MIN_LIGHT_ALPHA`); ``f0`` and ``c_diff`` (P, 3) or (3,) linear.

    Examples
    --------
    A white dielectric (F0 = 0.04), α = 1, lit and seen straight on by a light of irradiance π: the diffuse
    layer gives (1 − 0.04)·1/π·π = 0.96 and the specular one F·D·V·E = 0.04 · (1/π) · (1/4) · π = 0.01:

    >>> n = np.array([[0.0, 1.0, 0.0]], np.float32)
    >>> lt = DirectionalLight((0.0, 1.0, 0.0), (math.pi,) * 3)
    >>> out = light_radiance(n, n, np.array([1.0], np.float32), np.full(3, 0.04, np.float32),
    ...                      np.ones(3, np.float32), [lt])
    >>> round(float(out[0, 0]), 4)
    0.97
    """
    from bakery.microfacet import d_ggx, fresnel_schlick, vis_smith_correlated

    alpha = np.maximum(np.asarray(roughness, dtype=np.float32) ** 2, np.float32(MIN_LIGHT_ALPHA))
    cos_v = np.maximum(np.sum(normals * view, axis=-1), np.float32(1e-4))
    out = np.zeros((len(normals), 3), np.float32)
    for lt in lights:
        ld = np.asarray(lt.direction, dtype=np.float32)
        cos_l = normals @ ld
        lit = cos_l > 0
        if not np.any(lit):
            continue
        h = view + ld
        h /= np.maximum(np.linalg.norm(h, axis=-1, keepdims=True), np.float32(1e-8))
        cos_h = np.clip(np.sum(normals * h, axis=-1), 0, 1)
        cos_d = np.clip(h @ ld, 0, 1)
        f = np.asarray(fresnel_schlick(cos_d[:, None], f0), dtype=np.float32)
        dv = np.asarray(d_ggx(cos_h, alpha) * vis_smith_correlated(cos_v, np.maximum(cos_l, 0), alpha),
                        dtype=np.float32)
        brdf = f * dv[:, None] + (1 - f) * c_diff * np.float32(1 / math.pi)
        e = np.asarray(lt.irradiance, dtype=np.float32)
        out += np.where(lit[:, None], brdf * e * np.maximum(cos_l, 0)[:, None], 0)
    return out
