"""Colour maps with alpha in previews and contact sheets (alpha-tested balls, thumbnails over a checkerboard),
and cube maps stored as one cross image previewed like the same six faces.

Sources: the "over" operator on unassociated (straight) alpha, Porter & Duff 1984, "Compositing Digital
Images", SIGGRAPH (table 1, with the colour of B taken as opaque): C = a·A + (1 − a)·B, applied to linear
values (W3C PNG specification, 2nd ed. 2003, section 13.16 "Alpha channel processing": PNG alpha is not
premultiplied, and compositing is done on gamma-decoded samples; the section number from memory); the sRGB
curve of IEC
61966-2-1:1999 written out below; the cross layouts as ``bakery/io/layouts.py`` documents them (built here
by hand, cell by cell); alpha testing as "a sample is drawn when its alpha is at least the cutoff" (common
practice, the convention of ``bakery mips --alpha-cutoff``).
"""

from __future__ import annotations

import numpy as np
import pytest

from bakery.io import read_image, write_image
from bakery.preview.assets import knowledge
from bakery.preview.render import render_ball, render_tile
from bakery.preview.shading import AlphaTest, Lighting, Material
from bakery.preview.sheet import CHECKER, lit_previews, make_entries, make_entry, material_for, thumbnail
from tests.preview import envtools


def srgb_decode(v):
    """IEC 61966-2-1:1999, the sRGB decoding curve (section 5.2, eq. 5-6)."""
    v = np.asarray(v, np.float64)
    return np.where(v <= 0.04045, v / 12.92, ((v + 0.055) / 1.055) ** 2.4)


def srgb_encode(v):
    """IEC 61966-2-1:1999, the inverse curve (section 5.3)."""
    v = np.asarray(v, np.float64)
    return np.where(v <= 0.0031308, v * 12.92, 1.055 * v ** (1 / 2.4) - 0.055)


@pytest.fixture(scope="module")
def sky() -> Lighting:
    """An environment with structure (brighter and bluer upward, warmer toward +X), so a background
    seen through a cut-out differs from pixel to pixel."""
    src = envtools.cube_from_function(
        lambda d: 0.2 + 0.8 * np.clip(d[..., 1:2], 0, 1) * np.array([0.6, 0.8, 1.0])
        + 0.3 * np.clip(d[..., 0:1], 0, 1) * np.array([1.0, 0.5, 0.2]), 8)
    return Lighting((src, envtools.brute_prefilter(src, 0.6, 4)), np.array([0.0, 0.6]),
                    envtools.split_sum_table(16), envtools.sh_project(src))


