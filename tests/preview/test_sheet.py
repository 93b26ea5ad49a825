"""Contact sheets: content of the page, the grid picture, atomic writing, and the page in a real headless
browser (Debian's ``chromium`` package, installed by ``.ci/run``)."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest

from bakery.errors import BakeryError
from bakery.io import write_image
from bakery.preview.shading import Lighting
from bakery.preview.sheet import (
    find_maps,
    lit_previews,
    make_entry,
    material_for,
    sheet_html,
    write_sheet,
)
from tests.preview import envtools


@pytest.fixture(scope="module")
def lighting() -> Lighting:
    src = envtools.cube_from_function(
        lambda d: 0.2 + 0.8 * np.clip(d[..., 1:2], 0, 1) * np.array([0.6, 0.8, 1.0]), 8)
    return Lighting((src, envtools.brute_prefilter(src, 0.6, 4)), np.array([0.0, 0.6]),
                    envtools.split_sum_table(16), envtools.sh_project(src))


def _bump_normals(size=32, flip=False):
    """Normals of h = sin(x) sin(2y) (Blinn 1978: n ∝ (−∂h/∂x, −∂h/∂y, 1)), +y up the image, encoded n·0.5 + 0.5;
    ``flip`` stores the Y-down convention g' = 1 − g."""
    rows, cols = np.mgrid[0:size, 0:size]
    x, y = cols * (2 * np.pi / size), (size - 1 - rows) * (2 * np.pi / size)
    hx, hy = np.cos(x) * np.sin(2 * y), 2 * np.sin(x) * np.cos(2 * y)
    n = np.stack([-hx, -hy, np.full_like(hx, 2.0)], -1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    enc = n * 0.5 + 0.5
    if flip:
        enc[..., 1] = 1 - enc[..., 1]
    return enc.astype(np.float32)


@pytest.fixture()
def maps(tmp_path) -> Path:
    d = tmp_path / "maps"
    (d / "sub").mkdir(parents=True)
    write_image(d / "rock_normal.png", _bump_normals(), bits="8")
    write_image(d / "sub" / "rock normal & dx.png", _bump_normals(flip=True), bits="8")
    write_image(d / "rock_rough.png", np.linspace(0, 1, 32 * 32, dtype=np.float32).reshape(32, 32, 1), bits="8")
    rng = np.random.default_rng(3)
    write_image(d / "albedo.png", rng.random((32, 32, 3), dtype=np.float32), bits="8")
    sky = np.ones((16, 32, 3), np.float32) * 2.0
    write_image(d / "sky.exr", sky, bits="half")
    (d / "broken.png").write_bytes(b"\x89PNG\r\n\x1a\nnope")
    (d / "notes.txt").write_text("not a map")
    (d / ".hidden.png").write_bytes(b"")
    return d


def test_find_maps_is_sorted_and_skips_non_maps(maps):
    names = [p.relative_to(maps).as_posix() for p in find_maps(maps)]
    assert names == ["albedo.png", "broken.png", "rock_normal.png", "rock_rough.png", "sky.exr",
                     "sub/rock normal & dx.png"]
    assert "sub/rock normal & dx.png" not in [p.relative_to(maps).as_posix()
                                              for p in find_maps(maps, recursive=False)]
    with pytest.raises(BakeryError, match="not a folder"):
        find_maps(maps / "albedo.png")


def test_entries_carry_kind_size_findings_and_previews(maps, lighting):
    fn = lit_previews(lighting, size=32, supersample=1)
    entries = {e.name: e for e in (make_entry(p, maps, thumb=48, preview=fn) for p in find_maps(maps))}
    n = entries["rock_normal.png"]
    assert (n.kind, n.width, n.height, n.channels, n.bits) == ("normal", 32, 32, 3, "8")
    assert n.preview is not None and n.preview.shape == (32, 32, 3)
    assert n.thumbnail.shape == (48, 48, 3)
    # the Y-down map is flagged by bakery.inspect and the flag reaches the card
    dx = entries["sub/rock normal & dx.png"]
    assert "green-y-down" in [f.code for f in dx.problems]
    assert not n.problems
    assert entries["rock_rough.png"].preview_note == "lit: roughness map (dark base)"
    assert entries["albedo.png"].preview_note == "lit: base colour"
    sky = entries["sky.exr"]
    assert sky.kind == "environment" and sky.preview.shape == (32, 32, 3)
    assert sky.preview_note.startswith("lit by itself")
    broken = entries["broken.png"]
    assert broken.kind == "unreadable" and broken.findings[0].severity == "error"
    assert broken.thumbnail is None


def test_a_picture_bakery_made_is_shown_as_it_is(tmp_path, lighting):
    """A picture with its manifest (bakery.preview.picture) gets a flat card, not a ball, and none of the map
    findings (its 300x200 size is no power of two); the same PNG without the manifest is a colour map again."""
    from bakery.preview.picture import picture_manifest

    rng = np.random.default_rng(7)
    img = rng.random((200, 300, 3), dtype=np.float32)
    fn = lit_previews(lighting, size=32, supersample=1)
    for with_manifest in (True, False):
        folder = tmp_path / str(with_manifest)
        folder.mkdir()
        path = write_image(folder / "look.png", img, bits="8")
        if with_manifest:
            picture_manifest(path, made_by="preview", inputs={}, params={})
        e = make_entry(path, folder, thumb=48, preview=fn)
        if with_manifest:
            assert (e.kind, e.preview, e.preview_note) == ("picture", None, "a picture: shown as it is, not on a ball")
            assert e.findings == [] and e.thumbnail is not None
        else:
            assert e.kind == "color" and e.preview is not None
            assert "non-power-of-two" in [f.code for f in e.findings]


def test_material_for_reads_normals_as_y_up():
    # Encoding n·0.5 + 0.5 (docs/references.md, section 1, glTF 2.0 normalTexture): (0.65, 0.70, 0.933013)
    # is (0.3, 0.4, 0.866)
    px = np.broadcast_to(np.array([0.65, 0.70, 0.933013], np.float32), (4, 4, 3))
    mat, note = material_for(px, "normal", "8", "n.png")
    np.testing.assert_allclose(mat.normals[0, 0], [0.3, 0.4, 0.866025], atol=1e-4)
    assert "Y-up" in note


def test_single_channel_maps_are_previewed_by_name():
    # heights: normals baked with relief = width/32 (bakery normal's default), n = normalize(−s ∂h/∂x, ..., 1)
    # (Blinn 1978) with s = 64/32 = 2 for a ramp rising 0.01 per texel; exponents: 32 -> r = 0.492479
    # (Walter et al. 2007 peak rule, docs/references.md, section 5)
    ramp = np.tile(np.arange(64, dtype=np.float32) * 0.01, (16, 1))[..., None]
    mat, note = material_for(ramp, "height", "16", "wall_height.png")
    np.testing.assert_allclose(mat.normals[8, 30], np.array([-0.02, 0, 1]) / np.hypot(0.02, 1), atol=1e-5)
    assert "baked from the heights" in note
    mat, note = material_for(np.full((4, 4, 1), 32.0, np.float32), "data", "half", "wall_exponent.exr")
    np.testing.assert_allclose(mat.roughness, 0.492479, atol=1e-5)
    mat, note = material_for(ramp, "height", "16", "wall_mask.png")
    assert mat is None and "rough, height or exponent" in note


def test_a_shallow_height_map_is_a_height_map_by_its_name(tmp_path, lighting):
    """Its values (a used range of 0.2) look like roughness data; the card follows the name's word."""
    from scipy.ndimage import gaussian_filter

    g = gaussian_filter(np.random.default_rng(2).random((64, 64)), 4, mode="wrap")
    g = (0.45 + 0.2 * (g - g.min()) / np.ptp(g)).astype(np.float32)
    fn = lit_previews(lighting, size=32)
    for name, kind in (("plate_height.png", "height"), ("plate.png", "roughness")):
        path = write_image(tmp_path / name, g, bits="16")
        e = make_entry(path, tmp_path, thumb=32, preview=fn)
        assert e.kind == kind, (name, e.kind)
    assert "baked from the heights" in make_entry(tmp_path / "plate_height.png", tmp_path, thumb=32,
                                                  preview=fn).preview_note


def test_a_cavity_mask_is_previewed_as_occlusion_and_other_masks_are_not(tmp_path, lighting):
    """The cavity mask (1 open, darker in crevices) multiplies the environment's light as an occlusion map
    does: its ball is the one of an occlusion map holding the same values."""
    from bakery.bakes import get_bake, run_bake
    from bakery.preview.shading import Material

    r, c = np.mgrid[0:64, 0:64].astype(np.float32)
    h = write_image(tmp_path / "h.png", 0.5 + 0.3 * np.sin(c / 5) * np.cos(r / 7), bits="16")
    fn = lit_previews(lighting, size=32, supersample=1)
    for m in ("cavity", "convexity"):
        out = run_bake("curvature", {"height": h}, tmp_path / f"{m}.png", get_bake("curvature").params(map=m))[0]
        e = make_entry(out, tmp_path, thumb=32, preview=fn)
        assert e.kind == "mask"
        if m == "convexity":
            assert e.preview is None
            continue
        assert "cavity mask as an occlusion map" in e.preview_note
        from bakery.io import read_image
        from bakery.preview.render import preview_image

        g = read_image(out).pixels[..., 0]
        ref, _ = preview_image(Material(occlusion=g, roughness=0.6, base_color=(0.8, 0.8, 0.8)), lighting,
                               size=32, views="ball", supersample=1)
        np.testing.assert_allclose(e.preview, ref, atol=1e-6)


def test_page_escapes_names_and_links(maps, lighting):
    entries = [make_entry(p, maps, thumb=32) for p in find_maps(maps)]
    page = sheet_html(entries, title="<b>sheet</b>", links=[{"map": "t/a b&c.png"}] * len(entries), grids=[])
    assert "<b>sheet</b>" not in page and "&lt;b&gt;sheet&lt;/b&gt;" in page
    assert "rock normal &amp; dx.png" in page
    assert 'src="t/a%20b%26c.png"' in page


def test_write_sheet_outputs_and_replaces_atomically(maps, tmp_path, lighting):
    out = tmp_path / "out"
    out.mkdir()
    entries = [make_entry(p, maps, thumb=40, preview=lit_previews(lighting, size=32, supersample=1))
               for p in find_maps(maps)]
    written = write_sheet(entries, out / "sheet.html", thumb=40)
    assert [p.name for p in written] == ["sheet_files", "sheet.png", "sheet.html"]
    thumbs = sorted(p.name for p in (out / "sheet_files").iterdir())
    assert len(thumbs) == len(entries) - 1 + 5  # one map thumbnail per readable file, five lit previews
    import cv2

    grid = cv2.imread(str(out / "sheet.png"))
    assert grid.shape[0] > 100 and grid.std() > 10
    # written again (fewer entries), the old thumbnails are replaced, nothing temporary is left
    write_sheet(entries[:2], out / "sheet.html", thumb=40)
    assert len(list((out / "sheet_files").iterdir())) == 2  # albedo: map + lit; broken: none
    assert sorted(p.name for p in out.iterdir()) == ["sheet.html", "sheet.png", "sheet_files"]
    with pytest.raises(BakeryError, match=r"\.html"):
        write_sheet(entries, out / "sheet.png")


def test_failed_write_leaves_no_sheet(maps, tmp_path, monkeypatch):
    out = tmp_path / "o"
    out.mkdir()
    entries = [make_entry(p, maps, thumb=32) for p in find_maps(maps)]
    import bakery.preview.sheet as sheet

    def boom(*a, **k):
        raise RuntimeError("disk full")

    monkeypatch.setattr(sheet, "sheet_html", boom)
    with pytest.raises(RuntimeError):
        write_sheet(entries, out / "s.html")
    assert list(out.iterdir()) == []


# ------------------------------------------------------------------------------------------ real browser


def _chromium() -> str:
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe is None:
        if os.environ.get("CI"):  # CI must run the browser check, never skip it
            pytest.fail("Debian's chromium package is missing although .ci/run installs it")
        pytest.skip("Debian's chromium package is not installed (.ci/run installs it)")
    return exe


def _browser(exe: str, *args: str) -> subprocess.CompletedProcess:
    profile = tempfile.mkdtemp(prefix="bakery-chromium-")
    try:
        cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync",
               f"--user-data-dir={profile}", *args]
        return subprocess.run(cmd, capture_output=True, text=True, timeout=120,
                              env={**os.environ, "HOME": profile})
    finally:
        shutil.rmtree(profile, ignore_errors=True)


