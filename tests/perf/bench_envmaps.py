"""Benchmarks for environment maps: ratios to floors measured in the same run (not collected by pytest).

Targets:
- equirect 4096x2048 -> cubemap 1024^2 per face within 3x of the floor "one cv2.remap bilinear lookup per
  output texel" (same source, maps precomputed, so the floor is the lookup alone);
- SH projection of a 4096x2048 panorama within 2x of the floor "one multiply-add pass over the image"
  (a BLAS product of the image rows with one weight per sample).

Run: ``PYTHONPATH=. python tests/perf/bench_envmaps.py [--repeat N]``. The machine may be shared: each time
is the best of N runs; the SH case compares the projection and its floor in 7 alternating rounds and checks the
median ratio, as the floor's own speed varies from moment to moment here.
"""

from __future__ import annotations

import argparse

import numpy as np
from timing import best, ratio_rounds  # noqa: E402  (tests/perf/timing.py, beside this script)


def case_convert(repeat: int) -> str:
    import cv2

    from bakery.envmap import reduce, resample, sample

    pano = (np.random.default_rng(0).random((2048, 4096, 3), dtype=np.float32) * 4).astype(np.float32)
    u, v = reduce.cube_equirect_uv(1024)
    padded = sample.pad_equirect(pano)
    mx = np.ascontiguousarray((u * 4096 + 0.5).reshape(-1, 4096))
    my = np.ascontiguousarray((v * 2048 + 0.5).reshape(-1, 4096))
    floor = best(lambda: cv2.remap(padded, mx, my, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE), repeat)
    conv = best(lambda: resample.resample(pano, "equirect", "cube", 1024), repeat)
    return (f"equirect 4096x2048 -> cube 1024: {conv * 1e3:.0f} ms; floor (one cv2.remap lookup per texel) "
            f"{floor * 1e3:.0f} ms; ratio {conv / floor:.2f} (target <= 3)")


def case_sh(repeat: int) -> str:
    from bakery.envmap import irradiance

    rng = np.random.default_rng(0)
    pano = (rng.random((2048, 4096, 3), dtype=np.float32) * 4).astype(np.float32)
    flat = pano.reshape(2048, -1)
    w = rng.random(flat.shape[1], dtype=np.float32)
    irradiance.project_sh(pano, "equirect")  # loads (or first compiles) the numba kernel
    rounds = 7
    med, lo, hi, sh, floor = ratio_rounds(lambda: irradiance.project_sh(pano, "equirect"), lambda: flat @ w,
                                          rounds=rounds, repeat=repeat)
    return (f"SH9 projection of 4096x2048: {sh * 1e3:.1f} ms; floor (one multiply-add pass) {floor * 1e3:.1f} ms;"
            f" ratio {med:.2f}, median of {rounds} rounds (range {lo:.2f}-{hi:.2f}) (target <= 2)")


def case_area(repeat: int) -> str:
    import cv2

    from bakery.envmap import reduce, resample, sample

    pano = (np.random.default_rng(0).random((2048, 4096, 3), dtype=np.float32) * 4).astype(np.float32)
    u, v = reduce.cube_equirect_uv(256)
    padded = sample.pad_equirect(pano)
    mx = np.ascontiguousarray((u * 4096 + 0.5).reshape(-1, 256))
    my = np.ascontiguousarray((v * 2048 + 0.5).reshape(-1, 256))
    floor = best(lambda: cv2.remap(padded, mx, my, cv2.INTER_LINEAR, borderMode=cv2.BORDER_REPLICATE), repeat)
    area = best(lambda: resample.resample(pano, "equirect", "cube", 256), repeat)
    copy = best(lambda: pano.copy(), repeat)
    return (f"equirect 4096x2048 -> cube 256 (area filter, energy-exact): {area * 1e3:.0f} ms; ratio to one "
            f"remap lookup per output texel {area / floor:.0f}, to one copy of the input {area / copy:.0f} "
            "(no target)")


def case_ktx2(repeat: int) -> str:
    from bakery.envmap import resample
    from bakery.io.ktx2 import encode_ktx2

    cube = np.random.default_rng(0).random((6, 1024, 1024, 3), dtype=np.float32)
    chain = resample.cube_mip_chain(cube)
    enc = best(lambda: encode_ktx2(chain, "rgba16f", cubemap=True), repeat)
    copy = best(lambda: np.concatenate([c.ravel() for c in chain]).astype(np.float16).tobytes(), repeat)
    return (f"KTX2 RGBA16F encode, cube 1024 + mips: {enc * 1e3:.0f} ms; floor (float16 copy of the same texels) "
            f"{copy * 1e3:.0f} ms; ratio {enc / copy:.2f} (no target)")


def main() -> None:
    import multiprocessing as mp

    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    # each case in a fresh process: OpenCV's and OpenBLAS's thread pools would otherwise compete for the cores
    ctx = mp.get_context("spawn")
    with ctx.Pool(1, maxtasksperchild=1) as pool:
        for case in (case_convert, case_sh, case_area, case_ktx2):
            rep = args.repeat if case in (case_convert, case_sh) else max(1, args.repeat // 2)
            print(pool.apply(case, (rep,)), flush=True)


if __name__ == "__main__":
    main()
