"""Reference sums for the environment tests, written from the published definitions and sharing no code with
bakery's prefilter or irradiance paths.

Panorama texels follow DEVELOPERS.md's orientation: texel (x, y) of a W x H panorama has u = (x + 0.5)/W,
v = (y + 0.5)/H, φ = 2π(u − 0.5), θ = π(0.5 − v), d = (sin φ cos θ, sin θ, −cos φ cos θ); its solid angle is
the exact area of the latitude-longitude cell, Ω = (2π/W)(sin θ0 − sin θ1) between the row's edge latitudes.

The specular prefilter quantity (Karis 2013, SIGGRAPH course notes, Physically Based Shading course series,
the split-sum approximation with v = r = n: the prefiltered radiance that GGX importance sampling with n·l
weighting converges to):

    P(n) = Σ_t L_t w_t Ω_t / Σ_t w_t Ω_t,   w = max(n·l, 0) D(n·h),   h = (n + l) / |n + l|,

over every panorama texel t, with D the GGX distribution D = α² / (π ((n·h)² (α² − 1) + 1)²) (Walter et al.
2007, "Microfacet Models for Refraction through Rough Surfaces", EGSR, eq. 33) or the normalised Blinn-Phong
distribution D = (e + 2)/(2π) (n·h)^e (Walter et al. 2007, eq. 30; equation numbers from memory). The half
vector's cosine is taken from its definition: n·h = (n·n + n·l) / |n + l| with |n + l| = sqrt(2 + 2 n·l).
"""

from __future__ import annotations

import math

import numpy as np


def texels(w: int, h: int) -> tuple[np.ndarray, np.ndarray]:
    """Directions ``(H, W, 3)`` and solid angles ``(H W,)`` (row-major) of the texels of a W x H panorama."""
    u = (np.arange(w) + 0.5) / w
    v = (np.arange(h) + 0.5) / h
    phi, theta = np.meshgrid(2 * math.pi * (u - 0.5), math.pi * (0.5 - v))
    d = np.stack([np.sin(phi) * np.cos(theta), np.sin(theta), -np.cos(phi) * np.cos(theta)], -1)
    edges = math.pi * (0.5 - np.arange(h + 1) / h)
    om = 2 * math.pi / w * (np.sin(edges[:-1]) - np.sin(edges[1:]))
    return d, np.repeat(om, w)


def distribution(noh: np.ndarray, param: float, lobe: str = "ggx") -> np.ndarray:
    """D(n·h): GGX with α = ``param`` (Walter et al. 2007, eq. 33) or normalised Blinn-Phong with exponent
    e = ``param`` (eq. 30)."""
    if lobe == "ggx":
        a2 = param * param
        return a2 / (math.pi * (noh * noh * (a2 - 1) + 1) ** 2)
    if lobe == "blinn-phong":
        return (param + 2) / (2 * math.pi) * noh ** param
    raise ValueError(lobe)


def prefilter_reference(env: np.ndarray, normals: np.ndarray, param: float, lobe: str = "ggx",
                        chunk: int = 16) -> np.ndarray:
    """P(n) of the module notes at each of ``normals (N, 3)``, summed over every texel of ``env (H, W, C)`` in
    float64; ``(N, C)``."""
    h, w, c = env.shape
    d, om = texels(w, h)
    l = d.reshape(-1, 3)
    vals = env.reshape(-1, c).astype(np.float64)
    normals = np.asarray(normals, dtype=np.float64).reshape(-1, 3)
    out = np.empty((len(normals), c))
    for i in range(0, len(normals), chunk):
        n = normals[i:i + chunk]
        nl = n @ l.T  # (chunk, texels)
        up = nl > 0
        nl_up = np.where(up, nl, 0.0)
        noh = (np.sum(n * n, axis=1)[:, None] + nl_up) / np.sqrt(2 + 2 * nl_up)
        wgt = np.where(up, nl_up * distribution(noh, param, lobe), 0.0) * om[None, :]
        out[i:i + chunk] = (wgt @ vals) / wgt.sum(axis=1)[:, None]
    return out


def irradiance_reference(env: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """E(n) = Σ_t L_t max(0, n·l_t) Ω_t over every texel (the definition of irradiance, Ramamoorthi & Hanrahan
    2001, "An Efficient Representation for Irradiance Environment Maps", SIGGRAPH, eq. 1), ``(N, C)``."""
    h, w, c = env.shape
    d, om = texels(w, h)
    lw = env.reshape(-1, c).astype(np.float64) * om[:, None]
    d = d.reshape(-1, 3)
    return np.concatenate([np.maximum(normals[i:i + 64] @ d.T, 0) @ lw for i in range(0, len(normals), 64)])
