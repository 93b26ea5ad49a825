"""Specular exponent <-> roughness: the encodings of gloss maps, two lobe-matching rules, three targets.

Quantities
----------
Every value a texture can hold about highlight sharpness is one of these *quantities* (:data:`QUANTITIES`):

==============  ==========  ======================================================================
name            domain      meaning
==============  ==========  ======================================================================
exponent        [0, inf]    specular exponent n of the source model (Blinn-Phong or Phong)
gloss-linear    [0, 1]      n = lo + g (hi - lo)                       (``exponent_range=(lo, hi)``)
gloss-exp       [0, 1]      n = lo (hi / lo) ** g                      (``exponent_range=(lo, hi)``)
smoothness      [0, 1]      s = 1 - r, r the perceptual roughness
roughness       [0, 1]      perceptual roughness r = sqrt(alpha) (Burley 2012)
alpha           [0, 1]      GGX (Trowbridge-Reitz) width alpha
beckmann        [0, inf)    Beckmann width m
==============  ==========  ======================================================================

The first three belong to the *exponent* side, the last four to the *microfacet* side (smoothness, roughness
and alpha describe a GGX lobe, beckmann a Beckmann lobe). Converting between the sides needs a rule.

Source model
------------
Blinn-Phong's lobe is cos^n of the angle between the normal and the half vector; that is the microfacet form,
``D = (n + 2)/(2 pi) cos^n(theta_h)`` (Walter et al. 2007). Phong's lobe is cos^n of the angle between the
mirror direction and the light. At normal incidence the mirror-to-light angle is twice the normal-to-half
angle, and with cos^n(x) ~ exp(-n x^2 / 2) near the peak the two lobes agree when

    n_blinn_phong = 4 n_phong                    (common practice; derived at normal incidence)

so a Phong exponent is multiplied by 4 before any rule is applied (and divided by 4 on the way back).

Rules
-----
``peak`` (default; Walter et al. 2007, their Phong-Beckmann correspondence): alpha = sqrt(2 / (n + 2)) for both GGX and
Beckmann. The peak heights agree exactly: D_BP(1) = (n + 2)/(2 pi) = 1/(pi alpha^2) = D_GGX(1) = D_Beckmann(1).

``width``: the half-maximum angles agree. With t^2 = tan^2 of the Blinn-Phong half-maximum angle,
cos^n(theta) = 1/2 gives t^2 = 2^(2/n) - 1, and solving D(theta)/D(0) = 1/2 for the microfacet lobe gives, in
closed form,

    GGX:       alpha^2 = t^2 / (sqrt(2) - 1 + sqrt(2) t^2)     (GGX never falls to half for alpha^2 >= 1/sqrt 2)
    Beckmann:  m^2 = t^2 / (ln 2 + 2 ln(1 + t^2))

For large n, GGX needs alpha larger by sqrt(ln 2 / (sqrt 2 - 1)) = 1.2936 than the peak rule; Beckmann's ratio
tends to 1. Going back from Beckmann m needs the root of s/m^2 = ln 2 + 2 ln(1 + s) (s = t^2); the function is
convex with one positive root, found by Newton's method from above.

References
----------
.. [1] Walter, B., Marschner, S. R., Li, H., Torrance, K. E. (2007). Microfacet models for refraction through
   rough surfaces. Eurographics Symposium on Rendering (Beckmann-Phong correspondence alpha_p = 2/alpha_b^2 - 2,
   in the section on the Phong distribution; normalized Blinn-Phong D, eq. 30; equation numbers from memory).
.. [2] Burley, B. (2012). Physically-based shading at Disney. SIGGRAPH course "Practical Physically Based
   Shading in Film and Game Production" (alpha = r^2).
.. [3] Blinn, J. F. (1977). Models of light reflection for computer synthesized pictures. SIGGRAPH '77.
.. [4] Phong, B. T. (1975). Illumination for computer generated pictures. Communications of the ACM 18(6).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from bakery.errors import BakeryError, BakeryWarning
from bakery.microfacet import alpha_from_exponent, alpha_from_perceptual, exponent_from_alpha, perceptual_from_alpha

__all__ = [
    "MODELS",
    "QUANTITIES",
    "RULES",
    "convert_specular",
    "exponent_from_roughness",
    "half_maximum_tan2",
    "roughness_from_exponent",
]

SQRT2 = math.sqrt(2.0)
LN2 = math.log(2.0)

MODELS = ("blinn-phong", "phong")
RULES = ("peak", "width")


@dataclass(frozen=True)
class Quantity:
    """One kind of stored value: its side (``"exponent"`` or ``"microfacet"``), the lobe it describes on the
    microfacet side, its valid range, and its roughest value (what NaN becomes when clamping)."""

    name: str
    side: str
    lobe: str | None
    low: float
    high: float
    roughest: float
    summary: str


#: Every quantity by name (see the module notes).
QUANTITIES: dict[str, Quantity] = {q.name: q for q in (
    Quantity("exponent", "exponent", None, 0.0, math.inf, 0.0, "specular exponent n, [0, inf]"),
    Quantity("gloss-linear", "exponent", None, 0.0, 1.0, 0.0, "gloss g in [0, 1], n = lo + g (hi - lo)"),
    Quantity("gloss-exp", "exponent", None, 0.0, 1.0, 0.0, "gloss g in [0, 1], n = base ** (g k)"),
    Quantity("smoothness", "microfacet", "ggx", 0.0, 1.0, 0.0, "smoothness s = 1 - r, [0, 1]"),
    Quantity("roughness", "microfacet", "ggx", 0.0, 1.0, 1.0, "perceptual roughness r = sqrt(alpha), [0, 1]"),
    Quantity("alpha", "microfacet", "ggx", 0.0, 1.0, 1.0, "GGX alpha = r^2, [0, 1]"),
    Quantity("beckmann", "microfacet", "beckmann", 0.0, math.inf, 1.0, "Beckmann m, [0, inf)"),
)}

_BLOCK = 1 << 15  # elements per block: a few blocks of temporaries stay in the CPU's L2 cache


def _choice(what: str, value: str, choices) -> str:
    if value not in choices:
        raise BakeryError(f"{what} must be one of {', '.join(map(repr, choices))}; got {value!r}")
    return value


# ------------------------------------------------------------------------------------------------ rules


def half_maximum_tan2(exponent):
    """tan^2 of the angle where cos^n(theta) falls to half its peak: 2^(2/n) - 1 (inf for n = 0).

    Parameters
    ----------
    exponent : array_like
        Blinn-Phong exponent n >= 0.

    Examples
    --------
    >>> round(float(half_maximum_tan2(1.0)), 6)   # cos(theta) = 1/2: theta = 60 degrees, tan^2 = 3
    3.0
    """
    n = np.asarray(exponent)
    with np.errstate(divide="ignore", over="ignore"):
        return np.expm1(n.dtype.type(2.0 * LN2) / n) if n.dtype.kind == "f" else np.expm1(2.0 * LN2 / n)


def _alpha_peak(n: np.ndarray) -> np.ndarray:
    """The peak rule (Walter et al. 2007): :func:`bakery.microfacet.alpha_from_exponent`."""
    return alpha_from_exponent(n, out=np.empty_like(n))


def _exponent_peak(a: np.ndarray) -> np.ndarray:
    """The peak rule's inverse: :func:`bakery.microfacet.exponent_from_alpha`."""
    return exponent_from_alpha(a)


