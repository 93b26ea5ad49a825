"""Checks of texture maps for common mistakes, with a severity and a hint for each finding.

Pure functions on arrays: :func:`inspect_pixels` takes the pixels (as read by :func:`bakery.io.read_image`)
and what is known about the file (:class:`MapFacts`, from its manifest: :func:`facts_from_manifest`), and
returns :class:`Finding` objects. The kind of map decides which checks run; it comes from the manifest, else
from :func:`bakery.classify.map_kind`, unless the caller says.

The green-channel check rests on integrability: a normal map made from a height field h has slopes
p = ∂h/∂x = -n_x/n_z and q = ∂h/∂y = -n_y/n_z whose curl ∂p/∂y - ∂q/∂x vanishes (Frankot & Chellappa 1988,
"A Method for Enforcing Integrability in Shape from Shading Algorithms", IEEE PAMI 10(4), section II). Read
with the wrong green convention, q changes sign and the curl becomes ∂p/∂y + ∂q/∂x, which vanishes only for
surfaces without cross terms. Comparing the two residuals tells the convention and how sure the guess is.
Inverting the red channel changes the sign of p instead, which gives the same curl as inverting green: the
two are told apart by the sign of the relief (:func:`relief_sign`).
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


@dataclass(frozen=True)
class MapFacts:
    """What is known about a map before its pixels are judged (from its manifest, or nothing).

    Attributes
    ----------
    kind : str or None
        One of :data:`bakery.classify.KINDS` plus ``"table"`` (a lookup table such as the split-sum BRDF
        table), ``"mask"`` (occlusion, curvature, normal lengths: data in [0, 1] with no height statistics)
        and ``"packed"`` (channels holding different maps), and ``"picture"`` (an image bakery wrote for people
        to look at, as its manifest says: only checked for NaN and Inf); None: guess from the pixels.
    y : {"up", "down"} or None
        The green-channel convention a normal map was written in.
    tiles : bool or None
        True: the map was made to tile (wrap edges); False: it was made with clamped or mirrored edges and
        is not expected to tile; None: not known (judged as a tiling map).
    transfer : {"linear", "srgb"} or None
        The colour encoding of the stored values.
    gradient : bool
        The normals are the gradient of a height field (a normal map), so the integrability checks apply;
        False for bent normals (a mean visible direction, not a surface).
    source : str
        Where the facts come from: ``"manifest"`` or ``"pixels"``.
    bake : str or None
        The bake that wrote the map.
    role : str
        What the file is within its bake's outputs (``"main"``, ``"mip level 3"``, ``"face x+"`` ...).
    filled : bool
        The bake filled regions with one value on purpose (an environment with its lights taken out): a
        plateau at the top of its range is no sign of clipping.
    """

    kind: str | None = None
    y: str | None = None
    tiles: bool | None = None
    transfer: str | None = None
    gradient: bool = True
    source: str = "pixels"
    bake: str | None = None
    role: str = ""
    filled: bool = False


#: The green-channel convention a normal map is judged against when neither the caller nor a manifest says:
#: +Y up, that of glTF 2.0 (section 3.9.3, "normalTexture") and bakery's default.
DEFAULT_Y = "up"


def inspect_pixels(pixels: np.ndarray, *, bits: str, kind: str | None = None, facts: MapFacts | None = None,
                   expect_y: str | None = None, srgb_format: bool = False, name: str | None = None
                   ) -> tuple[str, list[Finding]]:
    """Run the checks for one map.

    Parameters
    ----------
    pixels : ndarray, float32, (H, W, C)
        Integer files scaled to [0, 1], RGB(A) order.
    bits : {"8", "16", "half", "float"}
        The file's sample type.
    kind : str, optional
        Force the kind of map (see :class:`MapFacts`); default: the facts' kind, else guessed by
        :func:`bakery.classify.map_kind`.
    facts : MapFacts, optional
        What the map's manifest says (kind, green convention, whether it should tile, colour encoding).
    expect_y : {"up", "down"}, optional
        The green-channel convention the target expects (a target profile's ``y``). A normal map in that
        convention is fine; one in the other convention is the finding. Default: the convention the manifest
        records, else :data:`DEFAULT_Y`.
    srgb_format : bool
        The container stores the texels in an sRGB texel format (a KTX2 ``*_SRGB`` format): the GPU decodes
        them through the sRGB curve.
    name : str, optional
        The file's name: its words decide between a height map and material data for a single-channel map
        whose kind is guessed (:func:`bakery.classify.kind_from_name`).

    Returns
    -------
    kind : str
    findings : list of Finding
    """
    facts = facts or MapFacts()
    if expect_y not in (None, "up", "down"):
        raise ValueError(f"expect_y must be 'up', 'down' or None; got {expect_y!r}")
    is_float = bits in ("half", "float")
    kind = kind or facts.kind or map_kind(pixels, is_float=is_float, name=name)
    findings: list[Finding] = []
    nonfinite = _check_finite(pixels, kind)
    findings += nonfinite
    finite = _fill_nonfinite(pixels, kind) if nonfinite else pixels
    if kind == "picture":  # an image for a screen: decoded and finite is all that matters
        return kind, findings
    small = min(pixels.shape[:2]) < MIN_STATISTICS_SIZE
    # vector statistics and the seam score are judged on every step-th texel of large maps: the same answers
    # (curl and seams compare texels one step apart on both sides) at a fraction of the cost
    step = _stride(pixels.shape[:2])
    coarse = finite[::step, ::step]
    if kind == "normal":
        findings += check_normal_map(coarse, bits=bits, facts=facts, expect_y=expect_y,
                                     srgb=srgb_format or facts.transfer == "srgb")
    elif kind == "height" and not small:
        findings += check_height_map(finite[..., 0], bits=bits)
    elif kind == "environment":
        findings += check_environment(finite, bits=bits, filled=facts.filled, baked=facts.source == "manifest")
    findings += check_size(pixels.shape[1], pixels.shape[0], kind)
    findings += _check_channels(pixels, kind)
    if kind in TILING_KINDS and not small and facts.tiles is not False:
        findings += check_tiling(coarse if all(n % step == 0 for n in pixels.shape[:2]) else finite)
    return kind, findings


#: Kinds of map judged for tiling (environments and tables are not textures that repeat).
TILING_KINDS = ("normal", "height", "roughness", "data", "color", "mask", "packed")


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


def _fill_nonfinite(pixels: np.ndarray, kind: str) -> np.ndarray:
    """The pixels with NaN and Inf samples replaced, so the other checks judge the rest of the map: by the
    encoded flat normal (0.5, 0.5, 1) in a normal map (a zero there would be a vector pointing into the surface
    with slopes of 20 that drown the curl statistics), else by 0."""
    fill = np.zeros(pixels.shape[2], np.float32)
    if kind == "normal":
        fill[:] = np.array([0.5, 0.5, 1.0, 1.0], np.float32)[: pixels.shape[2]]
    return np.where(np.isfinite(pixels), pixels, fill).astype(np.float32)


def check_size(width: int, height: int, kind: str) -> list[Finding]:
    """Non-power-of-two sizes: mip chains then lose texels at odd levels and some engines refuse them."""
    if kind in ("environment", "table"):
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
    """How much larger the jump across a wrap edge is than the jumps across the lines inside the map.

    For each axis, the mean absolute difference across every line between neighbouring columns (rows) is
    measured; the line across the wrap edge is compared with the largest of the lines inside. A map that
    tiles has a wrap edge like any other line, so the score is at most about 1, even where a feature (a
    plank seam, a tile's grout) lies on the edge; a map cut off its grid jumps across the edge more than
    across any line inside. The score is the larger of the two axes' ratios (common practice, not
    published).
    """
    a = pixels.astype(np.float32)
    if a.ndim == 2:
        a = a[..., None]
    scores = []
    for axis in (1, 0):
        inner = np.abs(np.diff(a, axis=axis))
        other = tuple(i for i in range(a.ndim) if i != axis)
        lines = inner.mean(axis=other)  # one mean jump per line between neighbours
        edge = float(np.mean(np.abs(np.take(a, 0, axis=axis) - np.take(a, -1, axis=axis))))
        top = float(lines.max()) if lines.size else 0.0
        if top == 0.0:
            scores.append(1.0 if edge == 0.0 else np.inf)
        else:
            scores.append(edge / top)
    return float(max(scores))


#: Seam scores above this say "does not tile" (chosen on procedural maps; common practice, not published).
SEAM_LIMIT = 1.5


def tiling_score(pixels: np.ndarray) -> float:
    """:func:`seam_score` of a whole map, judged on every k-th texel of large maps (as :func:`inspect_pixels`
    does): a cheap answer to "does this map tile?" for a bake about to assume it does."""
    step = _stride(pixels.shape[:2])
    if step > 1 and all(n % step == 0 for n in pixels.shape[:2]):
        pixels = pixels[::step, ::step]
    return seam_score(pixels)


def check_tiling(pixels: np.ndarray) -> list[Finding]:
    if min(pixels.shape[:2]) < 4:
        return []
    score = seam_score(pixels)
    if score > SEAM_LIMIT:
        return [Finding("not-tiling", "info",
                        f"edges do not wrap: the jump across a wrap edge is {score:.1f}x the largest jump "
                        "between neighbouring lines inside", "if the map should tile, bake it from a tiling "
                        "source; for a map that is not meant to tile, bake with --edges clamp")]
    return []


# ------------------------------------------------------------------------------------------ normal maps


def check_normal_map(pixels: np.ndarray, *, bits: str, facts: MapFacts | None = None,
                     expect_y: str | None = None, srgb: bool = False) -> list[Finding]:
    """Unit length, negative Z, sRGB encoding and the green (and red) channel convention of a normal map."""
    facts = facts or MapFacts()
    out: list[Finding] = []
    if pixels.shape[2] < 2:  # a one-channel map is no normal map; the channel check reports it
        return out
    n = pixels[..., :3] * 2.0 - 1.0
    if pixels.shape[2] == 2:  # XY maps: readers rebuild z = sqrt(1 - x^2 - y^2)
        xy = pixels[..., :2] * 2.0 - 1.0
        n = np.concatenate([xy, np.sqrt(np.clip(1.0 - np.sum(xy * xy, axis=-1, keepdims=True), 0, 1))], -1)
    if srgb:
        out.append(Finding("normal-srgb", "error", "the normal map is stored with an sRGB colour encoding "
                           "(its texel format or manifest says so): readers decode it through the sRGB curve "
                           "and get vectors that are not unit length", "store normal maps as linear data "
                           "(a UNORM texel format, no colour conversion)"))
    length = np.linalg.norm(n, axis=-1)
    tol = {"8": 2.5 / 255, "16": 0.01}.get(bits, 0.01) + 0.02
    off = float(np.mean(np.abs(length - 1.0) > tol)) if pixels.shape[2] >= 3 else 0.0
    if off > 0.01 and not srgb:
        if _srgb_explains(pixels[..., :3], tol):
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
    if facts.gradient and not any(f.code == "normal-srgb" for f in out):
        out += axis_findings(n, recorded_y=facts.y, expect_y=expect_y)
    elif facts.y and expect_y and facts.y != expect_y:  # mip levels, bent normals: what the bake wrote
        out.append(_green_mismatch(facts.y, expect_y))
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


def relief_sign(n: np.ndarray, y: str = "up") -> tuple[str, float]:
    """Whether the relief of a normal map, read in the green convention ``y``, is raised features or pits.

    The statistic is S = mean(|grad h|^2 lap h) / (mean(|grad h|^2) rms(lap h)), computed from the slopes
    alone. For a rotationally symmetric bump h = f(r), integrating by parts in polar coordinates gives
    integral(|grad h|^2 lap h) dA = (4 pi / 3) integral(f'(r)^3) dr, negative whenever f falls away from the
    centre: raised features (stones, tiles, studs, domes) give S < 0, and the same map with its relief
    inverted gives S > 0. Profiles that vary along one axis only give S = 0 (the integral of (f'^3 / 3)'
    over a period). The sign is a prior, not a proof: a surface made of isolated pits in a connected plateau
    reads as inverted.

    The identity holds for smooth slopes. Where the slope jumps (a sphere cap meeting the plane at an angle,
    a bevel's edge) central differences weigh the jump by the slope on one side only and can outweigh the
    rest of the map, so the slopes are first smoothed by one pass of the binomial kernel [1, 2, 1] / 4 along
    each axis (common practice), which turns a kink into a ramp the identity holds for.

    Returns
    -------
    relief : {"raised", "sunken", "unsure"}
    strength : float
        ``|S|``; "unsure" below :data:`RELIEF_LIMIT`.
    """
    if min(n.shape[:2]) < RELIEF_MIN_SIZE:
        return "unsure", 0.0
    p, q = (_binomial(a) for a in _slopes(n, y))
    lap = (np.roll(p, -1, axis=1) - np.roll(p, 1, axis=1)) / 2 - (np.roll(q, -1, axis=0) - np.roll(q, 1, axis=0)) / 2
    g2 = p * p + q * q
    scale = float(np.mean(g2)) * float(np.sqrt(np.mean(lap * lap)))
    if scale < 1e-12:
        return "unsure", 0.0
    s = float(np.mean(g2 * lap)) / scale
    if abs(s) < RELIEF_LIMIT:
        return "unsure", abs(s)
    return ("raised" if s < 0 else "sunken"), abs(s)


#: |S| below this leaves the sign of the relief undecided, and so do maps under RELIEF_MIN_SIZE texels a
#: side (a few features say little); chosen on procedural maps, common practice.
RELIEF_LIMIT = 0.05
RELIEF_MIN_SIZE = 64


def _binomial(a: np.ndarray) -> np.ndarray:
    """One pass of [1, 2, 1] / 4 along each axis, wrapping at the edges."""
    a = (np.roll(a, 1, axis=0) + 2 * a + np.roll(a, -1, axis=0)) / 4
    return (np.roll(a, 1, axis=1) + 2 * a + np.roll(a, -1, axis=1)) / 4


def _slopes(n: np.ndarray, y: str) -> tuple[np.ndarray, np.ndarray]:
    """Slopes p = dh/dx, q = dh/dy (+y up) of decoded normals read in convention ``y``."""
    nz = np.maximum(n[..., 2], 0.05)
    p = -n[..., 0] / nz
    q = -n[..., 1] / nz
    return p, (q if y == "up" else -q)


def axis_findings(n: np.ndarray, *, recorded_y: str | None = None, expect_y: str | None = None) -> list[Finding]:
    """The green- and red-channel findings of decoded normals ``n`` (``rgb * 2 - 1``, no flip).

    The map is judged against ``expect_y`` (the target's convention), else the convention its manifest
    records (``recorded_y``), else :data:`DEFAULT_Y`. Integrability (:func:`green_convention`) tells whether
    the map is consistent with that convention or has one axis inverted; inverting the red channel (X) and
    inverting the green one (Y) give the same curl, so the sign of the relief (:func:`relief_sign`) tells
    which: the reading that gives raised features is taken as the map's. Inverting green on a map whose red
    channel is inverted would leave it integrable but with its relief upside down.
    """
    target = expect_y or recorded_y or DEFAULT_Y
    other = "down" if target == "up" else "up"
    conv, conf = green_convention(n)
    why = ("the target expects" if expect_y else "its manifest records" if recorded_y else
           "with no target given it is judged against")
    if conv == "unsure":
        if recorded_y:  # the bake wrote the convention; nothing in the pixels contradicts it
            return [] if recorded_y == target else [_green_mismatch(recorded_y, target)]
        return [Finding("green-unsure", "info", "green-channel convention cannot be told from this map "
                        f"(confidence {conf:.2f})", "check it on a lit preview")]
    read = "up" if conv == "y-up" else "down"
    if recorded_y and (read == recorded_y or conf < AXIS_CONFIDENCE):
        # the pixels agree with what the bake wrote (or contradict it too weakly to matter)
        return [] if recorded_y == target else [_green_mismatch(recorded_y, target)]
    if read == target:
        return []
    # one axis is inverted relative to the target: green (the map is in the other convention) or red
    relief, strength = relief_sign(n, read)
    name = {"up": "Y-up (OpenGL-style, glTF)", "down": "Y-down (DirectX-style)"}
    if relief == "sunken":  # read with green flipped the relief is inverted: the red channel is the flipped one
        return [Finding("normal-x-flipped", "warning",
                        f"the red channel looks inverted (X flipped): read {name[target]} ({why} it) the "
                        f"slopes are not integrable (confidence {conf:.2f}); with green flipped they are, but "
                        f"the relief comes out inverted (relief sign {strength:.2f})",
                        "invert the red channel (x -> -x), not the green one: flipping green would turn the "
                        "relief upside down")]
    certain = "" if relief == "raised" else (
        "; the red channel may be the inverted one instead (the relief's sign cannot be told): check on a "
        "lit preview")
    code = "green-y-down" if read == "down" else "green-y-up"
    return [Finding(code, "warning",
                    f"green channel looks {name[read]}, confidence {conf:.2f}; {why} {name[target]}{certain}",
                    f"flip the green channel (bakery normal-fix --flip-y) or re-bake with --y {target}; "
                    f"fine if the engine expects {name[other]}")]


#: Curl-test confidence needed to contradict the convention a manifest records (common practice).
AXIS_CONFIDENCE = 0.5


def _green_mismatch(recorded: str, target: str) -> Finding:
    code = "green-y-down" if recorded == "down" else "green-y-up"
    return Finding(code, "warning", f"baked with --y {recorded} (its manifest records it); the target expects "
                   f"Y-{target}", f"re-bake with --y {target} or flip the green channel (bakery normal-fix "
                   "--flip-y)")


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


def check_environment(px: np.ndarray, *, bits: str, filled: bool = False, baked: bool = False) -> list[Finding]:
    """Negative values, clipped highlights (an LDR source), aspect ratio. ``baked``: bakery wrote the file
    (its manifest says so), so an 8- or 16-bit file is an LDR picture made on purpose (the bake warned about
    the values it clipped) and is not judged as a light source."""
    out: list[Finding] = []
    neg = int(np.count_nonzero(px[..., :3] < 0))
    if neg:
        out.append(Finding("env-negative", "error", f"{neg} negative radiance sample(s)",
                           "radiance cannot be negative: clamp at 0 in the source"))
    h, w = px.shape[:2]
    vmax = float(px[..., :3].max())
    # a float cube face may well stay below 1 (a face looking at the ground): only whole panoramas, layouts
    # and cubes are judged by their largest value
    picture = baked and bits in ("8", "16")  # an LDR picture made on purpose: not judged as a light source
    if not picture and (bits in ("8", "16") or (vmax <= 1.0 and w != h)):
        out.append(Finding("env-ldr", "warning", f"highest value is {vmax:.3g}: this looks like a low dynamic "
                           "range image", "use an HDR source (.hdr/.exr); a clipped sun lights far too weakly"))
    elif not (filled or picture):
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


# ------------------------------------------------------------------------------------------ manifests

#: The kind of map each bake writes (its main output and its levels); the exceptions per file are in
#: :func:`facts_from_manifest`.
BAKE_KINDS = {
    "normal": "normal", "blend": "normal", "normal-fix": "normal", "normal-mips": "normal",
    "height": "height", "antialias": "roughness", "roughness": "roughness", "occlusion": "mask",
    "curvature": "mask", "mips": "color", "pack": "packed", "env-convert": "environment",
    "env-diffuse": "environment", "env-specular": "environment", "env-lights": "environment",
    "env-lut": "table",
}

#: Bakes that record the green convention they wrote in their ``y`` parameter (``normal-fix`` records it as
#: ``"y"`` in its manifest when its input's manifest gave it).
Y_BAKES = ("normal", "blend", "normal-mips", "occlusion")


def facts_from_manifest(manifest: dict, name: str) -> MapFacts | None:
    """What a bake's manifest says about its output file ``name`` (a name relative to the manifest's folder),
    or None when the manifest does not describe an image of a bake this module knows.

    A manifest with ``"picture": true`` (:mod:`bakery.preview.picture`) describes a picture, whatever made it.
    Kinds follow :data:`BAKE_KINDS`, with these outputs apart: normal lengths of ``normal-mips``
    (``NAME.length.mipKK``) are masks; the bent normals of ``occlusion`` are unit vectors but not the
    gradient of a surface; the ``roughness`` bake's exponent output is data. A map made with ``edges`` other
    than ``wrap`` is not expected to tile; bakes without an ``edges`` parameter work texel by texel or on the
    sphere and say nothing about tiling.
    """
    bake = manifest.get("bake")
    if manifest.get("picture") is True:  # a picture for people to look at (bakery.preview.picture)
        return MapFacts(kind="picture", source="manifest", bake=bake if isinstance(bake, str) else None,
                        role="picture")
    params = manifest.get("params") if isinstance(manifest.get("params"), dict) else {}
    kind = BAKE_KINDS.get(bake) if isinstance(bake, str) else None
    if kind is None:
        return None
    y = params.get("y") if bake in Y_BAKES and params.get("y") in ("up", "down") else None
    if bake == "normal-fix" and manifest.get("y") in ("up", "down"):  # known when its input's manifest told
        y = manifest["y"]
    gradient = True
    role = "main"
    outputs = manifest.get("outputs")
    if isinstance(outputs, list) and outputs and name != outputs[0]:
        role = "side output"
    level = _level_of(name)
    if level is not None:
        role = f"mip level {level}"
        gradient = level == 0  # coarser levels average the normals: no longer the gradient of a surface
    if bake == "normal-mips" and ".length." in name:
        kind, y, role = "mask", None, "normal lengths" + (f", mip level {level}" if level is not None else "")
    if bake == "occlusion":
        bent = manifest.get("bent_normals")
        if isinstance(bent, dict) and bent.get("file") == name:
            kind, gradient, role = "normal", False, "bent normals"
        else:
            y = None
    filled = bake == "env-lights"
    if bake == "roughness" and params.get("target") == "exponent":
        kind = "data"
    edges = params.get("edges")
    tiles = None if edges is None else edges == "wrap"
    if kind == "environment" or kind == "table":
        tiles = None
    transfer = manifest.get("transfer") if bake == "mips" else "linear"
    if transfer not in ("srgb", "linear"):
        transfer = None
    return MapFacts(kind=kind, y=y, tiles=tiles, transfer=transfer, gradient=gradient, source="manifest",
                    bake=bake, role=role, filled=filled)


def _level_of(name: str) -> int | None:
    """K of a ``NAME.mipKK.ext`` / ``NAME.TAG.mipKK.ext`` / ``NAME.mipKK.FACE.exr`` file name, else None."""
    for part in name.split(".")[1:]:
        if part.startswith("mip") and part[3:].isdigit():
            return int(part[3:])
    return None
