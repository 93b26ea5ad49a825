"""Progress of the ``normal`` bake within its steps: reading, strips, writing (per PNG strip), manifest.

The display's clock is replaced by one that moves 1.1 s per look, so every report is printed (the real display
prints a line at most once a second, the first after a second) and the test does not depend on the machine's
speed. Under pytest's ``capfd`` stderr is not a terminal, so the display prints plain lines.
"""

import itertools
import re

import numpy as np
import pytest

from bakery.bakes import run_bake
from bakery.bakes.normals import NORMAL_STEPS, NormalParams
from bakery.io import png as png_module
from bakery.io import write_image


@pytest.fixture
def height(tmp_path, monkeypatch):
    monkeypatch.setattr(png_module, "STRIP_BYTES", 96 * 6 * 8)  # 8 rows a strip: 12 strips
    r, c = np.mgrid[0:96, 0:96].astype(np.float32)
    return write_image(tmp_path / "h.png", 0.5 + 0.4 * np.sin(c / 7) * np.cos(r / 11), bits="16")


def run_cli(args, capfd):
    from bakery.cli import run

    capfd.readouterr()
    code = run([str(a) for a in args])
    return code, capfd.readouterr()


@pytest.fixture
def fast_clock(monkeypatch):
    import bakery.cli._common as common

    ticks = itertools.count(0.0, 1.1)
    monkeypatch.setattr(common.time, "monotonic", lambda: next(ticks))
    monkeypatch.setitem(common.STATE, "quiet", False)  # --quiet sets it for the process: restored afterwards


def test_bake_reports_within_every_step_and_ends_at_one(height, tmp_path):
    seen = []
    run_bake("normal", {"height": height}, tmp_path / "n.png", NormalParams(),
             progress=lambda f, w: seen.append((f, w)))
    fractions = [f for f, _ in seen]
    assert all(x <= y for x, y in zip(fractions, fractions[1:], strict=False)) and fractions[-1] == 1.0
    labels = [w for _, w in seen]
    assert labels[0] == "reading" and labels[-1] == "done"
    writing = [f for f, w in seen if w == "writing"]
    assert len(writing) == 13  # the step's start, then one per strip
    assert writing[0] == NORMAL_STEPS["writing"] and writing[-1] == pytest.approx(NORMAL_STEPS["manifest"])


def test_cli_prints_lines_while_writing_and_none_when_quiet(height, tmp_path, capfd, fast_clock):
    code, (out, err) = run_cli(["normal", height, "-o", tmp_path / "a.png"], capfd)
    assert code == 0, err
    lines = err.splitlines()
    writing = [int(m.group(1)) for m in (re.search(r": (\d+)% writing$", x) for x in lines) if m]
    assert len(writing) >= 10, err
    assert writing == sorted(writing) and writing[-1] == round(100 * NORMAL_STEPS["manifest"])
    assert lines[-1].endswith("100% done") and any(x.endswith("% reading") for x in lines)

    code, (out, err) = run_cli(["normal", height, "-o", tmp_path / "b.png", "--quiet"], capfd)
    assert code == 0 and err == "" and out == ""
    assert (tmp_path / "a.png").read_bytes() == (tmp_path / "b.png").read_bytes()


@pytest.mark.parametrize(("bake", "params", "strips"), [
    ("normal-fix", {"flip_y": True}, 12),
    ("blend", {}, 12),
    ("height", {}, 4),  # one 16-bit channel: 24 rows a strip
])
def test_other_normal_bakes_report_their_writes(bake, params, strips, height, tmp_path):
    """Bakes whose long step is the write report it strip by strip, rising to 1."""
    from bakery.bakes import get_bake

    normal = run_bake("normal", {"height": height}, tmp_path / "n.png", NormalParams())[0]
    inputs = {"base": normal, "detail": normal} if bake == "blend" else {"normal": normal}
    seen = []
    run_bake(bake, inputs, tmp_path / "out.png", get_bake(bake).params(**params),
             progress=lambda f, w: seen.append((f, w)))
    fractions = [f for f, _ in seen]
    assert all(x <= y for x, y in zip(fractions, fractions[1:], strict=False)) and fractions[-1] == 1.0
    assert seen[0] == (0.0, "reading")
    assert len([w for _, w in seen if w == "writing"]) == strips + 1  # the step's start, then each strip


@pytest.mark.parametrize(("bake", "reads"), [("blend", 2), ("height", 1)])
def test_bakes_check_each_normal_map_once(bake, reads, height, tmp_path, monkeypatch):
    """The reader checks unit length; the blend and the integration do not check the same arrays again."""
    from bakery.bakes import get_bake
    from bakery.normals import encode

    normal = run_bake("normal", {"height": height}, tmp_path / "n.png", NormalParams())[0]
    inputs = {"base": normal, "detail": normal} if bake == "blend" else {"normal": normal}
    calls = []
    real = encode.unit_normals
    monkeypatch.setattr(encode, "unit_normals", lambda n, **kw: calls.append(kw.get("what")) or real(n, **kw))
    from bakery.normals import blend, integrate

    monkeypatch.setattr(blend, "unit_normals", encode.unit_normals)
    monkeypatch.setattr(integrate, "unit_normals", encode.unit_normals)
    run_bake(bake, inputs, tmp_path / "out.png", get_bake(bake).params())
    assert calls == [str(normal)] * reads
