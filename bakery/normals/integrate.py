"""Height maps from normal maps: integrating the gradient field.

The normal ``n`` of a height map made by :func:`~bakery.normal_from_height` with strengths ``(s_x, s_y)`` gives
the slopes ``dh/dx = -n_x / (n_z s_x)`` and ``dh/dy = -n_y / (n_z s_y)`` (y up). Measured slopes are rarely
exactly integrable, so the height is the least-squares fit:

- ``edges="wrap"`` (tiling maps): Frankot & Chellappa (1988) -- project onto integrable surfaces in the Fourier
  domain, ``Z = (conj(Hx) P + conj(Hy) Q) / (|Hx|^2 + |Hy|^2)``. The paper's continuous derivative ``j w`` is
  replaced by the frequency response of the derivative kernel that made the map (for central differences
  ``j sin w``), so a map made by bakery integrates back to its height up to rounding. Frequencies the kernel
  cannot see (the Nyquist checkerboard) and the mean are set to 0.
- ``edges="clamp"`` / ``"mirror"`` (non-tiling maps): a least-squares Poisson solve with Neumann boundaries,
  diagonalised by the discrete cosine transform (Simchony, Chellappa & Shao 1990). Slopes are averaged onto the
  edges between texels; the 5-point Laplacian with reflecting borders is solved exactly.

The result has mean 0 in height units (1 = the full height range); :func:`fit_height` places it in [0, 1] for
integer files and reports the offset and scale it chose.

References
----------
.. [1] R. T. Frankot, R. Chellappa, "A Method for Enforcing Integrability in Shape from Shading Algorithms",
   IEEE PAMI 10(4), 439-451, 1988, eq. 21.
.. [2] T. Simchony, R. Chellappa, M. Shao, "Direct analytical methods for solving Poisson equations in computer
   vision problems", IEEE PAMI 12(5), 435-446, 1990.
"""

from __future__ import annotations

import numpy as np

from bakery.edges import check_edges
from bakery.errors import BakeryError
from bakery.normals.encode import unit_normals
from bakery.normals.from_height import _strengths
from bakery.normals.kernels import DEFAULT_KERNEL, get_kernel
from bakery.progress import Progress, no_progress, within

#: Smallest n_z used when turning normals into slopes (about 89.9 degrees of tilt).
MIN_NZ = 1e-3


def slopes_from_normals(normals: np.ndarray, strength: float | tuple[float, float] = 1.0
                        ) -> tuple[np.ndarray, np.ndarray]:
    """``(dh/dx, dh/dy)`` (y up) from unit normals and strengths, float32 (H, W) each."""
    sx, sy = _strengths(strength)
    if sx == 0 or sy == 0:
        raise BakeryError("strength must not be zero when integrating a normal map")
    n = np.asarray(normals, dtype=np.float32)
    nz = np.maximum(n[:, :, 2], np.float32(MIN_NZ))
    return (-n[:, :, 0] / (nz * np.float32(sx))).astype(np.float32), \
        (-n[:, :, 1] / (nz * np.float32(sy))).astype(np.float32)


def height_from_normal(
    normals: np.ndarray,
    *,
    strength: float | tuple[float, float] = 1.0,
    kernel: str = DEFAULT_KERNEL,
    edges: str = "wrap",
    checked: bool = False,
    progress: Progress | None = None,
) -> np.ndarray:
    """Integrate a normal map back to a height map (mean 0).

    Parameters
    ----------
    normals : ndarray, float32, (H, W, 3)
        Unit normals, +Y up; renormalized with a warning if they are not unit length.
    strength : float or (float, float)
        The strength the map was made with (:func:`~bakery.normal_from_height`), so that
        ``normal_from_height(height_from_normal(N)) ~= N``.
    kernel : {"scharr", "sobel", "prewitt", "central"}
        The derivative kernel whose response is inverted (tiling maps only).
    edges : {"wrap", "clamp", "mirror"}
        ``"wrap"``: Frankot-Chellappa (FFT); otherwise a Neumann Poisson solve (DCT).
    checked : bool
        True when the normals are known to be unit length already (bakery's normal-map readers check them):
        the unit check, a full pass over the map, is skipped.
    progress : callable, optional
        ``progress(fraction, "integrating")`` between the steps (the check, the slopes, each transform),
        rising to 1; the result does not depend on it.

    Returns
    -------
    ndarray, float32, (H, W)
        Heights in height units (1 = full range), mean 0.

    References
    ----------
    .. [1] Frankot & Chellappa 1988, IEEE PAMI 10(4), eq. 21.
    .. [2] Simchony, Chellappa & Shao 1990, IEEE PAMI 12(5).

    Examples
    --------
    >>> import numpy as np
    >>> from bakery.normals.from_height import normal_from_height
    >>> x = np.arange(32) * 2 * np.pi / 32
    >>> h = (0.1 * np.sin(x)[None, :] * np.cos(2 * x)[:, None]).astype(np.float32)
    >>> back = height_from_normal(normal_from_height(h, strength=4.0), strength=4.0)
    >>> bool(np.abs(back - h).max() < 1e-5)
    True
    """
    check_edges(edges)
    k = get_kernel(kernel)
    step = progress or no_progress
    if checked:
        n = np.asarray(normals, dtype=np.float32)
    else:
        n = unit_normals(normals, what="normal map", progress=within(step, 0.0, 0.1))
    step(0.1, "integrating")
    gx, gy = slopes_from_normals(n, strength)
    step(0.2, "integrating")
    if edges == "wrap":
        z = _frankot_chellappa(gx, -gy, k.smooth, within(step, 0.2, 0.95))
    else:
        z = _poisson_neumann(gx, -gy, within(step, 0.2, 0.95))
    z -= np.float32(z.mean(dtype=np.float64))
    step(1.0, "integrating")
    return z


