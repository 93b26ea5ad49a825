"""The normal-map commands: exit codes, bad input, warnings, defaults, recipe/CLI identity, --help."""

import json
import subprocess
import sys

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery.bakes import run_bake
from bakery.bakes.normals import NormalParams
from bakery.cli import app
from bakery.io import read_image, write_image
from bakery.normals import normal_from_height

runner = CliRunner()
COMMANDS = ["normal", "height", "blend", "normal-mips", "normal-fix"]


def bake(*args):
    return runner.invoke(app, [str(a) for a in args])


def smooth_height(n=32, m=48):
    r, c = np.mgrid[0:n, 0:m].astype(np.float64)
    return (0.5 + 0.3 * np.sin(2 * np.pi * c / m) * np.cos(4 * np.pi * r / n)).astype(np.float32)


@pytest.fixture
def height_png(tmp_path):
    return write_image(tmp_path / "h.png", smooth_height(), bits="16")


@pytest.mark.parametrize("cmd", COMMANDS)
def test_help(cmd):
    result = bake(cmd, "--help")
    assert result.exit_code == 0
    assert "Usage" in result.output


def test_help_of_installed_entry_point():
    out = subprocess.run([sys.executable, "-m", "bakery", "normal", "--help"], capture_output=True, text=True)
    assert out.returncode == 0 and "--kernel" in out.stdout


def test_normal_defaults_follow_input_bits(tmp_path, height_png):
    r = bake("normal", height_png, "-o", tmp_path / "n.png")
    assert r.exit_code == 0, r.output
    img = read_image(tmp_path / "n.png")
    assert img.bits == "16" and img.channels == 3
    man = json.loads((tmp_path / "n.png.bakery.json").read_text())
    assert man["bake"] == "normal" and man["conventions"]["y"] == "up"
    # default strength: relief = width / 32 -> s = 48 / 32 texels per unit
    assert man["strength_used"]["x"] == pytest.approx(1.5)
    write_image(tmp_path / "h8.png", smooth_height(), bits="8")
    assert bake("normal", tmp_path / "h8.png", "-o", tmp_path / "n8.png").exit_code == 0
    assert read_image(tmp_path / "n8.png").bits == "8"


def test_cli_matches_core_and_run_bake(tmp_path, height_png):
    # One job, two doors: the CLI and run_bake (the batch runner's door) give byte-identical files.
    r = bake("normal", height_png, "-o", tmp_path / "a.png", "--strength", "4", "--kernel", "sobel", "--y", "down")
    assert r.exit_code == 0, r.output
    run_bake("normal", {"height": height_png}, tmp_path / "b.png",
             NormalParams(strength=4.0, kernel="sobel", y="down"))
    assert (tmp_path / "a.png").read_bytes() == (tmp_path / "b.png").read_bytes()
    ma, mb = (json.loads((tmp_path / f"{k}.png.bakery.json").read_text()) for k in "ab")
    assert ma.pop("outputs") == ["a.png"] and mb.pop("outputs") == ["b.png"]
    assert list(ma.pop("output_digests").values()) == list(mb.pop("output_digests").values())
    assert ma == mb
    # and the file holds the core's normals, Y-down applied before quantisation
    h = read_image(height_png).pixels[:, :, 0]
    n = normal_from_height(h, strength=4.0, kernel="sobel")
    stored = read_image(tmp_path / "a.png").pixels
    expect = np.rint(np.clip(n * [0.5, -0.5, 0.5] + 0.5, 0, 1) * 65535) / 65535
    assert np.abs(stored - expect).max() <= 1.01 / 65535  # float64 here vs float32 there: one step at most


def test_physical_strength_options(tmp_path, height_png):
    r = bake("normal", height_png, "-o", tmp_path / "n.exr", "--relief", "0.05", "--span", "2x1")
    assert r.exit_code == 0, r.output
    man = json.loads((tmp_path / "n.exr.bakery.json").read_text())
    used = man["strength_used"]
    assert (used["x"], used["y"]) == pytest.approx((0.05 * 48 / 2, 0.05 * 32 / 1))
    assert read_image(tmp_path / "n.exr").bits == "half"
    r = bake("normal", height_png, "-o", tmp_path / "x.png", "--strength", "2", "--relief", "0.1")
    assert r.exit_code == 2 and "not both" in r.output
    assert bake("normal", height_png, "-o", tmp_path / "x.png", "--span", "2xfoo").exit_code == 2
    assert not (tmp_path / "x.png").exists()


