"""The contact sheet of a baked library: one card per asset, KTX2 levels, manifest conventions, tables, packed
textures, the before/after comparison, and the page in headless Chromium.

The library is bakery's sample library baked by its own recipe (``bakery.samples``), plus a Y-down normal map,
a normal-map mip chain with its length maps, and a packed texture whose manifest is written here by the
contract of the pack bake (a top-level ``channels`` entry)."""

from __future__ import annotations

import re
import shutil
import struct
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery.cli import app
from bakery.io import write_image
from bakery.preview.shading import Lighting
from tests.preview import envtools
from tests.preview.test_sheet import _browser, _chromium, _loaded

runner = CliRunner()
MAP_ENDINGS = (".png", ".tif", ".tiff", ".exr", ".hdr", ".pic", ".jpg", ".jpeg", ".ktx2")


@pytest.fixture(scope="module")
def library(tmp_path_factory) -> Path:
    from bakery.bakes import run_bake
    from bakery.bakes.normals import MipsParams, NormalParams
    from bakery.batch import run
    from bakery.io.manifest import write_manifest
    from bakery.samples import library as make_library
    from bakery.samples import paving_height, write_library_recipe

    tmp = tmp_path_factory.mktemp("lib")
    make_library(tmp / "library", size=32, sky_width=64)
    report = run(write_library_recipe(tmp / "library"), jobs=1)
    assert report.exit_code == 0
    baked = tmp / "library-baked"
    extra = baked / "extra"
    extra.mkdir()
    write_image(extra / "paving_height.png", paving_height(32)[..., None], bits="16")
    run_bake("normal", {"height": extra / "paving_height.png"}, extra / "paving_up.png", NormalParams())
    run_bake("normal", {"height": extra / "paving_height.png"}, extra / "paving_down.png", NormalParams(y="down"))
    (extra / "chain").mkdir()
    run_bake("normal-mips", {"normal": extra / "paving_up.png"}, extra / "chain" / "paving.png", MipsParams())
    # a packed texture: r = occlusion 0.5, g = smoothness ramp, b = metalness (left half 0, right half 1)
    ramp = np.tile(np.linspace(0, 1, 32, dtype=np.float32), (32, 1))
    metal = np.zeros((32, 32), np.float32)
    metal[:, 16:] = 1
    write_image(extra / "stone_pack.png", np.stack([np.full((32, 32), 0.5, np.float32), ramp, metal], -1),
                bits="8")
    channels = {c: {"role": r, "source": None, "channel": c, "invert": False, "constant": None}
                for c, r in (("r", "occlusion"), ("g", "smoothness"), ("b", "metalness"))}
    write_manifest(extra / "stone_pack.png", bake="pack", inputs={}, params={},
                   outputs=[extra / "stone_pack.png"], extra={"channels": channels})
    return baked


@pytest.fixture(scope="module")
def lighting() -> Lighting:
    src = envtools.cube_from_function(
        lambda d: 0.2 + 0.8 * np.clip(d[..., 1:2], 0, 1) * np.array([0.6, 0.8, 1.0]), 8)
    return Lighting((src, envtools.brute_prefilter(src, 0.6, 4)), np.array([0.0, 0.6]),
                    envtools.split_sum_table(16), envtools.sh_project(src))


@pytest.fixture(scope="module")
def sheet(library, lighting, tmp_path_factory) -> Path:
    from bakery.preview.sheet import collect_maps, lit_previews, make_entries, write_sheet

    out = tmp_path_factory.mktemp("sheet") / "library.html"
    entries = make_entries(collect_maps([library], out), thumb=48,
                           preview=lit_previews(lighting, size=32, supersample=1))
    write_sheet(entries, out, thumb=48)
    return out


def _expected_assets(root: Path) -> Counter:
    """Asset keys by the naming rules, written out here: NAME.mipKK.ext and NAME.TAG.mipKK.ext are levels of
    NAME, NAME.FACE.ext and NAME.mipKK.FACE.ext faces of NAME, NAME_FACE.ext faces of NAME_cube, NAME.length.ext
    the normal lengths of NAME; the extension (image or .ktx2) does not make another asset."""
    keys: Counter = Counter()
    for p in root.rglob("*"):
        if not p.is_file() or p.suffix.lower() not in MAP_ENDINGS or p.name.startswith("."):
            continue
        stem = p.name[: -len(p.suffix)]
        stem = re.sub(r"\.[xyz][+-]$", "", stem)
        stem = re.sub(r"^(.*)_[xyz][+-]$", r"\1_cube", stem)
        m = re.fullmatch(r"(.+?)(\.[^.]+)?\.mip\d\d", stem)
        if m:
            stem = m.group(1)
        stem = re.sub(r"\.length$", "", stem)
        keys[(p.parent.relative_to(root).as_posix(), stem)] += 1
    return keys


def _cards(page: str) -> list[tuple[str, str]]:
    return re.findall(r'<div class="card[^"]*" data-asset="([^"]*)" data-files="(\d+)">(.*?)(?=<div class="card|'
                      r'</div>\s*<script>)', page, re.S)