def _halves(size=32):
    """Base colour red on the left half of the texture, green on the right; alpha 1 on the left, 0 on the
    right: (colour (H, W, 3), alpha (H, W))."""
    color = np.zeros((size, size, 3), np.float32)
    color[:, : size // 2, 0] = 0.8
    color[:, size // 2:, 1] = 0.8
    alpha = np.zeros((size, size), np.float32)
    alpha[:, : size // 2] = 1
    return color, alpha


# ------------------------------------------------------------------------------------------ the lit ball


def test_an_all_transparent_map_leaves_only_the_background(table_lighting):
    # Constant environment L: every background pixel is L (the prefiltered constant), whatever its direction.
    # A map that is transparent everywhere is not drawn at all: the view is L everywhere and nothing is covered.
    color, _ = _halves()
    for render in (render_ball, render_tile):
        opaque = render(Material(base_color=color), table_lighting, size=24, supersample=2)
        gone = render(Material(base_color=color, alpha_test=AlphaTest(np.zeros((32, 32), np.float32))),
                      table_lighting, size=24, supersample=2)
        assert opaque.coverage.max() == 1  # the object is there without the test
        assert np.abs(opaque.radiance - 1.0).max() > 0.05
        np.testing.assert_allclose(gone.radiance, 1.0, rtol=0, atol=1e-6)
        assert gone.coverage.max() == 0 and np.isnan(gone.n_dot_v).all()


@pytest.fixture(scope="module")
def table_lighting() -> Lighting:
    levels = tuple(np.ones((6, n, n, 3), np.float32) for n in (8, 4))
    sh = np.zeros((9, 3), np.float32)
    sh[0] = 2 * np.sqrt(np.pi)  # L_00 of constant radiance 1 (Ramamoorthi & Hanrahan 2001, Y_00 = 0.282095)
    return Lighting(levels, np.array([0.0, 1.0]), envtools.split_sum_table(16), sh)


@pytest.mark.parametrize("render", [render_ball, render_tile])
def test_cutouts_show_the_background_and_keep_the_rest(sky, render):
    # One sample per pixel, so a pixel is either drawn or not. Which texels a pixel sees is read from
    # renders of the plain red and the plain green material: where the half-and-half map's opaque render
    # matches the red one the pixel sees alpha-1 texels and must equal the opaque render; where it matches
    # the green one it sees alpha-0 texels and must equal the render of an all-transparent map (the
    # background through the cut-out).
    color, alpha = _halves()
    kw = {"size": 48, "supersample": 1}

    def draw(**m):
        return render(Material(**m), sky, **kw)

    plain = draw(base_color=color)
    opaque, cover = plain.radiance, plain.coverage > 0
    red = draw(base_color=np.broadcast_to(color[0, 0], color.shape).copy()).radiance
    green = draw(base_color=np.broadcast_to(color[0, -1], color.shape).copy()).radiance
    cut_view = draw(base_color=color, alpha_test=AlphaTest(alpha))
    empty_view = draw(base_color=color, alpha_test=AlphaTest(np.zeros_like(alpha)))
    cut, empty = cut_view.radiance, empty_view.radiance

    def same(a, b):
        return np.all(np.abs(a - b) <= 1e-6 + 1e-5 * np.abs(b), axis=-1)

    sees_opaque = cover & same(opaque, red) & ~same(opaque, green)
    sees_clear = cover & same(opaque, green) & ~same(opaque, red)
    assert sees_opaque.sum() > 0.25 * cover.sum() and sees_clear.sum() > 0.25 * cover.sum()
    assert empty_view.coverage.max() == 0  # nothing drawn: every pixel is background
    assert (cut_view.coverage[sees_opaque] == 1).all() and (cut_view.coverage[sees_clear] == 0).all()
    assert same(cut, opaque)[sees_opaque].all()
    assert same(cut, empty)[sees_clear].all()
    assert not same(cut, opaque)[sees_clear].any()  # the background there is not the ball's colour
    assert not same(empty, opaque)[sees_opaque].any()


def test_the_cutoff_decides_which_texels_pass(sky):
    # alpha 0.6 everywhere: drawn at cutoff 0.5 and 0.6 (alpha >= cutoff passes), gone at 0.7.
    color, _ = _halves()
    a = np.full((32, 32), 0.6, np.float32)
    cov = {c: render_ball(Material(base_color=color, alpha_test=AlphaTest(a, c)), sky, size=16,
                          supersample=1).coverage.sum() for c in (0.5, 0.6, 0.7)}
    plain = render_ball(Material(base_color=color), sky, size=16, supersample=1).coverage.sum()
    assert cov[0.5] == cov[0.6] == plain > 0 and cov[0.7] == 0


def test_alpha_test_values_are_checked():
    from bakery.errors import BakeryError

    with pytest.raises(BakeryError, match="cutoff"):
        AlphaTest(np.ones((4, 4), np.float32), 0.0)
    with pytest.raises(BakeryError, match="opacity"):
        AlphaTest(np.full((4, 4), 1.5, np.float32))
    with pytest.raises(BakeryError, match="AlphaTest"):
        Material(alpha_test=0.5)


# ------------------------------------------------------------------------------------------ thumbnails


def _values(a) -> list[float]:
    """The distinct values of a picture, to 5 decimals."""
    return sorted(float(v) for v in np.unique(np.round(np.asarray(a, np.float64), 5)))


def test_thumbnail_shows_a_checkerboard_under_transparent_texels():
    # 64 x 64 map shown at 64: left half alpha 0, right half alpha 1, and a band at alpha 0.5.
    px = np.zeros((64, 64, 4), np.float32)
    px[..., :3] = (0.9, 0.3, 0.1)  # stored sRGB values
    px[:, 32:, 3] = 1
    px[:8, 32:, 3] = 0.5
    t = thumbnail(px, "color", bits="8", size=64)
    clear, solid, half = t[8:, :32], t[8:, 32:], t[:8, 32:]
    # under alpha 0 only the two checker greys, both present, as squares of 4 pixels (16 across)
    assert _values(clear) == sorted(CHECKER)
    assert np.array_equal(np.abs(clear[:, :, 0] - CHECKER[0]) < 1e-5,
                          ((np.indices((56, 32))[0] + 8) // 4 + np.indices((56, 32))[1] // 4) % 2 == 0)
    # under alpha 1 the stored colour, no checker
    np.testing.assert_allclose(solid, np.broadcast_to([0.9, 0.3, 0.1], solid.shape), atol=1e-5)
    # alpha 0.5: the average of colour and checker in linear light (Porter & Duff 1984; PNG 2003, 13.16)
    rows, cols = np.indices((8, 32))
    bg = np.where(((rows // 4) + (cols + 32) // 4) % 2 == 0, CHECKER[0], CHECKER[1])
    want = srgb_encode(0.5 * srgb_decode([0.9, 0.3, 0.1]) + 0.5 * srgb_decode(bg)[..., None])
    np.testing.assert_allclose(half, want, atol=2e-5)
    # the same colours without alpha: as stored, no checker anywhere
    np.testing.assert_allclose(thumbnail(px[..., :3], "color", bits="8", size=64),
                               np.broadcast_to([0.9, 0.3, 0.1], (64, 64, 3)), atol=1e-5)


def test_shrunk_thumbnails_weight_colour_by_alpha():
    # Columns alternate opaque green and transparent black; halved, each pixel is half covered by green.
    # Weighted by alpha (premultiplied averaging, Porter & Duff 1984) the colour stays green at alpha 0.5,
    # so the pixel is the linear-light average of green and the checker; a plain average would darken it.
    px = np.zeros((64, 64, 4), np.float32)
    px[:, 0::2, 1] = 0.8
    px[:, 0::2, 3] = 1
    t = thumbnail(px, "color", bits="8", size=32)
    rows, cols = np.indices((32, 32))
    bg = np.where((rows // 2 + cols // 2) % 2 == 0, CHECKER[0], CHECKER[1])
    want = srgb_encode(0.5 * srgb_decode([0.0, 0.8, 0.0]) + 0.5 * srgb_decode(bg)[..., None])
    np.testing.assert_allclose(t, want, atol=2e-5)


# ------------------------------------------------------------------------------------------ sheet cards


def test_sheet_balls_of_maps_with_alpha_are_alpha_tested(tmp_path, sky):
    from bakery.bakes import run_bake
    from bakery.bakes.relief import ColorMipsParams

    color, alpha = _halves()
    rgba = np.concatenate([color, alpha[..., None]], axis=2)
    (tmp_path / "src").mkdir()
    src = write_image(tmp_path / "src" / "card.png", rgba, bits="8")
    opaque = write_image(tmp_path / "src" / "solid.png", np.concatenate(
        [color, np.ones_like(alpha)[..., None]], axis=2), bits="8")
    out = tmp_path / "out"
    out.mkdir()
    run_bake("mips", {"color": src}, out / "card.png", ColorMipsParams(coverage=True, alpha_cutoff=0.75))
    fn = lit_previews(sky, size=32, supersample=1)
    plain = make_entry(src, tmp_path / "src", thumb=32, preview=fn)
    (made,) = make_entries([(p, out) for p in sorted(out.glob("*.png"))], thumb=32, preview=fn)  # one asset
    solid = make_entry(opaque, tmp_path / "src", thumb=32, preview=fn)
    mat, _ = material_for(read_image(out / "card.png").pixels, "color", "8", "card.png", knowledge(out / "card.png"))
    assert mat.alpha_test.cutoff == 0.75 and np.array_equal(mat.alpha_test.opacity, alpha)
    assert plain.preview_note == "lit: base colour, alpha-tested at 0.5"  # no manifest: common practice
    assert made.preview_note == "lit: base colour, alpha-tested at 0.75"  # the cutoff its manifest records
    assert solid.preview_note == "lit: base colour"  # alpha 1 everywhere: nothing to cut
    # the cut-outs show on the ball
    assert 0 < np.mean(plain.preview != solid.preview) and plain.kind == solid.kind == "color"
    # and the strip of levels shows each level over the checkerboard where it is transparent
    level0 = made.strips[0].pictures[0][0]
    assert _values(level0[:, -4:]) == sorted(CHECKER)


def test_preview_command_alpha_tests_a_colour_map(tmp_path):
    from typer.testing import CliRunner

    from bakery.cli import app
    from bakery.io.manifest import manifest_for

    color, alpha = _halves()
    card = write_image(tmp_path / "card.png", np.concatenate([color, alpha[..., None]], axis=2), bits="8")
    solid = write_image(tmp_path / "solid.png", color, bits="8")
    outs = {}
    for name, path in (("card", card), ("solid", solid)):
        outs[name] = tmp_path / f"{name}_preview.png"
        r = CliRunner().invoke(app, ["preview", "-o", str(outs[name]), "--base-color", str(path), "--size", "32",
                                     "--supersample", "1"])
        assert r.exit_code == 0, r.output
        assert ("alpha-tested at 0.5" in r.output) == (name == "card")
    assert manifest_for(outs["card"])["params"]["alpha_cutoff"] == 0.5
    assert manifest_for(outs["solid"])["params"]["alpha_cutoff"] is None
    assert not np.array_equal(read_image(outs["card"]).pixels, read_image(outs["solid"]).pixels)


# ------------------------------------------------------------------------------------------ crosses


def _faces(n=8):
    """Six faces, each its own colour and a gradient, values above 1 (HDR), exact in half floats."""
    rows, cols = np.indices((n, n))
    faces = np.empty((6, n, n, 3), np.float32)
    for f in range(6):
        tint = np.array([1 + f, 6 - f, 1 + (f * 7) % 5], np.float32) * 0.5
        faces[f] = tint * (1 + rows[..., None] / n + 0.5 * cols[..., None] / n)
    return faces.astype(np.float16).astype(np.float32)


def _cross_wide(faces):
    """The 4N x 3N cross cell by cell: -X, +Z, +X, -Z across the middle row, +Y above +Z, -Y below it."""
    n = faces.shape[1]
    img = np.zeros((3 * n, 4 * n, 3), np.float32)
    for f, (col, row) in {0: (2, 1), 1: (0, 1), 2: (1, 0), 3: (1, 2), 4: (1, 1), 5: (3, 1)}.items():
        img[row * n:(row + 1) * n, col * n:(col + 1) * n] = faces[f]
    return img


def _cross_tall(faces):
    """The 3N x 4N cross: as the wide one without -Z on the right, and -Z turned by 180 degrees below -Y."""
    n = faces.shape[1]
    img = np.zeros((4 * n, 3 * n, 3), np.float32)
    for f, (col, row) in {0: (2, 1), 1: (0, 1), 2: (1, 0), 3: (1, 2), 4: (1, 1)}.items():
        img[row * n:(row + 1) * n, col * n:(col + 1) * n] = faces[f]
    img[3 * n:, n:2 * n] = faces[5][::-1, ::-1]
    return img


def test_preview_alpha_cutoff_option_overrides_the_default_and_is_checked(tmp_path, capfd):
    from bakery.cli import run
    from bakery.io.manifest import manifest_for

    color, _ = _halves()
    a = np.full((32, 32), 0.6, np.float32)  # drawn at cutoffs up to 0.6 (alpha >= cutoff passes), gone above
    card = write_image(tmp_path / "card.png", np.concatenate([color, a[..., None]], axis=2), bits="8")
    pics = {}
    for cut in ("0.5", "0.7"):
        pics[cut] = tmp_path / f"p{cut}.png"
        assert run(["preview", "-o", str(pics[cut]), "--base-color", str(card), "--size", "32", "--supersample",
                    "1", "--alpha-cutoff", cut]) == 0
        assert manifest_for(pics[cut])["params"]["alpha_cutoff"] == float(cut)
    empty = write_image(tmp_path / "empty.png", np.concatenate([color, 0 * a[..., None]], axis=2), bits="8")
    gone = tmp_path / "gone.png"
    assert run(["preview", "-o", str(gone), "--base-color", str(empty), "--size", "32", "--supersample", "1"]) == 0
    np.testing.assert_array_equal(read_image(pics["0.7"]).pixels, read_image(gone).pixels)  # nothing drawn
    assert not np.array_equal(read_image(pics["0.5"]).pixels, read_image(gone).pixels)
    for bad in ("0", "1.5", "nan"):
        capfd.readouterr()
        out = tmp_path / "bad.png"
        assert run(["preview", "-o", str(out), "--base-color", str(card), "--alpha-cutoff", bad]) == 2
        err = [line for line in capfd.readouterr().err.splitlines() if line.strip()]
        assert len(err) == 1 and err[0].startswith("error: --alpha-cutoff") and not out.exists()


@pytest.mark.parametrize("make", [_cross_wide, _cross_tall])
def test_a_cross_exr_is_previewed_as_its_six_faces(tmp_path, sky, make):
    from bakery.io.ktx2 import write_ktx2

    faces = _faces()
    fn = lit_previews(sky, size=32, supersample=1)
    path = write_image(tmp_path / "sky_cross.exr", make(faces), bits="half")
    cube = write_ktx2(tmp_path / "sky_cube.ktx2", [np.concatenate([faces, np.ones_like(faces[..., :1])], -1)],
                      "rgba16f", cubemap=True)
    e = make_entry(path, tmp_path, thumb=32, preview=fn)
    k = make_entry(cube, tmp_path, thumb=32, preview=fn)
    direct, note = fn(faces, "environment", "half", "faces", None)
    assert e.kind == "environment" and e.preview_note == note == "lit by itself: metal ball, roughness 0.15"
    np.testing.assert_allclose(e.preview, direct, atol=1e-6)
    np.testing.assert_allclose(k.preview, direct, atol=1e-6)
    # the faces' places matter: the same cross with +X and -X swapped gives another ball
    swapped, _ = fn(faces[[1, 0, 2, 3, 4, 5]], "environment", "half", "faces", None)
    assert np.abs(swapped - direct).max() > 0.02


def test_an_8bit_environment_picture_says_so(tmp_path, sky):
    # `bakery env convert` to an 8-bit PNG writes sRGB display values clipped at 1 (bakery.io.envfiles): a
    # picture to look at, shown as stored, not a failed panorama.
    from bakery.bakes import run_bake
    from bakery.bakes.envmaps import ConvertParams

    src = write_image(tmp_path / "sky.exr", _cross_wide(_faces()), bits="half")
    (tmp_path / "out").mkdir()
    out = tmp_path / "out" / "sky_cross_preview.png"
    import warnings

    from bakery.errors import BakeryWarning

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", BakeryWarning)  # the values above 1 clip: expected
        run_bake("env-convert", {"environment": src}, out, ConvertParams(output_layout="cross-wide", face_size=8))
    e = make_entry(out, out.parent, thumb=32, preview=lit_previews(sky, size=32, supersample=1))
    assert e.kind == "picture" and e.preview is None
    assert e.preview_note == "a picture of an environment, 8-bit sRGB clipped at 1: shown as it is"
    # 32 x 24 shown in a 32 box: the stored values themselves, not tone mapped as radiance
    np.testing.assert_allclose(e.thumbnail, read_image(out).pixels, atol=1e-6)


def test_preview_env_takes_a_cross(tmp_path):
    # `bakery preview --env` lights with a cross EXR as with the panorama of its six faces; a 3:2 image is
    # neither and is refused in one line naming the file.
    from typer.testing import CliRunner

    from bakery.cli import app
    from bakery.preview.lighting import as_panorama, lighting_from_file, lighting_from_panorama

    faces = _faces()
    path = write_image(tmp_path / "sky_cross.exr", _cross_tall(faces), bits="half")
    got, want = lighting_from_file(path), lighting_from_panorama(as_panorama(faces))
    assert len(got.levels) == len(want.levels)
    for a, b in zip(got.levels, want.levels, strict=True):
        np.testing.assert_allclose(a, b, rtol=1e-6, atol=1e-6)
    np.testing.assert_allclose(got.sh, want.sh, rtol=1e-6, atol=1e-6)
    out = tmp_path / "ball.png"
    r = CliRunner().invoke(app, ["preview", "-o", str(out), "--env", str(path), "--size", "16", "--views", "ball"])
    assert r.exit_code == 0 and out.is_file(), r.output
    bad = write_image(tmp_path / "odd.exr", np.ones((16, 24, 3), np.float32) * 2, bits="half")
    r = CliRunner().invoke(app, ["preview", "-o", str(tmp_path / "b.png"), "--env", str(bad), "--size", "16"])
    assert r.exit_code == 2 and "odd.exr" in r.output and "cross" in r.output
