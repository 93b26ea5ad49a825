"""Checks of texture maps for common mistakes, with a severity and a hint for each finding.

Pure functions on arrays: :func:`inspect_pixels` takes the pixels (as read by :func:`bakery.io.read_image`)
and what is known about the file, and returns :class:`Finding` objects. The kind of map decides which checks
run; it comes from :func:`bakery.classify.guess_kind` unless the caller says.

The green-channel check rests on integrability: a normal map made from a height field h has slopes
p = ∂h/∂x = -n_x/n_z and q = ∂h/∂y = -n_y/n_z whose curl ∂p/∂y - ∂q/∂x vanishes (Frankot & Chellappa 1988,
"A Method for Enforcing Integrability in Shape from Shading Algorithms", IEEE PAMI 10(4), section II). Read
with the wrong green convention, q changes sign and the curl becomes ∂p/∂y + ∂q/∂x, which vanishes only for
surfaces without cross terms. Comparing the two residuals tells the convention and how sure the guess is.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Literal

import numpy as np

from bakery.classify import map_kind

Severity = Literal["error", "warning", "info"]

#: Height-range, terracing and tiling statistics are not judged on maps smaller than this on a side (a 4x4
#: mip level legitimately has a low range); common practice, not published.
MIN_STATISTICS_SIZE = 16


@dataclass(frozen=True)
class Finding:
    """One thing noticed about a map.

    Attributes
    ----------
    code : str
        Stable identifier, e.g. ``"normal-not-unit"`` (for scripts and reports).
    severity : {"error", "warning", "info"}
        ``error``: the map will render wrong; ``warning``: probably a mistake; ``info``: worth knowing.
    message : str
        What was measured.
    hint : str
        What to do about it.
    """

    code: str
    severity: Severity
    message: str
    hint: str

    def as_dict(self) -> dict:
        return asdict(self)


def inspect_pixels(pixels: np.ndarray, *, bits: str, kind: str | None = None) -> tuple[str, list[Finding]]:
    """Run the checks for one map.

    Parameters
    ----------
    pixels : ndarray, float32, (H, W, C)
        Integer files scaled to [0, 1], RGB(A) order.
    bits : {"8", "16", "half", "float"}
        The file's sample type.
    kind : {"normal", "height", "environment", "data", "color"}, optional
        Force the kind of map; default: guessed by :func:`bakery.classify.map_kind`.

    Returns
    -------
    kind : str
    findings : list of Finding
    """
    is_float = bits in ("half", "float")
    kind = kind or map_kind(pixels, is_float=is_float)
    findings: list[Finding] = []
    nonfinite = _check_finite(pixels, kind)
    findings += nonfinite
    finite = np.nan_to_num(pixels, nan=0.0, posinf=0.0, neginf=0.0) if nonfinite else pixels
    small = min(pixels.shape[:2]) < MIN_STATISTICS_SIZE
    # vector statistics and the seam score are judged on every step-th texel of large maps: the same answers
    # (curl and seams compare texels one step apart on both sides) at a fraction of the cost
    step = _stride(pixels.shape[:2])
    coarse = finite[::step, ::step]
    if kind == "normal":
        findings += check_normal_map(coarse, bits=bits)
    elif kind == "height" and not small:
        findings += check_height_map(finite[..., 0], bits=bits)
    elif kind == "environment":
        findings += check_environment(finite, bits=bits)
    findings += check_size(pixels.shape[1], pixels.shape[0], kind)
    findings += _check_channels(pixels, kind)
    if kind in ("normal", "height", "data", "color") and not small:
        findings += check_tiling(coarse if all(n % step == 0 for n in pixels.shape[:2]) else finite)
    return kind, findings


#: Maps are sampled down to about this many texels on their shorter side for the vector and seam statistics.
STATISTICS_SIDE = 512


def _stride(shape: tuple[int, ...]) -> int:
    return max(1, min(shape) // STATISTICS_SIDE)


# ------------------------------------------------------------------------------------------ any map


def _check_finite(pixels: np.ndarray, kind: str) -> list[Finding]:
    nan = int(np.count_nonzero(np.isnan(pixels)))
    inf = int(np.count_nonzero(np.isinf(pixels)))
    if nan or inf:
        return [Finding("non-finite", "error", f"{nan} NaN and {inf} Inf sample(s)",
                        "repair the source; bakes refuse files holding NaN or Inf")]
    return []


def check_size(width: int, height: int, kind: str) -> list[Finding]:
    """Non-power-of-two sizes: mip chains then lose texels at odd levels and some engines refuse them."""
    if kind == "environment":
        return []
    def pow2(n: int) -> bool:
        return n > 0 and n & (n - 1) == 0

    if pow2(width) and pow2(height):
        return []
    return [Finding("non-power-of-two", "info", f"size {width}x{height} is not a power of two in both axes",
                    "resize to a power of two if the engine or a mip chain needs it")]


def _check_channels(pixels: np.ndarray, kind: str) -> list[Finding]:
    c = pixels.shape[2]
    if kind == "height" and c >= 3 and not (np.array_equal(pixels[..., 0], pixels[..., 1])
                                            and np.array_equal(pixels[..., 1], pixels[..., 2])):
        return [Finding("height-colour", "warning", "height map has colour channels that differ",
                        "save heights as a single channel, or name the channel that holds them")]
    if kind == "normal" and c == 4:
        alpha = pixels[..., 3]
        if float(alpha.min()) < 1.0:
            return [Finding("normal-alpha", "info", "normal map carries a non-opaque alpha channel",
                            "check that the engine expects something in alpha (e.g. a packed height)")]
    return []


def seam_score(pixels: np.ndarray) -> float:
    """How much larger the jumps across the wrap edges are than the jumps between neighbouring texels.

    Median absolute difference across the left/right and top/bottom wrap edges divided by the median absolute
    difference between horizontal and vertical neighbours inside (a robust scale; common practice). About 1
    for a map that tiles; well above 1 for one that does not.
    """
    a = pixels.astype(np.float32)
    inner = np.concatenate([np.abs(np.diff(a, axis=1)).ravel(), np.abs(np.diff(a, axis=0)).ravel()])
    edge = np.concatenate([np.abs(a[:, 0] - a[:, -1]).ravel(), np.abs(a[0, :] - a[-1, :]).ravel()])
    scale = float(np.mean(inner))
    if scale == 0.0:
        return 1.0 if float(np.mean(edge)) == 0.0 else np.inf
    return float(np.mean(edge)) / scale


#: Seam scores above this say "does not tile" (chosen on procedural maps; common practice, not published).
SEAM_LIMIT = 2.0


def check_tiling(pixels: np.ndarray) -> list[Finding]:
    if min(pixels.shape[:2]) < 4:
        return []
    score = seam_score(pixels)
    if score > SEAM_LIMIT:
        return [Finding("not-tiling", "info",
                        f"edges do not wrap: the jump across the wrap edges is {score:.1f}x the jump between "
                        "neighbouring texels", "if the map should tile, bake it from a tiling source "
                        "(or use clamped edges, --edges clamp, for a non-tiling map)")]
    return []


# ------------------------------------------------------------------------------------------ normal maps


def check_normal_map(pixels: np.ndarray, *, bits: str) -> list[Finding]:
    """Unit length, negative Z, sRGB encoding and the green-channel convention of an RGB normal map."""
    out: list[Finding] = []
    n = pixels[..., :3] * 2.0 - 1.0
    length = np.linalg.norm(n, axis=-1)
    tol = {"8": 2.5 / 255, "16": 0.01}.get(bits, 0.01) + 0.02
    off = float(np.mean(np.abs(length - 1.0) > tol))
    if off > 0.01:
        srgb = _srgb_explains(pixels[..., :3], tol)
        if srgb:
            out.append(Finding("normal-srgb", "error",
                               f"{off:.0%} of vectors are not unit length, but would be if the file were "
                               "decoded from sRGB: it was likely saved with a colour (sRGB) transfer curve",
                               "re-export the normal map as linear data (no colour conversion)"))
        else:
            out.append(Finding("normal-not-unit", "warning",
                               f"{off:.0%} of vectors are off unit length by more than {tol:.3f} "
                               f"(median length {float(np.median(length)):.3f})",
                               "renormalize (bakery normal-fix --renormalize) or check the encoding"))
    neg = float(np.mean(n[..., 2] < -tol))
    if neg > 0.001:
        out.append(Finding("normal-negative-z", "warning", f"{neg:.1%} of vectors point into the surface "
                           "(negative Z)", "tangent-space normals should have Z >= 0; check the encoding"))
    out += _green_finding(n)
    return out


def _srgb_explains(rgb: np.ndarray, tol: float) -> bool:
    from bakery.color import srgb_to_linear

    lin = srgb_to_linear(rgb) * 2.0 - 1.0
    return bool(np.mean(np.abs(np.linalg.norm(lin, axis=-1) - 1.0) > tol) < 0.01)


def green_convention(n: np.ndarray) -> tuple[str, float]:
    """Guess the green-channel convention of decoded normals from integrability.

    Parameters
    ----------
    n : ndarray, (H, W, 3)
        Normals decoded as ``rgb * 2 - 1`` with no flip, rows top to bottom.

    Returns
    -------
    convention : {"y-up", "y-down", "unsure"}
    confidence : float in [0, 1]
        ``|r_down - r_up| / (r_down + r_up)`` of the two curl residuals (0 when they are equal).
    """
    nz = np.maximum(n[..., 2], 0.05)
    p = -n[..., 0] / nz  # dh/dx, x to the right
    q = -n[..., 1] / nz  # dh/dy with +y up (Y-up reading)
    # central differences on the torus; +y up is -row
    dp_dy = -(np.roll(p, -1, axis=0) - np.roll(p, 1, axis=0)) / 2
    dq_dx = (np.roll(q, -1, axis=1) - np.roll(q, 1, axis=1)) / 2
    r_up = float(np.mean((dp_dy - dq_dx) ** 2))
    r_down = float(np.mean((dp_dy + dq_dx) ** 2))
    total = r_up + r_down
    scale = float(np.mean(dp_dy**2 + dq_dx**2))
    if total == 0.0 or scale < 1e-10:
        return "unsure", 0.0
    conf = abs(r_down - r_up) / total
    if conf < 0.2:
        return "unsure", conf
    return ("y-up" if r_up < r_down else "y-down"), conf


def _green_finding(n: np.ndarray) -> list[Finding]:
    conv, conf = green_convention(n)
    if conv == "unsure":
        return [Finding("green-unsure", "info", "green-channel convention cannot be told from this map "
                        f"(confidence {conf:.2f})", "check it on a lit preview")]
    if conv == "y-down":
        return [Finding("green-y-down", "warning",
                        f"green channel looks Y-down (DirectX-style), confidence {conf:.2f}",
                        "fine for engines that expect Y-down; for glTF and OpenGL-style engines flip the green "
                        "channel (bakery normal-fix --flip-green)")]
    return [Finding("green-y-up", "info", f"green channel looks Y-up (OpenGL-style, glTF), confidence {conf:.2f}",
                    "nothing to do for glTF and OpenGL-style engines")]


# ------------------------------------------------------------------------------------------ height maps


def check_height_map(h: np.ndarray, *, bits: str) -> list[Finding]:
    """Terracing of 8-bit heights, clipped range, low used range."""
    out: list[Finding] = []
    lo, hi = float(h.min()), float(h.max())
    used = hi - lo
    if bits in ("8", "16"):
        for value, name in ((0.0, "black"), (1.0, "white")):
            frac = float(np.mean(h == value))
            if frac > 0.01:
                out.append(Finding("height-clipped", "warning",
                                   f"{frac:.1%} of texels sit at pure {name}: the range looks clipped",
                                   "re-export the heights with headroom (levels that do not touch 0 or 1)"))
        if 0 < used < 0.1:
            out.append(Finding("height-low-range", "warning",
                               f"heights use {used:.1%} of the file's range", "stretch the levels before "
                               "saving, or the normal map will be weak and show steps"))
    if bits == "8" and used > 0:
        steps = _terracing(h)
        if steps is not None:
            out.append(Finding("height-terraced", "warning", steps,
                               "use a 16-bit or float source, or pre-blur (bakery normal --blur 1)"))
    return out


def _terracing(h: np.ndarray) -> str | None:
    """8-bit terraces: on slopes, most neighbouring texels are equal and the rest differ by one level."""
    d = np.abs(np.diff(h, axis=1)) * 255
    moving = d[d > 0]
    if moving.size < 0.02 * d.size:
        return None
    one = float(np.mean(np.abs(moving - 1.0) < 0.5))
    flat = float(np.mean(d == 0))
    if one > 0.6 and flat > 0.3:
        return (f"8-bit terracing: {flat:.0%} of neighbouring texels are equal and {one:.0%} of the rest "
                "differ by a single level")
    return None


# ------------------------------------------------------------------------------------------ environments


def check_environment(px: np.ndarray, *, bits: str) -> list[Finding]:
    """Negative values, clipped highlights (an LDR source), aspect ratio."""
    out: list[Finding] = []
    neg = int(np.count_nonzero(px[..., :3] < 0))
    if neg:
        out.append(Finding("env-negative", "error", f"{neg} negative radiance sample(s)",
                           "radiance cannot be negative: clamp at 0 in the source"))
    h, w = px.shape[:2]
    vmax = float(px[..., :3].max())
    if bits in ("8", "16") or vmax <= 1.0:
        out.append(Finding("env-ldr", "warning", f"highest value is {vmax:.3g}: this looks like a low dynamic "
                           "range image", "use an HDR source (.hdr/.exr); a clipped sun lights far too weakly"))
    else:
        # a clipped capture saturates: many texels hold exactly the same top value (a smooth peak does not)
        peak = px[..., :3].max(axis=-1)
        at_max = int(np.count_nonzero(peak == vmax))
        if at_max >= max(4, 0.001 * peak.size):
            out.append(Finding("env-clipped", "warning", f"{at_max} texels ({at_max / peak.size:.2%}) hold exactly "
                               f"the maximum value {vmax:.4g}: highlights look clipped",
                               "use an unclipped HDR capture"))
    from bakery.classify import env_layout

    if env_layout(w, h) is None and w != h:  # square: one cube face
        out.append(Finding("env-aspect", "warning", f"aspect {w}x{h} is neither 2:1 (equirectangular) nor a "
                           "cube layout nor a square cube face", "crop or resample the panorama to 2:1"))
    return out
