"""Procedural demo data: determinism, tiling, and the sky's stated radiance ranges."""

import math

import numpy as np

from bakery import samples


def test_height_is_deterministic_and_in_range():
    a = samples.paving_height(64)
    b = samples.paving_height(64)
    np.testing.assert_array_equal(a, b)
    assert a.dtype == np.float32 and a.min() >= 0 and a.max() <= 1 and a.std() > 0.1


def test_height_tiles_seamlessly():
    """The jump across the wrap edge is no larger than typical jumps between neighbouring texels."""
    h = samples.paving_height(128).astype(np.float64)
    inner = np.abs(np.diff(h, axis=1)).max()
    wrap = np.abs(h[:, 0] - h[:, -1]).max()
    assert wrap <= inner


def test_exponent_range():
    n = samples.paving_exponent(samples.paving_height(64))
    assert n.min() >= 7.9 and n.max() <= 400.5


def test_sky_sun_energy_and_sky_range():
    """The sun disk's energy equals radiance x disk solid angle 2 pi (1 - cos r) (exact for a spherical cap),
    within 3% at this resolution; the sky lies in [sky_low, sky_high]."""
    w = 1024
    img = samples.sky_panorama(w, ground=False)
    h = w // 2
    lat_edges = np.pi * (0.5 - np.arange(h + 1) / h)
    omega_row = (2 * np.pi / w) * (np.sin(lat_edges[:-1]) - np.sin(lat_edges[1:]))
    sun_mask = img[..., 0] > 10
    base = samples.sky_panorama(w, ground=False, sun_radiance=0.0)
    extra = ((img[..., 0] - base[..., 0]) * omega_row[:, None]).sum()
    expected = 2.0e4 * 2 * np.pi * (1 - math.cos(math.radians(0.5)))
    assert abs(extra / expected - 1) < 0.03
    sky = img[~sun_mask]
    assert sky.min() >= 0.15 - 1e-6 and sky.max() <= 1.2 + 1e-6


def test_committed_demo_inputs_match_the_generator(tmp_path):
    """samples/ holds what `python -m bakery.samples samples/` writes (compared as decoded pixels)."""
    from pathlib import Path

    from bakery.io import read_image

    fresh = samples.write_samples(tmp_path)
    committed = Path(__file__).resolve().parents[1] / "samples"
    for path in fresh.values():
        a = read_image(path).pixels
        b = read_image(committed / path.name).pixels
        np.testing.assert_array_equal(a, b, err_msg=path.name)
