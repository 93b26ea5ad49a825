"""Bad input, for every command: one ``error:`` line naming the file or option, exit code 2, nothing lost.

For each case the command runs in-process through :func:`bakery.cli.run` (the console entry point) with
file-descriptor capture, so lines that decoder libraries print from C count too, and the test asserts:
exit code 2; exactly one stderr line, starting ``error: `` and naming the file or option; no traceback; the
output folder left as it was; every input file unchanged (SHA-256). The unwritable-folder cases run the
command in a subprocess without the capabilities that let root write into read-only folders (tests and CI
run as root).

Kinds: missing, empty, truncated, garbage, wrong extension, huge header (a PNG declaring 100000 x 100000),
zero-size (a PNG declaring 0 x 16), wrong channels, NaN/Inf samples, folder in place of an output, output equal
to an input, output equal to one of the bake's side files, bad option values, unwritable output folder.
The module runs 239 cases (``pytest tests/test_bad_input.py -q`` counts them; ``test_case_count`` holds the
number, so a change to the tables shows here).
"""

from __future__ import annotations

import hashlib
import os
import shutil
import struct
import subprocess
import sys
import zlib
from pathlib import Path

import numpy as np
import pytest

from bakery.io import write_image

#: Valid 16x16 (panoramas 16x8) inputs, built once: role -> file name.
GOOD = {"height": "h.png", "normal": "n.png", "spec": "s.png", "rough": "r.png", "env": "sky.exr",
        "normal_exr": "nf.exr", "height_exr": "hf.exr"}


def _make_good(folder: Path) -> None:
    rng = np.random.default_rng(17)
    write_image(folder / "h.png", rng.random((16, 16)).astype(np.float32), bits="16")
    n = rng.normal(0, 0.2, (16, 16, 3)).astype(np.float32)
    n[..., 2] = 1
    n /= np.linalg.norm(n, axis=2, keepdims=True)
    write_image(folder / "n.png", n * 0.5 + 0.5, bits="8")
    write_image(folder / "nf.exr", n * 0.5 + 0.5, bits="float")
    write_image(folder / "s.png", rng.random((16, 16)).astype(np.float32), bits="8")
    write_image(folder / "r.png", rng.random((16, 16)).astype(np.float32), bits="8")
    write_image(folder / "sky.exr", (rng.random((8, 16, 3)) * 2).astype(np.float32), bits="half")
    write_image(folder / "hf.exr", rng.random((16, 16)).astype(np.float32), bits="float")


def _chunk(kind: bytes, data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))


def png_declaring(width: int, height: int) -> bytes:
    """A PNG whose header declares width x height 8-bit gray with (almost) no pixel data (PNG spec, IHDR)."""
    ihdr = struct.pack(">IIBBBBB", width, height, 8, 0, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + _chunk(b"IHDR", ihdr) + _chunk(b"IDAT", zlib.compress(b"\0" * 64))
            + _chunk(b"IEND", b""))


# --------------------------------------------------------------------------------- the commands
# name -> (role of the file under test, its suffix, argv builder(bad, out_folder, good_folder), writes?)
def _o(out: Path, name: str) -> list[str]:
    return ["-o", str(out / name)]


COMMANDS = {
    "normal": ("height", ".png", lambda f, o, g: ["normal", f, *_o(o, "o.png")]),
    "height": ("normal", ".png", lambda f, o, g: ["height", f, *_o(o, "o.png")]),
    "blend": ("normal", ".png", lambda f, o, g: ["blend", f, g / "n.png", *_o(o, "o.png")]),
    "normal-mips": ("normal", ".png", lambda f, o, g: ["normal-mips", f, *_o(o, "o.png")]),
    "normal-fix": ("normal", ".png", lambda f, o, g: ["normal-fix", f, "--flip-y", *_o(o, "o.png")]),
    "roughness": ("spec", ".png", lambda f, o, g: ["roughness", f, "--source", "smoothness", *_o(o, "o.png")]),
    "antialias": ("normal", ".png", lambda f, o, g: ["antialias", f, g / "r.png", *_o(o, "o.png")]),
    "antialias-roughness": ("rough", ".png", lambda f, o, g: ["antialias", g / "n.png", f, *_o(o, "o.png")]),
    "env convert": ("env", ".exr", lambda f, o, g: ["env", "convert", f, "--face-size", "4",
                                                    *_o(o, "o_{face}.exr")]),
    "env diffuse": ("env", ".exr", lambda f, o, g: ["env", "diffuse", f, "--face-size", "4", *_o(o, "o.json")]),
    "env specular": ("env", ".exr", lambda f, o, g: ["env", "specular", f, "--face-size", "8",
                                                     *_o(o, "o.ktx2")]),
    "info": ("normal", ".png", lambda f, o, g: ["info", f]),
    "inspect": ("normal", ".png", lambda f, o, g: ["inspect", f]),
    "preview": ("normal", ".png", lambda f, o, g: ["preview", "--normal", f, "--size", "16", *_o(o, "o.png")]),
    "preview-env": ("env", ".exr", lambda f, o, g: ["preview", "--env", f, "--size", "16", *_o(o, "o.png")]),
    "sheet": ("normal", ".png", lambda f, o, g: ["sheet", f, "--no-lit", *_o(o, "o.html")]),
}
WRITERS = [c for c in COMMANDS if c not in ("info", "inspect")]


