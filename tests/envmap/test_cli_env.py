"""``bakery env convert`` / ``bakery env diffuse`` / ``bakery info`` on KTX2: behaviour, bad input, atomicity.

Numbers are checked in test_sample.py and test_irradiance.py; here: files, layouts, messages, exit codes.
"""

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery import sphere as S
from bakery.cli import app
from bakery.io.images import read_image, write_image
from bakery.io.ktx2 import read_ktx2

runner = CliRunner()


def run(*args):
    return runner.invoke(app, [str(a) for a in args])


@pytest.fixture
def pano(tmp_path):
    d = S.equirect_directions(128, 64, dtype=np.float64)
    img = np.stack([2 + d[..., 0], 2 + d[..., 1], 2 + d[..., 2]], -1).astype(np.float32)
    img[20, 70] = 1.0e5  # a small sun, above the half-float range
    return write_image(tmp_path / "pano.exr", img, bits="float")


@pytest.mark.parametrize("args", [["env", "--help"], ["env", "convert", "--help"],
                                  ["env", "diffuse", "--help"]])
def test_help(args):
    r = run(*args)
    assert r.exit_code == 0 and "Usage" in r.output


def test_convert_through_every_layout(tmp_path, pano):
    steps = [
        (pano, tmp_path / "a_{face}.exr", []),
        (tmp_path / "a_{face}.exr", tmp_path / "b.exr", ["--output-layout", "cross-wide"]),
        (tmp_path / "b.exr", tmp_path / "c.exr", ["--output-layout", "cross-tall", "--bits", "float"]),
        (tmp_path / "c.exr", tmp_path / "d.tif", ["--output-layout", "row"]),
        (tmp_path / "d.tif", tmp_path / "e.exr", ["--output-layout", "stack", "--bits", "float"]),
        (tmp_path / "e.exr", tmp_path / "f.ktx2", ["--ktx2-format", "rgba32f"]),
        (tmp_path / "f.ktx2", tmp_path / "g.exr", ["--output-layout", "equirect", "--width", "128", "--bits",
                                                   "float"]),
    ]
    for src, dst, extra in steps:
        r = run("env", "convert", src, "-o", dst, *extra)
        assert r.exit_code == 0, r.output
    tex = read_ktx2(tmp_path / "f.ktx2")
    assert tex.cubemap and tex.width == 32 and len(tex.levels) == 6  # 128 / 4, full mip chain
    back = read_image(tmp_path / "g.exr").pixels
    orig = read_image(pano).pixels
    lat = np.abs(np.degrees(np.arcsin(S.equirect_directions(128, 64)[..., 1])))
    smooth = lat < 60
    smooth[14:28, 62:78] = False  # around the sun, which spreads over its neighbours
    rel = np.abs(back - orig) / orig
    assert rel[smooth].max() < 0.03  # half-float faces and two resamplings on a 32-texel cube
    man = json.loads((tmp_path / "f.ktx2.bakery.json").read_text())
    assert man["bake"] == "env-convert" and man["output"]["levels"] == 6
    assert json.loads((tmp_path / "a_cube.exr.bakery.json").read_text())["outputs"][0] == "a_x+.exr"


def test_convert_is_deterministic(tmp_path, pano):
    for name in ("x.ktx2", "y.ktx2"):
        assert run("env", "convert", pano, "-o", tmp_path / name, "--face-size", "16").exit_code == 0
    assert (tmp_path / "x.ktx2").read_bytes() == (tmp_path / "y.ktx2").read_bytes()


def test_half_float_range_is_clamped_with_a_count(tmp_path, pano):
    r = run("env", "convert", pano, "-o", tmp_path / "h.exr", "--width", "128")
    assert r.exit_code == 0
    assert "warning: " in r.output and "3 sample(s) above 65504" in r.output  # R, G, B of the sun
    r = run("env", "convert", pano, "-o", tmp_path / "f.exr", "--width", "128", "--bits", "float")
    assert "65504" not in r.output
    assert read_image(tmp_path / "f.exr").pixels.max() == pytest.approx(1.0e5)


