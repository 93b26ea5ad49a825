"""Mip chains for normal maps that keep the length of the averaged normal.

Each level averages the *vectors* of the level above with an area-weighted box filter, then renormalizes. The
unnormalized average is carried down the chain, so at every level it equals the average of the full-resolution
unit normals under the texel's footprint; its length |Na| (1 = all parallel, smaller = spread out) is what
Toksvig (2005) and its successors turn into extra roughness for specular anti-aliasing.

Level sizes follow the OpenGL / Vulkan / KTX 2.0 rule ``max(1, floor(size / 2**level))`` per axis, to a 1x1
last level. The filter is a box over each output texel's exact footprint in the level above: for an even axis
the 2-tap mean, for an odd axis (2m+1 -> m) three taps with weights ``(1 - j/m, 1, (j+1)/m) / (2 + 1/m)``
(the footprint of texel j is ``[j * s, (j+1) * s)`` with ``s = (2m+1)/m``), so odd and non-square sizes keep
every texel's weight and the mean of the map.

References
----------
.. [1] M. Toksvig, "Mipmapping Normal Maps", Journal of Graphics Tools 10(3), 65-71, 2005.
.. [2] Khronos Group, "KTX File Format Specification 2.0", section 4.1 (levelCount, level sizes).
"""

from __future__ import annotations

import numpy as np

from bakery.errors import BakeryError
from bakery.normals.encode import normalize


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


def normal_mips(normals: np.ndarray, *, levels: int | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
    """A mip chain of unit normals with the per-texel length of the averaged normal.

    Parameters
    ----------
    normals : ndarray, float32, (H, W, 3)
        Normals (level 0), renormalized first. Any Y convention; x and y are averaged alike.
    levels : int, optional
        Number of levels including level 0; default the full chain to 1x1 (:func:`mip_count`).

    Returns
    -------
    list of (normals, length)
        One pair per level, level 0 first: ``normals`` float32 (h, w, 3) unit vectors (a texel whose
        normals cancel out becomes (0, 0, 1)); ``length`` float32 (h, w) in [0, 1], the length |Na| of the
        average of the level-0 unit normals under the texel (1 at level 0).

    References
    ----------
    .. [1] M. Toksvig, "Mipmapping Normal Maps", JGT 10(3), 2005.

    Examples
    --------
    >>> import numpy as np
    >>> n = np.zeros((2, 2, 3), np.float32)
    >>> n[:, 0] = (0.6, 0.0, 0.8); n[:, 1] = (-0.6, 0.0, 0.8)
    >>> chain = normal_mips(n)
    >>> [lvl[0].shape for lvl in chain], round(float(chain[1][1][0, 0]), 6)
    ([(2, 2, 3), (1, 1, 3)], 0.8)
    """
    n = np.asarray(normals, dtype=np.float32)
    if n.ndim != 3 or n.shape[2] != 3 or n.size == 0:
        raise BakeryError(f"normal_mips needs normals of shape (H, W, 3); got {n.shape}")
    h, w = n.shape[:2]
    levels = level_count(w, h, levels)
    unit, length = normalize(n)
    chain = [(unit, np.where(length > 0, np.float32(1.0), np.float32(0.0)))]
    avg = unit
    for _ in range(1, levels):
        avg = downsample(avg)
        unit, length = normalize(avg)
        chain.append((unit, np.minimum(length, np.float32(1.0))))
    return chain
