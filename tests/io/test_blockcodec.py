"""Block encoders and decoders (bakery.io.blockcodec) and the encoder library's quirks.

Independent decoder: texture2ddecoder 1.0.6 (BGRA8 output), not the imagecodecs decoder bakery reads with.
Block sizes: KTX 2.0 specification section 3.12 (levelImages, num_blocks = ceil(size / 4)) and the Khronos
Data Format specification 1.3, chapters 18-19 (S3TC/RGTC/BPTC: BC1/BC4 8 bytes, BC3/BC5/BC6H/BC7 16 bytes per
4x4 block).
"""

import numpy as np
import pytest

from bakery.io import blockcodec as B
from tests.io.texgen import fbm, hdr_sky, photo_like

t2d = pytest.importorskip("texture2ddecoder")


def t2d_decode(data, codec, w, h):
    """texture2ddecoder -> float32 (h, w, channels) in RGB(A) order."""
    fn = {"bc1": t2d.decode_bc1, "bc3": t2d.decode_bc3, "bc4": t2d.decode_bc4, "bc5": t2d.decode_bc5,
          "bc6h": t2d.decode_bc6, "bc7": t2d.decode_bc7}[codec]
    bgra = np.frombuffer(fn(bytes(data), w, h), np.uint8).reshape(h, w, 4)
    rgba = bgra[:, :, [2, 1, 0, 3]].astype(np.float32) / 255
    return rgba[:, :, :B.CODECS[codec].channels]


def test_block_sizes_follow_the_data_format_spec():
    # Data Format spec 1.3 ch. 18-19: 64-bit BC1/BC4 blocks, 128-bit BC3/BC5/BC6H/BC7 blocks
    assert {k: c.block_bytes for k, c in B.CODECS.items()} == {
        "bc1": 8, "bc3": 16, "bc4": 8, "bc5": 16, "bc6h": 16, "bc7": 16}
    # KTX 2.0 spec 3.12: ceil(size / block) blocks, at least one
    assert B.block_counts(1, 1) == (1, 1)
    assert B.block_counts(5, 9) == (2, 3)
    assert B.level_bytes(B.CODECS["bc7"], 13, 4) == 4 * 1 * 16


def test_encoder_version_string():
    import ispc_texcomp

    assert B.encoder_version() == f"ispc-texcomp {ispc_texcomp.__version__}" == "ispc-texcomp 1.0.1"


def test_quirk_bc1_returns_twice_the_bytes():
    # library quirk: compress_blocks_bc1 returns 2x the bytes of the blocks; bakery keeps the first half
    import ispc_texcomp as itc

    rgba = (photo_like(8, 0) * 255).astype(np.uint8)
    rgba = np.concatenate([rgba, np.full((8, 8, 1), 255, np.uint8)], -1)
    raw = itc.compress_blocks_bc1(itc.RGBASurface(rgba, 8, 8, 32))
    assert len(raw) == 2 * 4 * 8
    ours = B.encode_surface(rgba, "bc1")
    assert len(ours) == 32 and ours == bytes(raw[:32])


def test_quirk_bc4_bc5_need_r8_rg8_surfaces():
    # library quirk: BC4/BC5 read 1/2 bytes per texel; an RGBA surface gives wrong blocks (measured: mean
    # error ~70/255 on this gradient), an R8/RG8 surface the expected ~1.5/255
    import ispc_texcomp as itc

    y, x = np.mgrid[0:16, 0:16]
    r = (x * 12 + y * 3).astype(np.uint8)
    g = (255 - x * 5 - y * 9).astype(np.uint8)
    rgba = np.stack([r, g, r, np.full_like(r, 255)], -1)
    wrong = itc.compress_blocks_bc5(itc.RGBASurface(rgba, 16, 16, 64))
    ours = B.encode_surface(np.stack([r, g], -1), "bc5")
    ref = np.stack([r, g], -1).astype(np.float32) / 255
    err_wrong = np.abs(t2d_decode(wrong, "bc5", 16, 16) - ref).mean() * 255
    err_ours = np.abs(t2d_decode(ours, "bc5", 16, 16) - ref).mean() * 255
    assert err_wrong > 30 and err_ours < 2.0
    wrong4 = itc.compress_blocks_bc4(itc.RGBASurface(rgba, 16, 16, 64))
    ours4 = B.encode_surface(r[:, :, None], "bc4")
    err_wrong4 = np.abs(t2d_decode(wrong4, "bc4", 16, 16)[..., 0] - ref[..., 0]).mean() * 255
    err_ours4 = np.abs(t2d_decode(ours4, "bc4", 16, 16)[..., 0] - ref[..., 0]).mean() * 255
    assert err_wrong4 > 30 and err_ours4 < 2.0


def test_quirk_bc6h_reads_half_float_surface():
    # the 8-bit surface type carries IEEE half RGBA (8 bytes per texel) for BC6H: a constant 1.0 block
    # decodes to 1.0 exactly (half 1.0 is an endpoint the 16-bit unsigned mode holds)
    surf = np.full((4, 4, 4), 1.0, np.float16)
    data = B.encode_surface(surf, "bc6h")
    assert len(data) == 16
    np.testing.assert_array_equal(B.decode_level(data, "bc6h", 4, 4), np.ones((4, 4, 3), np.float32))


