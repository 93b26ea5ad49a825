"""Target profiles: strict reading, the defaults every bake takes from them, and their place in the precedence
command option > folder file > rule parameters > recipe defaults > profile > the bake's own default."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery.batch.plan import make_plan
from bakery.batch.recipe import load_recipe
from bakery.cli import app
from bakery.errors import BakeryError
from bakery.io import read_image, write_image
from bakery.profiles import load_profile

ROOT = Path(__file__).resolve().parents[1]
Y_UP = ROOT / "samples" / "profiles" / "y-up-16bit-uncompressed.toml"
Y_DOWN = ROOT / "samples" / "profiles" / "y-down-8bit-block-compressed.toml"
runner = CliRunner()

N, AMP, S = 32, 0.25, 4.0  # sinusoid period (texels), amplitude (height units), strength (texels per unit)


def _manifest(path: Path) -> dict:
    return json.loads(Path(f"{path}.bakery.json").read_text(encoding="utf-8"))


@pytest.fixture
def rows_sinusoid(tmp_path) -> Path:
    """h = 0.5 + AMP sin(2 pi r / N) down the rows r, float EXR (the full range 0..1 is one height unit)."""
    r = np.arange(N, dtype=np.float64)[:, None] * np.ones((1, N))
    return write_image(tmp_path / "h.exr", (0.5 + AMP * np.sin(2 * math.pi * r / N)).astype(np.float32),
                       bits="float")


def _analytic_ny() -> np.ndarray:
    # With the central difference [-1, 0, 1]/2 the derivative of sin(w r) sampled on whole texels is exactly
    # sin(w) cos(w r) (the difference of two sines, Abramowitz & Stegun 1964, eq. 4.3.16). y runs up, rows
    # down, so dh/dy = -AMP sin(w) cos(w r), and n = normalize(-s dh/dx, -s dh/dy, 1) (Blinn 1978, "Simulation
    # of wrinkled surfaces": the normal of a height field is (-h_x, -h_y, 1) normalised).
    w = 2 * math.pi / N
    r = np.arange(N, dtype=np.float64)
    gy = S * AMP * math.sin(w) * np.cos(w * r)
    return gy / np.sqrt(1 + gy * gy)


def _bake_normal(src: Path, out: Path, *extra: str) -> np.ndarray:
    r = runner.invoke(app, ["normal", str(src), "-o", str(out), "--kernel", "central", "--strength", str(S),
                            *extra])
    assert r.exit_code == 0, r.output
    return read_image(out).pixels


def test_the_sample_profiles_state_what_their_names_say():
    up, down = load_profile(Y_UP), load_profile(Y_DOWN)
    assert (up.y, down.y) == ("up", "down")
    assert up.defaults_for("normal")["bits"] == "16" and down.defaults_for("normal")["bits"] == "8"
    assert down.defaults_for("normal")["ktx2-format"] == "bc5"
    assert down.defaults_for("antialias")["ktx2-format"] == "bc4"
    assert up.defaults_for("normal-mips")["ktx2-format"] == "rgba16"
    assert up.name == "Y-up, 16-bit, uncompressed" and up.path == Y_UP.resolve()
    # "full" is each bake's own way to say down to 1x1
    assert down.defaults_for("normal-mips")["levels"] is None and down.defaults_for("env-specular")["levels"] == 0
    assert down.defaults_for("env-convert")["mips"] is True
    # a kind's table wins over the top level; a statement reaches only bakes that have the parameter
    assert down.defaults_for("env-convert")["bits"] == "half"
    assert "y" not in down.defaults_for("roughness") and "bits" not in down.defaults_for("env-lut")
    # a cube layout describes outputs written as one image: a .ktx2 or {face} output keeps its own
    assert down.defaults_for("env-convert", "sky.png")["output-layout"] == "row"
    assert "output-layout" not in down.defaults_for("env-convert", "sky.ktx2")
    assert "output-layout" not in down.defaults_for("env-convert", "sky_{face}.exr")


def test_y_down_profile_inverts_green_against_the_analytic_slope(tmp_path, rows_sinusoid):
    ny = _analytic_ny()
    up = _bake_normal(rows_sinusoid, tmp_path / "up.png", "--profile", str(Y_UP))
    down = _bake_normal(rows_sinusoid, tmp_path / "down.png", "--profile", str(Y_DOWN))
    # Y-up file: green = n.y * 0.5 + 0.5 (16-bit: rounding 0.5/65535 = 7.6e-6; measured max 8e-6)
    assert np.abs(up[:, :, 1] - (0.5 + 0.5 * ny[:, None])).max() < 2e-5
    # Y-down file: green = -n.y * 0.5 + 0.5 (8-bit from the profile: rounding 0.5/255 = 2.0e-3)
    assert np.abs(down[:, :, 1] - (0.5 - 0.5 * ny[:, None])).max() < 2.1e-3
    assert read_image(tmp_path / "up.png").bits == "16" and read_image(tmp_path / "down.png").bits == "8"
    assert np.abs(up[:, :, 0] - 0.5).max() < 2e-5  # no slope across: red stays 0.5
    m = _manifest(tmp_path / "down.png")
    assert m["params"]["y"] == "down" and m["params"]["bits"] == "8" and m["params"]["ktx2_format"] == "bc5"
    assert m["conventions"]["y"] == "down"


def test_an_option_on_the_command_line_wins_over_the_profile(tmp_path, rows_sinusoid):
    ny = _analytic_ny()
    got = _bake_normal(rows_sinusoid, tmp_path / "n.png", "--profile", str(Y_DOWN), "--y", "up")
    assert np.abs(got[:, :, 1] - (0.5 + 0.5 * ny[:, None])).max() < 2.1e-3  # Y-up green, 8-bit rounding
    m = _manifest(tmp_path / "n.png")
    assert m["params"]["y"] == "up" and m["params"]["bits"] == "8"  # the rest still from the profile
    got = _bake_normal(rows_sinusoid, tmp_path / "n16.png", "--profile", str(Y_DOWN), "--bits", "16")
    assert read_image(tmp_path / "n16.png").bits == "16"
    assert np.abs(got[:, :, 1] - (0.5 - 0.5 * ny[:, None])).max() < 2e-5


PROFILE = """\
name = "test"
y = "down"
bits = "16"
levels = 3
zstd = 5
effort = "balanced"

