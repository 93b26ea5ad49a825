"""The commands occlusion, curvature and mips end to end: outputs, manifests, analytic cases, bad input."""

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery.cli import app
from bakery.io import read_image, write_image
from bakery.mips import color_mips, coverage
from bakery.normals import strength_from_size
from bakery.normals.encode import encode_normals
from bakery.relief import curvature_maps, occlusion_from_height
from bakery.relief.examples import leaf_card

runner = CliRunner()


def bake(*args):
    return runner.invoke(app, [str(a) for a in args])


def one_error(r, *words):
    assert r.exit_code == 2, r.output
    lines = r.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), r.output
    for w in words:
        assert w in lines[0], r.output


def q16(x):
    """Quantisation of the project's writer: round to nearest, ties to even (DEVELOPERS.md, data conventions)."""
    return np.rint(np.clip(x, 0, 1) * 65535).astype(np.uint16)


def bumps(n=48):
    r, c = np.mgrid[0:n, 0:n].astype(np.float64)
    return (0.5 + 0.25 * np.sin(2 * np.pi * c / n) * np.cos(4 * np.pi * r / n)).astype(np.float32)


@pytest.fixture
def height_png(tmp_path):
    return write_image(tmp_path / "h.png", bumps(), bits="16")


def stored(path):
    """Stored integers of a 16-bit file (integer files map to v / 65535, DEVELOPERS.md)."""
    return np.rint(read_image(path).pixels * 65535).astype(np.uint16)


# ------------------------------------------------------------------------------------------------ occlusion


def test_occlusion_equals_the_core_function_and_writes_bent_normals(tmp_path, height_png):
    r = bake("occlusion", height_png, "-o", tmp_path / "ao.png", "--bent-normals", "--directions", "8")
    assert r.exit_code == 0, r.output
    h = read_image(height_png).pixels[:, :, 0]
    s = strength_from_size(h.shape, 1 / 32, 1.0)  # the normal bake's default relief: width / 32
    ao, bent = occlusion_from_height(h, strength=s, directions=8, bent_normals=True)
    assert np.array_equal(stored(tmp_path / "ao.png")[:, :, 0], q16(ao))
    assert np.array_equal(stored(tmp_path / "ao.bent.png"), q16(encode_normals(bent)))
    man = json.loads((tmp_path / "ao.png.bakery.json").read_text())
    assert man["bake"] == "occlusion" and man["strength_used"]["x"] == pytest.approx(s[0])
    assert man["bent_normals"]["file"] == "ao.bent.png"
    assert not (tmp_path / "ao2.bent.png").exists()
    assert bake("occlusion", height_png, "-o", tmp_path / "ao2.png").exit_code == 0
    assert not (tmp_path / "ao2.bent.png").exists()


def test_occlusion_of_a_45_degree_groove(tmp_path):
    # At the bottom of a long V-groove whose walls rise at 45 degrees the cosine-weighted visible sky is
    # sin 45 deg = 0.7071: Jimenez, Wu, Pesce & Jarabo 2016 (ATVI-TR-16-01), eq. 10, with 45-degree horizons on
    # both sides across the groove and none along it; the same as the 2D view factor (sin 45 + sin 45) / 2 of a
    # strip to the opening (J. R. Howell, "A Catalog of Radiation Heat Transfer Configuration Factors").
    x = np.arange(64, dtype=np.float32)
    groove = (np.minimum(np.abs(x - 32), 20) / 20)[None, :].repeat(16, axis=0)  # full range = 20 texels
    src = write_image(tmp_path / "g.exr", groove, bits="float")
    r = bake("occlusion", src, "-o", tmp_path / "g_ao.exr", "--strength", 20, "--directions", 64)
    assert r.exit_code == 0, r.output
    ao = read_image(tmp_path / "g_ao.exr").pixels[:, :, 0]
    assert ao[8, 32] == pytest.approx(np.sqrt(0.5), abs=0.01)
    assert ao[8, 0] == pytest.approx(1.0, abs=0.01)  # on the flat top the whole sky is seen


@pytest.mark.parametrize(("args", "words"), [(("--directions", 0), ("--directions",)),
                                              (("--max-distance", 0), ("--max-distance",)),
                                              (("--max-distance", 49), ("--max-distance", "48"))])
def test_occlusion_bad_values_are_one_line_and_write_nothing(tmp_path, height_png, args, words):
    out = tmp_path / "ao.png"
    out.write_bytes(b"keep")
    one_error(bake("occlusion", height_png, "-o", out, *args), *words)
    assert out.read_bytes() == b"keep" and not (tmp_path / "ao.png.bakery.json").exists()


def test_occlusion_of_a_constant_height_warns_and_sees_the_whole_sky(tmp_path):
    # A plane sees the whole hemisphere: (1/pi) * integral of cos over it = 1 (Lambert's cosine law).
    src = write_image(tmp_path / "flat.png", np.full((16, 16), 0.5, np.float32), bits="16")
    r = bake("occlusion", src, "-o", tmp_path / "flat_ao.png")
    assert r.exit_code == 0 and "warning:" in r.output and "occlusion is 1 everywhere" in r.output, r.output
    assert np.all(stored(tmp_path / "flat_ao.png") == 65535)


