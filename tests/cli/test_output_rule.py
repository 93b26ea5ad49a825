"""The -o rule of every bake command: a folder (ending in / or existing) takes names from the inputs, several
inputs need a folder, and the exit code says whether nothing (2), some (1) or everything (0) was written."""

import numpy as np
from typer.testing import CliRunner

from bakery.cli import app
from bakery.io import read_image, write_image

runner = CliRunner()


def _heights(tmp_path, n=2):
    rng = np.random.default_rng(3)
    return [write_image(tmp_path / f"h{i}.png", rng.random((16, 16)).astype(np.float32), bits="16") for i in range(n)]


def test_folder_output_takes_the_input_names(tmp_path):
    a, b = _heights(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    r = runner.invoke(app, ["normal", str(a), str(b), "-o", f"{out}/"])
    assert r.exit_code == 0, r.output
    assert sorted(p.name for p in out.iterdir()) == ["h0.png", "h0.png.bakery.json", "h1.png", "h1.png.bakery.json"]
    assert read_image(out / "h0.png").pixels.shape == (16, 16, 3)
    # an existing folder without the trailing slash is a folder too; the bake's own extension where needed
    r = runner.invoke(app, ["env", "lut", "-o", str(out), "--size", "4"])
    assert r.exit_code == 2 and "give -o a file name" in r.output


def test_several_inputs_need_a_folder(tmp_path):
    a, b = _heights(tmp_path)
    r = runner.invoke(app, ["normal", str(a), str(b), "-o", str(tmp_path / "n.png")])
    assert r.exit_code == 2 and r.output.startswith("error: ") and "output folder" in r.output
    assert not (tmp_path / "n.png").exists()


def test_one_bad_input_fails_alone_with_exit_1(tmp_path):
    (a,) = _heights(tmp_path, 1)
    bad = tmp_path / "bad.png"
    bad.write_bytes(b"not a png")
    out = tmp_path / "out"
    out.mkdir()
    r = runner.invoke(app, ["normal", str(a), str(bad), "-o", f"{out}/"])
    assert r.exit_code == 1
    assert "error: " in r.output and "bad.png" in r.output
    assert (out / "h0.png").exists() and not (out / "bad.png").exists()
    r = runner.invoke(app, ["normal", str(bad), str(bad), "-o", f"{out}/"])
    assert r.exit_code == 2  # nothing written


def test_output_folder_in_place_of_the_input_is_refused(tmp_path):
    (a,) = _heights(tmp_path, 1)
    before = a.read_bytes()
    r = runner.invoke(app, ["normal-fix", str(a), "-o", f"{tmp_path}/", "--flip-y"])
    assert r.exit_code == 2 and "also an input" in r.output
    assert a.read_bytes() == before


def test_global_options_anywhere_and_a_missing_output_folder(tmp_path):
    from bakery.cli import main

    (a,) = _heights(tmp_path, 1)
    import pytest

    with pytest.raises(SystemExit) as info:
        main(["normal", str(a), "-o", str(tmp_path / "n.png"), "--quiet"])
    assert info.value.code == 0 and (tmp_path / "n.png").exists()
    r = runner.invoke(app, ["normal", str(a), "-o", f"{tmp_path / 'nowhere'}/"])
    assert r.exit_code == 2 and "output folder does not exist" in r.output


def test_outputs_differing_in_extension_keep_their_own_manifests(tmp_path):
    (a,) = _heights(tmp_path, 1)
    assert runner.invoke(app, ["normal", str(a), "-o", str(tmp_path / "n.png")]).exit_code == 0
    assert runner.invoke(app, ["normal", str(a), "-o", str(tmp_path / "n.ktx2"), "--ktx2-format", "bc5"]).exit_code == 0
    assert {p.name for p in tmp_path.glob("n.*.bakery.json")} == {"n.png.bakery.json", "n.ktx2.bakery.json"}
