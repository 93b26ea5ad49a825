"""Microfacet terms shared by every bake: normal distributions D, Smith masking G, Fresnel F, sampling.

One definition of each term, used by the specular prefilter, the BRDF lookup table, the roughness tools and
the preview renderer. All functions are pure and vectorised: arguments broadcast against each other.

Conventions
-----------
- Angles enter as cosines measured from the surface normal (``cos_h`` = n·h, ``cos_v`` = n·v, ...).
- ``alpha`` is the width parameter of GGX and Beckmann (*not* the perceptual roughness r stored in textures;
  alpha = r², Burley 2012: use :func:`alpha_from_perceptual`). Blinn-Phong takes its specular ``exponent``.
- dtype: float32 arrays stay float32; Python numbers and float64 arrays are evaluated in float64 (so that
  quadrature checks reach 1e-10).
- Every distribution is normalised as a distribution of microfacet normals, ∫ D(h) (n·h) dω_h = 1 over the
  hemisphere (Walter et al. 2007, eq. 4).

References
----------
.. [1] Trowbridge, T. S., Reitz, K. P. (1975). Average irregularity representation of a rough surface for
   ray reflection. JOSA 65(5), 531-536.
.. [2] Walter, B., Marschner, S. R., Li, H., Torrance, K. E. (2007). Microfacet models for refraction through
   rough surfaces. Eurographics Symposium on Rendering. Eqs. 4, 25-27 (Beckmann), 33-35 (GGX).
.. [3] Heitz, E. (2014). Understanding the masking-shadowing function in microfacet-based BRDFs. Journal of
   Computer Graphics Techniques 3(2), 48-107. Eqs. 2 (visible normals), 72 (Beckmann Λ), 86 (GGX Λ),
   99 (height-correlated masking-shadowing).
.. [4] Schlick, C. (1994). An inexpensive BRDF model for physically-based rendering. Computer Graphics Forum
   13(3), 233-246. Eq. 15.
.. [5] Blinn, J. F. (1977). Models of light reflection for computer synthesized pictures. SIGGRAPH '77.
.. [6] Karis, B. (2013). SIGGRAPH course notes, "Physically Based Shading in Theory and
   Practice". (split sum, Hammersley sampling of GGX, prefilter weight n·l with v = n).
.. [7] Burley, B. (2012). Physically-based shading at Disney. SIGGRAPH course "Practical Physically Based
   Shading in Film and Game Production" (alpha = r²).

Equation numbers cited for [2] and [3] are from memory; the formulas themselves are checked by the tests
(normalisation by quadrature, published check values).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from bakery.errors import BakeryError

__all__ = [
    "LOBES",
    "alpha_from_exponent",
    "alpha_from_perceptual",
    "cook_torrance",
    "d_beckmann",
    "d_blinn_phong",
    "d_ggx",
    "exponent_from_alpha",
    "fresnel_schlick",
    "g1_smith",
    "g2_smith_correlated",
    "hammersley",
    "lambda_beckmann",
    "lambda_ggx",
    "ndf",
    "perceptual_from_alpha",
    "prefilter_weight",
    "prefilter_weight_inplace",
    "radical_inverse",
    "sample_ggx_half",
    "schlick_weight",
    "vis_smith_correlated",
]


def _dtype(*args) -> np.dtype:
    """float32 when every array argument is float32 (Python numbers are neutral), else float64."""
    kinds = [np.asarray(a).dtype for a in args if isinstance(a, np.ndarray | np.generic)]
    if kinds and all(k in (np.float32, np.float16) for k in kinds):
        return np.dtype(np.float32)
    return np.dtype(np.float64)


def _out(x: np.ndarray):
    """Return 0-d results as numpy scalars, arrays unchanged."""
    return x[()] if x.ndim == 0 else x


def _as(x, dt):
    return np.asarray(x, dtype=dt)


# ------------------------------------------------------------------------------------- roughness


def alpha_from_perceptual(r):
    """GGX/Beckmann alpha from perceptual roughness: alpha = r² (Burley 2012).

    Parameters
    ----------
    r : array_like
        Perceptual roughness in [0, 1], as stored in roughness textures.

    Returns
    -------
    alpha : ndarray or scalar, in [0, 1]
    """
    dt = _dtype(r)
    r = _as(r, dt)
    return _out(r * r)


def perceptual_from_alpha(alpha):
    """Perceptual roughness from alpha: r = sqrt(alpha) (Burley 2012); inverse of
    :func:`alpha_from_perceptual`."""
    dt = _dtype(alpha)
    return _out(np.sqrt(np.maximum(_as(alpha, dt), 0)))


def alpha_from_exponent(n: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Microfacet width from a Blinn-Phong exponent by the peak-matching map alpha = sqrt(2 / (n + 2))
    (Walter et al. 2007, their Phong-Beckmann correspondence; used for GGX alike). The peaks agree:
    (n + 2)/(2 pi) = 1/(pi alpha^2).

    ``n`` is a float array in [0, inf] (inf gives 0); the result has its dtype, written into ``out`` when given
    (which may be ``n`` itself).

    >>> import numpy as np
    >>> alpha_from_exponent(np.array([8.0, 32.0])).round(6)
    array([0.447214, 0.242536])
    """
    one = n.dtype.type
    out = np.add(n, one(2.0), out=out)
    np.divide(one(2.0), out, out=out)
    return np.sqrt(out, out=out)


