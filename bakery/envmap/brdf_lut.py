"""The split-sum BRDF table: scale A and bias B of F0 over (n·v, roughness).

With the split-sum approximation (Karis 2013) the specular image-based lighting of a GGX surface is
``prefiltered_radiance(r, roughness) * (F0 * A + B)`` where, for the specular BRDF with height-correlated
Smith masking-shadowing (Heitz 2014) and Schlick's Fresnel F = F0 + (1 − F0) Fc, Fc = (1 − v·h)⁵ (Schlick
1994):

    A(n·v, r) = ∫ f(v, l)/F · (1 − Fc) (n·l) dl,    B(n·v, r) = ∫ f(v, l)/F · Fc (n·l) dl.

Written over half vectors h drawn from D(h)(n·h) (dl = 4 (v·h) dh), the integrand is
``G2(v, l) (v·h) / ((n·h)(n·v))`` times (1 − Fc) or Fc (Karis 2013: the split-sum table
integral).

Integration here is deterministic, not Monte Carlo: for each azimuth φ of h, the polar angle runs from 0 to
the cut where n·l = 0, which has the closed form ``θ_cut = ½ atan2(n·v, −sin θv cos φ)`` (with v in the x-z
plane, n·l = 2 (v·h)(n·h) − n·v = sin θv cos φ sin 2θ + n·v cos 2θ). Below the cut the integrand is smooth, so
Gauss-Legendre quadrature in the GGX sampling variable u1 (Walter et al. 2007, eq. 35) between 0 and the cut,
and the midpoint rule in φ (periodic, even), converge quickly; the default orders agree with adaptive scipy
quadrature to about 1e-6 (tests).

Table layout (documented in docs/envlight.md): texel column j holds n·v = (j + 0.5)/W, texel row i holds
perceptual roughness r = (i + 0.5)/H with **roughness growing down the rows** (the first stored row is r ≈ 0);
a shader whose texture t coordinate addresses rows from the first stored row (Vulkan, Direct3D, Metal, KTX2
orientation "rd") samples at (n·v, r). Channel 0 is A, channel 1 is B. GGX alpha = r² (Burley 2012).

Multiple scattering (Fdez-Agüera 2019) needs only E_ss = A + B of this table (E_ms = 1 − E_ss), so no third
channel is stored; docs/envlight.md gives the formula.

References
----------
.. [1] Karis, B. (2013). SIGGRAPH course notes, "Physically Based Shading in Theory and
   Practice".
.. [2] Heitz, E. (2014). Understanding the masking-shadowing function in microfacet-based BRDFs. JCGT 3(2).
.. [3] Schlick, C. (1994). An inexpensive BRDF model for physically-based rendering. CGF 13(3).
.. [4] Walter, B. et al. (2007). Microfacet models for refraction through rough surfaces. EGSR.
.. [5] Fdez-Agüera, C. J. (2019). A multiple-scattering microfacet model for real-time image-based lighting.
   JCGT 8(1), 45-55.
.. [6] Burley, B. (2012). Physically-based shading at Disney. SIGGRAPH course.
"""

from __future__ import annotations

import math

import numpy as np

from bakery.errors import BakeryError
from bakery.microfacet import g2_smith_correlated, schlick_weight
from bakery.progress import Progress

__all__ = ["brdf_lut", "split_sum_terms"]

#: Default quadrature orders: (Gauss-Legendre nodes in u1, midpoint nodes in φ over [0, π]).
DEFAULT_ORDER = (48, 32)


