"""Faults during the work: Ctrl-C, a full disk, running out of memory, a killed process's temporary file, the
pixel limit in every reader, and one-line usage errors. Each leaves no file under an output's name and prints one
line; the exit codes are 130 for Ctrl-C and 2 otherwise."""

from __future__ import annotations

import errno
import os
import subprocess
import sys
import time

import numpy as np
import pytest

from bakery.io import write_image
from bakery.io.ktx2 import write_ktx2


def run_cli(args, capfd):
    from bakery.cli import run

    capfd.readouterr()
    code = run([str(a) for a in args])
    return code, capfd.readouterr().err


def one_line(err: str) -> str:
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: ") and "Traceback" not in err, err
    return lines[0]


@pytest.fixture
def height(tmp_path):
    return write_image(tmp_path / "h.png", np.random.default_rng(1).random((16, 16)).astype(np.float32), bits="16")


def _failing_png_writer(exc):
    import bakery.io.images as images

    real = images._WRITERS["png"]

    def write(tmp, a, bits, **options):
        real(tmp, a, bits, **options)  # the data is on disk under the temporary name when the fault strikes
        raise exc

    return write


@pytest.mark.parametrize(("exc", "code", "words"), [
    (KeyboardInterrupt(), 130, "interrupted"),
    (OSError(errno.ENOSPC, "No space left on device"), 2, "No space left on device"),
])
def test_fault_mid_write_leaves_nothing(exc, code, words, height, tmp_path, capfd, monkeypatch):
    import bakery.io.images as images

    if isinstance(exc, OSError):
        exc.filename = str(tmp_path / "out" / "n.png")
    monkeypatch.setitem(images._WRITERS, "png", _failing_png_writer(exc))
    (tmp_path / "out").mkdir()
    got, err = run_cli(["normal", height, "-o", tmp_path / "out" / "n.png"], capfd)
    assert got == code
    assert words in one_line(err)
    assert list((tmp_path / "out").iterdir()) == []  # neither the output nor its temporary file


def test_out_of_memory_names_the_size(height, tmp_path, capfd, monkeypatch):
    import bakery.normals.from_height as fh

    def no_memory(*a, **k):
        raise MemoryError

    monkeypatch.setattr(fh, "run_strips", no_memory)
    got, err = run_cli(["normal", height, "-o", tmp_path / "n.png"], capfd)
    line = one_line(err)
    assert got == 2 and "out of memory" in line and "16x16" in line and "smaller" in line
    assert not (tmp_path / "n.png").exists()


