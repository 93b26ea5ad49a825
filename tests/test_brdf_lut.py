"""The split-sum BRDF table against an independent scipy quadrature and the published check values.

Sources: Karis 2013 (split sum; SIGGRAPH course notes, "Physically Based Shading in Theory and Practice");
Heitz 2014 (JCGT 3(2), eq. 99, height-correlated Smith G2);
Schlick 1994 (eq. 15); GGX D from Walter et al. 2007 (eq. 33).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from bakery.envmap.brdf_lut import brdf_lut, split_sum_terms


def _scipy_terms(nov: float, r: float) -> tuple[float, float]:
    """A and B by adaptive scipy quadrature over the light direction l (not over half vectors), with the
    BRDF written out here from the papers: f·(n·l) = D G2 F / (4 n·v)."""
    a = r * r
    sv = math.sqrt(1 - nov * nov)

    def lam(c):  # Heitz 2014 eq. 86
        t2 = (1 - c * c) / (c * c)
        return (math.sqrt(1 + a * a * t2) - 1) / 2

    def f(phi, th, which):
        l = (math.sin(th) * math.cos(phi), math.sin(th) * math.sin(phi), math.cos(th))
        h = (l[0] + sv, l[1], l[2] + nov)
        hn = math.sqrt(h[0] ** 2 + h[1] ** 2 + h[2] ** 2)
        noh = h[2] / hn
        voh = (h[0] * sv + h[2] * nov) / hn
        d = a * a / (math.pi * ((noh * noh) * (a * a - 1) + 1) ** 2)  # Walter et al. 2007 eq. 33
        g2 = 1 / (1 + lam(nov) + lam(l[2]))  # Heitz 2014 eq. 99
        fc = (1 - voh) ** 5  # Schlick 1994
        wgt = (1 - fc) if which == 0 else fc
        return d * g2 * wgt / (4 * nov) * math.sin(th)

    th_peak = math.acos(nov)
    out = []
    for which in (0, 1):
        val, _ = integrate.nquad(f, [[0, math.pi], [1e-9, math.pi / 2 - 1e-12]], args=(which,),
                                 opts=[{"points": [math.pi], "limit": 200, "epsabs": 1e-9},
                                       {"points": [th_peak], "limit": 200, "epsabs": 1e-9}])
        out.append(2 * val)
    return out[0], out[1]


@pytest.mark.parametrize(("nov", "r"), [(0.5, 0.5), (0.25, 0.75), (0.8, 0.6), (0.3, 1.0), (0.1, 0.3)])
def test_against_scipy_quadrature(nov, r):
    ref = _scipy_terms(nov, r)
    got = split_sum_terms(nov, r)
    assert got == pytest.approx(ref, abs=1e-5)


@pytest.mark.parametrize(("nov", "r", "A", "B"), [
    # docs/references.md, section 7 (computed by exact quadrature; height-correlated Smith)
    (1.0, 0.0, 1.0, 0.0),
    (0.5, 0.0, 0.96875, 0.03125),
    (1.0, 0.5, 0.915785, 0.0000274),
    (0.5, 0.5, 0.834916, 0.022347),
    (0.25, 0.75, 0.716508, 0.027948),
    (0.1, 0.3, 0.562961, 0.32136),
    (0.5, 1.0, 0.44771, 0.00299),
])
def test_published_check_values(nov, r, A, B):
    a, b = split_sum_terms(nov, r)
    # tolerance: half a unit in the last published digit (5 or 6 digits), plus 1e-6
    assert a == pytest.approx(A, abs=6e-6)
    assert b == pytest.approx(B, abs=6e-6)


def test_limits():
    nov = np.linspace(0.02, 1, 25)
    # roughness -> 0: a mirror, A = 1 − Fc(n·v), B = Fc(n·v) with Fc = (1 − n·v)⁵ (Schlick 1994)
    ab = split_sum_terms(nov, 0.0)
    fc = (1 - nov) ** 5
    assert np.allclose(ab[:, 0], 1 - fc, atol=1e-12) and np.allclose(ab[:, 1], fc, atol=1e-12)
    # continuity toward r -> 0 (tiny roughness stays near the mirror value away from grazing)
    ab_small = split_sum_terms(nov[5:], 0.02)
    assert np.allclose(ab_small, ab[5:], atol=2e-3)
    # n·v -> 1: B vanishes as roughness -> 0 (v·h -> 1) and A + B <= 1 everywhere (energy)
    assert split_sum_terms(1.0, 0.05)[1] < 1e-8
    lut = brdf_lut(16)
    assert np.all(lut.sum(-1) <= 1 + 1e-6) and np.all(lut >= 0)


def test_table_layout_and_orientation():
    lut = brdf_lut(8, height=4)
    assert lut.shape == (4, 8, 2) and lut.dtype == np.float32
    # column j holds n·v = (j + 0.5)/8, row i holds r = (i + 0.5)/4, roughness growing down the rows
    assert lut[1, 3] == pytest.approx(split_sum_terms(3.5 / 8, 1.5 / 4), abs=1e-7)
    up = brdf_lut(8, height=4, roughness_grows="up")
    assert np.array_equal(up, lut[::-1])
    with pytest.raises(ValueError, match="roughness_grows"):
        brdf_lut(8, roughness_grows="left")
    with pytest.raises(ValueError, match="roughness"):
        split_sum_terms(0.5, 1.5)
    with pytest.raises(ValueError, match="n·v"):
        split_sum_terms(0.0, 0.5)


def test_karis_hammersley_estimate_lands_close():
    # docs/references.md, section 7: 1024 Hammersley samples (Karis 2013 listing) land within 1.4e-3 of exact; the
    # sheet does not say which Hammersley variant it used, so allow 2e-3 for this one (i/N, radical inverse)
    from bakery import microfacet as mf

    nov, r = 0.5, 0.5
    a = r * r
    u = mf.hammersley(1024)
    h = mf.sample_ggx_half(u[:, 0], u[:, 1], a)
    v = np.array([math.sqrt(1 - nov * nov), 0, nov])
    voh = h @ v
    l = 2 * voh[:, None] * h - v
    ok = l[:, 2] > 0
    g = np.where(ok, mf.g2_smith_correlated(nov, np.maximum(l[:, 2], 1e-9), a) * voh / (h[:, 2] * nov), 0)
    fc = (1 - voh) ** 5
    est = np.array([np.mean(g * (1 - fc)), np.mean(g * fc)])
    assert est == pytest.approx(split_sum_terms(nov, r), abs=2e-3)
