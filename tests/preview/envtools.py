"""Reference inputs for the preview tests, built independently of the project's own environment bakes.

- :func:`split_sum_table`: the split-sum terms A, B (Karis 2013, SIGGRAPH course notes, the split-sum table
  integral) by a deterministic quadrature instead of Hammersley points: half vectors from GGX sampling
  (Walter et al. 2007, eq. 35) at Gauss-Legendre nodes in u1 and in the azimuths above the horizon, the
  integrand G2·(v·h)/((n·h)(n·v)) times (1 − Fc) and Fc, Fc = (1 − v·h)^5 (Schlick 1994), height-correlated
  Smith G2 (Heitz 2014, eq. 99) written out here from its formula.
- :func:`brute_prefilter`: P(n) = Σ L(l) w Ω / Σ w Ω over every source texel, w = max(n·l, 0) D(h),
  h = normalize(n + l) (the prefiltered quantity; Karis 2013), D the GGX distribution written out here
  (Walter et al. 2007, eq. 33).
- :func:`sh_project`: L_lm = Σ L(ω) Y_lm(ω) Ω (Ramamoorthi & Hanrahan 2001, eq. 3 basis).
"""

from __future__ import annotations

import math

import numpy as np

from bakery import sphere


def _g2(nv, nl, a):
    def lam(c):
        c = np.clip(c, 1e-12, 1)
        t2 = (1 - c * c) / (c * c)
        return (np.sqrt(1 + a * a * t2) - 1) / 2

    return 1 / (1 + lam(nv) + lam(nl))


def split_sum_terms(nv, r: float, n_u: int = 256, n_phi: int = 12):
    """(A, B) at n·v (a number or a 1-D array) and perceptual roughness r (alpha = r², Burley 2012).

    Half vectors at Gauss-Legendre nodes in u1 (GGX sampling, Walter et al. 2007, eq. 35) and, for each, at
    Gauss-Legendre nodes over the azimuths where n·l > 0 only (|phi| < phi0 with cos phi0 = (n·v / (2 cos th) −
    cos th n·v) / (sin th sin θv)), so the horizon cut-off is never inside a quadrature interval; the
    published values of docs/references.md, section 7 come out to ~6e-6 (measured)."""
    scalar = np.ndim(nv) == 0
    nv = np.atleast_1d(np.asarray(nv, dtype=np.float64))[:, None, None]
    a = max(r * r, 1e-6)
    x, w = np.polynomial.legendre.leggauss(n_u)
    u1 = 0.5 * (x + 1)
    wu = 0.5 * w
    cos_t = np.sqrt((1 - u1) / (1 + (a * a - 1) * u1))[None, :, None]
    sin_t = np.sqrt(1 - cos_t * cos_t)
    sin_v = np.sqrt(1 - nv * nv)
    lead = nv / (2 * cos_t) - cos_t * nv  # n·l > 0  <=>  sin_t sin_v cos(phi) > lead
    with np.errstate(divide="ignore", invalid="ignore"):
        c = np.where(sin_t * sin_v > 0, lead / (sin_t * sin_v), np.where(lead < 0, -2.0, 2.0))
    phi0 = np.arccos(np.clip(c, -1, 1))
    xp, wp = np.polynomial.legendre.leggauss(n_phi)
    phi = 0.5 * (xp + 1) * phi0  # (nv, n_u, n_phi) over [0, phi0]; the integrand is even in phi
    wt = wu[None, :, None] * (0.5 * wp * phi0) / math.pi
    vh = sin_t * np.cos(phi) * sin_v + cos_t * nv  # v = (sin θv, 0, cos θv)
    nl = 2 * vh * cos_t - nv
    g = np.where(nl > 0, _g2(nv, np.maximum(nl, 1e-300), a) * vh / (cos_t * nv), 0.0)
    fc = (1 - vh) ** 5
    ab = np.stack([np.sum(wt * g * (1 - fc), axis=(1, 2)), np.sum(wt * g * fc, axis=(1, 2))], -1)
    return tuple(float(v) for v in ab[0]) if scalar else ab


def split_sum_table(size: int = 64) -> np.ndarray:
    """(size, size, 2) table: column j at n·v = (j + 0.5)/size, row i at r = (i + 0.5)/size (down the rows)."""
    c = (np.arange(size) + 0.5) / size
    return np.stack([split_sum_terms(c, r) for r in c]).astype(np.float32)


def d_ggx(c, a):
    c = np.clip(c, 0, 1)
    t = (1 - c * c) + a * a * c * c
    return a * a / (math.pi * t * t)


def brute_prefilter(cube: np.ndarray, r: float, size: int) -> np.ndarray:
    """Prefiltered radiance on a size² cube at perceptual roughness r (r = 0: bilinear-free point copy by
    nearest source texel)."""
    n = cube.shape[1]
    src_d = sphere.cube_directions(n, dtype=np.float64).reshape(-1, 3)
    src_w = np.tile(sphere.cube_texel_solid_angles(n, dtype=np.float64).ravel(), 6)
    src_l = cube.reshape(-1, 3).astype(np.float64)
    out_d = sphere.cube_directions(size, dtype=np.float64).reshape(-1, 3)
    if r == 0:
        f, s, t = sphere.dir_to_face(out_d)
        return cube[f, np.minimum((t * n).astype(int), n - 1), np.minimum((s * n).astype(int), n - 1)].reshape(
            6, size, size, 3).astype(np.float32)
    a = r * r
    out = np.empty((len(out_d), 3))
    for i0 in range(0, len(out_d), 256):
        mu = out_d[i0:i0 + 256] @ src_d.T
        w = np.maximum(mu, 0) * d_ggx(np.sqrt((1 + mu) / 2), a) * src_w
        out[i0:i0 + 256] = (w @ src_l) / w.sum(axis=1, keepdims=True)
    return out.reshape(6, size, size, 3).astype(np.float32)


def sh_basis(d: np.ndarray) -> np.ndarray:
    x, y, z = d[..., 0], d[..., 1], d[..., 2]
    return np.stack([np.full_like(x, 0.282095), 0.488603 * y, 0.488603 * z, 0.488603 * x, 1.092548 * x * y,
                     1.092548 * y * z, 0.315392 * (3 * z * z - 1), 1.092548 * x * z, 0.546274 * (x * x - y * y)],
                    -1)


def sh_project(cube: np.ndarray) -> np.ndarray:
    n = cube.shape[1]
    d = sphere.cube_directions(n, dtype=np.float64).reshape(-1, 3)
    w = np.tile(sphere.cube_texel_solid_angles(n, dtype=np.float64).ravel(), 6)
    return ((sh_basis(d) * w[:, None]).T @ cube.reshape(-1, 3)).astype(np.float32)


def cube_from_function(fn, n: int) -> np.ndarray:
    """A cube map whose texels hold fn(directions) (directions (6, n, n, 3) float64)."""
    return np.asarray(fn(sphere.cube_directions(n, dtype=np.float64)), dtype=np.float32)


def cube_from_equirect(img: np.ndarray, n: int) -> np.ndarray:
    import cv2

    d = sphere.cube_directions(n, dtype=np.float64)
    u, v = sphere.dir_to_equirect(d)
    h, w = img.shape[:2]
    x = (u * w - 0.5).reshape(-1, 6 * n).astype(np.float32)
    y = (v * h - 0.5).reshape(-1, 6 * n).astype(np.float32)
    out = cv2.remap(img.astype(np.float32), x, y, cv2.INTER_LINEAR, borderMode=cv2.BORDER_WRAP)
    return out.reshape(6, n, n, 3)
