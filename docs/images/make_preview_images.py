"""Rebuild the pictures of docs/preview.md: ``python docs/images/make_preview_images.py``.

Uses the procedural demo scene (bakery.samples): paving-stone heights baked to normals in memory
(bakery.normals), exponents converted to roughness (bakery.roughness), the built-in sky, and the demo's
procedural leaf card (bakery.relief.examples) for the cut-out picture. The contact-sheet
picture is a screenshot, in headless Chromium (Debian's ``chromium`` package), of ``bakery sheet`` over the
sample library baked by its recipe (``bakery batch``): one card per asset, KTX2 levels as strips.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from bakery.color import srgb_to_linear  # noqa: E402
from bakery.io import write_image  # noqa: E402
from bakery.normals import normal_from_height  # noqa: E402
from bakery.preview.lighting import default_lighting  # noqa: E402
from bakery.preview.render import Material, preview_image, turntable_frames  # noqa: E402
from bakery.roughness import roughness_from_exponent  # noqa: E402
from bakery.samples import paving_exponent, paving_height  # noqa: E402

STRENGTH = 8.0  # texels per height unit for the demo stones (our own choice)


def label(img: np.ndarray, text: str) -> np.ndarray:
    import cv2

    out = np.ascontiguousarray((np.clip(img, 0, 1) * 255 + 0.5).astype(np.uint8))
    cv2.rectangle(out, (0, 0), (out.shape[1], 20), (0, 0, 0), -1)
    cv2.putText(out, text, (5, 14), cv2.FONT_HERSHEY_SIMPLEX, 0.45, (255, 255, 255), 1, cv2.LINE_AA)
    return out.astype(np.float32) / 255


def paving() -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    h = paving_height(256)
    n = normal_from_height(h, strength=STRENGTH)
    r = np.asarray(roughness_from_exponent(paving_exponent(h)), np.float32)
    t = np.clip((h - 0.1) / 0.7, 0, 1)[..., None]
    color = (np.array([0.16, 0.15, 0.14]) * (1 - t) + np.array([0.45, 0.41, 0.36]) * t).astype(np.float32)
    return h, n, r, color


def main() -> None:
    light = default_lighting()
    h, n, r, color = paving()
    mat = Material(normals=n, roughness=r, base_color=color)
    img, _ = preview_image(mat, light, size=320)
    write_image(HERE / "preview_paving.png", img, bits="8")

    down = n * np.array([1, -1, 1], np.float32)  # what a Y-down file decodes to when read as Y-up
    a, _ = preview_image(Material(normals=n, roughness=0.35), light, size=256, views="ball")
    b, _ = preview_image(Material(normals=down, roughness=0.35), light, size=256, views="ball")
    write_image(HERE / "preview_y_conventions.png",
                np.concatenate([label(a, "Y-up map read as Y-up"), label(b, "Y-down map read as Y-up")], 1),
                bits="8")

    from bakery.preview.inputs import alpha_test_for
    from bakery.relief.examples import leaf_card

    card = leaf_card(256)  # sRGB colour, linear alpha
    leaf = Material(base_color=srgb_to_linear(card[..., :3]), roughness=0.5, alpha_test=alpha_test_for(card))
    opaque = Material(base_color=srgb_to_linear(card[..., :3]), roughness=0.5)
    a, _ = preview_image(opaque, light, size=256)
    b, _ = preview_image(leaf, light, size=256)
    write_image(HERE / "preview_cutout.png", np.concatenate([label(a, "alpha ignored"),
                                                            label(b, "alpha-tested at 0.5")], 0), bits="8")

    frames, _ = turntable_frames(mat, light, 16, size=192)
    strip = [label(frames[i], f"spin {22.5 * i:g} deg") for i in (0, 1, 2, 3)]
    write_image(HERE / "preview_turntable.png", np.concatenate(strip, 1), bits="8")

    with tempfile.TemporaryDirectory() as tmp:
        from bakery.batch import run
        from bakery.cli import run as cli
        from bakery.samples import library, write_library_recipe

        library(Path(tmp) / "library", size=64, sky_width=128)
        report = run(write_library_recipe(Path(tmp) / "library"), jobs=2)
        if report.exit_code != 0:
            sys.exit("the sample library did not bake")
        out = Path(tmp) / "sheet.html"
        code = cli(["sheet", str(Path(tmp) / "library-baked"), "-o", str(out), "--title", "sample library",
                    "--quiet"])
        if code != 0:
            sys.exit("bakery sheet failed")
        exe = shutil.which("chromium")
        if exe is None:
            print("chromium not installed: preview_sheet.png not rebuilt")
            return
        shot = Path(tmp) / "shot.png"
        profile = Path(tmp) / "profile"
        subprocess.run([exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                        "--disable-background-networking", "--disable-component-update", "--disable-sync",
                        f"--user-data-dir={profile}", "--window-size=1280,1000", f"--screenshot={shot}",
                        out.as_uri()], check=True, capture_output=True, timeout=120)
        shutil.copyfile(shot, HERE / "preview_sheet.png")


if __name__ == "__main__":
    main()
