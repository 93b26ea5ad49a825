"""Block-compressed and supercompressed KTX2 files (bakery.io.ktx2, bakery.io.texcompress).

Sources: Khronos "KTX File Format Specification, version 2.0" (header 3.4, level index 3.9, DFD 3.10,
key/value data 3.11, levelImages and mipPadding 3.12, "Supercompression Schemes" / Zstandard, "DFD for
Supercompressed Data" in the document revision 5 (draft) text, whose note says earlier revisions required
bytesPlane = 0); Khronos "Data Format Specification 1.3", section 5 (basic descriptor block) and section 5.6
(colorModel values KHR_DF_MODEL_BC1A 128 .. BC7 134); Vulkan 1.3 specification, VkFormat enumeration (BC
formats 131-146). Independent decoders: texture2ddecoder 1.0.6 (blocks), zstandard 0.25.0 (levels).
"""

import json
import struct

import numpy as np
import pytest

from bakery.errors import BakeryError, BakeryWarning
from bakery.io import ktx2 as K
from bakery.io import texcompress as T
from tests.io.test_blockcodec import t2d_decode
from tests.io.texgen import fbm, fbm_normals, hdr_sky, photo_like

zstandard = pytest.importorskip("zstandard")

# Vulkan spec, VkFormat: BC1_RGB_UNORM 131, BC1_RGB_SRGB 132, BC3_UNORM 137, BC3_SRGB 138, BC4_UNORM 139,
# BC5_UNORM 141, BC6H_UFLOAT 143, BC7_UNORM 145, BC7_SRGB 146
VK = {"bc1": 131, "bc1-srgb": 132, "bc3": 137, "bc3-srgb": 138, "bc4": 139, "bc5": 141, "bc6h": 143,
      "bc7": 145, "bc7-srgb": 146}
# Data Format spec 1.3 section 5.6: colorModel of each block format
MODEL = {"bc1": 128, "bc3": 130, "bc4": 131, "bc5": 132, "bc6h": 133, "bc7": 134}
BLOCK_FORMATS = sorted(VK)


def _source(name, n=8):
    fmt = K.get_format(name)
    if fmt.block == "bc6h":
        return hdr_sky(n, 1)
    return fbm(n, 2, channels=fmt.channels)


def test_vk_format_numbers_and_names():
    for name, vk in VK.items():
        fmt = K.get_format(name)
        assert fmt.vk == vk and fmt.short_name == name and fmt.block_compressed
        assert K.get_format(vk) is fmt
    with pytest.raises(BakeryError) as err:
        K.get_format("bc9")
    msg = str(err.value)
    assert "\n" not in msg and all(n in msg for n in (*VK, "rgba16f", "r8"))


def test_layout_of_small_bc7_file():
    # BC7 4x4, 3 levels (4x4, 2x2, 1x1: one 16-byte block each), no key/value data:
    # index 80 + 3 * 24 = 152 -> DFD at 152, 4 + 24 + 16 = 44 bytes -> 196; levels aligned to
    # lcm(16, 4) = 16 (spec 3.12), smallest first: level 2 at 208, level 1 at 224, level 0 at 240; file 256.
    levels = [photo_like(4, 0)[: 4 >> i, : 4 >> i] for i in range(3)]
    data, _ = K.encode_ktx2(levels, "bc7", cubemap=False, writer_keys=False)
    hdr = struct.unpack_from("<9I", data, 12)
    assert hdr == (145, 1, 4, 4, 0, 0, 1, 3, 0)  # typeSize 1 for block formats (spec 3.5)
    assert struct.unpack_from("<4I2Q", data, 48) == (152, 44, 0, 0, 0, 0)
    index = [struct.unpack_from("<3Q", data, 80 + 24 * i) for i in range(3)]
    assert index == [(240, 16, 16), (224, 16, 16), (208, 16, 16)]
    assert len(data) == 256 and data[196:208] == b"\0" * 12


