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


