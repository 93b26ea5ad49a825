"""Benchmarks for environment maps: ratios to floors measured in the same run (not collected by pytest).

Targets (issue 4):
- equirect 4096x2048 -> cubemap 1024^2 per face within 3x of the floor "one cv2.remap bilinear lookup per
  output texel" (same source, maps precomputed, so the floor is the lookup alone);
- SH projection of a 4096x2048 panorama within 2x of the floor "one multiply-add pass over the image"
  (a BLAS product of the image rows with one weight per sample).

Run: ``PYTHONPATH=. python tests/perf/bench_envmaps.py [--repeat N]``. The machine may be shared: each time
is the best of N runs.
"""

from __future__ import annotations

import argparse
import time

import numpy as np


def best(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main() -> None:
    import cv2

    from bakery.envmap import irradiance, sample

    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    rng = np.random.default_rng(0)
    pano = (rng.random((2048, 4096, 3), dtype=np.float32) * 4).astype(np.float32)

    # 1. equirect -> cube 1024
    u, v = sample.cube_equirect_uv(1024)
    padded = sample.pad_equirect(pano)
    mx = np.ascontiguousarray((u * 4096 + 0.5).reshape(-1, 4096))
    my = np.ascontiguousarray((v * 2048 + 0.5).reshape(-1, 4096))
    floor = best(lambda: cv2.remap(padded, mx, my, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE),
                 args.repeat)
    conv = best(lambda: sample.resample(pano, "equirect", "cube", 1024), args.repeat)
    print(f"equirect 4096x2048 -> cube 1024: {conv * 1e3:.0f} ms; floor (one cv2.remap lookup per texel) "
          f"{floor * 1e3:.0f} ms; ratio {conv / floor:.2f} (target <= 3)")

    # 2. SH projection
    flat = pano.reshape(2048, -1)
    w = rng.random(flat.shape[1], dtype=np.float32)
    floor2 = best(lambda: flat @ w, args.repeat)
    sh = best(lambda: irradiance.project_sh(pano, "equirect"), args.repeat)
    print(f"SH9 projection of 4096x2048: {sh * 1e3:.1f} ms; floor (one multiply-add pass) "
          f"{floor2 * 1e3:.1f} ms;"
          f" ratio {sh / floor2:.2f} (target <= 2)")

    # 3. information only: shrinking with the conservative area filter, and a KTX2 encode with mips
    area = best(lambda: sample.resample(pano, "equirect", "cube", 256), max(1, args.repeat // 2))
    print(f"equirect 4096x2048 -> cube 256 (area filter): {area * 1e3:.0f} ms; ratio to the remap floor "
          f"{area / floor:.1f} (no target)")
    from bakery.io.ktx2 import encode_ktx2

    cube = sample.resample(pano, "equirect", "cube", 1024)
    chain = sample.cube_mip_chain(cube)
    enc = best(lambda: encode_ktx2(chain, "rgba16f", cubemap=True), max(1, args.repeat // 2))
    copy = best(lambda: np.concatenate([c.ravel() for c in chain]).astype(np.float16).tobytes(),
                max(1, args.repeat // 2))
    print(f"KTX2 RGBA16F encode, cube 1024 + mips: {enc * 1e3:.0f} ms; floor (float16 copy of the same "
          f"texels) {copy * 1e3:.0f} ms; ratio {enc / copy:.2f} (no target)")


if __name__ == "__main__":
    main()
