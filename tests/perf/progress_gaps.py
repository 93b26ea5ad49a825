"""Progress audit: every registered bake at a large, realistic size, with a callback that records when it is
called. Prints one row per case: the total seconds and the longest time the bar would stand still (from the
start to the first call, between two calls, from the last call to the end), and whether the fractions rose and
ended at 1. The product's rule (common practice for progress displays): no gap over about 2 s.

    python tests/perf/progress_gaps.py                 # every case (8192^2 maps, 8192x4096 panoramas)
    python tests/perf/progress_gaps.py --scale 4       # every size divided by 4 (a quick look)
    python tests/perf/progress_gaps.py --only normal,mips

The inputs are procedural (sums of waves and seeded noise), written once into ``--work`` (default: a folder
under the system temporary folder) and reused by later runs. Not collected by pytest.
"""

from __future__ import annotations

import argparse
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

from bakery.bakes import all_bakes, get_bake, run_bake
from bakery.io.images import write_image


def _waves(n: int, m: int, seed: int) -> np.ndarray:
    """Heights in [0, 1]: a few tiling waves plus fine seeded noise, float32 (m rows, n columns)."""
    rng = np.random.default_rng(seed)
    x = np.arange(n, dtype=np.float32) * np.float32(2 * np.pi / n)
    y = np.arange(m, dtype=np.float32)[:, None] * np.float32(2 * np.pi / m)
    h = np.zeros((m, n), np.float32)
    for k in (1, 3, 7, 19):
        h += np.sin(k * x + seed) * np.cos(k * y) / np.float32(k)
    h += rng.random((m, n), dtype=np.float32) * np.float32(0.05)
    h -= h.min()
    h /= h.max()
    return h


def _normals(h: np.ndarray, scale: float) -> np.ndarray:
    gy, gx = np.gradient(h * np.float32(scale))
    n = np.stack([-gx, gy, np.ones_like(h)], axis=-1)
    n /= np.linalg.norm(n, axis=-1, keepdims=True)
    return (n * 0.5 + 0.5).astype(np.float32)