def exponent_from_alpha(a: np.ndarray) -> np.ndarray:
    """Inverse of :func:`alpha_from_exponent`: n = 2/alpha^2 - 2, 0 for alpha >= 1, inf for alpha = 0."""
    with np.errstate(divide="ignore"):
        out = np.divide(a.dtype.type(2.0), a * a)
    out -= a.dtype.type(2.0)
    return np.maximum(out, a.dtype.type(0.0), out=out)


# ------------------------------------------------------------------------------------- distributions


def d_ggx(cos_h, alpha):
    """GGX / Trowbridge-Reitz normal distribution (Walter et al. 2007, eq. 33; Trowbridge & Reitz 1975).

    D(h) = α² / (π ((n·h)² (α² − 1) + 1)²), evaluated as α² / (π (sin²θ + α² cos²θ)²) to avoid cancellation
    at small α. Zero for n·h ≤ 0.

    Parameters
    ----------
    cos_h : array_like
        n·h in [−1, 1].
    alpha : array_like
        Width α > 0 (α = r², perceptual roughness r).

    Returns
    -------
    D : ndarray or scalar, ≥ 0, in sr⁻¹ (per unit projected solid angle of facet normals)

    Examples
    --------
    >>> round(float(d_ggx(1.0, 0.5)), 6)  # 1 / (π α²)
    1.27324
    """
    dt = _dtype(cos_h, alpha)
    c = np.clip(_as(cos_h, dt), -1, 1)
    a2 = _as(alpha, dt) ** 2
    s2 = (1 - c) * (1 + c)
    t = s2 + a2 * c * c
    with np.errstate(divide="ignore", invalid="ignore"):
        d = a2 / (dt.type(math.pi) * t * t)
    return _out(np.where(c > 0, d, dt.type(0)))


def d_beckmann(cos_h, alpha):
    """Beckmann normal distribution (Walter et al. 2007, eq. 25).

    D(h) = exp(−tan²θ / α²) / (π α² cos⁴θ), zero for n·h ≤ 0.

    Parameters
    ----------
    cos_h : array_like
        n·h in [−1, 1].
    alpha : array_like
        RMS slope α > 0.

    Returns
    -------
    D : ndarray or scalar, ≥ 0

    Examples
    --------
    >>> round(float(d_beckmann(math.cos(math.radians(30)), 0.5)), 6)
    0.596662
    """
    dt = _dtype(cos_h, alpha)
    c = np.clip(_as(cos_h, dt), -1, 1)
    a2 = _as(alpha, dt) ** 2
    c2 = c * c
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        tan2 = (1 - c) * (1 + c) / c2
        d = np.exp(-tan2 / a2) / (dt.type(math.pi) * a2 * c2 * c2)
    return _out(np.where(c > 0, d, dt.type(0)))


def d_blinn_phong(cos_h, exponent):
    """Normalised Blinn-Phong distribution (Blinn 1977; normalisation as in Walter et al. 2007, eq. 30).

    D(h) = (n + 2) / (2π) · (n·h)ⁿ, zero for n·h ≤ 0.

    Parameters
    ----------
    cos_h : array_like
        n·h in [−1, 1].
    exponent : array_like
        Specular exponent n ≥ 0.

    Returns
    -------
    D : ndarray or scalar, ≥ 0

    Examples
    --------
    >>> round(float(d_blinn_phong(1.0, 32)), 6)
    5.411268
    """
    dt = _dtype(cos_h, exponent)
    c = np.clip(_as(cos_h, dt), 0, 1)
    n = _as(exponent, dt)
    d = (n + 2) / dt.type(2 * math.pi) * c**n
    return _out(np.where(_as(cos_h, dt) > 0, d, dt.type(0)))


