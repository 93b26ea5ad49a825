"""Image I/O: round trips against independent readers/writers, published encoding values, bad input.

Independent libraries used as references: OpenCV (PNG, JPEG, HDR), tifffile (TIFF), the ASWF OpenEXR bindings
(EXR). Published values: IEC 61966-2-1 (sRGB) and Ward 1991, "Real Pixels", Graphics Gems II (RGBE).
"""

from __future__ import annotations

import os

import cv2
import numpy as np
import OpenEXR
import pytest
import tifffile

from bakery.errors import BakeryError
from bakery.io import read_image, write_image
from bakery.io.images import quantize

RNG = np.random.default_rng(1234)


def _ints(shape, bits):
    top = 255 if bits == "8" else 65535
    return RNG.integers(0, top + 1, size=shape, dtype=np.uint8 if bits == "8" else np.uint16)


def _to_cv(a):
    """RGB(A) -> BGR(A) for OpenCV."""
    if a.ndim == 3 and a.shape[2] >= 3:
        return a[:, :, [2, 1, 0, 3][: a.shape[2]]]
    return a


# ----------------------------------------------------------------------------------- PNG, bit exact


@pytest.mark.parametrize("bits", ["8", "16"])
@pytest.mark.parametrize("channels", [1, 3, 4])
def test_png_written_by_bakery_read_by_opencv(tmp_path, bits, channels):
    ints = _ints((7, 9, channels), bits)
    top = 255 if bits == "8" else 65535
    path = write_image(tmp_path / "a.png", ints.astype(np.float32) / top, bits=bits)
    ref = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    ref = ref[:, :, None] if ref.ndim == 2 else _to_cv(ref)
    assert ref.dtype == ints.dtype
    np.testing.assert_array_equal(ref, ints)


@pytest.mark.parametrize("bits", ["8", "16"])
@pytest.mark.parametrize("channels", [1, 3, 4])
def test_png_written_by_opencv_read_by_bakery(tmp_path, bits, channels):
    ints = _ints((5, 6, channels), bits)
    path = tmp_path / "b.png"
    assert cv2.imwrite(str(path), _to_cv(ints[:, :, 0] if channels == 1 else ints))
    img = read_image(path)
    assert img.bits == bits and img.format == "png" and img.pixels.dtype == np.float32
    top = 255 if bits == "8" else 65535
    np.testing.assert_array_equal(quantize(img.pixels, bits), ints)
    np.testing.assert_array_equal(np.rint(img.pixels * top).astype(np.int64), ints.astype(np.int64))


# ----------------------------------------------------------------------------------- TIFF


@pytest.mark.parametrize("bits", ["8", "16", "float"])
@pytest.mark.parametrize("channels", [1, 3, 4])
def test_tiff_round_trips_with_tifffile(tmp_path, bits, channels):
    if bits == "float":
        data = RNG.normal(0, 100, size=(6, 5, channels)).astype(np.float32)
        values = data
    else:
        data = _ints((6, 5, channels), bits)
        values = data.astype(np.float32) / (255 if bits == "8" else 65535)
    path = write_image(tmp_path / "a.tif", values, bits=bits)
    ref = tifffile.imread(path)
    np.testing.assert_array_equal(ref.reshape(data.shape), data)
    # and the other way round
    other = tmp_path / "b.tiff"
    tifffile.imwrite(other, data[:, :, 0] if channels == 1 else data,
                     photometric="minisblack" if channels == 1 else "rgb")
    img = read_image(other)
    assert img.bits == bits
    if bits == "float":
        np.testing.assert_array_equal(img.pixels, data)
    else:
        np.testing.assert_array_equal(quantize(img.pixels, bits), data)


