"""Benchmarks for colour-map mips (bakery.mips.color_mips). Not collected by pytest.

    python tests/perf/bench_mips.py             # 4096^2 RGBA8 sRGB map

1. box: ``color_mips`` (decode sRGB, premultiply, box chain, unpremultiply + encode every level) of a 4096^2 RGBA
   map holding 8-bit values as float32, vs the floor "a cv2.resize INTER_AREA chain on the same float32 RGBA
   map" (no colour handling). Goal <= 4x. Case and floor alternate in rounds (``timing.ratio_rounds``).
2. kaiser, lanczos3: the same call, times and ratios to the same floor.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
from timing import best, ratio_rounds  # noqa: E402  (tests/perf/timing.py, beside this script)

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=4096)
    args = ap.parse_args()
    import cv2

    from bakery.mips import color_mips

    n = args.size
    rng = np.random.default_rng(0)
    img = np.rint(rng.random((n, n, 4), dtype=np.float32) * 255) / np.float32(255)  # an RGBA8 map as stored

    def floor():
        x = img
        while x.shape[0] > 1 or x.shape[1] > 1:
            x = cv2.resize(x, (max(1, x.shape[1] // 2), max(1, x.shape[0] // 2)), interpolation=cv2.INTER_AREA)

    color_mips(img[:64, :64])  # compile / load cache
    med, lo, hi, t, f = ratio_rounds(lambda: color_mips(img), floor, rounds=5, repeat=2)
    print(f"color_mips box {n}^2 RGBA sRGB: {t * 1e3:7.1f} ms  floor (INTER_AREA chain) {f * 1e3:6.1f} ms  "
          f"ratio median {med:5.2f} (range {lo:.2f}-{hi:.2f})  (goal <= 4)")
    for kernel in ("kaiser", "lanczos3"):
        t = best(lambda k=kernel: color_mips(img, kernel=k), 1)
        f = best(floor, 3)
        print(f"color_mips {kernel:8s} {n}^2: {t:6.2f} s  ratio {t / f:6.1f}")
    t = best(lambda: color_mips(img, alpha_cutoff=0.5), 2)
    print(f"color_mips box + coverage (cutoff 0.5): {t * 1e3:7.1f} ms  ratio {t / best(floor, 3):5.2f}")


if __name__ == "__main__":
    main()
