"""Rebuild the pictures of docs/derived.md: ``python docs/images/make_derived_images.py``.

Occlusion, bent normals, curvature and cavity of the procedural paving stones (bakery.samples.paving_height,
called read-only), and the mips of the procedural leaf card (bakery.relief.examples.leaf_card) with and without
alpha-coverage preservation. Writes small labelled 8-bit PNG panels into docs/images/.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from bakery.color import linear_to_srgb, srgb_to_linear  # noqa: E402
from bakery.mips import color_mips  # noqa: E402
from bakery.relief import curvature_maps, occlusion_from_height  # noqa: E402
from bakery.relief.examples import leaf_card  # noqa: E402
from bakery.samples import paving_height  # noqa: E402

PANEL = 160


def label(img: np.ndarray, text: str, size: int = PANEL) -> np.ndarray:
    import cv2

    out = np.ascontiguousarray(np.clip(img, 0, 1), dtype=np.float32)
    if out.ndim == 2:
        out = np.repeat(out[:, :, None], 3, axis=2)
    interp = cv2.INTER_AREA if out.shape[0] > size else cv2.INTER_NEAREST
    out = cv2.resize(out, (size, size), interpolation=interp)
    out = np.ascontiguousarray((out * 255 + 0.5).astype(np.uint8))
    cv2.rectangle(out, (0, 0), (out.shape[1], 18), (0, 0, 0), -1)
    cv2.putText(out, text, (4, 13), cv2.FONT_HERSHEY_SIMPLEX, 0.42, (255, 255, 255), 1, cv2.LINE_AA)
    return out


def write(name: str, panels: list[np.ndarray]) -> None:
    import cv2

    row = np.concatenate(panels, axis=1)
    cv2.imwrite(str(HERE / name), np.ascontiguousarray(row[:, :, ::-1]))
    print("wrote", HERE / name)


def relief_images() -> None:
    size = 256
    h = paving_height(size)
    s = size / 32.0  # the normal bake's default strength: the full range is 1/32 of the width deep
    ao, bent = occlusion_from_height(h, strength=s, directions=16, bent_normals=True)
    m = curvature_maps(h, strength=s, scale=2.0)
    write("derived_relief.png", [
        label(h, "height (paving stones)"),
        label(ao, "occlusion, 16 azimuths"),
        label(bent * 0.5 + 0.5, "bent normals (+Y up)"),
        label(m.encoded, "curvature (2 texels)"),
        label(m.cavity, "cavity"),
    ])


def over_grey(rgba: np.ndarray, cutoff: float | None) -> np.ndarray:
    """Composite a stored sRGB RGBA level over mid grey, alpha-tested at ``cutoff`` (or blended)."""
    a = rgba[:, :, 3:]
    if cutoff is not None:
        a = (a >= cutoff).astype(np.float32)
    lin = srgb_to_linear(rgba[:, :, :3]) * a + np.float32(0.2) * (1 - a)
    return linear_to_srgb(lin)


def mip_images() -> None:
    card = leaf_card(256)
    plain = color_mips(card)
    cut = 0.75
    kept = color_mips(card, alpha_cutoff=cut)
    levels = [2, 3, 4, 5]
    top = [label(over_grey(card, cut), "level 0, alpha >= 0.75", 160)]
    top += [label(over_grey(plain[i], cut), f"level {i}, plain", 160) for i in levels]
    bottom = [label(over_grey(card, None), "level 0, blended", 160)]
    bottom += [label(over_grey(kept[i], cut), f"level {i}, coverage kept", 160) for i in levels]
    import cv2

    grid = np.concatenate([np.concatenate(top, axis=1), np.concatenate(bottom, axis=1)], axis=0)
    cv2.imwrite(str(HERE / "derived_leaf_mips.png"), np.ascontiguousarray(grid[:, :, ::-1]))
    print("wrote", HERE / "derived_leaf_mips.png")
    board = (np.indices((8, 8)).sum(axis=0) % 2).astype(np.float32)[:, :, None].repeat(3, axis=2)
    naive = np.full((4, 4, 3), 0.5, np.float32)  # averaging the stored codes
    right = color_mips(board)[1]
    write("derived_checker_mips.png", [label(board, "checker, level 0", 160),
                                       label(naive, "codes averaged: 128", 160),
                                       label(right, "light averaged: 188", 160)])


if __name__ == "__main__":
    relief_images()
    mip_images()
