"""Bake commands over several files: parallel workers give the bytes of one-file runs, a bad file fails alone,
and outputs that collide with each other or with an input are refused before any work."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np

from bakery import samples
from bakery.io import write_image

ROOT = Path(__file__).resolve().parents[2]


def _bakery(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-m", "bakery", *args], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=300)


def _heights(tmp_path: Path) -> Path:
    src = tmp_path / "heights"
    src.mkdir()
    h = samples.paving_height(128)
    write_image(src / "a.png", h, bits="16")
    write_image(src / "b.png", 1.0 - h, bits="16")
    write_image(src / "c.png", np.roll(h, 17, axis=1), bits="16")
    return src


def test_a_folder_in_parallel_gives_the_bytes_of_one_file_runs(tmp_path):
    src = _heights(tmp_path)
    (tmp_path / "many").mkdir()
    (tmp_path / "one").mkdir()
    r = _bakery("normal", "heights", "-o", "many/", "--jobs", "2", "--strength", "4", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    for name in ("a.png", "b.png", "c.png"):
        one = _bakery("normal", str(src / name), "-o", f"one/{name}", "--strength", "4", cwd=tmp_path)
        assert one.returncode == 0, one.stderr
        assert (tmp_path / "many" / name).read_bytes() == (tmp_path / "one" / name).read_bytes()
    assert r.stdout.count("wrote") == 3


def test_one_bad_file_fails_alone_with_exit_1(tmp_path):
    src = _heights(tmp_path)
    (src / "broken.png").write_bytes(b"not an image")
    (tmp_path / "out").mkdir()
    r = _bakery("normal", "heights", "-o", "out/", "--jobs", "2", cwd=tmp_path)
    assert r.returncode == 1
    assert sorted(p.name for p in (tmp_path / "out").glob("*.png")) == ["a.png", "b.png", "c.png"]
    errors = [line for line in r.stderr.splitlines() if "error:" in line]
    assert len(errors) == 1 and "broken.png" in errors[0]


def test_colliding_outputs_and_outputs_on_inputs_are_refused_before_work(tmp_path):
    src = _heights(tmp_path)
    (tmp_path / "out").mkdir()
    (tmp_path / "other").mkdir()
    write_image(tmp_path / "other" / "a.png", samples.paving_height(64), bits="16")
    r = _bakery("normal", "heights/a.png", "other/a.png", "-o", "out/", cwd=tmp_path)
    assert r.returncode == 2 and "error:" in r.stderr and "a.png" in r.stderr
    assert not any((tmp_path / "out").iterdir())
    r = _bakery("normal", "heights/a.png", "heights/b.png", "-o", "heights/", cwd=tmp_path)
    assert r.returncode == 2 and "error:" in r.stderr
    assert sorted(p.name for p in src.iterdir()) == ["a.png", "b.png", "c.png"]
