"""Height -> normal conversion against analytic surfaces and published kernel properties.

Sources named beside each check. "Computed" values were evaluated numerically from the published formulas
(docs/references.md, section 1) and are recomputed here where practical.
"""

import math

import numpy as np
import pytest

from bakery import BakeryError
from bakery.normals import KERNELS, derivatives, encode_normals, normal_from_height, strength_from_size
from bakery.normals.from_height import run_strips

KERNEL_NAMES = list(KERNELS)


def angles_deg(a, b):
    d = np.clip(np.sum(np.asarray(a, np.float64) * b, axis=-1), -1.0, 1.0)
    return np.degrees(np.arccos(d))


def grid(n, m=None):
    m = n if m is None else m
    r, c = np.mgrid[0:n, 0:m].astype(np.float64)
    return c, -r  # x right, y up (rows run down)


def unit(v):
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


@pytest.mark.parametrize("kernel", KERNEL_NAMES)
def test_exact_on_quadratics(kernel):
    # Every kernel is exact on quadratics (Taylor expansion of the central difference, Abramowitz & Stegun
    # 1964, eq. 25.3.6; the smoothing parts sum to 1). h = 0.3x - 0.7y + 0.25x^2: dh/dx = 16.3 at x = 32.
    x, y = grid(48, 64)
    h = (0.3 * x - 0.7 * y + 0.25 * x**2).astype(np.float32)
    dx, dy = derivatives(h, kernel, edges="clamp")
    assert dx[20, 32] == pytest.approx(16.3, abs=1e-4)
    assert dy[20, 32] == pytest.approx(-0.7, abs=1e-4)


@pytest.mark.parametrize("kernel", KERNEL_NAMES)
@pytest.mark.parametrize(("period", "ratio"), [(4, 0.636620), (8, 0.900316), (16, 0.974495), (32, 0.993587)])
def test_sinusoid_response_is_sinc(kernel, period, ratio):
    # Along its axis every kernel's response to sin(w x) is sin(w)/w (frequency response of the central
    # difference [-1, 0, 1]/2, e.g. Jaehne, "Digital Image Processing", derivative filters; from memory).
    # Values computed in docs/references.md, section 1.
    w = 2 * math.pi / period
    assert math.sin(w) / w == pytest.approx(ratio, abs=1e-6)
    x, _ = grid(8, 64)
    dx, _ = derivatives(np.sin(w * x).astype(np.float32), kernel, edges="wrap")
    assert dx[4, 0] / w == pytest.approx(ratio, abs=1e-5)  # cos(0) = 1 at x = 0


@pytest.mark.parametrize(("kernel", "ratio"), [("central", 1.054499), ("sobel", 0.975259),
                                               ("scharr", 0.995069), ("prewitt", 0.948846)])
def test_isotropy_at_period_8(kernel, ratio):
    # Response at 45 degrees over response at 0 degrees for a plane wave of period 8 (docs/references.md,
    # section 1, computed): Scharr (Scharr 2000) is the most isotropic. The response of a linear filter to
    # exp(j phi) is read off its outputs for cos and sin.
    w = 2 * math.pi / 8

    def response(theta):
        x, y = grid(16)
        phase = w * (x * math.cos(theta) + y * math.sin(theta))
        out = []
        for f in (np.cos, np.sin):
            dx, dy = derivatives(f(phase).astype(np.float32), kernel, edges="clamp")
            out.append(dx[8, 8] * math.cos(theta) + dy[8, 8] * math.sin(theta))
        return math.hypot(*out)

    assert response(math.pi / 4) / response(0.0) == pytest.approx(ratio, abs=2e-5)
    if kernel == "scharr":
        others = [abs(r - 1) for r in (1.054499, 0.975259, 0.948846)]
        assert abs(ratio - 1) < min(others)


@pytest.mark.parametrize("kernel", KERNEL_NAMES)
def test_sinusoid_angular_error(kernel):
    # h = A sin(wx) cos(wy), period 64, exact normal from Blinn 1978: normalize(-s dh/dx, -s dh/dy, 1).
    # Kernel slope error <= 1 - sin(w)/w * (b + 2a cos w) ~ w^2/6 + w^2/4 = 4e-3 (w = 2 pi / 64) of a slope of
    # at most s A w = 0.39, i.e. <= 0.09 degrees; float32 adds < 0.01. Bound: mean well under 0.5.
    x, y = grid(128)
    w, a, s = 2 * math.pi / 64, 0.5, 8.0
    h = a * np.sin(w * x) * np.cos(w * y)
    hx = a * w * np.cos(w * x) * np.cos(w * y)
    hy = -a * w * np.sin(w * x) * np.sin(w * y)
    exact = unit(np.stack([-s * hx, -s * hy, np.ones_like(hx)], -1))
    err = angles_deg(normal_from_height(h.astype(np.float32), strength=s, kernel=kernel), exact)
    limit = 0.045 if kernel == "central" else 0.1  # central: w^2/6 alone, <= 0.031 degrees + float32
    assert err.max() < limit
    assert err.mean() < 0.07


