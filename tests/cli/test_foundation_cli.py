"""The command line: version, help, info, demo, and one-line errors with exit code 2."""

import os
import re
import subprocess
import sys

import numpy as np
import pytest
from typer.testing import CliRunner

from bakery import __version__
from bakery.cli import app
from bakery.io import read_image, write_image

runner = CliRunner()


def test_version():
    r = runner.invoke(app, ["--version"])
    assert r.exit_code == 0 and r.output.strip() == f"bakery {__version__}"


def test_help_lists_commands():
    r = runner.invoke(app, ["--help"])
    assert r.exit_code == 0
    for name in ("info", "demo"):
        assert name in r.output


@pytest.mark.parametrize("cmd", [["info"], ["demo"]])
def test_each_help(cmd):
    r = runner.invoke(app, [*cmd, "--help"])
    assert r.exit_code == 0 and "Usage" in r.output


def test_info_describes_a_map(tmp_path):
    h = np.linspace(0, 1, 64 * 32, dtype=np.float32).reshape(32, 64)
    path = write_image(tmp_path / "h.png", h, bits="16")
    r = runner.invoke(app, ["info", str(path)])
    assert r.exit_code == 0, r.output
    assert "PNG" in r.output and "64 x 32" in r.output and "16-bit integer" in r.output
    assert "range gray:  0 .. 1" in r.output and "NaN: 0  Inf: 0" in r.output


def test_info_counts_nan_and_inf(tmp_path):
    d = np.ones((4, 8, 3), np.float32)
    d[0, 0] = np.nan
    d[1, 1, 0] = np.inf
    path = write_image(tmp_path / "bad.exr", d, bits="float")
    r = runner.invoke(app, ["info", str(path)])
    assert r.exit_code == 0 and "NaN: 3  Inf: 1" in r.output


def test_info_guesses_a_normal_map_and_an_hdr_panorama(tmp_path):
    flat = np.broadcast_to(np.array([0.5, 0.5, 1.0], np.float32), (8, 8, 3))
    sky = np.ones((16, 32, 3), np.float32) * 3
    r = runner.invoke(app, ["info", str(write_image(tmp_path / "n.png", flat)),
                            str(write_image(tmp_path / "s.exr", sky))])
    assert r.exit_code == 0, r.output
    assert "normal map" in r.output and "HDR environment (equirectangular)" in r.output


def test_missing_file_exit_2_one_line(tmp_path):
    r = runner.invoke(app, ["info", str(tmp_path / "gone.png")])
    assert r.exit_code == 2
    lines = [ln for ln in r.output.splitlines() if ln]
    assert lines == [f"error: {tmp_path / 'gone.png'}: file not found"]


def test_corrupt_file_exit_2(tmp_path):
    p = tmp_path / "c.exr"
    p.write_bytes(b"garbage")
    r = runner.invoke(app, ["info", str(p)])
    assert r.exit_code == 2 and "c.exr" in r.output and "error:" in r.output


def test_debug_shows_the_traceback(tmp_path):
    r = runner.invoke(app, ["--debug", "info", str(tmp_path / "gone.png")])
    assert r.exit_code != 0 and r.exception is not None


def test_pixel_limit_from_environment(tmp_path):
    path = write_image(tmp_path / "h.png", np.zeros((32, 32), np.float32))
    r = runner.invoke(app, ["info", str(path)], env={"BAKERY_MAX_PIXELS": "100"})
    assert r.exit_code == 2 and "over the limit of 100" in r.output


def test_demo_writes_inputs_and_summary(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # a relative output folder, as in the README's command
    r = runner.invoke(app, ["demo", "-o", "d", "--size", "64"])
    assert r.exit_code == 0, r.output
    summary = (tmp_path / "d" / "SUMMARY.md").read_text(encoding="utf-8")
    listed = re.findall(r"`([^`]+)`", summary)
    assert len(listed) >= 10 and all((tmp_path / "d" / p).exists() for p in listed), listed
    # the demo's bakes give what the commands give (one bake interface): its normal map, byte for byte
    d = tmp_path / "d"
    r = runner.invoke(app, ["normal", str(d / "inputs" / "paving_height.png"), "-o", str(tmp_path / "n.png")])
    assert r.exit_code == 0, r.output
    assert (tmp_path / "n.png").read_bytes() == (d / "normals" / "paving_normal.png").read_bytes()
    # and its Y-down twin stores g' = 1 - g exactly, red and blue untouched (the Y-down convention of the trade,
    # docs/references.md, section 1)
    up, down = read_image(d / "normals" / "paving_normal.png"), read_image(d / "normals" / "paving_normal_ydown.png")
    top = {"8": 255, "16": 65535}[up.bits]
    g_up, g_down = np.rint(up.pixels[..., 1] * top), np.rint(down.pixels[..., 1] * top)
    assert np.array_equal(g_down, top - g_up)
    assert np.array_equal(up.pixels[..., ::2], down.pixels[..., ::2])


def test_installed_entry_point_runs():
    env = dict(os.environ)
    r = subprocess.run([sys.executable, "-m", "bakery", "--version"], capture_output=True, text=True, env=env)
    assert r.returncode == 0 and __version__ in r.stdout
