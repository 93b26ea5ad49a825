"""Peak memory of ``bakery info`` at 4096² and 16384², against the decoded pixels it must hold.

    python tests/perf/mem_info.py [--sizes 4096,16384] [--bits 8]

For each size, an 8-bit (or 16-bit) RGB PNG of a procedural pattern is written to a temporary folder, then two
fresh processes measure their peak resident memory (``resource.getrusage(RUSAGE_SELF).ru_maxrss``, after
importing bakery, numpy and OpenCV, whose own memory is printed separately as the baseline):

- ``read``: only :func:`bakery.io.read_image` (decoding and the conversion to float32);
- ``info``: :func:`bakery.info.describe`, i.e. the whole ``bakery info`` of the file.

Printed per size: the float32 pixel array's size (the floor: ``bakery info`` holds the decoded image), the
peak of each process above the baseline, and the ratios to the floor. The statistics themselves run in strips
(:func:`bakery.info.channel_stats`), so ``info`` should stay within a few percent of ``read``; what ``read``
takes above the floor is the decoder's integer buffer and the float conversion.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
from pathlib import Path

CHILD = r"""
import resource, sys
from pathlib import Path
import numpy as np, cv2
import bakery.info, bakery.io.images
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
path, mode = Path(sys.argv[1]), sys.argv[2]
if mode == "read":
    bakery.io.images.read_image(path, max_pixels=1 << 30)
else:
    bakery.info.describe(path, max_pixels=1 << 30)
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(base, peak)
"""


def make_png(path: Path, n: int, bits: int) -> None:
    """An RGB pattern (smooth bands, cheap to compress), written strip by strip into one uint array."""
    import cv2
    import numpy as np

    dtype = np.uint8 if bits == 8 else np.uint16
    top = 255 if bits == 8 else 65535
    img = np.empty((n, n, 3), dtype)
    x = np.arange(n, dtype=np.float32) / n
    for r0 in range(0, n, 1024):
        y = (np.arange(r0, min(n, r0 + 1024), dtype=np.float32) / n)[:, None]
        for ch in range(3):
            img[r0:r0 + len(y), :, ch] = (0.5 + 0.5 * np.sin(6.3 * (ch + 1) * (x[None, :] + y))) * top
    cv2.imwrite(str(path), img)


def measure(path: Path, mode: str) -> tuple[float, float]:
    out = subprocess.run([sys.executable, "-c", CHILD, str(path), mode], capture_output=True, text=True,
                         check=True).stdout.split()
    base, peak = (int(v) / 1024 for v in out)  # ru_maxrss is in KiB on Linux
    return base, peak


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="4096,16384")
    ap.add_argument("--bits", type=int, default=8, choices=(8, 16))
    ap.add_argument("--make", nargs=3, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.make:
        make_png(Path(args.make[0]), int(args.make[1]), int(args.make[2]))
        return
    sizes = [int(s) for s in args.sizes.split(",")]
    print("size      pixels MiB  read MiB (x pixels)  info MiB (x pixels)  info - read MiB  baseline MiB")
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            path = Path(tmp) / f"p{n}.png"
            # written by a process of its own: a child's peak memory counts its parent's at the fork
            subprocess.run([sys.executable, __file__, "--make", str(path), str(n), str(args.bits)], check=True)
            floor = n * n * 3 * 4 / 2**20
            base, read_peak = measure(path, "read")
            _, info_peak = measure(path, "info")
            r, i = read_peak - base, info_peak - base
            print(f"{n:5d}^2  {floor:11.0f}  {r:8.0f} ({r / floor:4.2f})      {i:8.0f} ({i / floor:4.2f})      "
                  f"{i - r:10.0f}      {base:8.0f}", flush=True)
            path.unlink()


if __name__ == "__main__":
    main()