# ------------------------------------------------------------------------------------------------ curvature


@pytest.mark.parametrize("which", ["curvature", "convexity", "concavity", "cavity"])
def test_curvature_equals_the_core_function(tmp_path, height_png, which):
    out = tmp_path / f"{which}.png"
    r = bake("curvature", height_png, "-o", out, "--map", which, "--scale", 1.5)
    assert r.exit_code == 0, r.output
    h = read_image(height_png).pixels[:, :, 0]
    m = curvature_maps(h, strength=strength_from_size(h.shape, 1 / 32, 1.0), relief=1 / 32, scale=1.5)
    want = m.encoded if which == "curvature" else getattr(m, which)
    assert np.array_equal(stored(out)[:, :, 0], q16(want))
    man = json.loads(out.with_name(out.name + ".bakery.json").read_text())
    assert man["bake"] == "curvature" and man["map"] == which


def test_curvature_of_a_sphere_cap(tmp_path):
    # A sphere of radius 40 texels has |H| = 1/40 per texel (do Carmo 1976, section 3-3, |H| = 1 / radius);
    # stored as heights h / 40 at strength 40 one height unit is 40 texels, so H = -1 per height unit at the top.
    # With --radius 0.5: encoding 0.5 - 0.5 * clip(H * 0.5, -1, 1) = 0.75 and convexity clip(-H * 0.5) = 0.5.
    r, c = np.mgrid[0:64, 0:64] - 31.5
    dome = (np.sqrt(np.clip(40.0**2 - r**2 - c**2, 0, None)) / 40).astype(np.float32)
    src = write_image(tmp_path / "dome.exr", dome, bits="float")
    for args, want in [(("--radius", 0.5), 0.75), (("--radius", 0.5, "--map", "convexity"), 0.5)]:
        out = tmp_path / "c.exr"
        res = bake("curvature", src, "-o", out, "--strength", 40, "--scale", 0, "--edges", "clamp", *args)
        assert res.exit_code == 0, res.output
        assert read_image(out).pixels[32, 32, 0] == pytest.approx(want, abs=0.01)


# ------------------------------------------------------------------------------------------------- mips


def test_mips_of_a_checkerboard_is_code_188(tmp_path):
    # IEC 61966-2-1:1999: black and white average to linear 0.5, which the sRGB curve encodes as
    # 1.055 * 0.5^(1/2.4) - 0.055 = 0.7354 -> code 188 (not 128, the average of the codes).
    board = (np.indices((8, 8)).sum(axis=0) % 2).astype(np.float32)[:, :, None].repeat(3, axis=2)
    src = write_image(tmp_path / "board.png", board, bits="8")
    r = bake("mips", src, "-o", tmp_path / "out" / "", "--levels", 2)
    assert r.exit_code == 2  # the folder does not exist
    (tmp_path / "out").mkdir()
    r = bake("mips", src, "-o", tmp_path / "out" / "")
    assert r.exit_code == 0, r.output
    lvl1 = np.rint(read_image(tmp_path / "out" / "board.mip01.png").pixels * 255)
    assert lvl1.shape == (4, 4, 3) and np.all(lvl1 == 188)
    assert (tmp_path / "out" / "board.mip03.png").exists() and (tmp_path / "out" / "board.png.bakery.json").exists()
    # the same board as one KTX2 (R8G8B8A8_SRGB): the stored bytes of level 1 are 188
    r = bake("mips", src, "-o", tmp_path / "board.ktx2")
    assert r.exit_code == 0, r.output
    from bakery.color import linear_to_srgb
    from bakery.io.ktx2 import read_ktx2

    tex = read_ktx2(tmp_path / "board.ktx2")
    assert tex.format.name == "R8G8B8A8_SRGB" and len(tex.levels) == 4
    assert np.all(np.rint(linear_to_srgb(tex.levels[1][:, :, :3]) * 255) == 188)


def test_mips_equal_the_core_function_and_keep_coverage(tmp_path):
    card = leaf_card(128)
    src = write_image(tmp_path / "leaf.png", card, bits="8")
    stored8 = read_image(src).pixels
    found = {}
    for keep in (False, True):
        out = tmp_path / ("kept" if keep else "plain") / "leaf.png"
        out.parent.mkdir()
        r = bake("mips", src, "-o", out, "--alpha-cutoff", 0.75, *(["--coverage"] if keep else []))
        assert r.exit_code == 0, r.output
        chain = color_mips(stored8, alpha_cutoff=0.75 if keep else None)
        for k, level in enumerate(chain):
            path = out if k == 0 else out.with_name(f"leaf.mip{k:02d}.png")
            assert np.array_equal(np.rint(read_image(path).pixels * 255), np.rint(level * 255)), (keep, k)
        man = json.loads(out.with_name("leaf.png.bakery.json").read_text())
        found[keep] = [lv["coverage"] for lv in man["levels"]]
    # Alpha-tested coverage (common practice: the fraction of texels with alpha >= cutoff, kept per level by
    # scaling alpha). Level 3 (16x16): kept within 1 % of level 0 (measured 0.07 %), plain lost 5.8 %.
    c0 = coverage(stored8[:, :, 3], 0.75)
    assert found[True][0] == pytest.approx(c0) and found[True][3] == pytest.approx(c0, abs=0.01)
    assert c0 - found[False][3] > 0.04