def test_hdr_colour_in_an_srgb8_ktx2_is_counted_and_clamped(tmp_path):
    # six 8x8 float faces of 0.5 with four texels of radiance 3 on +X: 12 of the 6 * 64 * 3 = 1152 colour
    # samples (1.04 %) lie above 1, the top of R8G8B8A8_SRGB (KTX 2.0 / Vulkan format table)
    faces = np.full((6, 8, 8, 3), 0.5, np.float32)
    faces[0, 2:4, 5:7] = 3.0
    for i, tok in enumerate(("x+", "x-", "y+", "y-", "z+", "z-")):
        write_image(tmp_path / f"in_{tok}.exr", faces[i], bits="float")
    out = tmp_path / "ldr.ktx2"
    r = run("env", "convert", tmp_path / "in_{face}.exr", "-o", out, "--ktx2-format", "rgba8-srgb", "--no-mips")
    assert r.exit_code == 0, r.output
    lines = [ln for ln in r.output.splitlines() if ln.startswith("warning:")]
    assert len(lines) == 1 and "12 of 1152 colour samples (1.04 %)" in lines[0] and "rgba16f" in lines[0]
    # the stored bytes, read without bakery's reader: level 0 starts at the offset in the level index
    # (KTX 2.0 section 3.9: byteOffset at bytes 80-87); 0xFF where clamped, sRGB(0.5) = 188 elsewhere
    # (IEC 61966-2-1: 1.055 * 0.5^(1/2.4) - 0.055 = 0.7354, x 255 = 187.5)
    data = out.read_bytes()
    off = int.from_bytes(data[80:88], "little")
    texels = np.frombuffer(data[off:off + 6 * 64 * 4], np.uint8).reshape(6, 8, 8, 4)
    assert (texels[0, 2:4, 5:7, :3] == 255).all()
    assert set(np.unique(texels[1:, :, :, :3])) == {188}
    # an HDR format keeps the values and says nothing
    r = run("env", "convert", tmp_path / "in_{face}.exr", "-o", tmp_path / "hdr.ktx2", "--no-mips")
    assert r.exit_code == 0 and "warning" not in r.output
    assert read_ktx2(tmp_path / "hdr.ktx2").levels[0].max() == 3.0


def test_hdr_irradiance_in_an_srgb8_ktx2_is_counted(tmp_path, pano):
    r = run("env", "diffuse", pano, "-o", tmp_path / "irr.json", "--face-size", "8", "--ktx2-format", "rgba8-srgb")
    assert r.exit_code == 0, r.output
    # the sky's radiance is 1-3 everywhere (pano fixture), so E/pi exceeds 1 in every colour sample
    assert "warning: " in r.output and "of 1152 colour samples" in r.output and "rgba8-srgb" in r.output


def test_rotate_and_exposure(tmp_path, pano):
    r = run("env", "convert", pano, "-o", tmp_path / "r.exr", "--rotation", "90", "--exposure", "1", "--bits",
            "float")
    assert r.exit_code == 0
    out = read_image(tmp_path / "r.exr").pixels
    np.testing.assert_allclose(out, 2 * np.roll(read_image(pano).pixels, 32, axis=1), rtol=1e-3)


def test_diffuse_outputs(tmp_path, pano):
    r = run("env", "diffuse", pano, "-o", tmp_path / "irr.json", "--face-size", "8")
    assert r.exit_code == 0, r.output
    data = json.loads((tmp_path / "irr.json").read_text())
    assert len(data["irradiance_sh"]) == 9 and len(data["irradiance_sh"][0]) == 3
    np.testing.assert_allclose(np.array(data["reflected_sh"]) * np.pi, data["irradiance_sh"])
    tex = read_ktx2(tmp_path / "irr.ktx2")
    assert tex.cubemap and tex.width == 8
    assert (tmp_path / "irr.z+.exr").exists() and (tmp_path / "irr.json.bakery.json").exists()
    r = run("env", "diffuse", pano, "-o", tmp_path / "ex.json", "--face-size", "8", "--method", "exact",
            "--units", "irradiance")
    assert r.exit_code == 0, r.output
    assert read_ktx2(tmp_path / "ex.ktx2").levels[0].min() >= 0


def test_info_on_ktx2(tmp_path, pano):
    run("env", "convert", pano, "-o", tmp_path / "c.ktx2", "--face-size", "8")
    r = run("info", tmp_path / "c.ktx2")
    assert r.exit_code == 0
    for text in ("KTX2", "cubemap", "R16G16B16A16_SFLOAT (97)", "8 x 8 per face", "levels:   4"):
        assert text in r.output


def _fails(r, text):
    assert r.exit_code == 2, r.output
    assert text in r.output


def test_bad_aspect(tmp_path):
    p = write_image(tmp_path / "odd.exr", np.ones((200, 300, 3), np.float32))
    _fails(run("env", "convert", p, "-o", tmp_path / "o.ktx2"), "odd.exr: image is 300x200")
    assert not (tmp_path / "o.ktx2").exists()


