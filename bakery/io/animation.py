"""Animated pictures (turntable previews): GIF and WebP through imageio's Pillow plugin, named explicitly.

imageio picks plugins by extension when none is given, which has gone wrong for other formats here
(DEVELOPERS.md), so the plugin and the format are always passed. WebP is written lossless; GIF holds at most
256 colours per frame (Pillow quantises).
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from bakery.errors import BakeryError
from bakery.io.atomic import atomic_output

#: Animation formats by file name ending.
ANIMATION_SUFFIXES = (".gif", ".webp")


def write_animation(path: str | os.PathLike, frames: Sequence[np.ndarray], *, fps: float = 24.0) -> Path:
    """Write frames (each ``(H, W, 3)`` float32 display values in [0, 1], or uint8) as a looping animation.

    Parameters
    ----------
    path : path-like
        Ends in ``.gif`` or ``.webp``.
    frames : sequence of ndarray
        All of the same shape.
    fps : float
        Frames per second (GIF stores frame times in 10 ms steps).
    """
    import imageio.v3 as iio

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in ANIMATION_SUFFIXES:
        raise BakeryError(f"an animation must end in one of {', '.join(ANIMATION_SUFFIXES)}", path)
    if not frames:
        raise BakeryError("an animation needs at least one frame", path)
    if not 0 < fps <= 100:
        raise BakeryError(f"frames per second must lie in (0, 100]; got {fps}", path)
    stack = np.stack([np.asarray(f) for f in frames])
    if stack.dtype != np.uint8:
        stack = np.rint(np.clip(stack.astype(np.float32), 0, 1) * 255).astype(np.uint8)
    duration = int(round(1000 / fps))
    extra = {"lossless": True} if suffix == ".webp" else {}
    with atomic_output(path) as tmp:
        iio.imwrite(tmp, stack, plugin="pillow", extension=suffix, duration=duration, loop=0, **extra)
    return path


def read_animation(path: str | os.PathLike) -> np.ndarray:
    """All frames of a GIF or WebP animation, ``(N, H, W, 3)`` uint8 (for tests and checks)."""
    import imageio.v3 as iio

    path = Path(path)
    frames = iio.imread(path, plugin="pillow", extension=path.suffix.lower(), index=..., mode="RGB")
    return frames if frames.ndim == 4 else frames[None]
