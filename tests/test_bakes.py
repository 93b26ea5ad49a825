"""The bake registry: recipe values are checked against the parameter dataclass."""

from dataclasses import dataclass
from typing import Literal

import pytest

from bakery.bakes import Bake, params_from_mapping, params_to_dict, register, run_bake
from bakery.bakes.params import Params, param
from bakery.errors import BakeryError


@dataclass(frozen=True)
class _P(Params):
    strength: float = param(1.0, "Strength.", low=0.0)
    edges: Literal["wrap", "clamp"] = param("wrap", "Edges.")
    levels: int | None = param(None, "Levels.", low=1)
    flip: bool = param(False, "Flip.")


_BAKE = register(Bake("test-params", "for tests", ("src",), _P, lambda i, o, p: [], lambda i, o, p, g: []))


def test_values_are_coerced_and_checked():
    p = params_from_mapping(_BAKE, {"strength": 2, "edges": "clamp", "levels": 3}, "r.toml: rule 'a'")
    assert p == _P(2.0, "clamp", 3, False)
    assert params_to_dict(p) == {"strength": 2.0, "edges": "clamp", "levels": 3, "flip": False}


@pytest.mark.parametrize("values,match", [
    ({"strenght": 1}, "no parameter 'strenght'; it takes: edges, flip, levels, strength"),
    ({"strength": "x"}, "strength must be a number; got 'x'"),
    ({"strength": float("nan")}, "strength must be a finite number; got nan"),
    ({"strength": -1}, "strength must be at least 0; got -1"),
    ({"edges": "mirror"}, "edges must be one of wrap, clamp; got 'mirror'"),
    ({"levels": 2.5}, "levels must be a whole number; got 2.5"),
    ({"levels": 0}, "levels must be at least 1; got 0"),
    ({"flip": 1}, "flip must be true or false; got 1"),
])
def test_bad_values_name_the_place(values, match):
    with pytest.raises(BakeryError, match=match) as info:
        params_from_mapping(_BAKE, values, "r.toml: rule 'a'")
    assert str(info.value).startswith("r.toml: rule 'a'")


def test_bake_threads_from_the_environment(monkeypatch):
    from bakery.bakes import bake_threads

    monkeypatch.delenv("BAKERY_THREADS", raising=False)
    assert bake_threads() is None
    monkeypatch.setenv("BAKERY_THREADS", "1")
    assert bake_threads() == 1
    monkeypatch.setenv("BAKERY_THREADS", "many")
    with pytest.raises(BakeryError, match="BAKERY_THREADS must be a whole number; got 'many'"):
        bake_threads()


def test_public_api_loads_lazily_and_completely():
    """Every public name resolves; importing bakery alone loads no numpy (fast CLI start, batch no-op runs)."""
    import subprocess
    import sys

    import bakery

    for name in bakery.__all__:
        assert getattr(bakery, name) is not None
    code = "import sys, bakery.cli; print('numpy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_progress_rises_to_one_and_changes_no_byte(tmp_path):
    from bakery.samples import sky_panorama

    sky = tmp_path / "sky.exr"
    from bakery.io import write_image

    write_image(sky, sky_panorama(64), bits="float")
    seen = []
    a = run_bake("env-specular", {"environment": sky}, tmp_path / "a.ktx2", None, progress=lambda f, w: seen.append(f))
    from bakery.bakes.glossy import SpecularParams

    b = run_bake("env-specular", {"environment": sky}, tmp_path / "b.ktx2", SpecularParams())
    assert seen and seen[-1] == 1.0 and all(x <= y for x, y in zip(seen, seen[1:], strict=False))
    assert len(seen) > 3  # within the work, not only at its end
    assert a[0].read_bytes() == b[0].read_bytes()


def test_progress_display_lines_off_a_terminal_and_silent_when_quiet(monkeypatch, capsys):
    import bakery.cli._common as common

    clock = iter([0.0, 1.5, 1.6, 3.0, 4.0, 5.0, 6.0])
    monkeypatch.setattr(common.time, "monotonic", lambda: next(clock))
    show = common.ProgressDisplay("normal rock.png")
    show(0.2, "strips")  # 1.5 s in: shown
    show(0.4, "strips")  # 0.1 s later: skipped
    show(1.0, "done")  # always shown once something was
    assert capsys.readouterr().err.splitlines() == ["normal rock.png: 20% strips", "normal rock.png: 100% done"]
    monkeypatch.setitem(common.STATE, "quiet", True)
    show(0.5, "strips")
    assert capsys.readouterr().err == ""




# ----------------------------------------------------------------------------------- progress within steps
# Every bake that can run long reports inside its long step (rows of strips, levels, faces, blocks), not only
# between steps. Small inputs with small strips (PNG rows, block rows) give many calls without big data; the
# test counts calls, never times (tests/perf/progress_gaps.py measures the gaps at full size).