def test_colour_photo_needs_a_channel(tmp_path):
    rng = np.random.default_rng(0)
    photo = write_image(tmp_path / "photo.png", rng.random((16, 16, 3), dtype=np.float32), bits="8")
    r = bake("normal", photo, "-o", tmp_path / "n.png")
    assert r.exit_code == 2
    assert "photo.png" in r.output and "colour channels differ" in r.output and "--channel" in r.output
    assert not (tmp_path / "n.png").exists()
    assert bake("normal", photo, "-o", tmp_path / "n.png", "--channel", "g").exit_code == 0
    assert bake("normal", photo, "-o", tmp_path / "l.png", "--channel", "luminance").exit_code == 0
    # equal colour channels are read as gray
    gray = np.repeat(smooth_height()[:, :, None], 3, axis=2)
    write_image(tmp_path / "g3.png", gray, bits="8")
    assert bake("normal", tmp_path / "g3.png", "-o", tmp_path / "g.png").exit_code == 0


def test_constant_height_warns_flat(tmp_path):
    write_image(tmp_path / "c.png", np.full((8, 8), 0.5, np.float32), bits="8")
    r = bake("normal", tmp_path / "c.png", "-o", tmp_path / "n.png")
    assert r.exit_code == 0
    assert "warning:" in r.stderr and "constant" in r.stderr and "flat" in r.stderr
    q = read_image(tmp_path / "n.png").pixels * 255
    assert np.all(q[..., 0] == 128) and np.all(q[..., 2] == 255)  # flat: 127.5 -> 128, ties to even


def test_non_unit_normals_warn_in_height_and_blend(tmp_path):
    v = np.zeros((16, 16, 3), np.float32)
    v[..., 2] = 0.6  # length 0.6
    write_image(tmp_path / "short.png", v * 0.5 + 0.5, bits="8")
    r = bake("height", tmp_path / "short.png", "-o", tmp_path / "h.png")
    assert r.exit_code == 0
    assert "short.png is not unit length" in r.stderr and "renormalized" in r.stderr
    r = bake("blend", tmp_path / "short.png", tmp_path / "short.png", "-o", tmp_path / "b.png")
    assert r.exit_code == 0 and r.stderr.count("not unit length") == 2


def test_bad_files_exit_2_and_leave_nothing(tmp_path, height_png):
    (tmp_path / "bad.png").write_bytes(b"\x89PNG\r\n\x1a\n garbage")
    cases = [
        ["normal", tmp_path / "missing.png", "-o", tmp_path / "o.png"],
        ["normal", tmp_path / "bad.png", "-o", tmp_path / "o.png"],
        ["normal", height_png, "-o", height_png],
        ["normal", height_png, "-o", tmp_path / "o.jpg"],
        ["normal", height_png, "-o", tmp_path / "o.png", "--channels", "2"],
        ["normal", height_png, "-o", tmp_path / "nofolder" / "o.png"],
        ["height", height_png, "-o", tmp_path / "o.png"],
        ["normal-fix", height_png, "-o", tmp_path / "o.png", "--flip-y"],
    ]
    before = height_png.read_bytes()
    for args in cases:
        r = bake(*args)
        assert r.exit_code == 2, (args, r.output)
        assert r.output.startswith("error: ") and len(r.output.strip().splitlines()) == 1, r.output
    assert not (tmp_path / "o.png").exists()
    assert height_png.read_bytes() == before


def test_height_round_trip_and_manifest(tmp_path, height_png):
    assert bake("normal", height_png, "-o", tmp_path / "n.png", "--strength", "8").exit_code == 0
    r = bake("height", tmp_path / "n.png", "-o", tmp_path / "h.png", "--strength", "8")
    assert r.exit_code == 0, r.output
    back = read_image(tmp_path / "h.png").pixels[..., 0]
    h = read_image(height_png).pixels[..., 0]
    assert np.corrcoef(back.ravel(), h.ravel())[0, 1] >= 0.999
    # a Y-down map integrates to the same height when told so
    assert bake("normal", height_png, "-o", tmp_path / "d.png", "--strength", "8", "--y", "down").exit_code == 0
    assert bake("height", tmp_path / "d.png", "-o", tmp_path / "hd.png", "--strength", "8", "--y",
                "down").exit_code == 0
    assert np.abs(read_image(tmp_path / "hd.png").pixels[..., 0] - back).max() <= 2 / 65535
    fit = json.loads((tmp_path / "h.png.bakery.json").read_text())["fit"]
    assert fit["scale"] == 1.0
    assert np.abs((back - fit["offset"]) - (h - h.mean())).max() < 2e-3  # stored = z + offset