def _good_bytes(good: Path, role: str) -> bytes:
    return (good / GOOD[role]).read_bytes()


def _bad_file(kind: str, role: str, suffix: str, folder: Path, good: Path) -> Path:
    """Write the bad input of ``kind`` for an input of ``role`` and return its path."""
    path = folder / f"bad{suffix}"
    data = _good_bytes(good, role)
    if kind == "missing":
        return path
    if kind == "empty":
        data = b""
    elif kind == "truncated":
        data = data[: len(data) // 2]
    elif kind == "garbage":
        data = np.random.default_rng(5).integers(0, 256, 300, dtype=np.uint8).tobytes()
    elif kind == "wrong-extension":
        path = folder / "bad.txt"
    elif kind == "huge-header":
        path, data = folder / "bad.png", png_declaring(100_000, 100_000)
    elif kind == "zero-size":
        path, data = folder / "bad.png", png_declaring(0, 16)
    elif kind == "wrong-channels":
        rng = np.random.default_rng(9)
        if role in ("normal", "env"):  # one channel where three directions / colours are needed
            write_image(path.with_suffix(".png"), rng.random((8, 16)).astype(np.float32), bits="8")
        else:  # colour channels that differ where one value per texel is read
            write_image(path.with_suffix(".png"), rng.random((16, 16, 3)).astype(np.float32), bits="8")
        return path.with_suffix(".png")
    elif kind == "nan":
        shape = (8, 16, 3) if role == "env" else (16, 16, 3) if role == "normal" else (16, 16)
        a = np.full(shape, 0.5, np.float32)
        a.flat[7] = np.nan
        a.flat[3] = np.inf
        write_image(path.with_suffix(".exr"), a, bits="float")
        return path.with_suffix(".exr")
    path.write_bytes(data)
    return path


FILE_KINDS = ["missing", "empty", "truncated", "garbage", "wrong-extension", "huge-header", "zero-size",
              "wrong-channels", "nan"]
#: Cases that are not errors by design.
NOT_ERRORS = {
    ("info", "nan"): "info counts NaN/Inf samples and reports them",
    ("inspect", "nan"): "inspect reports NaN/Inf samples as a finding",
    ("info", "wrong-channels"): "info describes any channel count",
    ("inspect", "wrong-channels"): "inspect describes any channel count",
    ("sheet", "wrong-channels"): "a contact sheet shows any map",
    **{(c, "wrong-channels"): "a grey panorama is a valid environment"
       for c in ("preview-env", "env convert", "env diffuse", "env specular")},
    **{("sheet", k): "a contact sheet shows an unreadable map as a card with its error"
       for k in FILE_KINDS if k != "missing"},
}
FILE_CASES = [(c, k) for c in COMMANDS for k in FILE_KINDS if (c, k) not in NOT_ERRORS]


@pytest.fixture(scope="module")
def good(tmp_path_factory):
    folder = tmp_path_factory.mktemp("good")
    _make_good(folder)
    return folder


def _digests(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _tree(folder: Path) -> list[str]:
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


def run_cli(args, capfd) -> tuple[int, str]:
    from bakery.cli import run

    capfd.readouterr()
    code = run([str(a) for a in args])
    out, err = capfd.readouterr()
    return code, err


def assert_one_error(code: int, err: str, names: list[str]) -> None:
    lines = [line for line in err.splitlines() if line.strip()]
    assert code == 2, (code, err)
    assert len(lines) == 1, err
    assert lines[0].startswith("error: "), err
    assert "Traceback" not in err
    assert any(n in lines[0] for n in names), (names, lines[0])


def _check(args, capfd, names, inputs: Path, out: Path, extra_inputs=()):
    before = _digests(inputs)
    extra = {p: p.read_bytes() for p in extra_inputs}
    out_before = _tree(out)
    code, err = run_cli(args, capfd)
    assert_one_error(code, err, names)
    assert _digests(inputs) == before
    assert all(p.read_bytes() == b for p, b in extra.items())
    assert _tree(out) == out_before


@pytest.mark.parametrize(("command", "kind"), FILE_CASES, ids=[f"{c}-{k}" for c, k in FILE_CASES])
def test_bad_file(command, kind, good, tmp_path, capfd):
    role, suffix, argv = COMMANDS[command]
    src = tmp_path / "in"
    out = tmp_path / "out"
    src.mkdir()
    out.mkdir()
    bad = _bad_file(kind, role, suffix, src, good)
    _check(argv(bad, out, good), capfd, [bad.name], src, out, extra_inputs=list(good.iterdir()))


# ------------------------------------------------------------------------------------ outputs
@pytest.mark.parametrize("command", WRITERS)
def test_output_is_the_input(command, good, tmp_path, capfd):
    role, suffix, argv = COMMANDS[command]
    src = tmp_path / "in"
    src.mkdir()
    f = src / f"x{suffix}"
    shutil.copy(good / GOOD[role], f)
    args = argv(f, src, good)
    args[args.index("-o") + 1] = str(f)
    code, err = run_cli(args, capfd)
    # env convert's -o names a face pattern or a single-image layout; an .exr panorama written over itself
    assert_one_error(code, err, [f.name])
    assert f.read_bytes() == (good / GOOD[role]).read_bytes()
    assert _tree(src) == [f.name]


#: An input named like one of the bake's side files: (command, input name, -o name).
SIDE_FILES = [
    ("normal-mips", "x.mip01.png", "x.png"),
    ("normal-mips", "x.length.mip02.png", "x.png"),
    ("antialias", "x.mip01.png", "x.png"),
    ("env convert", "s_x+.exr", "s_{face}.exr"),
    ("env diffuse", "d.x+.exr", "d.json"),
    ("env specular", "s.mip01.x+.exr", "s.ktx2"),
]


@pytest.mark.parametrize(("command", "name", "target"), SIDE_FILES)
def test_output_side_file_is_the_input(command, name, target, good, tmp_path, capfd):
    role, suffix, argv = COMMANDS[command]
    f = tmp_path / name
    shutil.copy(good / GOOD[role], f)
    args = argv(f, tmp_path, good)
    args[args.index("-o") + 1] = str(tmp_path / target)
    if command == "env specular":
        args += ["--loose"]
    code, err = run_cli(args, capfd)
    assert_one_error(code, err, [name])
    assert f.read_bytes() == (good / GOOD[role]).read_bytes()
    assert _tree(tmp_path) == [name]


@pytest.mark.parametrize("command", WRITERS)
def test_folder_in_place_of_the_output(command, good, tmp_path, capfd):
    role, suffix, argv = COMMANDS[command]
    out = tmp_path / "out"
    out.mkdir()
    args = argv(good / GOOD[role], out, good)
    target = Path(args[args.index("-o") + 1])
    # an existing folder named like the output is an output folder (the -o rule), so take a side file's name:
    # the manifest, NAME.ext.bakery.json (a face pattern's is NAME_cube.ext.bakery.json)
    taken = out / (target.name.replace("_{face}", "_cube") + ".bakery.json")
    if command in ("sheet", "preview", "preview-env"):
        taken = out / "o.png"  # the sheet's grid picture; the preview picture itself
    taken.mkdir()
    _check(args, capfd, [taken.name], good, out)


BAD_OPTIONS = [
    ("normal", ["--blur", "-1"], "--blur"), ("normal", ["--blur", "nan"], "--blur"),
    ("normal", ["--blur", "1e9"], "--blur"), ("normal", ["--strength", "inf"], "--strength"),
    ("normal", ["--edges", "zz"], "--edges"), ("normal", ["--bits", "12"], "--bits"),
    ("normal", ["--blurr", "1"], "--blurr"), ("normal", ["--channel", "q"], "--channel"),
    ("height", ["--relief", "nan"], "--relief"), ("blend", ["--method", "zz"], "--method"),
    ("normal-mips", ["--levels", "0"], "--levels"), ("normal-mips", ["--levels", "99"], "--levels"),
    ("normal-fix", ["--channels", "5"], "--channels"),
    ("roughness", ["--exponent-range", "abc"], "--exponent-range"),
    ("antialias", ["--roughness", "nan"], "--roughness"), ("antialias", ["--roughness", "2"], "--roughness"),
    ("antialias", ["--levels", "-1"], "--levels"),
    ("env convert", ["--face-size", "0"], "--face-size"), ("env convert", ["--rotation", "nan"], "--rotation"),
    ("env diffuse", ["--face-size", "-4"], "--face-size"),
    ("env specular", ["--face-size", "100"], "--face-size"), ("env specular", ["--face-size", "1e17"], "--face-size"),
    ("env specular", ["--level-roughness", "0,nan,1"], "--level-roughness"),
    ("env specular", ["--level-roughness", "0,1e999"], "--level-roughness"),
    ("env specular", ["--level-roughness", "0,1.5"], "--level-roughness"),
    ("preview", ["--yaw", "nan"], "--yaw"), ("preview", ["--yaw", "inf"], "--yaw"),
    ("preview", ["--rotation", "-inf"], "--rotation"), ("preview", ["--white", "inf"], "--white"),
    ("preview", ["--exposure", "nan"], "--exposure"), ("preview", ["--tiles", "nan", "1"], "--tiles"),
    ("preview", ["--roughness", "nan"], "--roughness"), ("preview", ["--size", "3"], "--size"),
    ("sheet", ["--thumb", "0"], "--thumb"), ("sheet", ["--columns", "x"], "--columns"),
]


@pytest.mark.parametrize(("command", "extra", "option"), BAD_OPTIONS,
                         ids=[" ".join([c, *e]) for c, e, _ in BAD_OPTIONS])
def test_bad_option_value(command, extra, option, good, tmp_path, capfd):
    role, suffix, argv = COMMANDS[command]
    _check(argv(good / GOOD[role], tmp_path, good) + extra, capfd, [option], good, tmp_path)


@pytest.mark.parametrize(("args", "option"), [
    (["env", "lut", "--size", "0"], "--size"), (["env", "lut", "--size", "nan"], "--size"),
    (["env", "lut", "--samples", "0"], "--samples"), (["batch", "--jobs", "0", "r.toml"], "--jobs"),
    (["info"], "FILES"), (["normal", "--nope"], "--nope"), (["env", "lut"], "--output"),
])
def test_bad_option_without_files(args, option, tmp_path, capfd):
    _check([*args, *(["-o", str(tmp_path / "l.png")] if args[:2] == ["env", "lut"] and len(args) > 2 else [])],
           capfd, [option], tmp_path, tmp_path)


# ------------------------------------------------------------------------------------- batch
RECIPE = """source = "lib"
output = "baked"

[[rule]]
name = "normals"
bake = "{bake}"
match = "{match}"
output = "{{dir}}/{{m}}_out.{ext}"
params = {params}
"""

BATCH_CASES = {
    "missing": None,
    "empty": "",
    "garbage": "this is [not toml",
    "strength-nan": RECIPE.format(bake="normal", match="**/{m}.png", ext="png", params="{ strength = nan }"),
    "strength-inf": RECIPE.format(bake="normal", match="**/{m}.png", ext="png", params="{ strength = inf }"),
    "bad-range": RECIPE.format(bake="normal", match="**/[z-a]{m}.png", ext="png", params="{}"),
    "face-size-100": RECIPE.format(bake="env-specular", match="**/{m}.exr", ext="ktx2",
                                   params="{ face-size = 100 }"),
    "face-size-1e17": RECIPE.format(bake="env-specular", match="**/{m}.exr", ext="ktx2",
                                    params="{ face-size = 1e17 }"),
    "unknown-key": RECIPE.format(bake="normal", match="**/{m}.png", ext="png", params="{ strenght = 1 }"),
}


@pytest.mark.parametrize("case", list(BATCH_CASES))
@pytest.mark.parametrize("dry", [False, True], ids=["run", "dry-run"])
def test_bad_recipe(case, dry, good, tmp_path, capfd):
    lib = tmp_path / "lib"
    lib.mkdir()
    shutil.copy(good / "h.png", lib / "a.png")
    shutil.copy(good / "sky.exr", lib / "a.exr")
    recipe = tmp_path / "r.toml"
    if BATCH_CASES[case] is not None:
        recipe.write_text(BATCH_CASES[case])
    before = _tree(tmp_path)
    code, err = run_cli(["batch", recipe, *(["--dry-run"] if dry else [])], capfd)
    assert_one_error(code, err, ["r.toml"])
    assert _tree(tmp_path) == before  # no output root, no cache, no report


def test_report_in_a_missing_folder_fails_before_any_job(good, tmp_path, capfd):
    lib = tmp_path / "lib"
    lib.mkdir()
    shutil.copy(good / "h.png", lib / "a.png")
    recipe = tmp_path / "r.toml"
    recipe.write_text(RECIPE.format(bake="normal", match="**/{m}.png", ext="png", params="{}"))
    code, err = run_cli(["batch", recipe, "--report", tmp_path / "nope" / "r.json"], capfd)
    assert_one_error(code, err, ["nope"])
    assert not (tmp_path / "baked").exists()  # nothing ran


def test_a_link_out_of_the_source_root_is_refused(good, tmp_path, capfd):
    lib = tmp_path / "lib"
    lib.mkdir()
    shutil.copy(good / "h.png", lib / "a.png")
    secret = tmp_path / "elsewhere"
    secret.mkdir()
    shutil.copy(good / "h.png", secret / "s.png")
    (lib / "b.png").symlink_to(secret / "s.png")
    (lib / "c.png").symlink_to(lib / "a.png")  # a link that stays inside is read as usual
    recipe = tmp_path / "r.toml"
    recipe.write_text(RECIPE.format(bake="normal", match="**/{m}.png", ext="png", params="{}"))
    for dry in ([], ["--dry-run"]):
        code, err = run_cli(["batch", recipe, *dry], capfd)
        assert_one_error(code, err, ["b.png"])
        assert "outside the source root" in err and not (tmp_path / "baked").exists()
    (lib / "b.png").unlink()
    code, err = run_cli(["batch", recipe], capfd)
    assert code == 0, err
    assert sorted(p.name for p in (tmp_path / "baked").glob("*.png")) == ["a_out.png", "c_out.png"]


# ---------------------------------------------------------------------------- unwritable folder
def _drop_file_capabilities():
    """In the child, before it runs the command: drop the capabilities that let root write anywhere
    (CAP_DAC_OVERRIDE 1, CAP_DAC_READ_SEARCH 2, CAP_FOWNER 3, linux/capability.h) from the bounding set with
    prctl(PR_CAPBSET_DROP = 24); the exec that follows then gives root only the rest, so folder permissions
    hold for it as for any user."""
    import ctypes

    libc = ctypes.CDLL(None, use_errno=True)
    for cap in (1, 2, 3):
        if libc.prctl(24, cap, 0, 0, 0) != 0:
            raise OSError(ctypes.get_errno(), "prctl(PR_CAPBSET_DROP)")


@pytest.mark.parametrize("command", WRITERS + ["env lut"])
def test_unwritable_output_folder(command, good, tmp_path):
    out = tmp_path / "out"
    out.mkdir(mode=0o555)
    if command == "env lut":
        args = ["env", "lut", "--size", "8", "-o", str(out / "lut.png")]
    else:
        role, suffix, argv = COMMANDS[command]
        args = [str(a) for a in argv(good / GOOD[role], out, good)]
    before = _digests(good)
    preexec = _drop_file_capabilities if os.getuid() == 0 else None
    r = subprocess.run([sys.executable, "-m", "bakery", *args], capture_output=True, text=True,
                       preexec_fn=preexec, timeout=120, cwd=tmp_path)
    assert_one_error(r.returncode, r.stderr, ["out"])
    assert "not writable" in r.stderr
    assert _tree(out) == []
    assert _digests(good) == before


def test_case_count():
    """The number the module docstring states (a change to the tables must update it)."""
    import re

    n = (len(FILE_CASES) + len(WRITERS) * 2 + len(SIDE_FILES) + len(BAD_OPTIONS) + 7 + len(BATCH_CASES) * 2 + 1
         + len(WRITERS) + 1 + 1)
    stated = int(re.search(r"runs (\d+) cases", __doc__).group(1))
    assert n == stated, n
