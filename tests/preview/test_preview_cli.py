"""``bakery preview`` and ``bakery sheet`` from the command line: outputs, animations, one-line errors with exit
code 2 and no output left behind."""

from __future__ import annotations

import re

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery.cli import app
from bakery.errors import BakeryWarning
from bakery.io import read_image, write_image
from bakery.io.animation import read_animation
from bakery.preview.inputs import decode_normal_pixels, load_material

runner = CliRunner()


@pytest.fixture()
def maps(tmp_path):
    rows, cols = np.mgrid[0:32, 0:32] * (2 * np.pi / 32)
    n = np.stack([np.cos(cols) * 0.4, np.sin(rows) * 0.4, np.ones((32, 32))], -1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    write_image(tmp_path / "n.png", (n * 0.5 + 0.5).astype(np.float32), bits="8")
    write_image(tmp_path / "r.png", np.full((32, 32, 1), 0.3, np.float32), bits="8")
    write_image(tmp_path / "c.png", np.full((32, 32, 3), 0.5, np.float32), bits="8")
    return tmp_path


@pytest.mark.parametrize("cmd", [["preview"], ["sheet"]])
def test_help(cmd):
    r = runner.invoke(app, [*cmd, "--help"])
    assert r.exit_code == 0 and "Usage" in r.output


def test_preview_png(maps):
    out = maps / "out.png"
    r = runner.invoke(app, ["preview", "-o", str(out), "--normal", str(maps / "n.png"), "--roughness",
                            str(maps / "r.png"), "--base-color", str(maps / "c.png"), "--size", "48",
                            "--supersample", "1"])
    assert r.exit_code == 0, r.output
    img = read_image(out)
    assert img.pixels.shape == (48, 96, 3) and img.bits == "8"
    assert img.pixels.std() > 0.02


def test_preview_options_change_the_picture(maps):
    def run(*extra):
        out = maps / "o.png"
        r = runner.invoke(app, ["preview", "-o", str(out), "--normal", str(maps / "n.png"), "--size", "32",
                                "--supersample", "1", "--views", "ball", *extra])
        assert r.exit_code == 0, r.output
        return read_image(out).pixels

    base = run()
    assert base.shape == (32, 32, 3)
    for extra in (["--rotation", "90"], ["--yaw", "40"], ["--y", "down"], ["--exposure", "auto"]):
        assert np.abs(run(*extra) - base).mean() > 1 / 255, extra


@pytest.mark.parametrize("suffix", [".gif", ".webp"])
def test_turntable_animation(maps, suffix):
    out = maps / f"spin{suffix}"
    r = runner.invoke(app, ["preview", "-o", str(out), "--normal", str(maps / "n.png"), "--turntable", "5",
                            "--size", "32", "--supersample", "1"])
    assert r.exit_code == 0, r.output
    frames = read_animation(out)
    assert frames.shape == (5, 32, 32, 3)
    assert np.abs(frames[1].astype(int) - frames[0]).mean() > 0.5  # the bumps move


@pytest.mark.parametrize("args, message", [
    (["--roughness", "1.5"], "roughness must lie in [0, 1]"),
    (["--roughness", "missing.png"], "file not found"),
    (["--base-color", "1,2"], "--base-color takes one number or 3 numbers"),
    (["--exposure", "bright"], "--exposure"),
    (["--white", "0"], "--white must be a positive"),
    (["--turntable", "4"], "output must end in"),
    (["--normal", "c.png", "--base-color", "0.5,0.5"], "--base-color"),
])
def test_bad_input_exits_2_and_writes_nothing(maps, monkeypatch, args, message):
    monkeypatch.chdir(maps)
    before = sorted(p.name for p in maps.iterdir())
    r = runner.invoke(app, ["preview", "-o", "out.png", "--size", "16", *args])
    assert r.exit_code == 2, r.output
    assert message in r.output
    assert sorted(p.name for p in maps.iterdir()) == before


def test_environment_must_be_a_panorama(maps):
    write_image(maps / "sq.exr", np.ones((16, 16, 3), np.float32) * 2, bits="half")
    r = runner.invoke(app, ["preview", "-o", str(maps / "o.png"), "--env", str(maps / "sq.exr"), "--size", "16"])
    assert r.exit_code == 2 and "equirectangular" in r.output
    assert not (maps / "o.png").exists()


def test_output_equal_to_input_is_refused(maps):
    r = runner.invoke(app, ["preview", "-o", str(maps / "n.png"), "--normal", str(maps / "n.png")])
    assert r.exit_code == 2 and "also an input" in r.output


def test_load_material_conventions(maps):
    # Y-down files store −y (docs/references.md, section 1); decoding as "down" negates it back
    px = read_image(maps / "n.png").pixels
    up = decode_normal_pixels(px, green="up")
    down = decode_normal_pixels(px, green="down")
    np.testing.assert_allclose(down[..., 1], -up[..., 1])
    np.testing.assert_allclose(np.linalg.norm(up, axis=-1), 1, atol=1e-5)
    # colour maps are decoded from sRGB (IEC 61966-2-1): stored 128/255 is linear 0.215861
    m = load_material(base_color=maps / "c.png")
    assert float(m.base_color[0, 0, 0]) == pytest.approx(0.215861, abs=1e-5)


def test_sheet_command(maps):
    out = maps / "sheet" / "index.html"
    out.parent.mkdir()
    r = runner.invoke(app, ["sheet", str(maps), "-o", str(out), "--thumb", "32"])
    assert r.exit_code == 0, r.output
    page = out.read_text()
    for name in ("n.png", "r.png", "c.png"):
        assert name in page
    assert (maps / "sheet" / "index.png").exists()
    # run again over the same folder: the sheet's own thumbnails and grid are not listed as maps
    for _ in range(2):
        r = runner.invoke(app, ["sheet", str(maps), "-o", str(out), "--thumb", "32", "--no-lit"])
        assert r.exit_code == 0, r.output
        names = re.findall(r'<div class="name">([^<]*)</div>', out.read_text())
        assert names == ["c.png", "n.png", "r.png"]


def test_sheet_errors(tmp_path):
    r = runner.invoke(app, ["sheet", str(tmp_path), "-o", str(tmp_path / "s.html")])
    assert r.exit_code == 2 and "no maps found" in r.output
    r = runner.invoke(app, ["sheet", str(tmp_path / "nope"), "-o", str(tmp_path / "s.html")])
    assert r.exit_code == 2 and "no such file or folder" in r.output
    r = runner.invoke(app, ["sheet", str(tmp_path), "-o", str(tmp_path / "s.png")])
    assert r.exit_code == 2 and ".html" in r.output
    assert list(tmp_path.iterdir()) == []


def test_sources_are_baked_in_memory(tmp_path):
    # A height ramp rising one unit per texel, strength 1: n = normalize(−1, 0, 1) (Blinn 1978, as in
    # docs/references.md, section 1); exponents 1, 32, 8192 -> perceptual roughness 0.903602, 0.492479, 0.124992
    # (Walter et al. 2007: alpha = sqrt(2/(n + 2)), r = sqrt(alpha); docs/references.md, section 5).
    ramp = np.tile(np.arange(16, dtype=np.float32), (8, 1))[..., None]
    write_image(tmp_path / "h.exr", ramp, bits="float")
    exps = np.array([[1.0, 32.0, 8192.0]], np.float32)[..., None]
    write_image(tmp_path / "e.exr", exps, bits="float")
    m = load_material(height=tmp_path / "h.exr", strength=1.0, exponent=tmp_path / "e.exr")
    np.testing.assert_allclose(m.normals[4, 8], [-0.707107, 0.0, 0.707107], atol=1e-5)
    np.testing.assert_allclose(m.roughness[0], [0.903602, 0.492479, 0.124992], atol=1e-5)
    out = tmp_path / "o.png"
    r = runner.invoke(app, ["preview", "-o", str(out), "--height", str(tmp_path / "h.exr"), "--exponent",
                            str(tmp_path / "e.exr"), "--size", "16", "--supersample", "1"])
    assert r.exit_code == 0, r.output
    for args, message in ((["--normal", str(out)], "not both"), (["--roughness", str(out)], "not both")):
        r = runner.invoke(app, ["preview", "-o", str(tmp_path / "x.png"), "--height", str(tmp_path / "h.exr"),
                                "--exponent", str(tmp_path / "e.exr"), *args])
        assert r.exit_code == 2 and message in r.output
    r = runner.invoke(app, ["preview", "-o", str(tmp_path / "x.png"), "--strength", "2"])
    assert r.exit_code == 2 and "--height" in r.output


@pytest.fixture(scope="module")
def baked_sky(tmp_path_factory):
    """The demo sky baked by the environment bakes: prefiltered chain (KTX2), diffuse SH (JSON), BRDF tables."""
    from bakery.bakes import get_bake, run_bake
    from bakery.samples import sky_panorama

    d = tmp_path_factory.mktemp("baked")
    sky = write_image(d / "sky.exr", sky_panorama(256), bits="float")
    spec, diff, lut = get_bake("env-specular"), get_bake("env-diffuse"), get_bake("env-lut")
    run_bake("env-specular", {"environment": sky}, d / "chain.ktx2",
             spec.params(face_size=32, levels=6, quality="draft"))
    with pytest.warns(BakeryWarning, match="9 SH coefficients"):  # the procedural sky holds a sun
        run_bake("env-diffuse", {"environment": sky}, d / "diffuse.json", diff.params(face_size=8))
    run_bake("env-lut", {}, d / "lut.png", lut.params(size=32))
    run_bake("env-lut", {}, d / "lut_up.exr", lut.params(size=32, roughness_grows="up"))
    return d


def test_baked_lighting_matches_the_panorama(baked_sky, maps):
    # The same sky through the baked files (chain, SH JSON, table) or baked in memory from the panorama gives
    # nearly the same picture (the chains differ in face size, so not exactly).
    def run(*args):
        out = maps / "o.png"
        r = runner.invoke(app, ["preview", "-o", str(out), "--normal", str(maps / "n.png"), "--roughness", "0.4",
                                "--size", "48", "--supersample", "1", *args])
        assert r.exit_code == 0, r.output
        return read_image(out).pixels

    d = baked_sky
    from_files = run("--specular", str(d / "chain.ktx2"), "--diffuse", str(d / "diffuse.json"))
    with_lut = run("--specular", str(d / "chain.ktx2"), "--diffuse", str(d / "diffuse.json"), "--lut",
                   str(d / "lut.png"))
    from_pano = run("--env", str(d / "sky.exr"))
    assert np.abs(with_lut - from_files).mean() < 1 / 255
    assert np.abs(from_pano - from_files).mean() < 4 / 255
    # a table stored with roughness growing up the rows is read the right way round (its manifest says so)
    from bakery.preview.lighting import read_brdf_table

    np.testing.assert_allclose(read_brdf_table(d / "lut_up.exr"), read_brdf_table(d / "lut.png"), atol=2e-5)


def test_baked_lighting_errors(baked_sky, maps):
    d = baked_sky
    out = str(maps / "o.png")
    for args, message in ((["--specular", str(d / "chain.ktx2")], "needs both"),
                          (["--diffuse", str(d / "diffuse.json"), "--specular", str(d / "chain.ktx2"), "--env",
                            str(d / "sky.exr")], "not both"),
                          (["--lut", str(d / "lut.png")], "--lut goes with"),
                          (["--specular", str(d / "lut_up.exr"), "--diffuse", str(d / "diffuse.json")], "KTX2"),
                          (["--specular", str(d / "chain.ktx2"), "--diffuse", str(d / "chain.ktx2")], "JSON")):
        r = runner.invoke(app, ["preview", "-o", out, "--size", "16", *args])
        assert r.exit_code == 2 and message in r.output, (args, r.output)
    assert not (maps / "o.png").exists()


def _inspect(path):
    import json

    r = runner.invoke(app, ["inspect", "--json", str(path)])
    assert r.exit_code == 0, r.output
    (report,) = json.loads(r.output)
    return report


@pytest.mark.parametrize("extra, name", [([], "shot.png"), (["--turntable", "3"], "spin.webp")])
def test_preview_writes_a_manifest_that_calls_it_a_picture(maps, extra, name):
    """A 96x48 picture is no power of two in width; as a picture bakery wrote it is judged only for being
    decodable and finite. The same PNG without its manifest, or changed since, is judged as any image."""
    import json
    import shutil

    out = maps / name
    r = runner.invoke(app, ["preview", "-o", str(out), "--normal", str(maps / "n.png"), "--roughness",
                            str(maps / "r.png"), "--size", "48", "--supersample", "1", *extra])
    assert r.exit_code == 0, r.output
    manifest = json.loads((maps / f"{name}.bakery.json").read_text())
    assert manifest["picture"] is True and manifest["bake"] == "preview"
    assert set(manifest["inputs"]) == {"normal", "roughness"} and manifest["params"]["size"] == 48
    assert list(manifest["output_digests"]) == [name]
    if not name.endswith(".png"):
        return
    report = _inspect(out)
    assert report["kind"] == "picture" and report["from"] == "manifest" and report["findings"] == [], report
    loose = maps / "loose" / name
    loose.parent.mkdir()
    shutil.copy(out, loose)
    assert [f["code"] for f in _inspect(loose)["findings"]] == ["non-power-of-two"]
    img = read_image(out).pixels
    write_image(out, 1.0 - img, bits="8")  # changed after it was written: the manifest is stale
    assert sorted(f["code"] for f in _inspect(out)["findings"]) == ["manifest-stale", "non-power-of-two"]


def test_preview_checks_the_manifest_path_before_any_work(maps):
    (maps / "shot.png.bakery.json").mkdir()
    r = runner.invoke(app, ["preview", "-o", str(maps / "shot.png"), "--normal", str(maps / "n.png"),
                            "--size", "16"])
    assert r.exit_code == 2 and "shot.png.bakery.json" in r.output, r.output
    assert not (maps / "shot.png").exists()
