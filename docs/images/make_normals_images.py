"""Rebuild the pictures of docs/normals.md from the demo: ``python docs/images/make_normals_images.py``.

Runs the normal-map demo step on the procedural demo scene (bakery.samples) in a temporary folder and writes
small labelled 8-bit PNG panels into docs/images/.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from bakery.demo import _step_normals  # noqa: E402
from bakery.io import read_image, write_image  # noqa: E402
from bakery.normals import decode_normals  # noqa: E402
from bakery.samples import write_samples  # noqa: E402

PANEL = 192  # pixels per panel: small files for the docs
LIGHT = np.array([-0.5, 0.5, 0.707], np.float32)  # from the upper left, +Y up


def label(img: np.ndarray, text: str) -> np.ndarray:
    import cv2

    out = np.ascontiguousarray(np.clip(img, 0, 1), dtype=np.float32)
    if out.shape[0] > PANEL:
        out = cv2.resize(out, (PANEL, PANEL), interpolation=cv2.INTER_AREA)
    if out.ndim == 2:
        out = np.repeat(out[:, :, None], 3, axis=2)
    out = np.ascontiguousarray((out * 255 + 0.5).astype(np.uint8))
    cv2.rectangle(out, (0, 0), (out.shape[1], 18), (0, 0, 0), -1)
    cv2.putText(out, text, (4, 13), cv2.FONT_HERSHEY_SIMPLEX, 0.42, (255, 255, 255), 1, cv2.LINE_AA)
    return out.astype(np.float32) / 255


def blow_up(img: np.ndarray, size: int = 128) -> np.ndarray:
    """Nearest-neighbour enlargement so each texel of a small mip level stays visible."""
    import cv2

    return cv2.resize(np.ascontiguousarray(img), (size, size), interpolation=cv2.INTER_NEAREST)


def shade(n: np.ndarray) -> np.ndarray:
    """Lambert shading under a light from the upper left: shows which way the relief faces."""
    light = LIGHT / np.linalg.norm(LIGHT)
    return np.clip(0.15 + 0.85 * np.einsum("...i,i->...", n, light), 0, 1)


def row(*panels: np.ndarray, gap: int = 4) -> np.ndarray:
    h = max(p.shape[0] for p in panels)
    parts = []
    for i, p in enumerate(panels):
        p = p if p.ndim == 3 else np.repeat(p[:, :, None], 3, axis=2)
        pad = np.ones((h, p.shape[1], 3), np.float32)
        pad[: p.shape[0]] = p
        parts.append(pad)
        if i < len(panels) - 1:
            parts.append(np.ones((h, gap, 3), np.float32))
    return np.concatenate(parts, axis=1)


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp)
        inputs = write_samples(out / "inputs", size=256, sky_width=64)
        _step_normals(inputs, out)
        f = out / "normals"
        px = lambda p: read_image(p).pixels  # noqa: E731
        height = px(inputs["height"])[:, :, 0]
        normal = px(f / "paving_normal.png")
        n = decode_normals(normal)
        down = px(f / "paving_normal_ydown.png")
        back = px(f / "paving_height_from_normal.png")[:, :, 0]
        grain = px(f / "grain_normal.png")
        blended = px(f / "paving_normal_with_grain.png")
        write_image(HERE / "normals_from_height.png",
                    row(label(height, "height (16-bit)"), label(normal, "normal map, Y up"),
                        label(shade(n), "lit from upper left")), depth="u8")
        write_image(HERE / "normals_y_conventions.png",
                    row(label(normal, "Y up (OpenGL, glTF)"), label(down, "Y down (DirectX-style)")), depth="u8")
        write_image(HERE / "normals_round_trip.png",
                    row(label(height, "height"), label(back, "height from normal map")), depth="u8")
        write_image(HERE / "normals_blend.png",
                    row(label(normal, "base"), label(grain, "detail"), label(blended, "reoriented blend"),
                        label(shade(decode_normals(blended)), "blend, lit")), depth="u8")
        levels, lengths = [], []
        for i in range(1, 6):
            lv = px(f / "mips" / f"paving_normal.mip{i}.png")
            ln = px(f / "mips" / f"paving_normal.length.mip{i}.png")[:, :, 0]
            levels.append(label(blow_up(lv), f"mip {i}"))
            # stretch 0.7..1 to black..white so the spread is visible
            lengths.append(label(blow_up((ln - 0.7) / 0.3), f"|Na| mip {i}"))
        write_image(HERE / "normals_mips.png", np.concatenate([row(*levels), np.ones((4, row(*levels).shape[1], 3),
                    np.float32), row(*lengths)], axis=0), depth="u8")
    for p in sorted(HERE.glob("normals_*.png")):
        print(p.relative_to(HERE.parents[1]), p.stat().st_size // 1024, "KiB")


if __name__ == "__main__":
    main()