def _alpha_width(n: np.ndarray, lobe: str) -> np.ndarray:
    t2 = half_maximum_tan2(n)
    one = n.dtype.type
    if lobe == "ggx":  # alpha^2 = 1 / (sqrt2 + (sqrt2 - 1) / t^2)
        with np.errstate(divide="ignore"):
            inv = np.divide(one(SQRT2 - 1.0), t2)
        inv += one(SQRT2)
        return np.sqrt(np.divide(one(1.0), inv, out=inv), out=inv)
    with np.errstate(invalid="ignore", divide="ignore"):  # Beckmann: m^2 = t^2 / (ln2 + 2 ln(1 + t^2))
        m2 = t2 / (one(LN2) + one(2.0) * np.log1p(t2))
    m2[np.isinf(t2)] = np.inf
    return np.sqrt(m2, out=m2)


def _exponent_width(a: np.ndarray, lobe: str) -> np.ndarray:
    one = a.dtype.type
    a2 = a * a
    if lobe == "ggx":  # t^2 = alpha^2 (sqrt2 - 1) / (1 - sqrt2 alpha^2); no half maximum past 1/sqrt2
        with np.errstate(divide="ignore", invalid="ignore"):
            t2 = a2 * one(SQRT2 - 1.0) / (one(1.0) - one(SQRT2) * a2)
        t2[a2 >= one(1.0 / SQRT2)] = np.inf
    else:
        t2 = _beckmann_half_tan2(a2)
    with np.errstate(divide="ignore"):
        return np.divide(one(2.0 * LN2), np.log1p(t2))


