"""Normal -> height integration (Frankot & Chellappa 1988; Simchony, Chellappa & Shao 1990)."""

import math

import numpy as np
import pytest

from bakery import BakeryWarning
from bakery.normals import fit_height, height_from_normal, normal_from_height


def smooth_periodic(n, m, seed):
    """A sum of a few low-frequency sinusoids with random phases: smooth and tiling (analytic test surface)."""
    rng = np.random.default_rng(seed)
    r, c = np.mgrid[0:n, 0:m].astype(np.float64)
    h = np.zeros((n, m))
    for _ in range(6):
        kx, ky = rng.integers(0, 4, size=2)
        ph = rng.random() * 2 * math.pi
        h += rng.random() * np.cos(2 * math.pi * (kx * c / m + ky * r / n) + ph)
    return (0.2 * h / np.abs(h).max()).astype(np.float32)


def corr(a, b):
    return float(np.corrcoef(np.ravel(a), np.ravel(b))[0, 1])


@pytest.mark.parametrize("kernel", ["central", "sobel", "scharr", "prewitt"])
def test_round_trip_tiling(kernel):
    # Round trip: height -> normal -> height recovers a smooth tiling height field with correlation >= 0.999
    # (Frankot & Chellappa 1988, eq. 21, with the kernel's own frequency response in place of j w; with the
    # matching operator the sheet computed recovery to ~1e-15 in float64, section 2; float32 here).
    h = smooth_periodic(64, 96, seed=1)
    n = normal_from_height(h, strength=6.0, kernel=kernel)
    back = height_from_normal(n, strength=6.0, kernel=kernel)
    assert corr(back, h) >= 0.999
    assert np.abs(back - (h - h.mean())).max() < 1e-4
    # and normal(height(N)) ~= N
    again = normal_from_height(back, strength=6.0, kernel=kernel)
    assert np.abs(again - n).max() < 1e-4


def test_plain_frankot_chellappa_operator_mismatch_is_small():
    # With a kernel other than the one the map was made with, the projection is still close (the sheet's
    # continuous-operator case: ~4e-2 relative error at N = 64; section 2). Correlation stays >= 0.999.
    h = smooth_periodic(64, 64, seed=2)
    n = normal_from_height(h, strength=4.0, kernel="central")
    back = height_from_normal(n, strength=4.0, kernel="scharr")
    assert corr(back, h) >= 0.999


def test_non_tiling_exact_on_forward_differences():
    # Simchony, Chellappa & Shao 1990: the Neumann Poisson problem is diagonalised by the DCT, so slopes whose
    # neighbour averages are the forward differences of z give z back exactly (docs/references.md, section 2:
    # ~5e-13 in float64). Through the public height_from_normal, with normals (-p, q, 1) normalised (Blinn
    # 1978; +Y up while rows run down, so the y slope changes sign): measured 8e-7, the float32 result's
    # rounding on values of order 1.
    rng = np.random.default_rng(7)
    z = rng.random((40, 57))
    ex = np.diff(z, axis=1)
    er = np.diff(z, axis=0)
    p = np.zeros_like(z)
    q = np.zeros_like(z)
    for c in range(1, z.shape[1]):
        p[:, c] = 2 * ex[:, c - 1] - p[:, c - 1]
    for r in range(1, z.shape[0]):
        q[r] = 2 * er[r - 1] - q[r - 1]
    n = np.stack([-p, q, np.ones_like(p)], axis=-1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    back = height_from_normal(n.astype(np.float32), strength=1.0, edges="clamp").astype(np.float64)
    assert np.abs((back - back.mean()) - (z - z.mean())).max() < 2e-6


def test_round_trip_non_tiling():
    # A smooth non-periodic surface (a tilted Gaussian bump, range 0.39) with clamp edges, by value: the bake's
    # central differences against the solver's forward-difference model leave 1.7e-3 at most (measured; 0.45%
    # of the range, largest at the border) and 3.4e-4 r.m.s. A result off in scale by 1.5 is off by 0.12.
    r, c = np.mgrid[0:50, 0:70].astype(np.float64)
    h = (0.3 * np.exp(-((c - 30) ** 2 + (r - 20) ** 2) / 200) + 0.002 * c - 0.001 * r).astype(np.float32)
    n = normal_from_height(h, strength=5.0, edges="clamp")
    back = height_from_normal(n, strength=5.0, edges="clamp")
    d = (back - back.mean()) - (h - h.mean())
    assert np.abs(d).max() < 2.5e-3
    assert np.sqrt(np.mean(d.astype(np.float64) ** 2)) < 5e-4


def test_non_unit_input_warns_and_renormalizes():
    h = smooth_periodic(32, 32, seed=3)
    n = normal_from_height(h, strength=3.0)
    with pytest.warns(BakeryWarning, match=r"not unit length: lengths 0\.5"):
        back = height_from_normal(n * 0.5, strength=3.0)
    assert corr(back, h) >= 0.999


def test_fit_height_records_offset_and_scale():
    # bakery's own placement rule (docs/normals.md): lowest point at 0, squeeze only beyond the full range.
    z = np.array([[-0.3, 0.1], [0.2, 0.0]], np.float32)
    h, offset, scale = fit_height(z)
    assert (offset, scale) == pytest.approx((0.3, 1.0))
    assert h.min() == 0.0
    h, offset, scale = fit_height(z * 10)
    assert scale == pytest.approx(1 / 5.0) and h.max() == pytest.approx(1.0)
    h, offset, scale = fit_height(z * 10, unit_range=False)
    assert scale == 1.0 and h.max() == pytest.approx(5.0)


def test_checked_normals_skip_the_unit_check():
    """``checked=True``: taken as unit already (no warning, no second pass); the same heights on unit maps."""
    import warnings

    h = smooth_periodic(32, 32, seed=4)
    n = normal_from_height(h, strength=3.0)
    assert np.abs(height_from_normal(n, strength=3.0, checked=True) - height_from_normal(n, strength=3.0)).max() < 1e-6
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        height_from_normal(n * 0.5, strength=3.0, checked=True)