[color]
transfer = "linear"

[lookup]
roughness-grows = "up"

[environment]
bits = "half"
"""


def test_a_profile_reaches_the_manifest_of_every_bake(tmp_path):
    prof = tmp_path / "p.toml"
    prof.write_text(PROFILE, encoding="utf-8")
    rng = np.random.default_rng(5)
    h = write_image(tmp_path / "h.png", rng.random((16, 16)).astype(np.float32), bits="16")
    col = write_image(tmp_path / "c.png", rng.random((16, 16, 3)).astype(np.float32), bits="8")
    sky = write_image(tmp_path / "sky.exr", (rng.random((16, 32, 3)) + 0.1).astype(np.float32), bits="float")
    out = tmp_path / "out"
    out.mkdir()
    cases = [
        (["normal", str(h)], "n.png", {"y": "down", "bits": "16"}),
        (["normal-mips", str(out / "n.png")], "nm.png", {"y": "down", "levels": 3, "bits": "16"}),
        (["height", str(out / "n.png")], "hh.png", {"y": "down", "bits": "16"}),
        (["occlusion", str(h)], "ao.png", {"y": "down", "bits": "16"}),
        (["mips", str(col)], "c.png", {"transfer": "linear", "levels": 3, "bits": "16"}),
        (["antialias", str(out / "n.png"), "--roughness", "0.5"], "r.png", {"levels": 3, "bits": "16"}),
        (["env", "convert", str(sky)], "sky.exr", {"bits": "half"}),
        (["env", "lut", "--size", "16"], "lut.png", {"roughness_grows": "up"}),
        (["env", "specular", str(sky), "--face-size", "8", "--quality", "draft"], "spec.ktx2",
         {"levels": 3, "zstd": 5, "effort": "balanced"}),
    ]
    for args, name, expected in cases:
        r = runner.invoke(app, [*args, "-o", str(out / name), "--profile", str(prof)])
        assert r.exit_code == 0, (args, r.output)
        params = _manifest(out / name)["params"]
        assert {k: params[k] for k in expected} == expected, name


def test_precedence_through_a_recipe(tmp_path):
    lib = tmp_path / "lib"
    (lib / "a").mkdir(parents=True)
    rng = np.random.default_rng(9)
    for rel in ("x_height.png", "a/y_height.png"):
        write_image(lib / rel, rng.random((16, 16)).astype(np.float32), bits="16")
    (tmp_path / "profiles").mkdir()
    (tmp_path / "profiles" / "p.toml").write_text(
        'y = "down"\nzstd = 5\neffort = "balanced"\n[normal]\nchannels = 2\nbits = "8"\n', encoding="utf-8")
    (tmp_path / "r.toml").write_text("""\
