"""Running batch jobs: in local worker processes or on a Dask distributed cluster.

Every job runs through :func:`run_job` in a worker: it imports the module that registers the bake, rebuilds
the parameters from the recipe values, creates the output folder and calls :func:`bakery.bakes.run_bake`
(exactly what the command line calls), so a batch output is byte-identical to the same bake run by hand.
Errors stay inside their job: a :class:`BakeryError` becomes the job's error message, anything else an
"internal error" with its traceback in the report.

Jobs form a graph (``spec["deps"]``: the jobs that make a job's inputs). Both executors start a job only
after the jobs it depends on ran; a failed job fails the jobs downstream of it without running them (their
error names the cause) and leaves independent branches running. Local workers take ready jobs by the length
of the chain still behind them (longest first), so long chains start early and both cores stay busy.

Progress: a bake's ``progress(fraction, label)`` calls are forwarded to the batch's display as
``on_progress(index, fraction, label)``: through a queue from local workers (at most about five a second per
job, plus the start and the end), and as Dask events (``Worker.log_event``, at most about two a second per
job) from a cluster.

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
_queue: Any = None  # a local worker's progress queue (set by worker_init)
OnProgress = Callable[[int, float, str], None]


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


def worker_init(queue: Any = None) -> None:
    """Start a local worker: single-threaded, and gone as soon as the process that started it dies (a killed
    batch must not leave workers behind). ``queue`` takes the progress of its jobs."""
    import multiprocessing
    import threading
    from multiprocessing.connection import wait

    global _queue
    _queue = queue
    limit_threads()
    parent = multiprocessing.parent_process()
    if parent is not None:
        def watch() -> None:
            wait([parent.sentinel])
            os._exit(1)

        threading.Thread(target=watch, name="bakery-parent-watch", daemon=True).start()


def _sender(send: Callable[[Any], None] | None, index: int, every: float) -> Callable[[float, str], None]:
    """A bake progress callback that forwards ``(index, fraction, label)`` at most once per ``every`` seconds
    (and always the end)."""
    last = [0.0]

    def progress(fraction: float, label: str) -> None:
        now = time.monotonic()
        if send is not None and (fraction >= 1.0 or now - last[0] >= every):
            last[0] = now
            try:
                send((index, float(fraction), str(label)))
            except Exception:  # a display that went away never fails a job
                pass

    return progress


def run_job(spec: Spec, send: Callable[[Any], None] | None = None, every: float = 0.2) -> Result:
    """Run one job in a worker (see the module notes). Never raises for a failing job. ``send`` forwards
    its progress (default: the local worker's queue, if any)."""
    import importlib
    import traceback
    import warnings

    from bakery.batch.cache import stat_signature

    limit_threads()
    if send is None and _queue is not None:
        send = _queue.put
    progress = _sender(send, spec.get("index", 0), every)
    progress(0.0, "started")
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
            written = run_bake(spec["bake"], inputs, output, params, progress)
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


def failed(message: str, cause: str | None = None) -> Result:
    """The result of a job that did not run; ``cause``: the root failure upstream, when that is the reason."""
    return {"status": "failed", "error": message, "traceback": None, "warnings": [], "written": {},
            "findings": [], "seconds": None, "cause": cause}


def downstream_failure(spec: Spec, res: Result) -> Result:
    """The result of a job not run because the job ``spec`` (one it needs) failed with ``res``."""
    cause = res.get("cause") or f"{spec['output']}: {res['error']}"
    return failed(f"not run: an input comes from a job that failed ({cause})", cause)


def _graph(specs: list[Spec]) -> tuple[list[list[int]], list[int]]:
    """Children of each job and the length of the longest chain from each job to the end (specs are in graph
    order: every job after the jobs it depends on)."""
    children: list[list[int]] = [[] for _ in specs]
    for i, spec in enumerate(specs):
        for d in spec.get("deps", ()):
            children[d].append(i)
    height = [1] * len(specs)
    for i in range(len(specs) - 1, -1, -1):
        height[i] = 1 + max((height[c] for c in children[i]), default=0)
    return children, height


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


def run_local(specs: list[Spec], workers: int, on_result: OnResult, on_progress: OnProgress | None = None,
              prepare: Callable[[int], Result | None] | None = None) -> None:
    """Run ``specs`` in ``workers`` spawned processes, at most one job per worker at a time, each job after the
    jobs it depends on (see the module notes). ``prepare(i)`` runs just before job ``i`` is started and may
    return a failed result instead.

    A worker that dies (a crash, the out-of-memory killer) fails the jobs running at that moment; the pool is
    restarted for the rest.
    """
    import heapq
    import multiprocessing
    import queue as queues
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    ctx = multiprocessing.get_context("spawn")
    children, height = _graph(specs)
    waiting = [len(set(s.get("deps", ()))) for s in specs]
    ready = [(-height[i], i) for i in range(len(specs)) if not waiting[i]]
    heapq.heapify(ready)
    finished: set[int] = set()
    progress_queue = ctx.Queue() if on_progress is not None else None

    def finish(i: int, res: Result) -> None:
        if i in finished:
            return
        finished.add(i)
        on_result(i, res)
        for c in children[i]:
            if res["status"] == "failed":
                finish(c, downstream_failure(specs[i], res))
            else:
                waiting[c] -= 1
                if not waiting[c]:
                    heapq.heappush(ready, (-height[c], c))

    def drain() -> None:
        while progress_queue is not None:
            try:
                i, fraction, label = progress_queue.get_nowait()
            except (queues.Empty, OSError, ValueError):
                return
            if i not in finished:
                on_progress(i, fraction, label)

    with thread_env():
        while len(finished) < len(specs):
            pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=worker_init,
                                       initargs=(progress_queue,))
            in_flight: dict[Any, int] = {}
            broken = False
            try:
                while ready or in_flight:
                    while ready and len(in_flight) < workers and not broken:
                        _, i = heapq.heappop(ready)
                        if i in finished:
                            continue
                        res = prepare(i) if prepare is not None else None
                        if res is not None:
                            finish(i, res)
                            continue
                        try:
                            in_flight[pool.submit(run_job, specs[i])] = i
                        except BrokenProcessPool:
                            heapq.heappush(ready, (-height[i], i))
                            broken = True
                    if not in_flight:
                        break
                    done, _ = wait(in_flight, timeout=0.25, return_when=FIRST_COMPLETED)
                    drain()
                    for fut in done:
                        i = in_flight.pop(fut)
                        try:
                            res = fut.result()
                        except BrokenProcessPool:
                            broken = True
                            res = failed("a worker process died (crash or out of memory) while this job ran")
                        finish(i, res)
                    if broken and not in_flight:
                        break
            finally:
                pool.shutdown(wait=True, cancel_futures=True)
            drain()
            if not broken:
                break
        for i in range(len(specs)):  # not reachable from the ready set: cannot happen for a valid graph
            if i not in finished:
                finish(i, failed("not run: the jobs it depends on did not finish"))


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


