"""Normal vectors <-> stored texel values, the Y conventions, and unit-length checks.

Stored values are ``rgb = n * 0.5 + 0.5`` (the trade's usual mapping of [-1, 1] to [0, 1]) for every file type:
8-bit, 16-bit and float files alike, so one decoding rule reads them all. Quantising to integers rounds to
nearest with ties to even (``numpy.rint``, as :func:`bakery.io.images.quantize`): a flat normal's 127.5 becomes
128.

Y conventions (Khronos glTF 2.0, material.normalTexture, specifies +Y up):

- ``"up"``: green grows toward the top of the image (OpenGL-style, glTF 2.0). bakery's internal convention.
- ``"down"``: green grows toward the bottom (DirectX-style): the file stores ``-n_y``, i.e. ``g' = 1 - g``.

The convention is applied to the float vector before quantisation. Two-channel (XY) maps store x and y only;
the reader rebuilds ``z = sqrt(max(0, 1 - x^2 - y^2))``.

References
----------
.. [1] Khronos Group, "glTF 2.0 Specification", 2017, section 3.9.3 (material.normalTexture).
"""

from __future__ import annotations

import warnings

import numpy as np

from bakery.errors import BakeryError, BakeryWarning
from bakery.progress import Progress, row_bands

Y_CONVENTIONS = ("up", "down")

#: Largest | |n| - 1 | accepted without a warning: about twice the worst length error of 8-bit quantisation
#: (sqrt(3)/255 = 0.0068). Common practice, not a published value.
UNIT_TOLERANCE = 0.015


def check_y(y: str) -> str:
    if y not in Y_CONVENTIONS:
        raise BakeryError(f"unknown Y convention {y!r}; must be 'up' (OpenGL-style, glTF) or 'down' "
                          "(DirectX-style)")
    return y


def encode_normals(normals: np.ndarray, *, y: str = "up", channels: int = 3,
                   out: np.ndarray | None = None) -> np.ndarray:
    """Unit normals (H, W, 3) in [-1, 1] -> stored values ``n * 0.5 + 0.5`` in [0, 1].

    Parameters
    ----------
    normals : ndarray, float32, (H, W, 3)
        +Y up (bakery's convention).
    y : {"up", "down"}
        The file's convention; ``"down"`` negates y before encoding.
    channels : {3, 2}
        3 = RGB; 2 = XY (z dropped, rebuilt by the reader).

    Returns
    -------
    ndarray, float32, (H, W, channels), values in [0, 1]

    Examples
    --------
    >>> import numpy as np
    >>> n = np.array([[[0.3, 0.4, 0.866025]]], np.float32)
    >>> [round(float(v), 5) for v in encode_normals(n)[0, 0]]
    [0.65, 0.7, 0.93301]
    >>> [round(float(v), 5) for v in encode_normals(n, y="down")[0, 0]]
    [0.65, 0.3, 0.93301]
    """
    check_y(y)
    if channels not in (2, 3):
        raise BakeryError(f"a normal map has 2 (XY) or 3 (XYZ) channels; got {channels}")
    n = np.asarray(normals, dtype=np.float32)
    if out is None:
        out = np.empty(n.shape[:2] + (channels,), np.float32)
    np.multiply(n[:, :, :channels], np.float32(0.5), out=out)
    if y == "down":
        np.negative(out[:, :, 1], out=out[:, :, 1])
    out += np.float32(0.5)
    return out


