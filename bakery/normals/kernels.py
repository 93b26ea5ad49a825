"""Derivative kernels for height maps, and the edge modes that pad them.

Every kernel here is separable: a derivative part ``[-1, 0, 1] / 2`` across the direction of the derivative
and a smoothing part along the other direction. Normalised so that a unit slope (1 height unit per texel)
gives a response of exactly 1; all four are exact on quadratics.

========  ====================  ===================================================================
name      smoothing part        source
========  ====================  ===================================================================
central   [1]                   central difference, e.g. Abramowitz & Stegun 1964, eq. 25.3.6
sobel     [1, 2, 1] / 4         Duda & Hart 1973 (the Sobel operator; overall 1/8)
scharr    [3, 10, 3] / 16       Scharr 2000, PhD thesis, Heidelberg (overall 1/32)
prewitt   [1, 1, 1] / 3         Prewitt 1970, "Object enhancement and extraction" (overall 1/6)
========  ====================  ===================================================================

Along the derivative's axis every kernel responds to ``sin(w x)`` with ``sin(w)/w`` (w in radians per texel).
They differ across it: Scharr's smoothing keeps the response nearly the same in every direction (the most
isotropic of the four), central differences have no smoothing at all and cannot see a one-texel checkerboard.

Edge modes, named after how the texture will be sampled:

- ``wrap``: the texture tiles (``GL_REPEAT``): the texel left of column 0 is column W-1.
- ``clamp``: the edge texel repeats (``GL_CLAMP_TO_EDGE``).
- ``mirror``: the texture is mirrored at its edges, edge texel repeated (``GL_MIRRORED_REPEAT``):
  ... c b a | a b c ... .

References
----------
.. [1] M. Abramowitz, I. A. Stegun, "Handbook of Mathematical Functions", 1964, eq. 25.3.6.
.. [2] R. O. Duda, P. E. Hart, "Pattern Classification and Scene Analysis", Wiley, 1973 (the Sobel operator).
.. [3] H. Scharr, "Optimale Operatoren in der Digitalen Bildverarbeitung", PhD thesis, Heidelberg, 2000.
.. [4] J. M. S. Prewitt, "Object enhancement and extraction", in Picture Processing and Psychopictorics, 1970.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bakery.edges import check_edges, pad
from bakery.errors import BakeryError


@dataclass(frozen=True)
class Kernel:
    """A separable 3x3 derivative kernel: ``derivative (x) smoothing``, derivative part ``[-1, 0, 1]/2``."""

    name: str
    smooth: tuple[float, float, float]  # weights of rows -1, 0, +1 (sum 1); (0, 1, 0) for none
    source: str

    @property
    def matrix_x(self) -> np.ndarray:
        """The full 3x3 x-derivative kernel as a correlation matrix (rows top to bottom, columns left to
        right); the y kernel is its transpose."""
        return np.outer(np.array(self.smooth), np.array([-0.5, 0.0, 0.5]))


KERNELS: dict[str, Kernel] = {
    "central": Kernel("central", (0.0, 1.0, 0.0), "central difference (Abramowitz & Stegun 1964, 25.3.6)"),
    "sobel": Kernel("sobel", (0.25, 0.5, 0.25), "Duda & Hart 1973"),
    "scharr": Kernel("scharr", (3 / 16, 10 / 16, 3 / 16), "Scharr 2000"),
    "prewitt": Kernel("prewitt", (1 / 3, 1 / 3, 1 / 3), "Prewitt 1970"),
}

#: The default kernel: Scharr, the most isotropic of the four (docs/normals.md explains the choice).
DEFAULT_KERNEL = "scharr"

def get_kernel(name: str) -> Kernel:
    """The kernel called ``name``; a :class:`BakeryError` naming the choices for an unknown one."""
    try:
        return KERNELS[name]
    except KeyError:
        raise BakeryError(f"unknown derivative kernel {name!r}; must be one of {', '.join(KERNELS)}") from None


def derivatives(a: np.ndarray, kernel: str | Kernel = DEFAULT_KERNEL, *, edges: str = "wrap"
                ) -> tuple[np.ndarray, np.ndarray]:
    """Height slopes per texel: ``(dh/dx, dh/dy)``, float32 (H, W) each.

    x runs right along the columns; y runs **up** the image (toward row 0), like texture v. A height that
    rises toward the top of the image has a positive ``dh/dy``.

    Parameters
    ----------
    a : ndarray, (H, W)
        Heights in any unit.
    kernel : {"central", "sobel", "scharr", "prewitt"} or Kernel
    edges : {"wrap", "clamp", "mirror"}

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(8, dtype=np.float32)
    >>> dx, dy = derivatives(np.tile(0.5 * x, (4, 1)), "sobel", edges="clamp")
    >>> float(dx[1, 3]), float(dy[1, 3])
    (0.5, 0.0)
    """
    k = get_kernel(kernel) if isinstance(kernel, str) else kernel
    p = pad(np.asarray(a, dtype=np.float32), 1, check_edges(edges))
    gx = np.empty(a.shape, np.float32)
    gy = np.empty(a.shape, np.float32)
    slopes_into(p, k, 1.0, 1.0, gx, gy)
    return gx, gy


def slopes_into(p: np.ndarray, k: Kernel, sx: float, sy: float, gx: np.ndarray, gy: np.ndarray) -> None:
    """From a block ``p`` padded by one texel, write ``sx * dh/dx`` into ``gx`` and ``sy * dh/dy`` into ``gy``
    (both of shape ``p.shape - 2``; y up, toward row 0)."""
    bx, by = slopes(p, k, sx, sy)
    gx[...] = bx
    gy[...] = by


def slopes(p: np.ndarray, k: Kernel, sx: float, sy: float, bufx: np.ndarray | None = None,
           bufy: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """``(sx * dh/dx, sy * dh/dy)`` of the interior of a block ``p`` padded by one texel: views into ``bufx``,
    ``bufy`` (float32 arrays of ``p``'s shape, allocated when not given).

    One separable correlation per derivative (OpenCV ``sepFilter2D``, float32). The result for a texel depends
    only on its 3x3 neighbourhood, not on where it lies in the block: checked bit for bit by the tiling tests.
    """
    import cv2

    p = np.ascontiguousarray(p, dtype=np.float32)
    bufx = np.empty(p.shape, np.float32) if bufx is None else bufx
    bufy = np.empty(p.shape, np.float32) if bufy is None else bufy
    smooth = np.asarray(k.smooth, np.float32)
    # correlation: out[c] = sum_i kernel[i] * p[c + i - 1]
    dx = np.array([-0.5 * sx, 0.0, 0.5 * sx], np.float32)  # d/dx, x right
    dy = np.array([0.5 * sy, 0.0, -0.5 * sy], np.float32)  # d/dy, y up = toward smaller rows
    cv2.sepFilter2D(p, cv2.CV_32F, dx, smooth, dst=bufx, borderType=cv2.BORDER_REPLICATE)
    cv2.sepFilter2D(p, cv2.CV_32F, smooth, dy, dst=bufy, borderType=cv2.BORDER_REPLICATE)
    return bufx[1:-1, 1:-1], bufy[1:-1, 1:-1]
