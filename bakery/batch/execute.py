"""Running batch jobs: in local worker processes or on a Dask distributed cluster.

Every job runs through :func:`run_job` in a worker: it imports the module that registers the bake, rebuilds
the parameters from the recipe values, creates the output folder and calls :func:`bakery.bakes.run_bake`
(exactly what the command line calls), so a batch output is byte-identical to the same bake run by hand.
Errors stay inside their job: a :class:`BakeryError` becomes the job's error message, anything else an
"internal error" with its traceback in the report.

Each worker runs single-threaded (OpenCV, OpenEXR, BLAS/OpenMP, numba), so N workers use N cores without
oversubscribing them. Local workers are started with the ``spawn`` method: a script that calls
:func:`bakery.batch.run` must guard its top level with ``if __name__ == "__main__":``.
"""

from __future__ import annotations

import contextlib
import os
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from bakery.errors import BakeryError

#: Environment for single-threaded workers (read by the libraries when they load).
THREAD_ENV = {
    "OMP_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "BLIS_NUM_THREADS": "1",
    "VECLIB_MAXIMUM_THREADS": "1",
    "NUMEXPR_NUM_THREADS": "1",
    "NUMBA_NUM_THREADS": "1",
    "OPENCV_FOR_THREADS_NUM": "1",
    "BAKERY_THREADS": "1",  # for bakes that start their own thread pools (see DEVELOPERS.md)
}

Spec = dict[str, Any]
Result = dict[str, Any]
OnResult = Callable[[int, Result], None]

_limited = False


def limit_threads() -> None:
    """Make the current (worker) process single-threaded; idempotent."""
    global _limited
    if _limited:
        return
    os.environ.update(THREAD_ENV)  # for libraries loaded later in this process
    import cv2

    cv2.setNumThreads(1)
    import OpenEXR

    if hasattr(OpenEXR, "set_global_thread_count"):
        OpenEXR.set_global_thread_count(1)
    if "numba" in sys.modules:
        sys.modules["numba"].set_num_threads(1)
    _limited = True


def worker_init() -> None:
    """Start a local worker: single-threaded, and gone as soon as the process that started it dies (a killed
    batch must not leave workers behind)."""
    import multiprocessing
    import threading
    from multiprocessing.connection import wait

    limit_threads()
    parent = multiprocessing.parent_process()
    if parent is not None:
        def watch() -> None:
            wait([parent.sentinel])
            os._exit(1)

        threading.Thread(target=watch, name="bakery-parent-watch", daemon=True).start()


def run_job(spec: Spec) -> Result:
    """Run one job in a worker (see the module notes). Never raises for a failing job."""
    import importlib
    import traceback
    import warnings

    from bakery.batch.cache import stat_signature

    limit_threads()
    t0 = time.perf_counter()
    result: Result = {"status": "ran", "error": None, "traceback": None, "warnings": [], "written": {},
                      "findings": []}
    out_root = Path(spec["out_root"])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            importlib.import_module(spec["module"])
            from bakery.bakes import get_bake, params_from_mapping, run_bake

            params = params_from_mapping(get_bake(spec["bake"]), spec["values"], spec["where"])
            output = out_root / spec["output"]
            output.parent.mkdir(parents=True, exist_ok=True)
            inputs = {role: Path(p) for role, p in spec["inputs"].items()}
            written = run_bake(spec["bake"], inputs, output, params)
            for p in written:
                p = Path(p)
                try:
                    rel = p.resolve().relative_to(out_root.resolve()).as_posix()
                except ValueError:
                    warnings.warn(f"bake wrote {p} outside the output root; not tracked", stacklevel=1)
                    continue
                sig = stat_signature(p)
                if sig is not None:
                    result["written"][rel] = list(sig)
            if spec.get("inspect", True):
                result["findings"] = inspect_outputs(out_root, sorted(result["written"]))
        except BakeryError as exc:
            result.update(status="failed", error=str(exc))
        except Exception as exc:  # one broken job must not stop the batch; the report keeps the traceback
            result.update(status="failed", error=f"internal error: {type(exc).__name__}: {exc}",
                          traceback=traceback.format_exc())
    result["warnings"] = [" ".join(str(w.message).split()) for w in caught]
    result["seconds"] = time.perf_counter() - t0
    return result


