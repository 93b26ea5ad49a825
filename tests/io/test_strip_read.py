"""Reads with progress: bakery's strip PNG reader (bakery/io/png.py), TIFF read by segments and written by
strips (bakery/io/images.py), and the float conversion in bands, against independent decoders.

References: W3C PNG Specification (Second Edition, 2003; ISO/IEC 15948:2003; section numbers from memory):
chunk layout and CRC-32 §5.3, IHDR §11.2.2, the five filter types of filter method 0 and the Paeth predictor
§9.2-§9.4, big-endian samples §7.1; zlib RFC 1950 (Deutsch & Gailly 1996), deflate RFC 1951. TIFF 6.0
(Adobe 1992): strips (RowsPerStrip, StripOffsets, StripByteCounts) and tiles; Adobe Deflate compression (8)
of TIFF Technical Note 2 (from memory). sRGB decoding IEC 61966-2-1. The decoders: OpenCV's libpng
(``cv2.imdecode``), Pillow, tifffile, and below a filter written from the formulas of §9.2 in plain Python.
"""

import struct
import zlib

import cv2
import numpy as np
import pytest
from PIL import Image as PILImage

from bakery.color import srgb_to_linear
from bakery.errors import BakeryError
from bakery.io import images, read_image, write_image
from bakery.io import png as png_module
from bakery.io.png import chunk, header, read_png

RNG = np.random.default_rng(7)


