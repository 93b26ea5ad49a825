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
