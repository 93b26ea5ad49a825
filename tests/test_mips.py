"""Colour-map mips (bakery.mips.color_mips) against the sRGB standard, an independent resampler and the
definitions of premultiplied filtering and alpha coverage."""

import numpy as np
import pytest

from bakery import BakeryError, BakeryWarning
from bakery.mips import _compiled, color_mips, coverage, mip_size
from bakery.relief.examples import leaf_card

KERNELS = ["box", "kaiser", "lanczos3"]


def checkerboard(n=8):
    return (np.indices((n, n)).sum(axis=0) % 2).astype(np.float32)[:, :, None].repeat(3, axis=2)


@pytest.mark.parametrize("kernel", KERNELS)
def test_checkerboard_averages_light_not_codes(kernel):
    # IEC 61966-2-1: black and white average to linear 0.5, which encodes to 1.055 * 0.5^(1/2.4) - 0.055
    # = 0.735357, 8-bit code 188 (not 128). Every symmetric filter sums a one-texel checkerboard to its mean.
    level1 = color_mips(checkerboard(), kernel=kernel, edges="wrap")[1]
    np.testing.assert_allclose(level1, 0.735357, atol=2e-6)
    assert (np.rint(level1 * 255) == 188).all()
    lin = color_mips(checkerboard(), kernel=kernel, transfer="linear")[1]
    np.testing.assert_allclose(lin, 0.5, atol=1e-6)


def test_srgb_curves_follow_the_standard():
    # The compiled decode/encode against the IEC 61966-2-1 (section 5) formulas evaluated in float64, on
    # every 16-bit code and random values. Measured max |error|: decode 7.5e-7, encode 3.2e-7 (float32).
    k = _compiled()
    x = np.concatenate([np.arange(65536) / 65535, np.random.default_rng(0).random(100000)]).astype(np.float32)
    c = x.astype(np.float64)
    dec = np.empty_like(x)
    k["decode_flat"](x, dec, k["poly"], True, -1)
    assert np.abs(dec - np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)).max() < 8e-7
    enc = np.empty_like(x)
    k["encode_flat"](x, enc, np.ones(1, np.float32), k["poly"], True, -1, np.float32(1.0))
    ref = np.where(c <= 0.0031308, 12.92 * c, 1.055 * c ** (1 / 2.4) - 0.055)
    assert np.abs(enc - ref).max() < 4e-7


@pytest.mark.parametrize("channels", [3, 4])
def test_decode_filter_encode_matches_a_direct_computation(channels):
    # The whole box chain written out in float64 with the IEC 61966-2-1 curves (section 5) and premultiplied
    # alpha (Porter & Duff 1984): level k+1 = encode(2x2 mean of colour times alpha / 2x2 mean of alpha), each
    # level from the one above in linear premultiplied form. Measured max |error| 4e-7 over four levels.
    def decode(c):
        return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)

    def encode(v):
        return np.where(v <= 0.0031308, 12.92 * v, 1.055 * v ** (1 / 2.4) - 0.055)

    def mean2(x):
        return 0.25 * (x[0::2, 0::2] + x[1::2, 0::2] + x[0::2, 1::2] + x[1::2, 1::2])

    rng = np.random.default_rng(4)
    img = rng.random((32, 48, channels), dtype=np.float32)
    img[:4, :4, -1] = 0.0  # a fully transparent 4x4 corner: colour 0 where no alpha is left
    alpha = img[:, :, 3:].astype(np.float64) if channels == 4 else np.ones((32, 48, 1))
    pre = decode(img[:, :, :3].astype(np.float64)) * alpha
    got = color_mips(img, levels=5)
    for level in range(1, 5):
        pre, alpha = mean2(pre), mean2(alpha)
        with np.errstate(invalid="ignore", divide="ignore"):
            ref = encode(np.clip(np.where(alpha > 0, pre / alpha, 0.0), 0, 1))
        np.testing.assert_allclose(got[level][:, :, :3], ref, atol=5e-7, err_msg=f"level {level}")
        if channels == 4:
            np.testing.assert_allclose(got[level][:, :, 3:], alpha, atol=1e-7, err_msg=f"level {level}")


