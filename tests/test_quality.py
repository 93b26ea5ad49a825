"""Error metrics (bakery.quality) on analytic cases.

PSNR = 10 log10(peak^2 / MSE) (Wang & Bovik 2009, IEEE Signal Processing Magazine 26(1), eq. 2); angles from
atan2(|a x b|, a . b); stops = log2 ratios. Every expected value below follows from these definitions.
"""

import math

import numpy as np
import pytest

from bakery import quality as Q


def test_psnr_per_channel_analytic():
    ref = np.zeros((4, 4, 3), np.float32)
    test = ref.copy()
    test[..., 0] = 0.1            # MSE 0.01 -> 20 dB
    test[::2, :, 1] = 0.1         # half the texels off by 0.1 -> MSE 0.005 -> 23.0103 dB
    assert Q.psnr(ref, test) == [20.0, pytest.approx(10 * math.log10(200), abs=1e-3), None]
    assert Q.psnr(ref, test * 255, peak=255.0)[0] == 20.0


@pytest.mark.parametrize("deg", [0.01, 0.5, 10.0, 90.0, 179.0])
def test_angles_of_rotated_vectors(deg):
    t = math.radians(deg)
    a = np.array([[0.0, 0.0, 1.0]], np.float32)
    b = np.array([[math.sin(t), 0.0, math.cos(t)]], np.float32) * 3.0  # length does not matter
    # float32 atan2 keeps small angles: 0.01 deg is resolved to ~1e-4 deg (acos would give 0 or 0.02)
    assert Q.angles_deg(a, b)[0] == pytest.approx(deg, abs=2e-4)


def test_angle_stats_percentile_on_known_distribution():
    n = 1000
    ang = np.radians(np.arange(n) / 10.0)  # 0.0 .. 99.9 deg in 0.1 steps
    ref = np.tile([0.0, 0.0, 1.0], (n, 1))
    test = np.stack([np.sin(ang), np.zeros(n), np.cos(ang)], -1)
    s = Q.angle_stats(ref, test)
    assert s["mean_deg"] == pytest.approx(49.95, abs=1e-3)
    assert s["max_deg"] == pytest.approx(99.9, abs=1e-3)
    assert s["p99_deg"] == pytest.approx(np.percentile(np.arange(n) / 10.0, 99), abs=1e-3)


def test_hdr_stats_analytic():
    ref = np.full((10, 3), 4.0, np.float32)
    test = ref.copy()
    test[:5] = 8.0   # +1 stop on half the samples -> RMS sqrt(0.5), relative error 1.0 on half
    s = Q.hdr_stats(ref, test)
    assert s["log2_rmse_stops"] == pytest.approx(math.sqrt(0.5), abs=1e-5)
    assert s["median_rel_error"] == pytest.approx(0.5)   # median of five 0s and five 1s
    # values below the floor 2^-14 count as the floor: black vs 2^-20 is no error
    assert Q.hdr_stats(np.zeros((4, 1)), np.full((4, 1), 2.0 ** -20))["log2_rmse_stops"] == 0.0


def test_percentiles_use_a_fixed_stride_sample():
    v = np.arange(Q.PERCENTILE_SAMPLES * 4, dtype=np.float32)
    s = Q._strided(v)
    assert s.size == Q.PERCENTILE_SAMPLES and s[1] == 4.0