def test_height_from_a_non_tiling_map_by_value(tmp_path):
    # The public path for maps that do not tile: normal --edges clamp, then height --edges clamp (the Poisson
    # solve of Simchony, Chellappa & Shao 1990 through 16-bit files). Values, not correlation: the stored height
    # is z + offset (the manifest's fit), within 3e-3 of the source (measured 2.6e-3: the central-difference
    # bake against the solver's forward differences at the border, plus 16-bit steps of 1.5e-5).
    r, c = np.mgrid[0:40, 0:56].astype(np.float64)
    h = (0.3 * np.exp(-((c - 24) ** 2 + (r - 16) ** 2) / 150) + 0.002 * c - 0.001 * r + 0.2).astype(np.float32)
    src = write_image(tmp_path / "bump.png", h, bits="16")
    h = read_image(src).pixels[..., 0]
    r = bake("normal", src, "-o", tmp_path / "n.png", "--strength", "5", "--edges", "clamp")
    assert r.exit_code == 0, r.output
    r = bake("height", tmp_path / "n.png", "-o", tmp_path / "h.png", "--strength", "5", "--edges", "clamp")
    assert r.exit_code == 0, r.output
    back = read_image(tmp_path / "h.png").pixels[..., 0]
    fit = json.loads((tmp_path / "h.png.bakery.json").read_text())["fit"]
    assert fit["scale"] == 1.0
    err = (back - fit["offset"]) - (h - h.mean())
    assert np.abs(err).max() < 3e-3  # a result off in scale by 1.5 would be off by about 0.15


def test_xy_output_and_fix_command(tmp_path, height_png):
    assert bake("normal", height_png, "-o", tmp_path / "xy.tif", "--channels", "2").exit_code == 0
    assert read_image(tmp_path / "xy.tif").channels == 2
    assert bake("normal", height_png, "-o", tmp_path / "n8.png", "--bits", "8").exit_code == 0
    # flip green exactly (g' = 255 - g), 8 -> 16-bit exactly (v * 257), 3 -> 2 -> 3 channels
    assert bake("normal-fix", tmp_path / "n8.png", "-o", tmp_path / "f.png", "--flip-y").exit_code == 0
    a = np.rint(read_image(tmp_path / "n8.png").pixels * 255)
    b = np.rint(read_image(tmp_path / "f.png").pixels * 255)
    assert np.array_equal(b[..., 1], 255 - a[..., 1]) and np.array_equal(b[..., ::2], a[..., ::2])
    assert bake("normal-fix", tmp_path / "n8.png", "-o", tmp_path / "w.png", "--bits", "16").exit_code == 0
    w = read_image(tmp_path / "w.png")
    assert w.bits == "16" and np.array_equal(np.rint(w.pixels * 65535), a * 257)
    assert bake("normal-fix", tmp_path / "n8.png", "-o", tmp_path / "two.exr", "--channels", "2").exit_code == 0
    assert bake("normal-fix", tmp_path / "two.exr", "-o", tmp_path / "three.exr", "--channels", "3").exit_code == 0
    three = read_image(tmp_path / "three.exr").pixels * 2 - 1
    assert np.abs(np.linalg.norm(three, axis=-1) - 1).max() < 2e-3
    assert bake("normal-fix", tmp_path / "n8.png", "-o", tmp_path / "r.png", "--renormalize").exit_code == 0


def test_mips_command(tmp_path, height_png):
    assert bake("normal", height_png, "-o", tmp_path / "n.png").exit_code == 0
    r = bake("normal-mips", tmp_path / "n.png", "-o", tmp_path / "m.png")
    assert r.exit_code == 0, r.output
    sizes = [read_image(tmp_path / (f"m.mip{i:02d}.png" if i else "m.png")).pixels.shape[:2] for i in range(6)]
    assert sizes == [(32, 48), (16, 24), (8, 12), (4, 6), (2, 3), (1, 1)]
    length = read_image(tmp_path / "m.length.mip03.png")
    assert length.channels == 1 and length.bits == "16" and length.pixels.max() <= 1.0
    man = json.loads((tmp_path / "m.png.bakery.json").read_text())
    assert [lv["size"] for lv in man["levels"]][:2] == [[48, 32], [24, 16]]
    assert man["levels"][0]["mean_length"] == 1.0


def test_blend_command(tmp_path, height_png):
    assert bake("normal", height_png, "-o", tmp_path / "n.png").exit_code == 0
    flat = np.zeros((32, 48, 3), np.float32)
    flat[..., 2] = 1
    write_image(tmp_path / "flat.png", flat * 0.5 + 0.5, bits="16")
    r = bake("blend", tmp_path / "flat.png", tmp_path / "n.png", "-o", tmp_path / "b.png")
    assert r.exit_code == 0, r.output
    a = read_image(tmp_path / "n.png").pixels
    b = read_image(tmp_path / "b.png").pixels
    assert np.abs(a - b).max() <= 1.5 / 65535  # reoriented over a flat base returns the detail
    write_image(tmp_path / "small.png", flat[:8, :8] * 0.5 + 0.5, bits="16")
    r = bake("blend", tmp_path / "n.png", tmp_path / "small.png", "-o", tmp_path / "c.png")
    assert r.exit_code == 2 and "must match" in r.output


