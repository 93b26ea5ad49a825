"""``bakery pack``: the command over the ``pack`` bake; one-line errors with exit code 2; a recipe rule with the same
words gives the same bytes.

Values are read back with imageio's Pillow plugin (independent of bakery's reader)."""

import json
from pathlib import Path

import imageio.v3 as iio
import numpy as np
import pytest

from bakery.cli import run
from bakery.io import write_image

RNG = np.random.default_rng(7)


def cli(args, capfd) -> tuple[int, str, str]:
    capfd.readouterr()
    code = run([str(a) for a in args])
    out, err = capfd.readouterr()
    return code, out, err


def one_error(code, err, *names):
    lines = [line for line in err.splitlines() if line.strip()]
    assert code == 2 and len(lines) == 1 and lines[0].startswith("error: "), (code, err)
    for n in names:
        assert n in lines[0], (n, lines[0])


@pytest.fixture
def maps(tmp_path):
    write_image(tmp_path / "rock_roughness.png", RNG.random((16, 16)).astype(np.float32), bits="8")
    write_image(tmp_path / "rock_metalness.png", (RNG.random((16, 16)) > 0.7).astype(np.float32), bits="8")
    write_image(tmp_path / "rock_occlusion.png", RNG.random((16, 16)).astype(np.float32), bits="8")
    return tmp_path


def test_help(capfd):
    code, out, _ = cli(["pack", "--help"], capfd)
    assert code == 0 and "--g-role" in out and "--a-constant" in out and "--resample" in out


def test_gltf_metallic_roughness_texture(maps, capfd):
    # glTF 2.0 (Khronos 2017), material.pbrMetallicRoughness.metallicRoughnessTexture: roughness in G,
    # metalness in B, linear; R unused here (a constant 1)
    t = maps
    code, out, err = cli(["pack", "--g", t / "rock_roughness.png", "--g-role", "roughness", "--b",
                          t / "rock_metalness.png", "--b-role", "metalness", "--r-constant", "1", "--mips",
                          "-o", t / "rock_mr.png"], capfd)
    assert code == 0, err
    assert "wrote 5 file(s)" in out  # 16 -> 1: five levels
    got = iio.imread(t / "rock_mr.png", plugin="pillow")
    assert np.array_equal(got[:, :, 1], iio.imread(t / "rock_roughness.png", plugin="pillow"))
    assert np.array_equal(got[:, :, 2], iio.imread(t / "rock_metalness.png", plugin="pillow"))
    assert np.all(got[:, :, 0] == 255)
    m = json.loads((t / "rock_mr.png.bakery.json").read_text())
    assert [m["channels"][x]["role"] for x in "rgb"] == ["constant", "roughness", "metalness"]


def test_smoothness_in_alpha(maps, capfd):
    t = maps
    code, _, err = cli(["pack", "--r", t / "rock_metalness.png", "--g", t / "rock_occlusion.png",
                        "--b-constant", "0", "--a", t / "rock_roughness.png", "--a-invert", "--a-role", "smoothness",
                        "-o", t / "mask.png"], capfd)
    assert code == 0, err
    got = iio.imread(t / "mask.png", plugin="pillow")
    assert got.shape == (16, 16, 4)
    assert np.array_equal(got[:, :, 3], 255 - iio.imread(t / "rock_roughness.png", plugin="pillow"))


@pytest.mark.parametrize("args, names", [
    (["--r", "rock_occlusion.png", "--r-channel", "q"], ["--r-channel", "'q'"]),
    (["--r", "rock_occlusion.png", "--g-constant", "nan"], ["--g-constant", "finite"]),
    (["--r", "rock_occlusion.png", "--g-constant", "1.2"], ["--g-constant", "at most 1"]),
    (["--r", "nothere.png"], ["nothere.png", "not found"]),
    (["--r", "rock_occlusion.png", "--r-channel", "b", "--r-constant", "1"], ["r-channel", "r-constant"]),
    (["--a", "rock_occlusion.png", "--a-channel", "a"], ["rock_occlusion.png", "no alpha"]),
    (["--r-constant", "1"], ["nothing to pack"]),
    (["--r", "rock_occlusion.png", "--levels", "2"], ["--levels", "--mips"]),
])
def test_bad_input_is_one_line(maps, capfd, args, names):
    t = maps
    args = [str(t / a) if a.endswith(".png") else a for a in args]
    before = sorted(p.name for p in t.iterdir())
    code, _, err = cli(["pack", *args, "-o", t / "out.png"], capfd)
    one_error(code, err, *names)
    assert sorted(p.name for p in t.iterdir()) == before


def test_output_equal_to_an_input_and_other_sizes(maps, capfd):
    t = maps
    code, _, err = cli(["pack", "--r", t / "rock_occlusion.png", "-o", t / "rock_occlusion.png"], capfd)
    one_error(code, err, "rock_occlusion.png", "also an input")
    write_image(t / "small.png", np.zeros((8, 8), np.float32))
    code, _, err = cli(["pack", "--r", t / "rock_occlusion.png", "--g", t / "small.png", "-o", t / "o.png"], capfd)
    one_error(code, err, "16x16", "8x8", "--resample")
    code, _, err = cli(["pack", "--r", t / "rock_occlusion.png", "--g", t / "small.png", "--resample",
                        "-o", t / "o.png"], capfd)
    assert code == 0, err
    code, _, err = cli(["pack", "--r", t / "rock_occlusion.png", "-o", str(t) + "/"], capfd)
    one_error(code, err, "-o")


def test_a_recipe_rule_with_the_same_words_gives_the_same_bytes(tmp_path, capfd):
    src, baked = tmp_path / "library" / "rock", tmp_path / "baked"
    src.mkdir(parents=True)
    for name, seed in (("occlusion", 1), ("roughness", 2)):
        write_image(src / f"granite_{name}.png", np.random.default_rng(seed).random((8, 8)).astype(np.float32),
                    bits="8")
    (tmp_path / "recipe.toml").write_text("""\
source = "library"
output = "baked"

[[rule]]
name = "orm"
bake = "pack"
match = "**/{material}_occlusion.png"
inputs.g = "{dir}/{material}_roughness.png"
output = "{dir}/{material}_orm.png"
params = { r-role = "occlusion", g-role = "roughness", b-constant = 0.0, mips = true }
""")
    code, _, err = cli(["batch", tmp_path / "recipe.toml", "--quiet"], capfd)
    assert code == 0, err
    code, _, err = cli(["pack", "--r", src / "granite_occlusion.png", "--r-role", "occlusion",
                        "--g", src / "granite_roughness.png", "--g-role", "roughness", "--b-constant", "0",
                        "--mips", "-o", tmp_path / "granite_orm.png"], capfd)
    assert code == 0, err
    for name in ("granite_orm.png", "granite_orm.mip01.png", "granite_orm.mip03.png"):
        assert (baked / "rock" / name).read_bytes() == (tmp_path / name).read_bytes()
    a = json.loads((baked / "rock" / "granite_orm.png.bakery.json").read_text())
    b = json.loads((tmp_path / "granite_orm.png.bakery.json").read_text())
    assert a["channels"] == b["channels"] and a["params"] == b["params"]


def test_reference_lists_the_pack_words():
    page = (Path(__file__).resolve().parents[2] / "docs" / "reference.md").read_text(encoding="utf-8")
    assert "g-role" in page and "r-constant" in page
