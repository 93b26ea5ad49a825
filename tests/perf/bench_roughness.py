"""Benchmark: roughness conversion and anti-aliased roughness chains, as ratios to floors timed in this run.

    python tests/perf/bench_roughness.py [--size 4096] [--repeat 5]

Targets:
- 4096^2 exponent map -> roughness: within 3x of a numpy copy of the input + output bytes (float32).
- 4096^2 normal map -> 13-level anti-aliased roughness chain: within 4x of a plain box mip chain of the same map.

Each measurement is the best of ``repeat`` runs; the floors are timed right before the work they bound, so
load from other processes affects both alike. Core functions only (no file I/O).
"""

from __future__ import annotations

import argparse

import numpy as np
from timing import best  # noqa: E402  (tests/perf/timing.py, beside this script)

from bakery.roughness import roughness_from_exponent, roughness_mips


def box_chain(a: np.ndarray) -> list[np.ndarray]:
    """The floor: a plain 2x2 box mip chain of the same (H, W, C) float32 map (power-of-two sizes)."""
    out = [a]
    while a.shape[0] > 1 or a.shape[1] > 1:
        a = (a[0::2, 0::2] + a[1::2, 0::2] + a[0::2, 1::2] + a[1::2, 1::2]) * np.float32(0.25)
        out.append(a)
    return out


def bench_convert(size: int, repeat: int, rng: np.random.Generator) -> None:
    exponent = np.exp(rng.uniform(0.0, np.log(10000.0), (size, size))).astype(np.float32)
    src = np.concatenate([exponent.ravel(), exponent.ravel()])  # input + output bytes
    dst = np.empty_like(src)
    floor = best(lambda: np.copyto(dst, src), repeat)
    peak = best(lambda: roughness_from_exponent(exponent), repeat)
    floor = min(floor, best(lambda: np.copyto(dst, src), repeat))
    width = best(lambda: roughness_from_exponent(exponent, rule="width"), repeat)
    print(f"exponent -> roughness, {size}x{size} float32")
    print(f"  floor (numpy copy of {src.nbytes / 2**20:.0f} MiB)  {floor * 1e3:8.1f} ms")
    print(f"  peak rule (default)             {peak * 1e3:8.1f} ms   ratio {peak / floor:5.2f}  (target <= 3)")
    print(f"  width rule                      {width * 1e3:8.1f} ms   ratio {width / floor:5.2f}")


def bench_antialias(size: int, repeat: int, rng: np.random.Generator) -> None:
    normals = rng.normal(size=(size, size, 3)).astype(np.float32) * np.float32(0.3)
    normals[..., 2] = 1.0
    normals /= np.linalg.norm(normals, axis=-1, keepdims=True)
    rough = rng.uniform(0.1, 0.9, (size, size)).astype(np.float32)
    floor = best(lambda: box_chain(normals), repeat)
    levels = len(box_chain(normals))
    const = best(lambda: roughness_mips(normals, 0.4), repeat)
    floor = min(floor, best(lambda: box_chain(normals), repeat))
    mapped = best(lambda: roughness_mips(normals, rough), repeat)
    print(f"normal map -> anti-aliased roughness chain, {size}x{size}, {levels} levels")
    print(f"  floor (plain box mip chain of the normal map)  {floor * 1e3:8.1f} ms")
    print(f"  constant base roughness                        {const * 1e3:8.1f} ms   ratio {const / floor:5.2f}"
          "  (target <= 4)")
    print(f"  roughness map                                  {mapped * 1e3:8.1f} ms   ratio {mapped / floor:5.2f}"
          "  (target <= 4)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--size", type=int, default=4096)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    rng = np.random.default_rng(0)
    bench_convert(args.size, args.repeat, rng)
    bench_antialias(args.size, args.repeat, rng)


if __name__ == "__main__":
    main()