def test_mips_refuses_normal_maps_and_coverage_without_alpha(tmp_path, height_png):
    rr, cc = np.mgrid[0:32, 0:32] / 32.0
    n = np.stack([0.3 * np.sin(6 * cc), 0.3 * np.cos(6 * rr), np.ones_like(cc)], axis=2)
    n /= np.linalg.norm(n, axis=2, keepdims=True)
    normal = write_image(tmp_path / "n.png", encode_normals(n.astype(np.float32)), bits="8")
    one_error(bake("mips", normal, "-o", tmp_path / "m.png"), "n.png", "normal-mips")
    assert not (tmp_path / "m.png").exists()
    one_error(bake("mips", height_png, "-o", tmp_path / "m.png", "--coverage"), "h.png", "alpha")
    assert not (tmp_path / "m.png").exists()
    one_error(bake("mips", height_png, "-o", tmp_path / "m.png", "--loose"), "--loose")


def test_mips_of_linear_float_colour_warns_where_integer_files_clip(tmp_path):
    # Float files are linear (DEVELOPERS.md, data conventions); 16-bit PNG holds [0, 1] only.
    hdr = np.full((8, 8, 3), 2.0, np.float32)
    src = write_image(tmp_path / "hdr.exr", hdr, bits="float")
    r = bake("mips", src, "-o", tmp_path / "hdr_m.png")
    assert r.exit_code == 0 and "warning:" in r.output and "clipped" in r.output, r.output
    r = bake("mips", src, "-o", tmp_path / "hdr_m.exr")
    assert r.exit_code == 0 and "warning:" not in r.output, r.output
    assert read_image(tmp_path / "hdr_m.mip01.exr").pixels == pytest.approx(2.0)  # averages of a constant


def test_a_recipe_gives_the_same_bytes_as_the_commands(tmp_path):
    # One declaration, one run_bake: recipe keys are the command options (DEVELOPERS.md, vocabulary).
    lib = tmp_path / "lib"
    lib.mkdir()
    write_image(lib / "stone_height.png", bumps(32), bits="16")
    write_image(lib / "leaf_color.png", leaf_card(32), bits="8")
    (tmp_path / "r.toml").write_text('''source = "lib"
output = "baked"

[[rule]]
bake = "occlusion"
match = "{m}_height.png"
output = "{m}_ao.png"
params = { directions = 8, max-distance = 12, bent-normals = true }

[[rule]]
bake = "curvature"
match = "{m}_height.png"
output = "{m}_cavity.png"
params = { map = "cavity", scale = 1.5 }

[[rule]]
bake = "mips"
match = "{m}_color.png"
output = "{m}_mips.png"
params = { coverage = true, alpha-cutoff = 0.75 }
''', encoding="utf-8")
    r = bake("batch", tmp_path / "r.toml", "--jobs", 1)
    assert r.exit_code == 0, r.output
    cli = tmp_path / "cli"
    cli.mkdir()
    for args in [("occlusion", lib / "stone_height.png", "-o", cli / "stone_ao.png", "--directions", 8,
                  "--max-distance", 12, "--bent-normals"),
                 ("curvature", lib / "stone_height.png", "-o", cli / "stone_cavity.png", "--map", "cavity",
                  "--scale", 1.5),
                 ("mips", lib / "leaf_color.png", "-o", cli / "leaf_mips.png", "--coverage", "--alpha-cutoff", 0.75)]:
        assert bake(*args).exit_code == 0
    names = ["stone_ao.png", "stone_ao.bent.png", "stone_cavity.png", "leaf_mips.png", "leaf_mips.mip05.png"]
    for name in names:
        assert (tmp_path / "baked" / name).read_bytes() == (cli / name).read_bytes(), name


def test_colour_levels_turn_linear_in_bands_with_the_same_values(monkeypatch):
    """The sRGB decode (IEC 61966-2-1) before a KTX2 write runs in bands of rows; texel by texel, so the values
    are those of one call over the level, and each band is reported."""
    import numpy as np

    import bakery.bakes.relief as R
    from bakery.color import srgb_to_linear

    monkeypatch.setattr(R, "LINEAR_BAND_TEXELS", 13 * 3)  # 3 rows a band
    level = np.random.default_rng(4).random((20, 13, 4)).astype(np.float32)
    seen = []
    out = R._linear(level, "srgb", lambda f, w: seen.append(f))
    expected = level.copy()
    expected[:, :, :3] = srgb_to_linear(level[:, :, :3])
    assert out.tobytes() == expected.tobytes()
    assert len(seen) == 7 and seen == sorted(seen) and seen[-1] == 1.0
