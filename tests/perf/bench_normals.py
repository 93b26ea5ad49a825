"""Benchmarks for height -> normal conversion. Not collected by pytest.

    python tests/perf/bench_normals.py            # 4096^2 core and end to end, 8192^2 peak memory
    python tests/perf/bench_normals.py --huge     # also 16384^2 (several minutes)
    python tests/perf/bench_normals.py --only-png # only the PNG write lines

Every speed is printed as a ratio to a floor measured in the same run, on the same machine:

1. core: ``normal_from_height`` of a 4096^2 float32 height into a preallocated float32 (H, W, 3) array, vs the
   floor "numpy copy of the same input + output bytes" (``np.copyto`` of a 256 MiB buffer). Target <= 4x.
2. end to end: 4096^2 16-bit PNG height -> 16-bit PNG normal map through ``run_bake`` (what the CLI does), vs the
   floor "read that height PNG + write a 16-bit RGB PNG of the same size" (the same normal pixels, same codec
   and settings). Target <= 1.5x.
3. PNG write: ``bakery.io.png.write_png`` (row strips, progress per strip) of an 8192^2 16-bit (then 8-bit) RGB
   normal map, vs the floor ``cv2.imwrite`` of the same array (OpenCV's default PNG settings), alternated in
   rounds; also the two file sizes. Target: ratio <= 1 and size within 10 %.
4. memory: 8192^2 16-bit PNG -> 16-bit PNG normal map in a fresh process; peak resident memory, its
   ``VmHWM`` (``ru_maxrss`` where /proc is missing). Target < 2 GiB. ``--huge`` also runs 16384^2 (must work).

Each timing is the best of a few runs (the machine is shared; best-of is the least noisy estimate); the end-to-end
runs alternate floor and bake and also print the median of the paired ratios, which is steadier under load.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from timing import best, ratio_rounds  # noqa: E402  (tests/perf/timing.py, beside this script)

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))


def height_field(n: int, seed: int = 0) -> np.ndarray:
    """A cheap tiling test height (sinusoids + a little noise), float32 in [0, 1]."""
    rng = np.random.default_rng(seed)
    t = np.arange(n, dtype=np.float32) * np.float32(2 * np.pi / n)
    h = np.empty((n, n), np.float32)
    for r0 in range(0, n, 1024):
        rows = slice(r0, min(n, r0 + 1024))
        h[rows] = 0.5 + 0.2 * np.sin(8 * t)[None, :] * np.cos(5 * t[rows])[:, None] + 0.1 * np.sin(
            31 * t[None, :] + 17 * t[rows, None]) + 0.02 * rng.random((rows.stop - r0, n), dtype=np.float32)
    return h


def bench_core(n: int, repeat: int) -> None:
    from bakery.normals import normal_from_height

    h = height_field(n)
    out = np.empty((n, n, 3), np.float32)
    src = np.ones(h.nbytes // 4 + out.nbytes // 4, np.float32)
    dst = np.empty_like(src)
    floor = best(lambda: np.copyto(dst, src), repeat)
    for kernel in ("scharr", "central"):
        t = best(lambda k=kernel: normal_from_height(h, strength=16.0, kernel=k, out=out), repeat)
        print(f"core {n}^2 {kernel:8s}: {t * 1e3:7.1f} ms  floor (copy {src.nbytes * 2 >> 20} MiB moved) "
              f"{floor * 1e3:6.1f} ms  ratio {t / floor:5.2f}  (target <= 4)")
    t1 = best(lambda: normal_from_height(h, strength=16.0, out=out, threads=1), repeat)
    print(f"core {n}^2 scharr, 1 thread: {t1 * 1e3:7.1f} ms  ratio {t1 / floor:5.2f}")


def bench_end_to_end(n: int, repeat: int, folder: Path) -> None:
    from bakery.bakes import run_bake
    from bakery.bakes.normals import NormalParams
    from bakery.io import read_image, write_image

    src = write_image(folder / "h.png", height_field(n), bits="16")
    out = folder / "n.png"
    params = NormalParams(strength=16.0)
    run_bake("normal", {"height": src}, out, params)
    q = np.rint(read_image(out).pixels * 65535).astype(np.uint16)  # the same pixels for the floor's write

    def floor_job():
        read_image(src)
        write_image(folder / "floor.png", q)

    # interleaved: floor, bake, floor, bake ... so both see the same load on a shared machine
    floors, bakes = [], []
    for _ in range(repeat):
        floors.append(best(floor_job, 1))
        bakes.append(best(lambda: run_bake("normal", {"height": src}, out, params), 1))
    paired = sorted(b / f for b, f in zip(bakes, floors, strict=True))
    print(f"end to end {n}^2 16-bit PNG -> 16-bit PNG: best {min(bakes):6.2f} s  floor (read + write) best "
          f"{min(floors):6.2f} s  ratio of bests {min(bakes) / min(floors):5.2f}, median of {repeat} paired "
          f"ratios {paired[len(paired) // 2]:5.2f}  (target <= 1.5)")


def bench_png_write(n: int, folder: Path, rounds: int, bits: str = "16") -> None:
    import cv2

    from bakery.io.images import quantize
    from bakery.io.png import write_png
    from bakery.normals import normal_from_height
    from bakery.normals.encode import encode_normals

    q = quantize(encode_normals(normal_from_height(height_field(n), strength=16.0)), bits)
    bgr = cv2.cvtColor(q, cv2.COLOR_RGB2BGR)  # what cv2.imwrite takes for the same file
    ours, theirs = folder / "ours.png", folder / "cv2.png"
    med, lo, hi, t, floor = ratio_rounds(lambda: write_png(ours, q), lambda: cv2.imwrite(str(theirs), bgr),
                                         rounds=rounds, repeat=1)
    size, cv_size = ours.stat().st_size, theirs.stat().st_size
    print(f"PNG write {n}^2 {bits}-bit RGB: strips {t:6.2f} s  floor (cv2.imwrite) {floor:6.2f} s  median ratio "
          f"{med:5.2f} ({lo:.2f}..{hi:.2f}, {rounds} rounds; target <= 1)  size {size >> 20} MiB vs "
          f"{cv_size >> 20} MiB, ratio {size / cv_size:5.3f} (target within 10 %)")
    ours.unlink()
    theirs.unlink()


CHILD = """
import sys, resource
sys.path.insert(0, {root!r})
from bakery.bakes import run_bake
from bakery.bakes.normals import NormalParams
run_bake("normal", {{"height": {src!r}}}, {out!r}, NormalParams(strength=16.0))
try:  # VmHWM starts afresh at exec; ru_maxrss keeps the forking parent's size (getrusage(2): kept across execve)
    with open("/proc/self/status") as f:
        print(next(line.split()[1] for line in f if line.startswith("VmHWM:")))
