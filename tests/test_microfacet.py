"""Checks of the shared microfacet terms against published formulas and independent quadrature.

Values marked "computed" come from independent scipy quadrature in this file or from the check-value
sheet (the project's references, section 4), which evaluated them by quadrature too.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from bakery import microfacet as mf


def _hemisphere_integral(f, *, points=None):
    """2π ∫_0^{π/2} f(cos θ) sin θ dθ for an isotropic integrand (scipy.integrate.quad)."""
    val, _ = integrate.quad(lambda t: f(math.cos(t)) * math.sin(t), 0, math.pi / 2, limit=500,
                            epsabs=1e-13, epsrel=1e-12, points=points)
    return 2 * math.pi * val


# Walter et al. 2007, eq. 4: a distribution of microfacet normals satisfies ∫ D(h)(n·h) dω_h = 1.
@pytest.mark.parametrize("alpha", [0.05, 0.1, 0.25, 0.5, 0.75, 1.0])
def test_ggx_is_normalised(alpha):
    val = _hemisphere_integral(lambda c: float(mf.d_ggx(c, alpha)) * c, points=[alpha])
    assert val == pytest.approx(1.0, abs=1e-10)


@pytest.mark.parametrize("alpha", [0.05, 0.2, 0.5, 1.0])
def test_beckmann_is_normalised(alpha):
    val = _hemisphere_integral(lambda c: float(mf.d_beckmann(c, alpha)) * c, points=[alpha])
    assert val == pytest.approx(1.0, abs=1e-10)


@pytest.mark.parametrize("n", [1, 8, 32, 128, 1000])
def test_blinn_phong_is_normalised(n):
    pts = [min(1.0, 3 / math.sqrt(n))]
    val = _hemisphere_integral(lambda c: float(mf.d_blinn_phong(c, n)) * c, points=pts)
    assert val == pytest.approx(1.0, abs=1e-10)


def test_published_values():
    # check values of docs/references.md, section 4 (computed from Walter et al. 2007 eqs. 25, 30, 33)
    assert mf.d_ggx(1.0, 0.5) == pytest.approx(1.273240, abs=1e-6)
    assert mf.d_ggx(math.cos(math.pi / 4), 0.5) == pytest.approx(0.203718, abs=1e-6)
    assert mf.d_beckmann(math.cos(math.radians(30)), 0.5) == pytest.approx(0.596662, abs=1e-6)
    assert mf.d_blinn_phong(1.0, 32) == pytest.approx(5.411268, abs=1e-6)
    assert mf.d_blinn_phong(math.cos(math.radians(10)), 32) == pytest.approx(3.315475, abs=1e-6)
    # height-correlated Smith (Heitz 2014, eq. 99): a = 0.5, NoV 0.5, NoL 0.8 -> 0.836513 (computed)
    assert mf.g2_smith_correlated(0.5, 0.8, 0.5) == pytest.approx(0.836513, abs=1e-6)
    # Schlick 1994 eq. 15 by hand: F0 0.04, cos 0.5 -> 0.04 + 0.96 / 32
    assert mf.fresnel_schlick(0.5, 0.04) == pytest.approx(0.04 + 0.96 / 32, abs=1e-12)
    assert mf.fresnel_schlick(1.0, 0.04) == pytest.approx(0.04)
    assert mf.fresnel_schlick(0.0, 0.04) == pytest.approx(1.0)


def test_ggx_peak_and_closed_form():
    # the peak is 1/(π α²) (Walter et al. 2007, eq. 33 at θ = 0), and the textbook form
    # α²/(π((n·h)²(α²−1)+1)²)
    a = np.array([0.01, 0.1, 0.5, 1.0])
    assert np.allclose(mf.d_ggx(1.0, a), 1 / (np.pi * a * a), rtol=1e-12)
    c = np.linspace(0.05, 1, 40)[:, None]
    textbook = a**2 / (np.pi * (c * c * (a * a - 1) + 1) ** 2)
    assert np.allclose(mf.d_ggx(c, a), textbook, rtol=1e-9)
    assert mf.d_ggx(-0.3, 0.5) == 0 and mf.d_beckmann(0.0, 0.5) == 0 and mf.d_blinn_phong(-0.1, 8) == 0


def _azimuthal_clamped_cos(tv, t):
    """∫_0^{2π} max(0, v·h) dφ for v at polar angle tv and h at polar angle t (closed form, by hand)."""
    a, b = math.sin(tv) * math.sin(t), math.cos(tv) * math.cos(t)
    if b >= a:
        return 2 * math.pi * b
    if b <= -a:
        return 0.0
    p0 = math.acos(-b / a)
    return 2 * (b * p0 + a * math.sin(p0))


@pytest.mark.parametrize(("lobe", "alpha", "theta_deg", "expected"), [
    # Heitz 2014 eq. 2 (the projected area of visible normals equals cos θv); values from the references
    # sheet section 4 (computed): (a 0.5, 60°) -> 0.5, (1, 75°) -> 0.25881904
    ("ggx", 0.5, 60.0, 0.5),
    ("ggx", 1.0, 75.0, 0.25881904),
    ("beckmann", 0.5, 60.0, 0.5),
])
def test_smith_g1_visible_normal_normalisation(lobe, alpha, theta_deg, expected):
    tv = math.radians(theta_deg)
    g1 = float(mf.g1_smith(math.cos(tv), alpha, lobe=lobe))
    val, _ = integrate.quad(lambda t: _azimuthal_clamped_cos(tv, t) * float(mf.ndf(lobe, math.cos(t), alpha))
                            * math.sin(t), 0, math.pi / 2, points=[math.pi / 2 - tv, alpha], limit=400,
                            epsabs=1e-12, epsrel=1e-11)
    assert g1 * val == pytest.approx(expected, abs=1e-7)
    assert expected == pytest.approx(math.cos(tv), abs=1e-8)


def test_prefilter_weight_matches_half_vector_geometry():
    # v = n: h = normalize(n + l), n·h = cos(θ/2) (common practice); compare with explicit vectors
    rng = np.random.default_rng(1)
    l = rng.normal(size=(200, 3))
    l /= np.linalg.norm(l, axis=1, keepdims=True)
    n = np.array([0.0, 0.0, 1.0])
    h = l + n
    h /= np.linalg.norm(h, axis=1, keepdims=True)
    for lobe, p in (("ggx", 0.3), ("beckmann", 0.4), ("blinn-phong", 50.0)):
        expected = np.maximum(l[:, 2], 0) * mf.ndf(lobe, h[:, 2], p)
        assert np.allclose(mf.prefilter_weight(l[:, 2], p, lobe=lobe), expected, rtol=1e-10, atol=1e-14)


def test_prefilter_weight_normalisation():
    # with v = n the pdf of l under D(h)(n·h) sampling is D/4 (Karis 2013; Walter et al. 2007 eq. 14 Jacobian
    # 1/(4 v·h)), so ∫ D(h(l))/4 dl = 1 over the sphere
    for alpha in (0.1, 0.5, 1.0):
        val, _ = integrate.quad(lambda t, a=alpha: float(mf.d_ggx(math.cos(t / 2), a)) / 4 * math.sin(t),
                                0, math.pi, points=[2 * alpha], limit=300, epsabs=1e-12)
        assert 2 * math.pi * val == pytest.approx(1.0, abs=1e-8)


def test_cook_torrance_albedo_two_ways():
    # Walter et al. 2007 eq. 20 is symmetric in l and v
    assert mf.cook_torrance(0.3, 0.7, 0.9, 0.6, 0.4, 0.04) == pytest.approx(
        mf.cook_torrance(0.7, 0.3, 0.9, 0.6, 0.4, 0.04), rel=1e-12)
    # directional albedo with F = 1: Gauss-Legendre quadrature of f·(n·l) over l, against the importance-
    # sampling estimator E[G2 (v·h) / ((n·h)(n·v))] over GGX half vectors (Karis 2013, split-sum listing)
    a, tv = 0.5, math.radians(45)
    v = np.array([math.sin(tv), 0, math.cos(tv)])
    x, w = np.polynomial.legendre.leggauss(160)
    t = (x + 1) * math.pi / 4
    p = (x + 1) * math.pi
    tt, pp = np.meshgrid(t, p, indexing="ij")
    l = np.stack([np.sin(tt) * np.cos(pp), np.sin(tt) * np.sin(pp), np.cos(tt)], axis=-1)
    h = (l + v) / np.linalg.norm(l + v, axis=-1, keepdims=True)
    f = mf.cook_torrance(l[..., 2], v[2], h[..., 2], h @ v, a, 1.0)
    quad = float(np.einsum("i,j,ij->", w, w, f * l[..., 2] * np.sin(tt))) * (math.pi / 4) * math.pi
    u = mf.hammersley(1 << 16)
    hs = mf.sample_ggx_half(u[:, 0], u[:, 1], a)
    vh = hs @ v
    ls = 2 * vh[:, None] * hs - v
    est = np.where(ls[:, 2] > 0, mf.g2_smith_correlated(v[2], ls[:, 2], a) * vh / (hs[:, 2] * v[2]), 0).mean()
    assert quad == pytest.approx(est, abs=1e-3)
    assert 0 < quad < 1


def test_hammersley_and_ggx_sampling():
    # radical inverse i = 1..5 -> 0.5, 0.25, 0.75, 0.125, 0.625 (van der Corput; Karis 2013 listing)
    assert mf.radical_inverse(np.arange(1, 6)).tolist() == [0.5, 0.25, 0.75, 0.125, 0.625]
    assert mf.radical_inverse(0) == 0.0
    pts = mf.hammersley(8)
    assert pts.shape == (8, 2) and pts[3, 0] == 3 / 8 and pts[3, 1] == 0.75
    # GGX sample at ξ = 0.5: cos θh = 1/sqrt(1 + α²) (Walter et al. 2007 eq. 35; docs/references.md, section 7)
    for a in (0.1, 0.5, 1.0):
        assert mf.sample_ggx_half(0.5, 0.3, a)[2] == pytest.approx(1 / math.sqrt(1 + a * a), rel=1e-12)
    # samples follow D(h)(n·h): compare the sample mean of cos θh with quadrature
    u = mf.hammersley(4096)
    h = mf.sample_ggx_half(u[:, 0], u[:, 1], 0.4)
    mean_cos = _hemisphere_integral(lambda c: float(mf.d_ggx(c, 0.4)) * c * c)
    assert h[:, 2].mean() == pytest.approx(mean_cos, abs=2e-3)
    assert np.allclose(np.linalg.norm(h, axis=-1), 1)


def test_dtypes_and_broadcasting():
    c32 = np.linspace(0, 1, 5, dtype=np.float32)
    assert mf.d_ggx(c32, 0.5).dtype == np.float32
    assert mf.d_ggx(c32, np.float32(0.5)).dtype == np.float32
    assert mf.d_ggx(c32.astype(np.float64), 0.5).dtype == np.float64
    assert mf.g2_smith_correlated(c32, c32, 0.3).dtype == np.float32
    assert mf.prefilter_weight(c32, 0.3).dtype == np.float32
    assert mf.d_ggx(c32[:, None], np.array([0.1, 0.2], np.float32)).shape == (5, 2)
    assert np.isscalar(mf.d_ggx(0.5, 0.5))
    # small alpha in float32: no cancellation at the peak
    assert mf.d_ggx(np.float32(1.0), np.float32(1e-3)) == pytest.approx(1 / (math.pi * 1e-6), rel=1e-5)
    assert mf.alpha_from_perceptual(0.5) == 0.25 and mf.perceptual_from_alpha(0.25) == 0.5


def test_unknown_lobe():
    with pytest.raises(ValueError, match="lobe must be one of"):
        mf.ndf("phong", 0.5, 1.0)
    with pytest.raises(ValueError, match="Smith masking"):
        mf.g1_smith(0.5, 0.5, lobe="blinn-phong")


def test_prefilter_weight_inplace_matches():
    # the in-place evaluation is the same weight (common practice: algebraically identical forms)
    mu = np.linspace(-1, 1, 2001)
    for lobe, p in (("ggx", 0.02), ("ggx", 0.7), ("blinn-phong", 300.0), ("beckmann", 0.3)):
        want = mf.prefilter_weight(mu, p, lobe=lobe)
        assert np.allclose(mf.prefilter_weight_inplace(mu.copy(), p, lobe=lobe), want, rtol=1e-12, atol=0)
        got32 = mf.prefilter_weight_inplace(mu.astype(np.float32), p, lobe=lobe)
        assert got32.dtype == np.float32 and np.allclose(got32, want, rtol=2e-4, atol=1e-6 * want.max())
    with pytest.raises(TypeError):
        mf.prefilter_weight_inplace([0.5], 0.3)
