"""Atomic file writes and output-path safety.

Every file bakery writes goes through :func:`atomic_output`: the data is written to a temporary file in the
target folder and renamed into place only when complete, so a crash or an error never leaves a partial file.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterable, Iterator
from pathlib import Path

from bakery.errors import BakeryError


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success rename it onto ``path``, on failure delete it.

    The temporary name keeps the final suffix so format-sniffing writers pick the right codec.
    """
    path = Path(path)
    folder = path.parent
    if not folder.is_dir():
        raise BakeryError("output folder does not exist", folder)
    _remove_stale_temporaries(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.p{os.getpid()}.", suffix=f".part{path.suffix}", dir=folder)
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        if not tmp_path.exists() or tmp_path.stat().st_size == 0:
            raise RuntimeError(f"writer produced no data for {path}")
        os.chmod(tmp_path, 0o644 & ~_umask())
        os.replace(tmp_path, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp_path.unlink()


#: A temporary file older than this (seconds) is stale even when its process id is in use again.
STALE_SECONDS = 3600


def _remove_stale_temporaries(path: Path) -> None:
    """Delete temporaries of ``path`` left by a process that was killed (``.NAME.pPID.*.partEXT`` whose process
    is gone, or older than :data:`STALE_SECONDS`), so a SIGKILL mid-write leaves nothing behind for long."""
    import re
    import time

    pattern = re.compile(rf"^\.{re.escape(path.stem)}\.p(\d+)\.[^.]+\.part{re.escape(path.suffix)}$")
    with contextlib.suppress(OSError):
        for entry in os.scandir(path.parent):
            m = pattern.match(entry.name)
            if m is None:
                continue
            with contextlib.suppress(OSError):
                pid = int(m.group(1))
                old = time.time() - entry.stat(follow_symlinks=False).st_mtime > STALE_SECONDS
                if old or (pid != os.getpid() and not _alive(pid)):
                    os.unlink(entry.path)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's process
        return True
    return True


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def check_distinct(outputs: Iterable[str | os.PathLike], inputs: Iterable[str | os.PathLike]) -> None:
    """Refuse an output path that is also an input path (same file after resolving links)."""
    resolved = {}
    for p in inputs:
        resolved[Path(p).resolve()] = p
    for out in outputs:
        r = Path(out).resolve()
        if r in resolved:
            raise BakeryError("output path is also an input; choose another output name", out)


def check_output_folder(outputs: Iterable[str | os.PathLike]) -> None:
    """Before any work: every output's folder exists and is writable, and no output is an existing folder."""
    seen: set[Path] = set()
    for out in outputs:
        out = Path(out)
        if out.is_dir():
            raise BakeryError("output path is a folder; give a file name (or end -o with / for a folder)", out)
        folder = out.parent
        if folder in seen:
            continue
        seen.add(folder)
        if not folder.is_dir():
            raise BakeryError("output folder does not exist", folder)
        if not os.access(folder, os.W_OK | os.X_OK):
            raise BakeryError("output folder is not writable (permission denied)", folder)