#: Normal distributions by name: ``name -> (function(cos_h, param), parameter name)``.
LOBES: dict[str, tuple[Callable, str]] = {
    "ggx": (d_ggx, "alpha"),
    "beckmann": (d_beckmann, "alpha"),
    "blinn-phong": (d_blinn_phong, "exponent"),
}


def ndf(lobe: str, cos_h, param):
    """Evaluate the normal distribution ``lobe`` ("ggx", "beckmann" or "blinn-phong") at n·h.

    ``param`` is α for GGX and Beckmann, the exponent n for Blinn-Phong (see :data:`LOBES`).
    """
    try:
        fn, _ = LOBES[lobe]
    except KeyError:
        raise BakeryError(f"lobe must be one of {', '.join(map(repr, LOBES))}; got {lobe!r}") from None
    return fn(cos_h, param)


def prefilter_weight(cos_nl, param, *, lobe: str = "ggx"):
    """The split-sum prefilter weight w(n·l) = max(n·l, 0) · D(h), h = normalize(n + l), with v = r = n.

    With v = n the half vector makes the angle θ/2 with n, so n·h = sqrt((1 + n·l)/2): the weight depends on
    n·l alone and the prefilter is a rotation-symmetric convolution. Normalised prefiltered radiance is
    P(n) = ∫ L(l) w dl / ∫ w dl (Karis 2013, the N·L-weighted importance-sampling estimator's limit).

    Parameters
    ----------
    cos_nl : array_like
        n·l in [−1, 1].
    param : array_like
        α (GGX, Beckmann) or exponent (Blinn-Phong).
    lobe : {"ggx", "beckmann", "blinn-phong"}

    Returns
    -------
    w : ndarray or scalar, ≥ 0 (not normalised)
    """
    dt = _dtype(cos_nl, param)
    mu = np.clip(_as(cos_nl, dt), -1, 1)
    p = _as(param, dt)
    if lobe == "ggx":
        # D_GGX with (n·h)² = (1 + μ)/2, 1 − (n·h)² = (1 − μ)/2, multiplied out (no square root, and no
        # cancellation at the peak): w = 4 α² μ / (π ((1 − μ) + α² (1 + μ))²)
        a2 = p * p
        den = (1 - mu) + a2 * (1 + mu)
        with np.errstate(divide="ignore", invalid="ignore"):
            w = (4 / dt.type(math.pi)) * a2 * mu / (den * den)
        return _out(np.where(mu > 0, w, dt.type(0)))
    noh = np.sqrt((1 + mu) * dt.type(0.5))
    return _out(np.maximum(mu, 0) * ndf(lobe, noh, p))


def prefilter_weight_inplace(cos_nl: np.ndarray, param: float, *, lobe: str = "ggx") -> np.ndarray:
    """:func:`prefilter_weight` for large float arrays, computed in place: ``cos_nl`` is overwritten with the
    weights and returned (fewer temporary arrays; used by the brute-force prefilter sums)."""
    mu = cos_nl
    if not isinstance(mu, np.ndarray) or mu.dtype not in (np.float32, np.float64):
        raise TypeError("prefilter_weight_inplace needs a float32 or float64 array")
    t = mu.dtype.type
    if lobe == "ggx":
        a2 = float(param) ** 2
        den = np.multiply(mu, t(a2 - 1))
        den += t(1 + a2)  # (1 − μ) + α² (1 + μ)
        np.square(den, out=den)
        np.maximum(mu, 0, out=mu)
        with np.errstate(divide="ignore", invalid="ignore"):
            mu /= den
        mu *= t(4 * a2 / math.pi)
        return mu
    np.clip(mu, -1, 1, out=mu)
    w = prefilter_weight(mu, param, lobe=lobe)
    mu[...] = w
    return mu


# ------------------------------------------------------------------------------------- masking


