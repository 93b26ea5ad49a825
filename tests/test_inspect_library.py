"""``inspect`` over a baked library: contact-sheet pictures are not maps, and a green channel switched on
purpose by ``normal-fix`` is known from its manifest.

The normal map is made independently of bakery's baker: slopes by numpy.gradient and
n = normalize(-dh/dx, -dh/dy, 1) (Blinn 1978, "Simulation of Wrinkled Surfaces"); the Y-down file is the same
normals with n_y negated, the other common convention.
"""

import json
from pathlib import Path

import numpy as np
from typer.testing import CliRunner

from bakery import samples
from bakery.cli import app
from bakery.inspect_files import collect
from bakery.io import write_image

runner = CliRunner()


def test_contact_sheet_pictures_are_skipped_in_folders(tmp_path):
    img = np.full((8, 8, 3), 0.5, np.float32)
    (tmp_path / "look.html").write_text("<html></html>")
    for rel in ("look_files/a.png", "look_files/deep/b.png", "look.png", "look-2.png", "stone.png",
                "other_files/c.png"):
        (tmp_path / rel).parent.mkdir(parents=True, exist_ok=True)
        write_image(tmp_path / rel, img)
    maps, skipped = collect([tmp_path], recursive=True)
    rel = sorted(p.relative_to(tmp_path).as_posix() for p in maps)
    assert rel == ["other_files/c.png", "stone.png"]  # no look.html beside other_files/
    assert len(skipped) == 5  # four pictures and the page
    maps, _ = collect([tmp_path / "look.png"])  # named on its own it is inspected
    assert maps == [tmp_path / "look.png"]


def _normal_map(path: Path, *, y_down: bool) -> None:
    h = samples.paving_height(128).astype(np.float64) * 40
    dy_rows, dx = np.gradient(h)
    n = np.stack([-dx, dy_rows, np.ones_like(h)], axis=-1)  # rows run down: dh/dy = -dh/drow
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    if y_down:
        n[..., 1] *= -1
    write_image(path, (n * 0.5 + 0.5).astype(np.float32), bits="16")


def _codes(path: Path) -> tuple[list[str], dict]:
    r = runner.invoke(app, ["inspect", str(path), "--json"])
    assert r.exit_code == 0, r.output
    rep = json.loads(r.output)[0]
    return [f["code"] for f in rep["findings"]], rep


def test_normal_fix_records_the_convention_it_writes(tmp_path):
    heights = tmp_path / "h.png"
    write_image(heights, samples.paving_height(128), bits="16")
    up = tmp_path / "n.png"
    r = runner.invoke(app, ["normal", str(heights), "-o", str(up), "--y", "up"])
    assert r.exit_code == 0, r.output
    down = tmp_path / "n_down.png"
    r = runner.invoke(app, ["normal-fix", str(up), "--flip-y", "-o", str(down)])
    assert r.exit_code == 0, r.output
    codes, rep = _codes(down)
    assert rep["y"] == "down" and not [c for c in codes if c.startswith("green")], rep
    # judged against a Y-up target it is the finding
    r = runner.invoke(app, ["inspect", str(down), "--json", "--expect-y", "up"])
    assert "green-y-down" in r.output

    # an input without a manifest: nothing recorded, the pixels decide (Y-down read against Y-up default)
    plain = tmp_path / "plain.png"
    _normal_map(plain, y_down=False)
    fixed = tmp_path / "plain_down.png"
    r = runner.invoke(app, ["normal-fix", str(plain), "--flip-y", "-o", str(fixed)])
    assert r.exit_code == 0, r.output
    codes, rep = _codes(fixed)
    assert "y" not in rep and "green-y-down" in codes, rep


def test_sheet_judges_and_previews_against_the_target(tmp_path):
    from bakery.preview.lighting import choose_lighting
    from bakery.preview.sheet import lit_previews, make_entries

    down = tmp_path / "maps" / "tile_normal.png"
    down.parent.mkdir()
    _normal_map(down, y_down=True)  # no manifest: only the pixels and the target say anything
    fn = lit_previews(choose_lighting(None), size=48)
    (plain,) = make_entries([(down, down.parent)], thumb=48, preview=fn)
    assert "green-y-down" in [f.code for f in plain.findings]
    assert "read as Y-up" in plain.preview_note
    (target,) = make_entries([(down, down.parent)], thumb=48, preview=fn, expect_y="down")
    assert not [f for f in target.findings if f.code.startswith("green")], target.findings
    assert "read as Y-down as the target expects" in target.preview_note
    # the lit previews of the Y-down map read as Y-down and of the same map stored Y-up read as Y-up agree
    up = tmp_path / "up" / "tile_normal.png"
    up.parent.mkdir()
    _normal_map(up, y_down=False)
    (ref,) = make_entries([(up, up.parent)], thumb=48, preview=fn)
    assert np.abs(np.asarray(ref.preview, np.float32) - np.asarray(target.preview, np.float32)).max() <= 2 / 255

    page = tmp_path / "sheet.html"
    profile = Path(__file__).resolve().parents[1] / "samples" / "profiles" / "y-down-8bit-block-compressed.toml"
    r = runner.invoke(app, ["sheet", str(down.parent), "-o", str(page), "--profile", str(profile), "--no-lit"])
    assert r.exit_code == 0, r.output
    assert "green channel looks" not in page.read_text()
    r = runner.invoke(app, ["sheet", str(down.parent), "-o", str(page), "--no-lit"])
    assert r.exit_code == 0 and "green channel looks Y-down" in page.read_text()