def _beckmann_half_tan2(m2: np.ndarray) -> np.ndarray:
    """The positive root s of f(s) = s/m^2 - ln2 - 2 ln(1 + s): Beckmann's half-maximum tan^2 for width m.

    f is convex with f(0) < 0, so Newton's method from a point with f > 0 decreases monotonically onto the root.
    s0 = 40 m^2 has f(s0) > 0 for every m^2 < 1e7.
    """
    w = m2.astype(np.float64)
    zero = w <= 0
    w = np.where(zero, 1.0, w)
    s = 40.0 * w
    for _ in range(60):
        f = s / w - LN2 - 2.0 * np.log1p(s)
        step = f / (1.0 / w - 2.0 / (1.0 + s))
        s -= step
        if np.all(np.abs(step) <= 1e-15 * s):
            break
    s[zero] = 0.0
    return s.astype(m2.dtype)


# ------------------------------------------------------------------------------------------------ plans


@dataclass(frozen=True)
class _Plan:
    source: Quantity
    target: Quantity
    model: str
    rule: str
    exponent_range: tuple[float, float] | None

    def decode(self, x: np.ndarray) -> tuple[str, np.ndarray]:
        """Stored values -> ("exponent", Blinn-Phong n) or (lobe, alpha)."""
        one = x.dtype.type
        name = self.source.name
        if name == "exponent":
            return "exponent", x * one(4.0) if self.model == "phong" else x.copy()
        elif name == "gloss-linear":
            lo, hi = self.exponent_range
            n = x * one(hi - lo)
            n += one(lo)
        elif name == "gloss-exp":
            lo, hi = self.exponent_range
            n = np.exp2(x * one(math.log2(hi / lo)))
            n *= one(lo)
        elif name == "smoothness":
            r = one(1.0) - x
            return "ggx", np.multiply(r, r, out=r)
        elif name == "roughness":
            return "ggx", alpha_from_perceptual(x)
        else:
            return self.source.lobe, x.copy()
        if self.model == "phong":
            n *= one(4.0)
        return "exponent", n

    def encode(self, kind: str, v: np.ndarray) -> np.ndarray:
        """(kind, value) from :meth:`decode` -> the target quantity."""
        one = v.dtype.type
        target = self.target
        if target.side == "exponent":
            n = v if kind == "exponent" else self._exponent(v, kind)
            if self.model == "phong":
                n *= one(0.25)
            if target.name == "exponent":
                return n
            if target.name == "gloss-linear":
                lo, hi = self.exponent_range
                n -= one(lo)
                n *= one(1.0 / (hi - lo))
                return n
            lo, hi = self.exponent_range  # gloss-exp
            n *= one(1.0 / lo)
            with np.errstate(divide="ignore"):
                g = np.log2(n, out=n)
            g *= one(1.0 / math.log2(hi / lo))
            return g
        if kind != target.lobe:
            n = v if kind == "exponent" else self._exponent(v, kind)
            v = self._alpha(n, target.lobe)
        if target.name in ("alpha", "beckmann"):
            return v
        r = perceptual_from_alpha(v)
        if target.name == "smoothness":
            np.subtract(one(1.0), r, out=r)
        return r

    def _alpha(self, n: np.ndarray, lobe: str) -> np.ndarray:
        return _alpha_peak(n) if self.rule == "peak" else _alpha_width(n, lobe)

    def _exponent(self, a: np.ndarray, lobe: str) -> np.ndarray:
        return _exponent_peak(a) if self.rule == "peak" else _exponent_width(a, lobe)

    def run(self, x: np.ndarray) -> np.ndarray:
        kind, v = self.decode(x)
        return self.encode(kind, v)

    def run_into(self, x: np.ndarray, out: np.ndarray) -> None:
        """:meth:`run` writing into ``out``; the common case (exponent -> alpha or roughness by the peak rule)
        runs in place in ``out`` with no temporaries."""
        if (self.source.name == "exponent" and self.rule == "peak" and self.target.name in ("alpha", "roughness")):
            one = out.dtype.type
            phong = self.model == "phong"  # alpha^2 = 2/(4 n_P + 2) = 0.5/(n_P + 0.5)
            np.add(x, one(0.5 if phong else 2.0), out=out)
            np.divide(one(0.5 if phong else 2.0), out, out=out)
            np.sqrt(out, out=out)
            if self.target.name == "roughness":
                np.sqrt(out, out=out)
            return
        out[...] = self.run(x)


