"""What a batch tells its user: the plan, progress while it runs, a summary and a JSON report.

The JSON report holds every job: inputs with their content digests, outputs, parameters, status and why,
timings, warnings and error messages. Timings live here only, never in the per-output manifests, so outputs
stay byte-identical from run to run.
"""

from __future__ import annotations

import sys
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, TextIO

RAN, SKIPPED, FAILED, PLANNED = "ran", "skipped", "failed", "planned"


@dataclass
class JobResult:
    """One job in the report.

    ``status`` is ``"ran"``, ``"skipped"``, ``"failed"``, or ``"planned"`` (a dry run's job that would run).
    ``reason`` says why it ran or was skipped; ``error`` is the one-line message of a failed job. An input
    another job makes has ``made_by`` (that job's rule) and the digest ``job:<its key>``; ``after`` lists the
    outputs of the jobs it needs, ``files`` every file it writes (planned), ``outputs`` the files written (for
    a skipped job: those written when it ran). ``findings`` of a skipped job are those of its last run.
    """

    rule: str
    bake: str
    inputs: dict[str, dict[str, str]]
    output: str
    params: dict[str, Any]
    status: str
    reason: str
    origins: dict[str, str] = field(default_factory=dict)
    outputs: list[str] = field(default_factory=list)
    seconds: float | None = None
    warnings: list[str] = field(default_factory=list)
    findings: list[dict[str, str]] = field(default_factory=list)
    error: str | None = None
    traceback: str | None = None
    files: list[str] = field(default_factory=list)
    after: list[str] = field(default_factory=list)


@dataclass
class BatchReport:
    """The outcome of :func:`bakery.batch.run`.

    ``stale``: files bakery wrote earlier that no job of the recipe writes now (left in place); ``removed``:
    those deleted by ``remove_stale``.

    ``exit_code`` is 0 when every job ran or was skipped and 1 when some failed (a wrong recipe or command
    line raises :class:`~bakery.errors.BakeryError` instead: exit code 2).
    """

    recipe: str
    source: str
    output: str
    bakery: str
    executor: str
    workers: int
    dry_run: bool
    started: str
    seconds: float = 0.0
    jobs: list[JobResult] = field(default_factory=list)
    unselected: int = 0
    notes: list[str] = field(default_factory=list)
    stale: list[str] = field(default_factory=list)
    removed: list[str] = field(default_factory=list)
    path: Path | None = field(default=None, compare=False)

    def count(self, status: str) -> int:
        return sum(1 for j in self.jobs if j.status == status)

    @property
    def ran(self) -> int:
        return self.count(RAN)

    @property
    def skipped(self) -> int:
        return self.count(SKIPPED)

    @property
    def failed(self) -> int:
        return self.count(FAILED)

    @property
    def planned(self) -> int:
        return self.count(PLANNED)

    @property
    def exit_code(self) -> int:
        return 1 if self.failed else 0

    def summary(self) -> str:
        """One line: counts and time."""
        if self.dry_run:
            text = (f"plan: {self.planned} to run, {self.skipped} skipped, {self.failed} failing "
                    f"({len(self.jobs)} jobs)")
        else:
            text = f"batch: {self.ran} ran, {self.skipped} skipped, {self.failed} failed in {self.seconds:.1f} s"
            if self.workers:
                text += f" ({self.executor}, {self.workers} worker{'s' * (self.workers != 1)})"
        if self.unselected:
            text += f"; {self.unselected} not selected by --only"
        flagged = sum(1 for j in self.jobs for f in j.findings if f["severity"] != "info")
        if flagged:
            text += f"; bakery inspect flagged {flagged} finding(s) in the outputs (see the report)"
        return text

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d.pop("path")
        d["counts"] = {"ran": self.ran, "skipped": self.skipped, "failed": self.failed, "planned": self.planned}
        return d

    def write(self, path: str | Path) -> Path:
        """Write the JSON report atomically."""
        from bakery.io.manifest import write_json

        self.path = write_json(path, self.to_dict())
        return self.path


def shown_input(v: dict[str, str]) -> str:
    """A source as its path; a file another job makes as ``@RULE/path`` (the recipe's syntax)."""
    return f"@{v['made_by']}/{v['path']}" if v.get("made_by") else v["path"]


def job_line(job: JobResult) -> str:
    """``rule: a.png -> b.png`` (roles named when a job has several inputs)."""
    if not job.inputs:
        src = "(no input)"
    elif len(job.inputs) == 1:
        src = shown_input(next(iter(job.inputs.values())))
    else:
        src = " + ".join(f"{role}={shown_input(v)}" for role, v in job.inputs.items())
    return f"{job.rule}: {src} -> {job.output}"


