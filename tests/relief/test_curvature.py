"""Mean curvature of height fields against closed forms (do Carmo 1976, Differential Geometry of Curves and
Surfaces, section 3-3: H of a graph z = h(x, y); with that formula a dome has H < 0)."""

import numpy as np
import pytest

from bakery import BakeryError
from bakery.relief import curvature_maps, mean_curvature
from bakery.relief.curvature import gaussian_derivative_kernels


def dome(R=60.0, n=160):
    r, c = np.mgrid[0:n, 0:n] - (n / 2 - 0.5)
    return np.sqrt(np.clip(R * R - r * r - c * c, 0, None)).astype(np.float32), (r * r + c * c) < (0.7 * R) ** 2


@pytest.mark.parametrize(("scale", "tol"), [(0.0, 5e-4), (1.0, 2.5e-3), (2.0, 8e-3)])
def test_sphere_has_curvature_minus_one_over_radius(scale, tol):
    # A sphere of radius R has both principal curvatures 1/R: |H| = 1/R (do Carmo 1976, 3-3), negative for a
    # dome with this convention. Measured relative error inside 0.7 R: 3.0e-4 (3x3 differences), 1.7e-3
    # (sigma 1), 7.2e-3 (sigma 2: the Gaussian also sees the x^4 terms of the sphere).
    h, inner = dome()
    H = mean_curvature(h, scale=scale, edges="clamp")
    assert np.abs(H[inner] * 60.0 + 1.0).max() < tol


def test_physical_units():
    # Lengths in units of the relief R: with strength s one texel is 1/s height units wide. A dome of 60 texels
    # radius stored as heights h/s at strength s is a sphere of 60/s height units, 60 R/s physical:
    # H = -s / (60 R) (do Carmo 1976, 3-3: |H| = 1 / radius).
    h, inner = dome()
    H = mean_curvature(h / 4, strength=4.0, relief=0.5, scale=0)  # heights /4, strength x4: the same relief
    assert np.median(H[inner]) == pytest.approx(-4.0 / (60.0 * 0.5), rel=1e-3)


@pytest.mark.parametrize("scale", [0.0, 1.0, 3.0])
def test_plane_has_zero_curvature(scale):
    r, c = np.mgrid[0:64, 0:64].astype(np.float32)
    H = mean_curvature(0.3 * c - 0.2 * r, scale=scale, edges="clamp")
    assert np.abs(H[16:-16, 16:-16]).max() < 1e-5  # measured 1e-7; float32 heights


@pytest.mark.parametrize("scale", [0.0, 1.0, 3.0])
@pytest.mark.parametrize(("a", "b"), [(0.003, 0.001), (0.001, 0.004)])
def test_saddle_centre(a, b, scale):
    # h = a x^2 - b y^2: at the centre h_x = h_y = 0, h_xx = 2a, h_yy = -2b: H = (2a - 2b)/2 = a - b.
    # Every kernel here is exact on quadratics (module docstring): measured error below 1e-9.
    r, c = np.mgrid[0:65, 0:65] - 32.0
    h = (a * c * c - b * r * r).astype(np.float32)
    for edges in ("clamp", "mirror"):
        assert mean_curvature(h, scale=scale, edges=edges)[32, 32] == pytest.approx(a - b, abs=1e-7)


def test_gaussian_kernels_are_exact_on_low_polynomials():
    w0, w1, w2 = gaussian_derivative_kernels(1.7)
    x = np.arange(-(len(w0) // 2), len(w0) // 2 + 1)
    assert w0.sum() == pytest.approx(1.0) and w1.sum() == pytest.approx(0.0, abs=1e-15)
    assert np.dot(w1, x) == pytest.approx(1.0) and w2.sum() == pytest.approx(0.0, abs=1e-15)
    assert np.dot(w2, x * x) == pytest.approx(2.0)


def test_masks_signs_and_ranges():
    h, inner = dome(R=40.0, n=96)
    m = curvature_maps(h, scale=0, radius=40.0)
    assert m.convexity[48, 48] == pytest.approx(1.0, abs=2e-3) and m.concavity[48, 48] == 0.0
    assert m.cavity[48, 48] == 1.0 and m.encoded[48, 48] == pytest.approx(1.0, abs=1e-3)
    bowl = curvature_maps(-h, scale=0, radius=40.0)
    assert bowl.concavity[48, 48] == pytest.approx(1.0, abs=2e-3) and bowl.cavity[48, 48] < 2e-3
    assert bowl.encoded[48, 48] == pytest.approx(0.0, abs=1e-3)
    for field in ("convexity", "concavity", "cavity", "encoded"):
        v = getattr(m, field)
        assert v.dtype == np.float32 and v.min() >= 0.0 and v.max() <= 1.0
    flat = curvature_maps(np.zeros((8, 8), np.float32))
    assert (flat.encoded == 0.5).all() and (flat.cavity == 1.0).all()


@pytest.mark.parametrize(("kwargs", "word"), [({"scale": -1}, "scale"), ({"relief": 0}, "relief"),
                                              ({"strength": 0}, "strength"), ({"edges": "tile"}, "edge"),
                                              ({"radius": -2.0}, "radius")])
def test_bad_parameters_are_named(kwargs, word):
    with pytest.raises(BakeryError, match=word):
        curvature_maps(np.zeros((8, 8), np.float32), **kwargs)


@pytest.mark.parametrize("scale", [0.0, 1.5])
def test_bands_of_rows_change_no_value_and_report_each_band(scale, monkeypatch):
    """H is formed texel by texel from the five derivatives, so bands of rows give the bytes of one pass; the
    progress rises to 1 with a call per derivative and per band."""
    import bakery.relief.curvature as C

    rng = np.random.default_rng(3)
    h = rng.random((40, 31)).astype(np.float32)
    whole = C.mean_curvature(h, strength=3.0, scale=scale)
    monkeypatch.setattr(C, "BAND_TEXELS", 31 * 8)  # 8 rows a band: 5 bands
    seen = []
    banded = C.mean_curvature(h, strength=3.0, scale=scale, progress=lambda f, w: seen.append(f))
    assert banded.tobytes() == whole.tobytes()
    assert len(seen) == 5 + 5 and seen == sorted(seen) and seen[-1] == 1.0
