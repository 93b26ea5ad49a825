"""KTX 2.0 writer and reader (bakery.io.ktx2).

Sources: Khronos "KTX File Format Specification, version 2.0" (identifier 3.1, header 3.4, index 3.5-3.8,
level index 3.9, DFD 3.10, key/value data 3.11, level data order and mipPadding 3.12); Khronos "Data Format
Specification 1.3", basic descriptor block (section 5) and its B10G11R11 / E5B9G9R9 examples; Vulkan 1.3
specification, unsigned 11/10-bit floats and the shared-exponent encoding (from EXT_texture_shared_exponent).
Layout numbers: docs/references.md, section 12 (computed from the specification).
"""

import struct
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bakery.errors import BakeryError, BakeryWarning
from bakery.io import ktx2 as K

IDENT = bytes([0xAB, 0x4B, 0x54, 0x58, 0x20, 0x32, 0x30, 0xBB, 0x0D, 0x0A, 0x1A, 0x0A])  # KTX2 spec 3.1


def _cube_levels(n=4, levels=3, c=4, seed=0):
    rng = np.random.default_rng(seed)
    return [rng.random((6, n >> i, n >> i, c), dtype=np.float32) for i in range(levels)]


def test_layout_of_small_cubemap_matches_spec():
    # docs/references.md, section 12 (computed from the KTX2 spec): RGBA16F cube 4x4, 3 levels, no key/value data:
    # DFD at 152 (92 bytes); level 2 at 248, level 1 at 296, level 0 at 488; file 1256 bytes.
    data, clamped = K.encode_ktx2(_cube_levels(), "R16G16B16A16_SFLOAT", cubemap=True, writer_keys=False)
    assert clamped == 0
    assert data[:12] == IDENT
    hdr = struct.unpack_from("<9I", data, 12)
    # vkFormat 97, typeSize 2, 4x4, depth 0, layerCount 0, faceCount 6, levelCount 3, no supercompression
    assert hdr == (97, 2, 4, 4, 0, 0, 6, 3, 0)
    assert struct.unpack_from("<4I2Q", data, 48) == (152, 92, 0, 0, 0, 0)
    index = [struct.unpack_from("<3Q", data, 80 + 24 * i) for i in range(3)]
    assert index == [(488, 768, 768), (296, 192, 192), (248, 48, 48)]
    assert len(data) == 1256
    # level data smallest first, each level aligned to lcm(texel size 8, 4) = 8 (spec 3.12 mipPadding)
    assert all(off % 8 == 0 for off, _, _ in index)
    assert data[244:248] == b"\0" * 4


def test_dfd_basic_block_fields_rgba16f():
    # Data Format spec 1.3, section 5: total = 4 + 24 + 16 * samples; RGBSDA model 1, BT709 1, linear 1;
    # sample word 0 = bitOffset | (bitLength-1) << 16 | channelId << 24 | qualifiers << 28
    # (FLOAT 0x80 and SIGNED 0x40 in the top byte); signed float bounds -1.0 / 1.0 as float bits.
    dfd = K.dfd_bytes(K.get_format("R16G16B16A16_SFLOAT"))
    assert len(dfd) == 4 + 24 + 16 * 4 == 92
    total, vendor_type, ver_size = struct.unpack_from("<III", dfd, 0)
    assert total == 92 and vendor_type == 0
    assert ver_size & 0xFFFF == 2 and ver_size >> 16 == 88
    assert tuple(dfd[12:16]) == (1, 1, 1, 0)
    assert tuple(dfd[16:20]) == (0, 0, 0, 0)
    assert dfd[20] == 8  # bytesPlane0
    for i, ch in enumerate((0, 1, 2, 15)):
        w0, pos, lo, hi = struct.unpack_from("<4I", dfd, 28 + 16 * i)
        assert w0 & 0xFFFF == 16 * i
        assert (w0 >> 16) & 0xFF == 15
        assert (w0 >> 24) & 0xF == ch
        assert (w0 >> 24) & 0xF0 == 0xC0  # FLOAT | SIGNED
        assert (pos, lo, hi) == (0, 0xBF800000, 0x3F800000)


