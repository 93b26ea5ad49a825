"""Diffuse irradiance (bakery.envmap.irradiance).

Sources: R. Ramamoorthi, P. Hanrahan, "An Efficient Representation for Irradiance Environment Maps",
SIGGRAPH 2001 -- basis constants, A_l (eq. 9), the quadratic form with c1..c5 (eq. 12-13), and the abstract's
"average errors of only 1%". Closed-form cases from the docs/references.md, section 10 (computed there):
constant L -> pi L; L = max(0, z) -> SH9 2.078034 / 0.662680 / -0.016361 at +z / +x / -z, exact 2pi/3, 2/3, 0,
mean|dE|/mean E = 0.44%; upper hemisphere of 1 -> pi (1 + n_z) / 2 exactly; L = exp(8(z - 1)) at +x:
SH9 0.113898 vs exact 0.105355.
"""

import math

import numpy as np
import pytest

from bakery import sphere as S
from bakery.envmap import irradiance as I

D = S.equirect_directions(1024, 512, dtype=np.float64)
NORMALS = np.array([[0, 0, 1.0], [1, 0, 0], [0, 0, -1.0]])


def pano(f):
    return f(D).astype(np.float32)[..., None] if f(D).ndim == 2 else f(D).astype(np.float32)


def test_basis_constants_are_the_papers():
    # R&H 2001, section 2: 0.282095, 0.488603, 1.092548, 0.315392, 0.546274
    for k, v in ((I.K0, 0.282095), (I.K1, 0.488603), (I.K2, 1.092548), (I.K20, 0.315392), (I.K22, 0.546274)):
        assert k == pytest.approx(v, abs=1e-6)


def test_basis_is_orthonormal_under_projection():
    # projecting each basis function returns its own unit coefficient
    for k in range(9):
        img = I.sh_basis(D)[..., k:k + 1].astype(np.float32)
        coeffs = I.project_sh(img, "equirect")[:, 0]
        want = np.zeros(9)
        want[k] = 1
        np.testing.assert_allclose(coeffs, want, atol=2e-4)


@pytest.mark.parametrize("kind", ["equirect", "cube"])
def test_constant_environment_gives_pi_L(kind):
    # R&H 2001: E = A_0 L_00 Y_00 = pi L for a constant environment
    env = np.full((256, 512, 3), 1.7, np.float32) if kind == "equirect" else np.full((6, 32, 32, 3), 1.7,
                                                                                      np.float32)
    e = I.eval_sh(I.irradiance_coefficients(I.project_sh(env, kind)), S.normalize(np.random.default_rng(0)
                                                                                  .normal(size=(20, 3))))
    np.testing.assert_allclose(e, math.pi * 1.7, rtol=1e-5)
    ex = I.irradiance_exact(env, kind, NORMALS)  # texel-centre sums of the clamped cosine: 1e-3
    np.testing.assert_allclose(ex, math.pi * 1.7, rtol=1e-3)


def test_clamped_cosine_against_closed_form():
    # docs/references.md, section 10 (computed): L = max(0, z): SH9 at +z 2.078034, +x 0.662680, -z -0.016361
    env = pano(lambda d: np.maximum(0, d[..., 2]))
    sh = I.eval_sh(I.irradiance_coefficients(I.project_sh(env, "equirect")), NORMALS)[:, 0]
    np.testing.assert_allclose(sh, [2.078034, 27 * math.pi / 128, -0.016361], atol=2e-5)
    # exact convolution: 2 pi / 3 at +z, 2/3 at +x, 0 at -z
    ex = I.irradiance_exact(env, "equirect", NORMALS, source_size=128)[:, 0]
    np.testing.assert_allclose(ex, [2 * math.pi / 3, 2 / 3, 0], atol=2e-3)


def test_clamped_cosine_mean_relative_error():
    # docs/references.md, section 10 (computed): mean|dE| / mean E = 0.44% for L = max(0, z)
    env = pano(lambda d: np.maximum(0, d[..., 2]))
    n = S.cube_directions(16, dtype=np.float64).reshape(-1, 3)
    w = np.tile(S.cube_texel_solid_angles(16, dtype=np.float64).reshape(-1), 6)
    sh = I.eval_sh(I.irradiance_coefficients(I.project_sh(env, "equirect")), n)[:, 0]
    # exact irradiance of max(0, z): E(n) = closed form via the exact convolution on a fine source
    ex = I.irradiance_exact(env, "equirect", n, source_size=64)[:, 0]
    metric = np.sum(np.abs(sh - ex) * w) / np.sum(ex * w)
    assert metric == pytest.approx(0.0044, abs=0.0005)


def test_linear_field_is_exact():
    # L = z lies in band 1: E = (2 pi / 3) n_z exactly (R&H 2001, A_1 = 2 pi / 3)
    env = pano(lambda d: d[..., 2] + 2.0)
    n = S.normalize(np.random.default_rng(1).normal(size=(30, 3)))
    e = I.eval_sh(I.irradiance_coefficients(I.project_sh(env, "equirect")), n)[:, 0]
    np.testing.assert_allclose(e, 2 * math.pi / 3 * n[:, 2] + 2 * math.pi, rtol=1e-4)