@pytest.mark.parametrize("writer", ["tifffile", "pil"])
def test_tiff_white_is_zero_and_palette_colour_as_pillow_reads_them(tmp_path, writer):
    """TIFF 6.0 (Adobe 1992), PhotometricInterpretation 0 (white is zero) and 3 (palette colour, RGB through
    the ColorMap); the expected values are Pillow's, an independent reader."""
    from PIL import Image as PILImage

    index = (np.arange(24 * 16).reshape(16, 24) * 7 % 256).astype(np.uint8)
    white, palette = tmp_path / "white.tif", tmp_path / "palette.tif"
    if writer == "tifffile":
        tifffile.imwrite(white, index, photometric="miniswhite")
        levels = np.arange(256)
        cmap = np.stack([levels, 255 - levels, (levels * 3) % 256]) * 257  # 8-bit colours, 0..65535
        tifffile.imwrite(palette, index, photometric="palette", colormap=cmap.astype(np.uint16))
    else:
        PILImage.fromarray(index).convert("P").save(palette)  # ColorMap entries as v * 256
        tifffile.imwrite(white, index, photometric="miniswhite")
    with PILImage.open(white) as im:
        expect_white = np.asarray(im.convert("L"))
    with PILImage.open(palette) as im:
        expect_rgb = np.asarray(im.convert("RGB"))
    img = read_image(white)
    assert img.bits == "8" and img.pixels.shape == (16, 24, 1)
    np.testing.assert_array_equal(quantize(img.pixels[..., 0], "8"), expect_white)
    img = read_image(palette)
    assert img.bits == "8" and img.pixels.shape == (16, 24, 3)
    np.testing.assert_array_equal(quantize(img.pixels, "8"), expect_rgb)


def test_tiff_sixteen_bit_white_is_zero_and_palette(tmp_path):
    """16-bit white-is-zero stores 65535 - v (TIFF 6.0); a ColorMap of other than 8-bit colours gives 16-bit RGB."""
    v = (np.arange(12 * 10).reshape(10, 12) * 541 % 65536).astype(np.uint16)
    tifffile.imwrite(tmp_path / "w16.tif", v, photometric="miniswhite")
    img = read_image(tmp_path / "w16.tif")
    assert img.bits == "16"
    np.testing.assert_array_equal(quantize(img.pixels[..., 0], "16"), 65535 - v)
    cmap = (np.arange(3 * 256).reshape(3, 256) * 85 + 1).astype(np.uint16)
    idx = (v % 256).astype(np.uint8)
    tifffile.imwrite(tmp_path / "p16.tif", idx, photometric="palette", colormap=cmap)
    img = read_image(tmp_path / "p16.tif")
    assert img.bits == "16"
    np.testing.assert_array_equal(quantize(img.pixels, "16"), np.moveaxis(cmap[:, idx], 0, -1))


@pytest.mark.parametrize(("photometric", "said"), [("separated", "CMYK"), ("cielab", r"L\*a\*b\*")])
def test_tiff_colour_spaces_that_are_not_rgb_are_refused(tmp_path, photometric, said):
    path = tmp_path / f"{photometric}.tif"
    data = np.full((8, 8, 4 if photometric == "separated" else 3), 90, np.uint8)
    tifffile.imwrite(path, data, photometric=photometric)
    with pytest.raises(BakeryError, match=f"{said}.*save it as grey or RGB") as err:
        read_image(path)
    assert str(path) in str(err.value)


# ----------------------------------------------------------------------------------- OpenEXR


@pytest.mark.parametrize("bits", ["half", "float"])
@pytest.mark.parametrize("channels", [1, 2, 3, 4])
def test_exr_round_trips_with_openexr(tmp_path, bits, channels):
    dtype = np.float16 if bits == "half" else np.float32
    data = (np.minimum(RNG.lognormal(0, 3, size=(4, 6, channels)), 6e4) * RNG.choice([-1, 1], size=(4, 6, channels)))
    data = data.astype(dtype)  # values representable at the file's precision
    path = write_image(tmp_path / "a.exr", data.astype(np.float32), bits=bits)
    with OpenEXR.File(str(path), separate_channels=True) as f:
        chans = {k: np.array(v.pixels) for k, v in f.channels().items()}
    names = {1: ["Y"], 2: ["R", "G"], 3: ["R", "G", "B"], 4: ["R", "G", "B", "A"]}[channels]
    assert sorted(chans) == sorted(names)
    for i, n in enumerate(names):
        assert chans[n].dtype == dtype
        np.testing.assert_array_equal(chans[n], data[:, :, i])
    img = read_image(path)
    assert img.bits == bits and img.pixels.dtype == np.float32
    np.testing.assert_array_equal(img.pixels, data.astype(np.float32))


