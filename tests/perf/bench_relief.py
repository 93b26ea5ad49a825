"""Benchmarks for maps derived from heights (bakery.relief). Not collected by pytest.

    python tests/perf/bench_relief.py            # 4096^2
    python tests/perf/bench_relief.py --size 2048

1. occlusion: ``occlusion_from_height`` of a 4096^2 float32 height, 16 azimuths, no distance limit, vs the floor
   "16 contiguous float32 copies of the height" (one per azimuth, ``np.copyto``), same thread count. Goal <= 8x.
2. curvature: ``curvature_maps`` at scale 1 vs the same floor divided by 16 (one copy).

The machine is shared: floor and case alternate, each the best of a few runs; read the ratios.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np
from timing import best  # noqa: E402  (tests/perf/timing.py, beside this script)

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))


def height_field(n: int, seed: int = 0) -> np.ndarray:
    """A tiling test relief: smoothed noise of a few texels' feature size, about 4 height units deep."""
    rng = np.random.default_rng(seed)
    spec = np.fft.rfft2(rng.standard_normal((n, n)).astype(np.float32))
    fy = np.fft.fftfreq(n)[:, None]
    fx = np.fft.rfftfreq(n)[None, :]
    spec *= np.exp(-0.5 * (fx * fx + fy * fy) * (2 * np.pi * 12) ** 2)
    h = np.fft.irfft2(spec, s=(n, n)).astype(np.float32)
    return h / h.std() * np.float32(4.0)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=4096)
    ap.add_argument("--threads", type=int, default=min(8, os.cpu_count() or 1))
    args = ap.parse_args()
    from bakery.relief import curvature_maps, occlusion_from_height

    n, threads = args.size, args.threads
    h = height_field(n)
    dst = np.empty_like(h)

    def floor():
        for _ in range(16):
            np.copyto(dst, h)

    occlusion_from_height(h[:256, :256], strength=1.0, directions=16, threads=threads)  # compile / load cache
    ratios = []
    for _ in range(2):
        f = best(floor, 3)
        time.sleep(0.2)
        t = best(lambda: occlusion_from_height(h, strength=1.0, directions=16, threads=threads), 1)
        ratios.append(t / f)
        print(f"occlusion {n}^2, 16 azimuths, {threads} threads: {t:6.2f} s  floor (16 copies of "
              f"{h.nbytes >> 20} MiB) {f * 1e3:6.1f} ms  ratio {t / f:6.1f}  (goal <= 8)")
    print(f"occlusion ratio, best of rounds: {min(ratios):.1f}")
    f1 = best(lambda: np.copyto(dst, h), 5)
    t = best(lambda: curvature_maps(h, strength=1.0, scale=1.0), 2)
    print(f"curvature_maps {n}^2 scale 1: {t * 1e3:7.1f} ms  floor (1 copy) {f1 * 1e3:5.1f} ms  ratio {t / f1:5.1f}")


if __name__ == "__main__":
    main()
