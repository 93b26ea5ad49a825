"""The strip PNG writer (bakery/io/png.py) against independent decoders.

References: W3C PNG Specification (Second Edition, 2003; ISO/IEC 15948:2003; section numbers from memory):
signature §5.2, chunk layout and CRC-32 §5.3/§5.5, IHDR §11.2.2, filter type 1 (Sub) §9.2, big-endian samples
§7.1; zlib stream RFC 1950 (Deutsch & Gailly 1996; header check §2.2, Adler-32 §8.2), deflate RFC 1951. The
decoders: OpenCV's libpng (``cv2.imread``), Pillow, and below a reading of the chunks with Python's zlib
(inflate and its Adler-32 check) and a Sub reversal written from §9.2.
"""

import struct
import zlib

import numpy as np
import pytest

from bakery.errors import BakeryError
from bakery.io import png as png_module
from bakery.io import read_image, write_image
from bakery.io.png import adler32_combine, write_png

SHAPES = [(1, 1), (1, 7), (9, 1), (37, 53), (64, 31)]


def pixels(shape, channels, dtype, seed=0):
    rng = np.random.default_rng(seed)
    top = np.iinfo(dtype).max
    return rng.integers(0, top + 1, shape + ((channels,) if channels > 1 else ()), dtype=dtype)


def crc32_iso3309(data: bytes) -> int:
    """CRC-32 of §5.5 (ISO 3309 / ITU-T V.42 polynomial, reflected 0xEDB88320), bit by bit."""
    c = 0xFFFFFFFF
    for byte in data:
        c ^= byte
        for _ in range(8):
            c = (c >> 1) ^ (0xEDB88320 if c & 1 else 0)
    return c ^ 0xFFFFFFFF


def chunks(data: bytes):
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # §5.2
    pos, out = 8, []
    while pos < len(data):
        (n,) = struct.unpack(">I", data[pos:pos + 4])
        kind, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + n]
        (crc,) = struct.unpack(">I", data[pos + 8 + n:pos + 12 + n])
        assert crc == zlib.crc32(kind + body), kind
        out.append((kind, body, crc))
        pos += 12 + n
    assert pos == len(data)
    return out


def decode_by_spec(data: bytes) -> np.ndarray:
    """Pixels from the chunks, with zlib's inflate and a Sub reversal (Recon(x) = Filt(x) + Recon(a))."""
    parts = chunks(data)
    kinds = [k for k, _, _ in parts]
    assert kinds[0] == b"IHDR" and kinds[-1] == b"IEND" and set(kinds[1:-1]) == {b"IDAT"}
    w, h, depth, ctype, comp, filt, interlace = struct.unpack(">IIBBBBB", parts[0][1])
    assert (comp, filt, interlace) == (0, 0, 0)
    channels = {0: 1, 2: 3, 6: 4}[ctype]
    stream = b"".join(body for k, body, _ in parts if k == b"IDAT")
    assert (stream[0] * 256 + stream[1]) % 31 == 0 and stream[0] & 0x0F == 8  # RFC 1950 §2.2
    raw = np.frombuffer(zlib.decompress(stream), np.uint8)  # checks the Adler-32 too
    bpp = channels * depth // 8
    rows = raw.reshape(h, 1 + w * bpp)
    assert np.all(rows[:, 0] == 1)  # every row filtered Sub
    lanes = rows[:, 1:].reshape(h, w, bpp).astype(np.int64)
    recon = (np.cumsum(lanes, axis=1) % 256).astype(np.uint8).reshape(h, w * bpp)
    if depth == 16:
        return recon.view(">u2").astype(np.uint16).reshape(h, w, channels)
    return recon.reshape(h, w, channels)


def decode_cv2(path) -> np.ndarray:
    import cv2

    a = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    if a.ndim == 2:
        return a[:, :, None]
    return cv2.cvtColor(a, cv2.COLOR_BGR2RGB if a.shape[2] == 3 else cv2.COLOR_BGRA2RGBA)


@pytest.fixture(params=[None, 64], ids=["one-strip", "many-strips"])
def strip_bytes(request, monkeypatch):
    if request.param:
        monkeypatch.setattr(png_module, "STRIP_BYTES", request.param)
    return request.param


@pytest.mark.parametrize("shape", SHAPES)
@pytest.mark.parametrize("channels", [1, 3, 4])
@pytest.mark.parametrize("dtype", [np.uint8, np.uint16])
def test_round_trip_pixel_exact(shape, channels, dtype, strip_bytes, tmp_path):
    a = pixels(shape, channels, dtype)
    path = write_png(tmp_path / "a.png", a)
    data = path.read_bytes()
    want = a.reshape(shape + (channels,))
    width, height, depth, ctype = struct.unpack(">IIBB", chunks(data)[0][1][:10])
    assert (width, height, depth, ctype) == (shape[1], shape[0], 8 * a.itemsize, {1: 0, 3: 2, 4: 6}[channels])
    got = decode_cv2(path)
    assert got.dtype == dtype and np.array_equal(got, want)
    assert np.array_equal(decode_by_spec(data), want)


@pytest.mark.parametrize(("channels", "dtype", "mode"), [(1, np.uint8, "L"), (3, np.uint8, "RGB"),
                                                         (4, np.uint8, "RGBA"), (1, np.uint16, "I;16")])