@pytest.mark.parametrize("codec, lo", [
    # measured PSNR (dB) against the source through the independent decoder, on 64x64 fBm / photo-like data
    # (BC3 and BC7 with an fBm alpha): bc1 31.66, bc3 32.49, bc4 37.72, bc5 37.87, bc7 33.36; the bound is the
    # measured value minus ~0.3 dB
    ("bc1", 31.35), ("bc3", 32.2), ("bc4", 37.4), ("bc5", 37.55), ("bc7", 33.05),
])
def test_independent_decoder_agrees_and_quality(codec, lo):
    c = B.CODECS[codec]
    src = photo_like(64, 5) if c.channels >= 3 else fbm(64, 6, channels=c.channels)
    if c.channels == 4:
        src = np.concatenate([src, fbm(64, 7)], -1)
    data, clamped = B.encode_level(src, codec)
    assert clamped == 0 and len(data) == 16 * 16 * c.block_bytes
    ours = B.decode_level(data, codec, 64, 64)
    theirs = t2d_decode(data, codec, 64, 64)
    # both decoders give the same 8-bit values; BC1/BC3 colour interpolation differs by one step between them
    # (measured), which the Data Format spec's S3TC chapter allows (the 1/3, 2/3 points need not be exact)
    tol = 1.01 if codec in ("bc1", "bc3") else 0.01
    assert np.abs(ours - theirs).max() * 255 <= tol
    mse = float(np.mean((theirs - src) ** 2))
    assert 10 * np.log10(1 / mse) > lo


def test_bc6h_independent_decoder_agrees_in_ldr_range():
    # texture2ddecoder decodes BC6H to 8 bits (clamped to [0, 1]); compare there
    src = hdr_sky(32, 2, stops=3) / 8
    src = np.clip(src, 0, 1)
    data, _ = B.encode_level(src, "bc6h")
    ours = np.clip(B.decode_level(data, "bc6h", 32, 32), 0, 1)
    theirs = t2d_decode(data, "bc6h", 32, 32)
    assert np.abs(ours - theirs).max() <= 1.5 / 255


@pytest.mark.parametrize("codec", sorted(B.CODECS))
def test_bytes_do_not_depend_on_thread_count(codec):
    c = B.CODECS[codec]
    src = hdr_sky(160, 1) if c.hdr else fbm(160, 3, channels=c.channels)
    one, _ = B.encode_level(src, codec, threads=1, quality="fast")
    for t in (2, 3, 8):
        assert B.encode_level(src, codec, threads=t, quality="fast")[0] == one


@pytest.mark.parametrize("w, h", [(1, 1), (2, 3), (5, 7), (13, 4)])
def test_sizes_not_multiple_of_four_replicate_edges(w, h):
    y, x = np.mgrid[0:h, 0:w]
    src = np.stack([0.2 + 0.04 * x, 0.7 - 0.03 * y], -1).astype(np.float32)  # smooth: BC5 holds it closely
    data, _ = B.encode_level(src, "bc5")
    bx, by = B.block_counts(w, h)
    assert len(data) == bx * by * 16
    # the padded surface replicates the last row and column; encoding it explicitly gives the same blocks
    padded = np.pad(src, ((0, -h % 4), (0, -w % 4), (0, 0)), mode="edge")
    assert B.encode_level(padded, "bc5")[0] == data
    dec = B.decode_level(data, "bc5", w, h)
    assert dec.shape == (h, w, 2)
    # a block spans at most 0.16 along x; BC4/BC5's 8-entry palette (Data Format spec, RGTC) leaves at most half
    # of a seventh of that, plus the 8-bit endpoint rounding (measured: 0.0086)
    assert np.abs(dec - src).max() <= 0.16 / 7 / 2 + 1 / 255


def test_partial_decode_matches_full_decode():
    src = fbm(64, 4, channels=2)[:62]
    data, _ = B.encode_level(src, "bc5")
    full = B.decode_level(data, "bc5", 64, 62)
    rows = np.array([0, 5, 15])
    part = B.decode_level(data, "bc5", 64, 62, block_rows=rows)
    np.testing.assert_array_equal(part, full[B.texel_rows(rows, 62)])
    assert part.shape[0] == 4 + 4 + 2  # the last block row holds rows 60 and 61 only


def test_unknown_quality_is_refused():
    from bakery.errors import BakeryError

    with pytest.raises(BakeryError, match="fast, balanced, best"):
        B.check_quality("ultra")


def test_strips_report_progress_and_change_no_byte(monkeypatch):
    """Encoding strip by strip of block rows reports each strip in order; the sRGB curve, applied in bands of
    rows, and the callback change no byte (the reference: the curve of IEC 61966-2-1 applied to the whole
    level, then one encoder call per level with no callback)."""
    from bakery.color import linear_to_srgb
    from bakery.io import ktx2 as K

    monkeypatch.setattr(B, "STRIP_BLOCK_ROWS", 2)  # 8 texel rows a strip
    monkeypatch.setattr(K, "SRGB_BAND_TEXELS", 29 * 5)  # 5 rows a band
    rng = np.random.default_rng(9)
    level = rng.random((37, 29, 4)).astype(np.float32)
    fmt = K.get_format("bc7-srgb")
    seen = []
    data = K.encode_blocks(level, fmt, progress=lambda f, w: seen.append(f))
    ref = level.copy()
    ref[..., :3] = linear_to_srgb(ref[..., :3])
    monkeypatch.setattr(B, "STRIP_BLOCK_ROWS", 1000)
    expected, _ = B.encode_level(ref, B.CODECS["bc7"])
    assert data == expected
    assert seen == sorted(seen) and seen[-1] == 1.0
    assert len(seen) >= 8 + 5  # 8 bands of the curve, the quantising, 5 strips of 40 padded rows