def make_inputs(work: Path, size: int, pano: int) -> dict[str, Path]:
    """The input files (written once per size)."""
    from bakery.samples import sky_panorama

    work.mkdir(parents=True, exist_ok=True)
    files = {
        "height": work / f"height{size}.png", "normal": work / f"normal{size}.png",
        "detail": work / f"detail{size}.png", "color": work / f"color{size}.png",
        "exponent": work / f"exponent{size}.exr", "rough": work / f"rough{size}.png",
        "pano": work / f"sky{pano}.exr", "pano_half": work / f"sky{pano // 2}.exr",
        "cube": work / f"cube{pano // 8}.exr",
    }
    if not files["height"].exists():
        h = _waves(size, size, 1)
        write_image(files["height"], h, bits="16")
        write_image(files["normal"], _normals(h, size / 16), bits="16")
        write_image(files["exponent"], 8 + 500 * h, bits="float")
        write_image(files["rough"], 0.2 + 0.6 * h, bits="8")
        d = _waves(size, size, 2)
        write_image(files["detail"], _normals(d, size / 64), bits="16")
        rgb = np.stack([h, d, 1 - h], axis=-1) * np.float32(0.8) + np.float32(0.1)
        alpha = np.clip(2 * d - 0.4, 0, 1)[..., None]
        write_image(files["color"], np.concatenate([rgb, alpha], axis=-1), bits="8")
    if not files["pano"].exists():
        write_image(files["pano"], sky_panorama(pano), bits="half")
        write_image(files["pano_half"], sky_panorama(pano // 2), bits="half")
        run_bake("env-convert", {"environment": files["pano_half"]}, files["cube"],
                 get_bake("env-convert").params(output_layout="cross-wide", face_size=pano // 8))
    return files


def cases(f: dict[str, Path], size: int, pano: int) -> list[tuple[str, str, dict, str, dict]]:
    """(case, bake, inputs, output name, parameters)."""
    return [
        ("normal png16", "normal", {"height": f["height"]}, "n.png", {}),
        ("normal ktx2 bc5", "normal", {"height": f["height"]}, "n.ktx2", {"ktx2_format": "bc5"}),
        ("normal exr", "normal", {"height": f["height"]}, "n.exr", {}),
        ("height png16", "height", {"normal": f["normal"]}, "h.png", {}),
        ("blend png16", "blend", {"base": f["normal"], "detail": f["detail"]}, "b.png", {}),
        ("normal-mips png16", "normal-mips", {"normal": f["normal"]}, "m.png", {}),
        ("normal-mips ktx2 bc5", "normal-mips", {"normal": f["normal"]}, "m.ktx2", {"ktx2_format": "bc5"}),
        ("normal-fix png16", "normal-fix", {"normal": f["normal"]}, "f.png", {"flip_y": True}),
        ("occlusion png16", "occlusion", {"height": f["height"]}, "o.png", {"bent_normals": True}),
        ("curvature png16", "curvature", {"height": f["height"]}, "c.png", {}),
        ("mips png8 RGBA", "mips", {"color": f["color"]}, "c.png", {}),
        ("mips ktx2 bc7", "mips", {"color": f["color"]}, "c.ktx2", {"ktx2_format": "bc7-srgb"}),
        ("pack png8 + mips", "pack", {"r": f["rough"], "g": f["height"], "b": f["rough"]}, "p.png",
         {"mips": True}),
        ("pack ktx2 bc7", "pack", {"r": f["rough"], "g": f["height"], "b": f["rough"]}, "p.ktx2",
         {"mips": True, "ktx2_format": "bc7"}),
        ("roughness exr->png16", "roughness", {"specular": f["exponent"]}, "r.png", {}),
        ("roughness exr->exr", "roughness", {"specular": f["exponent"]}, "r.exr", {}),
        ("antialias png16", "antialias", {"normal": f["normal"], "roughness": f["rough"]}, "a.png", {}),
        ("antialias ktx2 bc4", "antialias", {"normal": f["normal"], "roughness": f["rough"]}, "a.ktx2",
         {"ktx2_format": "bc4"}),
        ("env-convert pano->cross exr", "env-convert", {"environment": f["pano"]}, "e.exr",
         {"output_layout": "cross-wide"}),
        ("env-convert pano->ktx2 bc6h", "env-convert", {"environment": f["pano"]}, "e.ktx2",
         {"ktx2_format": "bc6h"}),
        ("env-convert cube->pano hdr", "env-convert", {"environment": f["cube"]}, "e.hdr",
         {"output_layout": "equirect"}),
        ("env-diffuse sh", "env-diffuse", {"environment": f["pano"]}, "d.json", {}),
        ("env-diffuse exact", "env-diffuse", {"environment": f["pano_half"]}, "d.json", {"method": "exact"}),
        ("env-lights", "env-lights", {"environment": f["pano"]}, "l.json", {}),
        ("env-specular final", "env-specular", {"environment": f["pano_half"]}, "s.ktx2", {}),
        ("env-specular final big", "env-specular", {"environment": f["pano"]}, "s.ktx2",
         {"face_size": 512, "loose": True}),
        ("env-lut 1024", "env-lut", {}, "t.exr", {"size": max(64, size // 8)}),
    ]


def measure(bake: str, inputs: dict, output: Path, params: dict) -> dict:
    """Run one bake with a recording callback; the gaps in seconds."""
    calls: list[tuple[float, float, str]] = []
    t0 = time.perf_counter()
    run_bake(bake, inputs, output, get_bake(bake).params(**params),
             progress=lambda f, w: calls.append((time.perf_counter(), f, w)))
    t1 = time.perf_counter()
    stamps = [t0] + [c[0] for c in calls] + [t1]
    gaps = np.diff(stamps)
    worst = int(np.argmax(gaps))
    where = ("start" if worst == 0 else calls[worst - 1][2]) + " -> " + \
        ("end" if worst == len(calls) else calls[worst][2])
    fr = [c[1] for c in calls]
    return {"total": t1 - t0, "first": gaps[0], "longest": gaps.max(), "last": gaps[-1], "calls": len(calls),
            "where": where, "rising": all(b >= a for a, b in zip(fr, fr[1:], strict=False)),
            "ends": bool(fr) and fr[-1] == 1.0}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scale", type=int, default=1, help="divide every size by this")
    ap.add_argument("--only", default="", help="comma-separated bake names or case names")
    ap.add_argument("--work", type=Path, default=Path(tempfile.gettempdir()) / "bakery-progress-gaps")
    a = ap.parse_args()
    warnings.simplefilter("ignore")  # the audit measures time; the inputs' warnings are beside the point
    size, pano = 8192 // a.scale, 8192 // a.scale
    files = make_inputs(a.work, size, pano)
    only = {s.strip() for s in a.only.split(",") if s.strip()}
    out = a.work / "out"
    out.mkdir(exist_ok=True)
    seen = set()
    print(f"maps {size}^2, panoramas {pano}x{pano // 2} and {pano // 2}x{pano // 4}, cube {pano // 8}")
    head = f"{'case':30} {'input':>11} {'total s':>8} {'first':>6} {'longest':>7} {'last':>6} {'calls':>6}  " \
           f"{'ok':3} longest between"
    print(head)
    print("-" * len(head))
    for case, bake, inputs, name, params in cases(files, size, pano):
        if only and bake not in only and case not in only:
            continue
        seen.add(bake)
        src = next(iter(inputs.values()), None)
        if src is None:
            what = f"{params['size']}^2"
        else:
            from bakery.io.images import image_size

            w, h = image_size(src)
            what = f"{w}x{h}"
        r = measure(bake, inputs, out / name, params)
        ok = "yes" if r["rising"] and r["ends"] else "NO"
        print(f"{case:30} {what:>11} {r['total']:8.1f} {r['first']:6.2f} {r['longest']:7.2f} {r['last']:6.2f} "
              f"{r['calls']:6d}  {ok:3} {r['where']}", flush=True)
    missing = set(all_bakes()) - seen
    if missing and not only:
        print("bakes without a case:", ", ".join(sorted(missing)))


if __name__ == "__main__":
    main()
