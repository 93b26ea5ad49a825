"""Specular anti-aliasing: roughness mip levels that keep the normal variance lost by averaging normals.

When a normal map is mipmapped, the normals under a coarse texel's footprint average to a vector shorter
than 1; its length |Na| measures how spread out they were. A coarse texel should reflect like the whole
footprint, i.e. with a normal distribution widened by that spread. Each level k of the roughness chain is

    alpha_k^2 = box mean of alpha_0^2 over the footprint  +  c_lobe * v(|Na_k|),     clipped to 1

- ``alpha^2`` is averaged, not the perceptual roughness: alpha^2 is the spread (variance) a lobe carries,
  and spreads of neighbouring texels combine linearly.
- ``v`` is the angular variance (per axis, radians^2) of the normals under the footprint:
  ``vmf`` (default): v = 1/kappa with kappa ~ (3 r - r^3)/(1 - r^2), r = |Na| (Banerjee et al. 2005, the
  approximation for the mean resultant length of a von Mises-Fisher distribution on the sphere; used for
  roughness by Neubelt & Pettineo 2013). A vMF of concentration kappa is exp(-kappa theta^2 / 2) near its mean.
  ``toksvig``: v = sigma^2 = (1 - |Na|)/|Na| (Toksvig 2005, whose s' = s/(1 + s sigma^2) is 1/s' = 1/s + sigma^2,
  the same addition of variances with s = 1/v).
- ``c_lobe`` converts a per-axis angular variance into alpha^2 for the lobe the renderer uses. Near its peak
  a lobe is a Gaussian in the angle theta: Beckmann exp(-tan^2/alpha^2) ~ exp(-theta^2/alpha^2), variance
  alpha^2/2, so c = 2 (kappa ~ 2/alpha^2, Han et al. 2007); GGX (1 + tan^2/alpha^2)^-2 ~ exp(-2 theta^2/alpha^2),
  variance alpha^2/4, so c = 4 (the same small-angle expansion). Variances of independent small deviations
  add (the convolution of the two lobes), which gives the sum above.

The default pairing (``vmf``, GGX, c = 4) and its accuracy against a directly averaged lobe are discussed in
docs/roughness.md; tests/test_roughness_antialias.py measures it.

References
----------
.. [1] Toksvig, M. (2005). Mipmapping normal maps. Journal of Graphics Tools 10(3), 65-71.
.. [2] Banerjee, A., Dhillon, I. S., Ghosh, J., Sra, S. (2005). Clustering on the unit hypersphere using von
   Mises-Fisher distributions. Journal of Machine Learning Research 6, 1345-1382 (kappa approximation, eq. 4.4
   from memory).
.. [3] Han, C., Sun, B., Ramamoorthi, R., Grinspun, E. (2007). Frequency domain normal map filtering. ACM
   Transactions on Graphics 26(3) (SIGGRAPH 2007): vMF lobes, kappa ~ 2/alpha^2 for Beckmann-like lobes.
.. [4] Neubelt, D., Pettineo, M. (2013). Crafting a next-gen material pipeline for The Order: 1886. SIGGRAPH
   course "Physically Based Shading in Theory and Practice".
.. [5] Burley, B. (2012). Physically-based shading at Disney. SIGGRAPH course (alpha = r^2).
"""

from __future__ import annotations

import numpy as np

from bakery.errors import BakeryError

__all__ = [
    "LOBE_SPREAD",
    "METHODS",
    "antialias_levels",
    "normal_spread",
    "roughness_mips",
    "toksvig_exponent",
    "widen_alpha",
]

METHODS = ("vmf", "toksvig")

#: alpha^2 per unit of per-axis angular variance, for each lobe (see the module notes).
LOBE_SPREAD = {"ggx": 4.0, "beckmann": 2.0}


def _check(method: str, lobe: str) -> None:
    if method not in METHODS:
        raise BakeryError(f"method must be one of {', '.join(map(repr, METHODS))}; got {method!r}")
    if lobe not in LOBE_SPREAD:
        raise BakeryError(f"lobe must be one of {', '.join(map(repr, LOBE_SPREAD))}; got {lobe!r}")


