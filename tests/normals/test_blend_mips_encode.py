"""Blending (Barre-Brisebois & Hill 2012), mip chains (Toksvig 2005), encodings (glTF 2.0)."""

import numpy as np
import pytest

from bakery import BakeryError, BakeryWarning
from bakery.mips import downsample
from bakery.normals import blend_normals, decode_normals, encode_normals, mip_count, normal_from_height, normal_mips


def random_normals(shape, seed, tilt=0.6):
    rng = np.random.default_rng(seed)
    v = np.concatenate([rng.uniform(-tilt, tilt, shape + (2,)), np.ones(shape + (1,))], axis=-1)
    return (v / np.linalg.norm(v, axis=-1, keepdims=True)).astype(np.float32)


def flat(shape):
    n = np.zeros(shape + (3,), np.float32)
    n[..., 2] = 1
    return n


def test_reoriented_flat_inputs_return_the_other():
    # Barre-Brisebois & Hill 2012: RNM of a detail over a flat base returns the detail, and a
    # flat detail returns the base.
    d = random_normals((16, 12), 1)
    assert np.abs(blend_normals(flat((16, 12)), d) - d).max() < 1e-6
    assert np.abs(blend_normals(d, flat((16, 12))) - d).max() < 1e-6


@pytest.mark.parametrize(("method", "expected"), [("reoriented", (0.96, 0.0, 0.28)),
                                                  ("whiteout", (0.882353, 0.0, 0.470588)),
                                                  ("derivative", (0.832050, 0.0, 0.554700)),
                                                  ("linear", (0.6, 0.0, 0.8))])
def test_blend_values(method, expected):
    # Barre-Brisebois & Hill 2012 formulas; values computed in docs/references.md, section 3:
    # n1 = n2 = (0.6, 0, 0.8): RNM (0.96, 0, 0.28) (angles add: 73.74 degrees), whiteout, partial
    # derivative (PD), linear.
    n = np.array([[[0.6, 0.0, 0.8]]], np.float32)
    assert blend_normals(n, n, method=method)[0, 0] == pytest.approx(expected, abs=1e-6)


def test_reoriented_crossed():
    # docs/references.md, section 3: n1 = (0.6, 0, 0.8), n2 = (0, 0.6, 0.8): RNM (0.48, 0.60, 0.64).
    a = np.array([[[0.6, 0.0, 0.8]]], np.float32)
    b = np.array([[[0.0, 0.6, 0.8]]], np.float32)
    assert blend_normals(a, b)[0, 0] == pytest.approx((0.48, 0.60, 0.64), abs=1e-6)


def test_detail_strength():
    # Definition (Barre-Brisebois & Hill 2012 blend a scaled detail): strength 0 leaves a flat detail -> base.
    base = random_normals((8, 8), 2)
    detail = random_normals((8, 8), 3)
    assert np.abs(blend_normals(base, detail, detail_strength=0.0) - base).max() < 1e-6
    with pytest.raises(BakeryError, match="differ in size"):
        blend_normals(base, detail[:4])
    with pytest.warns(BakeryWarning, match="detail normal map is not unit length"):
        blend_normals(base, detail * 1.5)


def test_mip_sizes_follow_the_khronos_rule():
    # KTX 2.0 / OpenGL: level size max(1, floor(size / 2^level)), down to 1x1.
    chain = normal_mips(random_normals((5, 12), 4))
    assert [lv[0].shape[:2] for lv in chain] == [(5, 12), (2, 6), (1, 3), (1, 1)]
    assert mip_count(12, 5) == 4 and mip_count(1, 1) == 1


def test_mip_lengths_are_block_averages():
    # Toksvig 2005: |Na| = length of the average of the unit normals under the texel.
    n = random_normals((16, 16), 5)
    chain = normal_mips(n)
    block = n.reshape(4, 4, 4, 4, 3).mean(axis=(1, 3))
    assert chain[2][1] == pytest.approx(np.linalg.norm(block, axis=-1), abs=1e-6)
    for unit, length in chain:
        assert unit.dtype == np.float32 and length.dtype == np.float32
        assert np.abs(np.linalg.norm(unit, axis=-1) - 1).max() < 1e-6
        assert length.max() <= 1.0


