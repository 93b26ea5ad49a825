"""The -o name template: ``{stem}``, ``{name}`` and ``{ext}`` are filled in from each input, the extension picks
the format, and a bad template is one ``error:`` line with exit code 2 and nothing written."""

from __future__ import annotations

import numpy as np

from bakery import samples
from bakery.io import read_image, write_image
from bakery.io.ktx2 import read_ktx2
from tests.cli.test_many_files import _bakery


def _two_heights(tmp_path):
    src = tmp_path / "heights"
    src.mkdir()
    h = samples.paving_height(64)
    write_image(src / "stone.png", h, bits="16")
    write_image(src / "moss.png", np.roll(h, 9, axis=0), bits="16")
    (tmp_path / "out").mkdir()
    return src


def test_a_template_names_each_output_and_its_extension_picks_the_format(tmp_path):
    _two_heights(tmp_path)
    r = _bakery("normal", "heights", "-o", "out/{stem}_normal.ktx2", "--strength", "2", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    names = sorted(p.name for p in (tmp_path / "out").iterdir())
    assert names == ["moss_normal.ktx2", "moss_normal.ktx2.bakery.json", "stone_normal.ktx2",
                     "stone_normal.ktx2.bakery.json"]
    # the same bytes as the one-file command with the name written out
    one = _bakery("normal", "heights/stone.png", "-o", "stone_normal.ktx2", "--strength", "2", cwd=tmp_path)
    assert one.returncode == 0, one.stderr
    assert (tmp_path / "out" / "stone_normal.ktx2").read_bytes() == (tmp_path / "stone_normal.ktx2").read_bytes()
    assert read_ktx2(tmp_path / "out" / "moss_normal.ktx2").width == 64


def test_name_and_ext_fields(tmp_path):
    _two_heights(tmp_path)
    r = _bakery("normal", "heights/stone.png", "-o", "out/n_{name}.{ext}", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert read_image(tmp_path / "out" / "n_stone.png.png").pixels.shape == (64, 64, 3)


def test_bad_templates_are_one_error_line_and_write_nothing(tmp_path):
    _two_heights(tmp_path)
    for template, words in (("out/{stme}.png", "{stme}"), ("out/{stem.png", "stray brace"),
                            ("missing/{stem}.png", "does not exist"), ("out/{stem}/", "file name")):
        r = _bakery("normal", "heights", "-o", template, cwd=tmp_path)
        assert r.returncode == 2, (template, r.stderr)
        errors = [line for line in r.stderr.splitlines() if line.strip()]
        assert len(errors) == 1 and errors[0].startswith("error:") and words in errors[0], (template, r.stderr)
    assert list((tmp_path / "out").iterdir()) == []


def test_two_inputs_filling_in_one_name_are_refused_before_work(tmp_path):
    src = _two_heights(tmp_path)
    write_image(src / "stone.tif", samples.paving_height(64), bits="16")
    r = _bakery("normal", "heights", "-o", "out/{stem}_normal.png", cwd=tmp_path)
    assert r.returncode == 2, r.stderr
    assert "stone_normal.png" in r.stderr
    assert list((tmp_path / "out").iterdir()) == []


def test_a_face_pattern_keeps_its_face_field(tmp_path):
    sky = tmp_path / "sky.exr"
    write_image(sky, samples.sky_panorama(64), bits="half")
    (tmp_path / "out").mkdir()
    r = _bakery("env", "convert", "sky.exr", "-o", "out/{stem}.{face}.exr", "--face-size", "16", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    faces = sorted(p.name for p in (tmp_path / "out").glob("sky.*.exr"))
    assert faces == sorted(f"sky.{f}.exr" for f in ("x+", "x-", "y+", "y-", "z+", "z-"))
