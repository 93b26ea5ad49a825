"""Batch runs over a texture library: a recipe, an incremental plan, parallel or cluster execution, a report.

Example (a script; local workers are spawned, so guard the top level)::

    from bakery.batch import run

    if __name__ == "__main__":
        report = run("library.toml", jobs=4)
        print(report.summary())        # batch: 24 ran, 0 skipped, 0 failed in 3.0 s (local, 4 workers)
        raise SystemExit(report.exit_code)

The recipe format is described in ``docs/batch.md``. Modules: :mod:`~bakery.batch.recipe` (reading and
checking recipes), :mod:`~bakery.batch.plan` (jobs and why they run), :mod:`~bakery.batch.cache`
(incremental cache and run lock), :mod:`~bakery.batch.execute` (local processes, Dask),
:mod:`~bakery.batch.report` (progress, summary, JSON report). Heavy libraries are imported only by the
workers, so a run with nothing to do starts and ends fast.
"""

from __future__ import annotations

import contextlib
import os
import re
import time
from pathlib import Path
from typing import Any

from bakery.batch.recipe import Recipe, load_recipe
from bakery.batch.report import FAILED, PLANNED, RAN, SKIPPED, BatchReport, JobResult, now_utc
from bakery.errors import BakeryError

__all__ = ["BatchReport", "JobResult", "Recipe", "load_recipe", "run"]

#: Names of the temporary files :func:`bakery.io.atomic_output` writes (``.<stem>.<writer>.<random>.part<suffix>``).
_TEMP_NAME = re.compile(r"^\..+\.part(\.[^./]+)?$")