PROGRESS_CASES = [
    # (bake, inputs, output, parameters, label of the long step, least calls with it)
    ("normal", {"height": "height"}, "n.ktx2", {"ktx2_format": "bc5"}, "encoding", 16),
    ("normal", {"height": "height"}, "n.exr", {}, "strips", 4),
    ("height", {"normal": "normal"}, "h.png", {}, "integrating", 5),
    ("height", {"normal": "normal"}, "h.tif", {"edges": "clamp"}, "integrating", 5),
    ("blend", {"base": "normal", "detail": "detail"}, "b.png", {}, "reading", 6),
    ("normal-mips", {"normal": "normal"}, "m.png", {}, "level", 6),
    ("normal-mips", {"normal": "normal"}, "m.png", {}, "writing", 20),
    ("normal-mips", {"normal": "normal"}, "m.ktx2", {"ktx2_format": "bc5"}, "encoding", 16),
    ("occlusion", {"height": "height"}, "o.png", {"bent_normals": True, "directions": 4}, "writing", 20),
    ("curvature", {"height": "height"}, "c.png", {}, "curvature", 6),
    ("mips", {"color": "color"}, "c.png", {}, "level", 6),
    ("mips", {"color": "color"}, "c.png", {}, "writing", 16),
    ("mips", {"color": "color"}, "c.ktx2", {"ktx2_format": "bc7-srgb"}, "encoding", 16),
    ("pack", {"r": "rough", "g": "height"}, "p.png", {"mips": True}, "writing", 16),
    ("pack", {"r": "rough", "g": "height"}, "p.ktx2", {"mips": True, "ktx2_format": "bc7"}, "encoding", 16),
    ("roughness", {"specular": "exponent"}, "r.ktx2", {"ktx2_format": "bc4"}, "encoding", 16),
    ("antialias", {"normal": "normal"}, "a.png", {"roughness": 0.3}, "writing", 16),
    ("antialias", {"normal": "normal"}, "a.ktx2", {"roughness": 0.3, "ktx2_format": "bc4"}, "encoding", 16),
    ("env-convert", {"environment": "sky"}, "e.ktx2", {"ktx2_format": "bc6h"}, "encoding", 8),
    ("env-convert", {"environment": "sky"}, "e.png", {"output_layout": "cross-wide"}, "writing", 8),
    ("env-diffuse", {"environment": "sky"}, "d.json", {}, "SH9 error estimate", 4),
    ("env-diffuse", {"environment": "sky"}, "d.json", {"method": "exact"}, "exact irradiance", 4),
    ("env-lights", {"environment": "sky"}, "l.json", {}, "finding lights", 5),
    ("env-specular", {"environment": "sky"}, "s.ktx2", {"face_size": 32, "ktx2_format": "bc6h", "loose": True},
     "encoding", 8),
    ("env-lut", {}, "t.png", {"size": 64}, "table", 16),
]


@pytest.fixture(scope="module")
def progress_inputs(tmp_path_factory):
    import numpy as np

    from bakery.io import write_image
    from bakery.samples import sky_panorama

    d = tmp_path_factory.mktemp("progress")
    r, c = np.mgrid[0:64, 0:64].astype(np.float32)
    h = 0.5 + 0.3 * np.sin(c / 5) * np.cos(r / 7) + 0.1 * np.sin((r + c) / 3)
    gy, gx = np.gradient(4 * h)
    n = np.stack([-gx, gy, np.ones_like(h)], axis=-1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    files = {"height": write_image(d / "h.png", h, bits="16"),
             "normal": write_image(d / "n.png", n * 0.5 + 0.5, bits="16"),
             "detail": write_image(d / "d.png", n[::-1] * 0.5 + 0.5, bits="16"),
             "rough": write_image(d / "r.png", 0.2 + 0.5 * h, bits="8"),
             "exponent": write_image(d / "e.exr", 8 + 400 * h, bits="float"),
             "color": write_image(d / "c.png", np.stack([h, 1 - h, 0.5 * h, 0.5 + 0.5 * h], -1), bits="8"),
             "sky": write_image(d / "sky.exr", sky_panorama(128), bits="half")}
    return files


@pytest.mark.parametrize(("bake", "inputs", "name", "values", "label", "least"), PROGRESS_CASES,
                         ids=[f"{c[0]}-{c[2]}-{c[4]}" for c in PROGRESS_CASES])
def test_progress_within_the_long_step_changes_no_byte(bake, inputs, name, values, label, least,
                                                       progress_inputs, tmp_path, monkeypatch):
    import warnings

    from bakery.bakes import get_bake
    from bakery.io import blockcodec, png
    from bakery.normals import from_height

    monkeypatch.setattr(png, "STRIP_BYTES", 64 * 6 * 4)  # a 64-wide 16-bit RGB level: 4 rows a strip
    monkeypatch.setattr(blockcodec, "STRIP_BLOCK_ROWS", 1)  # one block row a strip
    monkeypatch.setattr(from_height, "strip_rows", lambda cols, halo: 8)  # normals: 8 rows a strip
    files = {role: progress_inputs[key] for role, key in inputs.items()}
    params = get_bake(bake).params(**values)
    seen = []
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the inputs' own warnings (SH9 misses the sun ...) are beside the point
        a = run_bake(bake, files, tmp_path / "a" / name, params, progress=lambda f, w: seen.append((f, w)))
        b = run_bake(bake, files, tmp_path / "b" / name, params)
    fractions = [f for f, _ in seen]
    assert fractions[-1] == 1.0 and all(x <= y for x, y in zip(fractions, fractions[1:], strict=False))
    assert 0.0 <= fractions[0]
    inside = [f for f, w in seen if w.startswith(label)]
    assert len(inside) >= least, (len(inside), sorted({w for _, w in seen}))
    assert len(set(inside)) > 1  # the calls move the bar, not only repeat one value
    assert [p.name for p in a] == [p.name for p in b]
    for x, y in zip(a, b, strict=True):
        assert x.read_bytes() == y.read_bytes(), x.name