def run_after(spec: Spec, topic: str, writers: dict[str, str], *upstream: Result) -> Result:
    """A Dask task: run ``spec`` once the jobs it needs returned ``upstream`` (it does not run when one failed)
    and send its progress as events on ``topic``. A job whose files were named from a stand-in input is
    named again from its real inputs first, and fails when it would write a file of another job
    (``writers``: every planned file -> its job's output)."""
    for dep, res in zip(spec.get("deps", ()), upstream, strict=True):
        if res["status"] == "failed":
            return downstream_failure({"output": spec["dep_outputs"][dep]}, res)
    if spec.get("assumed"):
        problem = files_again(spec, writers)
        if problem is not None:
            return failed(problem)

    def send(msg: Any) -> None:
        from distributed import get_worker

        get_worker().log_event(topic, list(msg))

    return run_job(spec, send, every=0.5)


def files_again(spec: Spec, writers: dict[str, str]) -> str | None:
    """Name the files of ``spec`` again from its real inputs (in the worker, once its upstream jobs ran); the
    refusal when one of them belongs to another job, else None."""
    import importlib

    from bakery.bakes import get_bake, params_from_mapping
    from bakery.batch.plan import declared_files, taken_by_another

    try:
        importlib.import_module(spec["module"])
        params = params_from_mapping(get_bake(spec["bake"]), spec["values"], spec["where"])
        inputs = {role: Path(p) for role, p in spec["inputs"].items()}
        files = declared_files(spec["bake"], inputs, Path(spec["out_root"]), spec["output"], params)
    except BakeryError as exc:
        return str(exc)
    return taken_by_another(files, spec["output"], writers, spec["first"])


def run_dask(specs: list[Spec], client: Any, on_result: OnResult, on_progress: OnProgress | None = None,
             writers: dict[str, str] | None = None) -> None:
    """Run ``specs`` on a Dask cluster: every job is submitted at once, a job's future depending on the
    futures of the jobs it needs, so the scheduler starts it when they are done (see the module notes).
    ``writers`` (every planned file -> its job's output) goes to every worker once, for the jobs whose
    files are named again when they start.

    Workers need bakery (and any module that registers a bake the recipe uses) installed, and must see the
    source and output roots at the same paths; they write the outputs themselves, atomically.
    """
    import queue as queues

    from distributed import as_completed

    children, _ = _graph(specs)
    token = os.urandom(4).hex()
    topic = f"bakery-progress-{token}"
    events: queues.SimpleQueue = queues.SimpleQueue()
    if on_progress is not None:
        client.subscribe_topic(topic, lambda event: events.put(event[1]))
    # (a dict given to scatter is scattered value by value: wrap it in a list to send it whole)
    shared = client.scatter([writers or {}], broadcast=True)[0] if any(s.get("assumed") for s in specs) else {}
    futures: dict[int, Any] = {}
    index: dict[str, int] = {}
    finished: set[int] = set()
    for i, spec in enumerate(specs):
        deps = list(spec.get("deps", ()))
        spec = {**spec, "dep_outputs": {d: specs[d]["output"] for d in deps}}
        fut = client.submit(run_after, spec, topic, shared, *[futures[d] for d in deps], pure=False,
                            key=f"bakery-job-{i}-{token}")
        futures[i] = fut
        index[fut.key] = i

    def finish(i: int, res: Result) -> None:
        if i in finished:
            return
        finished.add(i)
        on_result(i, res)
        if res["status"] == "failed":
            for c in children[i]:
                futures[c].cancel()
                finish(c, downstream_failure(specs[i], res))

    def drain() -> None:
        while True:
            try:
                i, fraction, label = events.get_nowait()
            except queues.Empty:
                return
            if i not in finished and on_progress is not None:
                on_progress(i, fraction, label)

    queue = as_completed(list(futures.values()), loop=client.loop)
    try:
        while not queue.is_empty():
            done = queue.next_batch(block=False) if queue.has_ready() else []
            if not done:
                time.sleep(0.1)
            drain()
            for fut in done:
                i = index[fut.key]
                if i in finished:
                    continue
                try:
                    res = fut.result()
                except Exception as exc:  # KilledWorker, lost connections: the job failed, the batch goes on
                    res = failed(f"the Dask cluster could not run this job ({type(exc).__name__}: {exc})")
                finish(i, res)
        drain()
    finally:
        if on_progress is not None:
            with contextlib.suppress(Exception):
                client.unsubscribe_topic(topic)
        for fut in futures.values():
            fut.release()
