"""The Dask path: a local cluster produces the same files as the local worker pool."""

from __future__ import annotations

import json

import pytest

from bakery.batch import run
from bakery.batch.execute import connect
from bakery.errors import BakeryError
from tests.batch.conftest import outputs

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


def test_unreachable_scheduler():
    with pytest.raises(BakeryError, match=r"cannot reach the Dask scheduler at 'tcp://127.0.0.1:9'"):
        connect("tcp://127.0.0.1:9", timeout=0.5)
