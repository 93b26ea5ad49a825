"""``bakery roughness`` and ``bakery antialias``: files in, files out, one-line errors with exit code 2."""

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery.bakes import get_bake, params_from_mapping, run_bake
from bakery.bakes.roughness import RoughnessParams
from bakery.cli import app
from bakery.io import read_image, write_image
from bakery.io.ktx2 import read_ktx2
from bakery.roughness import roughness_from_exponent, roughness_mips

runner = CliRunner()


def invoke(*args):
    return runner.invoke(app, [str(a) for a in args])


@pytest.fixture
def exponent_map(tmp_path):
    n = np.geomspace(2.0, 2000.0, 16 * 16).reshape(16, 16).astype(np.float32)
    return write_image(tmp_path / "exp.exr", n, bits="float"), n


def bumpy_normals(size=32, seed=1):
    rng = np.random.default_rng(seed)
    n = rng.normal(size=(size, size, 3)).astype(np.float32) * np.float32(0.2)
    n[..., 2] = 1
    return n / np.linalg.norm(n, axis=-1, keepdims=True)


@pytest.mark.parametrize("cmd", ["roughness", "antialias"])
def test_help(cmd):
    r = invoke(cmd, "--help")
    assert r.exit_code == 0 and "Usage" in r.output


def test_roughness_from_float_exponents(tmp_path, exponent_map):
    path, n = exponent_map
    out = tmp_path / "r.exr"
    r = invoke("roughness", path, "-o", out, "--bits", "float")
    assert r.exit_code == 0, r.output
    got = read_image(out).pixels[..., 0]
    np.testing.assert_allclose(got, roughness_from_exponent(n), rtol=1e-6)  # the library function, exactly
    manifest = json.loads((tmp_path / "r.exr.bakery.json").read_text())
    assert manifest["params"]["source"] == "exponent" and manifest["conventions"]["transfer"] == "linear"
    # a float source written to PNG defaults to 16 bits, linear (no sRGB curve)
    r = invoke("roughness", path, "-o", tmp_path / "r.png")
    img = read_image(tmp_path / "r.png")
    assert img.bits == "16"
    np.testing.assert_allclose(img.pixels[..., 0], roughness_from_exponent(n), atol=1 / 65535)


def test_gloss_png_needs_its_mapping(tmp_path):
    g = np.linspace(0, 1, 64, dtype=np.float32).reshape(8, 8)
    src = write_image(tmp_path / "g.png", g)
    r = invoke("roughness", src, "-o", tmp_path / "o.png")
    assert r.exit_code == 2
    assert "8-bit map does not say how it encodes exponents" in r.output
    assert "--source gloss-exp --exponent-range LO,HI" in r.output and "--exponent-range LO,HI" in r.output
    assert not (tmp_path / "o.png").exists()
    r = invoke("roughness", src, "-o", tmp_path / "o.png", "--source", "exponent")
    assert r.exit_code == 2 and "--exponent-range 0,255" in r.output
    r = invoke("roughness", src, "-o", tmp_path / "o.png", "--source", "gloss-exp", "--exponent-range",
               "1,8192")
    assert r.exit_code == 0, r.output
    q = np.rint(g * 255) / 255
    expect = roughness_from_exponent(q, source="gloss-exp", exponent_range=(1, 8192))
    np.testing.assert_allclose(read_image(tmp_path / "o.png").pixels[..., 0], expect, atol=0.5 / 255 + 1e-6)


def test_negative_and_nan_exponents(tmp_path):
    n = np.full((4, 4), 50.0, np.float32)
    n[0, 0] = -2
    n[1, 1] = np.nan
    src = write_image(tmp_path / "bad.exr", n, bits="float")
    r = invoke("roughness", src, "-o", tmp_path / "o.exr")
    assert r.exit_code == 2 and "bad.exr" in r.output and "1 negative, 1 NaN" in r.output
    assert "--clamp" in r.output and not (tmp_path / "o.exr").exists()
    r = invoke("roughness", src, "-o", tmp_path / "o.exr", "--clamp")
    assert r.exit_code == 0 and "warning:" in r.output
    out = read_image(tmp_path / "o.exr").pixels[..., 0]
    assert out[0, 0] == 1.0 and out[1, 1] == 1.0  # n = 0: the roughest


def test_inverse_direction_and_unbounded_targets(tmp_path, exponent_map):
    path, n = exponent_map
    r = invoke("roughness", path, "-o", tmp_path / "r.exr", "--bits", "float")
    r = invoke("roughness", tmp_path / "r.exr", "-o", tmp_path / "n.exr", "--source", "roughness", "--target",
               "exponent", "--bits", "float")
    assert r.exit_code == 0, r.output
    np.testing.assert_allclose(read_image(tmp_path / "n.exr").pixels[..., 0], n, rtol=2e-5)
    r = invoke("roughness", path, "-o", tmp_path / "n.png", "--target", "exponent")
    assert r.exit_code == 2 and "need a float file" in r.output


def test_pack_into_gltf_green(tmp_path, exponent_map):
    # glTF 2.0 (Khronos), material.pbrMetallicRoughness.metallicRoughnessTexture: roughness is sampled from G,
    # metalness from B, with a linear transfer function.
    path, n = exponent_map
    orm = np.zeros((16, 16, 3), np.float32)
    orm[..., 0] = 1.0
    orm[..., 2] = 0.25
    packed_src = write_image(tmp_path / "orm.png", orm, bits="16")
    before = packed_src.read_bytes()
    r = invoke("roughness", path, "-o", tmp_path / "mr.png", "--pack", packed_src)
    assert r.exit_code == 0, r.output
    out = read_image(tmp_path / "mr.png").pixels
    np.testing.assert_allclose(out[..., 1], roughness_from_exponent(n), atol=1 / 65535)
    np.testing.assert_array_equal(out[..., 0], 1.0)
    np.testing.assert_allclose(out[..., 2], 0.25, atol=1 / 65535)
    assert packed_src.read_bytes() == before  # inputs are never modified
    small = write_image(tmp_path / "small.png", orm[:8])
    r = invoke("roughness", path, "-o", tmp_path / "x.png", "--pack", small)
    assert r.exit_code == 2 and "same size" in r.output