def test_dfd_sizes_of_packed_formats():
    # Data Format spec 1.3 examples: B10G11R11 has three float samples with lower bound 0; E5B9G9R9 has six
    # samples (three mantissas, three exponents with the EXPONENT qualifier 0x20), total size 124,
    # mantissa upper 8448, exponent bounds 15..31.
    dfd = K.dfd_bytes(K.get_format("B10G11R11_UFLOAT_PACK32"))
    assert len(dfd) == 4 + 24 + 48
    w0, _, lo, _ = struct.unpack_from("<4I", dfd, 28 + 16 * 2)
    assert w0 & 0xFFFF == 22 and (w0 >> 16) & 0xFF == 9 and (w0 >> 24) == 0x80 | 2 and lo == 0
    dfd = K.dfd_bytes(K.get_format("E5B9G9R9_UFLOAT_PACK32"))
    assert len(dfd) == 124
    mant = struct.unpack_from("<4I", dfd, 28)
    expo = struct.unpack_from("<4I", dfd, 44)
    assert mant[0] == (0 | 8 << 16 | 0 << 24) and mant[2:] == (0, 8448)
    assert expo[0] == (27 | 4 << 16 | 0 << 24 | 0x20 << 24) and expo[2:] == (15, 31)


def test_key_value_data_sorted_and_padded():
    # KTX2 spec 3.11: entries sorted by key, keyAndValueByteLength then key NUL value, padded to 4
    kv = K.kv_bytes({"KTXwriter": "bakery", "KTXorientation": "rd"})
    n0 = struct.unpack_from("<I", kv, 0)[0]
    assert kv[4:4 + n0] == b"KTXorientation\0rd\0" and n0 == 18
    off = 4 + 20  # 18 padded to 20
    n1 = struct.unpack_from("<I", kv, off)[0]
    assert kv[off + 4: off + 4 + n1] == b"KTXwriter\0bakery\0"
    assert len(kv) % 4 == 0


@pytest.mark.parametrize("v, bits", [
    # worked bit patterns, derived from the definitions (Vulkan spec, unsigned 11-bit float: 5-bit exponent
    # bias 15, 6-bit mantissa; value = 2^(e-15)(1 + m/64), denormal 2^-14 m/64)
    (1.0, 15 << 6),
    (0.0, 0),
    (2.0 ** -14 / 64, 1),                  # smallest denormal
    (65024.0, (30 << 6) | 63),             # largest finite: (2 - 2^-6) 2^15
    (1 + 1 / 128, 15 << 6),                # tie between mantissa 0 and 1 -> even (0)
    (1 + 3 / 128, (15 << 6) | 2),          # tie between 1 and 2 -> even (2)
    (1 + 1 / 64 + 1 / 256, (15 << 6) | 1),  # below the tie -> 1
    (3.0, (16 << 6) | 32),                 # 2 * (1 + 32/64)
    (2.0 ** -14 * (127 / 64 / 2) + 2.0 ** -14 / 256, (1 << 6) | 0),  # rounds up from denormal to normal
])
def test_pack_11bit_float(v, bits):
    assert int(K.pack_ufloat(np.array([v]), 5, 6)[0]) == bits
    assert K.unpack_ufloat(np.array([bits]), 5, 6)[0] == pytest.approx(v, rel=2 ** -7, abs=2.0 ** -21)


def test_pack_b10g11r11_worked_words():
    # docs/references.md, section 12 (computed): (1, 1, 1) -> 0x781E03C0; R bits 0-10, G 11-21, B 22-31
    assert int(K.pack_b10g11r11(np.array([1.0, 1.0, 1.0]))) == 0x781E03C0
    # 10-bit largest finite (2 - 2^-5) 2^15 = 64512 -> exponent 30, mantissa 31 in bits 22-31
    assert int(K.pack_b10g11r11(np.array([0.0, 0.0, 64512.0]))) == ((30 << 5) | 31) << 22
    # (0.5, 2, 0): R 0.5 = exponent 14 -> 14 << 6; G 2 = exponent 16 -> (16 << 6) << 11
    assert int(K.pack_b10g11r11(np.array([0.5, 2.0, 0.0]))) == (14 << 6) | ((16 << 6) << 11)


