"""Mean curvature of a height field, and the convexity, concavity and cavity masks derived from it.

For the surface z = h(x, y) the mean curvature is (do Carmo 1976, section 3-3, for a graph)::

    H = [(1 + h_x^2) h_yy - 2 h_x h_y h_xy + (1 + h_y^2) h_xx] / [2 (1 + h_x^2 + h_y^2)^(3/2)]

Sign convention: with this formula a dome (a cap bulging toward +z, out of the surface) has H < 0, a bowl
H > 0, a plane 0, and the saddle a x^2 - b y^2 has H = a - b at its centre. Its unit is one over the length
unit: bakery measures lengths in units of the relief R that the full height range stands for (one texel is
``1 / s_x`` of them wide and ``1 / s_y`` tall, ``s`` the normal map's strength), so multiply by 1/R for a
physical curvature (``relief=R`` does it).

The scale. Derivatives are those of the height smoothed by a Gaussian of standard deviation ``scale`` texels
(derivative-of-Gaussian filters made exact on low polynomials; Lindeberg 1994): features much smaller than
the scale do not count. ``scale=0`` uses the 3x3 differences of the normal map's kernel instead (finest
detail, most noise). A physical scale sigma becomes ``sigma * texels / width`` texels.

Masks (float32 in [0, 1]), from the curvature radius ``radius`` that counts as fully bent (same length unit as
the curvature):

- convexity ``clip(-H * radius, 0, 1)``: ridges, edges and domes;
- concavity ``clip(H * radius, 0, 1)``: grooves, joints and bowls;
- cavity ``1 - concavity``: 1 on open and convex relief, darker in crevices (multiply it into a colour map);
- the signed encoding ``0.5 - 0.5 * clip(H * radius, -1, 1)``: 0.5 flat, above 0.5 convex, below concave.

References
----------
.. [1] M. P. do Carmo, "Differential Geometry of Curves and Surfaces", Prentice-Hall, 1976, section 3-3
   (mean curvature of a graph z = h(x, y)).
.. [2] T. Lindeberg, "Scale-Space Theory in Computer Vision", Kluwer, 1994 (Gaussian derivatives).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bakery.edges import check_edges, pad
from bakery.errors import BakeryError
from bakery.normals.kernels import DEFAULT_KERNEL, get_kernel
from bakery.progress import Progress, no_progress, row_bands, within


@dataclass(frozen=True)
class CurvatureMaps:
    """The maps of :func:`curvature_maps`, float32 (H, W) each."""

    mean: np.ndarray  #: mean curvature H (1/length; dome < 0)
    convexity: np.ndarray  #: [0, 1]
    concavity: np.ndarray  #: [0, 1]
    cavity: np.ndarray  #: [0, 1], 1 = open
    encoded: np.ndarray  #: [0, 1], 0.5 = flat, > 0.5 convex


def _strengths(strength) -> tuple[float, float]:
    if np.ndim(strength) == 0:
        sx = sy = float(strength)
    else:
        sx, sy = (float(v) for v in np.ravel(strength))
    if not (math.isfinite(sx) and math.isfinite(sy)) or sx == 0 or sy == 0:
        raise BakeryError(f"strength must be finite and non-zero; got {strength!r}")
    return sx, sy


def gaussian_derivative_kernels(sigma: float, truncate: float = 4.0
                                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sampled Gaussian smoothing, first- and second-derivative correlation kernels of standard deviation
    ``sigma`` texels, radius ``ceil(truncate * sigma)``, each made exact on the polynomials it must see:
    w0 sums to 1; w1 answers 0 to a constant and 1 to x; w2 answers 0 to a constant and 2 to x^2. (A merely
    truncated Gaussian derivative does not sum to 0: on a height with a large constant part it reads a
    curvature that is not there.)"""
    r = max(1, int(math.ceil(truncate * sigma)))
    x = np.arange(-r, r + 1, dtype=np.float64)
    g = np.exp(-0.5 * (x / sigma) ** 2)
    w0 = g / g.sum()
    w1 = x * g
    w1 /= np.sum(w1 * x)
    w2 = (x * x - np.sum(x * x * g) / g.sum()) * g
    w2 *= 2.0 / np.sum(w2 * x * x)
    return w0, w1, w2