def test_channel_choice(tmp_path):
    rgb = np.stack([np.full((4, 4), v, np.float32) for v in (10.0, 100.0, 1000.0)], axis=-1)
    src = write_image(tmp_path / "rgb.exr", rgb, bits="float")
    r = invoke("roughness", src, "-o", tmp_path / "o.exr")
    assert r.exit_code == 2 and "--channel" in r.output
    r = invoke("roughness", src, "-o", tmp_path / "o.exr", "--channel", "B", "--bits", "float")
    assert r.exit_code == 0
    assert read_image(tmp_path / "o.exr").pixels[0, 0, 0] == pytest.approx(float(roughness_from_exponent(1000.0)))


def test_recipe_and_command_line_agree(tmp_path, exponent_map):
    path, _ = exponent_map
    r = invoke("roughness", path, "-o", tmp_path / "cli.png", "--rule", "width", "--target", "alpha")
    assert r.exit_code == 0, r.output
    params = params_from_mapping(get_bake("roughness"), {"rule": "width", "target": "alpha"}, "test")
    assert params == RoughnessParams(rule="width", target="alpha")
    run_bake("roughness", {"specular": path}, tmp_path / "lib.png", params)
    assert (tmp_path / "cli.png").read_bytes() == (tmp_path / "lib.png").read_bytes()


# ------------------------------------------------------------------------------------------ antialias


def test_antialias_loose_and_ktx2(tmp_path):
    n = bumpy_normals()
    src = write_image(tmp_path / "n.exr", n * 0.5 + 0.5, bits="float")
    r = invoke("antialias", src, "--roughness", 0.3, "-o", tmp_path / "aa.exr", "--bits", "float")
    assert r.exit_code == 0, r.output
    r = invoke("antialias", src, "--roughness", 0.3, "-o", tmp_path / "aa.ktx2", "--loose")
    assert r.exit_code == 0, r.output
    expect = roughness_mips(n, 0.3)
    for k, level in enumerate(expect):
        got = read_image(tmp_path / (f"aa.mip{k:02d}.exr" if k else "aa.exr")).pixels[..., 0]
        np.testing.assert_allclose(got, level, rtol=1e-5, atol=1e-6)
        loose = read_image(tmp_path / (f"aa.mip{k:02d}.png" if k else "aa.png")).pixels[..., 0]  # 16-bit
        np.testing.assert_allclose(loose, level, atol=0.5 / 65535 + 1e-6)
        np.testing.assert_allclose(got, level, rtol=1e-5, atol=1e-6)
    tex = read_ktx2(tmp_path / "aa.ktx2")
    assert len(tex.levels) == len(expect) == 6
    np.testing.assert_allclose(np.asarray(tex.levels[3])[..., 0], expect[3], atol=0.5 / 65535 + 1e-6)
    manifest = json.loads((tmp_path / "aa.ktx2.bakery.json").read_text())
    assert manifest["outputs"][:2] == ["aa.ktx2", "aa.png"] and "alpha^2" in manifest["conventions"]["roughness"]


def test_antialias_with_map_and_two_channel_normals(tmp_path):
    n = bumpy_normals(16)
    xy = write_image(tmp_path / "xy.exr", (n * 0.5 + 0.5)[..., :2], bits="float")
    rough = np.full((16, 16), 0.4, np.float32)
    rp = write_image(tmp_path / "r.png", rough, bits="16")
    r = invoke("antialias", xy, rp, "-o", tmp_path / "aa.ktx2")
    assert r.exit_code == 0, r.output
    tex = read_ktx2(tmp_path / "aa.ktx2")
    expect = roughness_mips(n, np.rint(rough * 65535) / 65535)
    np.testing.assert_allclose(np.asarray(tex.levels[-1])[..., 0], expect[-1], atol=1 / 65535 + 1e-5)


def test_antialias_bad_input(tmp_path):
    n = bumpy_normals(16)
    src = write_image(tmp_path / "n.png", n * 0.5 + 0.5)
    other = write_image(tmp_path / "r.png", np.full((8, 16), 0.5, np.float32))
    r = invoke("antialias", src, other, "-o", tmp_path / "aa.png")
    assert r.exit_code == 2 and "r.png: roughness map is 16x8 but the normal map n.png is 16x16" in r.output
    assert not list(tmp_path.glob("aa*"))
    r = invoke("antialias", src, "-o", tmp_path / "aa.png")
    assert r.exit_code == 2 and "--roughness" in r.output
    r = invoke("antialias", src, "--roughness", 0.5, "-o", tmp_path / "aa.ktx2", "--bits", "half")
    assert r.exit_code == 2 and "R16_UNORM" in r.output
    r = invoke("antialias", tmp_path / "missing.png", "--roughness", 0.5, "-o", tmp_path / "aa.png")
    assert r.exit_code == 2 and "missing.png" in r.output


def test_recipe_values_for_the_antialias_and_gloss_parameters():
    p = params_from_mapping(get_bake("roughness"), {"source": "gloss-linear", "exponent-range": [1, 2048]}, "t")
    assert p.exponent_range == (1.0, 2048.0)
    a = params_from_mapping(get_bake("antialias"), {"roughness": 0.4, "method": "toksvig", "loose": True}, "t")
    assert (a.roughness, a.method, a.loose) == (0.4, "toksvig", True)
