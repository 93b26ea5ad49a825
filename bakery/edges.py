"""How a texture continues past its borders: ``wrap`` (it tiles), ``clamp`` (the edge texel repeats) or
``mirror`` (reflected, the edge texel repeated). One definition for derivative kernels, mip filters and the
maps derived from heights."""

from __future__ import annotations

import numpy as np

from bakery.errors import BakeryError

EDGES = ("wrap", "clamp", "mirror")


def check_edges(edges: str) -> str:
    if edges not in EDGES:
        raise BakeryError(f"unknown edge mode {edges!r}; must be one of {', '.join(EDGES)}")
    return edges


def edge_index(start: int, stop: int, n: int, edges: str) -> np.ndarray:
    """Indices ``start .. stop-1`` (which may run outside ``0 .. n-1``) folded back into the image by the
    edge mode: ``wrap`` (modulo), ``clamp`` (nearest edge) or ``mirror`` (edge texel repeated)."""
    i = np.arange(start, stop)
    if edges == "wrap":
        return np.mod(i, n)
    if edges == "clamp":
        return np.clip(i, 0, n - 1)
    if edges == "mirror":
        period = 2 * n
        i = np.mod(i, period)
        return np.where(i < n, i, period - 1 - i)
    raise BakeryError(f"unknown edge mode {edges!r}; must be one of {', '.join(EDGES)}")


#: OpenCV's border modes with the same meaning: wrap, the edge texel repeated, mirrored with the edge repeated
#: (``fedcba|abcdef|fedcba``).
_CV_BORDERS = {"wrap": "BORDER_WRAP", "clamp": "BORDER_REPLICATE", "mirror": "BORDER_REFLECT"}


def pad(a: np.ndarray, halo: int, edges: str) -> np.ndarray:
    """``a`` (H, W) or (H, W, C) with C <= 4, padded by ``halo`` texels on every side of its first two axes
    according to the edge mode (contiguous)."""
    h, w = a.shape[:2]
    check_edges(edges)
    if 0 < halo < min(h, w) and a.dtype in (np.float32, np.float64) and (a.ndim == 2 or a.shape[2] <= 4):
        import cv2  # one pass of copies, not two gathers

        return cv2.copyMakeBorder(np.ascontiguousarray(a), halo, halo, halo, halo,
                                  getattr(cv2, _CV_BORDERS[edges]))
    rows = edge_index(-halo, h + halo, h, edges)
    cols = edge_index(-halo, w + halo, w, edges)
    return np.ascontiguousarray(a[rows][:, cols])
