"""sRGB transfer functions (IEC 61966-2-1:1999, the sRGB standard).

Used only for colour data (albedo, LDR environment photographs). Data maps (height, normal, roughness,
exponent, masks) are never converted.

References
----------
.. [1] IEC 61966-2-1:1999, "Multimedia systems and equipment - Colour measurement and management -
   Part 2-1: Default RGB colour space - sRGB", section 5.
"""

from __future__ import annotations

import numpy as np


def srgb_to_linear(c: np.ndarray) -> np.ndarray:
    """Decode sRGB-encoded values in [0, 1] to linear light (IEC 61966-2-1, eq. for R'sRGB -> RsRGB).

    ``C/12.92`` for ``C <= 0.04045``, else ``((C + 0.055)/1.055)**2.4``. Returns float32.

    Examples
    --------
    >>> round(float(srgb_to_linear(np.float32(0.5))), 6)
    0.214041
    """
    c = np.asarray(c, dtype=np.float32)
    lo = c / np.float32(12.92)
    hi = np.power((np.maximum(c, 0.04045) + np.float32(0.055)) / np.float32(1.055), np.float32(2.4))
    return np.where(c <= 0.04045, lo, hi).astype(np.float32)


def linear_to_srgb(l: np.ndarray) -> np.ndarray:
    """Encode linear values in [0, 1] to sRGB (IEC 61966-2-1): ``12.92 L`` for ``L <= 0.0031308``,
    else ``1.055 L**(1/2.4) - 0.055``. Returns float32.

    Examples
    --------
    >>> round(float(linear_to_srgb(np.float32(0.5))), 6)
    0.735357
    """
    l = np.asarray(l, dtype=np.float32)
    lo = l * np.float32(12.92)
    hi = np.float32(1.055) * np.power(np.maximum(l, 0.0031308), np.float32(1 / 2.4)) - np.float32(0.055)
    return np.where(l <= 0.0031308, lo, hi).astype(np.float32)