def test_pillow_reads_it(channels, dtype, mode, tmp_path):
    """Pillow decodes 8-bit grey/RGB/RGBA and 16-bit grey exactly (it has no 16-bit RGB(A) mode)."""
    from PIL import Image

    a = pixels((29, 41), channels, dtype, seed=3)
    path = write_png(tmp_path / "a.png", a)
    with Image.open(path) as im:
        im.load()
        assert im.mode == mode
        got = np.asarray(im)
    assert np.array_equal(got.reshape(a.shape).astype(dtype), a)


def test_chunk_crcs_follow_the_iso_3309_polynomial(tmp_path):
    data = write_png(tmp_path / "a.png", pixels((5, 6), 3, np.uint8)).read_bytes()
    for kind, body, crc in chunks(data):
        assert crc == crc32_iso3309(kind + body)


def test_adler32_combine_matches_the_checksum_of_the_concatenation():
    rng = np.random.default_rng(7)
    for n1, n2 in [(0, 0), (0, 5), (5, 0), (1, 1), (65520, 65521), (100_000, 3), (3, 200_000)]:
        a, b = rng.bytes(n1), rng.bytes(n2)
        assert adler32_combine(zlib.adler32(a), zlib.adler32(b), len(b)) == zlib.adler32(a + b)
    big = b"\xff" * 70_000  # sums past the modulus
    assert adler32_combine(zlib.adler32(big), zlib.adler32(big), len(big)) == zlib.adler32(big + big)


def test_bytes_do_not_depend_on_threads_or_progress(monkeypatch, tmp_path):
    monkeypatch.setattr(png_module, "STRIP_BYTES", 512)
    a = pixels((123, 77), 3, np.uint16, seed=5)
    ref = write_png(tmp_path / "a.png", a, threads=1).read_bytes()
    for threads in (2, 5):
        seen = []
        got = write_png(tmp_path / "b.png", a, threads=threads, progress=lambda f, w, s=seen: s.append(f)).read_bytes()
        assert got == ref
        assert len(seen) > 10
    assert len([k for k, _, _ in chunks(ref) if k == b"IDAT"]) > 10


def test_progress_rises_per_strip_and_ends_at_one(monkeypatch, tmp_path):
    monkeypatch.setattr(png_module, "STRIP_BYTES", 40 * 3 * 10)  # ten rows a strip
    seen = []
    write_png(tmp_path / "a.png", pixels((95, 40), 3, np.uint8), progress=lambda f, w: seen.append((f, w)))
    fractions = [f for f, _ in seen]
    assert len(seen) == 10 and {w for _, w in seen} == {"writing"}
    assert all(x < y for x, y in zip(fractions, fractions[1:], strict=False)) and fractions[-1] == 1.0
    assert fractions[0] == pytest.approx(10 / 95)


@pytest.mark.parametrize("bits", ["8", "16"])
def test_write_image_png_round_trips_and_reports(bits, tmp_path):
    """write_image goes through the strip writer: read_image gives the quantised values back, and the
    progress callback ends at 1; TIFF (one call at the end) too."""
    rng = np.random.default_rng(2)
    top = 255 if bits == "8" else 65535
    codes = rng.integers(0, top + 1, (33, 18, 4))
    a = (codes / top).astype(np.float32)
    for name in ("a.png", "a.tif"):
        seen = []
        path = write_image(tmp_path / name, a, bits=bits, progress=lambda f, w, s=seen: s.append(f))
        assert seen[-1] == 1.0
        assert np.array_equal(np.rint(read_image(path).pixels * top), codes)
    quiet = write_image(tmp_path / "b.png", a, bits=bits)
    assert quiet.read_bytes() == (tmp_path / "a.png").read_bytes()


def test_size_close_to_opencv_default(tmp_path):
    """Same filter and deflate settings as OpenCV's default PNG write: within 0.5 % of its size on a smooth
    16-bit map with noise (measured: 0.14 % smaller; at 8192^2 0.1 %, tests/perf/bench_normals.py)."""
    import cv2

    r, c = np.mgrid[0:256, 0:256].astype(np.float32)
    rng = np.random.default_rng(4)
    f = 0.5 + 0.3 * np.sin(c / 9)[..., None] * np.cos(r / 13)[..., None] + 0.01 * rng.random((256, 256, 3))
    q = np.rint(np.clip(f, 0, 1) * 65535).astype(np.uint16)
    ours = write_png(tmp_path / "a.png", q).stat().st_size
    cv2.imwrite(str(tmp_path / "cv.png"), cv2.cvtColor(q, cv2.COLOR_RGB2BGR))
    theirs = (tmp_path / "cv.png").stat().st_size
    assert abs(ours / theirs - 1) < 0.005, (ours, theirs)


@pytest.mark.parametrize(("array", "words"), [
    (np.zeros((4, 4, 3), np.float32), "uint8/uint16"),
    (np.zeros((4, 4, 2), np.uint8), "1, 3 or 4 channels"),
    (np.zeros((0, 4, 3), np.uint8), "empty"),
])
def test_refuses_what_it_cannot_write(array, words, tmp_path):
    with pytest.raises(BakeryError, match=words):
        write_png(tmp_path / "a.png", array)
