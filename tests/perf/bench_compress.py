"""Benchmark: block-compressed KTX2 writing and its quality report, as ratios to floors timed in this run.

    python tests/perf/bench_compress.py [--size 4096] [--threads 2] [--rounds 3] [--sizes-only]

Targets:
- BC5 (fast) of a normal map and BC7 (fast) of a colour map, size^2 with all mips, same thread count: bakery's
  KTX2 write without the quality report within 1.2x of the floor. The floor calls the encoder library alone on
  the same levels: it computes the same mips from the same float level 0 (bakery.mips box filter, and for the
  normal map the same renormalization), quantises to 8 bits, encodes strips of block rows on a thread pool of
  the same size, and writes the raw blocks to a file.
- The quality report costs at most 25 % of the encode it reports on (report time / encode time, same levels).

Then file sizes and times for demo-like maps (uncompressed, block-compressed, block-compressed + zstd), the
table of docs/compression.md. Each ratio is the median over ``rounds`` alternated rounds (tests/perf/timing.py).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
from timing import best, ratio_rounds  # noqa: E402  (tests/perf/timing.py, beside this script)

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from bakery.io import blockcodec as B  # noqa: E402
from bakery.io import ktx2 as K  # noqa: E402
from bakery.io import texcompress as T  # noqa: E402
from bakery.mips import downsample  # noqa: E402
from tests.io.texgen import fbm_normals, photo_like  # noqa: E402


def floor_write(path: Path, level0: np.ndarray, codec: str, normal: bool, threads: int) -> None:
    """The encoder library alone: same mips, 8-bit quantisation, strips on a pool, raw blocks to a file."""
    import ispc_texcomp as itc

    levels = [level0]
    while max(levels[-1].shape[:2]) > 1:
        levels.append(downsample(levels[-1]))
    if normal:
        levels = [T._renormalize(lv)[..., :2] for lv in levels]
    c = B.CODECS[codec]
    settings = itc.BC7EncSettings.from_profile("fast") if codec == "bc7" else None
    fn = itc.compress_blocks_bc5 if codec == "bc5" else (lambda s: itc.compress_blocks_bc7(s, settings))
    out = []
    with ThreadPoolExecutor(threads) as pool:
        for lv in levels:
            q = np.rint(np.clip(lv, 0, 1) * 255).astype(np.uint8)
            if codec == "bc7":
                q = np.concatenate([q, np.full(q.shape[:2] + (1,), 255, np.uint8)], -1)
            q = B.pad_to_blocks(q)
            h = q.shape[0]
            rows = B.STRIP_BLOCK_ROWS * 4
            strips = [np.ascontiguousarray(q[y:y + rows]) for y in range(0, h, rows)]
            out += pool.map(lambda s: bytes(fn(itc.RGBASurface(s, s.shape[1], s.shape[0],
                                                               s.shape[1] * c.surface_channels))), strips)
    path.write_bytes(b"".join(out))


def bench_target(name: str, level0: np.ndarray, fmt: str, kind: str, codec: str, threads: int, rounds: int,
                 folder: Path) -> None:
    def ours():
        T.write_compressed_ktx2(folder / "ours.ktx2", level0, fmt, kind=kind, quality="fast", threads=threads,
                                report=False)

    def floor():
        floor_write(folder / "floor.bin", level0, codec, kind == "normal", threads)

    med, lo, hi, a, b = ratio_rounds(ours, floor, rounds=rounds, repeat=1)
    print(f"{name}: bakery write {a:.2f} s, library alone {b:.2f} s -> ratio {med:.3f} (range {lo:.3f}-{hi:.3f};"
          f" target <= 1.2)")
    # CPU time (all threads) is less disturbed by other processes on the shared cores than wall time
    cpu = []
    for fn in (ours, floor, ours, floor):
        t = time.process_time()
        fn()
        cpu.append(time.process_time() - t)
    print(f"{name}: CPU time bakery {min(cpu[0::2]):.2f} s, library alone {min(cpu[1::2]):.2f} s -> ratio "
          f"{min(cpu[0::2]) / min(cpu[1::2]):.3f}")
    # report cost: the report over the same levels and blocks, against the encode of those levels
    fm = K.get_format(fmt)
    levels = T.build_levels(level0, kind=kind)
    enc = [lv[..., :2] for lv in levels] if kind == "normal" else levels
    payloads: list[bytes] = []

    def encode():
        payloads[:] = K.encode_levels(enc, fm, quality="fast", threads=threads)

    t_enc = best(encode, 1)
    t_rep = best(lambda: T._report(fm, kind, enc, payloads, False, T.REPORT_TEXELS), 3)
    print(f"{name}: quality report {t_rep * 1000:.0f} ms, encode {t_enc:.2f} s -> {100 * t_rep / t_enc:.1f} % "
          "(target <= 25 %)")


def size_table(threads: int, folder: Path, size: int) -> None:
    from bakery.envmap.specular import prefilter_specular
    from bakery.samples import _slope_normals, paving_exponent, paving_height, sky_panorama

    height = paving_height(size)
    normal = _slope_normals(height, 6.0)
    rough = np.clip(1.0 - np.log2(paving_exponent(height)) / 10.0, 0, 1)[:, :, None].astype(np.float32)
    spec = prefilter_specular(sky_panorama(512), 128, quality="draft").levels
    cases = [
        (f"normal map {size}^2 (demo paving)", normal, "normal", ["rgba8", "rg8", "bc5"], False),
        (f"normal map {size}^2 (fBm detail)", fbm_normals(size, 1), "normal", ["rg8", "bc5"], False),
        (f"colour {size}^2 (photo-like)", photo_like(size, 2), "color", ["rgba8-srgb", "bc7-srgb"], False),
        (f"roughness {size}^2 (demo paving)", rough, "data", ["r8", "bc4"], False),
        ("specular chain, 128^2 cube (demo sky)", spec, "hdr", ["rgba16f", "bc6h"], True),
    ]
    print("\n| map | format | zstd | bytes | vs. uncompressed | write time |")
    print("|---|---|---|---|---|---|")
    for label, src, kind, fmts, cube in cases:
        base = None
        for fmt in fmts:
            for z in (None, 5, 18):
                t = time.perf_counter()
                res = T.write_compressed_ktx2(folder / "s.ktx2", src, fmt, kind=kind, cubemap=cube, threads=threads,
                                              zstd=z, report=False, quality="fast")
                dt = time.perf_counter() - t
                n = os.path.getsize(res.path)
                base = base or n
                print(f"| {label} | {fmt} | {z or '-'} | {n:,} | {base / n:.2f}x smaller | {dt:.2f} s |")


def quality_table(threads: int, size: int) -> None:
    """The quality knob: figures and encode times per profile (level 0 only, full report)."""
    from tests.io.texgen import hdr_sky

    cases = [("bc7", photo_like(size, 2), "color"), ("bc7-srgb", photo_like(size, 2), "color"),
             ("bc6h", hdr_sky(size, 3), "hdr"), ("bc5", fbm_normals(size, 1), "normal")]
    print(f"\n| format | quality | level 0 ({size}^2) | encode time |")
    print("|---|---|---|---|")
    for fmt, src, kind in cases:
        for q in B.QUALITIES:
            t = best(lambda: T.compress_ktx2(src, fmt, kind=kind, quality=q, mips=False, threads=threads,  # noqa: B023
                                             report=False), 2)
            lv = T.compress_ktx2(src, fmt, kind=kind, quality=q, mips=False, report_texels=None).report["levels"][0]
            if kind == "normal":
                fig = f"mean {lv['mean_deg']:.2f} deg, p99 {lv['p99_deg']:.2f} deg"
            elif kind == "hdr":
                fig = f"{lv['log2_rmse_stops']:.4f} stops, median {100 * lv['median_rel_error']:.2f} %"
            else:
                fig = f"PSNR R/G/B {'/'.join(f'{v:.2f}' for v in lv['psnr_db'][:3])} dB"
            print(f"| {fmt} | {q} | {fig} | {t:.3f} s |")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=4096)
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--table-size", type=int, default=1024)
    ap.add_argument("--knob-size", type=int, default=512)
    ap.add_argument("--sizes-only", action="store_true")
    ap.add_argument("--cases", default="bc5,bc7", help="comma-separated: bc5, bc7")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        print(f"encoder {B.encoder_version()}, {args.threads} thread(s), {args.size}^2 with all mips")
        cases = [] if args.sizes_only else args.cases.split(",")
        if "bc5" in cases:
            nm = fbm_normals(args.size, 1)
            bench_target("BC5 fast normal map", nm, "bc5", "normal", "bc5", args.threads, args.rounds, folder)
            del nm
        if "bc7" in cases:
            col = photo_like(args.size, 2)
            bench_target("BC7 fast colour map", col, "bc7", "color", "bc7", args.threads, args.rounds, folder)
            del col
        if args.table_size:
            size_table(args.threads, folder, args.table_size)
        if args.knob_size:
            quality_table(args.threads, args.knob_size)


if __name__ == "__main__":
    main()