def test_a_killed_writers_temporary_is_removed_by_the_next_write(height, tmp_path):
    """A SIGKILL mid-write leaves ``.NAME.pPIDhHOST.*.partEXT``: never under the output's name, and removed by
    the next write in that folder once its process is gone."""
    out = tmp_path / "n.png"
    code = (f"import os, sys\nfrom bakery.io.atomic import atomic_output\n"
            f"with atomic_output({str(out)!r}) as tmp:\n    tmp.write_bytes(b'half')\n    print(tmp, flush=True)\n"
            f"    os.kill(os.getpid(), 9)\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert r.returncode == -9
    left = [p.name for p in tmp_path.iterdir() if p.name.endswith(".part.png")]
    assert len(left) == 1 and left[0].startswith(".n.p") and not out.exists()
    from bakery.io.atomic import _SCANNED

    _SCANNED.discard(tmp_path)  # the next write is a new command
    from bakery.cli import run

    assert run(["normal", str(height), "-o", str(out)]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["h.png", "n.png", "n.png.bakery.json"]


def test_an_old_temporary_is_removed_even_when_its_process_id_is_alive(height, tmp_path):
    from bakery.io.atomic import _SCANNED, _host

    _SCANNED.discard(tmp_path)  # the fixture's write looked at the folder already; the next is a new command
    stale = tmp_path / f".n.p{os.getpid()}h{_host()}.abcdefgh.part.png"
    stale.write_bytes(b"x")
    old = time.time() - 2 * 3600
    os.utime(stale, (old, old))
    fresh = tmp_path / f".m.p{os.getppid()}h{_host()}.ijklmnop.part.png"  # a live process's write in progress
    fresh.write_bytes(b"x")
    elsewhere = tmp_path / ".k.p1h000000.qrstuvwx.part.exr"  # another host's write: only age tells
    elsewhere.write_bytes(b"x")
    from bakery.cli import run

    assert run(["normal", str(height), "-o", str(tmp_path / "n.png")]) == 0
    assert not stale.exists() and fresh.exists() and elsewhere.exists()


@pytest.fixture
def maps(tmp_path):
    rng = np.random.default_rng(4)
    n = np.zeros((16, 16, 3), np.float32)
    n[..., 2] = 1
    files = {
        "spec": write_image(tmp_path / "s.png", rng.random((16, 16)).astype(np.float32), bits="8"),
        "normal": write_image(tmp_path / "n.png", n * 0.5 + 0.5, bits="8"),
        "sky": write_image(tmp_path / "sky.exr", rng.random((8, 16, 3)).astype(np.float32), bits="half"),
    }
    cube = [rng.random((6, 8, 8, 4)).astype(np.float32)]
    write_ktx2(tmp_path / "c.ktx2", cube, "R16G16B16A16_SFLOAT", cubemap=True)
    files["ktx2"] = tmp_path / "c.ktx2"
    return files


READERS = {
    "roughness": lambda f, o: ["roughness", f["spec"], "--source", "smoothness", "-o", o / "r.png"],
    "roughness --pack": lambda f, o: ["roughness", f["spec"], "--source", "smoothness", "--pack", f["normal"],
                                      "-o", o / "r.png"],
    "antialias roughness": lambda f, o: ["antialias", f["normal"], f["spec"], "-o", o / "a.png"],
    "env convert": lambda f, o: ["env", "convert", f["sky"], "--face-size", "4", "-o", o / "c_{face}.exr"],
    "env convert ktx2": lambda f, o: ["env", "convert", f["ktx2"], "-o", o / "p.exr"],
    "env diffuse": lambda f, o: ["env", "diffuse", f["sky"], "--face-size", "4", "-o", o / "d.json"],
    "env specular": lambda f, o: ["env", "specular", f["sky"], "--face-size", "8", "-o", o / "s.ktx2"],
    "info ktx2": lambda f, o: ["info", f["ktx2"]],
}


@pytest.mark.parametrize("value", ["abc", "0", "-5", "100"])
@pytest.mark.parametrize("reader", list(READERS))
def test_the_pixel_limit_in_every_reader(reader, value, maps, tmp_path, capfd, monkeypatch):
    out = tmp_path / "out"
    out.mkdir()
    monkeypatch.setenv("BAKERY_MAX_PIXELS", value)
    got, err = run_cli(READERS[reader](maps, out), capfd)
    line = one_line(err)
    assert got == 2 and "BAKERY_MAX_PIXELS" in line
    if value == "100":  # every input here is over 100 pixels (16x8 = 128 the smallest)
        assert "over the limit of 100" in line
    assert list(out.iterdir()) == []


@pytest.mark.parametrize(("args", "expected"), [
    (["normal", "h.png", "--blurr", "1", "-o", "x.png"], "error: No such option: --blurr"),
    (["normal", "h.png", "--blur", "abc", "-o", "x.png"], "error: --blur: "),
    (["normal"], "error: HEIGHT: missing"),
    (["normal", "h.png"], "error: --output: missing"),
    (["env", "lut", "-o"], "error: Option '-o' requires an argument"),
    (["nope"], "error: No such command 'nope'"),
])
def test_usage_errors_are_one_line(args, expected, capfd):
    got, err = run_cli(args, capfd)
    assert got == 2 and one_line(err).startswith(expected)


def test_usage_error_through_the_console_script(tmp_path):
    r = subprocess.run([sys.executable, "-m", "bakery", "normal", "--blur", "x"], capture_output=True, text=True,
                       timeout=60, cwd=tmp_path)
    assert r.returncode == 2 and r.stderr.strip().splitlines() == [r.stderr.strip()] and "--blur" in r.stderr
    r = subprocess.run([sys.executable, "-m", "bakery", "--debug", "normal", "--blur", "x"], capture_output=True,
                       text=True, timeout=60, cwd=tmp_path)
    assert r.returncode == 2 and "Usage:" in r.stderr  # --debug keeps the parser's full text


def test_json_holds_nan_and_infinity_as_text():
    """JSON has no NaN or infinity (RFC 8259, section 6): reports and manifests write them as strings."""
    import json

    from bakery.io.manifest import to_json

    text = to_json({"strength": float("nan"), "levels": [1.0, float("inf"), np.float32(-np.inf)]})
    assert json.loads(text) == {"strength": "nan", "levels": [1.0, "inf", "-inf"]}


ROUGHNESS_ENTRIES = ["[]", '"str"', "5", "null", '{"roughness": "abc"}', '{"roughness": [0, NaN]}',
                     '{"roughness": [0, 1e999]}', '{"roughness": [0, 1.5]}', '{"roughness": [0]}',
                     '{"roughness": [0, [1]]}', "{not json"]


@pytest.mark.parametrize("entry", ROUGHNESS_ENTRIES)
def test_preview_refuses_a_bad_roughness_entry_in_one_line(entry, tmp_path, capfd):
    rng = np.random.default_rng(2)
    levels = [rng.random((6, 4, 4, 4)).astype(np.float32), rng.random((6, 2, 2, 4)).astype(np.float32)]
    spec = write_ktx2(tmp_path / "s.ktx2", levels, "R16G16B16A16_SFLOAT", cubemap=True,
                      key_values={"bakery.roughness-per-level": entry})
    sh = tmp_path / "d.json"
    sh.write_text('{"radiance_sh": ' + str([[0.1, 0.1, 0.1]] * 9) + "}")
    got, err = run_cli(["preview", "--specular", spec, "--diffuse", sh, "--size", "16", "-o", tmp_path / "p.png"],
                       capfd)
    assert got == 2 and "s.ktx2" in one_line(err)
    assert not (tmp_path / "p.png").exists()


@pytest.mark.parametrize("sh", ['{"radiance_sh": "text"}', '{"radiance_sh": [[1, 2, 3], [1]]}',
                                '{"radiance_sh": [["a", "b", "c"]]}', '{"radiance_sh": null}', "[]", "{nope"])
def test_preview_refuses_a_bad_sh_file_in_one_line(sh, tmp_path, capfd):
    rng = np.random.default_rng(2)
    levels = [rng.random((6, 4, 4, 4)).astype(np.float32), rng.random((6, 2, 2, 4)).astype(np.float32)]
    spec = write_ktx2(tmp_path / "s.ktx2", levels, "R16G16B16A16_SFLOAT", cubemap=True,
                      key_values={"bakery.roughness-per-level": '{"roughness": [0, 1]}'})
    (tmp_path / "d.json").write_text(sh)
    got, err = run_cli(["preview", "--specular", spec, "--diffuse", tmp_path / "d.json", "--size", "16",
                        "-o", tmp_path / "p.png"], capfd)
    assert got == 2 and "d.json" in one_line(err)
    assert not (tmp_path / "p.png").exists()


@pytest.mark.parametrize("command", [["info"], ["normal"], ["mips"]])
def test_a_cmyk_tiff_is_refused_in_one_line(command, tmp_path, capfd):
    """CMYK samples (TIFF 6.0 PhotometricInterpretation 5) are not read as RGB(A)."""
    import tifffile

    path = tmp_path / "print.tif"
    tifffile.imwrite(path, np.full((8, 8, 4), 90, np.uint8), photometric="separated")
    out = tmp_path / "out.png"
    code, err = run_cli([*command, path] + ([] if command == ["info"] else ["-o", out]), capfd)
    assert code == 2 and "CMYK" in one_line(err) and "print.tif" in err
    assert not out.exists()
