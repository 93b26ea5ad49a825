"""Channel packing (``bakery.packing`` and the ``pack`` bake).

Outputs are read back with readers independent of bakery's own (imageio's Pillow plugin for 8-bit PNG, tifffile,
the ASWF OpenEXR bindings, OpenCV's own 16-bit PNG decoder called directly, a KTX2 header walk written here per
the KTX 2.0 specification with texture2ddecoder for BC7 blocks); mip levels are checked against computations
written here: the block mean of numpy reshapes (the area-weighted box of a power-of-two level), the sRGB transfer
of IEC 61966-2-1:1999 (section 5) in float64, premultiplied alpha (Porter & Duff 1984), and the ``antialias``
bake's own chain files.
"""

import json
import struct

import cv2
import imageio.v3 as iio
import numpy as np
import OpenEXR
import pytest
import tifffile

from bakery.bakes import get_bake, params_from_mapping, run_bake
from bakery.bakes.pack import PackParams
from bakery.errors import BakeryError
from bakery.io import write_image
from bakery.packing import PackedChannel, pack_levels

RNG = np.random.default_rng(20261202)


def pack(tmp_path, inputs, out, **params):
    return run_bake("pack", {k: tmp_path / v for k, v in inputs.items()}, tmp_path / out,
                    params_from_mapping(get_bake("pack"), params, "test"))


def smooth(size, seed, lo=0.05, hi=0.95):
    """A smooth random field in [lo, hi] (tiling, low frequencies only)."""
    rng = np.random.default_rng(seed)
    f = np.zeros((size, size), complex)
    f[:4, :4] = rng.normal(size=(4, 4)) + 1j * rng.normal(size=(4, 4))
    v = np.fft.ifft2(f).real
    v = (v - v.min()) / (v.max() - v.min())
    return (lo + (hi - lo) * v).astype(np.float32)


# ---------------------------------------------------------------------------------------- independent readers


def png8(path):
    a = iio.imread(path, plugin="pillow")
    return a[:, :, None] if a.ndim == 2 else a


def png16(path):
    a = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)  # OpenCV's decoder, called directly
    assert a.dtype == np.uint16
    return a[:, :, None] if a.ndim == 2 else np.concatenate([a[:, :, 2::-1], a[:, :, 3:]], axis=2)


def exr(path):
    with OpenEXR.File(str(path)) as f:
        ch = {k: np.array(v.pixels) for k, v in f.channels().items()}
    if "RGBA" in ch or "RGB" in ch:  # the bindings may group interleaved channels
        return ch.get("RGBA", ch.get("RGB"))
    names = [n for n in ("R", "G", "B", "A", "Y") if n in ch]
    return np.stack([ch[n] for n in names], axis=2)


def ktx2_levels(path):
    """(vkFormat, width, height, [level bytes]) by the KTX 2.0 file layout (section 3: header, level index)."""
    import zstandard

    data = path.read_bytes()
    assert data[:12] == b"\xabKTX 20\xbb\r\n\x1a\n"
    vk, _, w, h, _, _, _, count, scheme = struct.unpack_from("<9I", data, 12)
    out = []
    for k in range(max(1, count)):
        off, length, full = struct.unpack_from("<3Q", data, 80 + 24 * k)
        raw = data[off:off + length]
        out.append(zstandard.ZstdDecompressor().decompress(raw, max_output_size=full) if scheme == 2 else raw)
    return vk, w, h, out


# ---------------------------------------------------------------------------------------- references


