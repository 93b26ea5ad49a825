"""What kind of map an image holds, guessed from its channels, values and shape (and, for single-channel
maps, from words in the file's name).

One module for ``bakery info``, ``bakery inspect`` and the contact sheet. The guess is a hint for people and
picks which checks ``inspect`` runs; it never changes how a bake processes a file.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

#: Map kinds and how they are described.
KINDS = {
    "normal": "normal map (tangent space)",
    "height": "height map",
    "roughness": "material data: roughness, gloss or a mask",
    "data": "single-channel float data (specular exponents or heights)",
    "environment": "environment",
    "color": "colour image",
}

#: Largest ratio of a pole row's spread to the image's spread in an equirectangular panorama: every texel of
#: the top (bottom) row looks within half a texel of the zenith (nadir), so the row is nearly one colour
#: (the equirectangular mapping, see DEVELOPERS.md); a texture's first and last rows vary like any other.
POLE_SPREAD = 0.12

#: Single-channel maps are taken for heights when their used range (1st to 99th percentile) is at least
#: :data:`HEIGHT_RANGE`, or at least :data:`HEIGHT_MIN_RANGE` with smooth variation (texels 4 apart differ
#: at least :data:`SMOOTHNESS` times as much as neighbours: a smooth field's differences grow with
#: distance, grain's do not); otherwise for roughness-like data. Heights use most of the file's range so
#: that slopes survive quantisation; roughness, gloss and masks rarely do. Chosen on the labelled
#: procedural set of tests/test_classify.py (common practice, not published).
HEIGHT_RANGE = 0.6
HEIGHT_MIN_RANGE = 0.45
SMOOTHNESS = 2.5

#: Words of a file name that say what a single-channel map holds; they decide over the values, which can look
#: alike (a shallow height map and a roughness map). Matched as the start of a word of the name (split at
#: ``_ - . `` and spaces and at lower-to-upper case changes); common practice of texture naming, no standard.
HEIGHT_WORDS = ("height", "disp", "bump", "elev")
DATA_WORDS = ("rough", "gloss", "smooth", "metal", "mask", "occlusion", "ao", "cavity", "curv", "spec",
              "opacity", "alpha")


def kind_from_name(name: str | Path | None) -> str | None:
    """``"height"`` or ``"roughness"`` (material data) when words of the file name say so, else None (no name,
    no such word, or words of both).

    >>> kind_from_name("rock_Height.png"), kind_from_name("oakRoughness.tif"), kind_from_name("rock.png")
    ('height', 'roughness', None)
    >>> kind_from_name("chaos_height.png"), kind_from_name("paving_ao.png")
    ('height', 'roughness')
    """
    if not name:
        return None
    stem = Path(str(name)).name.split(".")[0]
    words = [w.lower() for w in re.split(r"[_\-\s.]+|(?<=[a-z])(?=[A-Z])", stem) if w]
    said = {kind for w in words for kind, vocab in (("height", HEIGHT_WORDS), ("roughness", DATA_WORDS))
            if any(w.startswith(v) for v in vocab)}
    return said.pop() if len(said) == 1 else None


def map_kind(pixels: np.ndarray, *, is_float: bool, name: str | Path | None = None) -> str:
    """One of :data:`KINDS` for float32 ``(H, W, C)`` pixels as read by :func:`bakery.io.read_image`; ``name``
    (the file's) decides between a height map and material data for single-channel maps
    (:func:`kind_from_name`)."""
    h, w, c = pixels.shape
    sample = pixels[:: max(1, h // 256), :: max(1, w // 256)]
    flat = sample.reshape(-1, c)
    flat = flat[np.isfinite(flat).all(axis=1)]
    if flat.size == 0:
        return "data"
    vmax = float(flat.max())
    if is_float and vmax > 1.0 and c >= 3 and (env_layout(w, h) or w == h):
        return "environment"
    if c >= 3 and _looks_like_normals(flat[:, :3]):
        return "normal"
    if c == 2 and _looks_like_xy_normals(flat[:, :2]):
        return "normal"
    gray = c == 1 or (c >= 3 and np.array_equal(pixels[..., 0], pixels[..., 1])
                      and np.array_equal(pixels[..., 1], pixels[..., 2]))
    if gray:
        if is_float and vmax > 1.0:
            return "data"
        return kind_from_name(name) or _height_or_roughness(np.nan_to_num(sample[..., 0]))
    if c >= 3 and env_layout(w, h) == "equirectangular" and _looks_like_panorama(pixels[..., :3]):
        return "environment"
    if is_float and vmax > 1.0 and c >= 3:
        return "environment"
    return "color"


def faces_kind(faces: list[np.ndarray], *, is_float: bool) -> str:
    """One kind for the six faces of one cube map (files named by the face tokens, or a cubemap's faces).

    A cube's faces are an environment unless most of them look like normal maps: a single face of an LDR
    cube holds no clue of its own (it is a square colour image), the six together do.
    """
    kinds = [map_kind(f, is_float=is_float) for f in faces]
    if kinds.count("normal") > len(kinds) // 2:
        return "normal"
    return "environment"


def _height_or_roughness(g: np.ndarray) -> str:
    lo, hi = (float(v) for v in np.percentile(g, [1, 99]))
    used = hi - lo
    if used <= 0:
        return "roughness"
    if used >= HEIGHT_RANGE:
        return "height"
    if used < HEIGHT_MIN_RANGE or g.shape[1] < 8:
        return "roughness"
    near = float(np.mean(np.abs(g[:, 1:] - g[:, :-1])))
    far = float(np.mean(np.abs(g[:, 4:] - g[:, :-4])))
    return "height" if far >= SMOOTHNESS * near else "roughness"


def _looks_like_panorama(rgb: np.ndarray) -> bool:
    """A pole row of nearly one colour (the zenith, or the nadir) and left and right edges that meet (a
    panorama wraps around horizontally)."""
    spread = float(np.std(rgb))
    if spread == 0.0:
        return False
    poles = min(float(np.std(rgb[0], axis=0).mean()), float(np.std(rgb[-1], axis=0).mean()))
    seam = float(np.mean(np.abs(rgb[:, 0] - rgb[:, -1])))
    inner = float(np.mean(np.abs(np.diff(rgb, axis=1)), axis=(0, 2)).max())
    return poles <= POLE_SPREAD * spread and seam <= 1.5 * inner + 1e-6


def guess_kind(pixels: np.ndarray, *, is_float: bool, name: str | Path | None = None) -> str:
    """A short description of what the map looks like, e.g. ``"HDR environment (equirectangular)"``."""
    kind = map_kind(pixels, is_float=is_float, name=name)
    text = KINDS[kind]
    if kind == "environment":
        dynamic = "HDR" if is_float and float(np.nanmax(pixels)) > 1.0 else "LDR"
        layout = env_layout(pixels.shape[1], pixels.shape[0])
        face = "cube face" if pixels.shape[0] == pixels.shape[1] else "unknown layout"
        text = f"{dynamic} {text} ({layout or face})"
    if kind == "normal" and pixels.shape[2] == 2:
        text = "normal map (two-channel XY)"
    if kind in ("height", "roughness"):
        c = pixels.shape[2]
        text += (" (single channel)" if c == 1 else " (grey, R = G = B" + (", with alpha)" if c == 4 else ")"))
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
        if np.median(np.abs(length - 1.0)) < 0.05 and np.median(n[:, 2]) > 0.1:
            return True
    return False


def _looks_like_xy_normals(xy: np.ndarray) -> bool:
    n = xy * 2.0 - 1.0
    return bool(np.median(np.sum(n * n, axis=1)) < 1.0 and abs(float(np.median(n))) < 0.25)