@pytest.mark.parametrize("kernel", ["kaiser", "lanczos3"])
def test_sinc_filters_are_pass_band_flat_and_stop_nyquist(kernel):
    # A sinusoid of period 64 texels lies deep in the pass band: level 1 must be the same sinusoid sampled at
    # level 1's texel centres (x = 2j + 0.5 on level 0), within 5e-4 (measured 3.9e-4 Kaiser, 7.8e-6 Lanczos-3:
    # the filters' pass-band droop at 1/16 of the new Nyquist; Duchon 1979; Kaiser & Schafer 1980).
    n = 128
    x = np.arange(n) + 0.0
    wave = 0.5 + 0.4 * np.cos(2 * np.pi * x / 64)
    img = np.repeat(np.repeat(wave[None, :, None], 4, axis=0), 3, axis=2).astype(np.float32)
    level1 = color_mips(img, kernel=kernel, transfer="linear", levels=2)[1][:, :, 0]
    xc = 2 * np.arange(n // 2) + 0.5
    np.testing.assert_allclose(level1[1], 0.5 + 0.4 * np.cos(2 * np.pi * xc / 64), atol=5e-4)


def test_lanczos3_matches_pillow_in_the_interior():
    # Pillow's LANCZOS resize (a = 3, support widened by the scale, centres at (j + 0.5) * scale) is an
    # independent implementation of Duchon's (1979) filter; it renormalises at the borders instead of
    # repeating texels, so only texels at least 4 from the border are compared. Measured max |diff| 1.8e-7
    # (1.5e-2 at the border).
    from PIL import Image

    rng = np.random.default_rng(5)
    plane = rng.random((40, 54)).astype(np.float32)
    img = np.repeat(plane[:, :, None], 3, axis=2)
    ours = color_mips(img, kernel="lanczos3", transfer="linear", edges="clamp", levels=2)[1][:, :, 0]
    pil = np.asarray(Image.fromarray(plane, mode="F").resize((27, 20), Image.LANCZOS))
    np.testing.assert_allclose(ours[4:-4, 4:-4], pil[4:-4, 4:-4], atol=1e-6)


@pytest.mark.parametrize("kernel", KERNELS)
def test_premultiplied_filtering_leaves_no_dark_fringe(kernel):
    # Porter & Duff 1984: filtering colour times alpha, then dividing by the filtered alpha, gives the colour
    # of the covered texels only. Transparent texels here are black; a straight-alpha filter would darken the
    # border texels of the green to (green + black)/2 and below.
    img = np.zeros((8, 16, 4), np.float32)
    img[:, :7] = (0.2, 0.8, 0.3, 1.0)
    level1 = color_mips(img, kernel=kernel, edges="clamp", levels=2)[1]
    seen = level1[:, :, 3] > 1e-3
    assert seen[:, :4].all()  # level-1 column 3 covers level-0 columns 6 (green) and 7 (transparent)
    if kernel == "box":
        assert level1[0, 3, 3] == 0.5
    np.testing.assert_allclose(level1[seen][:, :3], np.broadcast_to([0.2, 0.8, 0.3], (seen.sum(), 3)),
                               atol=2e-6)


@pytest.mark.parametrize("cutoff", [0.5, 0.75])
def test_coverage_is_preserved_on_every_level(cutoff):
    # Alpha-tested coverage (common practice): each level's alpha is scaled so that the fraction of texels
    # with alpha >= cutoff equals level 0's. Every level of 32^2 or more within 1 % (absolute) of level 0's;
    # measured 0.01 % at worst. Without it, at cutoff 0.75, level 3 (32^2) has lost 2.8 %.
    card = leaf_card(256)
    c0 = coverage(card[:, :, 3], cutoff)
    kept = color_mips(card, alpha_cutoff=cutoff)
    plain = color_mips(card)
    big = [i for i, lvl in enumerate(kept) if lvl.shape[0] * lvl.shape[1] >= 32 * 32]
    assert len(big) == 4
    for i in big:
        assert abs(coverage(kept[i][:, :, 3], cutoff) - c0) < 0.01
    if cutoff == 0.75:
        assert abs(coverage(plain[3][:, :, 3], cutoff) - c0) > 0.02
    np.testing.assert_array_equal(kept[0], card)
    np.testing.assert_array_equal(kept[3][:, :, :3], plain[3][:, :, :3])  # colour untouched


@pytest.mark.parametrize("kernel", KERNELS)
@pytest.mark.parametrize(("h", "w"), [(9, 14), (7, 5), (1, 6), (33, 20)])
def test_odd_and_non_square_sizes(kernel, h, w):
    # Level sizes: max(1, floor(size / 2^level)) per axis (KTX 2.0, section 4.1). The box keeps the mean of a
    # linear map exactly (area-weighted footprints, module notes): measured 1.2e-7.
    img = np.random.default_rng(6).random((h, w, 3), dtype=np.float32)
    chain = color_mips(img, kernel=kernel, transfer="linear", edges="clamp")
    assert [c.shape[:2] for c in chain] == [mip_size(w, h, i)[::-1] for i in range(len(chain))]
    assert chain[-1].shape[:2] == (1, 1)
    if kernel == "box":
        for lvl in chain:
            assert lvl.mean() == pytest.approx(img.mean(), abs=1e-6)


def test_threads_do_not_change_the_result():
    card = leaf_card(128)
    for kernel in KERNELS:
        a = color_mips(card, kernel=kernel, alpha_cutoff=0.5, threads=1)
        b = color_mips(card, kernel=kernel, alpha_cutoff=0.5, threads=2)
        for x, y in zip(a, b, strict=True):
            np.testing.assert_array_equal(x, y)


def test_bad_input():
    rgb = np.zeros((8, 8, 3), np.float32)
    with pytest.raises(BakeryError, match="alpha_cutoff needs a map with alpha"):
        color_mips(rgb, alpha_cutoff=0.5)
    with pytest.raises(BakeryError, match="alpha_cutoff"):
        color_mips(np.zeros((8, 8, 4), np.float32), alpha_cutoff=1.5)
    with pytest.raises(BakeryError, match="kernel"):
        color_mips(rgb, kernel="bicubic")
    with pytest.raises(BakeryError, match="transfer"):
        color_mips(rgb, transfer="gamma22")
    with pytest.raises(BakeryError, match="edge"):
        color_mips(rgb, edges="tile")
    with pytest.raises(BakeryError, match="mip levels"):
        color_mips(rgb, levels=5)
    with pytest.raises(BakeryError, match="channels"):
        color_mips(np.zeros((8, 8, 5), np.float32))
    bad = rgb.copy()
    bad[2, 2, 1] = np.nan
    with pytest.raises(BakeryError, match="NaN"):
        color_mips(bad)
    with pytest.warns(BakeryWarning, match="outside"):
        color_mips(rgb + 1.5)


@pytest.mark.parametrize("shape", [(8, 8, 4), (7, 9, 4), (8, 8, 3), (6, 10, 2)])
@pytest.mark.parametrize("transfer", ["srgb", "linear"])
def test_color_mips_finds_every_bad_value(shape, transfer):
    """One NaN or infinity anywhere (colour or alpha, even or odd sizes) is refused; one value just outside
    [0, 1] in an sRGB or alpha channel is reported; a map inside [0, 1] passes without a word."""
    import warnings

    good = np.random.default_rng(3).random(shape, dtype=np.float32)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        color_mips(good, transfer=transfer)
    for bad_value in (np.nan, np.inf, -np.inf):
        for ch in range(shape[2]):
            bad = good.copy()
            bad[shape[0] - 1, shape[1] - 1, ch] = bad_value
            with pytest.raises(BakeryError, match="NaN or infinite"):
                color_mips(bad, transfer=transfer)
    bad = good.copy()
    bad[0, shape[1] - 1, shape[2] - 1] = 1.001  # the last channel: alpha, or colour
    if transfer == "srgb" or shape[2] in (2, 4):
        with pytest.warns(BakeryWarning, match="run from 0.* to 1.001, outside"):
            color_mips(bad, transfer=transfer)
