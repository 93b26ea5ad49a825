"""What a preview is lit by and made of, and the split-sum shading of one surface point.

- :class:`Lighting`: the specular prefiltered cube chain (levels ``(6, N_k, N_k, 3)`` with the perceptual
  roughness of each level), the split-sum BRDF table over (n·v, roughness), and nine spherical-harmonic
  coefficients of the environment's radiance per channel.
- :class:`Material`: tangent-space unit normals ``(H, W, 3)`` (+X right = +u, +Y up = +v, +Z out of the surface:
  bakery's convention, glTF 2.0), perceptual roughness ``(H, W)`` or a number, linear base colour ``(H, W, 3)``
  or an RGB triple, and a metallic factor.

Shading (image-based lighting with the split-sum approximation, Karis 2013):

    L_o = P(r, ρ) · (F0·A(n·v, ρ) + B(n·v, ρ)) + c_diff · E(n)/π · (1 − (F0·A + B))

where ``P`` is the prefiltered radiance along the mirror direction ``r = 2(n·v)n − v`` at roughness ρ
(linear interpolation between the two chain levels whose roughness brackets ρ), ``A, B`` are read bilinearly
from the table, ``E`` is the irradiance from the SH coefficients (Ramamoorthi & Hanrahan 2001, eq. 7 with
Â_0 = π, Â_1 = 2π/3, Â_2 = π/4), ``F0 = 0.04·(1 − m) + base·m`` and ``c_diff = base·(1 − m)`` for metallic m
(glTF 2.0 specification, appendix B, metal-roughness material). The factor ``1 − (F0·A + B)`` gives the diffuse
layer the energy the specular layer does not reflect (common practice, a directional-albedo version of the
glTF ``(1 − F)`` weighting).

References
----------
.. [1] Karis, B. (2013). SIGGRAPH course notes, "Physically Based Shading in Theory and
   Practice". (split-sum approximation).
.. [2] Ramamoorthi, R., Hanrahan, P. (2001). An efficient representation for irradiance environment maps.
   SIGGRAPH 2001 (eqs. 3 and 7; basis constants 0.282095, 0.488603, 1.092548, 0.315392, 0.546274).
.. [3] The Khronos Group. glTF 2.0 Specification, appendix B "BRDF Implementation" (F0 = 0.04 for
   dielectrics, metal-roughness mixing)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from bakery import sphere
from bakery.errors import BakeryError
from bakery.preview.textures import _remap_points

#: Reflectance at normal incidence of dielectrics (glTF 2.0 specification, appendix B).
DIELECTRIC_F0 = 0.04



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
