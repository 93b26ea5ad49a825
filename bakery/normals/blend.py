"""Layering a detail normal map over a base normal map.

Methods (Barre-Brisebois & Hill 2012, "Blending in Detail"):

- ``"reoriented"`` (reoriented normal mapping, RNM): rotates the detail so that its "up" follows the base
  normal, ``t = n1 + (0, 0, 1)``, ``u = n2 * (-1, -1, 1)``, ``r = t * dot(t, u) / t.z - u``. Slopes add as
  angles; a flat base returns the detail, a flat detail returns the base.
- ``"whiteout"``: ``normalize(n1.xy + n2.xy, n1.z * n2.z)``.
- ``"derivative"``: partial-derivative blending, ``normalize(n1.xy / n1.z + n2.xy / n2.z, 1)``: the slopes of
  the two height fields add, as if the heights were summed.
- ``"linear"``: ``normalize(n1 + n2)``, the plain average (flattens both).

Detail strength scales the detail's x and y, renormalizes, then blends.

References
----------
.. [1] C. Barre-Brisebois, S. Hill, "Blending in Detail", 2012,
   https://blog.selfshadow.com/publications/blending-in-detail/
"""

from __future__ import annotations

import math

import numpy as np

from bakery.errors import BakeryError
from bakery.normals.encode import normalize, unit_normals
from bakery.progress import Progress, no_progress, row_bands, within

BLEND_METHODS = ("reoriented", "whiteout", "derivative", "linear")


def blend_normals(base: np.ndarray, detail: np.ndarray, *, method: str = "reoriented",
                  detail_strength: float = 1.0, checked: bool = False, progress: Progress | None = None
                  ) -> np.ndarray:
    """Layer ``detail`` over ``base``; both unit normals (H, W, 3), +Y up.

    Parameters
    ----------
    base, detail : ndarray, float32, (H, W, 3)
        Unit normals in [-1, 1] with z > 0; inputs that are not unit length are renormalized with a warning.
    method : {"reoriented", "whiteout", "derivative", "linear"}
    detail_strength : float
        Multiplies the detail's x and y before blending (0 = no detail, 1 = as stored, 2 = twice as steep).
    checked : bool
        True when both maps are known to be unit length already (bakery's normal-map readers check them):
        the unit checks, a full pass over each map, are skipped.
    progress : callable, optional
        ``progress(fraction, label)`` rising to 1: the unit checks block by block, then each band of rows
        ("blending"). Every texel depends on its own two normals only, so the bands change no value.

    Returns
    -------
    ndarray, float32, (H, W, 3): unit normals.

    References
    ----------
    .. [1] C. Barre-Brisebois, S. Hill, "Blending in Detail", 2012.

    Examples
    --------
    >>> import numpy as np
    >>> n = np.array([[[0.6, 0.0, 0.8]]], np.float32)
    >>> [round(float(v), 6) for v in blend_normals(n, n)[0, 0]]
    [0.96, 0.0, 0.28]
    """
    if method not in BLEND_METHODS:
        raise BakeryError(f"unknown blend method {method!r}; must be one of {', '.join(BLEND_METHODS)}")
    if not math.isfinite(detail_strength) or detail_strength < 0:
        raise BakeryError(f"detail strength must be zero or positive; got {detail_strength!r}")
    step = progress or no_progress
    if checked:
        n1, n2 = np.asarray(base, dtype=np.float32), np.asarray(detail, dtype=np.float32)
    else:
        n1 = unit_normals(base, what="base normal map", progress=within(step, 0.0, 0.1))
        step(0.1, "blending")
        n2 = unit_normals(detail, what="detail normal map", progress=within(step, 0.1, 0.2))
    if n1.shape != n2.shape:
        raise BakeryError(f"base and detail differ in size: {n1.shape[1]}x{n1.shape[0]} vs "
                          f"{n2.shape[1]}x{n2.shape[0]}; resize the detail first")
    step(0.2, "blending")
    out = np.empty_like(n1)
    for r0, r1 in row_bands(n1.shape[0], n1.shape[1], BLEND_BAND_TEXELS):
        out[r0:r1] = _blend_rows(n1[r0:r1], n2[r0:r1], method, detail_strength)
        step(0.2 + 0.8 * r1 / n1.shape[0], "blending")
    return out


#: Texels per band of rows in :func:`blend_normals` (its temporaries stay a few MiB; common practice).
BLEND_BAND_TEXELS = 1 << 18


def _blend_rows(n1: np.ndarray, n2: np.ndarray, method: str, detail_strength: float) -> np.ndarray:
    """:func:`blend_normals` on rows of unit normals already checked."""
    if detail_strength != 1.0:
        n2 = n2.copy()
        n2[:, :, :2] *= np.float32(detail_strength)
        n2, _ = normalize(n2, out=n2)
    if method == "reoriented":
        t = n1.copy()
        t[:, :, 2] += np.float32(1.0)
        np.maximum(t[:, :, 2], np.float32(1e-6), out=t[:, :, 2])  # a base pointing straight down has no frame
        u = n2 * np.array([-1.0, -1.0, 1.0], np.float32)
        d = np.einsum("...i,...i->...", t, u, dtype=np.float32)
        r = t * (d / t[:, :, 2])[:, :, None] - u
    elif method == "whiteout":
        r = np.empty_like(n1)
        np.add(n1[:, :, :2], n2[:, :, :2], out=r[:, :, :2])
        np.multiply(n1[:, :, 2], n2[:, :, 2], out=r[:, :, 2])
    elif method == "derivative":
        r = np.empty_like(n1)
        z1 = np.maximum(n1[:, :, 2:3], np.float32(1e-6))
        z2 = np.maximum(n2[:, :, 2:3], np.float32(1e-6))
        np.add(n1[:, :, :2] / z1, n2[:, :, :2] / z2, out=r[:, :, :2])
        r[:, :, 2] = 1.0
    else:
        r = n1 + n2
    out, _ = normalize(r, out=r)
    return out