def test_mips_as_ktx2(tmp_path, height_png):
    # KTX 2.0 2D texture with mips (Khronos KTX 2.0 spec): the same levels as the loose files, alpha 1.
    from bakery.io.ktx2 import read_ktx2

    assert bake("normal", height_png, "-o", tmp_path / "n.png").exit_code == 0
    assert bake("normal-mips", tmp_path / "n.png", "-o", tmp_path / "m.png").exit_code == 0
    r = bake("normal-mips", tmp_path / "n.png", "-o", tmp_path / "m.ktx2")
    assert r.exit_code == 0, r.output
    tex = read_ktx2(tmp_path / "m.ktx2")
    assert tex.format.name == "R16G16B16A16_UNORM" and len(tex.levels) == 6 and not tex.cubemap
    for i, lv in enumerate(tex.levels):
        loose = read_image(tmp_path / (f"m.mip{i:02d}.png" if i else "m.png")).pixels
        assert np.array_equal(np.rint(lv[:, :, :3] * 65535), np.rint(loose * 65535)) and np.all(lv[:, :, 3] == 1)
    lengths = read_ktx2(tmp_path / "m.length.ktx2")
    assert lengths.format.name == "R16_UNORM"
    assert np.array_equal(np.rint(lengths.levels[2] * 65535),
                          np.rint(read_image(tmp_path / "m.length.mip02.png").pixels * 65535))


def test_named_channels_of_gray_alpha_and_rgba(tmp_path):
    h = smooth_height()
    la = np.stack([h, 1 - h], axis=-1)
    write_image(tmp_path / "la.tif", la, bits="16")
    assert bake("normal", tmp_path / "la.tif", "-o", tmp_path / "a.png", "--channel", "a").exit_code == 0
    assert bake("normal", tmp_path / "la.tif", "-o", tmp_path / "g.png").exit_code == 0  # gray + alpha: gray
    a = read_image(tmp_path / "a.png").pixels
    g = read_image(tmp_path / "g.png").pixels
    assert np.abs(a[..., :2] - (1 - g[..., :2])).max() <= 1.01 / 65535  # inverted relief: x, y negated
    write_image(tmp_path / "rgb.png", np.stack([h, h * 0.5, h * 0.25], -1), bits="16")
    r = bake("normal", tmp_path / "rgb.png", "-o", tmp_path / "x.png", "--channel", "a")
    assert r.exit_code == 2 and "no A channel" in r.output
    r = bake("normal", tmp_path / "rgb.png", "-o", tmp_path / "x.hdr")
    assert r.exit_code == 2


def test_recipe_values_match_the_command_line(tmp_path, height_png):
    # A recipe's `bits = 16`, `span = 2` and the CLI's `--bits 16 --span 2` are the same job: same bytes.
    from bakery.bakes import get_bake, params_from_mapping

    params = params_from_mapping(get_bake("normal"), {"bits": 16, "span": 2, "relief": 0.1}, "recipe.toml")
    run_bake("normal", {"height": height_png}, tmp_path / "r.png", params)
    assert bake("normal", height_png, "-o", tmp_path / "c.png", "--bits", "16", "--span", "2",
                "--relief", "0.1").exit_code == 0
    assert (tmp_path / "r.png").read_bytes() == (tmp_path / "c.png").read_bytes()
    mr, mc = (json.loads((tmp_path / f"{k}.png.bakery.json").read_text()) for k in "rc")
    assert mr["params"] == mc["params"]


def test_blur_limit_follows_the_map_size(tmp_path, capsys):
    """A Gaussian truncated at 4 standard deviations (scipy.ndimage.gaussian_filter's default) spans the whole
    map beyond a quarter of its shorter side: refused there with the size named, accepted below it."""
    import numpy as np

    from bakery.cli import run
    from bakery.io import write_image

    write_image(tmp_path / "h.png", np.linspace(0, 1, 64 * 96, dtype=np.float32).reshape(64, 96), bits="16")
    assert run(["normal", str(tmp_path / "h.png"), "-o", str(tmp_path / "ok.png"), "--blur", "16"]) == 0
    assert run(["normal", str(tmp_path / "h.png"), "-o", str(tmp_path / "no.png"), "--blur", "16.5"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error:") and "--blur" in err[0] and "96x64" in err[0]
    assert not (tmp_path / "no.png").exists()
