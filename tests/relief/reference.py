"""Brute-force references for the relief tests, written from the definitions (no code shared with bakery)."""

from __future__ import annotations

import numpy as np


def sinusoid_height(n: int, seed: int, terms: int = 6, amp: float = 4.0):
    """A smooth tiling height on an n x n map (texel units) and its analytic gradient (x right, y up).

    Sum of plane waves with whole-number frequencies of 1..3 cycles per map, so it tiles exactly."""
    rng = np.random.default_rng(seed)
    waves = [(int(rng.integers(-3, 4)), int(rng.integers(1, 4)), rng.uniform(0, 2 * np.pi), rng.uniform(0.3, 1))
             for _ in range(terms)]

    def h(x, y):
        return amp * sum(a * np.sin(2 * np.pi * (p * x + q * y) / n + ph) for p, q, ph, a in waves)

    def grad(x, y):
        gx = amp * sum(a * 2 * np.pi * p / n * np.cos(2 * np.pi * (p * x + q * y) / n + ph) for p, q, ph, a in waves)
        gy = amp * sum(a * 2 * np.pi * q / n * np.cos(2 * np.pi * (p * x + q * y) / n + ph) for p, q, ph, a in waves)
        return gx, gy

    r, c = np.mgrid[0:n, 0:n].astype(np.float64)
    return h(c, -r).astype(np.float32), h, grad


def ray_marched_occlusion(hfun, gradfun, x, y, *, strength=1.0, reach=64.0, step=0.25, azimuths=256,
                          polar=512, bent=False):
    """Cosine-weighted sky visibility at (x, y) (texel units, y up) of the surface z = strength * h(x, y):
    horizons by marching every ``step`` texels up to ``reach`` along ``azimuths`` directions, then the
    integral (1/pi) * int max(0, n.w) V(w) dw by the midpoint rule over ``polar`` angles per azimuth.
    With ``bent``, also the normalised integral of w max(0, n.w) V(w) dw (the bent normal)."""
    gx, gy = gradfun(x, y)
    n = np.array([-strength * gx, -strength * gy, 1.0])
    n /= np.linalg.norm(n)
    z0 = strength * hfun(x, y)
    d = np.arange(step, reach + step / 2, step)
    total = 0.0
    mean = np.zeros(3)
    for psi in (np.arange(azimuths) + 0.5) * (2 * np.pi / azimuths):
        z = strength * hfun(x + d * np.cos(psi), y + d * np.sin(psi))
        tan_h = max(0.0, float(np.max((z - z0) / d)))
        theta_max = np.pi / 2 - np.arctan(tan_h)  # visible: 0 <= theta < theta_max from the vertical
        th = (np.arange(polar) + 0.5) * (theta_max / polar)
        w = np.stack([np.sin(th) * np.cos(psi), np.sin(th) * np.sin(psi), np.cos(th)], axis=-1)
        weight = np.maximum(w @ n, 0.0) * np.sin(th) * (theta_max / polar)
        total += float(np.sum(weight))
        mean += weight @ w
    occlusion = total * (2 * np.pi / azimuths) / np.pi
    if bent:
        return occlusion, mean / np.linalg.norm(mean)
    return occlusion