def _frankot_chellappa(p: np.ndarray, q: np.ndarray, smooth: tuple[float, float, float],
                       progress: Progress = no_progress) -> np.ndarray:
    """Least-squares periodic integration; ``p`` = dz/dcolumn, ``q`` = dz/drow (rows downward).

    The kernel's responses are separable: ``Hx = j sin(wx) S(wr)``, ``Hr = j sin(wr) S(wx)`` with the smoothing
    response ``S(w) = b + 2 a cos(w)``, so ``conj(Hx) P + conj(Hr) Q = -j (sin(wx) S(wr) P + sin(wr) S(wx) Q)``
    is formed in place by broadcasting 1-D factors (single precision: about 5 bytes per texel beyond the
    spectra)."""
    from scipy import fft

    H, W = p.shape
    wx = 2 * np.pi * np.fft.rfftfreq(W)
    wr = 2 * np.pi * np.fft.fftfreq(H)
    a, b, _ = smooth
    ax = (np.sin(wx)).astype(np.float32)[None, :]  # derivative part along x
    sr = (b + 2 * a * np.cos(wr)).astype(np.float32)[:, None]  # smoothing along rows
    ar = (np.sin(wr)).astype(np.float32)[:, None]
    sx = (b + 2 * a * np.cos(wx)).astype(np.float32)[None, :]
    P = fft.rfft2(np.asarray(p, np.float32), workers=-1)
    P *= ax
    P *= sr
    progress(0.3, "integrating")
    Q = fft.rfft2(np.asarray(q, np.float32), workers=-1)
    Q *= ar
    Q *= sx
    P += Q
    del Q
    progress(0.6, "integrating")
    P *= np.complex64(-1j)
    den = np.square(ax * sr) + np.square(ar * sx)  # |Hx|^2 + |Hr|^2
    ok = den > np.float32(1e-12)
    den[~ok] = 1.0
    P /= den
    P[~ok] = 0.0  # the mean and the frequencies the kernel cannot see
    progress(0.7, "integrating")
    return fft.irfft2(P, s=(H, W), workers=-1).astype(np.float32)


def _poisson_neumann(p: np.ndarray, q: np.ndarray, progress: Progress = no_progress) -> np.ndarray:
    """Least-squares integration with reflecting borders (DCT-II); ``q`` = dz/drow (rows downward)."""
    from scipy import fft

    H, W = p.shape
    p = np.asarray(p, np.float64)
    q = np.asarray(q, np.float64)
    f = np.zeros((H, W))
    ex = 0.5 * (p[:, :-1] + p[:, 1:])  # slope on the edge between columns c and c+1
    f[:, :-1] += ex
    f[:, 1:] -= ex
    del ex
    er = 0.5 * (q[:-1] + q[1:])
    f[:-1] += er
    f[1:] -= er  # f = divergence of the edge slopes: f[c] = e[c] - e[c-1], the 5-point Laplacian of z
    del er
    progress(0.2, "integrating")
    F = fft.dctn(f, type=2, norm="ortho", workers=-1, overwrite_x=True)
    progress(0.55, "integrating")
    lx = 2 * np.cos(np.pi * np.arange(W) / W) - 2
    lr = 2 * np.cos(np.pi * np.arange(H) / H) - 2
    lam = lr[:, None] + lx[None, :]
    lam[0, 0] = 1.0
    F /= lam
    F[0, 0] = 0.0
    progress(0.6, "integrating")
    return fft.idctn(F, type=2, norm="ortho", workers=-1, overwrite_x=True).astype(np.float32)


def fit_height(z: np.ndarray, *, unit_range: bool = True) -> tuple[np.ndarray, float, float]:
    """Place integrated heights for a file: ``h = (z + offset) * scale``.

    The offset puts the lowest point at 0; the scale is 1 unless the relief spans more than the full range and
    ``unit_range`` is true (integer files), then ``1 / (max - min)`` so it fits in [0, 1]. A scale other than 1
    changes the relief: with it, the height map needs the strength divided by ``scale`` to give the same
    normals back.

    Returns
    -------
    (h, offset, scale)
    """
    lo = float(z.min())
    hi = float(z.max())
    offset = -lo
    scale = 1.0 / (hi - lo) if unit_range and hi - lo > 1.0 else 1.0
    h = (z + np.float32(offset)) * np.float32(scale)
    if unit_range:
        np.clip(h, 0.0, 1.0, out=h)
    return h.astype(np.float32), offset, scale
