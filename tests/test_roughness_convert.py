"""Exponent <-> roughness conversions checked against the published formulas and numerical lobe measures.

The lobes are written out here from their published definitions (not imported from bakery), and half-maximum
angles are found by root finding (scipy.optimize.brentq), independently of the closed forms in the code.
"""

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from bakery import BakeryError, BakeryWarning
from bakery.roughness.convert import QUANTITIES, convert_specular, exponent_from_roughness, roughness_from_exponent

EXPONENTS = np.array([1.0, 10.0, 100.0, 1000.0, 10000.0])


# Normal distributions as published (all normalised so that the integral of D cos(theta_h) is 1):
def d_blinn_phong(c, n):  # Walter et al. 2007, eq. 30: (n + 2)/(2 pi) cos^n
    return (n + 2) / (2 * math.pi) * c**n


def d_ggx(c, a):  # Walter et al. 2007, eq. 33 (Trowbridge & Reitz 1975)
    return a * a / (math.pi * (c * c * (a * a - 1) + 1) ** 2)


def d_beckmann(c, a):  # Walter et al. 2007, eq. 25 (equation numbers from memory)
    t2 = (1 - c * c) / (c * c)
    return math.exp(-t2 / (a * a)) / (math.pi * a * a * c**4)


def half_max_angle(d, param):
    """The angle beyond which D stays below half its value at theta = 0 (brentq on a fine bracket)."""
    peak = d(1.0, param)
    grid = np.linspace(1e-7, math.pi / 2 - 1e-7, 20001)
    vals = np.array([d(math.cos(t), param) for t in grid]) - peak / 2
    last = np.nonzero(vals > 0)[0][-1]  # the outermost crossing
    return brentq(lambda t: d(math.cos(t), param) - peak / 2, grid[last], grid[last + 1], xtol=1e-14)


# ------------------------------------------------------------------------------------------ published values


def test_peak_rule_matches_walter_formula():
    # Walter et al. 2007 (EGSR), Beckmann-Phong correspondence alpha = sqrt(2 / (n + 2)); perceptual r =
    # sqrt(alpha) (Burley 2012).
    alpha = np.sqrt(2.0 / (EXPONENTS + 2.0))
    np.testing.assert_allclose(roughness_from_exponent(EXPONENTS, target="alpha"), alpha, rtol=1e-12)
    np.testing.assert_allclose(roughness_from_exponent(EXPONENTS, target="beckmann"), alpha, rtol=1e-12)
    np.testing.assert_allclose(roughness_from_exponent(EXPONENTS), np.sqrt(alpha), rtol=1e-12)
    np.testing.assert_allclose(roughness_from_exponent(EXPONENTS, source="exponent", target="roughness"),
                               np.sqrt(alpha), rtol=1e-12)


@pytest.mark.parametrize(("n", "a", "r"), [
    # docs/references.md, section 5 (computed from Walter et al. 2007 and Burley 2012), 6 decimals
    (1, 0.816497, 0.903602), (8, 0.447214, 0.668740), (32, 0.242536, 0.492479), (128, 0.124035, 0.352186),
    (512, 0.062378, 0.249756), (2048, 0.031235, 0.176734), (8192, 0.015623, 0.124992)])
def test_reference_table(n, a, r):
    assert float(roughness_from_exponent(np.float64(n), target="alpha")) == pytest.approx(a, abs=6e-7)
    assert float(roughness_from_exponent(np.float64(n))) == pytest.approx(r, abs=6e-7)
    assert float(roughness_from_exponent(np.float32(n))) == pytest.approx(r, abs=2e-6)


def test_limits_mirror_and_flat():
    # n -> inf is a perfect mirror (alpha = 0); n = 0 a uniform lobe, alpha = 1 (Walter et al. 2007 formula).
    out = roughness_from_exponent(np.array([np.inf, 0.0], np.float32), target="alpha")
    np.testing.assert_array_equal(out, [0.0, 1.0])
    back = exponent_from_roughness(np.array([0.0, 1.0]), source="alpha")
    np.testing.assert_array_equal(back, [np.inf, 0.0])