def _plan(source: str, target: str, model: str, rule: str, exponent_range) -> _Plan:
    _choice("source quantity", source, QUANTITIES)
    _choice("target quantity", target, QUANTITIES)
    _choice("model", model, MODELS)
    _choice("rule", rule, RULES)
    used = {source, target}
    for gloss in ("gloss-linear", "gloss-exp"):
        if gloss not in used:
            continue
        if exponent_range is None:
            raise BakeryError(f"{gloss} needs the exponent range it maps [0, 1] to: exponent_range=(lo, hi) "
                              "(--exponent-range LO,HI)")
        lo, hi = (float(v) for v in exponent_range)
        low_ok = lo > 0.0 if gloss == "gloss-exp" else lo >= 0.0
        if not (math.isfinite(lo) and math.isfinite(hi) and low_ok and lo < hi):
            rule_text = "0 < lo < hi" if gloss == "gloss-exp" else "0 <= lo < hi"
            raise BakeryError(f"{gloss}: the exponent range must satisfy {rule_text}; got ({lo:g}, {hi:g})")
        exponent_range = (lo, hi)
    return _Plan(QUANTITIES[source], QUANTITIES[target], model, rule, exponent_range)


# ------------------------------------------------------------------------------------------------ checks


def _check_values(x: np.ndarray, q: Quantity, clamp: bool) -> np.ndarray:
    """Refuse (or, with ``clamp``, repair) values outside the quantity's range, naming the counts."""
    nan = int(np.count_nonzero(np.isnan(x)))
    below = int(np.count_nonzero(x < q.low))
    above = int(np.count_nonzero(x > q.high))
    parts = []
    if below:
        parts.append(f"{below} below {q.low:g}" if q.low != 0 else f"{below} negative")
    if above:
        parts.append(f"{above} above {q.high:g}")
    if nan:
        parts.append(f"{nan} NaN")
    where = f"{q.name} values out of range [{q.low:g}, {q.high:g}]: " + ", ".join(parts)
    if not clamp:
        raise BakeryError(f"{where}; fix the map or clamp them (clamp=True, --clamp: NaN becomes the roughest "
                          f"value, {q.roughest:g})")
    warnings.warn(f"{where}; clamped (NaN set to {q.roughest:g})", BakeryWarning, stacklevel=3)
    x = np.clip(x, q.low, q.high)
    x[np.isnan(x)] = q.roughest
    return x