@pytest.mark.parametrize("name", BLOCK_FORMATS)
def test_dfd_of_block_formats(name):
    # Data Format spec section 5: colorModel, texelBlockDimension 3,3,0,0 (4x4x1x1 minus one), bytesPlane0 =
    # block bytes, one 64/128-bit sample per block part; transfer sRGB 2 / linear 1
    fmt = K.get_format(name)
    dfd = K.dfd_bytes(fmt)
    n = {"bc3": 2, "bc5": 2}.get(fmt.block, 1)
    assert len(dfd) == 4 + 24 + 16 * n
    assert struct.unpack_from("<I", dfd)[0] == len(dfd)
    model, primaries, transfer, flags = dfd[12:16]
    assert (model, primaries, transfer, flags) == (MODEL[fmt.block], 1, 2 if fmt.srgb else 1, 0)
    assert tuple(dfd[16:20]) == (3, 3, 0, 0)
    assert dfd[20] == (8 if fmt.block in ("bc1", "bc4") else 16) and dfd[21:28] == b"\0" * 7
    words = [struct.unpack_from("<4I", dfd, 28 + 16 * i) for i in range(n)]
    bits = [((w[0] >> 16) & 0xFF) + 1 for w in words]
    offsets = [w[0] & 0xFFFF for w in words]
    assert sum(bits) == 8 * dfd[20] and offsets == [0, 64][:n]
    if fmt.block == "bc5":  # KHR_DF_CHANNEL_BC5_RED 0, GREEN 1
        assert [(w[0] >> 24) & 0xF for w in words] == [0, 1]
    if fmt.block == "bc3":  # alpha (15) in bits 0-63, colour (0) in 64-127
        assert [(w[0] >> 24) & 0xF for w in words] == [15, 0]
    if fmt.block == "bc6h":  # FLOAT qualifier (0x80 in the top byte), unsigned
        assert words[0][0] >> 24 == 0x80


@pytest.mark.parametrize("name", BLOCK_FORMATS + ["rgba16f", "r8"])
def test_zstd_levels_inflate_to_the_uncompressed_level_bytes(name):
    levels_src = _source(name, 16)
    plain, _ = K.encode_ktx2([levels_src], name, cubemap=False, writer_keys=False, quality="fast")
    packed, _ = K.encode_ktx2([levels_src], name, cubemap=False, writer_keys=False, quality="fast", zstd=9)
    assert struct.unpack_from("<I", packed, 12 + 32)[0] == 2  # supercompressionScheme 2 = Zstandard
    assert struct.unpack_from("<I", plain, 12 + 32)[0] == 0
    off0, len0, raw0 = struct.unpack_from("<3Q", plain, 80)
    off, length, raw = struct.unpack_from("<3Q", packed, 80)
    assert raw == raw0 == len0
    inflated = zstandard.ZstdDecompressor().decompress(packed[off:off + length], max_output_size=raw)
    assert inflated == plain[off0:off0 + len0]
    # the DFD keeps bytesPlane0 of the pre-deflation data (spec document revision 5 draft rule)
    dfd_off = struct.unpack_from("<I", packed, 48)[0]
    assert packed[dfd_off + 20] == K.get_format(name).texel_bytes


def test_zstd_levels_are_not_padded():
    # spec 3.12: supercompressed levels carry no mipPadding -> each level starts where the one before ended
    lv0 = fbm(32, 1, channels=2)
    res = T.compress_ktx2(lv0, "bc5", kind="data", zstd=5, report=False)
    n = struct.unpack_from("<I", res.data, 12 + 28)[0]
    index = [struct.unpack_from("<3Q", res.data, 80 + 24 * i) for i in range(n)]
    spans = sorted((off, off + length) for off, length, _ in index)
    assert all(a[1] == b[0] for a, b in zip(spans, spans[1:], strict=False))
    assert spans[-1][1] == len(res.data)


def test_reader_accepts_bytes_plane_zero_of_earlier_revisions():
    res = T.compress_ktx2(fbm(16, 1), "bc4", zstd=3, report=False)
    data = bytearray(res.data)
    dfd_off = struct.unpack_from("<I", data, 48)[0]
    data[dfd_off + 20] = 0  # bytesPlane0 = 0: "unsized", as KTX 2.0 revisions before the current one asked
    t = K.decode_ktx2(bytes(data))
    assert t.supercompressed and t.block_compressed
    plain = bytearray(T.compress_ktx2(fbm(16, 1), "bc4", report=False).data)
    dfd_off = struct.unpack_from("<I", plain, 48)[0]
    plain[dfd_off + 20] = 0  # not allowed without supercompression
    with pytest.raises(BakeryError, match="bytesPlane"):
        K.decode_ktx2(bytes(plain))


