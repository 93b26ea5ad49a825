"""The incremental-build cache and the run lock, both kept in the output root's ``.bakery`` folder.

``cache.json``
    A snapshot: per source file its size, modification time and content digest (so unchanged files are not
    hashed again), and per output the key of the job that wrote it, what went into that key, and the size and
    modification time of every file the job wrote.
``journal.jsonl``
    One JSON line appended per finished job. A run killed at any moment loses at most the line being
    written (an incomplete last line is ignored), so the next run knows which jobs finished. A run that
    completes folds the journal into a new snapshot (written atomically) and empties the journal.
``lock``
    Held with an OS file lock for the whole run: a second run on the same output root is refused. The OS
    drops the lock when the process dies, so a killed run never blocks the next one.

A job is up to date when its key (a SHA-256 over the bake name, its inputs' names and content digests, the
resolved parameters and the bakery version) equals the recorded one and its recorded outputs still have the
recorded size and modification time.
"""

from __future__ import annotations

import contextlib
import json
import os
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bakery.errors import BakeryError

STATE_DIR = ".bakery"
CACHE_FORMAT = 1


def job_key(bake: str, inputs: dict[str, tuple[str, str]], params: dict[str, Any], version: str,
            encoder: str | None = None) -> str:
    """SHA-256 over what determines a job's output bytes.

    ``inputs`` maps role -> (file name, content digest): the name goes into the manifest, so it counts.
    ``encoder`` names the block encoder for jobs that write KTX2 (its version changes their bytes).
    """
    import hashlib

    data = {"bake": bake, "inputs": {r: list(v) for r, v in inputs.items()}, "params": params, "bakery": version}
    if encoder is not None:
        data["encoder"] = encoder
    text = json.dumps(data, sort_keys=True, separators=(",", ":"))
    return "sha256:" + hashlib.sha256(text.encode("utf-8")).hexdigest()


def stat_signature(path: Path) -> tuple[int, int] | None:
    """(size, mtime in ns) of a file, or None when it is missing."""
    try:
        st = path.stat()
    except OSError:
        return None
    return st.st_size, st.st_mtime_ns