def _float_array(values, what: str) -> np.ndarray:
    a = np.asarray(values)
    if a.dtype.kind not in "fiub":
        raise BakeryError(f"{what} must be numeric; got dtype {a.dtype}")
    if a.dtype != np.float64:
        a = a.astype(np.float32, copy=False)
    return a


#: Blocks between two progress reports (about 2 M values).
_REPORT_BLOCKS = 64


def _blockwise(fn: Callable[[np.ndarray, np.ndarray], None], x: np.ndarray,
               ok: Callable[[np.ndarray], bool],
               progress: Callable[[float], None] | None = None) -> np.ndarray | None:
    """Apply an elementwise ``fn(block, out_block)`` in cache-sized blocks, so each block's temporaries stay in
    the CPU's L2 cache and memory sees one read and one write. Returns None, having stopped early, as soon as a
    block fails ``ok``. ``progress(fraction)`` is called every :data:`_REPORT_BLOCKS` blocks. (A second thread
    measured no faster here on a loaded 2-core machine.)"""
    out = np.empty(x.shape, x.dtype)
    flat_in = x.reshape(-1)
    flat_out = out.reshape(-1)
    for i, start in enumerate(range(0, flat_in.size, _BLOCK)):
        block = flat_in[start:start + _BLOCK]
        if not ok(block):
            return None
        fn(block, flat_out[start:start + _BLOCK])
        if progress is not None and i % _REPORT_BLOCKS == _REPORT_BLOCKS - 1:
            progress(min(start + _BLOCK, flat_in.size) / flat_in.size)
    return out


# ------------------------------------------------------------------------------------------------ public


def convert_specular(
    values,
    *,
    source: str = "exponent",
    target: str = "roughness",
    model: str = "blinn-phong",
    rule: str = "peak",
    exponent_range: tuple[float, float] | None = None,
    clamp: bool = False,
    progress: Callable[[float], None] | None = None,
) -> np.ndarray:
    """Convert any stored highlight quantity into any other (see the module notes for the quantities).

    Parameters
    ----------
    values : array_like, any shape
        Values of the ``source`` quantity. float64 stays float64; anything else is computed in float32.
    source, target : str
        One of :data:`QUANTITIES`: ``exponent``, ``gloss-linear``, ``gloss-exp``, ``smoothness``,
        ``roughness``, ``alpha``, ``beckmann``.
    model : {"blinn-phong", "phong"}
        The lobe the exponent side describes; a Phong exponent counts 4x less than a Blinn-Phong one.
    rule : {"peak", "width"}
        How an exponent lobe and a microfacet lobe are matched (peak heights or half-maximum angles).
    exponent_range : (lo, hi), optional
        The exponents gloss 0 and 1 stand for; needed when either side is ``gloss-linear`` (n = lo + g (hi - lo))
        or ``gloss-exp`` (n = lo (hi / lo) ** g, lo > 0).
    clamp : bool
        Values outside the source's range (and NaN) raise :class:`BakeryError` with their count; with
        ``clamp=True`` they are clipped into range (NaN becomes the roughest value) with a warning instead.
    progress : callable, optional
        ``progress(fraction)``, fractions in (0, 1] rising, every few million values; the result does not
        depend on it.

    Returns
    -------
    ndarray
        Same shape as ``values``. Values are not clipped to the target's range (gloss outside [0, 1] can come
        from exponents outside the gloss encoding's range); exponents are inf for a perfect mirror.

    Examples
    --------
    >>> import numpy as np
    >>> convert_specular(np.array([8.0]), source="exponent", target="alpha").round(6)
    array([0.447214])
    """
    plan = _plan(source, target, model, rule, exponent_range)
    x = _float_array(values, f"{source} values")
    shape = x.shape
    x = np.ascontiguousarray(x)
    low, high = plan.source.low, plan.source.high

    def in_range(block: np.ndarray) -> bool:
        return bool(block.min() >= low and block.max() <= high)  # NaN fails both comparisons

    if x.size == 0:
        return np.empty(shape, x.dtype)
    with np.errstate(divide="ignore", over="ignore"):
        out = _blockwise(plan.run_into, x, in_range, progress)
        if out is not None:
            return out.reshape(shape)[()]
        x = _check_values(x, plan.source, clamp)
        out = _blockwise(plan.run_into, x, lambda block: True, progress)
    return out.reshape(shape)[()]