@pytest.mark.parametrize("bits", ["half", "float"])
@pytest.mark.parametrize("channels", [1, 2, 3, 4])
def test_exr_written_strip_by_strip_is_the_same_file(tmp_path, bits, channels, monkeypatch):
    """With a progress callback the scanlines go out a strip at a time (the bindings' scanline writer), one
    call per strip, rising to 1; the file is byte for byte the one written in one call, and OpenEXR reads the
    values back exactly."""
    from bakery.io import images

    monkeypatch.setattr(images, "EXR_STRIP_ROWS", 16)
    data = (RNG.random((75, 33, channels)) * 300).astype(np.float32)  # 75 rows: 4 full strips and a part
    seen = []
    a = write_image(tmp_path / "a.exr", data, bits=bits, progress=lambda f, w: seen.append((f, w)))
    b = write_image(tmp_path / "b.exr", data, bits=bits)
    assert a.read_bytes() == b.read_bytes()
    assert [f for f, _ in seen] == [16 / 75, 32 / 75, 48 / 75, 64 / 75, 1.0]
    assert {w for _, w in seen} == {"writing"}
    with OpenEXR.File(str(a), separate_channels=True) as f:
        chans = {k: np.array(v.pixels) for k, v in f.channels().items()}
    names = {1: ["Y"], 2: ["R", "G"], 3: ["R", "G", "B"], 4: ["R", "G", "B", "A"]}[channels]
    dtype = np.float16 if bits == "half" else np.float32
    for i, n in enumerate(names):
        np.testing.assert_array_equal(chans[n], data[:, :, i].astype(dtype))


def test_exr_read_strip_by_strip_gives_the_same_pixels(tmp_path, monkeypatch):
    """With a progress callback OpenEXR files are read a strip of scanlines at a time (one call per strip,
    rising to 1); the pixels equal the one-call read, also for a data window that does not start at 0 and a
    file written by OpenEXR itself with PIZ compression."""
    from bakery.io import images

    monkeypatch.setattr(images, "EXR_STRIP_ROWS", 16)
    rgba = (RNG.random((70, 9, 4)) * 1000).astype(np.float32)
    path = tmp_path / "c.exr"
    header = {"compression": OpenEXR.PIZ_COMPRESSION, "type": OpenEXR.scanlineimage,
              "dataWindow": (np.array([3, 5], np.int32), np.array([11, 74], np.int32)),
              "displayWindow": (np.array([0, 0], np.int32), np.array([15, 79], np.int32))}
    with OpenEXR.File(header, {"RGBA": np.ascontiguousarray(rgba)}) as f:
        f.write(str(path))
    half = write_image(tmp_path / "h.exr", rgba[:, :, :3], bits="half")
    for p in (path, half):
        seen = []
        a = read_image(p, progress=lambda f, w, seen=seen: seen.append((f, w)))
        b = read_image(p)
        assert a.bits == b.bits and a.pixels.tobytes() == b.pixels.tobytes()
        assert [round(f, 6) for f, _ in seen] == [round(0.9 * k / 70, 6) for k in (16, 32, 48, 64, 70)] + [1.0]
    np.testing.assert_array_equal(read_image(path).pixels, rgba)


def test_exr_written_by_openexr_read_by_bakery(tmp_path):
    rgba = RNG.random((3, 5, 4)).astype(np.float32) * 1000
    path = tmp_path / "c.exr"
    header = {"compression": OpenEXR.PIZ_COMPRESSION, "type": OpenEXR.scanlineimage}
    with OpenEXR.File(header, {"RGBA": np.ascontiguousarray(rgba)}) as f:
        f.write(str(path))
    img = read_image(path)
    assert img.bits == "float"
    np.testing.assert_array_equal(img.pixels, rgba)


def test_exr_half_precision_of_float_data(tmp_path):
    """float32 written as half keeps 11 significant bits: relative error <= 2**-11 (IEEE 754-2008 binary16)."""
    data = RNG.uniform(0.001, 60000, size=(8, 8, 3)).astype(np.float32)
    img = read_image(write_image(tmp_path / "h.exr", data, bits="half"))
    assert np.max(np.abs(img.pixels - data) / data) <= 2.0**-11


# ----------------------------------------------------------------------------------- Radiance HDR


def _rgbe_flat(path, pixels_rgbe, width, height):
    """A flat (uncompressed) Radiance file, per Ward 1991: header, blank line, resolution, RGBE bytes."""
    with open(path, "wb") as f:
        f.write(b"#?RADIANCE\nFORMAT=32-bit_rle_rgbe\n\n")
        f.write(f"-Y {height} +X {width}\n".encode())
        f.write(bytes(np.asarray(pixels_rgbe, dtype=np.uint8).ravel()))