@pytest.mark.parametrize("rule", ["peak", "width"])
@pytest.mark.parametrize("target", ["roughness", "alpha", "beckmann"])
def test_monotonic(rule, target):
    n = np.geomspace(0.01, 1e6, 2000)
    r = roughness_from_exponent(n, target=target, rule=rule)
    assert np.all(np.diff(r) <= 0)
    # strictly, while the width rule's GGX lobe still falls to half (it saturates at alpha^2 = 1/sqrt2 as n -> 0)
    assert np.all(np.diff(r[n > 0.3]) < 0)


@pytest.mark.parametrize("model", ["blinn-phong", "phong"])
@pytest.mark.parametrize("rule", ["peak", "width"])
@pytest.mark.parametrize("target", ["roughness", "alpha", "beckmann", "smoothness"])
def test_round_trip(model, rule, target):
    n = np.geomspace(0.05, 1e5, 400)
    if rule == "width" and target != "beckmann":
        n = n[n > 0.2]  # GGX's width rule is defined only while the lobe falls to half (see the module notes)
    r = convert_specular(n, source="exponent", target=target, model=model, rule=rule)
    back = convert_specular(r, source=target, target="exponent", model=model, rule=rule)
    np.testing.assert_allclose(back, n, rtol=1e-6)  # inverse round trip to 1e-6 (common practice)


def test_round_trip_float32():
    n = np.geomspace(1.0, 1e4, 200).astype(np.float32)
    back = exponent_from_roughness(roughness_from_exponent(n))
    assert back.dtype == np.float32
    np.testing.assert_allclose(back, n, rtol=2e-6)  # float32 carries ~7 digits; n = 2/r^4 - 2 amplifies 4x


# ------------------------------------------------------------------------------------------ what each rule keeps


@pytest.mark.parametrize("n", [1.0, 10.0, 100.0, 1000.0, 10000.0])
def test_peak_rule_equal_peak_heights(n):
    # Peak rule: D_BP(1) = (n + 2)/(2 pi) equals D(1) = 1/(pi alpha^2) of GGX and Beckmann (Walter et al. 2007).
    for lobe, d in (("alpha", d_ggx), ("beckmann", d_beckmann)):
        a = float(roughness_from_exponent(np.float64(n), target=lobe))
        assert d(1.0, a) == pytest.approx(d_blinn_phong(1.0, n), rel=1e-12)


@pytest.mark.parametrize("n", [1.0, 10.0, 100.0, 1000.0, 10000.0])
def test_width_rule_equal_half_maximum_angles(n):
    # Width rule: half-maximum angles agree within 1%, measured by root finding on the lobes.
    theta_bp = half_max_angle(d_blinn_phong, n)
    assert theta_bp == pytest.approx(math.acos(2 ** (-1 / n)), rel=1e-9)  # cos^n = 1/2 (analytic)
    for lobe, d in (("alpha", d_ggx), ("beckmann", d_beckmann)):
        a = float(roughness_from_exponent(np.float64(n), target=lobe, rule="width"))
        assert half_max_angle(d, a) == pytest.approx(theta_bp, rel=0.01)
        assert half_max_angle(d, a) == pytest.approx(theta_bp, rel=1e-6)  # the closed form is exact


