"""Mip chains for normal maps that keep the length of the averaged normal.

Each level averages the *vectors* of the level above with an area-weighted box filter, then renormalizes. The
unnormalized average is carried down the chain, so at every level it equals the average of the full-resolution
unit normals under the texel's footprint; its length |Na| (1 = all parallel, smaller = spread out) is what
Toksvig (2005) and its successors turn into extra roughness for specular anti-aliasing.

Level sizes and the area-weighted box filter are those of :mod:`bakery.mips`.

References
----------
.. [1] M. Toksvig, "Mipmapping Normal Maps", Journal of Graphics Tools 10(3), 65-71, 2005.
.. [2] Khronos Group, "KTX File Format Specification 2.0", section 4.1 (levelCount, level sizes).
"""

from __future__ import annotations

import numpy as np

from bakery.errors import BakeryError
from bakery.mips import downsample, level_count
from bakery.normals.encode import normalize
from bakery.progress import Progress, maybe_within


def normal_mips(normals: np.ndarray, *, levels: int | None = None,
                progress: Progress | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
    """A mip chain of unit normals with the per-texel length of the averaged normal.

    Parameters
    ----------
    normals : ndarray, float32, (H, W, 3)
        Normals (level 0), renormalized first. Any Y convention; x and y are averaged alike.
    levels : int, optional
        Number of levels including level 0; default the full chain to 1x1 (:func:`mip_count`).
    progress : callable, optional
        ``progress(fraction, label)`` rising to 1 in proportion to the texels read: level 0's renormalization
        (which reads as many as all the others together) block by block, then ``"level K"`` after each level.

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
    total = n.size * (1 + 4 / 3) if levels > 1 else n.size  # texels read: level 0, then each level to halve
    done = n.size
    unit, length = normalize(n, progress=maybe_within(progress, 0.0, done / total))
    chain = [(unit, np.where(length > 0, np.float32(1.0), np.float32(0.0)))]
    if progress is not None:
        progress(min(done / total, 1.0), "level 0")
    avg = unit
    for k in range(1, levels):
        read = avg.size
        avg = downsample(avg, progress=maybe_within(progress, done / total, min((done + read) / total, 1.0)))
        done += read
        unit, length = normalize(avg)
        chain.append((unit, np.minimum(length, np.float32(1.0))))
        if progress is not None:
            progress(1.0 if k == levels - 1 else min(done / total, 1.0), f"level {k}")
    return chain
