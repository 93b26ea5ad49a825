"""Atomic writes, refusal of output == input, manifests."""

import json
import os

import numpy as np
import pytest

from bakery.errors import BakeryError
from bakery.io import atomic_output, check_distinct, write_image
from bakery.io.manifest import file_digest, manifest_path, to_json, write_manifest


def test_failed_write_leaves_nothing_and_keeps_the_old_file(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(RuntimeError), atomic_output(target) as tmp:
        tmp.write_text("half")
        raise RuntimeError("crash mid-write")
    assert target.read_text() == "old"
    assert os.listdir(tmp_path) == ["out.txt"]


def test_successful_write_replaces(tmp_path):
    target = tmp_path / "out.txt"
    with atomic_output(target) as tmp:
        assert tmp.parent == tmp_path and tmp.suffix == ".txt"
        tmp.write_text("new")
    assert target.read_text() == "new"
    assert os.listdir(tmp_path) == ["out.txt"]


def test_missing_output_folder(tmp_path):
    with pytest.raises(BakeryError, match="output folder does not exist"):
        write_image(tmp_path / "no" / "a.png", np.zeros((2, 2), np.float32))


def test_output_equal_to_input_is_refused(tmp_path):
    a = tmp_path / "a.png"
    a.write_bytes(b"x")
    link = tmp_path / "link.png"
    link.symlink_to(a)
    with pytest.raises(BakeryError, match="output path is also an input"):
        check_distinct([link], [a])
    check_distinct([tmp_path / "b.png"], [a])


def test_manifest_is_deterministic_and_names_inputs_by_hash(tmp_path):
    src = tmp_path / "h.png"
    write_image(src, np.zeros((2, 2), np.float32))
    out = tmp_path / "n.png"
    write_image(out, np.zeros((2, 2), np.float32))
    m1 = write_manifest(out, bake="test", inputs={"height": src}, params={"b": 1, "a": 0.5}, outputs=[out])
    first = m1.read_bytes()
    write_manifest(out, bake="test", inputs={"height": src}, params={"a": 0.5, "b": 1}, outputs=[out])
    assert m1.read_bytes() == first and m1 == manifest_path(out)
    data = json.loads(first)
    assert data["inputs"]["height"]["digest"] == file_digest(src)
    assert data["outputs"] == ["n.png"]
    assert to_json({"x": np.float32(0.5)}) == '{\n  "x": 0.5\n}\n'