def roughness_from_exponent(
    exponent,
    *,
    source: str = "exponent",
    target: str = "roughness",
    model: str = "blinn-phong",
    rule: str = "peak",
    exponent_range: tuple[float, float] | None = None,
    clamp: bool = False,
) -> np.ndarray:
    """Roughness from a specular-exponent (gloss) map.

    Parameters
    ----------
    exponent : array_like
        The stored map: raw exponents in [0, inf] (``source="exponent"``), or gloss / smoothness in [0, 1].
    source : {"exponent", "gloss-linear", "gloss-exp", "smoothness"}
        How the map stores the exponent (see :func:`convert_specular` for the constants each needs).
    target : {"roughness", "alpha", "beckmann"}
        Perceptual roughness r (default), GGX alpha = r^2, or Beckmann m.
    model : {"blinn-phong", "phong"}
        Lobe of the source exponent.
    rule : {"peak", "width"}
        ``peak`` (default): alpha = sqrt(2/(n + 2)) (Walter et al. 2007), the lobes' peak heights agree.
        ``width``: the half-maximum angles agree (closed form, see the module notes).
    exponent_range, clamp
        As in :func:`convert_specular`.

    Returns
    -------
    ndarray, float32 (float64 for float64 input)
        ``target`` values; roughness, alpha in [0, 1], Beckmann m >= 0.

    Examples
    --------
    >>> import numpy as np
    >>> roughness_from_exponent(np.array([1.0, 32.0, 8192.0], np.float32), target="roughness").round(6)
    array([0.903602, 0.492479, 0.124992], dtype=float32)
    """
    _choice("source", source, ("exponent", "gloss-linear", "gloss-exp", "smoothness"))
    _choice("target", target, ("roughness", "alpha", "beckmann"))
    return convert_specular(exponent, source=source, target=target, model=model, rule=rule,
                            exponent_range=exponent_range, clamp=clamp)


def exponent_from_roughness(
    roughness,
    *,
    source: str = "roughness",
    target: str = "exponent",
    model: str = "blinn-phong",
    rule: str = "peak",
    exponent_range: tuple[float, float] | None = None,
    clamp: bool = False,
) -> np.ndarray:
    """The inverse of :func:`roughness_from_exponent`: specular exponents (or gloss) from roughness.

    Parameters
    ----------
    roughness : array_like
        Values of ``source``.
    source : {"roughness", "alpha", "beckmann", "smoothness"}
        What the input holds: perceptual roughness r (default), GGX alpha, Beckmann m, or smoothness 1 - r.
    target : {"exponent", "gloss-linear", "gloss-exp"}
        What to return: raw exponents (inf for a perfect mirror, 0 where the lobe is too wide for the rule),
        or gloss in the given encoding (not clipped to [0, 1]).
    model, rule, exponent_range, clamp
        As in :func:`roughness_from_exponent`.

    Examples
    --------
    >>> import numpy as np
    >>> exponent_from_roughness(np.array([0.668740], np.float32), source="roughness").round(3)
    array([8.], dtype=float32)
    """
    _choice("source", source, ("roughness", "alpha", "beckmann", "smoothness"))
    _choice("target", target, ("exponent", "gloss-linear", "gloss-exp"))
    return convert_specular(roughness, source=source, target=target, model=model, rule=rule,
                            exponent_range=exponent_range, clamp=clamp)
