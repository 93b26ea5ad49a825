"""What every command shares: error handling, warnings on stderr, progress lines, output checks.

Heavy libraries are never imported here, so ``bakery --help`` stays fast.
"""

from __future__ import annotations

import functools
import sys
import time
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import typer

from bakery.errors import BakeryError, BakeryWarning

STATE = {"debug": False, "quiet": False}


T = TypeVar("T")


def echo(message: str = "") -> None:
    """A line of normal output on stdout (suppressed by ``--quiet``)."""
    if not STATE["quiet"]:
        typer.echo(message)


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    if issubclass(category, BakeryWarning):
        typer.echo(f"warning: {' '.join(str(message).split())}", err=True)
    else:  # library warnings keep their usual form
        typer.echo(warnings.formatwarning(message, category, filename, lineno, line).rstrip(), err=True)


def command(fn: Callable[..., T]) -> Callable[..., T]:
    """Wrap a command body: BakeryError -> one line on stderr and exit code 2; BakeryWarning -> one
    ``warning: ...`` line on stderr as it happens. ``--debug`` shows the traceback instead."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> T:
        with warnings.catch_warnings():
            warnings.simplefilter("always", BakeryWarning)
            warnings.showwarning = _show_warning
            try:
                return fn(*args, **kwargs)
            except BakeryError as exc:
                if STATE["debug"]:
                    raise
                typer.echo(f"error: {exc}", err=True)
                raise typer.Exit(2) from None
            except OSError as exc:  # full disk, permissions changed during the work, a vanished folder
                if STATE["debug"]:
                    raise
                typer.echo(f"error: {os_error_line(exc)}", err=True)
                raise typer.Exit(2) from None
            except MemoryError:
                if STATE["debug"]:
                    raise
                typer.echo("error: out of memory; try a smaller image, size or face-size", err=True)
                raise typer.Exit(2) from None
            except KeyboardInterrupt:
                if STATE["debug"]:
                    raise
                typer.echo("error: interrupted; no output was left half-written", err=True)
                raise typer.Exit(130) from None

    return wrapper


def os_error_line(exc: OSError) -> str:
    """An operating-system error as one line that names the file: ``PATH: No space left on device``."""
    what = exc.strerror or " ".join(str(exc).split()) or type(exc).__name__
    return f"{exc.filename}: {what}" if exc.filename else what


class ProgressDisplay:
    """The progress display of one command: a bar that redraws itself on a terminal, plain lines otherwise
    (at most one a second, the first after a second, so quick bakes stay silent)."""

    def __init__(self, label: str):
        self.label = label
        self.start = time.monotonic()
        self.last = 0.0
        self.shown = False
        self.tty = sys.stderr.isatty()

    def __call__(self, fraction: float, what: str) -> None:
        if STATE["quiet"]:
            return
        now = time.monotonic()
        done = fraction >= 1.0
        if now - self.start < 1.0 or (now - self.last < (0.2 if self.tty else 1.0) and not done):
            return
        if done and not self.shown:
            return
        self.last = now
        self.shown = True
        pct = max(0.0, min(1.0, fraction)) * 100
        if self.tty:
            bar = "#" * int(pct / 5)
            sys.stderr.write(f"\r{self.label} [{bar:<20}] {pct:3.0f}% {what[:40]:<40}" + ("\n" if done else ""))
            sys.stderr.flush()
        else:
            print(f"{self.label}: {pct:.0f}% {what}", file=sys.stderr, flush=True)


def progress_lines(label: str) -> ProgressDisplay:
    """A ``progress(fraction, label)`` callback for long work (silent under ``--quiet``)."""
    return ProgressDisplay(label)


def output_path(path: Path, *, suffixes: tuple[str, ...] | None = None) -> Path:
    """Check an output path before any work: its folder exists and is writable, and the extension is one we
    write."""
    if suffixes is not None and path.suffix.lower() not in suffixes:
        raise BakeryError(f"output must end in one of {', '.join(suffixes)}", path)
    if not path.parent.exists():
        raise BakeryError("output folder does not exist", path.parent)
    if path.is_dir():
        raise BakeryError("output path is a folder; give a file name", path)
    from bakery.io.atomic import check_output_folder

    check_output_folder([path])  # writable
    return path