@dataclass
class Cache:
    """The cache of one output root (see the module notes)."""

    root: Path
    sources: dict[str, list] = field(default_factory=dict)  # source path (as given) -> [size, mtime_ns, digest]
    jobs: dict[str, dict[str, Any]] = field(default_factory=dict)  # output rel path -> entry
    stale: dict[str, list] = field(default_factory=dict)  # file bakery wrote that no job writes now -> signature
    interrupted: bool = False  # the journal held lines: the last run did not finish
    _journal: Any = None

    @property
    def folder(self) -> Path:
        return self.root / STATE_DIR

    @classmethod
    def load(cls, root: Path) -> Cache:
        """Read the snapshot and replay the journal. A damaged snapshot means a cold cache (everything
        re-runs), never an error: the cache only ever saves work."""
        cache = cls(root)
        snap = cache.folder / "cache.json"
        try:
            data = json.loads(snap.read_text(encoding="utf-8"))
            if data.get("format") == CACHE_FORMAT:
                cache.sources = {k: v for k, v in data.get("sources", {}).items() if isinstance(v, list)}
                cache.jobs = {k: v for k, v in data.get("jobs", {}).items() if isinstance(v, dict)}
                cache.stale = {k: v for k, v in data.get("stale", {}).items() if isinstance(v, list)}
        except (OSError, ValueError, AttributeError):
            pass
        journal = cache.folder / "journal.jsonl"
        try:
            lines = journal.read_bytes().split(b"\n")
        except OSError:
            lines = []
        for line in lines:
            if not line.strip():
                continue
            cache.interrupted = True
            try:
                rec = json.loads(line)
            except ValueError:
                continue  # the line being written when the run died
            if isinstance(rec, dict):
                cache._apply(rec)
        return cache

    def _apply(self, rec: dict[str, Any]) -> None:
        out = rec.get("output")
        if not isinstance(out, str):
            return
        old = self.jobs.get(out) or {}
        if isinstance(rec.get("entry"), dict):
            self.jobs[out] = rec["entry"]
            new = rec["entry"].get("outputs", {})
        else:
            self.jobs.pop(out, None)
            new = {}
        for rel, sig in old.get("outputs", {}).items():  # files the job's earlier run wrote and this one did not
            if rel not in new and isinstance(sig, list):
                self.stale[rel] = sig
        for rel in new:
            self.stale.pop(rel, None)
        for k, v in rec.get("sources", {}).items():
            self.sources[k] = v

    def digest(self, path: Path) -> str:
        """The content digest of a source file, re-hashed only when its size or modification time changed."""
        from bakery.io.manifest import file_digest

        key = str(path)
        sig = stat_signature(path)
        if sig is None:
            raise BakeryError("file not found", path)
        known = self.sources.get(key)
        if known and len(known) == 3 and (known[0], known[1]) == sig:
            return known[2]
        try:
            d = file_digest(path)
        except OSError as exc:
            raise BakeryError(f"cannot read the file ({exc.strerror})", path) from None
        self.sources[key] = [sig[0], sig[1], d]
        return d

    # -- writing (only while the run lock is held)

    def begin(self) -> None:
        """Mark a run as started: a journal that is not empty at the next load means this run was cut off."""
        self._append({"start": os.getpid()})

    def record(self, output: str, entry: dict[str, Any] | None, sources: list[str]) -> None:
        """Append one finished job to the journal (``entry`` None: the job failed, forget its old entry)."""
        rec = {"output": output, "entry": entry,
               "sources": {s: self.sources[s] for s in sources if s in self.sources}}
        self._apply(rec)
        self._append(rec)

    def _append(self, rec: dict[str, Any]) -> None:
        if self._journal is None:
            self.folder.mkdir(parents=True, exist_ok=True)
            self._journal = open(self.folder / "journal.jsonl", "ab")  # noqa: SIM115 (closed in save)
        self._journal.write(json.dumps(rec, sort_keys=True).encode("utf-8") + b"\n")
        self._journal.flush()

    def save(self, keep_outputs: set[str] | None = None, planned: set[str] | dict | None = None) -> None:
        """Write the snapshot atomically, then empty the journal.

        ``keep_outputs``: forget the jobs of outputs not in this set (no rule makes them any more); the files
        they wrote are kept as stale (listed, removable) until they are removed or a job writes them again.
        ``planned``: every file the recipe's jobs write (those are not stale).
        """
        from bakery.io.manifest import write_json

        if self._journal is not None:
            self._journal.close()
            self._journal = None
        if keep_outputs is not None:
            for k in [k for k in self.jobs if k not in keep_outputs]:
                for rel, sig in self.jobs.pop(k).get("outputs", {}).items():
                    if isinstance(sig, list):
                        self.stale[rel] = sig
        planned = planned or ()
        self.stale = {k: v for k, v in sorted(self.stale.items())
                      if k not in planned and os.path.lexists(self.root / k)}  # forgotten once gone
        self.sources = {k: v for k, v in self.sources.items() if os.path.exists(k)}  # forget deleted sources
        self.folder.mkdir(parents=True, exist_ok=True)
        write_json(self.folder / "cache.json", {"format": CACHE_FORMAT, "sources": self.sources,
                                                "jobs": self.jobs, "stale": self.stale})
        with contextlib.suppress(FileNotFoundError):
            os.truncate(self.folder / "journal.jsonl", 0)
        self.interrupted = False

    def remove_stale(self, files: dict[str, list]) -> tuple[list[str], list[str]]:
        """Delete stale files that are still exactly what bakery wrote (same size and modification time), only
        inside the output root and never in its ``.bakery`` folder. Returns (removed, kept: changed since)."""
        removed, kept = [], []
        root = self.root.resolve()
        for rel, sig in files.items():
            path = self.root / rel
            inside = path.resolve().is_relative_to(root) and rel.split("/", 1)[0] != STATE_DIR
            now = stat_signature(path) if inside and not path.is_symlink() else None
            if now is None or list(now) != list(sig):
                kept.append(rel)
                continue
            try:
                path.unlink()
            except OSError:
                kept.append(rel)
                continue
            removed.append(rel)
            self.stale.pop(rel, None)
            for entry in self.jobs.values():
                entry.get("outputs", {}).pop(rel, None)
        return removed, kept

    def close(self) -> None:
        if self._journal is not None:
            self._journal.close()
            self._journal = None


@contextlib.contextmanager
def run_lock(root: Path) -> Iterator[Path]:
    """Hold ``<root>/.bakery/lock`` for the duration of a run; refuse when another process holds it."""
    folder = root / STATE_DIR
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "lock"
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        if not _try_lock(fd):
            try:
                os.lseek(fd, 0, os.SEEK_SET)
                holder = os.read(fd, 200).decode("utf-8", "replace").strip() or "another process"
            except OSError:
                holder = "another process"
            raise BakeryError(f"another batch run ({holder}) is writing to this output root; wait for it to "
                              "finish (the lock goes away by itself when that run ends)", root)
        os.ftruncate(fd, 0)
        os.lseek(fd, 0, os.SEEK_SET)
        host = os.uname().nodename if hasattr(os, "uname") else os.environ.get("COMPUTERNAME", "this machine")
        os.write(fd, f"pid {os.getpid()} on {host}".encode())
        try:
            yield path
        finally:
            os.ftruncate(fd, 0)
            _unlock(fd)
    finally:
        os.close(fd)


def _try_lock(fd: int) -> bool:
    try:
        import fcntl
    except ImportError:  # Windows
        import msvcrt

        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
            return True
        except OSError:
            return False
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except OSError:
        return False


def _unlock(fd: int) -> None:
    try:
        import fcntl
    except ImportError:
        import msvcrt

        with contextlib.suppress(OSError):
            msvcrt.locking(fd, msvcrt.LK_UNLCK, 1)
        return
    fcntl.flock(fd, fcntl.LOCK_UN)
