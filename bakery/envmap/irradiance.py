"""Diffuse irradiance from an environment map: 9 spherical-harmonic coefficients and the exact cosine
convolution (pure array functions).

Spherical harmonics (Ramamoorthi & Hanrahan 2001 [1]_): the real, orthonormal basis up to l = 2, evaluated on
bakery's directions (x, y, z) -- right-handed, **+Y up** -- in the order

====  ======  ===========================
 i    (l, m)  Y_lm
====  ======  ===========================
 0    (0, 0)  0.282095
 1    (1,-1)  0.488603 y
 2    (1, 0)  0.488603 z
 3    (1, 1)  0.488603 x
 4    (2,-2)  1.092548 x y
 5    (2,-1)  1.092548 y z
 6    (2, 0)  0.315392 (3 z^2 - 1)
 7    (2, 1)  1.092548 x z
 8    (2, 2)  0.546274 (x^2 - y^2)
====  ======  ===========================

(the constants are sqrt(1/4pi), sqrt(3/4pi), sqrt(15/4pi), sqrt(5/16pi), sqrt(15/16pi), used exactly).
Note that the paper's formulas have z up; here they are applied to bakery's axes as written, so "z" is the
horizontal axis toward the viewer of a panorama's centre, and y is up.

- Radiance coefficients ``L_lm = integral of L(w) Y_lm(w) dw`` (projection, eq. 7 of [1]_).
- Irradiance coefficients ``E_lm = A_l L_lm`` with ``A_0 = pi``, ``A_1 = 2 pi / 3``, ``A_2 = pi / 4``
  (eq. 8-9 of [1]_), so ``E(n) = sum E_lm Y_lm(n)`` is the irradiance on a surface with normal n.
- ``E(n) / pi`` is the radiance reflected by a white Lambertian surface (albedo 1): what a shader multiplies
  by the albedo.

The SH9 irradiance has an average error of about 1% for typical environments ([1]_, abstract) but is poor for
sharp lights (a sun); :func:`irradiance_exact` integrates ``L(w) max(0, n . w)`` directly instead.

References
----------
.. [1] R. Ramamoorthi, P. Hanrahan, "An Efficient Representation for Irradiance Environment Maps",
   SIGGRAPH 2001, eqs. 7-9 and 12-13.
.. [2] R. B. Blackman, J. W. Tukey, "The Measurement of Power Spectra", Dover, 1958 (the Hann window, here on
   the SH bands l = 0, 1, 2 against ringing).
"""

from __future__ import annotations

import math

import numpy as np

from bakery import sphere
from bakery.errors import BakeryError
from bakery.progress import Progress, no_progress, within

#: Exact basis constants: sqrt(1/4pi), sqrt(3/4pi), sqrt(15/4pi), sqrt(5/16pi), sqrt(15/16pi).
K0 = math.sqrt(1 / (4 * math.pi))
K1 = math.sqrt(3 / (4 * math.pi))
K2 = math.sqrt(15 / (4 * math.pi))
K20 = math.sqrt(5 / (16 * math.pi))
K22 = math.sqrt(15 / (16 * math.pi))

#: The band l of each of the 9 coefficients.
BANDS = (0, 1, 1, 1, 2, 2, 2, 2, 2)
#: Cosine-lobe convolution factors A_l for l = 0, 1, 2 (Ramamoorthi & Hanrahan 2001, eq. 9).
A_HAT = (math.pi, 2 * math.pi / 3, math.pi / 4)
WINDOWS = ("none", "hann")


def sh_basis(d: np.ndarray) -> np.ndarray:
    """The 9 basis functions at directions ``(..., 3)`` -> ``(..., 9)`` (order in the module docstring)."""
    d = np.asarray(d, dtype=np.float64)
    x, y, z = d[..., 0], d[..., 1], d[..., 2]
    return np.stack([np.full_like(x, K0), K1 * y, K1 * z, K1 * x, K2 * x * y, K2 * y * z,
                     K20 * (3 * z * z - 1), K2 * x * z, K22 * (x * x - y * y)], axis=-1)


