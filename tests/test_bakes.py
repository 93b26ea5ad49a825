"""The bake registry: recipe values are checked against the parameter dataclass."""

from dataclasses import dataclass
from typing import Literal

import pytest

from bakery.bakes import Bake, params_from_mapping, params_to_dict, register
from bakery.errors import BakeryError


@dataclass(frozen=True)
class _P:
    strength: float = 1.0
    edges: Literal["wrap", "clamp"] = "wrap"
    levels: int | None = None
    flip: bool = False


_BAKE = register(Bake("test-params", "for tests", ("src",), _P, lambda i, o, p: []))


def test_values_are_coerced_and_checked():
    p = params_from_mapping(_BAKE, {"strength": 2, "edges": "clamp", "levels": 3}, "r.toml: rule 'a'")
    assert p == _P(2.0, "clamp", 3, False)
    assert params_to_dict(p) == {"strength": 2.0, "edges": "clamp", "levels": 3, "flip": False}


@pytest.mark.parametrize("values,match", [
    ({"strenght": 1}, "no parameter 'strenght'; it takes: edges, flip, levels, strength"),
    ({"strength": "x"}, "parameter 'strength': expected a number"),
    ({"edges": "mirror"}, "expected one of 'wrap', 'clamp'"),
    ({"levels": 2.5}, "expected a whole number"),
    ({"flip": 1}, "expected true or false"),
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


def test_bake_progress_lines_and_where_they_are_silent(monkeypatch, capsys):
    from bakery.bakes import bake_progress
    from bakery.batch.execute import THREAD_ENV

    monkeypatch.delenv("BAKERY_PROGRESS", raising=False)
    bake_progress("level 1: working")
    assert capsys.readouterr().err == "level 1: working\n"
    monkeypatch.setenv("BAKERY_PROGRESS", "0")
    bake_progress("level 2: working")
    assert capsys.readouterr().err == ""
    assert THREAD_ENV["BAKERY_PROGRESS"] == "0"  # batch workers: the batch reports each job itself


def test_quiet_option_silences_bake_progress(monkeypatch, tmp_path):
    import os

    from typer.testing import CliRunner

    from bakery.cli import app

    monkeypatch.setenv("BAKERY_PROGRESS", "1")  # restored after the test
    r = CliRunner().invoke(app, ["--quiet", "env", "lut", "-o", str(tmp_path / "lut.png"), "--size", "8"])
    assert r.exit_code == 0, r.output
    assert os.environ["BAKERY_PROGRESS"] == "0"