@pytest.mark.parametrize("name", BLOCK_FORMATS)
@pytest.mark.parametrize("zstd", [None, 7])
def test_read_back_matches_independent_decoder(tmp_path, name, zstd):
    fmt = K.get_format(name)
    src = _source(name, 24)
    res = T.write_compressed_ktx2(tmp_path / "t.ktx2", src, name, kind="hdr" if fmt.block == "bc6h" else "data",
                                  zstd=zstd, report=False)
    t = K.read_ktx2(res.path)
    assert t.format is fmt and t.block_compressed and t.supercompressed == (zstd is not None)
    assert [lv.shape[:2] for lv in t.levels] == [(24, 24), (12, 12), (6, 6), (3, 3), (1, 1)]
    if fmt.block == "bc6h":
        return  # texture2ddecoder decodes BC6H to 8 bits only (see test_blockcodec)
    plain, _ = K.encode_ktx2(res.levels, fmt, cubemap=False, writer_keys=False)
    off, length, _ = struct.unpack_from("<3Q", plain, 80)
    theirs = t2d_decode(plain[off:off + length], fmt.block, 24, 24)
    ours = t.levels[0].copy()
    if fmt.srgb:
        from bakery.color import linear_to_srgb
        ours[..., :3] = linear_to_srgb(ours[..., :3])
    tol = 1.01 if fmt.block in ("bc1", "bc3") else 0.01  # see test_blockcodec
    assert np.abs(ours - theirs).max() * 255 <= tol


def test_cubemap_bc6h_round_trip(tmp_path):
    faces = np.stack([hdr_sky(8, s) for s in range(6)])
    res = T.write_compressed_ktx2(tmp_path / "c.ktx2", faces, "bc6h", cubemap=True)
    t = K.read_ktx2(res.path)
    assert t.cubemap and t.levels[0].shape == (6, 8, 8, 3) and len(t.levels) == 4
    assert res.report["levels"][0]["log2_rmse_stops"] < 0.2


def test_thread_count_does_not_change_the_file():
    src = photo_like(96, 3)
    one = T.compress_ktx2(src, "bc7-srgb", quality="fast", threads=1, report=False).data
    assert T.compress_ktx2(src, "bc7-srgb", quality="fast", threads=2, report=False).data == one
    assert T.compress_ktx2(src, "bc7-srgb", quality="fast", threads=5, report=False).data == one


def test_bc5_normal_map_key_values_and_renormalization():
    nm = fbm_normals(32, 4)
    nm_scaled = (nm - 0.5) * 0.7 + 0.5  # vectors of length 0.7: renormalized before compression
    res = T.compress_ktx2(nm_scaled, "bc5")
    t = K.decode_ktx2(res.data)
    assert t.key_values[T.NORMAL_KEY] == (T.NORMAL_XY_VALUE + "\0").encode()
    assert t.key_values[T.ENCODER_KEY].startswith(b"ispc-texcomp 1.0.1 ")
    assert t.levels[0].shape == (32, 32, 2)
    v = t.levels[0] * 2 - 1
    length_xy = np.sqrt((v ** 2).sum(-1))
    assert length_xy.max() <= 1.0 + 4 / 255  # XY of unit vectors, not of the 0.7-long input
    assert res.report["levels"][0]["mean_deg"] < 3.0  # measured 2.85 deg on this steep 32x32 map


def test_refusals():
    with pytest.raises(BakeryError, match="bc5 stores two channels"):
        T.compress_ktx2(photo_like(8, 0), "bc5", kind="color")
    with pytest.raises(BakeryError, match="bc4 stores one channel"):
        K.encode_ktx2([photo_like(8, 0)], "bc4", cubemap=False)
    with pytest.raises(BakeryError, match="unknown map kind"):
        T.compress_ktx2(photo_like(8, 0), "bc7", kind="albedo")
    with pytest.raises(BakeryError, match="quality"):
        T.compress_ktx2(photo_like(8, 0), "bc7", quality="max")
    with pytest.raises(BakeryError, match="zstd level"):
        T.compress_ktx2(photo_like(8, 0), "bc7", zstd=40)
    with pytest.raises(BakeryError, match="NaN"):
        T.compress_ktx2(np.full((4, 4, 3), np.nan, np.float32), "bc7")


def test_bc6h_negative_values_clamp_with_a_count(tmp_path):
    src = hdr_sky(8, 0)
    src[0, :3, 0] = -1.0  # three negative samples
    with pytest.warns(BakeryWarning, match=r"3 sample\(s\) outside the range of bc6h .* 3 of them negative"):
        res = T.write_compressed_ktx2(tmp_path / "n.ktx2", src, "bc6h", mips=False)
    assert res.clamped == 3
    assert (K.read_ktx2(res.path).levels[0] >= 0).all()


# ------------------------------------------------------------------------------------ refusing bad files

def _bc_file(name="bc7", zstd=None):
    return T.compress_ktx2(_source(name, 8), name, kind="hdr" if name == "bc6h" else "data", zstd=zstd,
                           report=False).data