def test_rgbe_decoding_matches_ward_examples(tmp_path):
    """Ward 1991 (Graphics Gems II, "Real Pixels"), 256-scale variant: c * 2**(E - 136).
    (128, 64, 32, 129) -> (1, 0.5, 0.25); (192, 6, 0, 130) -> (3, 0.09375, 0), the encoding of (3, 0.1, 0)
    (values from references.md section 13, computed)."""
    path = tmp_path / "w.hdr"
    _rgbe_flat(path, [[128, 64, 32, 129], [192, 6, 0, 130]], 2, 1)
    img = read_image(path)
    np.testing.assert_allclose(img.pixels[0, 0], [1.0, 0.5, 0.25], rtol=0, atol=0)
    np.testing.assert_allclose(img.pixels[0, 1], [3.0, 6 / 64, 0.0], rtol=0, atol=0)


def test_rgbe_encoding_matches_ward_examples(tmp_path):
    """Writing (1, 0.5, 0.25) and (3, 0.1, 0) gives the bytes of Ward 1991's encoding (256-scale variant).
    A 2-pixel-wide image is below the run-length minimum, so the scanline is stored flat."""
    path = write_image(tmp_path / "e.hdr", np.array([[[1.0, 0.5, 0.25], [3.0, 0.1, 0.0]]], np.float32))
    data = path.read_bytes()
    body = data[data.index(b"+X 2\n") + 5:]
    assert list(body) == [128, 64, 32, 129, 192, 6, 0, 130]


def test_hdr_float_round_trip_within_rgbe_precision(tmp_path):
    """RGBE keeps 8 mantissa bits of the largest channel (Ward 1991): with max in [2**(e-1), 2**e) one step is
    2**(e-8), and the encoder truncates, so the error is below 2**-7 of the pixel's max."""
    data = RNG.lognormal(0, 2, size=(16, 32, 3)).astype(np.float32)
    img = read_image(write_image(tmp_path / "r.hdr", data))
    assert img.pixels.dtype == np.float32 and img.bits == "float"
    err = np.abs(img.pixels - data).max(axis=2) / data.max(axis=2)
    assert err.max() < 2.0**-7
    # an independent reader (OpenCV) agrees with ours exactly
    ref = cv2.imread(str(tmp_path / "r.hdr"), cv2.IMREAD_UNCHANGED)[:, :, ::-1]
    np.testing.assert_array_equal(img.pixels, ref)


# ----------------------------------------------------------------------------------- JPEG, sRGB option


def test_jpeg_read_matches_opencv(tmp_path):
    rgb = (RNG.random((16, 16, 3)) * 255).astype(np.uint8)
    path = tmp_path / "p.jpg"
    cv2.imwrite(str(path), rgb[:, :, ::-1], [cv2.IMWRITE_JPEG_QUALITY, 95])
    ref = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)[:, :, ::-1]
    img = read_image(path)
    assert img.bits == "8" and img.format == "jpeg"
    np.testing.assert_array_equal(quantize(img.pixels, "8"), ref)


def test_srgb_option_decodes_colour_but_not_alpha(tmp_path):
    """sRGB 128/255 -> 0.215860500 linear (IEC 61966-2-1; references.md section 13)."""
    px = np.full((1, 1, 4), 128, np.uint8)
    path = tmp_path / "c.png"
    cv2.imwrite(str(path), px)
    img = read_image(path, color="srgb")
    np.testing.assert_allclose(img.pixels[0, 0, :3], 0.215860500, atol=1e-6)
    np.testing.assert_allclose(img.pixels[0, 0, 3], 128 / 255, atol=1e-7)
    assert read_image(path).pixels[0, 0, 0] == np.float32(128 / 255)  # data maps: untouched


def test_srgb_write_then_read_is_identity_at_8_bit(tmp_path):
    levels = np.arange(256, dtype=np.float32) / 255
    from bakery.color import srgb_to_linear

    lin = srgb_to_linear(levels).reshape(16, 16, 1)
    path = write_image(tmp_path / "s.png", lin, color="srgb")
    raw = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    np.testing.assert_array_equal(raw.ravel(), np.arange(256))


# ----------------------------------------------------------------------------------- bad input


def test_missing_file(tmp_path):
    with pytest.raises(BakeryError, match=r"nope\.png: file not found"):
        read_image(tmp_path / "nope.png")


@pytest.mark.parametrize("name", ["junk.png", "junk.tif", "junk.exr", "junk.hdr", "junk.jpg"])
def test_corrupt_files_raise_one_line_errors(tmp_path, name):
    path = tmp_path / name
    path.write_bytes(b"this is not an image at all" * 10)
    with pytest.raises(BakeryError) as info:
        read_image(path)
    msg = str(info.value)
    assert name in msg and "\n" not in msg


