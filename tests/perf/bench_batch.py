"""Benchmark: a batch of 48 normal-map jobs of 1024² on this machine, and a no-change re-run.

    python tests/perf/bench_batch.py [--bake normal] [--size 1024] [--count 48]
    python tests/perf/bench_batch.py --chained 24 [--size 1024]

Prints, each from runs of the ``bakery batch`` command in this same session:
- the speed-up of ``--jobs 2`` over ``--jobs 1`` (target: at least 1.7 on 2 cores), beside its floor: the
  throughput gain of two processes over one on plain work of the same kind (decode a 16-bit PNG of the same
  size, encode it as 16-bit RGB; no bakery code), which shows how much of a second core the machine gives now
  (target: the speed-up at least 0.95 of the floor),
- the no-change re-run by the command beside ``bakery --version`` (Python start-up and the command line),
  alternated in 7 rounds (target: within 0.1 s),
- the time of a no-change re-run as a fraction of the full run (target: under 5 %), by the command (with
  Python start-up) beside its floor, the same command on a recipe whose rule matches no file (start-up,
  command line, recipe, cache; no job), and by the ``bakery.batch.run`` call alone (as a build script sees it).
``--chained N`` runs instead a chained recipe over N heights (height -> normal map -> normal-map mip chain
as BC5 KTX2, and height -> occlusion beside it) with ``--jobs 1`` and ``--jobs 2`` and prints the speed-up
and the idle fraction of the two workers: 1 - (sum of the job times) / (2 x the run's wall time), from the
run report (planning and start-up count as idle).
The commands run from this source tree with their bytecode compiled once and kept, as in an installed package
(pip compiles modules at install); with ``PYTHONDONTWRITEBYTECODE`` every start-up would compile each module.
The load average is printed too: the machine is shared, and other work on it shrinks every speed-up.
The bake must take one input (its first role is the matched file) and write PNG; ``--bake`` picks another
registered bake (e.g. ``--bake test-invert --module tests.batch.bakes_for_tests`` to check the harness).
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))


def make_library(folder: Path, size: int, count: int) -> None:
    from bakery.io import write_image
    from bakery.samples import MATERIALS, material_height

    kinds = [(name, kind, seed) for _, name, kind, seed, _ in MATERIALS]
    base = {name: material_height(kind, size, seed=seed) for name, kind, seed in kinds}
    for i in range(count):
        name, _, _ = kinds[i % len(kinds)]
        h = np.roll(base[name], shift=(37 * (i // len(kinds)), 53 * (i // len(kinds))), axis=(0, 1))
        sub = folder / f"set{i // 12}"
        sub.mkdir(parents=True, exist_ok=True)
        write_image(sub / f"{name}{i}_height.png", h, bits="16")


def _plain_work(args: tuple[str, int]) -> float:
    """Decode a height PNG and encode a 16-bit RGB PNG ``n`` times, single-threaded: the floor's unit."""
    import cv2

    cv2.setNumThreads(1)
    path, n = args
    t0 = time.perf_counter()
    for _ in range(n):
        h = cv2.imread(path, cv2.IMREAD_UNCHANGED)
        cv2.imwrite(f"{path}.{os.getpid()}.out.png", np.dstack([h, h, h]))
    return time.perf_counter() - t0


def machine_parallelism(path: Path, n: int = 8) -> float:
    """Throughput of two processes over one on the plain work (2.0 = two free cores)."""
    import multiprocessing

    ctx = multiprocessing.get_context("spawn")
    with ctx.Pool(1) as pool:
        one = pool.map(_plain_work, [(str(path), n)])[0]
    with ctx.Pool(2) as pool:
        two = max(pool.map(_plain_work, [(str(path), n)] * 2))
    return 2 * one / two


#: Where the child processes keep their compiled bytecode (set by main, inside its temporary folder).
PYCACHE: Path | None = None


def child_env() -> dict[str, str]:
    """The environment of the measured commands: this source tree first, and bytecode compiled once and kept
    (in a folder of this run), as an installed package has it (pip compiles the modules when it installs).
    Without it every start-up compiles each module again and the times measure the compiler."""
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    if PYCACHE is not None:
        env["PYTHONPYCACHEPREFIX"] = str(PYCACHE)
    return env


def bakery_cmd(args: list[str], module: str | None) -> float:
    pre = f"import {module}; " if module else ""
    code = f"{pre}from bakery.cli import main; main({args!r})"  # what the installed ``bakery`` command runs
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, "-c", code], env=child_env(), capture_output=True, text=True)
    dt = time.perf_counter() - t0
    if r.returncode != 0:
        sys.exit(f"bakery {' '.join(args)} failed ({r.returncode}):\n{r.stdout}\n{r.stderr}")
    return dt


def command_time(args: list[str]) -> float:
    """Wall time of ``python -m bakery ARGS`` (the installed command's path: start-up included)."""
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, "-m", "bakery", *args], env=child_env(), capture_output=True, text=True)
    dt = time.perf_counter() - t0
    if r.returncode != 0:
        sys.exit(f"bakery {' '.join(args)} failed ({r.returncode}):\n{r.stdout}\n{r.stderr}")
    return dt


CHAINED = """source = "lib"
output = "out"

[[rule]]
name = "normals"
bake = "normal"
match = "**/{m}_height.png"
output = "{dir}/{m}_normal.png"

[[rule]]
name = "chains"
bake = "normal-mips"
match = "@normals"
output = "{dir}/{stem}.ktx2"

[[rule]]
name = "occlusion"
bake = "occlusion"
match = "**/{m}_height.png"
output = "{dir}/{m}_occlusion.png"
"""