def failed(message: str) -> Result:
    return {"status": "failed", "error": message, "traceback": None, "warnings": [], "written": {},
            "findings": [], "seconds": None}


#: Outputs that ``bakery inspect`` reads (images and KTX2 containers; JSON files are not inspected).
INSPECTED_SUFFIXES = (".png", ".tif", ".tiff", ".exr", ".hdr", ".ktx2")


def inspect_outputs(out_root: Path, written: list[str]) -> list[dict]:
    """The findings of ``bakery inspect`` for each image and KTX2 file a job wrote, for the report: kinds and
    conventions come from the manifests the job wrote beside them (:func:`bakery.inspect_files.inspect_paths`)."""
    from bakery.inspect_files import inspect_paths

    rels = [rel for rel in written if Path(rel).suffix.lower() in INSPECTED_SUFFIXES]
    reports = inspect_paths([out_root / rel for rel in rels], names=rels)
    return [{"file": rep.file, "kind": rep.kind, **f.as_dict()} for rep in reports for f in rep.findings]


@contextlib.contextmanager
def thread_env() -> Iterator[None]:
    """Set :data:`THREAD_ENV` while worker processes start (they inherit it), then restore the old values."""
    old = {k: os.environ.get(k) for k in THREAD_ENV}
    os.environ.update(THREAD_ENV)
    try:
        yield
    finally:
        for k, v in old.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def run_local(specs: list[Spec], workers: int, on_result: OnResult) -> None:
    """Run ``specs`` in ``workers`` spawned processes, at most one job per worker at a time.

    A worker that dies (a crash, the out-of-memory killer) fails the jobs running at that moment; the pool is
    restarted for the rest.
    """
    import multiprocessing
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    ctx = multiprocessing.get_context("spawn")
    todo = list(enumerate(specs))[::-1]
    with thread_env():
        while todo:
            pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=worker_init)
            in_flight: dict[Any, int] = {}
            broken = False
            try:
                while todo or in_flight:
                    while todo and len(in_flight) < workers and not broken:
                        i, spec = todo.pop()
                        try:
                            in_flight[pool.submit(run_job, spec)] = i
                        except BrokenProcessPool:
                            todo.append((i, spec))
                            broken = True
                    if not in_flight:
                        break
                    done, _ = wait(in_flight, return_when=FIRST_COMPLETED)
                    for fut in done:
                        i = in_flight.pop(fut)
                        try:
                            res = fut.result()
                        except BrokenProcessPool:
                            broken = True
                            res = failed("a worker process died (crash or out of memory) while this job ran")
                        on_result(i, res)
                    if broken and not in_flight:
                        break
            finally:
                pool.shutdown(wait=True, cancel_futures=True)


def connect(address: str, *, timeout: float = 10.0) -> Any:
    """A Dask client for ``address``; a clear error when Dask is missing or the scheduler cannot be reached."""
    try:
        from distributed import Client
    except ImportError:
        raise BakeryError("--cluster needs Dask: pip install 'bakery[cluster]'") from None
    try:
        return Client(address, timeout=f"{timeout}s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise BakeryError(f"cannot reach the Dask scheduler at {address!r} ({exc})") from None


def run_dask(specs: list[Spec], client: Any, on_result: OnResult) -> None:
    """Run ``specs`` on a Dask cluster, keeping about two jobs per worker thread queued.

    Workers need bakery (and any module that registers a bake the recipe uses) installed, and must see the
    source and output roots at the same paths; they write the outputs themselves, atomically.
    """
    from distributed import as_completed

    window = max(1, sum(client.nthreads().values())) * 2
    todo = list(enumerate(specs))[::-1]
    index: dict[str, int] = {}

    def submit(i: int, spec: Spec) -> Any:
        fut = client.submit(run_job, spec, pure=False, key=f"bakery-job-{i}-{os.urandom(4).hex()}")
        index[fut.key] = i
        return fut

    first = [submit(*todo.pop()) for _ in range(min(window, len(todo)))]
    queue = as_completed(first, loop=client.loop)
    for fut in queue:
        i = index.pop(fut.key)
        try:
            res = fut.result()
        except Exception as exc:  # KilledWorker, lost connections: the job failed, the batch goes on
            res = failed(f"the Dask cluster could not run this job ({type(exc).__name__}: {exc})")
        fut.release()
        on_result(i, res)
        if todo:
            queue.add(submit(*todo.pop()))