def _loaded(exe: str, page: Path) -> tuple[int, int]:
    res = _browser(exe, "--virtual-time-budget=10000", "--dump-dom", page.resolve().as_uri())
    body = re.search(r"<body[^>]*>", res.stdout)
    assert body, f"no DOM from chromium: {res.stderr[-500:]}"
    total = re.search(r'data-images-total="(\d+)"', body.group(0))
    ok = re.search(r'data-images-loaded="(\d+)"', body.group(0))
    assert total and ok, f"the page's load script did not run: {body.group(0)}"
    return int(ok.group(1)), int(total.group(1))


def test_sheet_in_headless_chromium(maps, tmp_path, lighting):
    exe = _chromium()
    out = tmp_path / "web page"  # a space in the path: links must be relative and quoted
    out.mkdir()
    entries = [make_entry(p, maps, thumb=64, preview=lit_previews(lighting, size=48, supersample=1))
               for p in find_maps(maps)]
    write_sheet(entries, out / "sheet.html", thumb=64)
    n_images = len(list((out / "sheet_files").iterdir()))
    loaded, total = _loaded(exe, out / "sheet.html")
    assert total == n_images and loaded == total
    shot = tmp_path / "shot.png"
    res = _browser(exe, "--window-size=1200,900", f"--screenshot={shot}", (out / "sheet.html").resolve().as_uri())
    assert shot.exists(), res.stderr[-500:]
    import cv2

    img = cv2.imread(str(shot))
    assert img.shape[:2] == (900, 1200)
    assert img.std() > 10  # a page with pictures, not a blank window
    # the check can fail: a missing thumbnail is counted as not loaded
    next((out / "sheet_files").iterdir()).unlink()
    loaded, total = _loaded(exe, out / "sheet.html")
    assert loaded == total - 1