def _texel_derivatives(h: np.ndarray, scale: float, edges: str, kernel: str,
                       progress: Progress = no_progress):
    """h_x, h_y, h_xx, h_xy, h_yy in height units per texel (x right, y up); ``progress`` after each."""
    if scale > 0:
        w0, w1, w2 = gaussian_derivative_kernels(scale)
        r = len(w0) // 2
        # y runs up: each derivative along the rows changes sign once
        p = pad(h, r, edges)
        pairs = ((w0, w1, 1), (w1, w0, -1), (w0, w2, 1), (w1, w1, -1), (w2, w0, 1))
    else:
        k = get_kernel(kernel)
        s = np.asarray(k.smooth, np.float64)
        d1 = np.array([-0.5, 0.0, 0.5])
        d2 = np.array([1.0, -2.0, 1.0])
        r = 1
        p = pad(h, 1, edges)
        pairs = ((s, d1, 1), (d1, s, -1), (s, d2, 1), (d1, d1, -1), (d2, s, 1))
    out = []
    for i, (ky, kx, sign) in enumerate(pairs):
        d = _correlate(p, r, ky, kx)
        out.append(d if sign > 0 else -d)
        progress((i + 1) / len(pairs), "curvature")
    return tuple(out)


def _correlate(p: np.ndarray, r: int, ky: np.ndarray, kx: np.ndarray) -> np.ndarray:
    """Separable correlation of the height ``p`` (float64, padded by ``r`` texels past the borders by the edge
    mode) with rows weighted by ``ky`` and columns by ``kx`` (each of length 2r + 1): OpenCV's sepFilter2D in
    float64, the padding cut off again."""
    import cv2

    return cv2.sepFilter2D(p, cv2.CV_64F, kx, ky, borderType=cv2.BORDER_REPLICATE)[r:-r, r:-r]


def mean_curvature(
    height: np.ndarray,
    *,
    strength: float | tuple[float, float] = 1.0,
    relief: float = 1.0,
    scale: float = 1.0,
    edges: str = "wrap",
    kernel: str = DEFAULT_KERNEL,
    progress: Progress | None = None,
) -> np.ndarray:
    """Mean curvature H of a height map (do Carmo 1976, section 3-3); a dome has H < 0.

    Parameters
    ----------
    height : ndarray, (H, W) or (H, W, 1)
        Heights in height units (the full nominal range of a file is 1).
    strength : float or (float, float)
        ``(s_x, s_y)`` of :func:`bakery.normals.normal_from_height`: the relief of the normal map.
    relief : float
        Physical relief R the full height range (one height unit) stands for: H is returned in 1/(unit of R).
        Default 1: H per height unit.
    scale : float
        Standard deviation in texels of the Gaussian the derivatives are taken at (0: 3x3 differences with
        the smoothing of ``kernel``).
    edges : {"wrap", "clamp", "mirror"}
    kernel : str
        Smoothing of the 3x3 differences when ``scale=0`` (:mod:`bakery.normals.kernels`).
    progress : callable, optional
        ``progress(fraction, "curvature")`` after each of the five derivatives and at the end, rising to 1.

    Returns
    -------
    ndarray, float32, (H, W)
        H in 1/length, any real value; 0 on planes.

    References
    ----------
    .. [1] M. P. do Carmo, "Differential Geometry of Curves and Surfaces", 1976, section 3-3.

    Examples
    --------
    The saddle 0.02 x^2 - 0.01 y^2 (texels, strength 1) has H = 0.02 - 0.01 at its centre:

    >>> import numpy as np
    >>> r, c = np.mgrid[0:33, 0:33] - 16.0
    >>> saddle = (0.02 * c**2 - 0.01 * r**2).astype(np.float32)
    >>> round(float(mean_curvature(saddle, scale=0, edges="clamp")[16, 16]), 6)
    0.01
    """
    from bakery.normals.from_height import _as_height

    h = _as_height(height).astype(np.float64)
    sx, sy = _strengths(strength)
    check_edges(edges)
    scale = float(scale)
    if not (math.isfinite(scale) and scale >= 0):
        raise BakeryError(f"scale must be zero or a positive number of texels; got {scale!r}")
    d = float(relief)
    if not (math.isfinite(d) and d > 0):
        raise BakeryError(f"relief must be a positive number; got {relief!r}")
    step = progress or no_progress
    derivs = _texel_derivatives(h, scale, edges, kernel, within(step, 0.0, 0.6))
    H = np.empty(h.shape, np.float32)
    for r0, r1 in row_bands(h.shape[0], h.shape[1], BAND_TEXELS):  # texel by texel: bands change no value
        hx, hy, hxx, hxy, hyy = (a[r0:r1] for a in derivs)
        # lengths in units of R: one texel is 1/s_x wide, 1/s_y tall
        hx, hy = hx * sx, hy * sy
        hxx, hxy, hyy = hxx * sx * sx, hxy * sx * sy, hyy * sy * sy
        hx2, hy2 = hx * hx, hy * hy
        num = (1 + hx2) * hyy - 2 * hx * hy * hxy + (1 + hy2) * hxx
        t = 1 + hx2 + hy2
        t *= np.sqrt(t)  # (1 + h_x^2 + h_y^2)^(3/2) without a general power
        H[r0:r1] = num / (2 * d * t)
        step(0.6 + 0.4 * r1 / h.shape[0], "curvature")
    return H