def test_upper_hemisphere_exact_convolution():
    # docs/references.md, section 10: upper hemisphere (y > 0 here: bakery's up) of radiance 1 -> pi (1 + n_y) / 2
    env = pano(lambda d: (d[..., 1] > 0).astype(np.float64))
    n = S.normalize(np.random.default_rng(2).normal(size=(25, 3)))
    ex = I.irradiance_exact(env, "equirect", n, source_size=128)[:, 0]
    np.testing.assert_allclose(ex, math.pi * (1 + n[:, 1]) / 2, atol=5e-3)


def test_quadratic_form_with_published_constants():
    # R&H 2001 eq. 13: E(n) = c1 L22 (x^2 - y^2) + c3 L20 z^2 + c4 L00 - c5 L20
    #   + 2 c1 (L2-2 xy + L21 xz + L2-1 yz) + 2 c2 (L11 x + L1-1 y + L10 z),
    # c1..c5 = 0.429043, 0.511664, 0.743125, 0.886227, 0.247708 (published to 6 digits: tolerance 2e-6 each)
    c1, c2, c3, c4, c5 = 0.429043, 0.511664, 0.743125, 0.886227, 0.247708
    rng = np.random.default_rng(3)
    env = (1.5 + rng.random((1, 1, 3))) * (1 + 0.5 * D[..., :1] * D[..., 1:2] + 0.3 * D[..., 2:3] ** 2)
    l = I.project_sh(env.astype(np.float32), "equirect")  # (9, 3): L00 L1-1 L10 L11 L2-2 L2-1 L20 L21 L22
    n = S.normalize(rng.normal(size=(40, 3)))
    x, y, z = (n[:, i:i + 1] for i in range(3))
    quad = (c1 * l[8] * (x * x - y * y) + c3 * l[6] * z * z + c4 * l[0] - c5 * l[6]
            + 2 * c1 * (l[4] * x * y + l[7] * x * z + l[5] * y * z)
            + 2 * c2 * (l[3] * x + l[1] * y + l[2] * z))
    ours = I.eval_sh(I.irradiance_coefficients(l), n)
    np.testing.assert_allclose(ours, quad, atol=1e-5 * np.abs(l).sum())


def test_sh_against_brute_force_on_random_smooth_environment():
    # R&H 2001 abstract: "average errors of only 1%": mean|dE| / mean E <= 1% on a random smooth
    # environment (random low-frequency SH content up to l = 4, made positive; invented test data)
    rng = np.random.default_rng(7)
    x, y, z = D[..., 0], D[..., 1], D[..., 2]
    terms = [np.ones_like(x), x, y, z, x * y, y * z, x * z, x * x - y * y, 3 * z * z - 1,
             x * x * x - 3 * x * y * y, z * (5 * z * z - 3), x * y * (x * x - y * y),
             35 * z ** 4 - 30 * z * z + 3]
    field = sum(rng.normal(scale=0.3) * t for t in terms[1:]) + 2.0
    field = np.maximum(field, 0.05)
    env = np.stack([field, 0.8 * field, 1.2 * field], -1).astype(np.float32)
    n = S.cube_directions(16, dtype=np.float64).reshape(-1, 3)
    w = np.tile(S.cube_texel_solid_angles(16, dtype=np.float64).reshape(-1), 6)
    sh = I.eval_sh(I.irradiance_coefficients(I.project_sh(env, "equirect")), n)
    ex = I.irradiance_exact(env, "equirect", n, source_size=96)
    metric = np.sum(np.abs(sh - ex) * w[:, None], axis=0) / np.sum(ex * w[:, None], axis=0)
    assert metric.max() <= 0.01


def test_exact_convolution_against_scipy_quadrature():
    # independent reference: scipy dblquad of L(w) max(0, n.w) over the sphere for a smooth L
    from scipy.integrate import dblquad

    def radiance(theta, phi):  # theta: polar angle from +y, phi: longitude
        d = np.array([np.sin(theta) * np.sin(phi), np.cos(theta), -np.sin(theta) * np.cos(phi)])
        return 1.0 + 0.5 * d[0] + 0.25 * d[2] * d[1], d

    env = pano(lambda d: 1.0 + 0.5 * d[..., 0] + 0.25 * d[..., 2] * d[..., 1])
    for nrm in (S.normalize(np.array([0.3, -0.2, 0.9])),):
        def integrand(theta, phi, nrm=nrm):
            val, d = radiance(theta, phi)
            return val * max(0.0, float(nrm @ d)) * np.sin(theta)

        ref, _ = dblquad(integrand, 0, 2 * np.pi, 0, np.pi, epsabs=1e-7)
        ex = I.irradiance_exact(env, "equirect", nrm[None], source_size=128)[0, 0]
        assert ex == pytest.approx(ref, rel=2e-3)


