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
    _remove_stale_temporaries(folder)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.{_writer_tag()}.", suffix=f".part{path.suffix}", dir=folder)
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


#: A temporary file older than this (seconds) is stale even when its writer cannot be asked (another host) or
#: its process id is in use again.
STALE_SECONDS = 3600

_SCANNED: set[Path] = set()


def _host() -> str:
    import socket
    import zlib

    return f"{zlib.crc32(socket.gethostname().encode()) & 0xFFFFFF:06x}"


def _writer_tag() -> str:
    """``pPIDhHOST``: who writes a temporary file, so a later write can tell a dead writer's leftovers."""
    return f"p{os.getpid()}h{_host()}"


def _remove_stale_temporaries(folder: Path) -> None:
    """Delete temporaries (``.NAME.pPIDhHOST.XXXXXXXX.partEXT``) left in ``folder`` by a writer that was killed:
    one of this host whose process is gone, or any older than :data:`STALE_SECONDS`. Each process looks at a
    folder once, at its first write there, so a SIGKILL mid-write leaves nothing behind for long."""
    import re
    import time

    if folder in _SCANNED:
        return
    _SCANNED.add(folder)
    pattern = re.compile(r"^\..+\.p(\d+)h([0-9a-f]{6})\.[a-z0-9_]+\.part(\.[^./]+)?$")
    host, me = _host(), os.getpid()
    with contextlib.suppress(OSError):
        for entry in os.scandir(folder):
            m = pattern.match(entry.name)
            if m is None:
                continue
            with contextlib.suppress(OSError):
                pid = int(m.group(1))
                old = time.time() - entry.stat(follow_symlinks=False).st_mtime > STALE_SECONDS
                dead = m.group(2) == host and pid != me and not _alive(pid)
                if old or dead:
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
