"""Speed of the preview renderer (not collected by pytest): ``python tests/perf/bench_preview.py``.

Prints seconds for a 512² ball and a 512² tile at 1 and 2x2 samples per pixel, and the ratio to a floor
measured in the same run: one ``cv2.remap`` bilinear RGB lookup per sample (what a renderer costs at the very
least, since every sample reads the environment at least once). Also the one-off cost of baking the default
lighting in memory.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
from timing import best  # noqa: E402  (tests/perf/timing.py, beside this script)

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from bakery.preview.lighting import default_lighting  # noqa: E402
from bakery.preview.render import preview_image, render_ball, render_tile  # noqa: E402
from bakery.preview.shading import Material  # noqa: E402
from bakery.samples import paving_exponent, paving_height  # noqa: E402


def floor(samples: int) -> float:
    import cv2

    src = np.random.default_rng(0).random((1024, 1024, 3), dtype=np.float32)
    side = int(np.sqrt(samples))
    mx = np.random.default_rng(1).random((side, side), dtype=np.float32) * 1023
    my = np.random.default_rng(2).random((side, side), dtype=np.float32) * 1023
    return best(lambda: cv2.remap(src, mx, my, cv2.INTER_LINEAR))


def main() -> None:
    t = time.perf_counter()
    light = default_lighting()
    print(f"default lighting baked in memory: {time.perf_counter() - t:.2f} s")
    h = paving_height(512)
    gy, gx = np.gradient(h.astype(np.float64))
    n = np.stack([-8 * gx, 8 * gy, np.ones_like(h)], -1)  # rows run down: +y up is -row
    n = (n / np.linalg.norm(n, axis=-1, keepdims=True)).astype(np.float32)
    rough = np.clip(0.9 - 0.15 * np.log2(paving_exponent(h)) / 3, 0, 1).astype(np.float32)
    mat = Material(normals=n, roughness=rough, base_color=(0.5, 0.45, 0.4))
    size = 512
    for ss in (1, 2):
        samples = (size * ss) ** 2
        f = floor(samples)
        tb = best(lambda ss=ss: render_ball(mat, light, size=size, supersample=ss))
        tt = best(lambda ss=ss: render_tile(mat, light, size=size, supersample=ss))
        print(f"{size}² x {ss}x{ss} samples: ball {tb:.2f} s ({tb / f:.0f}x floor), tile {tt:.2f} s "
              f"({tt / f:.0f}x floor); floor {f * 1000:.1f} ms")
    tp = best(lambda: preview_image(mat, light, size=size), repeat=1)
    print(f"preview_image 512² ball + tile, defaults: {tp:.2f} s")


if __name__ == "__main__":
    main()