source = "lib"
output = "out"
profile = "profiles/p.toml"

[defaults.normal]
zstd = 7
effort = "fast"
channels = 3

[[rule]]
name = "n"
bake = "normal"
match = "**/{m}_height.png"
output = "{dir}/{m}_n.tif"
params = { effort = "best", channels = 2 }
""", encoding="utf-8")
    (lib / "a" / "bakery-folder.toml").write_text("[rule.n]\nchannels = 3\n", encoding="utf-8")
    plan = make_plan(load_recipe(tmp_path / "r.toml"))
    by_out = {j.output: j for j in plan.jobs}
    x, y = by_out["x_n.tif"], by_out["a/y_n.tif"]
    # profile > bake default; recipe defaults > profile; rule > recipe defaults; folder file > rule
    assert (x.params["y"], x.params["bits"]) == ("down", "8")
    assert x.origins["y"] == "profile p.toml" and x.origins["bits"] == "profile p.toml"
    assert x.params["zstd"] == 7 and x.origins["zstd"] == "recipe [defaults.normal]"
    assert x.params["effort"] == "best" and x.origins["effort"] == "rule 'n'"
    assert x.params["channels"] == 2 and y.params["channels"] == 3
    assert y.origins["channels"] == "lib/a/bakery-folder.toml"


@pytest.mark.parametrize(("text", "expected"), [
    ('y = "sideways"', "key 'y': must be one of up, down; got 'sideways'"),
    ('bits = 12', "key 'bits': must be one of 8, 16, half, float"),
    ('levels = 0', "key 'levels': must be \"full\""),
    ('colour = "srgb"', "unknown key 'colour'"),
    ('[normals]\ny = "up"', "unknown table [normals]"),
    ('[normal]\ntransfer = "srgb"', "key '[normal] transfer': transfer is stated in [color] only"),
    ('[normal]\nktx2-format = "bc99"', "key '[normal] ktx2-format': unknown KTX2 format 'bc99'"),
    ('[environment]\nlevels = 16', "key '[environment] levels': bake 'env-specular' refuses it"),
    ('name = 3', "key 'name': expected text"),
    ('y = "up"\ny = "down"', "TOML syntax error"),
])
def test_bad_profiles_are_refused_naming_the_file_and_key(tmp_path, text, expected):
    p = tmp_path / "bad.toml"
    p.write_text(text + "\n", encoding="utf-8")
    with pytest.raises(BakeryError) as e:
        load_profile(p)
    msg = str(e.value)
    assert str(p) in msg and expected in msg and "\n" not in msg


def test_bad_profile_on_the_command_line_and_in_a_recipe(tmp_path):
    h = write_image(tmp_path / "h.png", np.zeros((8, 8), np.float32) + 0.5, bits="16")
    r = runner.invoke(app, ["normal", str(h), "-o", str(tmp_path / "n.png"), "--profile", str(tmp_path / "no.toml")])
    assert r.exit_code == 2 and r.output.startswith("error: ") and "no.toml: profile not found" in r.output
    assert not (tmp_path / "n.png").exists()
    (tmp_path / "lib").mkdir()
    (tmp_path / "r.toml").write_text('source = "lib"\noutput = "out"\nprofile = "no.toml"\n[[rule]]\n'
                                     'bake = "normal"\nmatch = "*.png"\noutput = "{stem}.png"\n', encoding="utf-8")
    with pytest.raises(BakeryError, match=r"r\.toml: key 'profile': .*no\.toml: profile not found"):
        load_recipe(tmp_path / "r.toml")