@pytest.mark.parametrize("kernel", KERNEL_NAMES)
def test_tilted_plane_and_sphere_cap(kernel):
    # Tilted plane h = 0.3x - 0.7y: exact normal normalize(-0.3, 0.7, 1) (Blinn 1978, s = 1); all kernels are
    # exact on planes, the limit is float32 rounding of heights up to ~130 (ulp 1.5e-5).
    x, y = grid(96)
    n = normal_from_height((0.3 * x - 0.7 * y).astype(np.float32), strength=1.0, kernel=kernel, edges="clamp")
    err = angles_deg(n[1:-1, 1:-1], unit(np.array([-0.3, 0.7, 1.0])))
    assert err.max() < 0.05
    # Sphere cap h = sqrt(R^2 - x^2 - y^2): exact normal (x, y, h) / R (docs/references.md, section 1), e.g.
    # (0.3, 0.4, 0.866025) at (0.3R, 0.4R). Inside 0.8 R the curvature term of the kernels' Taylor error is
    # below 0.05 degrees for R = 40 texels.
    R = 40.0
    x, y = grid(101)
    X, Y = x - 50, y + 50
    h = np.sqrt(np.maximum(R * R - X * X - Y * Y, 0.0))
    exact = np.stack([X / R, Y / R, h / R], -1)
    n = normal_from_height(h.astype(np.float32), strength=1.0, kernel=kernel, edges="clamp")
    inside = np.hypot(X, Y) < 0.8 * R
    err = angles_deg(n, exact)[inside]
    assert err.max() < 0.2 and err.mean() < 0.05
    # the sheet's point (0.3R, 0.4R) = (12, 16) texels from the centre
    assert n[50 - 16, 50 + 12] == pytest.approx([0.3, 0.4, 0.866025], abs=2e-3)


def test_physical_strength():
    # Blinn 1978 with slopes in physical units: a ramp over the full height range, depth D, texture width Wp:
    # slope = D * (1 / (W - 1)) / (Wp / W); normal = normalize(-slope, 0, 1).
    W, H, depth, width = 64, 32, 0.1, 2.0
    sx, sy = strength_from_size((H, W), depth, width)
    assert (sx, sy) == pytest.approx((depth * W / width, depth * H / (width * H / W)))
    x, _ = grid(H, W)
    h = (x / (W - 1)).astype(np.float32)
    n = normal_from_height(h, strength=(sx, sy), edges="clamp")
    slope = depth / (W - 1) / (width / W)
    assert n[10, 20] == pytest.approx(unit(np.array([-slope, 0.0, 1.0])), abs=1e-6)
    # non-square physical size: height given explicitly
    assert strength_from_size((H, W), 1.0, 2.0, 4.0) == pytest.approx((32.0, 8.0))
    with pytest.raises(BakeryError, match="positive"):
        strength_from_size((H, W), -1.0, 2.0)


@pytest.mark.parametrize("kernel", KERNEL_NAMES)
@pytest.mark.parametrize("blur", [0.0, 1.3])
def test_tiling_is_bit_exact(kernel, blur):
    # Tiling (wrap) check: normal map of a 2x2 tiled height == 2x2 tile of its normal map, bit for
    # bit (common practice for tileable textures). Non-square, with strips and threads.
    rng = np.random.default_rng(3)
    h = rng.random((40, 56), dtype=np.float32)
    n = normal_from_height(h, strength=3.0, kernel=kernel, blur=blur)
    n4 = normal_from_height(np.tile(h, (2, 2)), strength=3.0, kernel=kernel, blur=blur, threads=2)
    assert np.array_equal(n4, np.tile(n, (2, 2, 1)))


def test_strip_size_and_threads_do_not_change_result():
    rng = np.random.default_rng(4)
    h = rng.random((67, 45), dtype=np.float32)
    ref = normal_from_height(h, strength=2.0, threads=1)
    for rows, threads in [(1, 1), (5, 2), (64, 3)]:
        out = np.empty_like(ref)
        run_strips(h, strength=2.0, kernel="scharr", blur=0.0, edges="wrap", threads=threads,
                   target=lambda r0, r1, out=out: out[r0:r1], rows=rows)
        assert np.array_equal(out, ref)