def smooth(shape, dtype, seed=0):
    """Waves plus noise (so encoders pick several filter types), as integers of ``dtype``."""
    rng = np.random.default_rng(seed)
    h, w = shape[:2]
    top = np.iinfo(dtype).max
    y, x = np.mgrid[0:h, 0:w].astype(np.float64)
    base = 0.5 + 0.4 * np.sin(x / 5.0 + y / 7.0)
    if len(shape) == 3:
        base = np.stack([np.roll(base, 3 * c, axis=1) for c in range(shape[2])], axis=-1)
    return np.clip(base * top + rng.integers(-top // 20, top // 20 + 1, base.shape), 0, top).astype(dtype)


def cv2_pixels(path):
    """What read_image gave before the strip reader: OpenCV's decode, turned to RGB(A)."""
    a = cv2.imdecode(np.fromfile(path, np.uint8), cv2.IMREAD_UNCHANGED)
    if a.ndim == 3:
        a = cv2.cvtColor(a, cv2.COLOR_BGR2RGB if a.shape[2] == 3 else cv2.COLOR_BGRA2RGBA)
    return a


def filter_row(kind: int, row: bytes, prior: bytes, bpp: int) -> bytes:
    """Filt(x) of §9.2 for one row, byte by byte: a = left, b = above, c = above-left (0 outside)."""
    out = bytearray()
    for i, x in enumerate(row):
        a = row[i - bpp] if i >= bpp else 0
        b = prior[i]
        c = prior[i - bpp] if i >= bpp else 0
        if kind == 0:
            pred = 0
        elif kind == 1:
            pred = a
        elif kind == 2:
            pred = b
        elif kind == 3:
            pred = (a + b) // 2
        else:  # Paeth predictor (§9.4)
            p = a + b - c
            pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
            pred = a if pa <= pb and pa <= pc else b if pb <= pc else c
        out.append((x - pred) % 256)
    return bytes(out)


def png_by_spec(pixels: np.ndarray, kinds, idat_pieces: int = 3, extra: bytes = b"") -> bytes:
    """A PNG whose row r uses filter ``kinds[r % len(kinds)]``, its zlib stream split over several IDATs."""
    a = pixels if pixels.ndim == 3 else pixels[:, :, None]
    h, w, channels = a.shape
    depth = a.itemsize
    raw = a.astype(">u2").tobytes() if depth == 2 else a.tobytes()
    rb = w * channels * depth
    prior = bytes(rb)
    stream = bytearray()
    for r in range(h):
        row = raw[r * rb:(r + 1) * rb]
        kind = kinds[r % len(kinds)]
        stream += bytes([kind]) + filter_row(kind, row, prior, channels * depth)
        prior = row
    z = zlib.compress(bytes(stream), 6)
    cut = [len(z) * i // idat_pieces for i in range(idat_pieces + 1)]
    body = b"".join(chunk(b"IDAT", z[cut[i]:cut[i + 1]]) for i in range(idat_pieces))
    return header(w, h, 8 * depth, {1: 0, 3: 2, 4: 6}[channels]) + extra + body + chunk(b"IEND")


@pytest.fixture(params=[None, 200], ids=["one-strip", "many-strips"])
def strip_bytes(request, monkeypatch):
    if request.param:
        monkeypatch.setattr(png_module, "STRIP_BYTES", request.param)
    return request.param


@pytest.mark.parametrize("channels", [1, 3, 4])
@pytest.mark.parametrize("dtype", [np.uint8, np.uint16])
@pytest.mark.parametrize("shape", [(1, 1), (1, 9), (7, 1), (23, 31)])
def test_every_filter_type_against_opencv(channels, dtype, shape, strip_bytes, tmp_path):
    """Rows filtered None, Sub, Up, Average, Paeth in turn (first row included: 'above' is zero there) by the
    plain-Python filter above: the reader gives the original samples, as OpenCV does from the same file."""
    a = smooth(shape + ((channels,) if channels > 1 else ()), dtype)
    for kinds in ([0, 1, 2, 3, 4], [4, 3, 2, 1, 0], [1], [3], [4]):
        path = tmp_path / "f.png"
        path.write_bytes(png_by_spec(a, kinds))
        got, depth = read_png(path)
        assert depth == 8 * a.itemsize and got.dtype == a.dtype and got.shape == a.shape
        assert np.array_equal(got, a)
        assert np.array_equal(got, cv2_pixels(path))


@pytest.mark.parametrize("channels", [1, 3, 4])
@pytest.mark.parametrize("dtype", [np.uint8, np.uint16])
def test_files_written_by_opencv(channels, dtype, strip_bytes, tmp_path):
    a = smooth((37, 53, channels) if channels > 1 else (37, 53), dtype, seed=channels)
    path = tmp_path / "cv.png"
    for level in (1, 9):
        stored = cv2.cvtColor(a, cv2.COLOR_RGB2BGR if channels == 3 else cv2.COLOR_RGBA2BGRA) if channels > 1 else a
        assert cv2.imwrite(str(path), stored, [cv2.IMWRITE_PNG_COMPRESSION, level])
        got, _ = read_png(path)
        assert np.array_equal(got, a) and np.array_equal(got, cv2_pixels(path))


@pytest.mark.parametrize("mode,shape,dtype", [("L", (41, 29), np.uint8), ("RGB", (41, 29, 3), np.uint8),
                                              ("RGBA", (41, 29, 4), np.uint8), ("I;16", (41, 29), np.uint16)])
def test_files_written_by_pillow(mode, shape, dtype, strip_bytes, tmp_path):
    """Pillow chooses a filter per row (Average and Paeth among them) and decodes the file itself too."""
    a = smooth(shape, dtype, seed=3)
    path = tmp_path / "pil.png"
    PILImage.fromarray(a).save(path, optimize=True)
    with PILImage.open(path) as im:
        assert im.mode.startswith(mode[0])
    got, _ = read_png(path)
    assert np.array_equal(got, a) and np.array_equal(got, cv2_pixels(path))
    with PILImage.open(path) as im:
        assert np.array_equal(got, np.asarray(im))


def test_progress_per_strip_rises_to_one(monkeypatch, tmp_path):
    monkeypatch.setattr(png_module, "STRIP_BYTES", 1000)
    a = smooth((50, 40, 3), np.uint8)
    path = tmp_path / "p.png"
    path.write_bytes(png_by_spec(a, [1, 4]))
    seen = []
    got, _ = read_png(path, progress=lambda f, w: seen.append((f, w)))
    assert np.array_equal(got, a)
    fractions = [f for f, _ in seen]
    assert len(fractions) == 7 and fractions == sorted(fractions) and fractions[-1] == 1.0  # 8 rows a strip
    assert {w for _, w in seen} == {"reading"}


def test_read_image_with_progress_gives_the_same_pixels(monkeypatch, tmp_path):
    """The strip reader (taken for any size here) and the OpenCV path give the same float image."""
    monkeypatch.setattr(images, "PNG_STRIP_READ_BYTES", 0)
    monkeypatch.setattr(png_module, "STRIP_BYTES", 1000)
    for bits, channels in (("8", 4), ("16", 3), ("16", 1)):
        a = smooth((60, 45, channels), np.uint16 if bits == "16" else np.uint8).astype(np.float32)
        path = write_image(tmp_path / f"r{bits}{channels}.png", a / (65535 if bits == "16" else 255), bits=bits)
        for color in ("data", "srgb"):
            quiet = read_image(path, color=color)
            seen = []
            loud = read_image(path, color=color, progress=lambda f, w, s=seen: s.append(f))
            assert loud.bits == quiet.bits and np.array_equal(loud.pixels, quiet.pixels)
            assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) > 4


@pytest.mark.parametrize("case", ["palette", "bits1", "trns", "grey-alpha", "interlaced-header"])
def test_what_it_leaves_to_opencv(case, monkeypatch, tmp_path):
    """Files outside what the reader decodes: None from read_png before any pixel; read_image with progress
    still reads them (through OpenCV) as without."""
    monkeypatch.setattr(images, "PNG_STRIP_READ_BYTES", 0)
    path = tmp_path / f"{case}.png"
    a = smooth((19, 23, 3), np.uint8)
    if case == "palette":
        PILImage.fromarray(a).convert("P").save(path)
    elif case == "bits1":
        PILImage.fromarray(a[:, :, 0] > 128).save(path)
    elif case == "trns":
        PILImage.fromarray(a).save(path, transparency=(1, 2, 3))
    elif case == "grey-alpha":
        PILImage.fromarray(a[:, :, :2], "LA").save(path)
    else:  # an IHDR with interlace method 1 (Adam7): refused on the header alone
        data = bytearray(png_by_spec(a, [0]))
        ihdr = bytes(data[12:29])[:-1] + b"\x01"
        data[12:33] = ihdr + struct.pack(">I", zlib.crc32(ihdr))
        path.write_bytes(bytes(data))
    assert read_png(path) is None
    if case != "interlaced-header":
        loud = read_image(path, progress=lambda f, w: None)
        assert np.array_equal(loud.pixels, read_image(path).pixels)


def damaged(tmp_path, how):
    a = smooth((30, 20, 3), np.uint8)
    data = bytearray(png_by_spec(a, [1, 4], idat_pieces=2))
    first_idat = data.index(b"IDAT")
    if how == "crc":
        data[first_idat + 10] ^= 0x40
    elif how == "truncated":
        data = data[:len(data) * 2 // 3]
    elif how == "no-end":
        data = data[:-12]
    elif how in ("filter-type", "deflate", "short-stream"):
        stream = bytearray()
        raw = bytearray(zlib.decompress(png_by_spec_stream(a)))
        if how == "filter-type":
            raw[(1 + 60) * 7] = 9  # row 7's type byte
            stream = zlib.compress(bytes(raw))
        elif how == "deflate":
            stream = bytearray(zlib.compress(bytes(raw)))
            stream[len(stream) // 2] ^= 0xFF
            stream[-1] ^= 0xFF
        else:
            stream = zlib.compress(bytes(raw[:-61]))
        data = bytearray(header(20, 30, 8, 2) + chunk(b"IDAT", bytes(stream)) + chunk(b"IEND"))
    path = tmp_path / f"{how}.png"
    path.write_bytes(bytes(data))
    return path


def png_by_spec_stream(a):
    data = png_by_spec(a, [1, 4], idat_pieces=1)
    pos = data.index(b"IDAT")
    (n,) = struct.unpack(">I", data[pos - 4:pos])
    return data[pos + 4:pos + 4 + n]


@pytest.mark.parametrize("how", ["crc", "truncated", "no-end", "filter-type", "deflate", "short-stream"])
def test_corrupt_or_truncated_files_are_refused(how, monkeypatch, tmp_path):
    path = damaged(tmp_path, how)
    with pytest.raises(BakeryError) as info:
        read_png(path)
    assert path.name in str(info.value) and "\n" not in str(info.value)
    monkeypatch.setattr(images, "PNG_STRIP_READ_BYTES", 0)
    with pytest.raises(BakeryError, match=path.name):
        read_image(path, progress=lambda f, w: None)


def test_srgb_table_gives_the_formula_for_every_code():
    """The float conversion decodes 8/16-bit sRGB through a table of every code; the table entries are the
    IEC 61966-2-1 formula (bakery.color.srgb_to_linear) of v / 255, v / 65535, here applied to a big shuffled
    image of every code, in bands and in one piece."""
    for dtype, top in ((np.uint8, 255), (np.uint16, 65535)):
        codes = RNG.permutation(np.tile(np.arange(top + 1, dtype=dtype), 3 * 256 // (top + 1) + 1))
        raw = codes[:(codes.size // 12) * 12].reshape(-1, 4, 3)
        want = srgb_to_linear(raw.astype(np.float32) * np.float32(1.0 / top))
        got = images._to_float(raw, "8" if top == 255 else "16", 3)
        assert np.array_equal(got, want)


def test_float_bands_change_no_value(monkeypatch):
    raw = smooth((40, 30, 4), np.uint16)
    whole = images._to_float(raw, "16", 3)
    monkeypatch.setattr(images, "FLOAT_BAND_SAMPLES", 7 * 30 * 4)
    seen = []
    assert np.array_equal(images._to_float(raw, "16", 3, lambda f, w: seen.append(f)), whole)
    assert len(seen) == 6 and seen[-1] == 1.0


# ------------------------------------------------------------------------------------------------------ TIFF


@pytest.mark.parametrize("bits,channels", [("8", 1), ("16", 3), ("16", 4), ("float", 2), ("8", 3)])
def test_tiff_write_by_strips_is_tifffile_one_call_file(bits, channels, monkeypatch, tmp_path):
    """Strips compressed by bakery and handed over encoded: byte for byte the file tifffile writes from the
    whole array, read back the same by tifffile and (except 2 channels) OpenCV; progress rises to 1."""
    import tifffile

    monkeypatch.setattr(images, "TIFF_STRIP_BYTES", 500)
    monkeypatch.setattr(images, "TIFF_STRIPS_PER_CALL", 1)
    a = (smooth((70, 33, channels), np.uint16) / np.float32(65535)).astype(np.float32)
    seen = []
    path = write_image(tmp_path / "s.tif", a, bits=bits, progress=lambda f, w: seen.append(f))
    quiet = write_image(tmp_path / "q.tif", a, bits=bits)
    assert path.read_bytes() == quiet.read_bytes()
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) >= 4
    data = images.quantize(a, bits) if bits != "float" else a
    rows = 500 // (33 * channels * data.itemsize)
    ref = tmp_path / "ref.tif"
    tifffile.imwrite(ref, data[:, :, 0] if channels == 1 else data, rowsperstrip=rows, compression="zlib",
                     photometric="rgb" if channels in (3, 4) else "minisblack",
                     extrasamples=["unassalpha"] if channels in (2, 4) else None, metadata=None)
    assert path.read_bytes() == ref.read_bytes()
    with tifffile.TiffFile(path) as tif:
        page = tif.pages[0]
        assert page.compression == 8 and page.predictor == 1 and page.rowsperstrip == rows
        back = page.asarray()
    assert np.array_equal(back.reshape(data.shape), data)
    if channels != 2:
        b = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
        if channels > 1:
            b = cv2.cvtColor(b, cv2.COLOR_BGR2RGB if channels == 3 else cv2.COLOR_BGRA2RGBA)
        assert np.array_equal(b.reshape(data.shape), data)


def test_tiff_default_strips_are_tifffiles():
    """The strip height is tifffile's default for compressed strips: 262144 bytes // row bytes."""
    assert images.TIFF_STRIP_BYTES == 262144


@pytest.mark.parametrize("layout", ["strips", "tiles", "planar", "uncompressed"])
def test_tiff_read_by_segments_is_asarray(layout, monkeypatch, tmp_path):
    import tifffile

    monkeypatch.setattr(images, "TIFF_SEGMENTS_PER_CALL", 3)
    a = smooth((75, 50, 3), np.uint16)
    path = tmp_path / f"{layout}.tif"
    kw = {"strips": {"compression": "zlib", "rowsperstrip": 4},
          "tiles": {"compression": "zlib", "tile": (16, 32)},
          "planar": {"compression": "zlib", "rowsperstrip": 8, "planarconfig": "separate"},
          "uncompressed": {}}[layout]
    tifffile.imwrite(path, np.moveaxis(a, -1, 0) if layout == "planar" else a, photometric="rgb", **kw)
    seen = []
    loud = read_image(path, progress=lambda f, w: seen.append(f))
    assert np.array_equal(loud.pixels, read_image(path).pixels)
    assert np.array_equal(np.rint(loud.pixels * 65535).astype(np.uint16), a)
    assert seen == sorted(seen) and seen[-1] == 1.0
    if layout != "uncompressed":
        assert len(seen) > 4


def test_truncated_tiff_with_progress_is_refused(tmp_path):
    a = smooth((64, 64, 3), np.uint16) / np.float32(65535)
    full = write_image(tmp_path / "full.tif", a, bits="16")
    cut = tmp_path / "cut.tif"
    raw = full.read_bytes()
    cut.write_bytes(raw[:len(raw) // 2])
    with pytest.raises(BakeryError, match="cut"):
        read_image(cut, progress=lambda f, w: None)
