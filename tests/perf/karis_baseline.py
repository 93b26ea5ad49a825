"""The pinned baseline for the specular prefilter benchmark: per-texel GGX importance sampling as listed in
Karis 2013 (SIGGRAPH course notes, "Physically Based Shading in Theory and
Practice"; the importance-sampled prefilter): N = V = R, 1024 Hammersley samples, no source mip filtering, one
bilinear lookup per sample, n·l weighting. Vectorised over texels and samples (numpy + cv2.remap).
"""

from __future__ import annotations

import numpy as np

from bakery import sphere
from bakery.microfacet import hammersley, sample_ggx_half


def _lookup(env: np.ndarray, d: np.ndarray) -> np.ndarray:
    """One bilinear lookup per direction in the equirect panorama (cv2.remap, wrap across the seam)."""
    import cv2

    h, w, c = env.shape
    u, v = sphere.dir_to_equirect(d)
    x = (u * w - 0.5).astype(np.float32)
    y = (v * h - 0.5).astype(np.float32)
    shp = x.shape
    x = x.reshape(-1, 1024) if x.size % 1024 == 0 else x.reshape(1, -1)
    y = y.reshape(x.shape)
    out = cv2.remap(env, x, y, interpolation=cv2.INTER_LINEAR, borderMode=cv2.BORDER_WRAP)
    return out.reshape(shp + (c,))


def karis_prefilter(env: np.ndarray, dirs: np.ndarray, alpha: float, *, samples: int = 1024,
                    batch: int = 256) -> np.ndarray:
    """The importance-sampled prefilter of Karis 2013 at each direction of ``dirs`` (..., 3); returns (..., C)
    float32."""
    env = np.ascontiguousarray(env, dtype=np.float32)
    n = dirs.reshape(-1, 3).astype(np.float32)
    xi = hammersley(samples)
    ht = sample_ggx_half(xi[:, 0], xi[:, 1], alpha).astype(np.float32)  # tangent space, +z = N
    out = np.empty((n.shape[0], env.shape[2]), np.float32)
    for s in range(0, n.shape[0], batch):
        nn = n[s:s + batch]
        up = np.where(np.abs(nn[:, 2:3]) < 0.999, np.array([[0, 0, 1]], np.float32),
                      np.array([[1, 0, 0]], np.float32))
        tx = np.cross(up, nn)
        tx /= np.linalg.norm(tx, axis=1, keepdims=True)
        ty = np.cross(nn, tx)
        hw = (ht[None, :, 0:1] * tx[:, None, :] + ht[None, :, 1:2] * ty[:, None, :]
              + ht[None, :, 2:3] * nn[:, None, :])  # (B, S, 3)
        voh = np.einsum("bsk,bk->bs", hw, nn)
        l = 2 * voh[..., None] * hw - nn[:, None, :]
        nol = np.clip(np.einsum("bsk,bk->bs", l, nn), 0, None)
        col = _lookup(env, l)
        out[s:s + batch] = np.einsum("bsc,bs->bc", col, nol) / np.maximum(nol.sum(axis=1), 1e-30)[:, None]
    return out.reshape(dirs.shape[:-1] + (env.shape[2],))


def karis_chain(env: np.ndarray, size: int, roughness: np.ndarray) -> list[np.ndarray]:
    """All levels of a chain by the baseline: level 0 is one bilinear lookup per texel (r = 0)."""
    out = []
    for k, r in enumerate(roughness):
        s = size >> k
        d = sphere.cube_directions(s)
        if r == 0:
            out.append(_lookup(np.ascontiguousarray(env, np.float32), d))
        else:
            out.append(karis_prefilter(env, d, float(r) ** 2))
    return out