def test_one_card_per_asset_and_every_file_once(library, sheet):
    page = sheet.read_text()
    expected = _expected_assets(library)
    cards = _cards(page)
    assert len(cards) == len(expected)  # 35 assets in 63 files (measured)
    n_files = sum(expected.values())
    assert sum(max(1, int(n)) for _, n, _ in cards) == n_files
    listed = []
    for name, n, body in cards:
        files = re.findall(r"<li>([^<]*)</li>", body.split('<ul class="files">')[1]) if int(n) > 1 else [name]
        assert len(files) == int(n)
        listed += files
    on_disk = sorted(p.relative_to(library).as_posix() for p in library.rglob("*")
                     if p.is_file() and p.suffix.lower() in MAP_ENDINGS)
    assert sorted(listed) == on_disk
    # the loose chain with its length maps is one card, its strips a chain of levels and one of side data
    chain = next(body for name, _, body in cards if name == "extra/chain/paving.png")
    assert re.search(r'data-form="files" data-levels="6"', chain) and 'data-form="tag" data-levels="6"' in chain


def _ktx2_levels(path: Path) -> tuple[int, int]:
    """levelCount and faceCount from the KTX 2.0 header (Khronos KTX 2.0 specification, section 3.1: faceCount at
    byte 36, levelCount at byte 40, little-endian uint32), read here without the project's reader."""
    head = path.read_bytes()[:44]
    assert head[:12] == b"\xabKTX 20\xbb\r\n\x1a\n"
    faces, levels = struct.unpack("<2I", head[36:44])
    return max(levels, 1), faces


def test_ktx2_levels_and_cube_crosses_are_shown(library, sheet):
    page = sheet.read_text()
    cards = {name: body for name, _, body in _cards(page)}
    ktx2 = sorted(library.rglob("*.ktx2"))
    skies = [p for p in ktx2 if p.parent.name == "skies"]
    assert len(skies) == 3  # the cube, the irradiance and the specular chain of the sample sky
    assert len(ktx2) > 3  # and the compressed normal-map chains
    for path in ktx2:
        levels, faces = _ktx2_levels(path)
        stem = path.relative_to(library).as_posix()[:-5].removesuffix(".length")
        body = next(b for n, b in cards.items() if n.startswith(stem))
        m = re.search(r'data-form="ktx2" data-levels="(\d+)"', body)
        assert m and int(m.group(1)) == levels, path.name
        if path in skies:
            assert faces == 6 and "cube map" in body
        else:
            assert faces == 1 and "cube map" not in body
    spec = cards["skies/clear_sky_specular.ktx2"]
    # the chain's roughness per level is on every level's caption: linear in the level, r = k / (levels - 1)
    levels, _ = _ktx2_levels(library / "skies" / "clear_sky_specular.ktx2")
    caps = re.findall(r"<figcaption>(\d+) · \d+×\d+ · r ([0-9.]+)</figcaption>", spec)
    assert [int(k) for k, _ in caps] == list(range(levels))
    np.testing.assert_allclose([float(r) for _, r in caps], np.arange(levels) / (levels - 1), atol=0.005)
    # the loose irradiance faces join their KTX2 on one card
    assert 'data-form="faces"' in cards["skies/clear_sky_irradiance.ktx2"]


def test_tables_packed_textures_and_conventions(library, sheet, lighting):
    from bakery.preview.sheet import lit_previews, make_entry

    page = sheet.read_text()
    cards = {name: body for name, _, body in _cards(page)}
    lut = cards["tables/brdf_lut.png"]
    assert "a table: shown as its channels" in lut and 'data-form="channels" data-levels="2"' in lut
    assert "lit:" not in lut
    pack = cards["extra/stone_pack.png"]
    assert "r: occlusion" in pack and "g: smoothness" in pack and "b: metalness" in pack
    assert "lit: packed channels" in pack
    assert "Y-down as its manifest says" in cards["extra/paving_down.png"]
    assert not re.search(r"green-y-down", cards["extra/paving_down.png"])  # baked Y-down on purpose
    # a Y-down map previews like the Y-up map of the same heights (16-bit files: the decoded normals differ by
    # one code, 1.5e-5; the previews by at most 2 display codes, measured 0.0039)
    fn = lit_previews(lighting, size=32, supersample=1)
    up = make_entry(library / "extra" / "paving_up.png", preview=fn).preview
    down = make_entry(library / "extra" / "paving_down.png", preview=fn).preview
    assert np.abs(up - down).max() <= 2.5 / 255
    # read as Y-up instead, the relief turns inside out: the previews differ clearly
    from bakery.io import read_image
    from bakery.preview.render import preview_image
    from bakery.preview.sheet import material_for

    px = read_image(library / "extra" / "paving_down.png").pixels
    wrong, _ = material_for(px, "normal", "16", "paving_down.png")
    img, _ = preview_image(wrong, lighting, size=32, views="ball", supersample=1)
    assert np.abs(img - up).max() > 0.05