def test_sharp_lobe_sh9_error_and_exact():
    # docs/references.md, section 10: L = exp(8(z - 1)) at +x: SH9 0.113898 vs exact 0.105355 (+8%)
    env = pano(lambda d: np.exp(8 * (d[..., 2] - 1)))
    n = np.array([[1.0, 0, 0]])
    sh = I.eval_sh(I.irradiance_coefficients(I.project_sh(env, "equirect")), n)[0, 0]
    ex = I.irradiance_exact(env, "equirect", n, source_size=128)[0, 0]
    assert sh == pytest.approx(0.113898, rel=1e-3)
    assert ex == pytest.approx(0.105355, rel=3e-3)


def test_hann_window_reduces_ringing_behind_a_light():
    # the Hann window (Blackman & Tukey 1958) on the bands damps ringing; behind max(0, z) SH9 goes negative
    # (-0.016361, docs/references.md, section 10) where the exact irradiance is 0
    env = pano(lambda d: np.maximum(0, d[..., 2]))
    coeffs = I.project_sh(env, "equirect")
    back = np.array([[0, 0, -1.0]])
    plain = I.eval_sh(I.irradiance_coefficients(coeffs), back)[0, 0]
    hann = I.eval_sh(I.irradiance_coefficients(coeffs, window="hann"), back)[0, 0]
    assert plain < 0 <= hann  # no negative irradiance once windowed (at the price of some blur)
    np.testing.assert_allclose(I.window_weights("hann"), [1, 0.75, 0.25])
    with pytest.raises(ValueError):
        I.window_weights("triangle")


def test_cube_and_panorama_projections_agree():
    from bakery.envmap.resample import resample

    env = pano(lambda d: 1 + 0.5 * d[..., 0] + 0.2 * d[..., 1] ** 2)
    cube = resample(env, "equirect", "cube", 128)
    np.testing.assert_allclose(I.project_sh(cube, "cube"), I.project_sh(env, "equirect"), atol=2e-4)


def texel_sum(env):
    """R&H 2001 eq. 7 as the plain sum over texel centres, L * Y_lm * texel solid angle, in float64 numpy."""
    h, w = env.shape[:2]
    y = I.sh_basis(S.equirect_directions(w, h, dtype=np.float64))
    om = S.equirect_row_solid_angles(w, h, dtype=np.float64)
    return np.einsum("hwk,hwc,h->kc", y, env.astype(np.float64), om)


@pytest.mark.parametrize("h", [2, 3, 15, 16, 33])
def test_panorama_projection_is_the_texel_sum(monkeypatch, h):
    # the folded one-pass sums (bakery.envmap.shsums) against R&H 2001 eq. 7 summed texel by texel; small blocks
    # so that the heights above cover several blocks, a lone last row pair, and an odd middle row
    from bakery.envmap import shsums

    monkeypatch.setattr(shsums, "BLOCK", 3)
    env = np.random.default_rng(h).random((h, 2 * h, 3), dtype=np.float32) * 4
    want = texel_sum(env)
    for threads in (1, 2, 3):
        got = I.project_sh(env, "equirect", threads=threads)
        np.testing.assert_allclose(got, want, rtol=0, atol=2e-6 * np.abs(want).max())
        if threads == 1:
            first = got
        np.testing.assert_array_equal(got, first)  # the same bits whatever the number of threads


def test_large_panorama_projection_is_the_texel_sum():
    # a 1024 x 512 sky with a sun: float32 block sums stay within 1e-6 of the float64 texel sum (R&H 2001 eq. 7)
    d = S.equirect_directions(1024, 512, dtype=np.float64)
    env = (0.3 + 0.2 * d[..., 1:2] + 500 * (d[..., :3] @ S.normalize(np.array([0.3, 0.6, -0.5])) > 0.999)
           [..., None] * np.array([1.0, 0.9, 0.8])).astype(np.float32)
    want = texel_sum(env)
    np.testing.assert_allclose(I.project_sh(env, "equirect"), want, rtol=0, atol=1e-6 * np.abs(want).max())


def test_folded_sums_match_the_plain_product():
    # numpy's float64 product of the latitude functions with the image, folded by the parities the module states
    from bakery.envmap import shsums

    rng = np.random.default_rng(5)
    h, n = 21, 40
    flat = rng.random((h, n), dtype=np.float32) - 0.5
    top = rng.random((5, h // 2 + 1))
    lat = np.empty((5, h))
    for k, p in enumerate(shsums.LAT_PARITY):
        lat[k, : h // 2 + 1] = top[k]
        lat[k, h // 2 + 1:] = p * top[k, : h // 2][::-1]
        if p < 0:
            lat[k, h // 2] = 0.0
    full = lat @ flat.astype(np.float64)  # (5, n)
    want = full[:, : n // 2] + np.array(shsums.LON_PARITY)[:, None] * full[:, n // 2:]
    got = shsums.folded_sums(flat, lat.astype(np.float32))
    np.testing.assert_allclose(got, want, atol=1e-5)


def test_panorama_width_must_be_even():
    with pytest.raises(ValueError, match="even"):
        I.project_sh(np.ones((5, 11, 3), np.float32), "equirect")