def test_faces_of_different_sizes(tmp_path):
    for i, tok in enumerate(("x+", "x-", "y+", "y-", "z+", "z-")):
        n = 8 if i != 3 else 16
        write_image(tmp_path / f"f_{tok}.exr", np.ones((n, n, 3), np.float32))
    _fails(run("env", "convert", tmp_path / "f_{face}.exr", "-o", tmp_path / "o.exr"),
           "f_y-.exr: faces differ")
    _fails(run("env", "convert", tmp_path / "g_{face}.exr", "-o", tmp_path / "o.exr"), "file not found")


def test_nan_and_negative_radiance(tmp_path):
    img = np.ones((32, 64, 3), np.float32)
    img[3, 4, 1] = np.nan
    img[5, 6, 0] = -2
    p = write_image(tmp_path / "bad.exr", img, bits="float")
    _fails(run("env", "convert", p, "-o", tmp_path / "o.exr"), "1 NaN/Inf sample(s) and 1 negative")
    assert not (tmp_path / "o.exr").exists()
    r = run("env", "convert", p, "-o", tmp_path / "o.exr", "--repair")
    assert r.exit_code == 0 and "repaired 1 NaN/Inf and 1 negative" in r.output


def test_truncated_ktx2(tmp_path, pano):
    run("env", "convert", pano, "-o", tmp_path / "c.ktx2", "--face-size", "8")
    data = (tmp_path / "c.ktx2").read_bytes()
    (tmp_path / "t.ktx2").write_bytes(data[: len(data) // 2])
    _fails(run("env", "convert", tmp_path / "t.ktx2", "-o", tmp_path / "o.exr"),
           "t.ktx2: KTX2 file is truncated")
    _fails(run("info", tmp_path / "t.ktx2"), "truncated")


def test_output_problems(tmp_path, pano):
    _fails(run("env", "convert", pano, "-o", tmp_path / "nope" / "o.exr"), "output folder does not exist")
    _fails(run("env", "convert", pano, "-o", pano), "output path is also an input")
    _fails(run("env", "convert", pano, "-o", tmp_path / "o.exr", "--ktx2-format", "bc9"),
           "unknown KTX2 format")
    _fails(run("env", "diffuse", pano, "-o", tmp_path / "o.exr"), "must be a .json file")
    _fails(run("env", "convert", pano, "-o", tmp_path / "o.exr", "--width", "33"), "width must be even")
    _fails(run("env", "convert", pano, "-o", tmp_path / "o.ktx2", "--width", "64"), "use --face-size")
    _fails(run("env", "convert", pano, "-o", tmp_path / "o.exr", "--face-size", "64"), "use --width")


def test_panorama_as_2d_ktx2_with_mips(tmp_path, pano):
    r = run("env", "convert", pano, "-o", tmp_path / "p.ktx2", "--output-layout", "equirect",
            "--ktx2-format", "rgba32f")
    assert r.exit_code == 0, r.output
    tex = read_ktx2(tmp_path / "p.ktx2")
    assert not tex.cubemap and [lv.shape[:2] for lv in tex.levels][:3] == [(64, 128), (32, 64), (16, 32)]
    assert len(tex.levels) == 8


def test_info_statistics_in_strips_match_whole_array_numpy(monkeypatch):
    import bakery.info as info

    rng = np.random.default_rng(17)
    px = rng.normal(0.5, 2.0, (37, 29, 3)).astype(np.float32)
    px[3, 4, 0], px[20, 1, 2], px[30, 28, 1] = np.nan, np.inf, -np.inf
    px[:, :, 1][px[:, :, 1] > 0] = np.nan  # many NaN in G
    monkeypatch.setattr(info, "STATS_TEXELS", 100)  # 11 strips, some with and some without NaN
    lo, hi, mean, nan, inf = info.channel_stats(px)
    finite = np.where(np.isfinite(px), px, np.nan).astype(np.float64)  # numpy's nan-aware reductions as reference
    np.testing.assert_array_equal(lo, np.nanmin(finite, axis=(0, 1)))
    np.testing.assert_array_equal(hi, np.nanmax(finite, axis=(0, 1)))
    np.testing.assert_allclose(mean, np.nanmean(finite, axis=(0, 1)), rtol=1e-12)  # float64 sums either way
    assert nan == int(np.isnan(px).sum()) and inf == 2
    lo, hi, mean, nan, inf = info.channel_stats(np.full((4, 4, 1), np.nan, np.float32))
    assert np.isnan(mean[0]) and nan == 16 and inf == 0