@pytest.mark.parametrize("n", [10.0, 100.0, 1000.0, 10000.0])
def test_peak_rule_width_ratios(n):
    # docs/references.md, section 5 (computed): at the peak rule GGX's half-maximum angle is 0.773x Blinn-Phong's for
    # n = 10...1e4, Beckmann's 1.00x. Limit for large n from the small-angle forms: sqrt((sqrt2 - 1)/ln 2).
    a = float(roughness_from_exponent(np.float64(n), target="alpha"))
    theta_bp = half_max_angle(d_blinn_phong, n)
    ggx = half_max_angle(d_ggx, a) / theta_bp
    beck = half_max_angle(d_beckmann, a) / theta_bp
    # measured here (brentq): GGX 0.7933 / 0.7750 / 0.7732 / 0.7731 and Beckmann 1.054 / 1.006 / 1.0007 / 1.0001
    # at n = 10 / 100 / 1000 / 1e4; width-rule alpha / peak-rule alpha 1.195 / 1.281 / 1.292 / 1.293
    assert ggx == pytest.approx(0.773, abs=0.025)
    assert beck == pytest.approx(1.00, abs=0.06)
    wide = float(roughness_from_exponent(np.float64(n), target="alpha", rule="width"))
    # docs/references.md, section 5 (computed): about 1.29x the peak rule's alpha
    assert wide / a == pytest.approx(1.29, abs=0.1)
    if n >= 1000:
        assert ggx == pytest.approx(math.sqrt((math.sqrt(2) - 1) / math.log(2)), rel=2e-3)


def test_phong_exponent_counts_four_times_less():
    # Phong about R vs Blinn-Phong about H: at normal incidence angle(R, L) = 2 angle(N, H), and
    # cos^n x ~ exp(-n x^2 / 2) gives n_BP = 4 n_P (common practice; see the module notes).
    n = np.array([1.0, 10.0, 300.0])
    np.testing.assert_allclose(roughness_from_exponent(n, model="phong"), roughness_from_exponent(4 * n))
    # the half-maximum angles of the two lobes at normal incidence then agree within 1% for n_P >= 10
    for n_p in (10.0, 100.0, 1000.0):
        theta_phong = math.acos(2 ** (-1 / n_p)) / 2  # cos^n_P(2 theta_h) = 1/2
        theta_bp = math.acos(2 ** (-1 / (4 * n_p)))  # cos^(4 n_P)(theta_h) = 1/2
        assert theta_bp == pytest.approx(theta_phong, rel=1e-2)


# ------------------------------------------------------------------------------------------ encodings


def test_gloss_exp_values():
    # Geometric gloss n = lo (hi/lo)^g, by definition: g = 0.5 is the geometric mean sqrt(lo hi); the range
    # (1, 8192) gives 2^6.5 = 90.510, (2, 2048) gives 64, and the ends give lo and hi.
    g = np.array([0.0, 0.5, 1.0])
    n = convert_specular(g, source="gloss-exp", target="exponent", exponent_range=(1, 8192))
    np.testing.assert_allclose(n, [1.0, 90.50967, 8192.0], rtol=1e-6)
    n2 = convert_specular(g, source="gloss-exp", target="exponent", exponent_range=(2, 2048))
    np.testing.assert_allclose(n2, [2.0, 64.0, 2048.0], rtol=1e-6)
    r = roughness_from_exponent(g[1:2], source="gloss-exp", exponent_range=(1, 8192))
    assert float(r[0]) == pytest.approx((2 / (2**6.5 + 2)) ** 0.25, rel=1e-6)
    back = convert_specular(n2, source="exponent", target="gloss-exp", exponent_range=(2, 2048))
    np.testing.assert_allclose(back, g, atol=1e-6)


def test_gloss_linear_and_smoothness():
    g = np.array([0.0, 0.25, 1.0])
    n = convert_specular(g, source="gloss-linear", target="exponent", exponent_range=(2, 1026))
    np.testing.assert_allclose(n, [2, 258, 1026])  # n = lo + g (hi - lo), by definition
    s = np.array([0.0, 0.3, 1.0])
    np.testing.assert_allclose(roughness_from_exponent(s, source="smoothness"), 1 - s)  # r = 1 - s
    np.testing.assert_allclose(roughness_from_exponent(s, source="smoothness", target="alpha"), (1 - s) ** 2)
    back = exponent_from_roughness(np.array([0.5]), target="gloss-linear", exponent_range=(2, 1026))
    assert float(back[0]) == pytest.approx((2 / 0.5**4 - 2 - 2) / 1024)