def test_an_ldr_picture_bakery_wrote_is_not_an_ldr_light_source(tmp_path):
    import shutil

    sky = Path(__file__).resolve().parents[1] / "samples" / "sky.hdr"
    pic = tmp_path / "cross.png"
    r = runner.invoke(app, ["env", "convert", str(sky), "-o", str(pic), "--output-layout", "cross-wide",
                            "--face-size", "32", "--exposure", "-4"])
    assert r.exit_code == 0, r.output
    codes, rep = _codes(pic)
    assert rep["from"] == "manifest" and "env-ldr" not in codes, rep
    loose = tmp_path / "loose" / "cross.png"  # the same picture without its manifest: judged as a source
    loose.parent.mkdir()
    shutil.copy(pic, loose)
    r = runner.invoke(app, ["inspect", str(loose), "--json", "--kind", "environment"])
    assert "env-ldr" in r.output, r.output


def test_preview_reads_the_green_convention_from_the_manifest_then_the_profile(tmp_path):
    from bakery.io import read_image

    heights = tmp_path / "h.png"
    write_image(heights, samples.paving_height(128), bits="16")
    up, down = tmp_path / "n.png", tmp_path / "n_down.png"
    assert runner.invoke(app, ["normal", str(heights), "-o", str(up)]).exit_code == 0
    assert runner.invoke(app, ["normal-fix", str(up), "--flip-y", "-o", str(down)]).exit_code == 0

    def shot(normal, *extra):
        out = tmp_path / f"shot{len(list(tmp_path.glob('shot*')))}.png"
        r = runner.invoke(app, ["preview", "-o", str(out), "--normal", str(normal), "--size", "96",
                                "--supersample", "1", *extra])
        assert r.exit_code == 0, r.output
        return read_image(out).pixels

    ref = shot(up)
    assert np.abs(shot(down) - ref).max() <= 1 / 255  # the manifest says Y-down
    assert np.abs(shot(down, "--y", "up") - ref).max() > 0.05  # an explicit --y wins
    loose = tmp_path / "loose" / "n_down.png"  # no manifest: the profile decides
    loose.parent.mkdir()
    loose.write_bytes(down.read_bytes())
    profile = Path(__file__).resolve().parents[1] / "samples" / "profiles" / "y-down-8bit-block-compressed.toml"
    assert np.abs(shot(loose, "--profile", str(profile)) - ref).max() <= 1 / 255
    assert np.abs(shot(loose) - ref).max() > 0.05


def test_preview_refuses_a_bad_profile_even_when_the_manifest_decides(tmp_path):
    heights = tmp_path / "h.png"
    write_image(heights, samples.paving_height(64), bits="16")
    normal = tmp_path / "n.png"
    assert runner.invoke(app, ["normal", str(heights), "-o", str(normal)]).exit_code == 0
    bad = tmp_path / "bad.toml"
    bad.write_text('[normal]\ny = "sideways"\n')
    out = tmp_path / "shot.png"
    r = runner.invoke(app, ["preview", "-o", str(out), "--normal", str(normal), "--profile", str(bad)])
    assert r.exit_code == 2 and "error:" in r.output and "bad.toml" in r.output, r.output
    assert not out.exists()


def test_small_block_compressed_levels_get_no_seam_judgement(tmp_path):
    """A map that does not tile (a ramp across x: the wrap edge jumps the whole range) is found at every
    level of 32 texels and more; levels under 32 of a block-compressed file are not judged (their 4x4 blocks
    outweigh the wrap edge), while the same small level stored uncompressed still is."""
    from bakery.io.texcompress import write_texture
    from bakery.mips import downsample

    x = np.linspace(0.0, 1.0, 64, dtype=np.float32)
    ramp = np.repeat(np.stack([x, np.full(64, 0.5, np.float32)], -1)[None], 64, axis=0)  # (64, 64, 2)
    levels = [ramp]
    while levels[-1].shape[0] > 4:
        levels.append(downsample(levels[-1]))
    for fmt, judged in (("bc5", "level 0 (and 1 other level(s)/face(s))"), ("rg8", "level 0 (and 2 other")):
        path = tmp_path / f"ramp_{fmt}.ktx2"
        write_texture(path, levels, fmt, kind="data")
        r = CliRunner().invoke(app, ["inspect", str(path), "--json", "--kind", "height"])
        assert r.exit_code == 0, r.output
        (rep,) = json.loads(r.output)
        seams = [f["message"] for f in rep["findings"] if f["code"] == "not-tiling"]
        assert len(seams) == 1 and seams[0].startswith(judged), (fmt, rep["findings"])
