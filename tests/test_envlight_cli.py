"""The env specular / env lut commands and bakes: outputs, metadata, identical batch runs, bad input."""

from __future__ import annotations

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery.bakes import run_bake
from bakery.bakes.glossy import KTX_ROUGHNESS_KEY, LutParams, SpecularParams
from bakery.cli import app
from bakery.io import read_image, write_image
from bakery.io.ktx2 import read_ktx2
from bakery.samples import sky_panorama

runner = CliRunner()


@pytest.fixture(scope="module")
def sky(tmp_path_factory):
    p = tmp_path_factory.mktemp("sky") / "sky.exr"
    write_image(p, sky_panorama(128, sun_radius_deg=3.0), bits="float")
    return p


def test_help():
    for cmd in (["env", "specular", "--help"], ["env", "lut", "--help"]):
        res = runner.invoke(app, cmd)
        assert res.exit_code == 0 and "Usage" in res.output


def test_specular_ktx2_manifest_and_loose(sky, tmp_path):
    out = tmp_path / "spec.ktx2"
    res = runner.invoke(app, ["env", "specular", str(sky), "-o", str(out), "--face-size", "16", "--loose",
                              "--quality", "draft"])
    assert res.exit_code == 0, res.output
    tex = read_ktx2(out)
    assert tex.cubemap and len(tex.levels) == 5 and tex.levels[0].shape[:3] == (6, 16, 16)
    table = json.loads(tex.key_values[KTX_ROUGHNESS_KEY].rstrip(b"\0"))
    assert table["roughness"] == [0.0, 0.25, 0.5, 0.75, 1.0] and table["lobe"] == "ggx"
    assert table["level_from_roughness"] == "level = r * 4"
    man = json.loads((tmp_path / "spec.ktx2.bakery.json").read_text())
    assert man["roughness_per_level"] == table and man["bake"] == "env-specular"
    face = read_image(tmp_path / "spec.mip02.z+.exr").pixels
    assert face.shape == (4, 4, 3)
    assert np.allclose(face, tex.levels[2][4, :, :, :3], rtol=1e-3)


def test_recipe_and_command_give_identical_bytes(sky, tmp_path):
    a, b = tmp_path / "a.ktx2", tmp_path / "b.ktx2"
    r = runner.invoke(app, ["env", "specular", str(sky), "-o", str(a), "--face-size", "8", "--lobe", "blinn-phong",
                            "--level-roughness", "0,0.3,0.6,1"])
    assert r.exit_code == 0, r.output
    run_bake("env-specular", {"environment": sky}, b,
             SpecularParams(face_size=8, lobe="blinn-phong", level_roughness=(0, 0.3, 0.6, 1)))
    assert a.read_bytes() == b.read_bytes()
    ja = json.loads((tmp_path / "a.ktx2.bakery.json").read_text())
    jb = json.loads((tmp_path / "b.ktx2.bakery.json").read_text())
    ja.pop("outputs"), jb.pop("outputs")
    assert list(ja.pop("output_digests").values()) == list(jb.pop("output_digests").values())
    assert ja == jb


@pytest.mark.parametrize(("args", "message"), [
    (["--face-size", "24"], "power of two"),
    (["--face-size", "16", "--levels", "6"], "at most 5 levels"),
    (["--level-roughness", "0,0.5,1.5", "--levels", "3"], "[0, 1]"),
    (["--level-roughness", "cubic"], "--level-roughness"),
    (["--lobe", "phong"], "--lobe"),
    (["--quality", "best"], "--quality"),
    (["--ktx2-format", "rgba8"], "--ktx2-format"),
])
def test_bad_options(sky, tmp_path, args, message):
    out = tmp_path / "x.ktx2"
    res = runner.invoke(app, ["env", "specular", str(sky), "-o", str(out), *args])
    assert res.exit_code == 2 and message in res.output
    assert not out.exists()


def test_bad_inputs(tmp_path):
    odd = tmp_path / "odd.exr"
    write_image(odd, np.ones((10, 30, 3), np.float32), bits="float")
    res = runner.invoke(app, ["env", "specular", str(odd), "-o", str(tmp_path / "x.ktx2")])
    assert res.exit_code == 2 and "odd.exr" in res.output
    res = runner.invoke(app, ["env", "specular", str(tmp_path / "missing.hdr"), "-o", str(tmp_path / "x.ktx2")])
    assert res.exit_code == 2
    res = runner.invoke(app, ["env", "specular", str(odd), "-o", str(tmp_path / "x.png")])
    assert res.exit_code == 2 and ".ktx2" in res.output
    assert not list(tmp_path.glob("x.*"))


@pytest.mark.parametrize("suffix", [".png", ".exr", ".ktx2"])
def test_lut_files(tmp_path, suffix):
    from bakery.envmap.brdf_lut import brdf_lut

    out = tmp_path / f"lut{suffix}"
    res = runner.invoke(app, ["env", "lut", "-o", str(out), "--size", "16"])
    assert res.exit_code == 0, res.output
    want = brdf_lut(16)
    if suffix == ".ktx2":
        tex = read_ktx2(out)
        got = tex.levels[0]
        assert tex.format.name == "R16G16_SFLOAT"
        tol = 1e-3
    else:
        got = read_image(out).pixels
        tol = 1.0 / 65535 if suffix == ".png" else 1e-7
        if suffix == ".png":
            assert np.all(got[..., 2] == 0)
    assert got.shape[:2] == (16, 16)
    assert np.abs(got[..., :2] - want).max() <= tol
    man = json.loads(out.with_name(out.name + ".bakery.json").read_text())
    assert "n·v" in man["layout"]["columns"]


def test_lut_bake_matches_command(tmp_path):
    a, b = tmp_path / "a.png", tmp_path / "b.png"
    r = runner.invoke(app, ["env", "lut", "-o", str(a), "--size", "8", "--roughness-grows", "up"])
    assert r.exit_code == 0, r.output
    run_bake("env-lut", {}, b, LutParams(size=8, roughness_grows="up"))
    assert a.read_bytes() == b.read_bytes()
    res = runner.invoke(app, ["env", "lut", "-o", str(tmp_path / "c.png"), "--roughness-grows", "left"])
    assert res.exit_code == 2