def default_jobs() -> int:
    """The number of cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def run(recipe: str | os.PathLike | Recipe, *, jobs: int | None = None, force: bool = False,
        only: tuple[str, ...] | list[str] = (), dry_run: bool = False, cluster: str | None = None,
        report: str | os.PathLike | None = None, progress: Any = None, inspect: bool = True,
        remove_stale: bool = False) -> BatchReport:
    """Run a batch recipe and return its report.

    Parameters
    ----------
    recipe : path-like or Recipe
        The recipe file (or one loaded with :func:`load_recipe`).
    jobs : int, optional
        Local worker processes; default: every core this process may use. Ignored with ``cluster``.
    force : bool
        Run every job, even the up-to-date ones.
    only : sequence of str
        Keep only jobs whose rule name, input or output path matches one of these (a rule name, a file name,
        or a pattern with ``*``/``**``), and the jobs that make their inputs.
    dry_run : bool
        Plan only: nothing is written (not even the cache); the report lists what would run and why.
    cluster : str, optional
        The address of a Dask distributed scheduler (``tcp://host:8786``) to run the jobs on.
    report : path-like, optional
        Where to write the JSON report; default ``<output root>/.bakery/report.json`` (a dry run writes one
        only when this is given).
    inspect : bool
        Check every image a job writes with :func:`bakery.inspect.inspect_pixels` and list the findings in the
        report (default). False skips the re-read, for speed.
    progress : object, optional
        A progress display with ``start(total, skipped, executor, workers)``, ``update(job_result)``,
        ``job_progress(job_result, fraction, label)`` (a running job's bake progress) and ``stop()``
        (:class:`bakery.batch.report.PlainProgress`, :class:`~bakery.batch.report.BarProgress`); default: silent.
    remove_stale : bool
        Delete the stale outputs: files the cache says bakery wrote (unchanged since) that no job of the recipe
        writes now, inside the output root only. Without it they are listed in the report and left in place.

    Returns
    -------
    BatchReport
        Every job with its status; ``exit_code`` is 1 when some failed, else 0.

    Raises
    ------
    BakeryError
        The recipe, a folder file or an argument is wrong, an output would leave the output root, another run
        holds the output root, or the cluster cannot be reached. Nothing has run then.
    """
    from bakery import __version__
    from bakery.batch.plan import make_plan

    t0 = time.perf_counter()
    started = now_utc()
    if jobs is not None and (isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1):
        raise BakeryError(f"jobs must be a whole number of at least 1; got {jobs!r}")
    if report is not None:  # a report that cannot be written is found before any job runs
        from bakery.io.atomic import check_output_folder

        check_output_folder([report])
    recipe = recipe if isinstance(recipe, Recipe) else load_recipe(recipe)
    only = tuple(only)
    if dry_run:
        plan = make_plan(recipe, force=force, only=only)
        rep = _report(recipe, plan, __version__, "dry run", 0, True, started)
        _stale_notes(rep, plan.stale(), [], [])
        rep.seconds = time.perf_counter() - t0
        if report is not None:
            rep.write(report)
        return rep

    client = None
    if cluster:
        from bakery.batch.execute import connect

        client = connect(cluster)
    try:
        return _run(recipe, plan_args={"force": force, "only": only}, jobs=jobs or default_jobs(), client=client,
                    cluster=cluster, report=report, progress=progress, t0=t0, started=started, version=__version__,
                    inspect=inspect, remove_stale=remove_stale)
    finally:
        if client is not None:
            client.close()


def _run(recipe: Recipe, *, plan_args: dict, jobs: int, client: Any, cluster: str | None, report: Any,
         progress: Any, t0: float, started: str, version: str, inspect: bool = True,
         remove_stale: bool = False) -> BatchReport:
    from bakery.batch.cache import STATE_DIR, Cache, run_lock
    from bakery.batch.plan import FAIL, cache_entry, make_plan, refresh_files

    made = [p for p in (recipe.output, recipe.output / STATE_DIR) if not p.exists()]
    recipe.output.mkdir(parents=True, exist_ok=True)
    with run_lock(recipe.output) as lock:
        cache = Cache.load(recipe.output)
        notes = []
        if cache.interrupted:
            removed = _remove_temp_files(recipe.output)
            notes.append("the previous run was cut off; finished jobs are kept"
                         + (f", {removed} temporary file(s) removed" if removed else ""))
        try:
            try:
                plan = make_plan(recipe, cache=cache, **plan_args)
            except BakeryError:  # nothing ran: leave no trace of this run (the folders it made, its lock)
                if made:
                    with contextlib.suppress(OSError):
                        lock.unlink()
                    for p in reversed(made):
                        with contextlib.suppress(OSError):
                            p.rmdir()
                raise
            to_run = plan.to_run
            if client is not None:
                executor, workers = f"dask {cluster}", max(1, sum(client.nthreads().values()))
            else:
                executor, workers = "local", min(jobs, len(to_run))  # 0: nothing to run, no worker started
            rep = _report(recipe, plan, version, executor, workers, False, started)
            rep.notes = notes
            results = {id(j): r for j, r in zip(plan.jobs, rep.jobs, strict=True)}
            cache.begin()
            for job in plan.jobs:
                if job.action == FAIL:
                    cache.record(job.output, None, [])
            if progress is not None:
                progress.start(len(to_run), len(plan.jobs) - len(to_run), executor, workers)
            position = {j.output: i for i, j in enumerate(to_run)}
            specs = [_spec(recipe, job, inspect, i, position) for i, job in enumerate(to_run)]

            def on_result(i: int, res: dict) -> None:
                job = to_run[i]
                jr = results[id(job)]
                jr.status = RAN if res["status"] == "ran" else FAILED
                jr.error, jr.traceback = res["error"], res["traceback"]
                jr.warnings, jr.seconds = res["warnings"], res["seconds"]
                jr.findings = res.get("findings", [])
                jr.outputs = sorted(res["written"])
                sources = [str(recipe.source / rel) for role, rel in job.inputs.items() if role not in job.upstream]
                if jr.status == RAN:
                    cache.record(job.output, cache_entry(job, res["written"], version,
                                                         jr.findings if inspect else None), sources)
                else:
                    cache.record(job.output, None, sources)
                if progress is not None:
                    progress.update(jr)

            def on_progress(i: int, fraction: float, label: str) -> None:
                if hasattr(progress, "job_progress"):
                    progress.job_progress(results[id(to_run[i])], fraction, label)

            def prepare(i: int) -> dict | None:
                job = to_run[i]
                problem = refresh_files(job, recipe, plan)
                if problem is not None:
                    from bakery.batch.execute import failed

                    return failed(problem)
                specs[i]["files"] = job.files
                return None

            try:
                if not specs:
                    pass
                elif client is not None:
                    from bakery.batch.execute import run_dask

                    run_dask(specs, client, on_result, on_progress if progress is not None else None, plan.writers)
                else:
                    from bakery.batch.execute import run_local

                    run_local(specs, workers, on_result, on_progress if progress is not None else None, prepare)
            finally:
                if progress is not None:
                    progress.stop()
            stale = plan.stale()
            removed, kept = cache.remove_stale(stale) if remove_stale else ([], [])
            _stale_notes(rep, stale, removed, kept)
            cache.save(keep_outputs=plan.all_outputs, planned=plan.writers)
        finally:
            cache.close()
    rep.seconds = time.perf_counter() - t0
    rep.write(report if report is not None else recipe.output / ".bakery" / "report.json")
    return rep


def _stale_notes(rep: BatchReport, stale: dict[str, list], removed: list[str], kept: list[str]) -> None:
    """List the stale outputs in the report (and a note): removed, or left in place and why."""
    rep.stale = [f for f in stale if f not in removed]
    rep.removed = removed
    if removed:
        rep.notes.append(f"removed {len(removed)} stale output(s) that no rule makes now, e.g. {removed[0]}")
    changed = [f for f in kept if Path(rep.output, f).exists()]
    if changed:
        rep.notes.append(f"{len(changed)} stale output(s) changed since bakery wrote them and were kept, e.g. "
                         f"{changed[0]}")
    left = [f for f in rep.stale if f not in kept]
    if left:
        rep.notes.append(f"{len(left)} output(s) from earlier runs are made by no rule now and were left in place, "
                         f"e.g. {left[0]} (--remove-stale deletes them)")


def _spec(recipe: Recipe, job: Any, inspect: bool, index: int, position: dict[str, int]) -> dict[str, Any]:
    """What a worker needs to run ``job``; ``deps``: the positions of the jobs that make its inputs and run
    too (an up-to-date upstream job's files are there already)."""
    rule = next(r for r in recipe.rules if r.name == job.rule)
    first = next(iter(job.inputs.values()), None)
    deps = sorted({position[o] for o in job.upstream.values() if o in position})
    return {"bake": job.bake, "module": job.module, "output": job.output, "out_root": str(recipe.output),
            "inputs": {role: str((recipe.output if role in job.upstream else recipe.source) / rel)
                       for role, rel in job.inputs.items()},
            "values": job.values, "where": f"{rule.where}: params" + (f" for {first}" if first else ""),
            "inspect": inspect, "index": index, "deps": deps, "files": job.files, "assumed": job.assumed,
            "first": job.shown(next(iter(job.inputs))) if job.inputs else ""}


def _report(recipe: Recipe, plan: Any, version: str, executor: str, workers: int, dry_run: bool,
            started: str) -> BatchReport:
    from bakery.batch.plan import FAIL, RUN

    rep = BatchReport(str(recipe.path), str(recipe.source), str(recipe.output), version, executor, workers,
                      dry_run, started, unselected=plan.unselected)
    for job in plan.jobs:
        if job.action == RUN:
            status = PLANNED
        elif job.action == FAIL:
            status = FAILED
        else:
            status = SKIPPED
        inputs = {role: {"path": rel, "digest": job.digests.get(role, "")} for role, rel in job.inputs.items()}
        for role, rule in job.upstream_rules.items():
            inputs[role]["made_by"] = rule
        jr = JobResult(job.rule, job.bake, inputs, job.output, job.params, status, job.reason, job.origins,
                       error=job.reason if job.action == FAIL else None, files=list(job.files),
                       after=sorted(set(job.upstream.values())))
        if status == SKIPPED and job.key:  # up to date: what inspect found when it ran still holds
            entry = plan.cache.jobs.get(job.output, {})
            jr.outputs = sorted(entry.get("outputs", {}))
            jr.findings = list(entry.get("findings") or [])
        rep.jobs.append(jr)
    return rep


def _remove_temp_files(root: Path) -> int:
    """Delete temporary files left by writers that were killed (only while holding the run lock)."""
    removed = 0
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = [d for d in dirnames if d != ".bakery"]
        for name in filenames:
            if _TEMP_NAME.match(name):
                try:
                    os.unlink(os.path.join(dirpath, name))
                    removed += 1
                except OSError:
                    pass
    return removed
