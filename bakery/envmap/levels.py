"""Perceptual roughness of each level of a prefiltered specular chain, in plain Python (no numpy), so that
parameters can be checked without loading the array stack.

Named mappings (level k of n): ``linear`` r = k/(n−1); ``quadratic`` r = (k/(n−1))². Both give the mirror
image at level 0 and r = 1 at the last level (common practice).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from bakery.errors import BakeryError

MAPPING_NAMES = ("linear", "quadratic")


def roughness_values(levels: int, mapping: str | Sequence[float] = "linear") -> list[float]:
    """Roughness of each of ``levels`` levels for a named mapping or an explicit list (checked: one value
    per level, the first 0, all in [0, 1], non-decreasing).

    >>> roughness_values(5)
    [0.0, 0.25, 0.5, 0.75, 1.0]
    >>> roughness_values(3, "quadratic")
    [0.0, 0.25, 1.0]
    """
    if levels < 1:
        raise BakeryError(f"levels must be at least 1; got {levels}")
    if isinstance(mapping, str):
        if mapping not in MAPPING_NAMES:
            names = ", ".join(map(repr, MAPPING_NAMES))
            raise BakeryError(f"roughness mapping must be one of {names} or a list of values; got {mapping!r}")
        t = [k / max(levels - 1, 1) for k in range(levels)]
        return t if mapping == "linear" else [v * v for v in t]
    r = [float(v) for v in mapping]
    if len(r) != levels:
        raise BakeryError(f"the roughness list needs one value per level ({levels}); got {len(r)}")
    bad = [v for v in r if not (math.isfinite(v) and 0 <= v <= 1)]
    if bad:
        raise BakeryError(f"roughness values must lie in [0, 1]; got {bad}")
    if r[0] != 0:
        raise BakeryError(f"level 0 is the mirror image: its roughness must be 0; got {r[0]}")
    if any(r[i + 1] < r[i] for i in range(len(r) - 1)):
        raise BakeryError("roughness values must not decrease from level to level")
    return r