def lambda_ggx(cos_v, alpha):
    """Smith Λ for GGX (Heitz 2014, eq. 86): Λ = (−1 + sqrt(1 + α² tan²θ)) / 2.

    Parameters
    ----------
    cos_v : array_like
        Cosine between the normal and the direction, in (0, 1].
    alpha : array_like

    Returns
    -------
    Λ : ndarray or scalar, ≥ 0
    """
    dt = _dtype(cos_v, alpha)
    c = np.clip(_as(cos_v, dt), 0, 1)
    a2 = _as(alpha, dt) ** 2
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        tan2 = (1 - c) * (1 + c) / (c * c)
        lam = (np.sqrt(1 + a2 * tan2) - 1) * dt.type(0.5)
    return _out(lam)


def lambda_beckmann(cos_v, alpha):
    """Smith Λ for Beckmann (Heitz 2014, eq. 72): Λ = (erf(a) − 1)/2 + exp(−a²)/(2a√π), a = 1/(α tanθ)."""
    from scipy.special import erf

    dt = _dtype(cos_v, alpha)
    c = np.clip(_as(cos_v, dt), 0, 1)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        tan = np.sqrt((1 - c) * (1 + c)) / c
        a = 1 / (_as(alpha, dt) * tan)
        lam = (erf(a) - 1) * 0.5 + np.exp(-a * a) / (2 * a * math.sqrt(math.pi))
    return _out(np.where(np.isfinite(a), lam, dt.type(0)).astype(dt))


_LAMBDAS = {"ggx": lambda_ggx, "beckmann": lambda_beckmann}


def _lambda(lobe: str):
    try:
        return _LAMBDAS[lobe]
    except KeyError:
        raise BakeryError(f"Smith masking is defined here for {', '.join(map(repr, _LAMBDAS))}; "
                         f"got {lobe!r}") from None


def g1_smith(cos_v, alpha, *, lobe: str = "ggx"):
    """Smith masking G1 = 1 / (1 + Λ(v)) (Heitz 2014, eq. 43); zero for n·v ≤ 0."""
    dt = _dtype(cos_v, alpha)
    c = _as(cos_v, dt)
    g = 1 / (1 + _as(_lambda(lobe)(c, _as(alpha, dt)), dt))
    return _out(np.where(c > 0, g, dt.type(0)))


def g2_smith_correlated(cos_v, cos_l, alpha, *, lobe: str = "ggx"):
    """Height-correlated Smith masking-shadowing G2 = 1 / (1 + Λ(v) + Λ(l)) (Heitz 2014, eq. 99).

    Parameters
    ----------
    cos_v, cos_l : array_like
        n·v and n·l; G2 = 0 where either is ≤ 0.
    alpha : array_like
    lobe : {"ggx", "beckmann"}

    Returns
    -------
    G2 : ndarray or scalar, in [0, 1]

    Examples
    --------
    >>> round(float(g2_smith_correlated(0.5, 0.8, 0.5)), 6)
    0.836513
    """
    dt = _dtype(cos_v, cos_l, alpha)
    cv, cl, a = _as(cos_v, dt), _as(cos_l, dt), _as(alpha, dt)
    lam = _lambda(lobe)
    g = 1 / (1 + _as(lam(cv, a), dt) + _as(lam(cl, a), dt))
    return _out(np.where((cv > 0) & (cl > 0), g, dt.type(0)))


def vis_smith_correlated(cos_v, cos_l, alpha, *, lobe: str = "ggx"):
    """Visibility term V = G2 / (4 (n·v)(n·l)) of the height-correlated Smith function (Heitz 2014, eq. 99),
    so that the specular BRDF is D·V·F. Zero where n·v ≤ 0 or n·l ≤ 0."""
    dt = _dtype(cos_v, cos_l, alpha)
    cv, cl = _as(cos_v, dt), _as(cos_l, dt)
    g = _as(g2_smith_correlated(cv, cl, alpha, lobe=lobe), dt)
    with np.errstate(divide="ignore", invalid="ignore"):
        v = g / (4 * cv * cl)
    return _out(np.where((cv > 0) & (cl > 0), v, dt.type(0)))


# ------------------------------------------------------------------------------------- Fresnel, BRDF


