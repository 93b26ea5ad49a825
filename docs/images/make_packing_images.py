"""Rebuild the pictures of docs/packing.md: ``python docs/images/make_packing_images.py``.

On the procedural paving stones (bakery.samples, called read-only) it bakes in a temporary folder, through the
bakes the commands run: the normal map, roughness from the exponent map, the anti-aliased roughness chain, the
ambient occlusion and an invented metal-stud mask, then packs occlusion / roughness / metalness into R, G, B with
mips. Writes small labelled 8-bit PNG panels into docs/images/.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from make_derived_images import label  # noqa: E402  (the same panel labels as the derived-map pictures)

from bakery.bakes import get_bake, params_from_mapping, run_bake  # noqa: E402
from bakery.io import read_image, write_image  # noqa: E402
from bakery.samples import paving_exponent, paving_height  # noqa: E402


def write(name: str, rows: list[list[np.ndarray]]) -> None:
    import cv2

    img = np.concatenate([np.concatenate(r, axis=1) for r in rows], axis=0)
    cv2.imwrite(str(HERE / name), np.ascontiguousarray(img[:, :, ::-1]))
    print("wrote", HERE / name)


def studs(size: int) -> np.ndarray:
    """Invented metal studs: discs on an 8 x 8 grid (1 metal, 0 stone)."""
    y, x = (np.mgrid[0:size, 0:size] + 0.5) * (8.0 / size)
    d = np.hypot(x - np.floor(x) - 0.5, y - np.floor(y) - 0.5)
    return (d < 0.16).astype(np.float32)


def bake(name: str, inputs: dict, out: Path, **params) -> list[Path]:
    return run_bake(name, inputs, out, params_from_mapping(get_bake(name), params, "docs"))


def main() -> None:
    size = 256
    with tempfile.TemporaryDirectory() as tmp:
        t = Path(tmp)
        h = paving_height(size)
        write_image(t / "paving_height.png", h, bits="16")
        write_image(t / "paving_exponent.exr", paving_exponent(h), bits="half")
        write_image(t / "paving_metalness.png", studs(size), bits="8")
        bake("normal", {"height": t / "paving_height.png"}, t / "paving_normal.png")
        bake("roughness", {"specular": t / "paving_exponent.exr"}, t / "paving_roughness.png", bits="8")
        bake("antialias", {"normal": t / "paving_normal.png", "roughness": t / "paving_roughness.png"},
             t / "paving_roughness_aa.png")
        bake("occlusion", {"height": t / "paving_height.png"}, t / "paving_occlusion.png", bits="8")
        bake("pack", {"r": t / "paving_occlusion.png", "g": t / "paving_roughness_aa.png",
                      "b": t / "paving_metalness.png"}, t / "paving_orm.png", mips=True,
             **{"b-role": "metalness"})
        bake("pack", {"g": t / "paving_roughness.png", "b": t / "paving_metalness.png"}, t / "plain_orm.png",
             mips=True, **{"r-constant": 1.0, "g-role": "roughness", "b-role": "metalness"})

        def px(name: str) -> np.ndarray:
            return read_image(t / name).pixels

        orm = px("paving_orm.png")
        write("packing_orm.png", [[label(orm, "packed texture (RGB)"),
                                   label(orm[:, :, 0], "R = occlusion"), label(orm[:, :, 1], "G = roughness (aa)"),
                                   label(orm[:, :, 2], "B = metalness (studs)")]])
        top = [label(px(f"paving_orm.mip{k:02d}.png")[:, :, 1], f"G level {k}: aa chain", 120) for k in (2, 3, 4, 5)]
        bottom = [label(px(f"plain_orm.mip{k:02d}.png")[:, :, 1], f"G level {k}: averaged", 120)
                  for k in (2, 3, 4, 5)]
        write("packing_mips.png", [top, bottom])


if __name__ == "__main__":
    main()
