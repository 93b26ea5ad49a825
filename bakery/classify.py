"""A guess of what kind of map an image holds, from its channels, values and shape.

Shared by ``bakery info`` (and later ``inspect``). The guess is a hint for people, never used to change how
a file is processed.
"""

from __future__ import annotations

import numpy as np


def guess_kind(pixels: np.ndarray, *, is_float: bool) -> str:
    """Return a short description such as ``"normal map (tangent space)"`` or ``"HDR environment
    (equirectangular)"``.

    Parameters
    ----------
    pixels : ndarray, float32, (H, W, C)
        As read by :func:`bakery.io.read_image` (integers scaled to [0, 1]).
    is_float : bool
        Whether the file stores float samples.
    """
    h, w, c = pixels.shape
    finite = pixels[np.isfinite(pixels).all(axis=2)] if c > 1 else pixels[np.isfinite(pixels)][:, None]
    if finite.size == 0:
        return "unknown (no finite samples)"
    vmax = float(finite.max())
    layout = _env_layout(w, h)
    if is_float and vmax > 1.0 and layout:
        return f"HDR environment ({layout})"
    if c >= 3 and _looks_like_normals(finite[:, :3]):
        return "normal map (tangent space)"
    if c == 2 and _looks_like_xy_normals(finite[:, :2]):
        return "normal map (two-channel XY)"
    gray = c == 1 or (c >= 3 and np.array_equal(pixels[..., 0], pixels[..., 1])
                      and np.array_equal(pixels[..., 1], pixels[..., 2]))
    if gray:
        if is_float and vmax > 1.0:
            return "single-channel float data (specular exponents or heights)"
        return "single-channel data (height, roughness, gloss or mask)"
    if is_float and vmax > 1.0:
        return "HDR colour image"
    return "colour image"


def _env_layout(w: int, h: int) -> str | None:
    if w == 2 * h:
        return "equirectangular"
    ratios = {(4, 3): "horizontal cross", (3, 4): "vertical cross", (6, 1): "6x1 strip", (1, 6): "1x6 column"}
    for (a, b), name in ratios.items():
        if w * b == h * a:
            return name
    return None


def _looks_like_normals(rgb: np.ndarray) -> bool:
    sample = rgb[:: max(1, len(rgb) // 65536)]
    n = sample * 2.0 - 1.0
    length = np.linalg.norm(n, axis=1)
    return bool(np.median(np.abs(length - 1.0)) < 0.05 and np.median(n[:, 2]) > 0.3)


def _looks_like_xy_normals(xy: np.ndarray) -> bool:
    sample = xy[:: max(1, len(xy) // 65536)]
    n = sample * 2.0 - 1.0
    return bool(np.median(np.sum(n * n, axis=1)) < 1.0 and abs(float(np.median(n))) < 0.25)