def fresnel_schlick(cos_d, f0, f90=1.0):
    """Schlick's Fresnel approximation F = F0 + (F90 − F0)(1 − cos θd)⁵ (Schlick 1994, eq. 15).

    Parameters
    ----------
    cos_d : array_like
        v·h (equal to l·h), in [0, 1].
    f0 : array_like
        Reflectance at normal incidence, in [0, 1]; may carry a trailing RGB axis if ``cos_d`` broadcasts.
    f90 : array_like
        Reflectance at grazing incidence (1 in Schlick's paper).
    """
    dt = _dtype(cos_d, f0, f90)
    return _out(_as(f0, dt) + (_as(f90, dt) - _as(f0, dt)) * schlick_weight(_as(cos_d, dt)))


def schlick_weight(cos_d):
    """The Fresnel weight of Schlick's approximation, Fc = (1 − cos θd)⁵ (Schlick 1994, eq. 15), cos_d clipped
    to [0, 1]: F = F0 + (F90 − F0) Fc."""
    dt = _dtype(cos_d)
    m = 1 - np.clip(_as(cos_d, dt), 0, 1)
    m2 = m * m
    return _out(m2 * m2 * m)


def cook_torrance(cos_l, cos_v, cos_h, cos_d, alpha, f0, *, lobe: str = "ggx"):
    """Specular microfacet BRDF f = D(h) · G2(v, l) · F(v·h) / (4 (n·l)(n·v)) (Walter et al. 2007, eq. 20)
    with height-correlated Smith G2 (Heitz 2014, eq. 99) and Schlick's F (Schlick 1994).

    Parameters
    ----------
    cos_l, cos_v, cos_h, cos_d : array_like
        n·l, n·v, n·h and v·h.
    alpha : array_like
    f0 : array_like
    lobe : {"ggx", "beckmann"}

    Returns
    -------
    f : ndarray or scalar, in sr⁻¹; zero where n·l ≤ 0 or n·v ≤ 0
    """
    d = ndf(lobe, cos_h, alpha)
    return _out(np.asarray(d * vis_smith_correlated(cos_v, cos_l, alpha, lobe=lobe)
                           * fresnel_schlick(cos_d, f0)))


# ------------------------------------------------------------------------------------- sampling


def radical_inverse(i) -> np.ndarray:
    """Van der Corput radical inverse in base 2 of non-negative integers (< 2³²), as float64 in [0, 1).

    Examples
    --------
    >>> radical_inverse(np.arange(1, 6)).tolist()
    [0.5, 0.25, 0.75, 0.125, 0.625]
    """
    b = np.asarray(i, dtype=np.uint64) & np.uint64(0xFFFFFFFF)
    b = ((b << np.uint64(16)) | (b >> np.uint64(16))) & np.uint64(0xFFFFFFFF)
    for shift, mask in ((1, 0x55555555), (2, 0x33333333), (4, 0x0F0F0F0F), (8, 0x00FF00FF)):
        m, s = np.uint64(mask), np.uint64(shift)
        b = ((b & m) << s) | ((b >> s) & m)
    return _out(np.asarray(b, dtype=np.float64) * 2.0**-32)


def hammersley(count: int) -> np.ndarray:
    """The Hammersley point set of ``count`` points: rows (i / count, radical_inverse(i)), i = 0..count−1,
    float64 (count, 2) (Karis 2013)."""
    i = np.arange(count)
    return np.stack([i / count, radical_inverse(i)], axis=-1)


def sample_ggx_half(u1, u2, alpha) -> np.ndarray:
    """GGX-distributed half vectors from uniform numbers (Walter et al. 2007, eqs. 35-36), pdf D(h)(n·h).

    cos θh = sqrt((1 − u1) / (1 + (α² − 1) u1)), φh = 2π u2. Returns unit vectors (..., 3) in the frame
    whose +z is the normal.

    Examples
    --------
    >>> h = sample_ggx_half(0.5, 0.0, 0.5)
    >>> round(float(h[2]), 6) == round(1 / math.sqrt(1.25), 6)
    True
    """
    dt = _dtype(u1, u2, alpha)
    u1, u2, a = _as(u1, dt), _as(u2, dt), _as(alpha, dt)
    cos2 = (1 - u1) / (1 + (a * a - 1) * u1)
    cos_t = np.sqrt(np.clip(cos2, 0, 1))
    sin_t = np.sqrt(np.clip(1 - cos2, 0, 1))
    phi = dt.type(2 * math.pi) * u2
    return np.stack(np.broadcast_arrays(sin_t * np.cos(phi), sin_t * np.sin(phi), cos_t), axis=-1)