def split_sum_terms(nov, roughness, *, order: tuple[int, int] = DEFAULT_ORDER,
                    progress: Progress | None = None) -> np.ndarray:
    """Scale A and bias B of F0 in the split-sum approximation, for GGX with height-correlated Smith G2.

    Parameters
    ----------
    nov : array_like
        n·v in (0, 1].
    roughness : array_like
        Perceptual roughness r in [0, 1] (GGX alpha = r², Burley 2012). Broadcasts with ``nov``.
    order : (int, int)
        Quadrature nodes in the polar (Gauss-Legendre in u1) and azimuthal (midpoint over [0, π]) directions.
    progress : callable, optional
        ``progress(fraction, "table")`` after each block of entries, rising to 1 (blocks are independent: the
        result does not depend on it).

    Returns
    -------
    ndarray, float64, shape ``broadcast(nov, roughness).shape + (2,)``
        ``[..., 0]`` = A, ``[..., 1]`` = B; A + B in (0, 1] is the directional albedo for F0 = 1.

    Examples
    --------
    >>> a, b = split_sum_terms(0.5, 0.0)   # mirror: A = 1 − Fc(n·v), B = Fc(n·v), Fc = (1 − 0.5)⁵
    >>> round(float(a), 6), round(float(b), 6)
    (0.96875, 0.03125)
    """
    nov, rough = np.broadcast_arrays(np.asarray(nov, dtype=np.float64),
                                     np.asarray(roughness, dtype=np.float64))
    if np.any(~np.isfinite(nov)) or np.any((nov <= 0) | (nov > 1)):
        raise BakeryError("n·v must lie in (0, 1]")
    if np.any(~np.isfinite(rough)) or np.any((rough < 0) | (rough > 1)):
        raise BakeryError("roughness must lie in [0, 1]")
    nu, nphi = order
    x, wx = np.polynomial.legendre.leggauss(nu)
    phi = (np.arange(nphi) + 0.5) * (math.pi / nphi)
    cphi = np.cos(phi)

    shape = nov.shape
    nv = nov.reshape(-1)[:, None, None]
    a = (rough.reshape(-1) ** 2)[:, None, None]
    a2 = a * a
    sv = np.sqrt(np.maximum(0.0, 1 - nv * nv))
    out = np.empty((nv.shape[0], 2))
    step = max(1, 65_536 // (nu * nphi))
    for s in range(0, nv.shape[0], step):
        sl = slice(s, s + step)
        c_v, s_v, al, al2 = nv[sl], sv[sl], a[sl], a2[sl]
        # the polar angle where n·l = 0, per azimuth, and the matching GGX sampling variable u1
        th_cut = 0.5 * np.arctan2(c_v, -s_v * cphi[None, :, None])
        sc2 = np.sin(th_cut) ** 2
        cc2 = np.cos(th_cut) ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            ucut = np.where(sc2 + al2 * cc2 > 0, sc2 / (sc2 + al2 * cc2), 1.0)
        # u1 = 1 − (1 − t)² removes the 1/sqrt(1 − u1) growth of 1/(n·h) near the horizon of h
        tcut = 1 - np.sqrt(np.clip(1 - ucut, 0, 1))
        t = tcut * (x[None, None, :] + 1) * 0.5
        u = 1 - (1 - t) ** 2
        cos2 = (1 - u) / (1 + (al2 - 1) * u)
        ct = np.sqrt(np.clip(cos2, 0, 1))
        st = np.sqrt(np.clip(1 - cos2, 0, 1))
        voh = s_v * st * cphi[None, :, None] + c_v * ct
        nol = 2 * voh * ct - c_v
        g = g2_smith_correlated(c_v, np.maximum(nol, 0), al) * voh / (ct * c_v)
        g = np.where(nol > 0, g, 0.0)
        fc = schlick_weight(voh)
        w = (tcut * 0.5) * wx[None, None, :] * 2 * (1 - t) / nphi
        out[sl, 0] = np.sum(w * g * (1 - fc), axis=(1, 2))
        out[sl, 1] = np.sum(w * g * fc, axis=(1, 2))
        if progress is not None:
            progress(min(s + step, nv.shape[0]) / nv.shape[0], "table")
    return out.reshape(shape + (2,))


def brdf_lut(size: int = 128, *, height: int | None = None, roughness_grows: str = "down",
             order: tuple[int, int] = DEFAULT_ORDER, progress: Progress | None = None) -> np.ndarray:
    """The split-sum BRDF table as a float32 image ``(height, size, 2)``: channel 0 = A, channel 1 = B.

    Parameters
    ----------
    size : int
        Width: texel columns j hold n·v = (j + 0.5)/size.
    height : int, optional
        Rows (default ``size``): row i holds perceptual roughness r = (i + 0.5)/height.
    roughness_grows : {"down", "up"}
        "down" (default): the first (top) row is r ≈ 0. "up": the table is flipped so the bottom row is r ≈ 0
        (for shaders that address rows from the last stored row, e.g. OpenGL with images loaded bottom-up).
    order : (int, int)
        Quadrature orders, see :func:`split_sum_terms`.
    progress : callable, optional
        As for :func:`split_sum_terms`.
    """
    height = size if height is None else height
    if size < 1 or height < 1:
        raise BakeryError("table size must be at least 1")
    if roughness_grows not in ("down", "up"):
        raise BakeryError(f"roughness_grows must be 'down' or 'up'; got {roughness_grows!r}")
    nov = (np.arange(size) + 0.5) / size
    r = (np.arange(height) + 0.5) / height
    lut = split_sum_terms(nov[None, :], r[:, None], order=order, progress=progress).astype(np.float32)
    if roughness_grows == "up":
        lut = lut[::-1]
    return np.ascontiguousarray(lut)