def test_packed_channels_feed_the_material(library):
    # smoothness s is stored; roughness = 1 - s (Burley 2012, perceptual roughness); 8-bit codes: v = code/255
    from bakery.io import read_image
    from bakery.preview.assets import knowledge
    from bakery.preview.sheet import material_for

    path = library / "extra" / "stone_pack.png"
    px = read_image(path).pixels
    mat, note = material_for(px, "pack", "8", path.name, knowledge(path))
    codes = np.rint(np.linspace(0, 1, 32) * 255) / 255
    np.testing.assert_allclose(mat.roughness[0], 1 - codes, atol=1e-6)
    np.testing.assert_allclose(mat.occlusion, 128 / 255, atol=1e-6)
    assert mat.metallic[:, :16].max() == 0 and mat.metallic[:, 16:].min() == 1
    assert "g=smoothness" in note


def test_sheet_of_the_library_in_headless_chromium(sheet, tmp_path):
    exe = _chromium()
    n_images = len(list((sheet.parent / "library_files").iterdir()))
    loaded, total = _loaded(exe, sheet)
    assert total == n_images and loaded == total
    shot = tmp_path / "shot.png"
    res = _browser(exe, "--window-size=1200,1600", f"--screenshot={shot}", sheet.resolve().as_uri())
    assert shot.exists(), res.stderr[-500:]
    import cv2

    img = cv2.imread(str(shot))
    assert img.shape[:2] == (1600, 1200) and img.std() > 10


# ------------------------------------------------------------------------------------------ comparison


def test_compare_numbers_match_independent_references(library, tmp_path):
    from skimage.metrics import peak_signal_noise_ratio

    from bakery.io import read_image
    from bakery.normals import decode_normals
    from bakery.preview.compare import compare_entries
    from bakery.preview.sheet import collect_maps

    old, new = tmp_path / "old", tmp_path / "new"
    for d in (old, new):
        (d / "stone").mkdir(parents=True)
    rng = np.random.default_rng(7)
    color = rng.random((32, 32, 3), dtype=np.float32)
    write_image(old / "stone" / "albedo.png", color, bits="8")
    write_image(new / "stone" / "albedo.png", np.clip(color + rng.normal(0, 0.02, color.shape), 0, 1), bits="8")
    shutil.copy(library / "stone" / "cobble_normal.png", old / "stone" / "cobble_normal.png")
    n = decode_normals(read_image(library / "stone" / "cobble_normal.png").pixels)
    t = np.radians(4.0)  # every normal turned 4° about the tangent x axis
    rot = np.array([[1, 0, 0], [0, np.cos(t), -np.sin(t)], [0, np.sin(t), np.cos(t)]])
    write_image(new / "stone" / "cobble_normal.png", (n @ rot.T * 0.5 + 0.5).astype(np.float32), bits="16")
    write_image(old / "gone.png", color, bits="8")
    out = tmp_path / "cmp.html"
    entries = {e.name: e for e in compare_entries(collect_maps([old], out), collect_maps([new], out), thumb=32)}
    # PSNR: skimage.metrics.peak_signal_noise_ratio on the stored values, data range 1 (8-bit files in [0, 1])
    a, b = (read_image(d / "stone" / "albedo.png").pixels for d in (old, new))
    ref = peak_signal_noise_ratio(a, b, data_range=1.0)
    got = float(re.search(r"PSNR ([0-9.]+) dB", dict(entries["stone/albedo.png"].numbers)["level 0"]).group(1))
    assert abs(got - ref) < 0.005  # printed to 2 decimals
    # angles: numpy arccos of the dot products of the decoded unit normals
    na = decode_normals(read_image(old / "stone" / "cobble_normal.png").pixels)
    nb = decode_normals(read_image(new / "stone" / "cobble_normal.png").pixels)
    na /= np.linalg.norm(na, axis=-1, keepdims=True)
    nb /= np.linalg.norm(nb, axis=-1, keepdims=True)
    ang = np.degrees(np.arccos(np.clip(np.sum(na * nb, -1), -1, 1)))
    text = dict(entries["stone/cobble_normal.png"].numbers)["level 0"]
    mean, top = (float(v) for v in re.findall(r"([0-9.]+)°", text))
    assert abs(mean - ang.mean()) < 0.0015 and abs(top - ang.max()) < 0.0015
    assert 3.0 < mean < top <= 4.01  # at most the 4° turn: normals leaning along x turn less (measured mean 3.42)
    assert dict(entries["gone.png"].numbers)["only in"] == "the old set"
    assert entries["stone/albedo.png"].preview is not None and "white =" in entries["stone/albedo.png"].preview_note
    # through the command line
    r = runner.invoke(app, ["sheet", str(old), str(new), "--compare", "-o", str(out)])
    assert r.exit_code == 0, r.output
    page = out.read_text()
    assert page.count('<div class="card') == 3 and "PSNR" in page and "angle mean" in page
    r = runner.invoke(app, ["sheet", str(old), "--compare", "-o", str(out)])
    assert r.exit_code == 2 and "two folders" in r.output
