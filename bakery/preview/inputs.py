"""From files and option values to the renderer's plain inputs (:class:`~bakery.preview.shading.Material`).

The I/O edge of the preview: reads maps with :func:`bakery.io.read_image`, applies the file conventions
(normal-map green channel, sRGB colour), and checks values, so :mod:`bakery.preview.render` only sees arrays.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError


def parse_value_or_path(text: str, what: str, *, channels: int) -> float | tuple[float, ...] | Path:
    """``"0.4"`` -> 0.4; ``"0.8,0.5,0.2"`` -> a tuple (when ``channels`` is 3); anything else is a file path.

    Examples
    --------
    >>> parse_value_or_path("0.25", "roughness", channels=1)
    0.25
    >>> parse_value_or_path("1,0.5,0", "base colour", channels=3)
    (1.0, 0.5, 0.0)
    """
    parts = [p.strip() for p in text.split(",")]
    try:
        values = tuple(float(p) for p in parts)
    except ValueError:
        return Path(text)
    if len(values) == 1:
        return values[0]
    if len(values) != channels:
        raise BakeryError(f"{what} takes one number{f' or {channels} numbers' if channels > 1 else ''} or a "
                          f"file; got {text!r}")
    return values


def decode_normal_pixels(pixels: np.ndarray, *, green: str = "up") -> np.ndarray:
    """Stored normal-map values (H, W, C) in [0, 1] -> unit normals (H, W, 3), +Y up.

    :func:`bakery.normals.decode_normals` (encoding ``n·0.5 + 0.5``, glTF 2.0; ``green="down"`` for files whose
    green channel stores −y; two-channel files rebuild z), then renormalised; zero vectors become (0, 0, 1).
    """
    from bakery.normals.encode import decode_normals, normalize

    return normalize(decode_normals(pixels, y=green))[0]


def _read(path: Path, *, color: str = "data", max_pixels: int | None = None) -> np.ndarray:
    """Pixels of an image file, or level 0 of a 2D KTX2 texture (block-compressed ones decoded; sRGB formats
    come back linear, as ``color="srgb"`` would give)."""
    from bakery.io.images import read_image

    if Path(path).suffix.lower() == ".ktx2":
        from bakery.io.ktx2 import read_ktx2

        tex = read_ktx2(path)
        if tex.cubemap:
            raise BakeryError("is a cubemap; a material map is a 2D texture", path)
        return np.ascontiguousarray(tex.levels[0], dtype=np.float32)
    return read_image(path, color=color, max_pixels=max_pixels).pixels


def load_material(*, normal: str | os.PathLike | None = None, green: str = "up",
                  height: str | os.PathLike | None = None, strength: float | None = None,
                  roughness: float | str | os.PathLike = 0.5, exponent: str | os.PathLike | None = None,
                  base_color: float | tuple[float, float, float] | str | os.PathLike = 0.5,
                  metallic: float = 0.0, max_pixels: int | None = None):
    """Build a :class:`~bakery.preview.shading.Material` from files and values.

    Parameters
    ----------
    normal : path, optional
        Tangent-space normal map (2, 3 or 4 channels, alpha ignored). None: flat.
    green : {"up", "down"}
        The normal map file's green-channel convention.
    height : path, optional
        A height map instead of ``normal``: normals are baked from it in memory with
        :func:`bakery.normals.normal_from_height` (the ``bakery normal`` defaults: Scharr derivatives, wrapping
        edges).
    strength : float, optional
        Strength of that bake (texels per height unit); default as ``bakery normal``: relief = width / 32.
    roughness : float or path
        Perceptual roughness in [0, 1], or a single-channel map of it (data, never colour-converted).
    exponent : path, optional
        A Blinn-Phong specular-exponent map instead of a roughness map, converted in memory with
        :func:`bakery.roughness.roughness_from_exponent` (its defaults: the peak rule of Walter et al. 2007).
    base_color : float, (r, g, b) or path
        Linear values in [0, 1], or a colour map (8/16-bit files decoded from sRGB, IEC 61966-2-1; float files
        taken as linear).
    metallic : float
    max_pixels : int, optional
        Passed to :func:`bakery.io.read_image`.
    """
    from bakery.preview.shading import Material

    normals = None
    if normal is not None and height is not None:
        raise BakeryError("give a normal map or a height map, not both")
    if exponent is not None and isinstance(roughness, str | os.PathLike):
        raise BakeryError("give a roughness map or an exponent map, not both")
    if height is not None:
        from bakery.normals.from_height import DEFAULT_RELIEF_RATIO, normal_from_height, strength_from_size

        path = Path(height)
        px = _read(path, max_pixels=max_pixels)
        if px.shape[2] >= 3 and not (np.array_equal(px[..., 0], px[..., 1])
                                     and np.array_equal(px[..., 0], px[..., 2])):
            raise BakeryError("a height map needs one channel (or three equal ones); this one has colour", path)
        h = px[..., 0]
        if strength is None:
            s = strength_from_size(h.shape, DEFAULT_RELIEF_RATIO, 1.0)
        elif not (np.isfinite(strength) and strength != 0):
            raise BakeryError(f"--strength must be a non-zero number; got {strength}")
        else:
            s = float(strength)
        normals = normal_from_height(h, strength=s)
    elif strength is not None:
        raise BakeryError("--strength applies to a height map (--height)")
    if normal is not None:
        from bakery.bakes.normals import read_normals  # decodes, warns about and renormalizes non-unit vectors

        normals, _ = read_normals(Path(normal), green)
    if exponent is not None:
        from bakery.roughness import roughness_from_exponent

        path = Path(exponent)
        px = _read(path, max_pixels=max_pixels)
        if px.shape[2] != 1:
            raise BakeryError(f"an exponent map needs one channel; this one has {px.shape[2]}", path)
        try:
            rough = np.asarray(roughness_from_exponent(px[..., 0]), dtype=np.float32)
        except BakeryError as exc:
            raise BakeryError(str(exc), path) from None
    elif isinstance(roughness, str | os.PathLike):
        path = Path(roughness)
        px = _read(path, max_pixels=max_pixels)
        if px.shape[2] >= 3 and not (np.array_equal(px[..., 0], px[..., 1])
                                     and np.array_equal(px[..., 0], px[..., 2])):
            raise BakeryError("a roughness map needs one channel (or three equal ones); this one has colour",
                              path)
        rough = px[..., 0]
        if rough.min() < 0 or rough.max() > 1:
            raise BakeryError(f"roughness values must lie in [0, 1]; found {rough.min():.3g} to "
                              f"{rough.max():.3g}", path)
    else:
        rough = float(roughness)
        if not 0 <= rough <= 1:
            raise BakeryError(f"--roughness must lie in [0, 1]; got {rough}")
    if isinstance(base_color, str | os.PathLike):
        path = Path(base_color)
        px = _read(path, color="srgb", max_pixels=max_pixels)
        if px.shape[2] == 1:
            px = np.repeat(px, 3, axis=2)
        elif px.shape[2] == 2:
            raise BakeryError("a base colour map needs 1, 3 or 4 channels; this one has 2", path)
        color = np.clip(px[..., :3], 0, 1)
    else:
        c = np.broadcast_to(np.asarray(base_color, dtype=np.float32), (3,))
        if c.min() < 0 or c.max() > 1:
            raise BakeryError(f"base colour values must lie in [0, 1]; got {tuple(float(v) for v in c)}")
        color = c
    if not 0 <= float(metallic) <= 1:
        raise BakeryError(f"metallic must lie in [0, 1]; got {metallic}")
    return Material(normals=normals, roughness=rough, base_color=color, metallic=float(metallic))