def srgb_decode(c):
    """IEC 61966-2-1:1999, section 5.2 (float64)."""
    c = np.asarray(c, np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def srgb_encode(l):
    """IEC 61966-2-1:1999, section 5.3 (float64)."""
    l = np.asarray(l, np.float64)
    return np.where(l <= 0.0031308, 12.92 * l, 1.055 * np.maximum(l, 0) ** (1 / 2.4) - 0.055)


def block_mean(a, k):
    """Mean over 2^k x 2^k blocks (the box mip of level k of a power-of-two map), float64."""
    s = 2 ** k
    h, w = a.shape[:2]
    return np.asarray(a, np.float64).reshape(h // s, s, w // s, s, *a.shape[2:]).mean(axis=(1, 3))


# ---------------------------------------------------------------------------------------- level 0: bit for bit


@pytest.fixture
def maps8(tmp_path):
    occ = RNG.random((64, 48)).astype(np.float32)
    rgb = RNG.random((64, 48, 3)).astype(np.float32)
    write_image(tmp_path / "occ.png", occ, bits="8")
    write_image(tmp_path / "rgb.png", rgb, bits="8")
    return tmp_path


def test_level0_is_each_source_channel_bit_for_bit_8bit_png(maps8):
    t = maps8
    pack(t, {"r": "occ.png", "g": "rgb.png", "b": "rgb.png", "a": "rgb.png"}, "out.png",
         **{"g-channel": "b", "b-channel": "r", "a-channel": "g", "a-invert": True})
    out, occ, rgb = png8(t / "out.png"), png8(t / "occ.png"), png8(t / "rgb.png")
    assert out.dtype == np.uint8 and out.shape == (64, 48, 4)
    assert np.array_equal(out[:, :, 0], occ[:, :, 0])
    assert np.array_equal(out[:, :, 1], rgb[:, :, 2])
    assert np.array_equal(out[:, :, 2], rgb[:, :, 0])
    assert np.array_equal(out[:, :, 3], 255 - rgb[:, :, 1])  # inverted: 1 - v, exactly 255 - code


def test_level0_bit_for_bit_16bit_png_and_tiff(tmp_path):
    a = RNG.random((32, 32)).astype(np.float32)
    b = RNG.random((32, 32, 3)).astype(np.float32)
    write_image(tmp_path / "a.png", a, bits="16")
    write_image(tmp_path / "b.png", b, bits="16")
    pack(tmp_path, {"r": "b.png", "g": "a.png", "b": "b.png"}, "out.png", **{"r-channel": "g", "g-invert": True})
    pack(tmp_path, {"r": "b.png", "g": "a.png", "b": "b.png"}, "out.tif", **{"r-channel": "g", "g-invert": True})
    src_a, src_b = png16(tmp_path / "a.png"), png16(tmp_path / "b.png")
    for out in (png16(tmp_path / "out.png"), tifffile.imread(tmp_path / "out.tif")):
        assert out.dtype == np.uint16
        assert np.array_equal(out[:, :, 0], src_b[:, :, 1])
        assert np.array_equal(out[:, :, 1], 65535 - src_a[:, :, 0])
        assert np.array_equal(out[:, :, 2], src_b[:, :, 2])


@pytest.mark.parametrize("bits", ["half", "float"])
def test_level0_bit_for_bit_exr(tmp_path, bits):
    a = (RNG.normal(size=(16, 24)) * 3).astype(np.float32)  # float data is never clipped or rescaled
    b = RNG.random((16, 24, 4)).astype(np.float32)
    write_image(tmp_path / "a.exr", a, bits=bits)
    write_image(tmp_path / "b.exr", b, bits=bits)
    pack(tmp_path, {"r": "a.exr", "g": "b.exr", "b": "b.exr", "a": "b.exr"}, "out.exr",
         **{"g-channel": "a", "b-channel": "b", "a-channel": "r"})
    out, sa, sb = exr(tmp_path / "out.exr"), exr(tmp_path / "a.exr"), exr(tmp_path / "b.exr")
    assert out.dtype == (np.float16 if bits == "half" else np.float32)
    for got, want in ((out[:, :, 0], sa[:, :, 0]), (out[:, :, 1], sb[:, :, 3]), (out[:, :, 2], sb[:, :, 2]),
                      (out[:, :, 3], sb[:, :, 0])):
        assert np.array_equal(got.view(np.uint16 if bits == "half" else np.uint32),
                              want.view(np.uint16 if bits == "half" else np.uint32))


def test_manifest_channels_key(maps8):
    t = maps8
    written = pack(t, {"r": "occ.png", "g": "rgb.png"}, "out.png", **{"r-role": "occlusion", "g-channel": "b",
                                                                      "g-role": "roughness", "b-constant": 0.25})
    m = json.loads((t / "out.png.bakery.json").read_text())
    assert m["bake"] == "pack" and sorted(p.name for p in written) == ["out.png", "out.png.bakery.json"]
    assert m["channels"] == {
        "r": {"role": "occlusion", "source": "occ.png", "channel": "r", "invert": False, "constant": None},
        "g": {"role": "roughness", "source": "rgb.png", "channel": "b", "invert": False, "constant": None},
        "b": {"role": "constant", "source": None, "channel": None, "invert": False, "constant": 0.25}}
    assert np.all(png8(t / "out.png")[:, :, 2] == 64)  # rint(0.25 * 255) = 64 (ties to even: 63.75 -> 64)


# ---------------------------------------------------------------------------------------- mip rules


def test_masks_average_linearly_and_constants_stay(tmp_path):
    occ = RNG.random((64, 64)).astype(np.float32)
    met = (RNG.random((64, 64)) > 0.5).astype(np.float32)
    write_image(tmp_path / "occ.exr", occ, bits="float")
    write_image(tmp_path / "met.exr", met, bits="float")
    written = pack(tmp_path, {"r": "occ.exr", "b": "met.exr"}, "m.exr", mips=True,
                   **{"r-role": "occlusion", "b-role": "metalness", "g-constant": 0.5})
    assert len([p for p in written if p.suffix == ".exr"]) == 7  # 64 -> 1: seven levels
    for k in range(1, 7):
        lv = exr(tmp_path / f"m.mip{k:02d}.exr")
        # the box mip of a power-of-two map is the block mean; float32 halving steps stay within 6e-8 (measured)
        np.testing.assert_allclose(lv[:, :, 0], block_mean(occ, k), atol=1e-6)
        np.testing.assert_allclose(lv[:, :, 2], block_mean(met, k), atol=1e-6)
        assert np.all(lv[:, :, 1] == np.float32(0.5))


def test_colour_channels_average_in_linear_light(tmp_path):
    rgb = RNG.random((32, 32, 3)).astype(np.float32)
    write_image(tmp_path / "albedo.png", rgb, bits="8")
    write_image(tmp_path / "rough.png", smooth(32, 3), bits="8")
    pack(tmp_path, {"r": "albedo.png", "g": "albedo.png", "b": "albedo.png", "a": "rough.png"}, "c.png", mips=True,
         **{"r-role": "color", "g-role": "color", "b-role": "color", "a-role": "roughness"})
    src = png8(tmp_path / "albedo.png").astype(np.float64) / 255
    rough = png8(tmp_path / "rough.png")[:, :, 0].astype(np.float64) / 255
    worst = 0
    for k in range(1, 6):
        got = png8(tmp_path / f"c.mip{k:02d}.png").astype(np.float64)
        want = srgb_encode(block_mean(srgb_decode(src), k)) * 255
        worst = max(worst, np.abs(got[:, :, :3] - want).max())
        # the roughness map in A is data: averaged as stored, never through the sRGB curve
        assert np.abs(got[:, :, 3] - block_mean(rough, k) * 255).max() <= 0.5 + 1e-3
    assert worst <= 0.5 + 1e-3  # measured 0.5: rounding to the nearest code only
    # and not what an sRGB-blind average gives (measured: 19 codes off on average on uniform noise)
    naive = block_mean(src, 1) * 255
    assert np.abs(png8(tmp_path / "c.mip01.png")[:, :, :3] - naive).mean() > 5


def test_colour_with_alpha_is_premultiplied(tmp_path):
    rgb = RNG.random((16, 16, 3)).astype(np.float32)
    alpha = (RNG.random((16, 16)) > 0.4).astype(np.float32)
    write_image(tmp_path / "albedo.png", rgb, bits="8")
    write_image(tmp_path / "cut.png", alpha, bits="8")
    pack(tmp_path, {"r": "albedo.png", "g": "albedo.png", "b": "albedo.png", "a": "cut.png"}, "c.png", mips=True,
         levels=2, **{"r-role": "color", "g-role": "color", "b-role": "color", "a-role": "alpha"})
    lin = srgb_decode(png8(tmp_path / "albedo.png").astype(np.float64) / 255)
    a = alpha.astype(np.float64)[:, :, None]
    # Porter & Duff 1984: the straight colour of the average is sum(alpha * colour) / sum(alpha)
    want = srgb_encode(block_mean(lin * a, 1) / np.maximum(block_mean(a, 1), 1e-12)) * 255
    got = png8(tmp_path / "c.mip01.png").astype(np.float64)
    covered = block_mean(a, 1)[:, :, 0] > 0
    assert np.abs(got[:, :, :3] - want)[covered].max() <= 0.5 + 1e-3
    assert np.abs(got[:, :, 3] - block_mean(a, 1)[:, :, 0] * 255).max() <= 0.5 + 1e-3


def bumpy_normals(size, seed):
    rng = np.random.default_rng(seed)
    n = rng.normal(size=(size, size, 3)) * 0.3
    n[..., 2] = 1
    return (n / np.linalg.norm(n, axis=-1, keepdims=True) * 0.5 + 0.5).astype(np.float32)


@pytest.fixture
def chain(tmp_path):
    """An antialias chain over a bumpy normal map (the bake's own files are the reference)."""
    write_image(tmp_path / "n.png", bumpy_normals(32, 5), bits="8")
    write_image(tmp_path / "rough.png", smooth(32, 6, 0.2, 0.6), bits="8")
    run_bake("antialias", {"normal": tmp_path / "n.png", "roughness": tmp_path / "rough.png"},
             tmp_path / "rough_aa.png")
    return tmp_path


def test_roughness_takes_the_antialias_chain_level_by_level(chain):
    t = chain
    write_image(t / "occ.png", RNG.random((32, 32)).astype(np.float32), bits="8")
    pack(t, {"r": "occ.png", "g": "rough_aa.png", "a": "rough_aa.png"}, "orm.png", mips=True,
         **{"b-constant": 1.0, "a-invert": True})
    m = json.loads((t / "orm.png.bakery.json").read_text())
    assert m["channels"]["g"]["role"] == "roughness"  # from the chain's manifest
    assert m["channels"]["a"]["role"] == "smoothness"  # its inverse
    assert m["roughness_chains"]["g"][1] == "rough_aa.mip01.png"
    plain = block_mean(png8(t / "rough.png")[:, :, 0].astype(np.float64), 1)
    for k in range(1, 6):
        got = png8(t / f"orm.mip{k:02d}.png")
        level = png8(t / f"rough_aa.mip{k:02d}.png")[:, :, 0]
        assert np.array_equal(got[:, :, 1], level)
        assert np.array_equal(got[:, :, 3], 255 - level)
        assert np.all(got[:, :, 2] == 255)
    # the chain is wider than a plain average of the roughness map (the normals' spread is added)
    assert png8(t / "orm.mip01.png")[:, :, 1].mean() > plain.mean() + 2


def test_roughness_map_that_is_not_a_chain_is_averaged(tmp_path):
    r = RNG.random((16, 16)).astype(np.float32)
    write_image(tmp_path / "r.exr", r, bits="float")
    pack(tmp_path, {"g": "r.exr"}, "mr.exr", mips=True, **{"g-role": "roughness"})
    np.testing.assert_allclose(exr(tmp_path / "mr.mip02.exr")[:, :, 1], block_mean(r, 2), atol=1e-6)


def test_a_resampled_chain_still_gives_its_levels_where_sizes_match(chain):
    t = chain
    write_image(t / "occ64.png", RNG.random((64, 64)).astype(np.float32), bits="8")
    pack(t, {"r": "occ64.png", "g": "rough_aa.png"}, "big.png", mips=True, resample=True)
    assert png8(t / "big.png").shape[:2] == (64, 64)
    # level 1 of the 64 texel texture is 32 texels: the chain's own level 0
    assert np.array_equal(png8(t / "big.mip01.png")[:, :, 1], png8(t / "rough_aa.png")[:, :, 0])
    assert np.array_equal(png8(t / "big.mip03.png")[:, :, 1], png8(t / "rough_aa.mip02.png")[:, :, 0])


def test_pack_levels_core_constant_and_mask():
    mask = np.arange(16, dtype=np.float32).reshape(4, 4) / 15
    lv = pack_levels([PackedChannel("mask", mask), PackedChannel("constant", constant=0.75)], levels=3)
    assert [x.shape for x in lv] == [(4, 4, 2), (2, 2, 2), (1, 1, 2)]
    np.testing.assert_allclose(lv[2][0, 0, 0], mask.mean(), atol=1e-7)
    assert np.all(lv[1][:, :, 1] == np.float32(0.75))
    assert lv[0][:, :, 0] is not mask and np.array_equal(lv[0][:, :, 0], mask)


# ---------------------------------------------------------------------------------------- KTX2


def test_ktx2_uncompressed_holds_the_source_bytes(maps8):
    t = maps8
    pack(t, {"r": "occ.png", "g": "rgb.png", "b": "rgb.png"}, "p.ktx2", mips=True)
    vk, w, h, levels = ktx2_levels(t / "p.ktx2")
    assert (vk, w, h, len(levels)) == (37, 48, 64, 7)  # VK_FORMAT_R8G8B8A8_UNORM = 37 (Vulkan spec)
    lv0 = np.frombuffer(levels[0], np.uint8).reshape(64, 48, 4)
    assert np.array_equal(lv0[:, :, 0], png8(t / "occ.png")[:, :, 0])
    assert np.array_equal(lv0[:, :, 1:3], png8(t / "rgb.png")[:, :, 1:3])
    assert np.all(lv0[:, :, 3] == 255)


def test_ktx2_bc7_decodes_close_to_the_sources(tmp_path):
    import texture2ddecoder

    occ, rough, met = smooth(64, 1), smooth(64, 2), smooth(64, 3)
    for name, v in (("occ", occ), ("rough", rough), ("met", met)):
        write_image(tmp_path / f"{name}.png", v, bits="8")
    pack(tmp_path, {"r": "occ.png", "g": "rough.png", "b": "met.png"}, "orm.ktx2", mips=True,
         **{"ktx2-format": "compressed", "zstd": 3})
    vk, w, h, levels = ktx2_levels(tmp_path / "orm.ktx2")
    assert vk == 145 and len(levels) == 7  # VK_FORMAT_BC7_UNORM_BLOCK (a data texture: not the sRGB 146)
    bgra = np.frombuffer(texture2ddecoder.decode_bc7(levels[0], 64, 64), np.uint8).reshape(64, 64, 4)
    got = bgra[:, :, [2, 1, 0]].astype(np.int32)
    want = np.stack([png8(tmp_path / f"{n}.png")[:, :, 0] for n in ("occ", "rough", "met")], axis=2)
    err = np.abs(got - want)
    psnr = 10 * np.log10(255.0 ** 2 / np.mean(err.astype(np.float64) ** 2))
    assert psnr > 36 and err.max() <= 20  # measured: 39.4 dB, max 13 codes (three unrelated fields in BC7)
    assert np.all(bgra[:, :, 3] == 255)
    m = json.loads((tmp_path / "orm.ktx2.bakery.json").read_text())
    assert m["ktx2_format"] == "bc7" and m["quality"]["orm.ktx2"]["format"] == "bc7"


# ---------------------------------------------------------------------------------------- refusals


def test_maps_of_different_sizes_are_refused_with_their_sizes(tmp_path):
    write_image(tmp_path / "a.png", np.zeros((32, 32), np.float32))
    write_image(tmp_path / "b.png", np.zeros((16, 16), np.float32))
    with pytest.raises(BakeryError, match=r"a\.png 32x32.*b\.png 16x16.*--resample"):
        pack(tmp_path, {"r": "a.png", "g": "b.png"}, "out.png")
    assert not (tmp_path / "out.png").exists()
    pack(tmp_path, {"r": "a.png", "g": "b.png"}, "out.png", resample=True)
    assert png8(tmp_path / "out.png").shape == (32, 32, 3)


@pytest.mark.parametrize("params, message", [
    ({"r-channel": "x"}, "r-channel must be one of r, g, b, a"),
    ({"g-constant": float("nan")}, "g-constant must be a finite number"),
    ({"g-constant": 1.5}, "g-constant must be at most 1"),
    ({"g-constant": -0.1}, "g-constant must be at least 0"),
    ({"g-role": "shininess"}, "g-role must be one of"),
    ({"levels": 3}, "levels goes with mips"),
    ({"b-constant": 0.5, "b-invert": True}, "b-invert applies to a map"),
])
def test_bad_parameters(params, message):
    with pytest.raises(BakeryError, match=message):
        params_from_mapping(get_bake("pack"), params, "test")


def test_bad_inputs_name_the_file_or_option(maps8):
    t = maps8
    cases = [
        ({"r": "occ.png"}, {"r-constant": 1.0}, "occ.png: R has both a map"),
        ({"r": "occ.png"}, {"g-channel": "r"}, "--g-channel needs a map for G"),
        ({"a": "rgb.png"}, {}, "rgb.png: map has 3 channels and no A"),
        ({"r": "occ.png"}, {"r-channel": "a"}, "occ.png: grey map has no alpha"),
        ({}, {"r-constant": 1.0}, "nothing to pack"),
        ({"r": "missing.png"}, {}, "missing.png: file not found"),
    ]
    for inputs, params, message in cases:
        with pytest.raises(BakeryError, match=message):
            pack(t, inputs, "out.png", **params)
    with pytest.raises(BakeryError, match="output path is also an input"):
        pack(t, {"r": "occ.png"}, "occ.png")
    with pytest.raises(BakeryError, match="not .jpg"):
        pack(t, {"r": "occ.png"}, "out.jpg")
    assert not (t / "out.png").exists()


def test_an_output_level_may_not_be_a_chain_level(chain):
    t = chain
    with pytest.raises(BakeryError, match="output path is also an input"):
        pack(t, {"g": "rough_aa.png"}, "rough_aa.mip01.png", mips=True)
    assert png8(t / "rough_aa.mip01.png").shape[:2] == (16, 16)  # untouched


def test_a_changed_chain_level_is_refused(chain):
    t = chain
    write_image(t / "rough_aa.mip02.png", np.zeros((8, 8), np.float32), bits="8")
    with pytest.raises(BakeryError, match="rough_aa.mip02.png is missing or changed"):
        pack(t, {"g": "rough_aa.png"}, "out.png", mips=True)


def test_params_declaration_is_light():
    # a dataclass of plain values; the recipe words are the command options
    p = PackParams(r_constant=1, g_role="roughness")
    assert p.r_constant == 1.0 and p.g_role == "roughness" and p.bits is None