def test_missing_encoding_constants():
    with pytest.raises(BakeryError, match="--exponent-range"):
        roughness_from_exponent(np.array([0.5]), source="gloss-linear")
    with pytest.raises(BakeryError, match="0 < lo < hi"):
        roughness_from_exponent(np.array([0.5]), source="gloss-exp", exponent_range=(0, 10))
    with pytest.raises(BakeryError, match="0 <= lo < hi"):
        roughness_from_exponent(np.array([0.5]), source="gloss-linear", exponent_range=(10, 1))
    with pytest.raises(BakeryError, match="must be one of"):
        roughness_from_exponent(np.array([0.5]), rule="middle")


# ------------------------------------------------------------------------------------------ bad values, dtypes


def test_negative_and_nan_exponents_are_counted():
    x = np.array([[4.0, -1.0, np.nan], [-3.0, 10.0, 2.0]], np.float32)
    with pytest.raises(BakeryError, match=r"2 negative, 1 NaN.*--clamp"):
        roughness_from_exponent(x)
    with pytest.warns(BakeryWarning, match="2 negative, 1 NaN"):
        r = roughness_from_exponent(x, clamp=True)
    expect = roughness_from_exponent(np.array([[4.0, 0.0, 0.0], [0.0, 10.0, 2.0]], np.float32))
    np.testing.assert_array_equal(r, expect)  # negatives clip to 0, NaN becomes the roughest value (n = 0)


def test_out_of_range_roughness():
    with pytest.raises(BakeryError, match="1 above 1"):
        exponent_from_roughness(np.array([0.5, 1.5]))


def test_dtypes_and_shapes():
    x = np.full((3, 4, 5), 32.0, np.float32)
    out = roughness_from_exponent(x)
    assert out.dtype == np.float32 and out.shape == x.shape
    assert np.all(out == out.flat[0])
    assert roughness_from_exponent(x.astype(np.float64)).dtype == np.float64
    assert roughness_from_exponent(np.uint8(32)).dtype == np.float32
    assert roughness_from_exponent(np.zeros((0, 3), np.float32)).shape == (0, 3)
    assert float(roughness_from_exponent(32.0)) == pytest.approx(0.492479, abs=1e-6)


def test_quantities_table_is_consistent():
    for name, q in QUANTITIES.items():
        assert q.name == name and q.side in ("exponent", "microfacet")
        assert q.low <= q.roughest <= q.high


def test_beckmann_width_inverse_edges():
    # m = 0 is a mirror (n = inf); the Newton solve of s/m^2 = ln2 + 2 ln(1 + s) reproduces the forward map.
    m = np.array([0.0, 0.01, 0.3, 0.9, 2.0])
    n = exponent_from_roughness(m, source="beckmann", rule="width")
    assert n[0] == np.inf
    np.testing.assert_allclose(roughness_from_exponent(n[1:], target="beckmann", rule="width"), m[1:], rtol=1e-9)


def test_smoothness_to_beckmann_goes_through_the_exponent():
    # smoothness -> GGX alpha = (1 - s)^2 (Burley 2012) -> Blinn-Phong n (rule) -> Beckmann m (rule)
    s = np.array([0.2, 0.6])
    a = (1 - s) ** 2
    n = 2 / a**2 - 2  # Walter et al. 2007, peak rule
    np.testing.assert_allclose(convert_specular(s, source="smoothness", target="beckmann"), a, rtol=1e-12)
    got = convert_specular(s, source="smoothness", target="beckmann", rule="width")
    np.testing.assert_allclose(got, roughness_from_exponent(
        exponent_from_roughness(a, source="alpha", rule="width"), target="beckmann", rule="width"), rtol=1e-12)
    assert np.all(np.isfinite(n))


@pytest.mark.parametrize("source", list(QUANTITIES))
@pytest.mark.parametrize("target", list(QUANTITIES))
def test_inputs_are_never_modified(source, target):
    x = np.array([0.0, 0.25, 0.5, 1.0], np.float32)
    keep = x.copy()
    convert_specular(x, source=source, target=target, rule="width", model="phong", exponent_range=(1, 100))
    np.testing.assert_array_equal(x, keep)
