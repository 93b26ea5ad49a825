"""Mip levels of planar textures: level sizes and the area-weighted box filter.

Level sizes follow the OpenGL / Vulkan / KTX 2.0 rule ``max(1, floor(size / 2**level))`` per axis, to a 1x1
last level. The box filter averages each output texel's exact footprint in the level above: for an even axis
the 2-tap mean, for an odd axis (2m+1 -> m) three taps with weights ``(1 - j/m, 1, (j+1)/m) / (2 + 1/m)``
(the footprint of texel j is ``[j * s, (j+1) * s)`` with ``s = (2m+1)/m``), so odd and non-square sizes keep
every texel's weight and the mean of the map.

This is the one mip module of the project: normal-map chains (:mod:`bakery.normals.mips`), roughness chains
(:mod:`bakery.roughness.antialias`) and colour maps use its sizes and filters.

References
----------
.. [1] Khronos Group, "KTX File Format Specification 2.0", section 4.1 (levelCount, level sizes).
"""

from __future__ import annotations

import numpy as np

from bakery.errors import BakeryError


def mip_count(width: int, height: int) -> int:
    """Levels in a full chain down to 1x1: ``floor(log2(max(width, height))) + 1``."""
    return int(max(width, height)).bit_length()


def mip_size(width: int, height: int, level: int) -> tuple[int, int]:
    """(width, height) of ``level``: ``max(1, floor(size / 2**level))`` per axis."""
    return max(1, width >> level), max(1, height >> level)


def _halve_axis(a: np.ndarray, axis: int) -> np.ndarray:
    """Area-weighted box reduction of one axis to ``max(1, n // 2)`` (float32 in, float32 out)."""
    n = a.shape[axis]
    if n == 1:
        return a
    a = np.moveaxis(a, axis, 0)
    if n % 2 == 0:
        out = (a[0::2] + a[1::2]) * np.float32(0.5)
    else:
        m = n // 2
        j = np.arange(m, dtype=np.float64)
        shape = (m,) + (1,) * (a.ndim - 1)
        w0 = ((1.0 - j / m) / (2.0 + 1.0 / m)).astype(np.float32).reshape(shape)
        w1 = np.float32(1.0 / (2.0 + 1.0 / m))
        w2 = (((j + 1) / m) / (2.0 + 1.0 / m)).astype(np.float32).reshape(shape)
        out = a[0:2 * m:2] * w0 + a[1:2 * m + 1:2] * w1 + a[2:2 * m + 1:2] * w2
    return np.moveaxis(out, 0, axis)


def downsample(v: np.ndarray) -> np.ndarray:
    """One mip step of (H, W, C) float32 data: area-weighted box on both axes (see the module notes)."""
    return np.ascontiguousarray(_halve_axis(_halve_axis(np.asarray(v, np.float32), 0), 1))


def level_count(width: int, height: int, levels: int | None) -> int:
    """The number of mip levels to make: all of them for None, else ``levels`` checked against the size."""
    full = mip_count(width, height)
    levels = full if levels is None else int(levels)
    if not 1 <= levels <= full:
        raise BakeryError(f"a {width}x{height} map has 1 to {full} mip levels; got {levels}")
    return levels