except OSError:
    print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def bench_memory(n: int, folder: Path) -> None:
    from bakery.io import write_image

    src = write_image(folder / f"h{n}.png", height_field(n), bits="16")
    out = folder / f"n{n}.png"
    env = dict(os.environ, BAKERY_MAX_PIXELS=str(n * n))
    t0 = time.perf_counter()
    res = subprocess.run([sys.executable, "-c", CHILD.format(root=str(ROOT), src=str(src), out=str(out))],
                         capture_output=True, text=True, env=env)
    elapsed = time.perf_counter() - t0
    if res.returncode:
        print(f"memory {n}^2: FAILED\n{res.stderr}")
        return
    peak_kib = int(res.stdout.split()[-1])
    verdict = ("under" if peak_kib < 2 * 2**20 else "OVER") + " the 2 GiB target" if n <= 8192 else "works"
    print(f"memory {n}^2 16-bit PNG -> 16-bit PNG: peak RSS {peak_kib / 2**20:.2f} GiB ({verdict}), "
          f"{elapsed:.1f} s, output {out.stat().st_size >> 20} MiB")
    src.unlink()
    out.unlink()


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=4096)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--huge", action="store_true", help="also 16384^2 (memory run)")
    ap.add_argument("--only-png", action="store_true", help="only the PNG write line")
    args = ap.parse_args()
    print(f"{os.cpu_count()} CPUs, numpy {np.__version__}; load average {os.getloadavg()[0]:.2f}")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        if args.only_png:
            for bits in ("16", "8"):
                bench_png_write(8192, folder, 3, bits)
            return
        bench_core(args.size, args.repeat)
        bench_end_to_end(args.size, max(5, args.repeat), folder)
        for bits in ("16", "8"):
            bench_png_write(8192, folder, 3, bits)
        bench_memory(8192, folder)
        if args.huge:
            bench_memory(16384, folder)


if __name__ == "__main__":
    main()
