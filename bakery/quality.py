"""Error metrics of a compressed texture against the float data it came from (pure functions).

- :func:`psnr`: peak signal-to-noise ratio per channel, ``10 log10(peak^2 / MSE)`` with peak 1 for data in
  [0, 1] (the usual definition, e.g. Wang & Bovik 2009, "Mean squared error: love it or leave it?", IEEE
  Signal Processing Magazine 26(1), eq. 2). ``None`` stands for identical data (infinite PSNR) so that reports
  stay plain JSON.
- :func:`angle_stats`: angle between reference and decoded normal vectors, in degrees, as
  ``atan2(|a x b|, a . b)`` (accurate for small angles, unlike ``acos``); mean, 99th percentile and max.
- :func:`hdr_stats`: error of HDR radiance in stops: RMS of ``log2(max(t, e)) - log2(max(r, e))`` over all
  samples, and the median of ``|t - r| / max(r, e)``, with ``e = 2^-14`` (the smallest normal half float;
  common practice for a floor that keeps black texels from dominating a log metric).

Percentiles and medians are computed on at most :data:`PERCENTILE_SAMPLES` values (a fixed stride through the
data, so the result is deterministic); means and maxima use every value given.
"""

from __future__ import annotations

import math

import numpy as np

#: Largest number of values sorted for a percentile or median (a fixed-stride subsample beyond it).
PERCENTILE_SAMPLES = 1 << 18
HDR_FLOOR = 2.0 ** -14


def _strided(v: np.ndarray, limit: int = PERCENTILE_SAMPLES) -> np.ndarray:
    v = v.ravel()
    step = max(1, math.ceil(v.size / limit))
    return v[::step]


def psnr(ref: np.ndarray, test: np.ndarray, peak: float = 1.0) -> list[float | None]:
    """PSNR in dB of each channel of ``(..., C)`` data (None where the channel is identical).

    Examples
    --------
    >>> psnr(np.zeros((2, 2, 1)), np.full((2, 2, 1), 0.1))   # MSE 0.01 -> 20 dB
    [20.0]
    """
    r = np.asarray(ref, dtype=np.float64)
    t = np.asarray(test, dtype=np.float64)
    c = r.shape[-1]
    mse = np.mean((r.reshape(-1, c) - t.reshape(-1, c)) ** 2, axis=0)
    return [None if m == 0 else round(float(10.0 * math.log10(peak * peak / m)), 3) for m in mse]


def angles_deg(ref: np.ndarray, test: np.ndarray) -> np.ndarray:
    """Angles in degrees between ``(..., 3)`` vectors (need not be unit length), float32."""
    a = np.asarray(ref, dtype=np.float32).reshape(-1, 3)
    b = np.asarray(test, dtype=np.float32).reshape(-1, 3)
    cross = np.cross(a, b)
    s = np.sqrt(np.einsum("ij,ij->i", cross, cross))
    d = np.einsum("ij,ij->i", a, b)
    return np.degrees(np.arctan2(s, d)).astype(np.float32)


def angle_stats(ref: np.ndarray, test: np.ndarray) -> dict[str, float]:
    """Mean, 99th percentile and maximum angular error in degrees between two sets of normal vectors.

    Examples
    --------
    >>> a = np.array([[0.0, 0.0, 1.0], [0.0, 0.0, 1.0]])
    >>> b = np.array([[0.0, 0.0, 1.0], [1.0, 0.0, 1.0]])   # 0 and 45 degrees
    >>> angle_stats(a, b)
    {'mean_deg': 22.5, 'p99_deg': 44.55, 'max_deg': 45.0}
    """
    ang = angles_deg(ref, test)
    return {"mean_deg": round(float(ang.mean(dtype=np.float64)), 4),
            "p99_deg": round(float(np.percentile(_strided(ang), 99)), 4),
            "max_deg": round(float(ang.max()), 4)}


def hdr_stats(ref: np.ndarray, test: np.ndarray) -> dict[str, float]:
    """Log2 RMSE in stops and median relative error of HDR data (all channels pooled).

    Examples
    --------
    >>> hdr_stats(np.ones((4, 3)), np.full((4, 3), 2.0))   # one stop everywhere, 100 % off
    {'log2_rmse_stops': 1.0, 'median_rel_error': 1.0}
    """
    r = np.maximum(np.asarray(ref, dtype=np.float32), np.float32(HDR_FLOOR))
    t = np.maximum(np.asarray(test, dtype=np.float32), np.float32(HDR_FLOOR))
    d = np.log2(t) - np.log2(r)
    rel = np.abs(t - r) / r
    return {"log2_rmse_stops": round(float(np.sqrt(np.mean(d.astype(np.float64) ** 2))), 5),
            "median_rel_error": round(float(np.median(_strided(rel))), 6)}


def _worst(levels: list[dict], key: str, pick=min):
    vals = [v for lv in levels for v in (lv.get(key) or []) if v is not None] if key.startswith("psnr") else \
        [lv[key] for lv in levels if key in lv]
    return pick(vals) if vals else None


def summary_line(report: dict) -> str:
    """One line for a report made by :func:`bakery.io.texcompress.compress_ktx2`."""
    head = f"{report['format']}"
    if report.get("encoder"):
        head += f" ({report['quality']}, {report['encoder']})"
    if report.get("zstd"):
        head += f" + zstd {report['zstd']}"
    size = report["bytes"]
    head += f": {len(report['levels'])} level(s), {size / 2**20:.2f} MiB"
    lv0 = report["levels"][0]
    kind = report["kind"]
    if kind == "normal":
        return (head + f"; level 0 angular error mean {lv0['mean_deg']:.2f} deg, p99 {lv0['p99_deg']:.2f}, "
                f"max {lv0['max_deg']:.2f}; worst level mean {_worst(report['levels'], 'mean_deg', max):.2f} deg")
    if kind == "hdr":
        return (head + f"; level 0 log2 RMSE {lv0['log2_rmse_stops']:.3f} stops, median relative error "
                f"{100 * lv0['median_rel_error']:.2f} %; worst level "
                f"{_worst(report['levels'], 'log2_rmse_stops', max):.3f} stops")

    def fmt(v):
        return "exact" if v is None else f"{v:.1f} dB"

    ch0 = [v for v in lv0["psnr_db"] if v is not None]
    line = head + f"; level 0 PSNR min {fmt(min(ch0) if ch0 else None)}"
    if "psnr_linear_db" in lv0:
        lin = [v for v in lv0["psnr_linear_db"] if v is not None]
        line += f" (sRGB), {fmt(min(lin) if lin else None)} (linear)"
    return line + f"; worst level {fmt(_worst(report['levels'], 'psnr_db'))}"
