"""Before/after comparison of two versions of a library: assets paired by relative path, each level compared.

Numbers (per mip level present in both versions with the same size):

- normal maps: the angle between the old and the new unit normal of every texel, in degrees,
  ``degrees(arccos(clip(n_old · n_new, −1, 1)))``, each version decoded with its own green-channel convention
  (its manifest's ``y``): mean and maximum;
- every other map: the peak signal-to-noise ratio PSNR = 10 log10(R² / MSE) over all channels, in dB
  (Gonzalez & Woods 2008, "Digital Image Processing", 3rd ed., section 8.1.4; the definition of
  ``skimage.metrics.peak_signal_noise_ratio``), with the peak R = 1 for integer files (their values are in
  [0, 1]) and R = max − min of the old level for float files. Identical levels give ∞.

The difference picture is level 0's per-texel angle (normal maps) or mean absolute difference over the channels
(others), scaled so its largest value is white, in OpenCV's "inferno" colour map.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError


def psnr(old: np.ndarray, new: np.ndarray, *, data_range: float) -> float:
    """PSNR in dB of ``new`` against ``old`` (same shape), peak ``data_range``; ``inf`` when they are equal.

    Examples
    --------
    >>> round(psnr(np.zeros(4), np.full(4, 0.1), data_range=1.0), 6)   # MSE 0.01
    20.0
    """
    a, b = np.asarray(old, np.float64), np.asarray(new, np.float64)
    if a.shape != b.shape:
        raise BakeryError(f"cannot compare shapes {a.shape} and {b.shape}")
    if not data_range > 0:
        raise BakeryError(f"the peak of a PSNR must be positive; got {data_range}")
    mse = float(np.mean((a - b) ** 2))
    return math.inf if mse == 0 else 10 * math.log10(data_range * data_range / mse)


def angle_degrees(old: np.ndarray, new: np.ndarray) -> np.ndarray:
    """Per-texel angle in degrees between unit vectors ``old`` and ``new`` (..., 3)."""
    dot = np.sum(np.asarray(old, np.float64) * np.asarray(new, np.float64), axis=-1)
    return np.degrees(np.arccos(np.clip(dot, -1.0, 1.0)))


def peak_of(level: np.ndarray, bits: str) -> float:
    """The PSNR peak of a level: 1 for integer files, max − min for float ones (1 when constant)."""
    if bits in ("8", "16"):
        return 1.0
    finite = level[np.isfinite(level)]
    span = float(finite.max() - finite.min()) if finite.size else 0.0
    return span if span > 0 else 1.0


def _normals(level: np.ndarray, y: str | None) -> np.ndarray:
    from bakery.preview.inputs import decode_normal_pixels

    if level.ndim == 4:
        return np.stack([decode_normal_pixels(f, green=y or "up") for f in level])
    return decode_normal_pixels(level, green=y or "up")


def compare_level(old: np.ndarray, new: np.ndarray, *, kind: str, bits: str, y_old: str | None = None,
                  y_new: str | None = None) -> tuple[str, float, float | None, np.ndarray]:
    """Compare one level: ``(measure, value, max_or_None, difference map)`` where the measure is ``"angle"``
    (value = mean degrees, max = largest) for normal maps and ``"psnr"`` (dB) otherwise; the difference map has
    the level's texel shape without channels."""
    if old.shape[:-1] != new.shape[:-1]:
        raise BakeryError(f"sizes differ: {old.shape[-2]}x{old.shape[-3]} and {new.shape[-2]}x{new.shape[-3]}")
    if kind == "normal":
        ang = angle_degrees(_normals(old, y_old), _normals(new, y_new))
        return "angle", float(ang.mean()), float(ang.max()), ang
    if old.shape != new.shape:
        raise BakeryError(f"channel counts differ: {old.shape[-1]} and {new.shape[-1]}")
    a = np.nan_to_num(old.astype(np.float64))
    b = np.nan_to_num(new.astype(np.float64))
    return "psnr", psnr(a, b, data_range=peak_of(old, bits)), None, np.abs(a - b).mean(axis=-1)


def difference_picture(diff: np.ndarray, size: int) -> tuple[np.ndarray, float]:
    """Display values (RGB, [0, 1]) of a difference map (2D, or 6 cube faces shown as a cross), scaled so its
    largest value is white; returns the picture and that value."""
    import cv2

    from bakery.preview.sheet import _fit, cross

    d = np.asarray(diff, np.float32)
    if d.ndim == 3:  # six faces
        d = cross(d[..., None])[..., 0]
    top = float(d.max()) if d.size else 0.0
    scaled = np.clip(d / top, 0, 1) if top > 0 else np.zeros_like(d)
    rgb = cv2.applyColorMap(np.rint(scaled * 255).astype(np.uint8), cv2.COLORMAP_INFERNO)[..., ::-1]
    return _fit(rgb.astype(np.float32) / 255, size), top


