"""Cubemap layouts inside single images: crosses, rows, stacks (pure array functions).

A cubemap in memory is float32 ``(6, N, N, C)``, faces +X, -X, +Y, -Y, +Z, -Z, each oriented by the Vulkan
face selection table with bakery's handedness flip (:mod:`bakery.sphere`): every face is the view from inside
the sphere, the right way round, with +Y up on the four side faces.

Single-image layouts (face size N):

``cross-wide`` (4N x 3N)::

        .   +Y   .    .
       -X   +Z   +X   -Z
        .   -Y   .    .

``cross-tall`` (3N x 4N)::

        .   +Y   .
       -X   +Z   +X
        .   -Y   .
        .   -Z   .        (-Z turned by 180 degrees so that it joins -Y)

``row`` (6N x N): +X -X +Y -Y +Z -Z left to right. ``stack`` (N x 6N): the same top to bottom.
``equirect`` (2N x N): a panorama, not a cube layout (see :mod:`bakery.sphere`).

Every face in the crosses joins its neighbours without a seam: the middle row of ``cross-wide`` reads like the
middle band of a panorama (-X, front, +X, back), +Y sits above the front face and -Y below it.
Unused cells of a cross are written as zero.
"""

from __future__ import annotations

import numpy as np

from bakery.errors import BakeryError

#: Layouts of a single image, with (columns, rows) in face units.
IMAGE_LAYOUTS: dict[str, tuple[int, int]] = {
    "equirect": (2, 1),
    "cross-wide": (4, 3),
    "cross-tall": (3, 4),
    "row": (6, 1),
    "stack": (1, 6),
}
CUBE_IMAGE_LAYOUTS = ("cross-wide", "cross-tall", "row", "stack")

#: (face, column, row, quarter turns counter-clockwise applied when placing the face)
_CELLS: dict[str, tuple[tuple[int, int, int, int], ...]] = {
    "cross-wide": ((0, 2, 1, 0), (1, 0, 1, 0), (2, 1, 0, 0), (3, 1, 2, 0), (4, 1, 1, 0), (5, 3, 1, 0)),
    "cross-tall": ((0, 2, 1, 0), (1, 0, 1, 0), (2, 1, 0, 0), (3, 1, 2, 0), (4, 1, 1, 0), (5, 1, 3, 2)),
    "row": tuple((f, f, 0, 0) for f in range(6)),
    "stack": tuple((f, 0, f, 0) for f in range(6)),
}

#: Names of the faces in file-name patterns (``{face}``), in storage order.
FACE_TOKENS = ("x+", "x-", "y+", "y-", "z+", "z-")


def detect_layout(width: int, height: int, *, where: object = None) -> str:
    """The layout of a single image from its aspect ratio: 2:1 equirect, 4:3 cross-wide, 3:4 cross-tall, 6:1 row,
    1:6 stack. Raises :class:`BakeryError` for anything else."""
    for name, (cols, rows) in IMAGE_LAYOUTS.items():
        if width * rows == height * cols and width % cols == 0:
            return name
    raise BakeryError(
        f"image is {width}x{height}: its aspect ratio is not 2:1 (panorama), 4:3 or 3:4 (cross), 6:1 or 1:6 "
        "(row, stack); name its layout with --input-layout if it is one of these", where)


def face_size(width: int, height: int, layout: str, *, where: object = None) -> int:
    """Face edge of a cube layout, checking that the image has exactly that layout's shape."""
    cols, rows = IMAGE_LAYOUTS[layout]
    n = width // cols
    if n < 1 or width != n * cols or height != n * rows:
        raise BakeryError(f"a {layout} image must be {cols}N x {rows}N pixels; got {width}x{height}", where)
    return n


def split(image: np.ndarray, layout: str, *, where: object = None) -> np.ndarray:
    """Six faces ``(6, N, N, C)`` from a cross, row or stack image ``(H, W, C)``."""
    if layout not in _CELLS:
        raise BakeryError(f"not a cube layout: {layout!r}")
    h, w = image.shape[:2]
    n = face_size(w, h, layout, where=where)
    faces = np.empty((6, n, n, image.shape[2]), dtype=np.float32)
    for f, col, row, turns in _CELLS[layout]:
        cell = image[row * n:(row + 1) * n, col * n:(col + 1) * n]
        faces[f] = np.rot90(cell, -turns) if turns else cell
    return faces


def assemble(faces: np.ndarray, layout: str) -> np.ndarray:
    """A cross, row or stack image ``(H, W, C)`` from faces ``(6, N, N, C)``; empty cells are zero."""
    if layout not in _CELLS:
        raise BakeryError(f"not a cube layout: {layout!r}")
    n, c = faces.shape[1], faces.shape[3]
    cols, rows = IMAGE_LAYOUTS[layout]
    out = np.zeros((rows * n, cols * n, c), dtype=np.float32)
    for f, col, row, turns in _CELLS[layout]:
        out[row * n:(row + 1) * n, col * n:(col + 1) * n] = np.rot90(faces[f], turns) if turns else faces[f]
    return out