def test_pack_rgb9e5_worked_words():
    # docs/references.md, section 12: (1, 0.5, 0.25) -> 0x81010100 (exponent 16, mantissas 256/128/64); max 65408
    # = 511/512 2^16 -> all ones. Encoding per the Vulkan spec's shared-exponent rules.
    assert int(K.pack_rgb9e5(np.array([1.0, 0.5, 0.25]))) == 0x81010100
    assert int(K.pack_rgb9e5(np.array([65408.0, 65408.0, 65408.0]))) == 0xFFFFFFFF
    # max_s rounding to 2^N bumps the exponent: 511.75 * 2^-8 -> exponent 17, R mantissa 256
    v = 511.75 / 256
    w = int(K.pack_rgb9e5(np.array([v, 0.0, 0.0])))
    assert w >> 27 == 17 and w & 0x1FF == 256
    np.testing.assert_allclose(K.unpack_rgb9e5(np.array([0x81010100])), [[1.0, 0.5, 0.25]])


def test_out_of_range_is_clamped_with_a_counted_warning(tmp_path):
    lv = np.zeros((2, 2, 3), np.float32)
    lv[0, 0] = [1e5, 7e4, 1.0]  # a real sun exceeds half range (65504)
    with pytest.warns(BakeryWarning, match="2 sample"):
        K.write_ktx2(tmp_path / "a.ktx2", [lv], "rgba16f", cubemap=False)
    t = K.read_ktx2(tmp_path / "a.ktx2")
    assert t.levels[0][0, 0, 0] == 65504.0
    with pytest.warns(BakeryWarning, match="2 sample"):  # RGB9E5 tops out at 65408
        K.write_ktx2(tmp_path / "b.ktx2", [lv], "e5b9g9r9-ufloat", cubemap=False)
    neg = lv.copy()
    neg[1, 1] = [-1.0, -2.0, 0.5]  # unsigned floats cannot hold negatives
    with pytest.warns(BakeryWarning, match="4 sample"):
        K.write_ktx2(tmp_path / "d.ktx2", [neg], "b10g11r11-ufloat", cubemap=False)
    assert K.read_ktx2(tmp_path / "d.ktx2").levels[0][1, 1, 0] == 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        K.write_ktx2(tmp_path / "c.ktx2", [lv], "rgba32f", cubemap=False)  # float32 keeps everything
    assert K.read_ktx2(tmp_path / "c.ktx2").levels[0][0, 0, 0] == 1e5


# tolerance per format: half a quantisation step (relative for floats)
TOL = {
    "R8_UNORM": (0.5 / 255, 0), "R8G8_UNORM": (0.5 / 255, 0), "R8G8B8A8_UNORM": (0.5 / 255, 0),
    "R8G8B8A8_SRGB": (0.02, 0), "R16_UNORM": (0.5 / 65535, 0), "R16G16_UNORM": (0.5 / 65535, 0),
    "R16G16B16A16_UNORM": (0.5 / 65535, 0), "R16G16_SFLOAT": (0, 2 ** -11),
    "R16G16B16A16_SFLOAT": (0, 2 ** -11), "R32G32B32A32_SFLOAT": (0, 0),
    "B10G11R11_UFLOAT_PACK32": (0, 2 ** -6), "E5B9G9R9_UFLOAT_PACK32": (2 ** -9 * 4, 2 ** -9),
}