def format_plan(report: BatchReport) -> list[str]:
    """The dry-run listing, in graph order: per job what it reads (``@RULE/path`` for another job's file) and
    writes, why it runs, its explicit parameters, the jobs it waits for and every file it writes."""
    word = {PLANNED: "run ", SKIPPED: "skip", FAILED: "FAIL"}
    lines = []
    for job in report.jobs:
        lines.append(f"{word[job.status]}  {job_line(job)}  ({job.error or job.reason})")
        if job.origins:
            shown = ", ".join(f"{k.replace('_', '-')}={job.params.get(k)!r} ({o})" for k, o in job.origins.items())
        else:
            shown = "bake defaults"
        lines.append(f"      params: {shown}")
        if job.after:
            lines.append(f"      after: {', '.join(job.after)}")
        extra = [f for f in job.files if f != job.output]
        if extra:
            lines.append(f"      also writes: {', '.join(extra)}")
    if report.stale:
        lines.append(f"stale: {len(report.stale)} file(s) from earlier runs that no job writes now: "
                     + ", ".join(report.stale[:5]) + (" ..." if len(report.stale) > 5 else ""))
    lines.extend(n for n in report.notes if not n.startswith(f"{len(report.stale)} output(s) from earlier"))
    lines.append(report.summary())
    return lines


class PlainProgress:
    """Progress as plain lines (for logs and pipes): one line per finished job, and for a job running longer
    than a second its bake's progress (``[3/48] 40 % normals: a.png -> b.png (strips)``), at most one such line
    a second."""

    #: Seconds a job runs before its progress is printed, and between two progress lines.
    EVERY = 1.0

    def __init__(self, stream: TextIO | None = None, *, quiet: bool = False):
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.total = 0
        self.done = 0
        self.started: dict[str, float] = {}
        self.last_line = 0.0

    def job_progress(self, job: JobResult, fraction: float, label: str) -> None:
        """A running job's bake progress (``fraction`` rising to 1, ``label`` a few words)."""
        now = time.monotonic()
        t0 = self.started.setdefault(job.output, now)
        if self.quiet or fraction >= 1.0 or now - t0 < self.EVERY or now - self.last_line < self.EVERY:
            return
        self.last_line = now
        self._print(f"[{self.done + 1}/{self.total}] {100 * fraction:3.0f} % {job_line(job)} ({label})")

    def start(self, total: int, skipped: int, executor: str, workers: int) -> None:
        self.total = total
        if not self.quiet:
            self._print(start_line(total, skipped, executor, workers))

    def update(self, job: JobResult) -> None:
        self.done += 1
        self.started.pop(job.output, None)
        if job.status == FAILED:
            self._print(f"[{self.done}/{self.total}] FAILED {job_line(job)}: {job.error}")
        elif not self.quiet:
            t = f" ({job.seconds:.1f} s)" if job.seconds is not None else ""
            self._print(f"[{self.done}/{self.total}] {job.status} {job_line(job)}{t}")
        for w in job.warnings:
            self._print(f"warning: {job.output}: {w}")

    def stop(self) -> None:
        pass

    def _print(self, text: str) -> None:
        print(text, file=self.stream, flush=True)


class BarProgress(PlainProgress):
    """A progress bar on a terminal (rich): the batch's, and one per running job with its bake's progress;
    failures and warnings are printed above them."""

    def start(self, total: int, skipped: int, executor: str, workers: int) -> None:
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

        self.total = total
        self.failures = 0
        self.console = Console(file=self.stream)
        self.bar = Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                            TextColumn("{task.fields[info]}"),
                            TimeRemainingColumn(), console=self.console, transient=True)
        self.task = self.bar.add_task("batch", total=total, info="")
        self.running: dict[str, Any] = {}
        self.console.print(start_line(total, skipped, executor, workers), markup=False, highlight=False)
        self.bar.start()

    def job_progress(self, job: JobResult, fraction: float, label: str) -> None:
        task = self.running.get(job.output)
        if task is None:
            line = job_line(job)
            name = "  " + (line if len(line) < 60 else "..." + line[-57:])
            task = self.running[job.output] = self.bar.add_task(name, total=100, info="")
        self.bar.update(task, completed=round(100 * min(max(fraction, 0.0), 1.0)), info=label)

    def update(self, job: JobResult) -> None:
        self.done += 1
        task = self.running.pop(job.output, None)
        if task is not None:
            self.bar.remove_task(task)
        if job.status == FAILED:
            self.failures += 1
            self.console.print(f"FAILED {job_line(job)}: {job.error}", markup=False, highlight=False)
        for w in job.warnings:
            self.console.print(f"warning: {job.output}: {w}", markup=False, highlight=False)
        info = f"{self.failures} failed" if self.failures else ""
        self.bar.update(self.task, advance=1, info=info)

    def stop(self) -> None:
        self.bar.stop()


def start_line(total: int, skipped: int, executor: str, workers: int) -> str:
    if not total:
        return f"batch: nothing to run, {skipped} job(s) up to date"
    return (f"batch: {total} job(s) to run, {skipped} up to date ({executor}, {workers} "
            f"worker{'s' * (workers != 1)})")


def now_utc() -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
