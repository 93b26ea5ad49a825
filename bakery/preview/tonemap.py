"""Tone mapping of preview radiance: the extended Reinhard operator on luminance (Reinhard et al. 2002, eq. 4),
optional automatic exposure from the log-average luminance and key 0.18 (ibid., eqs. 1-2), then sRGB encoding
(IEC 61966-2-1).

References
----------
.. [1] Reinhard, E., Stark, M., Shirley, P., Ferwerda, J. (2002). Photographic tone reproduction for digital
   images. SIGGRAPH 2002 (eqs. 1, 2 and 4).
.. [2] ITU-R Recommendation BT.709-6, item 3.2 (luminance weights 0.2126, 0.7152, 0.0722).
.. [3] IEC 61966-2-1:1999 (sRGB transfer function)."""

from __future__ import annotations

import math

import numpy as np

from bakery.errors import BakeryError

#: Luminance weights of linear Rec. 709 / sRGB primaries (ITU-R BT.709-6).
LUMA = np.array([0.2126, 0.7152, 0.0722], dtype=np.float32)



def auto_exposure(radiance: np.ndarray, weight: np.ndarray | None = None, *, key: float = 0.18) -> float:
    """Exposure in EV that maps the log-average luminance of ``radiance`` to ``key`` (Reinhard et al. 2002,
    eqs. 1-2: L = a/L̄w · Lw with L̄w = exp(mean(log(δ + Lw))), δ = 1e-4). ``weight`` (same (H, W) shape)
    restricts the average, e.g. to the object's coverage."""
    lum = np.asarray(radiance, dtype=np.float64) @ LUMA.astype(np.float64)
    w = np.ones_like(lum) if weight is None else np.asarray(weight, dtype=np.float64)
    if w.sum() <= 0:
        return 0.0
    log_avg = math.exp(float(np.sum(w * np.log(1e-4 + np.maximum(lum, 0))) / w.sum()))
    return math.log2(key / log_avg)


def tonemap_reinhard(radiance: np.ndarray, *, exposure: float = 0.0, white: float | None = None) -> np.ndarray:
    """Extended Reinhard operator on luminance (Reinhard et al. 2002, eq. 4):
    L_d = L (1 + L / L_white²) / (1 + L), colours scaled by L_d / L. ``white=None`` is the simple form
    L / (1 + L). ``exposure`` in EV multiplies the radiance by 2**exposure first. Returns linear display values
    in [0, 1], float32.

    Examples
    --------
    >>> [round(float(v), 4) for v in tonemap_reinhard(np.ones((1, 1, 3), np.float32))[0, 0]]
    [0.5, 0.5, 0.5]
    """
    x = np.asarray(radiance, dtype=np.float32) * np.float32(2.0**exposure)
    lum = np.maximum(x @ LUMA, 0)
    ld = lum / (1 + lum)
    if white is not None:
        if not white > 0:
            raise BakeryError(f"white point must be positive; got {white}")
        ld = lum * (1 + lum / np.float32(white * white)) / (1 + lum)
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(lum > 0, ld / lum, 0)
    return np.clip(x * scale[..., None], 0, 1).astype(np.float32)


def display(radiance: np.ndarray, *, exposure: float = 0.0, white: float | None = None) -> np.ndarray:
    """Tone-mapped and sRGB-encoded (IEC 61966-2-1) values in [0, 1], float32, ready for an 8-bit file."""
    from bakery.color import linear_to_srgb

    return linear_to_srgb(tonemap_reinhard(radiance, exposure=exposure, white=white))
