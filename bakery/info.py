"""The lines ``bakery info`` prints for one file (kept apart from the CLI module to keep imports light)."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from bakery.classify import guess_kind
from bakery.io.images import read_image

BITS_NAMES = {"8": "8-bit integer", "16": "16-bit integer", "half": "16-bit float (half)",
               "float": "32-bit float"}


def describe(path: Path, *, max_pixels: int | None = None) -> list[str]:
    if Path(path).suffix.lower() == ".ktx2":
        return describe_ktx2(Path(path))
    img = read_image(path, max_pixels=max_pixels, allow_nonfinite=True)
    px = img.pixels
    h, w, c = px.shape
    lo, hi, mean, nan, inf = channel_stats(px)
    lines = [
        f"{path}",
        f"  format:   {img.format.upper()}",
        f"  size:     {w} x {h}",
        f"  channels: {c} ({_channel_names(c)})",
        f"  bits:     {BITS_NAMES[img.bits]}" + (" (stored as RGBE)" if img.format == "hdr" else ""),
    ]
    names = _channel_names(c).split(", ")
    for ch in range(c):
        if math.isfinite(mean[ch]):
            lines.append(f"  range {names[ch]}:  {lo[ch]:.6g} .. {hi[ch]:.6g}  (mean {mean[ch]:.6g})")
        else:
            lines.append(f"  range {names[ch]}:  no finite samples")
    lines.append(f"  NaN: {nan}  Inf: {inf}")
    lines.append(f"  looks like: {guess_kind(px, is_float=img.is_float, name=path)}")
    return lines


#: Samples per strip of :func:`channel_stats`: the temporaries stay a few MB whatever the image size.
STATS_TEXELS = 1 << 18


def channel_stats(pixels: np.ndarray) -> tuple[list[float], list[float], list[float], int, int]:
    """Per channel the smallest, largest and mean finite sample of ``(..., C)`` pixels (NaN where a channel has
    no finite sample), and the NaN and Inf counts over all channels; computed in strips of
    :data:`STATS_TEXELS` texels, so the memory beyond the pixels stays bounded (means summed in float64)."""
    c = pixels.shape[-1]
    flat = pixels.reshape(-1, c)
    lo = np.full(c, np.inf)
    hi = np.full(c, -np.inf)
    total = np.zeros(c)
    count = np.zeros(c, dtype=np.int64)
    nan = inf = 0
    for s in range(0, flat.shape[0], STATS_TEXELS):
        strip = flat[s:s + STATS_TEXELS]
        if np.isfinite(strip.sum(dtype=np.float64)):  # the common case: no NaN or Inf in the strip
            lo = np.minimum(lo, strip.min(axis=0))
            hi = np.maximum(hi, strip.max(axis=0))
            total += strip.sum(axis=0, dtype=np.float64)
            count += strip.shape[0]
            continue
        nan += int(np.count_nonzero(np.isnan(strip)))
        inf += int(np.count_nonzero(np.isinf(strip)))
        for ch in range(c):
            v = strip[:, ch][np.isfinite(strip[:, ch])]
            if v.size:
                lo[ch] = min(lo[ch], float(v.min()))
                hi[ch] = max(hi[ch], float(v.max()))
                total[ch] += v.sum(dtype=np.float64)
                count[ch] += v.size
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(count > 0, total / np.maximum(count, 1), np.nan)
    return lo.tolist(), hi.tolist(), mean.tolist(), nan, inf


def _channel_names(c: int) -> str:
    return {1: "gray", 2: "R, G", 3: "R, G, B", 4: "R, G, B, A"}[c]


def _quality_from_manifest(path: Path) -> list[str]:
    """The compression quality the bake measured, from the manifest beside the file (when it describes it)."""
    import json

    from bakery.io.manifest import manifest_path

    m = manifest_path(path)
    try:
        q = json.loads(m.read_text(encoding="utf-8")).get("quality", {}).get(path.name)
    except (OSError, ValueError, AttributeError):
        return []
    return [f"  quality:  {q['summary']} ({m.name})"] if isinstance(q, dict) and "summary" in q else []


def describe_ktx2(path: Path) -> list[str]:
    """Lines for a KTX2 file: type, format, faces, levels with sizes, key/value data, value range."""
    from bakery.io.envfiles import read_ktx2_limited

    tex = read_ktx2_limited(path)
    lv0 = tex.levels[0]
    c = lv0.shape[-1]
    sizes = ", ".join(f"{lv.shape[-2]}x{lv.shape[-3]}" for lv in tex.levels)
    lines = [
        f"{path}",
        "  format:   KTX2",
        f"  type:     {'cubemap' if tex.cubemap else '2D texture'}",
        f"  vkFormat: {tex.format.name} ({tex.format.vk})",
        f"  size:     {tex.width} x {tex.height}" + (" per face" if tex.cubemap else ""),
        f"  faces:    {6 if tex.cubemap else 1}",
        f"  levels:   {len(tex.levels)} ({sizes})",
        f"  channels: {c} ({_channel_names(c)})",
    ]
    if tex.block_compressed or tex.supercompressed:
        lines.append(f"  stored:   {'block-compressed ' + tex.format.short_name if tex.block_compressed else 'plain'}"
                     + (", Zstandard supercompression" if tex.supercompressed else ""))
    lines += _quality_from_manifest(path)
    for key in sorted(tex.key_values):
        value = tex.key_values[key]
        if value.endswith(b"\0"):
            text = value.rstrip(b"\0").decode("utf-8", "replace")
        else:
            text = f"{len(value)} bytes"
        lines.append(f"  {key}: {text}")
    lo, hi, mean, nan, inf = channel_stats(lv0)
    names = _channel_names(c).split(", ")
    for ch in range(c):
        if math.isfinite(mean[ch]):
            lines.append(f"  range {names[ch]}:  {lo[ch]:.6g} .. {hi[ch]:.6g}  (mean {mean[ch]:.6g}, level 0)")
    lines.append(f"  NaN: {nan}  Inf: {inf}")
    return lines