def project_sh(env: np.ndarray, kind: str, *, threads: int | None = None) -> np.ndarray:
    """Radiance SH coefficients ``(9, C)`` (float64) of a panorama ``(H, W, C)`` or cubemap
    ``(6, N, N, C)``: the sum over texels of ``L * Y_lm * solid angle``.

    For a panorama the basis separates into functions of latitude and longitude, so the image is read once
    against 5 latitude functions (:func:`bakery.envmap.shsums.folded_sums`, on ``threads`` threads; the
    result does not depend on it) and the rest is per column. A panorama's width must be even.
    """
    env = np.asarray(env)
    if kind == "cube":
        n = env.shape[1]
        w = sphere.cube_texel_solid_angles(n, dtype=np.float64)
        basis = sh_basis(sphere.cube_directions(n, dtype=np.float64))  # (6, n, n, 9)
        return np.einsum("fijk,fijc,ij->kc", basis, env.astype(np.float64), w)
    h, w_, c = env.shape
    if w_ % 2:
        raise BakeryError(f"a panorama's width must be even (2:1); got {w_}")
    lat = np.pi * (0.5 - (np.arange(h) + 0.5) / h)
    st, ct = np.sin(lat), np.cos(lat)
    om = sphere.equirect_row_solid_angles(w_, h, dtype=np.float64)
    # the image is read once (bakery.envmap.shsums): each latitude function times the row solid angle meets the
    # longitude functions of its parity over the first half-turn of columns
    from bakery.envmap.shsums import folded_sums  # imports numba: only when a panorama is projected

    lat_f = np.stack([np.ones_like(st), ct * ct, st, ct, st * ct]) * om
    t0, t4, t1, t2, t3 = folded_sums(np.asarray(env, dtype=np.float32).reshape(h, w_ * c), lat_f,
                                     threads=threads).reshape(5, w_ // 2, c)
    phi = 2 * np.pi * ((np.arange(w_ // 2) + 0.5) / w_ - 0.5)  # the first half-turn
    sp, cp = np.sin(phi), np.cos(phi)

    one = np.ones_like(phi)
    out = np.empty((9, c), dtype=np.float64)
    out[0] = K0 * (one @ t0)
    out[1] = K1 * (one @ t1)  # y = sin(lat)
    out[2] = K1 * (-cp @ t2)  # z = -cos(phi) cos(lat)
    out[3] = K1 * (sp @ t2)  # x = sin(phi) cos(lat)
    out[4] = K2 * (sp @ t3)  # x y
    out[5] = K2 * (-cp @ t3)  # y z
    out[6] = K20 * (3 * (cp * cp) @ t4 - one @ t0)  # 3 z^2 - 1
    out[7] = K2 * (-sp * cp @ t4)  # x z
    out[8] = K22 * ((sp * sp) @ t4 - one @ (t0 - t4))  # x^2 - y^2, y^2 = 1 - cos^2(lat)
    return out


def window_weights(window: str = "none", width: float = 3.0) -> np.ndarray:
    """Per-band weights against ringing: "none" -> 1; "hann" -> ``(1 + cos(pi l / width)) / 2`` for
    l = 0, 1, 2 (the Hann window, [2]_), i.e. 1, 0.75, 0.25 at the default width 3."""
    if window == "none":
        return np.ones(3)
    if window == "hann":
        l = np.arange(3)
        return np.where(l < width, 0.5 * (1 + np.cos(np.pi * l / width)), 0.0)
    raise BakeryError(f"window must be one of {WINDOWS}; got {window!r}")


def irradiance_coefficients(radiance_sh: np.ndarray, *, window: str = "none") -> np.ndarray:
    """Irradiance SH ``E_lm = w_l A_l L_lm`` (9, C) from radiance SH (eq. 8-9 of [1]_)."""
    a = np.array([A_HAT[b] for b in BANDS]) * window_weights(window)[list(BANDS)]
    return np.asarray(radiance_sh, dtype=np.float64) * a[:, None]


def eval_sh(coeffs: np.ndarray, d: np.ndarray) -> np.ndarray:
    """``sum_i coeffs[i] Y_i(d)``: ``(9, C)`` coefficients at directions ``(..., 3)`` -> ``(..., C)``."""
    return sh_basis(d) @ np.asarray(coeffs, dtype=np.float64)


def irradiance_cube_sh(irr_sh: np.ndarray, size: int) -> np.ndarray:
    """Irradiance E on every texel of a cubemap of face ``size`` from irradiance SH; float32."""
    return eval_sh(irr_sh, sphere.cube_directions(size, dtype=np.float64)).astype(np.float32)


def irradiance_exact(env: np.ndarray, kind: str, normals: np.ndarray, *, source_size: int = 64,
                     chunk: int = 2048, bright_factor: float = 16.0, max_bright: int = 4096,
                     progress=None) -> np.ndarray:
    """Exact cosine convolution ``E(n) = integral L(w) max(0, n . w) dw`` at ``normals`` ``(..., 3)``.

    The brightest texels (those brighter than ``bright_factor`` times the environment's mean radiance, at most
    ``max_bright``, the most energetic: :func:`bakery.envmap.specular.brightest_texels`, the same split the
    specular prefilter uses) are summed exactly at their own directions and solid angles; the rest of the
    environment is reduced to a cubemap of face ``source_size`` with the energy-keeping area filter
    (:func:`bakery.envmap.resample.resample`) and summed over all its texels. A sun thus keeps its position
    and its sharp terminator (normals about 90° from it), not only its power. ``progress(fraction, label)``
    is called after the split and the reduction, then per block of normals (fractions rising to exactly 1.0).
    Returns float64 ``(..., C)``.
    """
    from bakery.envmap.resample import resample
    from bakery.envmap.specular import brightest_texels

    env = np.asarray(env)
    c = env.shape[-1]
    if kind == "cube":
        n0 = env.shape[1]
        om_src = np.broadcast_to(sphere.cube_texel_solid_angles(n0, dtype=np.float64)[None], (6, n0, n0))
    else:
        h, w = env.shape[:2]
        om_src = sphere.equirect_row_solid_angles(w, h, dtype=np.float64)[:, None] * np.ones((1, w))
    if progress is not None:
        progress(0.05, "exact irradiance")
    bright = brightest_texels(env, om_src, bright_factor, max_bright)
    if progress is not None:
        progress(0.1, "exact irradiance")
    rest = np.array(env, dtype=np.float32)
    rest.reshape(-1, c)[bright] = 0.0
    if kind == "cube":
        b_dirs = sphere.cube_directions(n0, dtype=np.float64).reshape(-1, 3)[bright]
    else:  # the directions of the bright texels' centres only (a whole panorama's would be the slow part)
        b_dirs = sphere.equirect_texel_directions(w, h, *np.divmod(np.asarray(bright), w)).reshape(-1, 3)
    b_lw = env.reshape(-1, c)[bright].astype(np.float64) * om_src.reshape(-1)[bright][:, None]
    src = rest if (kind == "cube" and env.shape[1] <= source_size) else resample(rest, kind, "cube",
                                                                                   source_size)
    n = src.shape[1]
    if progress is not None:
        progress(0.2, "exact irradiance")
    dirs = np.concatenate([sphere.cube_directions(n, dtype=np.float64).reshape(-1, 3), b_dirs])
    w_ = np.broadcast_to(sphere.cube_texel_solid_angles(n, dtype=np.float64)[None], (6, n, n)).reshape(-1)
    lw = np.concatenate([src.reshape(-1, c).astype(np.float64) * w_[:, None], b_lw])
    nrm = np.asarray(normals, dtype=np.float64)
    flat = nrm.reshape(-1, 3)
    out = np.empty((flat.shape[0], c), dtype=np.float64)
    for i in range(0, flat.shape[0], chunk):
        cos = np.maximum(flat[i:i + chunk] @ dirs.T, 0.0)
        out[i:i + chunk] = cos @ lw
        if progress is not None:
            progress(1.0 if i + chunk >= flat.shape[0] else 0.2 + 0.8 * (i + chunk) / flat.shape[0],
                     "exact irradiance")
    return out.reshape(nrm.shape[:-1] + (c,))


def sh9_error_estimate(env: np.ndarray, kind: str, *, size: int = 8, window: str = "none",
                       threads: int | None = None, radiance_sh: np.ndarray | None = None,
                       progress: Progress | None = None) -> dict[str, float]:
    """How poor the 9-coefficient irradiance is for this environment (pure; for a warning that suggests the
    exact method).

    The SH9 irradiance (:func:`project_sh`, :func:`irradiance_coefficients` with ``window``) is compared with
    :func:`irradiance_exact` at the texel centres of a cubemap of face ``size`` (6 size² normals, 384 by
    default). Returns

    - ``"max_relative"``: the largest |E_SH − E| / E over those normals and the channels, where E exceeds
      10⁻³ of its maximum (the expected worst error of an SH9 bake);
    - ``"mean_relative"``: Σ|E_SH − E| / ΣE over the normals (worst channel; Ramamoorthi & Hanrahan 2001 call
      about 1 % typical);
    - ``"bright_fraction"``: the share of the environment's energy Σ L Ω (channel mean) in its brightest
      0.1 % of solid angle (a compact sun carries most of it).

    ``progress(fraction, label)`` rises to 1 over its passes (the projection, the exact sum, the sort).
    """
    step = progress or no_progress
    step(0.0, "SH9 error estimate")
    env = np.asarray(env)
    normals = sphere.cube_directions(size, dtype=np.float64).reshape(-1, 3)
    if radiance_sh is None:  # callers that projected the environment already pass its coefficients
        radiance_sh = project_sh(env, kind, threads=threads)
    step(0.1, "SH9 error estimate")
    sh = eval_sh(irradiance_coefficients(radiance_sh, window=window), normals)
    ex = irradiance_exact(env, kind, normals, source_size=32, progress=within(step, 0.1, 0.5))
    keep = ex > 1e-3 * ex.max(axis=0, keepdims=True)
    rel = np.where(keep, np.abs(sh - ex) / np.maximum(ex, 1e-300), 0.0)
    mean = np.abs(sh - ex).sum(axis=0) / np.maximum(ex.sum(axis=0), 1e-300)
    if kind == "cube":
        n0 = env.shape[1]
        om = np.broadcast_to(sphere.cube_texel_solid_angles(n0, dtype=np.float64)[None], (6, n0, n0))
    else:
        h, w = env.shape[:2]
        om = np.broadcast_to(sphere.equirect_row_solid_angles(w, h, dtype=np.float64)[:, None], (h, w))
    lum = env.astype(np.float64).mean(axis=-1).reshape(-1)
    om = om.reshape(-1)
    step(0.6, "SH9 error estimate")
    order = np.argsort(lum)[::-1]
    step(0.9, "SH9 error estimate")
    cum = np.cumsum(om[order])
    top = order[: int(np.searchsorted(cum, 4 * math.pi * 1e-3)) + 1]
    total = float(lum @ om)
    step(1.0, "SH9 error estimate")
    return {"max_relative": float(rel.max()), "mean_relative": float(mean.max()),
            "bright_fraction": float((lum[top] @ om[top]) / total) if total > 0 else 0.0}
