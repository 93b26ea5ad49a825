"""The Dask path: a local cluster produces the same files as the local worker pool."""

from __future__ import annotations

import json

import pytest

from bakery.batch import run
from bakery.batch.execute import connect
from bakery.errors import BakeryError
from tests.batch.conftest import outputs
from tests.batch.test_graph import CHAIN

distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=50) as c:
        yield c


def test_dask_equals_local_pool(library, tmp_path, cluster):
    local = run(library, jobs=2)
    expected = outputs(tmp_path / "out")
    (tmp_path / "out").rename(tmp_path / "out-local")
    rep = run(library, cluster=cluster.scheduler_address)
    assert (rep.ran, rep.skipped, rep.failed) == (local.ran, local.skipped, 0)
    assert rep.executor.startswith("dask tcp://") and rep.workers == 2
    assert outputs(tmp_path / "out") == expected
    assert run(library, cluster=cluster.scheduler_address).ran == 0
    # Dask workers run each job single-threaded too
    library.write_text(library.read_text() + '\n[[rule]]\nname = "probe"\nbake = "test-probe"\n'
                       'output = "probe.json"\n')
    run(library, cluster=cluster.scheduler_address, only=["probe"])
    data = json.loads((tmp_path / "out" / "probe.json").read_text())
    assert (data["cv2"], data["openexr"], data["bakery"]) == (1, 1, 1)
    assert set(data["env"].values()) == {"1"}


def test_chained_rules_on_dask_equal_one_and_two_local_workers(library, tmp_path, cluster):
    """Dask futures depend on the futures of the jobs they need: the same bytes as --jobs 1 and --jobs 2; a
    failed job fails its dependents with the cause named, the other branches run."""
    library.write_text(CHAIN, encoding="utf-8")
    got = {}
    for name, kw in (("jobs1", {"jobs": 1}), ("jobs2", {"jobs": 2}), ("dask", {"cluster": cluster.scheduler_address})):
        rep = run(library, **kw)
        assert (rep.ran, rep.failed) == (15, 0)
        got[name] = outputs(tmp_path / "out")
        (tmp_path / "out").rename(tmp_path / name)
    assert got["jobs1"] == got["jobs2"] == got["dask"] and len(got["dask"]) == 30
    bad = tmp_path / "lib" / "stone" / "stone_height.png"
    bad.write_bytes(bad.read_bytes()[:200])
    rep = run(library, cluster=cluster.scheduler_address)
    failed = {j.output: j.error for j in rep.jobs if j.status == "failed"}
    assert set(failed) == {"stone/stone_inv.png", "stone/stone_mix.png", "stone/stone_inv_twice.png",
                           "stone/stone_mixed.png"} and rep.ran == 11
    assert failed["stone/stone_mixed.png"].startswith("not run: an input comes from a job that failed "
                                                      "(stone/stone_inv.png: ")


def test_unreachable_scheduler():
    with pytest.raises(BakeryError, match=r"cannot reach the Dask scheduler at 'tcp://127.0.0.1:9'"):
        connect("tcp://127.0.0.1:9", timeout=0.5)


def test_sample_library_same_bytes_with_one_two_workers_and_dask(tmp_path, cluster):
    """samples/library.toml (chained rules, real bakes): --jobs 1, --jobs 2 and a local Dask cluster write the
    same bytes; Dask workers forward their jobs' progress as events."""
    import shutil
    from pathlib import Path

    from bakery.samples import library
    from tests.batch.test_graph import _Recorder

    root = Path(__file__).resolve().parents[2]
    shutil.copy(root / "samples" / "library.toml", tmp_path / "library.toml")
    library(tmp_path / "library", size=32, sky_width=64)
    shutil.copy(root / "samples" / "library" / "stone" / "bakery-folder.toml", tmp_path / "library" / "stone")
    recipe, out = tmp_path / "library.toml", tmp_path / "library-baked"
    got = {}
    rec = _Recorder()
    for name, kw in (("jobs1", {"jobs": 1}), ("jobs2", {"jobs": 2}),
                     ("dask", {"cluster": cluster.scheduler_address, "progress": rec})):
        rep = run(recipe, **kw)
        assert rep.failed == 0 and rep.ran == len(rep.jobs) >= 40
        got[name] = outputs(out)
        out.rename(tmp_path / name)
    assert got["jobs1"] == got["jobs2"] == got["dask"]
    assert any(f == 0.0 for calls in rec.calls.values() for f, _ in calls)


def test_dask_names_the_files_of_a_chained_job_again_before_it_starts(library, tmp_path, cluster):
    """The level files follow the size of an input that an upstream job makes: named from the real input in
    the worker, like the local pool does; a file of another job is refused there too."""
    from tests.batch.test_graph import RESIZED, TAKEN

    library.write_text(RESIZED, encoding="utf-8")
    rep = run(library, cluster=cluster.scheduler_address)
    assert (rep.ran, rep.failed) == (8, 0)
    done = next(j for j in rep.jobs if j.output == "stone/stone_big_lv.png")
    assert [f for f in done.outputs if ".lv" in f] == [f"stone/stone_big_lv.lv{k}.png" for k in range(1, 6)]
    library.write_text(TAKEN, encoding="utf-8")
    (tmp_path / "out").rename(tmp_path / "out-first")  # a new output root: the plan cannot know the fifth level
    rep = run(library, cluster=cluster.scheduler_address)
    failed = {j.output: j.error for j in rep.jobs if j.status == "failed"}
    assert list(failed) == ["stone/stone_big_lv.png"]
    assert failed["stone/stone_big_lv.png"].startswith("would write stone/stone_big_lv.lv5.png, which the job for")
    assert rep.ran == 8 and not (tmp_path / "out" / "stone" / "stone_big_lv.png").exists()
