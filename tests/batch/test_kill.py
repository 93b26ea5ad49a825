"""A batch killed with SIGKILL mid-run leaves no partial output, and the next run finishes the rest, with
outputs equal to a clean run's (chained rules too)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from bakery.batch import run
from bakery.io import read_image
from tests.batch.conftest import RECIPE, outputs, write_library
from tests.batch.test_graph import CHAIN

ROOT = Path(__file__).resolve().parents[2]
MATERIALS = [f"set{i // 4}/m{i}" for i in range(12)]


def _start(recipe: Path) -> subprocess.Popen:
    code = ("import tests.batch.bakes_for_tests\n"
            "from bakery.cli import app\n"
            f"app(['batch', {str(recipe)!r}, '--jobs', '2'])\n")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, start_new_session=True)


@pytest.mark.skipif(not hasattr(os, "killpg"), reason="needs POSIX process groups")
@pytest.mark.parametrize("whole_group,text,count", [(True, RECIPE, 24), (False, RECIPE, 24), (True, CHAIN, 48),
                                                   (False, CHAIN, 48)])
def test_sigkill_mid_run(tmp_path, whole_group, text, count):
    write_library(tmp_path / "lib", MATERIALS)
    recipe = tmp_path / "r.toml"
    recipe.write_text(text.replace("gain = 0.9", "gain = 0.9\ndelay = 0.25"), encoding="utf-8")
    out = tmp_path / "out"
    proc = _start(recipe)
    deadline = time.monotonic() + 60
    while len(list(out.rglob("*_inv.png"))) < 3:
        assert proc.poll() is None and time.monotonic() < deadline, "the batch ended before it could be killed"
        time.sleep(0.02)
    # SIGKILL the run: the whole process group (machine or container dies) or the main process alone
    if whole_group:
        os.killpg(proc.pid, signal.SIGKILL)
    else:
        os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)
    time.sleep(0.5)  # workers notice that their parent died and stop
    visible = [p for p in out.rglob("*.png") if not p.name.startswith(".")]
    assert 3 <= len(visible) < count - 1
    for p in visible:  # no partial output: every output decodes
        read_image(p)
    rep = run(recipe, jobs=2)
    assert rep.failed == 0 and rep.ran + rep.skipped == count
    assert rep.skipped >= 1 and rep.ran >= 1  # jobs recorded before the kill are kept, the rest run
    assert rep.notes and rep.notes[0].startswith("the previous run was cut off")
    assert not [p for p in out.rglob(".*") if p.name != ".bakery" and ".bakery" not in p.parts]
    assert run(recipe, jobs=2).ran == 0
    clean = tmp_path / "clean.toml"
    clean.write_text(recipe.read_text().replace('output = "out"', 'output = "clean"'), encoding="utf-8")
    run(clean, jobs=2)
    assert outputs(out) == outputs(tmp_path / "clean")