@pytest.mark.parametrize("suffix,kwargs", [(".png", {"bits": "16"}), (".exr", {}), (".tif", {}),
                                           (".hdr", {}), (".jpg", None)])
def test_truncated_files_raise(tmp_path, suffix, kwargs):
    data = RNG.random((64, 64, 3)).astype(np.float32)
    full = tmp_path / f"full{suffix}"
    if kwargs is None:
        cv2.imwrite(str(full), (data * 255).astype(np.uint8))
    else:
        write_image(full, data, **kwargs)
    cut = tmp_path / f"cut{suffix}"
    raw = full.read_bytes()
    cut.write_bytes(raw[: len(raw) // 2])
    with pytest.raises(BakeryError, match="cut"):
        read_image(cut)


def test_unsupported_extension(tmp_path):
    path = tmp_path / "a.bmp"
    path.write_bytes(b"BM")
    with pytest.raises(BakeryError, match=r"a\.bmp: cannot read '\.bmp' files"):
        read_image(path)
    with pytest.raises(BakeryError, match="cannot write"):
        write_image(tmp_path / "out.jpg", np.zeros((2, 2, 3), np.float32))


def test_nan_and_inf_are_refused_with_a_count(tmp_path):
    data = np.ones((4, 4, 3), np.float32)
    data[0, 0, 0] = np.nan
    data[1, 1, 1] = np.inf
    path = write_image(tmp_path / "bad.exr", data, bits="float")
    with pytest.raises(BakeryError, match=r"bad\.exr: 2 sample\(s\) are NaN or Inf"):
        read_image(path)
    assert np.isnan(read_image(path, allow_nonfinite=True).pixels[0, 0, 0])


def test_pixel_limit_refuses_before_decoding(tmp_path):
    path = write_image(tmp_path / "big.png", np.zeros((64, 64), np.float32))
    with pytest.raises(BakeryError, match="over the limit of 1000"):
        read_image(path, max_pixels=1000)
    assert read_image(path, max_pixels=4096).pixels.shape == (64, 64, 1)


def test_default_pixel_limit_allows_16384_squared():
    from bakery.io.images import DEFAULT_MAX_PIXELS

    assert DEFAULT_MAX_PIXELS >= 16384 * 16384


def test_png_header_claiming_huge_size_is_refused(tmp_path):
    """A decompression bomb: a tiny file whose header claims 100000 x 100000 pixels."""
    import struct
    import zlib

    ihdr = struct.pack(">IIBBBBB", 100000, 100000, 8, 0, 0, 0, 0)
    chunk = struct.pack(">I", 13) + b"IHDR" + ihdr + struct.pack(">I", zlib.crc32(b"IHDR" + ihdr))
    path = tmp_path / "bomb.png"
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + chunk)
    with pytest.raises(BakeryError, match="bomb.png: image is 100000x100000"):
        read_image(path)


def test_write_refuses_bad_bits_and_channels(tmp_path):
    with pytest.raises(BakeryError, match="cannot hold float"):
        write_image(tmp_path / "a.png", np.zeros((2, 2), np.float32), bits="float")
    with pytest.raises(BakeryError, match="cannot hold 2 channels"):
        write_image(tmp_path / "a.png", np.zeros((2, 2, 2), np.float32))
    with pytest.raises(BakeryError, match="negative"):
        write_image(tmp_path / "a.hdr", -np.ones((2, 2, 3), np.float32))
    assert os.listdir(tmp_path) == []


def test_integer_writes_round_to_nearest_ties_to_even(tmp_path):
    """Round half to even (IEEE 754 roundTiesToEven, numpy.rint): 0.5/255 -> 0, 1.5/255 -> 2."""
    vals = np.array([[0.5, 1.5, 2.49, 2.51]], np.float32) / 255
    path = write_image(tmp_path / "t.png", vals)
    raw = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    np.testing.assert_array_equal(raw, [[0, 2, 2, 3]])


def test_half_output_clamps_out_of_range_values_with_a_counted_warning(tmp_path):
    """binary16 tops out at 65504 (IEEE 754-2008): larger values are clamped, and the warning counts them."""
    from bakery.errors import BakeryWarning

    data = np.array([[[1e5, 2.0, -7e4]]], np.float32)
    with pytest.warns(BakeryWarning, match="2 sample"):
        path = write_image(tmp_path / "sun.exr", data, bits="half")
    np.testing.assert_array_equal(read_image(path).pixels[0, 0], [65504.0, 2.0, -65504.0])