def test_refuses_empty_or_garbage_dfd():
    data = bytearray(_bc_file())
    struct.pack_into("<I", data, 52, 0)  # dfdByteLength 0
    with pytest.raises(BakeryError, match="Data Format Descriptor"):
        K.decode_ktx2(bytes(data))
    data = bytearray(_bc_file())
    dfd_off, dfd_len = struct.unpack_from("<2I", data, 48)
    data[dfd_off + 4:dfd_off + dfd_len] = bytes(range(7, 7 + dfd_len - 4))
    with pytest.raises(BakeryError, match="Data Format Descriptor"):
        K.decode_ktx2(bytes(data))


def test_refuses_level_data_inside_the_header():
    data = bytearray(_bc_file())
    struct.pack_into("<Q", data, 80, 16)  # level 0 byteOffset 16: inside the header
    with pytest.raises(BakeryError, match="inside the header"):
        K.decode_ktx2(bytes(data))


def test_refuses_vk_format_swapped_for_one_of_the_same_size():
    # R8G8B8A8_UNORM (37) relabelled R8G8B8A8_SRGB (43): the DFD's linear transfer function disagrees
    data = bytearray(K.encode_ktx2([photo_like(4, 0)], "rgba8", cubemap=False)[0])
    struct.pack_into("<I", data, 12, 43)
    with pytest.raises(BakeryError, match="transferFunction"):
        K.decode_ktx2(bytes(data))
    data = bytearray(_bc_file("bc7"))
    struct.pack_into("<I", data, 12, 146)  # BC7 linear -> sRGB
    with pytest.raises(BakeryError, match="transferFunction"):
        K.decode_ktx2(bytes(data))
    data = bytearray(_bc_file("bc5"))
    struct.pack_into("<I", data, 12, 145)  # BC5 -> BC7: same block size, other colour model
    with pytest.raises(BakeryError, match="colorModel"):
        K.decode_ktx2(bytes(data))


def test_refuses_corrupt_zstd_level():
    data = bytearray(_bc_file("bc7", zstd=3))
    off, length, _ = struct.unpack_from("<3Q", data, 80)
    data[off:off + length] = b"\x55" * length
    with pytest.raises(BakeryError, match="Zstandard"):
        K.decode_ktx2(bytes(data))


def _fuzz(count, seed):
    rng = np.random.default_rng(seed)
    files = [_bc_file(n, z) for n in BLOCK_FORMATS for z in (None, 5)]
    outcomes = {"refused": 0, "read": 0}
    for _ in range(count):
        raw = bytearray(files[rng.integers(len(files))])
        kind = rng.integers(4)
        if kind == 0:  # bytes in the header, index and DFD
            for _ in range(rng.integers(1, 6)):
                raw[rng.integers(0, min(len(raw), 260))] = rng.integers(256)
        elif kind == 1:  # a header/index field set to a boundary value
            pos = 12 + 4 * rng.integers(0, 23)
            struct.pack_into("<I", raw, pos, int(rng.choice([0, 1, 2, 3, 16, 0xFFFFFFFF, len(raw), 1 << 20])))
        elif kind == 2:  # anywhere
            for _ in range(rng.integers(1, 10)):
                raw[rng.integers(len(raw))] = rng.integers(256)
        else:  # truncated
            raw = raw[: rng.integers(len(raw))]
        try:
            t = K.decode_ktx2(bytes(raw))
        except BakeryError as exc:
            assert "\n" not in str(exc)
            outcomes["refused"] += 1
            continue
        assert t.levels and all(lv.dtype == np.float32 for lv in t.levels)
        outcomes["read"] += 1
    return outcomes


def test_fuzz_malformed_files_give_bakery_errors_only():
    out = _fuzz(400, seed=13)
    assert out["refused"] > 200  # most mutants touch checked fields


@pytest.mark.slow
def test_fuzz_many_malformed_files():
    _fuzz(4000, seed=14)


# -------------------------------------------------------------------------------------------- quality