def decode_normals(pixels: np.ndarray, *, y: str = "up") -> np.ndarray:
    """Stored values (H, W, C) in [0, 1] -> vectors (H, W, 3) in bakery's +Y-up convention (not renormalized).

    C = 2: XY, z rebuilt as ``sqrt(max(0, 1 - x^2 - y^2))``. C = 3: RGB. C = 4: RGB, alpha ignored.

    Examples
    --------
    >>> import numpy as np
    >>> [round(float(v), 4) for v in decode_normals(np.array([[[0.65, 0.7]]], np.float32))[0, 0]]
    [0.3, 0.4, 0.866]
    """
    check_y(y)
    p = np.asarray(pixels, dtype=np.float32)
    if p.ndim != 3 or p.shape[2] not in (2, 3, 4):
        raise BakeryError(f"a normal map needs 2 (XY), 3 (RGB) or 4 (RGBA) channels; got shape {p.shape}")
    n = np.empty(p.shape[:2] + (3,), np.float32)
    c = 2 if p.shape[2] == 2 else 3
    np.multiply(p[:, :, :c], np.float32(2.0), out=n[:, :, :c])
    n[:, :, :c] -= np.float32(1.0)
    if y == "down":
        np.negative(n[:, :, 1], out=n[:, :, 1])
    if c == 2:
        z = np.float32(1.0) - n[:, :, 0] ** 2 - n[:, :, 1] ** 2
        np.sqrt(np.maximum(z, 0.0), out=n[:, :, 2])
    return n


#: Vectors :func:`normalize` takes per block (common practice: a few MB of float32, so the temporaries stay in
#: the caches and a large map reports progress block by block).
NORMALIZE_BLOCK = 1 << 18


def normalize(v: np.ndarray, *, out: np.ndarray | None = None,
              progress: Progress | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Unit vectors and lengths of (..., 3) vectors. Zero vectors become (0, 0, 1) with length 0.

    ``out`` may be ``v`` itself (in place). Works in blocks along the first axis; ``progress(fraction,
    "normalizing")`` after each block, rising to 1."""
    v = np.asarray(v, dtype=np.float32)
    if out is None:
        out = np.empty_like(v)
    length = np.empty(v.shape[:-1], np.float32)
    if v.ndim < 2:
        _normalize_block(v, out, length)
        return out, length
    n = v.shape[0]
    for i0, i1 in row_bands(n, v[0].size // v.shape[-1], NORMALIZE_BLOCK):
        _normalize_block(v[i0:i1], out[i0:i1], length[i0:i1])
        if progress is not None:
            progress(i1 / n, "normalizing")
    return out, length


def _normalize_block(v: np.ndarray, out: np.ndarray, length: np.ndarray) -> None:
    np.sqrt(np.einsum("...i,...i->...", v, v, dtype=np.float32), out=length)
    safe = np.where(length > 0, length, np.float32(1.0))
    np.divide(v, safe[..., None], out=out)
    zero = length == 0
    if zero.any():
        out[zero] = (0.0, 0.0, 1.0)


def unit_normals(normals: np.ndarray, *, what: str = "normal map", tolerance: float = UNIT_TOLERANCE,
                 progress: Progress | None = None) -> np.ndarray:
    """Check that (H, W, 3) normals are unit length; if not, warn with the measured spread and renormalize.

    The warning (:class:`~bakery.BakeryWarning`) reads e.g. ``"normal map is not unit length: lengths 0.62 ..
    1.00 (mean 0.93, 41% of texels off by more than 0.015); renormalized"``. ``progress``: as
    :func:`normalize`'s.
    """
    n = np.asarray(normals, dtype=np.float32)
    if n.ndim != 3 or n.shape[2] != 3:
        raise BakeryError(f"{what}: expected normals of shape (H, W, 3); got {n.shape}")
    if not np.isfinite(n).all():
        raise BakeryError(f"{what}: holds NaN or Inf values")
    unit, length = normalize(n, progress=progress)
    off = np.abs(length - 1.0) > tolerance
    if off.any():
        warnings.warn(
            f"{what} is not unit length: lengths {float(length.min()):.3g} .. {float(length.max()):.3g} "
            f"(mean {float(length.mean(dtype=np.float64)):.3g}, {100.0 * off.mean():.3g}% of texels off by more "
            f"than {tolerance}); renormalized", BakeryWarning, stacklevel=2)
    return unit
