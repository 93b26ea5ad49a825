"""Texture lookups of the previews: bilinear samples and tiling textures with a box-filtered mip pyramid,
sampled trilinearly with the level chosen per pixel from the screen-space footprint of the texture coordinates
(Williams 1983, "Pyramidal parametrics", SIGGRAPH '83)."""

from __future__ import annotations

import numpy as np


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