def test_toksvig_example():
    # docs/references.md, section 6 (computed): averaging (+-0.6, 0, 0.8) gives |Na| = 0.8.
    n = np.zeros((2, 2, 3), np.float32)
    n[:, 0] = (0.6, 0, 0.8)
    n[:, 1] = (-0.6, 0, 0.8)
    unit, length = normal_mips(n)[1]
    assert float(length[0, 0]) == pytest.approx(0.8, abs=1e-7)
    assert unit[0, 0] == pytest.approx((0, 0, 1), abs=1e-7)


@pytest.mark.parametrize("shape", [(7, 7), (9, 4), (3, 11)])
def test_odd_sizes_keep_the_mean(shape):
    # The area-weighted box gives every texel of the level above the same total weight, so the mean survives
    # (a property of box filtering over exact footprints; common practice, no single published source).
    v = np.random.default_rng(6).random(shape + (3,)).astype(np.float32)
    d = downsample(v)
    assert d.mean(axis=(0, 1)) == pytest.approx(v.mean(axis=(0, 1)), abs=1e-6)


def test_two_channel_decode_rebuilds_z():
    # docs/references.md, section 1: z = sqrt(max(0, 1 - x^2 - y^2)).
    n = normal_from_height(np.random.default_rng(7).random((8, 8), dtype=np.float32), strength=2.0)
    back = decode_normals(encode_normals(n, channels=2))
    assert np.abs(back - n).max() < 1e-5
    with pytest.raises(BakeryError, match="2 \\(XY\\) or 3"):
        encode_normals(n, channels=4)


@pytest.mark.parametrize("method", ["reoriented", "whiteout", "derivative", "linear"])
@pytest.mark.parametrize("strength", [1.0, 1.7])
def test_blend_in_bands_changes_no_value_and_reports_each_band(method, strength, monkeypatch):
    """Each texel's blend depends on its own two normals only, so bands of rows give the bytes of one pass."""
    from bakery.normals import blend

    rng = np.random.default_rng(5)
    a = rng.normal(size=(37, 29, 3)).astype(np.float32)
    b = rng.normal(size=(37, 29, 3)).astype(np.float32)
    a[..., 2] = np.abs(a[..., 2]) + 0.3
    b[..., 2] = np.abs(b[..., 2]) + 0.3
    a /= np.linalg.norm(a, axis=-1, keepdims=True)
    b /= np.linalg.norm(b, axis=-1, keepdims=True)
    whole = blend_normals(a, b, method=method, detail_strength=strength)
    monkeypatch.setattr(blend, "BLEND_BAND_TEXELS", 29 * 4)  # 4 rows a band: 10 bands
    seen = []
    banded = blend_normals(a, b, method=method, detail_strength=strength, progress=lambda f, w: seen.append(f))
    assert banded.tobytes() == whole.tobytes()
    # the two unit checks (one block each at this size, then their end), 10 bands
    assert len(seen) == 2 * 2 + 10 and seen == sorted(seen) and seen[-1] == 1.0


def test_checked_inputs_skip_the_unit_check():
    """``checked=True``: the maps are taken as unit already (no warning, no second pass); on unit maps the
    result is that of the checked call up to the rounding of one more renormalisation."""
    rng = np.random.default_rng(11)
    a = rng.normal(size=(16, 12, 3)).astype(np.float32)
    a[..., 2] = np.abs(a[..., 2]) + 0.3
    a /= np.linalg.norm(a, axis=-1, keepdims=True)
    b = a[::-1].copy()
    assert np.abs(blend_normals(a, b, checked=True) - blend_normals(a, b)).max() < 1e-6
    with pytest.warns(BakeryWarning, match="not unit length"):
        blend_normals(a * 0.5, b)
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        blend_normals(a * 0.5, b, checked=True)
