"""Image reads and writes with progress against one-call floors measured in the same run: a PNG read with a
progress callback (bakery's strip reader) against ``cv2.imdecode`` of the same bytes plus the RGB swap, a TIFF
read with progress against tifffile's ``page.asarray()``, a TIFF write with progress against one
``tifffile.imwrite`` of the whole array; and the longest time between two progress calls of each.

    python tests/perf/bench_image_io.py               # 8192^2 (the sizes of tests/perf/progress_gaps.py)
    python tests/perf/bench_image_io.py --size 2048   # a quick look

The images are procedural: smooth waves plus fine seeded noise, as a baked map holds. Not collected by pytest.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
from timing import best  # noqa: E402

from bakery.io.images import _write_tiff, read_image, write_image  # noqa: E402


def waves(n: int, channels: int) -> np.ndarray:
    rng = np.random.default_rng(0)
    x = np.arange(n, dtype=np.float32) * np.float32(2 * np.pi / n)
    out = np.empty((n, n, channels), np.float32)
    for c in range(channels):
        h = np.sin((3 + c) * x)[None, :] * np.cos((5 + 2 * c) * x)[:, None] * np.float32(0.45) + np.float32(0.5)
        out[:, :, c] = h + rng.random((n, n), dtype=np.float32) * np.float32(0.04)
    return np.clip(out, 0, 1)


def gaps(fn) -> tuple[float, float]:
    """(seconds, longest time without a progress call, start and end included)."""
    marks = [time.perf_counter()]
    fn(lambda f, w: marks.append(time.perf_counter()))
    marks.append(time.perf_counter())
    return marks[-1] - marks[0], max(b - a for a, b in zip(marks, marks[1:], strict=False))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=8192)
    ap.add_argument("--repeat", type=int, default=2)
    args = ap.parse_args()
    import cv2
    import tifffile

    n = args.size
    work = Path(tempfile.mkdtemp(prefix="bakery-bench-io-"))
    files = {"png 16-bit RGB": (work / "n16.png", 3, "16"), "png 8-bit RGBA": (work / "c8.png", 4, "8"),
             "tiff 16-bit RGB": (work / "n16.tif", 3, "16")}
    for path, channels, bits in files.values():
        write_image(path, waves(n, channels), bits=bits)
    print(f"{n}x{n}; seconds are the best of {args.repeat}; ratio = case / floor (below 1: faster)")
    for name, (path, _, _) in files.items():
        if path.suffix == ".png":
            def floor(path=path):
                a = cv2.imdecode(np.fromfile(path, np.uint8), cv2.IMREAD_UNCHANGED)
                return cv2.cvtColor(a, cv2.COLOR_BGR2RGB if a.shape[2] == 3 else cv2.COLOR_BGRA2RGBA)
            floor_name = "cv2.imdecode + RGB"
        else:
            def floor(path=path):
                with tifffile.TiffFile(path) as tif:
                    return tif.pages[0].asarray()
            floor_name = "page.asarray()"
        from bakery.io.images import _read_png, _read_tiff

        reader = _read_png if path.suffix == ".png" else _read_tiff
        case = best(lambda r=reader, p=path: r(p, progress=lambda f, w: None), args.repeat)
        base = best(floor, args.repeat)
        total, gap = gaps(lambda cb, p=path: read_image(p, progress=cb))
        print(f"read  {name:16s} samples {case:6.2f} s  {floor_name} {base:6.2f} s  ratio {case / base:5.2f}"
              f"   read_image to float: {total:5.2f} s, longest gap {gap:4.2f} s")
    data = (waves(n, 3) * 65535).round().astype(np.uint16)
    out = work / "w.tif"
    case = best(lambda: _write_tiff(out, data, "16", progress=lambda f, w: None), args.repeat)
    base = best(lambda: tifffile.imwrite(work / "f.tif", data, photometric="rgb", compression="zlib",
                                         metadata=None), args.repeat)
    same = out.read_bytes() == (work / "f.tif").read_bytes()
    total, gap = gaps(lambda cb: _write_tiff(out, data, "16", progress=cb))
    print(f"write tiff 16-bit RGB  strips {case:6.2f} s  tifffile.imwrite {base:6.2f} s  ratio {case / base:5.2f}"
          f"   longest gap {gap:4.2f} s; same bytes: {same}")


if __name__ == "__main__":
    main()