#: Texels per band of rows in :func:`mean_curvature`'s texel-by-texel formula (its float64 temporaries stay
#: a few MiB; common practice).
BAND_TEXELS = 1 << 16


def curvature_maps(
    height: np.ndarray,
    *,
    strength: float | tuple[float, float] = 1.0,
    relief: float = 1.0,
    scale: float = 1.0,
    radius: float | None = None,
    edges: str = "wrap",
    kernel: str = DEFAULT_KERNEL,
    progress: Progress | None = None,
) -> CurvatureMaps:
    """Mean curvature and its masks: convexity, concavity, cavity and the signed 0.5-centred encoding.

    Parameters
    ----------
    height, strength, relief, scale, edges, kernel, progress
        As for :func:`mean_curvature` (``progress`` ends at 1 once the masks are made).
    radius : float, optional
        Radius of curvature that fills a mask (same unit as ``relief``): a surface bent this tightly or more
        gives 1. Default: 4 texels (``4 / max(s_x, s_y)`` height units, times ``relief``), a choice of ours.

    Returns
    -------
    CurvatureMaps
        ``mean`` (1/length), ``convexity``, ``concavity``, ``cavity``, ``encoded``: float32 (H, W), the
        masks in [0, 1] (module docstring).

    Examples
    --------
    >>> import numpy as np
    >>> r, c = np.mgrid[0:64, 0:64] - 31.5
    >>> dome = np.sqrt(np.clip(40.0**2 - r**2 - c**2, 0, None)).astype(np.float32)
    >>> m = curvature_maps(dome, scale=0, radius=40.0)
    >>> round(float(m.mean[32, 32]) * 40, 2), float(m.convexity[32, 32]) > 0.99, float(m.cavity[32, 32])
    (-1.0, True, 1.0)
    """
    sx, sy = _strengths(strength)
    step = progress or no_progress
    H = mean_curvature(height, strength=(sx, sy), relief=relief, scale=scale, edges=edges, kernel=kernel,
                       progress=within(step, 0.0, 0.85))
    rho = 4.0 / max(abs(sx), abs(sy)) * float(relief) if radius is None else float(radius)
    if not (math.isfinite(rho) and rho > 0):
        raise BakeryError(f"radius must be a positive length; got {radius!r}")
    k = H * np.float32(rho)
    convex = np.clip(-k, 0.0, 1.0).astype(np.float32)
    concave = np.clip(k, 0.0, 1.0).astype(np.float32)
    step(0.92, "curvature")
    maps = CurvatureMaps(mean=H, convexity=convex, concavity=concave, cavity=(1.0 - concave).astype(np.float32),
                         encoded=(0.5 - 0.5 * np.clip(k, -1.0, 1.0)).astype(np.float32))
    step(1.0, "curvature")
    return maps
