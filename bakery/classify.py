"""What kind of map an image holds, guessed from its channels, values and shape.

One module for ``bakery info`` and ``bakery inspect``. The guess is a hint for people and picks which checks
``inspect`` runs; it never changes how a bake processes a file.
"""

from __future__ import annotations

import numpy as np

#: Map kinds and how they are described.
KINDS = {
    "normal": "normal map (tangent space)",
    "height": "single-channel data (height, roughness, gloss or mask)",
    "data": "single-channel float data (specular exponents or heights)",
    "environment": "HDR environment",
    "color": "colour image",
}


def map_kind(pixels: np.ndarray, *, is_float: bool) -> str:
    """One of :data:`KINDS` for float32 ``(H, W, C)`` pixels as read by :func:`bakery.io.read_image`."""
    h, w, c = pixels.shape
    sample = pixels[:: max(1, h // 256), :: max(1, w // 256)].reshape(-1, c)
    sample = sample[np.isfinite(sample).all(axis=1)]
    if sample.size == 0:
        return "data"
    vmax = float(sample.max())
    if is_float and vmax > 1.0 and env_layout(w, h) and c >= 3:
        return "environment"
    if c >= 3 and _looks_like_normals(sample[:, :3]):
        return "normal"
    if c == 2 and _looks_like_xy_normals(sample[:, :2]):
        return "normal"
    gray = c == 1 or (c >= 3 and np.array_equal(pixels[..., 0], pixels[..., 1])
                      and np.array_equal(pixels[..., 1], pixels[..., 2]))
    if gray:
        return "data" if is_float and vmax > 1.0 else "height"
    if is_float and vmax > 1.0 and c >= 3:
        return "environment"
    return "color"


def guess_kind(pixels: np.ndarray, *, is_float: bool) -> str:
    """A short description of what the map looks like, e.g. ``"HDR environment (equirectangular)"``."""
    kind = map_kind(pixels, is_float=is_float)
    text = KINDS[kind]
    if kind == "environment":
        layout = env_layout(pixels.shape[1], pixels.shape[0])
        text += f" ({layout or 'unknown layout'})"
    if kind == "normal" and pixels.shape[2] == 2:
        text = "normal map (two-channel XY)"
    return text


def env_layout(w: int, h: int) -> str | None:
    """The environment layout that an image's aspect ratio suggests, or None."""
    if w == 2 * h:
        return "equirectangular"
    ratios = {(4, 3): "horizontal cross", (3, 4): "vertical cross", (6, 1): "6x1 strip", (1, 6): "1x6 column"}
    for (a, b), name in ratios.items():
        if w * b == h * a:
            return name
    return None


def _looks_like_normals(rgb: np.ndarray) -> bool:
    from bakery.color import srgb_to_linear

    for candidate in (rgb, srgb_to_linear(rgb)):  # also recognise normal maps saved with an sRGB curve
        n = candidate * 2.0 - 1.0
        length = np.linalg.norm(n, axis=1)
        if np.median(np.abs(length - 1.0)) < 0.05 and np.median(n[:, 2]) > 0.3:
            return True
    return False


def _looks_like_xy_normals(xy: np.ndarray) -> bool:
    n = xy * 2.0 - 1.0
    return bool(np.median(np.sum(n * n, axis=1)) < 1.0 and abs(float(np.median(n))) < 0.25)
