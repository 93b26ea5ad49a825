"""Procedural samples of our own for the derived maps: an alpha-tested foliage card.

Pure functions (no files): the demo and the docs call them.
"""

from __future__ import annotations

import math

import numpy as np


def _smoothstep(e0: float, e1: float, x: np.ndarray) -> np.ndarray:
    t = np.clip((x - e0) / (e1 - e0), 0.0, 1.0)
    return t * t * (3.0 - 2.0 * t)


def leaf_card(size: int = 256, *, seed: int = 3, leaves: int = 5) -> np.ndarray:
    """A card of ``leaves`` invented leaves for alpha testing: RGBA float32 ``(size, size, 4)``, colour
    sRGB-encoded in [0, 1], alpha linear (1 inside a leaf, 0 outside, a soft edge about 1.5 texels wide).

    Each leaf is a pointed oval (half-width ``w(t) = W sin(pi t)^0.8`` along its axis t in [0, 1]) on a thin
    stalk, green with a paler midrib and paired side veins and a yellowish tip. Leaves fan out from the
    card's bottom centre.

    Examples
    --------
    >>> card = leaf_card(64)
    >>> card.shape, card.dtype, 0.05 < float((card[:, :, 3] >= 0.5).mean()) < 0.6
    ((64, 64, 4), dtype('float32'), True)
    """
    rng = np.random.default_rng(seed)
    n = int(size)
    r, c = np.mgrid[0:n, 0:n].astype(np.float64) + 0.5
    x, y = c / n, 1.0 - r / n  # card coordinates, y up
    alpha = np.zeros((n, n))
    rgb = np.zeros((n, n, 3))
    base = np.array([0.5, 0.06])
    for i in range(leaves):
        ang = math.radians(90 + (i - (leaves - 1) / 2) * (120 / max(1, leaves - 1)) + rng.uniform(-8, 8))
        length = rng.uniform(0.55, 0.78)
        width = rng.uniform(0.09, 0.13)
        axis = np.array([math.cos(ang), math.sin(ang)])
        side = np.array([-axis[1], axis[0]])
        start = base + axis * 0.1  # the blade starts after a stalk
        px, py = x - start[0], y - start[1]
        t = (px * axis[0] + py * axis[1]) / length  # along the blade, 0 .. 1
        s = px * side[0] + py * side[1]  # across, in card units
        bend = 0.04 * math.sin(ang * 3) * np.sin(np.pi * np.clip(t, 0, 1))
        s = s - bend
        half = width * np.sin(np.pi * np.clip(t, 0.0, 1.0)) ** 0.8
        d = (half - np.abs(s)) * n  # texels inside the outline
        inside = np.where((t > 0) & (t < 1), _smoothstep(-0.75, 0.75, d), 0.0)
        stalk_t = (px * axis[0] + py * axis[1] + 0.1) / 0.1
        stalk = np.where((stalk_t > 0) & (stalk_t < 1.05), _smoothstep(-0.75, 0.75, (0.006 - np.abs(
            px * side[0] + py * side[1])) * n), 0.0)
        a = np.maximum(inside, stalk)
        # colour: midrib, side veins every 0.12 along t at 40 degrees, a yellowish tip
        rib = np.exp(-0.5 * (s * n / 1.2) ** 2)
        vein_phase = (t - np.abs(s) / width * 0.35) / 0.12
        veins = np.exp(-0.5 * ((vein_phase - np.round(vein_phase)) * 0.12 * n / 0.9) ** 2) * (np.abs(s) < half)
        tip = _smoothstep(0.6, 1.0, t)
        shade = rng.uniform(0.85, 1.1)
        green = np.stack([0.16, 0.42, 0.10]) * shade
        col = (green[None, None, :] * (1 - 0.45 * tip[..., None]) + np.array([0.55, 0.55, 0.1]) * 0.45
               * tip[..., None])
        col = col + 0.22 * np.maximum(rib, 0.7 * veins)[..., None] * np.array([0.7, 0.8, 0.35])
        col = np.where(stalk[..., None] > inside[..., None], np.array([0.35, 0.42, 0.12]), col)
        over = a * (1 - alpha)  # later leaves lie under earlier ones
        rgb += over[..., None] * col
        alpha += over
    lin = np.where(alpha[..., None] > 0, rgb / np.maximum(alpha[..., None], 1e-9), 0.0)
    lin = np.clip(lin, 0.0, 1.0)
    enc = np.where(lin <= 0.0031308, 12.92 * lin, 1.055 * lin ** (1 / 2.4) - 0.055)  # IEC 61966-2-1
    return np.concatenate([enc, alpha[..., None]], axis=2).astype(np.float32)