def _fmt(measure: str, value: float, top: float | None) -> str:
    if measure == "angle":
        return f"angle mean {value:.3f}°, max {top:.3f}°"
    return "PSNR ∞ (identical)" if math.isinf(value) else f"PSNR {value:.2f} dB"


def compare_entries(old_files: Sequence[tuple[Path, Path]], new_files: Sequence[tuple[Path, Path]], *,
                    thumb: int = 160, progress=None) -> list:
    """The cards of a comparison: one per asset key found in either version (old and new pictures, the
    difference of level 0, and a row of numbers per level; assets of one side only say so)."""
    from bakery.classify import map_kind
    from bakery.preview.assets import group_assets, knowledge, read_forms
    from bakery.preview.sheet import SheetEntry, cross, display_range, thumbnail

    old_assets = {a.key: a for a in group_assets(list(old_files))}
    new_assets = {a.key: a for a in group_assets(list(new_files))}
    keys = sorted(set(old_assets) | set(new_assets))
    entries = []
    for i, key in enumerate(keys):
        sides = []
        for assets in (old_assets, new_assets):
            a = assets.get(key)
            if a is None:
                sides.append(None)
                continue
            know = knowledge(a.main)
            form = read_forms(a)[0]
            sides.append((a, know, form))
        a_any = (sides[1] or sides[0])[0]
        e = SheetEntry(a_any.name_of(a_any.main))
        e.files = sorted({s[0].name_of(m.path) for s in sides if s for m in s[0].members})
        pics = []
        for side in sides:
            if side is None:
                pics.append(None)
                continue
            a, know, form = side
            lv0 = next((lv for lv in form.levels if lv is not None), None)
            if lv0 is None:
                pics.append(None)
                continue
            kind = know.kind or ("environment" if lv0.ndim == 4 else
                                 map_kind(lv0, is_float=form.bits in ("half", "float"), name=Path(a.main).name))
            pics.append((kind, lv0))
        if sides[0] is None or sides[1] is None:
            e.numbers = [("only in", "the old set" if sides[1] is None else "the new set")]
            e.preview_note = "no difference: the asset is in one set only"
        kinds = [p[0] for p in pics if p is not None]
        kind = kinds[-1] if kinds else "unreadable"
        e.kind = kind
        # both pictures with the old level's exposure and range, so they can be compared by eye
        ref = next((p for p in pics if p is not None), None)
        if ref is not None:
            bits = next(s[2].bits for s in sides if s is not None)
            scale = display_range(ref[1] if ref[1].ndim == 3 else cross(ref[1]), kind, bits=bits)
            shown = [None if p is None else thumbnail(p[1], kind, bits=bits, size=thumb, scale=scale)
                     for p in pics]
            e.old, e.thumbnail = shown
            lv = ref[1]
            e.height, e.width, e.channels = lv.shape[-3], lv.shape[-2], lv.shape[-1]
            e.bits = bits
        if sides[0] is not None and sides[1] is not None:
            (_, k_old, f_old), (_, k_new, f_new) = sides
            e.about = f"old: {k_old.note}; new: {k_new.note}"
            for k in range(max(len(f_old.levels), len(f_new.levels))):
                a = f_old.levels[k] if k < len(f_old.levels) else None
                b = f_new.levels[k] if k < len(f_new.levels) else None
                if a is None or b is None:
                    e.numbers.append((f"level {k}", "in one set only"))
                    continue
                try:
                    measure, value, top, diff = compare_level(a, b, kind=kind, bits=f_old.bits,
                                                              y_old=k_old.y, y_new=k_new.y)
                except BakeryError as exc:
                    e.numbers.append((f"level {k}", str(exc)))
                    continue
                e.numbers.append((f"level {k}", _fmt(measure, value, top)))
                if k == 0:
                    e.preview, peak = difference_picture(diff, thumb)
                    unit = "°" if measure == "angle" else ""
                    what = "angle" if measure == "angle" else "|new − old|"
                    e.preview_note = f"difference: {what}, white = {peak:.3g}{unit}"
            if e.preview is None and not e.preview_note:
                e.preview_note = "no difference picture: level 0 cannot be compared"
        if progress is not None:
            progress((i + 1) / len(keys), key)
        entries.append(e)
    return entries

