"""What every command shares: error handling, warnings on stderr, progress lines, output checks.

Heavy libraries are never imported here, so ``bakery --help`` stays fast.
"""

from __future__ import annotations

import functools
import os
import sys
import time
import warnings
from collections.abc import Callable, Iterable, Iterator
from enum import StrEnum
from pathlib import Path
from typing import Any, TypeVar

import typer

from bakery.errors import BakeryError, BakeryWarning

STATE = {"debug": False, "quiet": False}


class BitsOpt(StrEnum):
    """Output sample type, the same ``--bits`` option in every command that writes images."""

    b8 = "8"
    b16 = "16"
    half = "half"
    float = "float"


#: ``--bits`` value -> the sample type name of :mod:`bakery.io.images` ("u8", "u16", "f16", "f32").
BITS_TO_DEPTH = {"8": "u8", "16": "u16", "half": "f16", "float": "f32"}


def bits_to_depth(bits: BitsOpt | None) -> str | None:
    return None if bits is None else BITS_TO_DEPTH[bits.value]
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

    return wrapper


def max_pixels_from_env() -> int | None:
    value = os.environ.get("BAKERY_MAX_PIXELS")
    if value is None:
        return None
    try:
        n = int(value)
    except ValueError:
        raise BakeryError(f"BAKERY_MAX_PIXELS must be a whole number; got {value!r}") from None
    if n <= 0:
        raise BakeryError(f"BAKERY_MAX_PIXELS must be positive; got {n}")
    return n


def progress(items: Iterable[T], total: int, label: str) -> Iterator[T]:
    """Plain progress lines on stderr (``label: i/total``) at most twice a second, and a last line.

    Plain lines work both on terminals and in CI logs; silent with ``--quiet``.
    """
    last = 0.0
    for i, item in enumerate(items, 1):
        yield item
        now = time.monotonic()
        if not STATE["quiet"] and (now - last > 0.5 or i == total):
            print(f"{label}: {i}/{total}", file=sys.stderr, flush=True)
            last = now


def output_path(path: Path, *, suffixes: tuple[str, ...] | None = None) -> Path:
    """Check an output path before any work: its folder exists and the extension is one we write."""
    if suffixes is not None and path.suffix.lower() not in suffixes:
        raise BakeryError(f"output must end in one of {', '.join(suffixes)}", path)
    if not path.parent.exists():
        raise BakeryError("output folder does not exist", path.parent)
    if path.is_dir():
        raise BakeryError("output path is a folder; give a file name", path)
    return path