def test_bc5_fbm_normal_map_angular_error():
    # 256^2 periodic fBm normal map, BC5 fast, level 0; decoded independently (texture2ddecoder), z rebuilt
    # as sqrt(1 - x^2 - y^2) (glTF 2.0 normalTexture convention, XY in [-1, 1]). Measured: mean 1.286 deg.
    nm = fbm_normals(256, 1)
    res = T.compress_ktx2(nm, "bc5", quality="fast", report_texels=None)
    plain, _ = K.encode_ktx2([res.levels[0][..., :2]], "bc5", cubemap=False)
    off, length, _ = struct.unpack_from("<3Q", plain, 80)
    xy = t2d_decode(plain[off:off + length], "bc5", 256, 256) * 2 - 1
    z = np.sqrt(np.maximum(0, 1 - (xy ** 2).sum(-1)))
    dec = np.concatenate([xy, z[..., None]], -1)
    ref = res.levels[0] * 2 - 1
    cosang = (dec * ref).sum(-1) / np.linalg.norm(dec, axis=-1) / np.linalg.norm(ref, axis=-1)
    mean = float(np.degrees(np.arccos(np.clip(cosang, -1, 1))).mean())
    assert 1.2 < mean < 1.37
    assert res.report["levels"][0]["mean_deg"] == pytest.approx(mean, abs=0.02)


def test_bc7_fast_photo_like_psnr():
    # 256^2 photo-like linear image, BC7 (linear) fast, level 0 through texture2ddecoder. Measured: 40.65 dB (RGB).
    src = photo_like(256, 2)
    res = T.compress_ktx2(src, "bc7", quality="fast", report_texels=None)
    plain, _ = K.encode_ktx2([res.levels[0]], "bc7", cubemap=False, quality="fast")
    off, length, _ = struct.unpack_from("<3Q", plain, 80)
    dec = t2d_decode(plain[off:off + length], "bc7", 256, 256)
    mse = float(np.mean((dec[..., :3].astype(np.float64) - src) ** 2))
    psnr = 10 * np.log10(1 / mse)
    assert 40.35 < psnr < 40.95
    rep = res.report["levels"][0]["psnr_db"]
    assert rep[3] > 60  # opaque alpha: the encoder's opaque profile still moves a few alphas (measured 64.8 dB)
    # the report's per-channel figures agree with the independent decode: mean of the channel MSEs
    mse_rep = np.mean([10 ** (-v / 10) for v in rep[:3]])
    assert 10 * np.log10(1 / mse_rep) == pytest.approx(psnr, abs=0.01)


def test_bc6h_fast_hdr_stops():
    # 256^2 HDR sky (12 stops), BC6H fast, read back through bakery's reader (texture2ddecoder has no float
    # output). Measured: 0.0371 stops log2 RMSE, median relative error 1.67 %.
    src = hdr_sky(256, 3)
    res = T.compress_ktx2(src, "bc6h", quality="fast", mips=False, report_texels=None)
    dec = K.decode_ktx2(res.data).levels[0]
    floor = 2.0 ** -14
    d = np.log2(np.maximum(dec, floor)) - np.log2(np.maximum(src, floor))
    stops = float(np.sqrt(np.mean(d.astype(np.float64) ** 2)))
    assert 0.033 < stops < 0.041
    assert res.report["levels"][0]["log2_rmse_stops"] == pytest.approx(stops, abs=1e-4)


def test_report_for_uncompressed_formats():
    # the report also measures plain formats: 8-bit quantisation of [0, 1] data gives about
    # 10 log10(12 * 255^2) = 58.9 dB (uniform rounding error of half a step); rgba16f of HDR a tiny error
    res = T.compress_ktx2(fbm(64, 1), "r8", mips=False)
    assert res.report["levels"][0]["psnr_db"][0] == pytest.approx(10 * np.log10(12 * 255 ** 2), abs=0.3)
    assert res.report["encoder"] is None and res.summary.startswith("r8: 1 level(s)")
    rep = T.compress_ktx2(hdr_sky(32, 1), "rgba16f", mips=False).report["levels"][0]
    assert rep["log2_rmse_stops"] < 2 ** -11  # half floats keep 11 significant bits


def test_report_is_json_and_samples_large_levels():
    src = photo_like(512, 1)
    res = T.compress_ktx2(src, "bc7-srgb", quality="fast", report_texels=1 << 14)
    rep = json.loads(json.dumps(res.report, allow_nan=False))
    lv0 = rep["levels"][0]
    assert lv0["block_row_step"] == 16 and rep["levels"][-1]["block_row_step"] == 1
    assert {"psnr_db", "psnr_linear_db"} <= set(lv0)
    full = T.compress_ktx2(src, "bc7-srgb", quality="fast", report_texels=None).report["levels"][0]
    assert abs(lv0["psnr_db"][0] - full["psnr_db"][0]) < 1.0  # the sampled estimate stays close
    assert res.summary.startswith("bc7-srgb (fast, ispc-texcomp 1.0.1): 10 level(s)")
    assert "\n" not in res.summary
