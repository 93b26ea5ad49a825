"""The spherical-harmonic machinery of the zonal convolution against scipy and closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special

from bakery import sphere
from bakery.envmap.zonal import funk_hecke_coefficients, legendre_p_normalized, zonal_convolve_equirect


def test_legendre_matches_scipy_spherical_harmonics():
    # |Y_lm(θ, 0)| = |P̄_lm(cos θ)| (scipy.special.sph_harm_y, orthonormal spherical harmonics)
    theta = np.linspace(0.05, 3.0, 17)
    for m in (0, 1, 5, 30):
        p = legendre_p_normalized(60, m, np.cos(theta))
        for i, l in enumerate(range(m, 61)):
            y = special.sph_harm_y(l, m, theta, 0.0)
            assert np.allclose(np.abs(p[i]), np.abs(y), rtol=1e-9, atol=1e-12), (l, m)


def test_funk_hecke_clamped_cosine():
    # Ramamoorthi & Hanrahan 2001: for max(cos θ, 0), Â_0 = π, Â_1 = 2π/3, Â_2 = π/4, Â_3 = 0, Â_4 = −π/24;
    # normalised by Â_0: 1, 2/3, 1/4, 0, −1/24
    g = funk_hecke_coefficients(lambda mu: np.maximum(mu, 0), 4, upper_only=True)
    assert g == pytest.approx([1, 2 / 3, 1 / 4, 0, -1 / 24], abs=1e-12)
    g_full = funk_hecke_coefficients(lambda mu: np.maximum(mu, 0), 4)
    assert g_full == pytest.approx([1, 2 / 3, 1 / 4, 0, -1 / 24], abs=1e-6)


def test_zonal_convolution_of_a_harmonic():
    # an eigenfunction: L = z-component of the direction (degree 1) times 3 plus a constant; convolving with
    # kernel g scales the degree-1 part by g_1 exactly (Funk–Hecke)
    h = 64
    d = sphere.equirect_directions(2 * h, h, dtype=np.float64)
    axis = np.array([0.3, 0.5, -0.81])
    axis /= np.linalg.norm(axis)
    env = (2.0 + 3.0 * (d @ axis))[..., None]
    g = np.array([1.0, 0.4, 0.2])
    out = zonal_convolve_equirect(env, [g], widths=[2 * h], normalize_discrete=False)[0]
    want = 2.0 + 0.4 * 3.0 * (d @ axis)
    # the texel-centre quadrature on 64 rings integrates these products to about 3e-4 (measured)
    assert np.abs(out[..., 0] - want).max() < 5e-4


def test_bad_band_limit():
    with pytest.raises(ValueError, match="needs a panorama"):
        zonal_convolve_equirect(np.ones((8, 16, 1)), [np.ones(9)])
    with pytest.raises(ValueError, match="even"):
        zonal_convolve_equirect(np.ones((7, 14, 1)), [np.ones(2)])
    with pytest.raises(ValueError, match="positive"):
        funk_hecke_coefficients(lambda mu: np.zeros_like(mu), 4)
    assert math.isfinite(float(funk_hecke_coefficients(lambda mu: np.ones_like(mu), 3)[0]))


def test_synthesis_on_finer_rings():
    # the same eigenfunction case (Funk–Hecke: degree 1 scaled by g_1), synthesised on 3x the input's rings:
    # ring j of R at colatitude (j + 0.5)π/R; kernels left on the input's rings are unchanged
    h = 32
    d = sphere.equirect_directions(2 * h, h, dtype=np.float64)
    axis = np.array([0.3, 0.5, -0.81])
    axis /= np.linalg.norm(axis)
    env = (2.0 + 3.0 * (d @ axis))[..., None]
    g = np.array([1.0, 0.4, 0.2])
    coarse, fine = zonal_convolve_equirect(env, [g, g], widths=[2 * h, 6 * h], normalize_discrete=False,
                                           rings=[h, 3 * h])
    assert coarse.shape == (h, 2 * h, 1) and fine.shape == (3 * h, 6 * h, 1)
    df = sphere.equirect_directions(6 * h, 3 * h, dtype=np.float64)
    want = 2.0 + 0.4 * 3.0 * (df @ axis)
    # the analysis quadrature on 32 rings: about 1e-3 (measured 3e-4 on 64 rings in the test above)
    assert np.abs(fine[..., 0] - want).max() < 2e-3
    plain = zonal_convolve_equirect(env, [g], widths=[2 * h], normalize_discrete=False)[0]
    np.testing.assert_allclose(coarse, plain, rtol=0, atol=1e-12)
    with pytest.raises(ValueError, match="rings"):
        zonal_convolve_equirect(env, [g, g], rings=[2 * h, 3 * h])
