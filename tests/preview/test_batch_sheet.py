"""``bakery batch --sheet``: the contact sheet of a batch's outputs."""

from __future__ import annotations

import re

import numpy as np
from typer.testing import CliRunner

from bakery.cli import app
from bakery.io import write_image

runner = CliRunner()


def test_batch_writes_a_contact_sheet(tmp_path):
    lib = tmp_path / "lib" / "stone"
    lib.mkdir(parents=True)
    y, x = np.mgrid[0:32, 0:32] * (2 * np.pi / 32)
    write_image(lib / "rock_height.png", (0.5 + 0.25 * np.sin(x) * np.sin(y))[..., None].astype(np.float32),
                bits="16")
    recipe = tmp_path / "library.toml"
    recipe.write_text('source = "lib"\noutput = "out"\n\n[[rule]]\nname = "normals"\nbake = "normal"\n'
                      'match = "**/{material}_height.png"\noutput = "{dir}/{material}_normal.png"\n')
    r = runner.invoke(app, ["batch", str(recipe), "--jobs", "1", "--sheet"])
    assert r.exit_code == 0, r.output
    page = tmp_path / "out" / ".bakery" / "sheet.html"
    assert f"contact sheet: {page}" in r.output
    names = re.findall(r'<div class="name">([^<]*)</div>', page.read_text())
    assert names == ["stone/rock_normal.png"]
    assert (page.parent / "sheet.png").exists()
    # the next run (nothing to do) writes the sheet again; its pictures are never taken for maps
    r = runner.invoke(app, ["batch", str(recipe), "--jobs", "1", "--sheet"])
    assert r.exit_code == 0, r.output
    assert re.findall(r'<div class="name">([^<]*)</div>', page.read_text()) == ["stone/rock_normal.png"]
    # without --sheet no sheet is made
    r = runner.invoke(app, ["batch", str(tmp_path / "library.toml"), "--jobs", "1"])
    assert "contact sheet" not in r.output
