"""sRGB transfer functions against IEC 61966-2-1:1999 (section 5.2) and its worked values
(references.md section 13, computed from the standard's formulas)."""

import numpy as np

from bakery.color import linear_to_srgb, srgb_to_linear


def test_worked_values():
    assert abs(float(linear_to_srgb(np.float32(0.5))) - 0.7353570) < 1e-6
    assert abs(float(srgb_to_linear(np.float32(0.5))) - 0.214041140) < 1e-7
    assert abs(float(srgb_to_linear(np.float32(128 / 255))) - 0.215860500) < 1e-7


def test_against_the_standard_formula_in_float64():
    c = np.linspace(0, 1, 10001)
    ref = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    np.testing.assert_allclose(srgb_to_linear(c), ref, atol=2e-7)
    l = np.linspace(0, 1, 10001)
    ref = np.where(l <= 0.0031308, 12.92 * l, 1.055 * l ** (1 / 2.4) - 0.055)
    np.testing.assert_allclose(linear_to_srgb(l), ref, atol=3e-7)


def test_inverse_and_monotonic():
    c = np.linspace(0, 1, 4097, dtype=np.float32)
    np.testing.assert_allclose(linear_to_srgb(srgb_to_linear(c)), c, atol=2e-6)
    assert np.all(np.diff(srgb_to_linear(c)) > 0)
    assert srgb_to_linear(c).dtype == np.float32
