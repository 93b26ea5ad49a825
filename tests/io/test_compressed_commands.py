"""Every command that writes KTX2 takes the block formats: the file holds the format asked for (vkFormat of the
Vulkan specification), texture2ddecoder (independent of bakery's reader) decodes it close to the uncompressed
output, and the manifest holds the quality report."""

import json

import numpy as np
import pytest
import texture2ddecoder
from typer.testing import CliRunner

from bakery.cli import app
from bakery.io import write_image
from bakery.io.ktx2 import read_ktx2
from bakery.samples import paving_exponent, paving_height, sky_panorama

runner = CliRunner()


@pytest.fixture(scope="module")
def maps(tmp_path_factory):
    d = tmp_path_factory.mktemp("maps")
    h = paving_height(64)
    return {"height": write_image(d / "h.png", h, bits="16"),
            "exponent": write_image(d / "e.exr", paving_exponent(h), bits="float"),
            "sky": write_image(d / "sky.exr", sky_panorama(128), bits="float"), "dir": d}


def _run(*args):
    r = runner.invoke(app, [str(a) for a in args])
    assert r.exit_code == 0, r.output
    return r.output


def _quality(path):
    return json.loads(path.with_name(path.name + ".bakery.json").read_text())["quality"][path.name]


def test_normal_to_bc5_from_the_float_normals(maps, tmp_path):
    out = tmp_path / "n.ktx2"
    text = _run("normal", maps["height"], "-o", out, "--ktx2-format", "compressed")
    tex = read_ktx2(out)
    assert tex.format.vk == 141 and len(tex.levels) == 7  # VK_FORMAT_BC5_UNORM_BLOCK, 64 -> 1
    assert "quality n.ktx2: bc5" in text and "angular error" in _quality(out)["summary"]
    # the same levels through an independent BC5 decoder (BGRA8 out: R in channel 2, G in 1)
    _run("normal", maps["height"], "-o", tmp_path / "n.png")
    from bakery.io import read_image

    ref = read_image(tmp_path / "n.png").pixels[..., :2]
    raw = (tmp_path / "n.ktx2").read_bytes()
    lv0 = read_ktx2(out)
    data = _level0_bytes(raw)
    bgra = np.frombuffer(texture2ddecoder.decode_bc5(data, 64, 64), np.uint8).reshape(64, 64, 4)
    rg = np.stack([bgra[..., 2], bgra[..., 1]], -1) / 255.0
    assert np.abs(rg - ref).mean() < 0.01  # measured 0.004: BC5 keeps 8-bit-like precision per channel
    assert np.allclose(lv0.levels[0][..., :2], rg, atol=1 / 255 + 1e-6)


def _level0_bytes(raw: bytes) -> bytes:
    # KTX 2.0 specification, section 3: level index after the 80-byte header; level 0 first
    import struct

    off, length = struct.unpack_from("<QQ", raw, 80)
    return raw[off:off + length]


def test_roughness_and_antialias_to_bc4(maps, tmp_path):
    out = tmp_path / "r.ktx2"
    _run("roughness", maps["exponent"], "-o", out, "--ktx2-format", "bc4", "--zstd", "3")
    tex = read_ktx2(out)
    assert tex.format.vk == 139 and tex.supercompressed  # VK_FORMAT_BC4_UNORM_BLOCK, Zstandard
    assert _quality(out)["report"]
    _run("normal", maps["height"], "-o", tmp_path / "n.png")
    _run("antialias", tmp_path / "n.png", "--roughness", "0.4", "-o", tmp_path / "aa.ktx2", "--ktx2-format", "bc4")
    assert read_ktx2(tmp_path / "aa.ktx2").format.vk == 139


@pytest.mark.parametrize("command,extra", [(["env", "convert"], ["--face-size", "16"]),
                                           (["env", "specular"], ["--face-size", "16", "--quality", "draft"])])
def test_environments_to_bc6h(maps, tmp_path, command, extra):
    out = tmp_path / "e.ktx2"
    _run(*command, maps["sky"], "-o", out, "--ktx2-format", "bc6h", *extra)
    tex = read_ktx2(out)
    assert tex.format.vk == 143 and tex.cubemap  # VK_FORMAT_BC6H_UFLOAT_BLOCK
    assert "stops" in _quality(out)["summary"]


def test_unknown_format_lists_the_known_ones(maps, tmp_path):
    r = runner.invoke(app, ["normal", str(maps["height"]), "-o", str(tmp_path / "n.ktx2"), "--ktx2-format", "bc9"])
    assert r.exit_code == 2 and "bc5" in r.output and "bc7-srgb" in r.output
    r = runner.invoke(app, ["normal", str(maps["height"]), "-o", str(tmp_path / "n.ktx2"), "--ktx2-format", "bc4"])
    assert r.exit_code == 2 and "bc5" in r.output


def test_compressed_normal_map_lit_like_the_uncompressed_one(maps, tmp_path):
    _run("normal", maps["height"], "-o", tmp_path / "n.png")
    _run("normal", maps["height"], "-o", tmp_path / "n.ktx2", "--ktx2-format", "bc5")
    for name in ("n.png", "n.ktx2"):
        _run("preview", "-o", tmp_path / f"{name}.preview.png", "--normal", tmp_path / name, "--size", "64")
    from bakery.io import read_image

    a = read_image(tmp_path / "n.png.preview.png").pixels
    b = read_image(tmp_path / "n.ktx2.preview.png").pixels
    assert np.abs(a - b).mean() < 2e-3  # measured: 2.4e-4 mean, 2/255 max, 8-bit sRGB pictures of the paving stones