def chained(tmp: Path, size: int, count: int) -> None:
    import json

    print(f"making {count} height maps of {size}² in {tmp} ...", flush=True)
    make_library(tmp / "lib", size, count)
    recipe = tmp / "chained.toml"
    recipe.write_text(CHAINED, encoding="utf-8")
    walls = {}
    for jobs in (1, 2):
        shutil.rmtree(tmp / "out", ignore_errors=True)
        walls[jobs] = bakery_cmd(["batch", str(recipe), "--jobs", str(jobs)], None)
        rep = json.loads((tmp / "out" / ".bakery" / "report.json").read_text())
        busy = sum(j.get("seconds") or 0.0 for j in rep["jobs"])
        ran = sum(j["status"] == "ran" for j in rep["jobs"])
        idle = 1 - busy / (jobs * rep["seconds"])
        print(f"chained, --jobs {jobs}: {ran} jobs in {rep['seconds']:.2f} s (command {walls[jobs]:.2f} s); "
              f"job time {busy:.2f} s; idle fraction of the workers {100 * idle:.1f} %", flush=True)
    print(f"chained speed-up --jobs 2 / --jobs 1: {walls[1] / walls[2]:.2f}x (by the command)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--bake", default="normal")
    ap.add_argument("--module", default=None, help="a module to import first (registers a test bake)")
    ap.add_argument("--size", type=int, default=1024)
    ap.add_argument("--count", type=int, default=48)
    ap.add_argument("--chained", type=int, default=0, metavar="N", help="the chained benchmark over N heights")
    args = ap.parse_args()
    global PYCACHE
    tmp = Path(tempfile.mkdtemp(prefix="bench-batch-"))
    PYCACHE = tmp / "pycache"
    print(f"load average at the start: {', '.join(f'{x:.1f}' for x in os.getloadavg())} on {os.cpu_count()} cores")
    if args.chained:
        try:
            chained(tmp, args.size, args.chained)
        finally:
            shutil.rmtree(tmp, ignore_errors=True)
        return
    try:
        print(f"making {args.count} height maps of {args.size}² in {tmp} ...", flush=True)
        make_library(tmp / "lib", args.size, args.count)
        recipe = tmp / "bench.toml"
        recipe.write_text(f'source = "lib"\noutput = "out"\n\n[[rule]]\nname = "maps"\nbake = "{args.bake}"\n'
                          'match = "**/*_height.png"\noutput = "{dir}/{stem}_out.png"\n', encoding="utf-8")
        sample = next((tmp / "lib").rglob("*_height.png"))
        floor_before = machine_parallelism(sample)
        times = {}
        for jobs in (1, 2):
            shutil.rmtree(tmp / "out", ignore_errors=True)
            times[jobs] = bakery_cmd(["batch", str(recipe), "--jobs", str(jobs)], args.module)
            print(f"full run, --jobs {jobs}: {times[jobs]:.2f} s", flush=True)
        nochange = min(bakery_cmd(["batch", str(recipe), "--jobs", "2"], args.module) for _ in range(3))
        empty = tmp / "empty.toml"
        empty.write_text(recipe.read_text().replace("**/*_height.png", "**/*_none.png").replace('"out"', '"out2"'),
                         encoding="utf-8")
        floor = min(bakery_cmd(["batch", str(empty)], args.module) for _ in range(3))
        pre = f"import {args.module}; " if args.module else ""
        code = (f"{pre}import time; from bakery.batch import run; t = time.perf_counter(); "
                f"r = run({str(recipe)!r}); print(time.perf_counter() - t, r.ran)")
        api = []
        for _ in range(3):
            out = subprocess.run([sys.executable, "-c", code], env=child_env(),
                                 capture_output=True, text=True, check=True).stdout.split()
            assert out[1] == "0", "the re-run ran jobs"
            api.append(float(out[0]))
        print(f"no-change re-run: {nochange:.3f} s by the command; no-job floor: {floor:.3f} s; the run() call "
              f"itself (Python API, after start-up): {min(api):.3f} s")
        # the no-change run against `bakery --version`, alternated so both see the same machine
        rounds = [(command_time(["--version"]), command_time(["batch", str(recipe)])) for _ in range(7)]
        version = float(np.median([v for v, _ in rounds]))
        again = float(np.median([b for _, b in rounds]))
        print(f"no-change re-run by the command: {again:.3f} s; bakery --version: {version:.3f} s; "
              f"difference {again - version:+.3f} s  (target <= 0.1 s; medians of 7 alternated rounds)")
        floor_after = machine_parallelism(sample)
        speedup = times[1] / times[2]
        print(f"speed-up --jobs 2 / --jobs 1: {speedup:.2f}x; against the two-process floor: "
              f"{speedup / max(floor_before, floor_after):.2f} of the higher floor, "
              f"{speedup / min(floor_before, floor_after):.2f} of the lower  (target >= 0.95)")
        print(f"floor: two processes of plain PNG work vs one: {floor_before:.2f}x before, {floor_after:.2f}x after")
        print(f"no-change re-run / full run (--jobs 2): {100 * nochange / times[2]:.1f} % by the command, "
              f"{100 * min(api) / times[2]:.1f} % for the run() call  (target < 5 %)")
        print(f"no-change re-run / no-job floor: {nochange / floor:.2f}x")
        print(f"load average (1, 5, 15 min) at the end: {', '.join(f'{x:.1f}' for x in os.getloadavg())} "
              f"on {os.cpu_count()} cores")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