@pytest.mark.parametrize("name", sorted(n for n, f in K.FORMATS.items() if not f.block_compressed))
@pytest.mark.parametrize("cube", [False, True])
def test_write_read_round_trip(tmp_path, name, cube):
    fmt = K.get_format(name)
    rng = np.random.default_rng(3)
    if cube:
        levels = [rng.random((6, 8 >> i, 8 >> i, fmt.channels), dtype=np.float32) for i in range(4)]
    else:
        levels = [rng.random((max(1, 4 >> i), 16 >> i, fmt.channels), dtype=np.float32) for i in range(5)]
    scale = 4.0 if fmt.is_float else 1.0
    levels = [lv * np.float32(scale) for lv in levels]
    p = K.write_ktx2(tmp_path / "t.ktx2", levels, fmt, cubemap=cube)
    t = K.read_ktx2(p)
    assert t.format == fmt and t.cubemap == cube and len(t.levels) == len(levels)
    assert t.key_values["KTXorientation"] == b"rd\0"
    atol, rtol = TOL[name]
    for a, b in zip(t.levels, levels, strict=True):
        assert a.dtype == np.float32 and a.shape == b.shape
        np.testing.assert_allclose(a, b, atol=atol + 1e-12, rtol=rtol)


def test_rgb_input_gets_alpha_one(tmp_path):
    p = K.write_ktx2(tmp_path / "t.ktx2", [np.full((2, 2, 3), 0.5, np.float32)], "rgba16f", cubemap=False)
    assert (K.read_ktx2(p).levels[0][..., 3] == 1).all()


def _valid_bytes():
    return K.encode_ktx2(_cube_levels(), "rgba16f", cubemap=True)[0]


def test_refuses_truncated_file(tmp_path):
    data = _valid_bytes()
    for cut in (5, 40, 100, 200, len(data) - 1):
        p = tmp_path / "cut.ktx2"
        p.write_bytes(data[:cut])
        with pytest.raises(BakeryError, match="cut.ktx2.*(truncated|identifier)"):
            K.read_ktx2(p)


def test_refuses_wrong_identifier(tmp_path):
    p = tmp_path / "x.ktx2"
    p.write_bytes(b"\xabKTX 11\xbb\r\n\x1a\n" + _valid_bytes()[12:])
    with pytest.raises(BakeryError, match="wrong identifier"):
        K.read_ktx2(p)


def test_refuses_inconsistent_sizes(tmp_path):
    data = bytearray(_valid_bytes())
    struct.pack_into("<I", data, 12 + 8, 8)  # pixelWidth 8 while the levels hold 4x4 data
    p = tmp_path / "x.ktx2"
    p.write_bytes(bytes(data))
    with pytest.raises(BakeryError, match="inconsistent|not square|holds"):
        K.read_ktx2(p)
    data = bytearray(_valid_bytes())
    struct.pack_into("<2Q", data, 80 + 8, 760, 760)  # level 0 byteLength and uncompressedByteLength
    p.write_bytes(bytes(data))
    with pytest.raises(BakeryError, match="level 0 holds 760 bytes"):
        K.read_ktx2(p)
    data = bytearray(_valid_bytes())
    struct.pack_into("<I", data, 12, 1000)  # unknown vkFormat
    p.write_bytes(bytes(data))
    with pytest.raises(BakeryError, match="vkFormat 1000 is not supported"):
        K.read_ktx2(p)


def test_missing_file(tmp_path):
    with pytest.raises(BakeryError, match="file not found"):
        K.read_ktx2(tmp_path / "none.ktx2")


@settings(max_examples=150, deadline=None)
@given(st.data())
def test_corrupted_bytes_never_escape_as_other_errors(data):
    # the reader bounds-checks every offset: random corruption gives a BakeryError or a valid texture
    raw = bytearray(_valid_bytes())
    n = data.draw(st.integers(1, 8))
    for _ in range(n):
        i = data.draw(st.integers(0, 260))
        raw[i] = data.draw(st.integers(0, 255))
    cut = data.draw(st.integers(0, len(raw)))
    try:
        t = K.decode_ktx2(bytes(raw[:cut] if data.draw(st.booleans()) else raw))
    except BakeryError:
        return
    assert t.levels