@pytest.mark.parametrize("edges", ["clamp", "mirror"])
def test_edge_modes(edges):
    # clamp repeats the edge texel (GL_CLAMP_TO_EDGE), mirror repeats it mirrored (GL_MIRRORED_REPEAT): both
    # give zero slope across the border for a ramp's edge column's outer half.
    x, _ = grid(8, 16)
    h = (x / 15).astype(np.float32)
    dx, _ = derivatives(h, "central", edges=edges)
    assert dx[3, 0] == pytest.approx(0.5 / 15)  # (h[1] - h[0]) / 2 with h[-1] = h[0]
    dxw, _ = derivatives(h, "central", edges="wrap")
    assert dxw[3, 0] == pytest.approx((h[3, 1] - h[3, 15]) / 2)


def test_y_down_equals_negated_y_before_encoding():
    # Y-down output equals the Y-up output with the normal's y negated before encoding, exactly.
    from bakery.io.images import quantize

    rng = np.random.default_rng(5)
    n = normal_from_height(rng.random((32, 32), dtype=np.float32), strength=5.0)
    flipped = n * np.array([1, -1, 1], np.float32)
    for depth in ("8", "16"):
        assert np.array_equal(quantize(encode_normals(n, y="down"), depth),
                              quantize(encode_normals(flipped), depth))
    assert np.array_equal(encode_normals(n, y="down"), encode_normals(flipped))


def test_encoding_values_and_tie_rule():
    # docs/references.md, section 1: (0.3, 0.4, 0.866025) -> rgb (0.65, 0.70, 0.933013) -> 8-bit R 166, B 238
    # (G = 178.5 is a tie: kept out of the check). Flat 127.5 -> 128 with ties to even (numpy.rint).
    from bakery.io.images import quantize

    e = encode_normals(np.array([[[0.3, 0.4, 0.866025], [0.0, 0.0, 1.0]]], np.float32))
    assert e[0, 0] == pytest.approx([0.65, 0.70, 0.933013], abs=1e-6)
    q = quantize(e, "8")
    assert (q[0, 0, 0], q[0, 0, 2]) == (166, 238)
    assert list(q[0, 1]) == [128, 128, 255]


def test_bad_arguments():
    with pytest.raises(BakeryError, match="kernel"):
        normal_from_height(np.zeros((4, 4), np.float32), kernel="roberts")
    with pytest.raises(BakeryError, match="edge mode"):
        normal_from_height(np.zeros((4, 4), np.float32), edges="repeat")
    with pytest.raises(BakeryError, match="height map"):
        normal_from_height(np.zeros((4, 4, 3), np.float32))
    with pytest.raises(BakeryError, match="blur"):
        normal_from_height(np.zeros((4, 4), np.float32), blur=-1)


def test_output_is_unit_float32():
    rng = np.random.default_rng(6)
    n = normal_from_height(rng.random((9, 7)).astype(np.float64), strength=10.0)
    assert n.dtype == np.float32 and n.shape == (9, 7, 3)
    assert np.abs(np.linalg.norm(n, axis=-1) - 1).max() < 1e-6


def test_properties_on_random_heights():
    # Invariants of Blinn 1978's construction for any heights and strength: unit length, z > 0, z = 1 exactly
    # where both slopes vanish; the Y-down file differs only in the green channel.
    from hypothesis import given, settings
    from hypothesis import strategies as st

    @settings(max_examples=25, deadline=None)
    @given(seed=st.integers(0, 2**31 - 1), rows=st.integers(1, 12), cols=st.integers(1, 12),
           strength=st.floats(-200, 200, allow_nan=False), kernel=st.sampled_from(KERNEL_NAMES),
           edges=st.sampled_from(["wrap", "clamp", "mirror"]))
    def check(seed, rows, cols, strength, kernel, edges):
        h = np.random.default_rng(seed).random((rows, cols), dtype=np.float32)
        n = normal_from_height(h, strength=strength, kernel=kernel, edges=edges)
        assert np.all(np.isfinite(n)) and np.all(n[..., 2] > 0)
        assert np.abs(np.linalg.norm(n.astype(np.float64), axis=-1) - 1).max() < 1e-6
        up, down = encode_normals(n), encode_normals(n, y="down")
        assert np.array_equal(up[..., ::2], down[..., ::2])

    check()