def normal_spread(length, *, method: str = "vmf") -> np.ndarray:
    """Per-axis angular variance (radians^2) of normals whose average has length ``length``.

    Parameters
    ----------
    length : array_like, in [0, 1]
        |Na|, the length of the mean of unit normals (1: all parallel).
    method : {"vmf", "toksvig"}
        ``vmf``: 1/kappa, kappa = (3 r - r^3)/(1 - r^2) (Banerjee et al. 2005). ``toksvig``: (1 - r)/r
        (Toksvig 2005).

    Returns
    -------
    ndarray, float32 (float64 for float64 input), >= 0; inf where |Na| = 0.

    Examples
    --------
    >>> import numpy as np
    >>> round(float(normal_spread(np.float64(0.8), method="toksvig")), 12)  # Toksvig 2005: sigma^2 = 0.2/0.8
    0.25
    """
    _check(method, "ggx")
    r = np.asarray(length)
    r = r.astype(np.float64 if r.dtype == np.float64 else np.float32, copy=False)
    one = r.dtype.type
    r = np.clip(r, one(0.0), one(1.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        if method == "vmf":
            r2 = r * r
            v = (one(1.0) - r2) / (r * (one(3.0) - r2))
        else:
            v = (one(1.0) - r) / r
    return v


def widen_alpha(alpha2, length, *, method: str = "vmf", lobe: str = "ggx") -> np.ndarray:
    """alpha'^2 = alpha^2 + c_lobe * v(|Na|), clipped to [0, 1] (see the module notes).

    Parameters
    ----------
    alpha2 : array_like
        The lobe's alpha^2 (GGX alpha = r^2, so alpha^2 = r^4), >= 0.
    length : array_like
        |Na| in [0, 1], broadcast against ``alpha2``.
    method, lobe : str
        See :func:`normal_spread` and :data:`LOBE_SPREAD`.

    Returns
    -------
    ndarray : alpha'^2 in [0, 1].
    """
    _check(method, lobe)
    a2 = np.asarray(alpha2)
    v = normal_spread(length, method=method)
    out = v * v.dtype.type(LOBE_SPREAD[lobe])
    out += a2.astype(out.dtype, copy=False)
    return np.clip(out, 0.0, 1.0, out=out)


def toksvig_exponent(exponent, length):
    """Toksvig's (2005) filtered exponent s' = ft s, ft = |Na| / (|Na| + s (1 - |Na|)).

    Examples
    --------
    >>> round(float(toksvig_exponent(16.0, 0.99)), 4)   # docs/references.md, section 6
    13.7739
    """
    s = np.asarray(exponent, dtype=np.float64)
    r = np.asarray(length, dtype=np.float64)
    return s * r / (r + s * (1.0 - r))


# ------------------------------------------------------------------------------------------------ chains
# Level sizes and the box filter are those of bakery.mips (KTX 2.0 sizes, area-weighted box over each
# texel's footprint). For even sizes, level 1 -- three quarters of the work -- is formed here strip by strip
# from the level-0 normals, normalising each strip in cache instead of storing a unit copy of the whole map
# (measured 1.8x faster than normal_mips on a 4096^2 map, same values to float32 rounding).


def _downsample(a: np.ndarray) -> np.ndarray:
    """One mip step of (h, w) or (h, w, C) float32 data with bakery.mips' filter."""
    from bakery.mips import downsample

    h, w = a.shape[:2]
    if h % 2 == 0 and w % 2 == 0:  # the same 2x2 box, in one expression
        out = a[0::2, 0::2] + a[1::2, 0::2]
        out += a[0::2, 1::2]
        out += a[1::2, 1::2]
        out *= np.float32(0.25)
        return out
    return downsample(a[:, :, None])[:, :, 0] if a.ndim == 2 else downsample(a)


def _length(v: np.ndarray) -> np.ndarray:
    """Euclidean length over the last axis of (h, w, 3) float32."""
    out = v[..., 0] * v[..., 0]
    out += v[..., 1] * v[..., 1]
    out += v[..., 2] * v[..., 2]
    return np.sqrt(out, out=out)


_STRIP = 16  # rows of level 0 per strip: about 0.8 MB of a 4096-wide map, so a strip's work stays in cache


def _unit_mean_level1(normals: np.ndarray, progress=None) -> np.ndarray:
    """Level 1's box mean of the level-0 *unit* normals (even sizes only). Raises on zero-length normals.
    ``progress(fraction)`` every 64 strips."""
    h, w = normals.shape[:2]
    out = np.empty((h // 2, w // 2, 3), np.float32)
    zero = 0
    for y in range(0, h, _STRIP):
        if progress is not None and y and y % (64 * _STRIP) == 0:
            progress(y / h)
        strip = normals[y:y + _STRIP]
        length = _length(strip)
        bad = length == 0
        if bad.any():
            zero += int(bad.sum())
            continue
        out[y // 2:(y + _STRIP) // 2] = _downsample(strip / length[..., None])
    if zero:
        raise BakeryError(f"normal map has {zero} zero-length normal(s)")
    return out


def _normal_lengths(normals: np.ndarray, levels: int, progress=None) -> list[np.ndarray]:
    """|Na| per level: the length of the box mean of the level-0 unit normals under each texel."""
    h, w = normals.shape[:2]
    if h % 2 or w % 2 or levels == 1:
        from bakery.normals.mips import normal_mips

        zero = int(np.count_nonzero(_length(normals) == 0))
        if zero:
            raise BakeryError(f"normal map has {zero} zero-length normal(s)")
        chain = normal_mips(normals, levels=levels)
        lengths = [length for _, length in chain]
        lengths[0] = np.ones((h, w), np.float32)
        if not all(np.isfinite(length).all() for length in lengths[1:]):
            raise BakeryError("normal map holds NaN or Inf values")
        return lengths
    mean = _unit_mean_level1(normals, progress)
    out = [np.ones((h, w), np.float32), _length(mean)]
    for _ in range(2, levels):
        mean = _downsample(mean)
        out.append(_length(mean))
    if not np.isfinite(mean).all():  # NaN and Inf anywhere in level 0 reach every coarser mean
        raise BakeryError("normal map holds NaN or Inf values")
    return out


def antialias_levels(lengths: list[np.ndarray], roughness, *, method: str = "vmf",
                     lobe: str = "ggx", progress=None) -> list[np.ndarray]:
    """Roughness levels from per-level averaged-normal lengths and a base roughness.

    Parameters
    ----------
    lengths : list of ndarray, float32 (h_k, w_k)
        |Na| of each level, level 0 first, sizes halving by the KTX 2.0 rule (level 0 is usually all ones).
    roughness : float or ndarray (h_0, w_0)
        Perceptual roughness r in [0, 1] of level 0 (GGX alpha = r^2, Burley 2012).
    method, lobe : str
        See :func:`widen_alpha`.
    progress : callable, optional
        ``progress(fraction)`` after each level, by the texels done.

    Returns
    -------
    list of ndarray, float32 (h_k, w_k)
        Perceptual roughness per level; level 0 is ``roughness`` itself.
    """
    _check(method, lobe)
    if not lengths:
        raise BakeryError("need at least one level")
    shape0 = lengths[0].shape
    r0 = np.asarray(roughness, dtype=np.float32)
    constant = r0.ndim == 0
    if not constant and r0.shape != shape0:
        raise BakeryError(f"roughness map is {r0.shape[1]}x{r0.shape[0]} but the normal map is "
                          f"{shape0[1]}x{shape0[0]}; they must be the same size")
    a2 = r0 * r0
    a2 *= a2  # alpha^2 = r^4
    out = []
    total = sum(length.size for length in lengths)
    done = 0
    for k, length in enumerate(lengths):
        if k:
            if not constant:
                a2 = _downsample(a2)
            wide = widen_alpha(a2, length, method=method, lobe=lobe)
            np.sqrt(wide, out=wide)
            out.append(np.sqrt(wide, out=wide))
        else:
            out.append(np.broadcast_to(r0, shape0).astype(np.float32) if constant else r0.copy())
        done += length.size
        if progress is not None:
            progress(done / total)
    return out


def roughness_mips(normals: np.ndarray, roughness, *, levels: int | None = None, method: str = "vmf",
                   lobe: str = "ggx", progress=None) -> list[np.ndarray]:
    """The anti-aliased roughness mip chain of a normal map (see the module notes).

    Parameters
    ----------
    normals : ndarray, float32 (H, W, 3)
        Tangent-space normals (any Y convention: only the lengths of averages matter). Renormalised here.
    roughness : float or ndarray, float32 (H, W)
        Perceptual roughness r in [0, 1] of level 0.
    levels : int, optional
        Number of levels, level 0 included; default the full chain to 1x1 (KTX 2.0 sizes max(1, n >> k)).
    method : {"vmf", "toksvig"}
    lobe : {"ggx", "beckmann"}
    progress : callable, optional
        ``progress(fraction)``: fractions in (0, 1] rising, within the work (strips of the first reduction,
        then levels), the last 1.0; the result does not depend on it.

    Returns
    -------
    list of ndarray, float32 (h_k, w_k)
        Perceptual roughness per level, level 0 first.

    Examples
    --------
    >>> import numpy as np
    >>> n = np.zeros((4, 4, 3), np.float32); n[..., 2] = 1
    >>> [lv.shape for lv in roughness_mips(n, 0.5)], float(roughness_mips(n, 0.5)[-1][0, 0])
    ([(4, 4), (2, 2), (1, 1)], 0.5)
    """
    _check(method, lobe)
    n = np.asarray(normals, dtype=np.float32)
    if n.ndim != 3 or n.shape[2] != 3:
        raise BakeryError(f"normals must have shape (H, W, 3); got {n.shape}")
    h, w = n.shape[:2]
    from bakery.mips import level_count

    levels = level_count(w, h, levels)
    r = np.asarray(roughness, dtype=np.float32)
    if not np.isfinite(r).all() or r.min() < 0 or r.max() > 1:
        bad = int(np.count_nonzero(~((r >= 0) & (r <= 1))))
        raise BakeryError(f"roughness must lie in [0, 1]; {bad} value(s) do not")
    if levels == 1 and not np.isfinite(n.sum(dtype=np.float64)):
        raise BakeryError("normal map holds NaN or Inf values")
    # shares measured on an 8192^2 map: level 1's reduction about 70 % of the time, the levels the rest
    lengths = _normal_lengths(n, levels, None if progress is None else lambda f: progress(0.7 * f))
    return antialias_levels(lengths, r, method=method, lobe=lobe,
                            progress=None if progress is None else lambda f: progress(0.7 + 0.3 * f))
