"""Ambient occlusion of height fields against closed forms and a brute-force ray-marched reference.

Definition checked: A = (1/pi) * integral over the sky of V(w) max(0, n.w) dw (cosine-weighted visibility;
Jimenez, Wu, Pesce & Jarabo 2016, ATVI-TR-16-01, eq. 10 integrates the same quantity slice by slice).
"""

import math

import numpy as np
import pytest

from bakery import BakeryError, BakeryWarning
from bakery.relief import occlusion_from_height
from tests.relief.reference import ray_marched_occlusion, sinusoid_height


def groove(n=128, rows=32, wall=40):
    """A long V-groove along the rows: height |x - n/2| (one height unit per texel) up to ``wall``, flat beyond."""
    x = np.arange(n, dtype=np.float32)
    return np.minimum(np.abs(x - n // 2), wall)[None, :].repeat(rows, axis=0)


def test_flat_height_sees_the_whole_sky():
    # A plane's texel sees the whole hemisphere: A = (1/pi) int cos(theta) dw = 1 (definition above).
    with pytest.warns(BakeryWarning, match="constant"):
        ao = occlusion_from_height(np.full((32, 48), 0.3, np.float32), strength=5.0)
    assert ao.dtype == np.float32 and ao.shape == (32, 48)
    np.testing.assert_allclose(ao, 1.0, atol=1e-6)


@pytest.mark.parametrize("edges", ["wrap", "clamp", "mirror"])
@pytest.mark.parametrize("beta_deg", [30.0, 45.0, 60.0])
def test_v_groove_bottom_is_cos_of_wall_slope(beta_deg, edges):
    # Closed form derived for this test: at the bottom of a long V-groove whose walls rise at angle beta
    # (normal straight up), the horizon in azimuth psi (measured from the groove's cross axis) has
    # tan(alpha) = |cos psi| tan(beta). Per azimuth the visible part of the cosine integral is
    # int_0^{pi/2 - alpha} cos(t) sin(t) dt = cos^2(alpha) / 2, so
    #   A = (1/pi) int_0^{2 pi} cos^2(alpha)/2 dpsi = (1/pi) int_0^pi dpsi / (1 + tan^2(beta) cos^2 psi)
    #     = 1 / sqrt(1 + tan^2 beta) = cos(beta)      (int_0^pi dpsi/(1 + k cos^2 psi) = pi/sqrt(1+k)).
    # Measured: |A - cos(beta)| <= 0.0038 (60 deg, clamp); the texel takes the horizon of the line sample
    # nearest to it, at most half a texel across the line.
    beta = math.radians(beta_deg)
    ao = occlusion_from_height(groove(), strength=math.tan(beta), directions=16, edges=edges)
    assert ao[16, 64] == pytest.approx(math.cos(beta), abs=0.004)
    assert ao[16, 0] == pytest.approx(1.0, abs=1e-6)  # the flat top: walls lie below its horizon


@pytest.mark.parametrize(("amp", "tol"), [(1.0, 0.004), (3.0, 0.010)])
def test_smooth_heights_match_a_ray_marched_reference(amp, tol):
    # Reference: horizons by marching every 1/4 texel along 256 azimuths over the analytic height, then the
    # cosine integral by the midpoint rule (tests/relief/reference.py), with the analytic normal.
    # Measured max |error| over 24 texels: 0.0031 (amp 1), 0.0077 (amp 3, minimum A 0.32).
    n = 64
    hmap, hf, gf = sinusoid_height(n, 3, amp=amp)
    ao = occlusion_from_height(hmap, strength=1.0, directions=64)
    rng = np.random.default_rng(1)
    errors = []
    for i, j in rng.integers(0, n, (24, 2)):
        ref = ray_marched_occlusion(hf, gf, float(j), -float(i), reach=n)
        errors.append(float(ao[i, j]) - ref)
    assert max(abs(e) for e in errors) < tol
    assert min(ao.ravel()) < 0.9  # the relief does occlude


def test_tiled_height_gives_tiled_occlusion():
    # Tiling: a tiling height's occlusion must not show where the tile repeats. The lines of one azimuth
    # close on themselves after whole periods, so a 2x2 tiled map walks the same samples: equal within 1e-6
    # (measured: identical).
    hmap, _, _ = sinusoid_height(48, 5, amp=2.0)
    one = occlusion_from_height(hmap, strength=1.0, directions=16)
    four = occlusion_from_height(np.tile(hmap, (2, 2)), strength=1.0, directions=16)
    np.testing.assert_allclose(four, np.tile(one, (2, 2)), atol=1e-6)


def test_bent_normals_match_the_reference_mean_direction():
    # Bent normal = normalised cosine-weighted mean of the unoccluded directions (Jimenez et al. 2016,
    # section 5), against the same brute-force reference. Measured max angle 0.56 degrees.
    n = 64
    hmap, hf, gf = sinusoid_height(n, 3, amp=2.0)
    ao, bent = occlusion_from_height(hmap, strength=1.0, directions=64, bent_normals=True)
    np.testing.assert_allclose(np.linalg.norm(bent, axis=2), 1.0, atol=1e-5)
    rng = np.random.default_rng(2)
    worst = 0.0
    for i, j in rng.integers(0, n, (12, 2)):
        _, ref = ray_marched_occlusion(hf, gf, float(j), -float(i), reach=n, bent=True)
        worst = max(worst, math.degrees(math.acos(min(1.0, float(np.dot(bent[i, j], ref))))))
    assert worst < 0.8


def test_max_distance_is_a_cutoff():
    # A thin wall 20 texels from a texel on flat ground hides part of its sky; with a 10-texel cutoff the wall
    # is ignored and the texel sees all of it (A = 1, definition).
    h = np.zeros((64, 64), np.float32)
    h[:, 52:54] = 30.0
    far = occlusion_from_height(h, strength=1.0, directions=16, edges="clamp")
    near = occlusion_from_height(h, strength=1.0, directions=16, edges="clamp", max_distance=10)
    assert far[32, 32] < 0.9
    assert near[32, 32] == pytest.approx(1.0, abs=1e-6)


def test_progress_and_threads_do_not_change_the_result():
    hmap, _, _ = sinusoid_height(40, 7, amp=2.0)
    calls = []
    a = occlusion_from_height(hmap, strength=1.0, directions=12, threads=1)
    b = occlusion_from_height(hmap, strength=1.0, directions=12, threads=2,
                              progress=lambda f, label: calls.append((f, label)))
    np.testing.assert_array_equal(a, b)
    fractions = [f for f, _ in calls]
    # the normals, then 6 pairs of opposite azimuths: calls as groups of lines are walked, then one per azimuth
    assert len(fractions) > 19 and bool(np.all(np.diff(fractions) > 0))
    assert sum(label == "occlusion: azimuth 1 of 12" for _, label in calls) >= 2  # inside the first walk
    assert fractions[-1] == 1.0
    assert all(isinstance(label, str) and label for _, label in calls)


def test_negative_strength_inverts_the_relief():
    h = groove()
    np.testing.assert_array_equal(occlusion_from_height(h, strength=-1.0), occlusion_from_height(-h, strength=1.0))


@pytest.mark.parametrize(("kwargs", "word"), [
    ({"max_distance": 0}, "max_distance"),
    ({"max_distance": 129}, "max_distance"),
    ({"max_distance": float("nan")}, "max_distance"),
    ({"directions": 2}, "directions"),
    ({"directions": 8.0}, "directions"),
    ({"strength": 0.0}, "strength"),
    ({"strength": (1.0, -1.0)}, "strength"),
    ({"edges": "repeat"}, "edge"),
])
def test_bad_parameters_are_named(kwargs, word):
    with pytest.raises(BakeryError, match=word):
        occlusion_from_height(groove(), **kwargs)


def test_bad_height_maps():
    with pytest.raises(BakeryError, match="height map"):
        occlusion_from_height(np.zeros((4, 4, 3), np.float32))
    h = groove()
    h[3, 3] = np.nan
    with pytest.raises(BakeryError, match="NaN"):
        occlusion_from_height(h)
