"""Make the pictures of docs/roughness.md from the demo scene (bakery.samples).

    PYTHONPATH=. python docs/images/make_roughness_images.py
"""

from __future__ import annotations

from pathlib import Path

import cv2
import numpy as np

from bakery.io import write_image
from bakery.microfacet import d_beckmann, d_blinn_phong, d_ggx
from bakery.roughness import roughness_from_exponent, roughness_mips
from bakery.samples import paving_exponent, paving_height

HERE = Path(__file__).parent
SIZE = 256
NORMAL_STRENGTH = 8.0  # texels per height unit, as in the demo step


def label(img: np.ndarray, text: str) -> np.ndarray:
    """Grey (H, W) or RGB (H, W, 3) in [0, 1] -> RGB with a caption strip on top."""
    if img.ndim == 2:
        img = np.repeat(img[:, :, None], 3, axis=2)
    strip = np.full((22, img.shape[1], 3), 255, np.uint8)
    cv2.putText(strip, text, (4, 16), cv2.FONT_HERSHEY_SIMPLEX, 0.42, (0, 0, 0), 1, cv2.LINE_AA)
    return np.concatenate([strip, np.rint(np.clip(img, 0, 1) * 255).astype(np.uint8)], axis=0)


def row(panels: list[np.ndarray], gap: int = 6) -> np.ndarray:
    h = max(p.shape[0] for p in panels)
    out = []
    for i, p in enumerate(panels):
        if i:
            out.append(np.full((h, gap, 3), 255, np.uint8))
        out.append(np.pad(p, ((0, h - p.shape[0]), (0, 0), (0, 0)), constant_values=255))
    return np.concatenate(out, axis=1)


def upscale(level: np.ndarray, size: int) -> np.ndarray:
    return cv2.resize(level, (size, size), interpolation=cv2.INTER_NEAREST)


def conversion_picture() -> None:
    height = paving_height(SIZE)
    n = paving_exponent(height)
    shown = (np.log(n) - np.log(8)) / (np.log(400) - np.log(8))
    peak = roughness_from_exponent(n)
    width = roughness_from_exponent(n, rule="width")
    g = np.rint(np.log2(n) / 13 * 255) / 255
    from_gloss = roughness_from_exponent(g.astype(np.float32), encoding="gloss-exp", gloss_base=2, gloss_scale=13)
    diff = np.abs(from_gloss - peak) * 50
    img = row([label(shown, "exponent, 8 to 400 (log)"), label(peak, "roughness, peak rule"),
               label(width, "roughness, width rule"), label(diff, "|8-bit gloss - exact| x50")])
    write_image(HERE / "roughness_from_exponent.png", img / 255.0)


def lobe_picture() -> None:
    """D(theta)/D(0) of Blinn-Phong n = 32 and the GGX / Beckmann lobes each rule gives."""
    w, h, pad = 640, 300, 40
    img = np.full((h + 2 * pad, w + 2 * pad, 3), 255, np.uint8)
    theta = np.radians(np.linspace(0, 30, 600))
    c = np.cos(theta)
    n = 32.0
    curves = [("Blinn-Phong n = 32", d_blinn_phong(c, n), (0, 0, 0))]  # RGB 0-255
    for rule, style in (("peak", 0), ("width", 1)):
        a = float(roughness_from_exponent(np.float64(n), target="alpha", rule=rule))
        m = float(roughness_from_exponent(np.float64(n), target="beckmann", rule=rule))
        curves.append((f"GGX, {rule} rule (alpha {a:.3f})", d_ggx(c, a),
                       (215, 50, 25) if style else (25, 75, 215)))
        curves.append((f"Beckmann, {rule} rule (m {m:.3f})", d_beckmann(c, m),
                       (230, 150, 25) if style else (50, 175, 75)))
    top = max(float(v[0]) for _, v, _ in curves)
    for k, (name, v, color) in enumerate(curves):
        pts = np.stack([pad + theta / theta[-1] * w, pad + h - v / top * h], axis=1).astype(np.int32)
        cv2.polylines(img, [pts], False, color, 2 if k == 0 else 1, cv2.LINE_AA)
        cv2.putText(img, name, (pad + w - 300, pad + 20 + 18 * k), cv2.FONT_HERSHEY_SIMPLEX, 0.45, color, 1,
                    cv2.LINE_AA)
    cv2.line(img, (pad, pad + h), (pad + w, pad + h), (0, 0, 0), 1)
    cv2.line(img, (pad, pad), (pad, pad + h), (0, 0, 0), 1)
    for deg in range(0, 31, 5):
        x = pad + int(deg / 30 * w)
        cv2.putText(img, f"{deg}", (x - 6, pad + h + 16), cv2.FONT_HERSHEY_SIMPLEX, 0.4, (0, 0, 0), 1,
                    cv2.LINE_AA)
    cv2.putText(img, "angle from the normal (degrees); D scaled to the highest peak", (pad, pad + h + 34),
                cv2.FONT_HERSHEY_SIMPLEX, 0.45, (0, 0, 0), 1, cv2.LINE_AA)
    write_image(HERE / "roughness_lobes.png", img / 255.0)


def antialias_picture() -> None:
    from bakery.normals import normal_from_height

    height = paving_height(SIZE)
    normals = normal_from_height(height, strength=NORMAL_STRENGTH)
    base = roughness_from_exponent(paving_exponent(height))
    flat = np.zeros_like(normals)
    flat[..., 2] = 1
    plain = roughness_mips(flat, base)  # alpha^2 averaged, no normal spread
    wide = roughness_mips(normals, base)
    show = 128
    top = [label(upscale(plain[k], show), f"level {k}: plain") for k in (0, 2, 3, 4, 5)]
    bottom = [label(upscale(wide[k], show), f"level {k}: anti-aliased") for k in (0, 2, 3, 4, 5)]
    normal_panel = label(cv2.resize(normals * 0.5 + 0.5, (show, show), interpolation=cv2.INTER_AREA), "normal map")
    top_row = row([normal_panel] + top)
    bottom_row = row([np.full((show + 22, show, 3), 255, np.uint8)] + bottom)
    gap = np.full((6, top_row.shape[1], 3), 255, np.uint8)
    write_image(HERE / "roughness_antialias.png", np.concatenate([top_row, gap, bottom_row], axis=0) / 255.0)


if __name__ == "__main__":
    conversion_picture()
    lobe_picture()
    antialias_picture()
