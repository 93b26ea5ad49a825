"""Channel packing: one texture assembled from channels of several maps, with a mip rule per channel.

Each output channel holds one plane (a channel of some map, possibly inverted, or a constant) and a *role* that
says what it holds and so how its mip levels are made (:data:`MIP_RULES`):

- ``color``: stored colour, filtered in linear light by :func:`bakery.mips.color_mips` (sRGB-decoded first when
  stored sRGB-encoded, IEC 61966-2-1, and re-encoded after); one or three colour channels together with an
  ``alpha`` channel are filtered with premultiplied alpha, as the ``mips`` bake does;
- ``roughness`` / ``smoothness``: when the plane comes with a level chain (the ``antialias`` bake's levels,
  :func:`bakery.roughness.antialias.roughness_mips`), level k is the chain's level of the same size, taken as
  it is; levels the chain does not have are averaged from the level above;
- every other role (``alpha`` without colour, ``metalness``, ``occlusion``, ``height``, ``cavity``,
  ``curvature``, ``mask``): the area-weighted box average of :func:`bakery.mips.downsample`, on the stored
  values (no colour conversion);
- ``constant``: the same value at every level.

Level 0 is the planes themselves, unchanged: packing into a file of the same sample type copies every source
channel bit for bit. This module is pure (arrays in, arrays out); :mod:`bakery.bakes.pack` reads and writes.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from bakery.errors import BakeryError
from bakery.progress import Progress, no_progress, within

#: The roles an output channel may have (the manifest's ``channels[...]["role"]``).
ROLES = ("color", "alpha", "roughness", "smoothness", "metalness", "occlusion", "height", "cavity", "curvature",
         "mask", "constant")

#: How each role's mip levels are made, in words (written to manifests and docs).
MIP_RULES = {
    "color": "colour filter in linear light (sRGB decoded and re-encoded when stored sRGB; premultiplied by a "
             "packed alpha channel)",
    "alpha": "averaged (area-weighted box), as the alpha of the colour channels when they are packed too",
    "roughness": "the anti-aliased roughness chain's level of the same size; averaged where there is none",
    "smoothness": "1 - the anti-aliased roughness chain's level of the same size (inverted chain); averaged "
                  "where there is none",
    "metalness": "averaged (area-weighted box, linear)",
    "occlusion": "averaged (area-weighted box, linear)",
    "height": "averaged (area-weighted box, linear)",
    "cavity": "averaged (area-weighted box, linear)",
    "curvature": "averaged (area-weighted box, linear)",
    "mask": "averaged (area-weighted box, linear)",
    "constant": "the constant at every level",
}

#: Roles that take a level chain when one comes with the plane.
CHAIN_ROLES = ("roughness", "smoothness")


@dataclass
class PackedChannel:
    """One output channel.

    Attributes
    ----------
    role : str
        One of :data:`ROLES`.
    plane : ndarray, float32, (H, W), optional
        Level 0 as stored (already inverted where asked); None for a constant.
    constant : float, optional
        The value of a constant channel.
    chain : dict of (width, height) to ndarray (h, w), optional
        Levels to take as they are (``roughness`` / ``smoothness``), by size.
    """

    role: str
    plane: np.ndarray | None = None
    constant: float | None = None
    chain: dict[tuple[int, int], np.ndarray] = field(default_factory=dict)

    def mip_rule(self) -> str:
        if self.role in CHAIN_ROLES and not self.chain:
            return "averaged (area-weighted box, linear)"
        return MIP_RULES[self.role]


def _check(channels: list[PackedChannel]) -> tuple[int, int]:
    if not 1 <= len(channels) <= 4:
        raise BakeryError(f"a packed texture has 1 to 4 channels; got {len(channels)}")
    shapes = {c.plane.shape for c in channels if c.plane is not None}
    if not shapes:
        raise BakeryError("nothing to pack: every channel is a constant; give at least one map")
    if len(shapes) > 1:
        raise BakeryError(f"packed planes differ in size: {sorted(shapes)}")
    for c in channels:
        if c.role not in ROLES:
            raise BakeryError(f"unknown channel role {c.role!r}; must be one of {', '.join(ROLES)}")
        if (c.plane is None) == (c.constant is None):
            raise BakeryError("a packed channel has either a plane or a constant")
    h, w = shapes.pop()
    return w, h


def invert(plane: np.ndarray) -> np.ndarray:
    """``1 - plane`` in float32 (smoothness from roughness, and the like)."""
    return np.float32(1.0) - np.asarray(plane, np.float32)


def pack_levels(channels: list[PackedChannel], *, levels: int = 1, transfer: str = "srgb",
                threads: int | None = None, progress: Progress | None = None) -> list[np.ndarray]:
    """The packed texture's levels, each channel by its role's mip rule (see the module notes).

    Parameters
    ----------
    channels : list of PackedChannel
        The output channels in order (R, G, B, A); planes of one size (H, W), values as stored.
    levels : int
        Levels including level 0 (1: level 0 alone); sizes follow :func:`bakery.mips.mip_size`.
    transfer : {"srgb", "linear"}
        How ``color`` planes are stored.
    threads : int, optional
        Threads of the colour filter; the result does not depend on it.
    progress : callable, optional
        ``progress(fraction, label)`` after level 0, within each colour group's chain and after each averaged
        level, rising to 1; the result does not depend on it.

    Returns
    -------
    list of ndarray, float32, (h, w, C)
        Level 0 first; level 0 holds the planes unchanged.

    Examples
    --------
    A mask averages; a constant stays:

    >>> mask = np.array([[0, 1], [1, 1]], np.float32)
    >>> lv = pack_levels([PackedChannel("mask", mask), PackedChannel("constant", constant=0.5)], levels=2)
    >>> lv[1].tolist()
    [[[0.75, 0.5]]]
    """
    from bakery.mips import color_mips, downsample, level_count, mip_size

    w, h = _check(channels)
    count = level_count(w, h, levels)
    if transfer not in ("srgb", "linear"):
        raise BakeryError(f"unknown transfer {transfer!r}; must be one of srgb, linear")
    C = len(channels)
    out = [np.empty((h, w, C), np.float32)]
    for i, c in enumerate(channels):
        out[0][:, :, i] = c.plane if c.plane is not None else np.float32(c.constant)
    for k in range(1, count):
        mw, mh = mip_size(w, h, k)
        out.append(np.empty((mh, mw, C), np.float32))
    step = progress or no_progress
    if count == 1:
        step(1.0, "levels")
        return out
    step(0.1, "levels")

    colour = [i for i, c in enumerate(channels) if c.role == "color"]
    alpha = [i for i, c in enumerate(channels) if c.role == "alpha"]
    groups: list[list[int]] = []  # channels filtered together by color_mips
    if colour:
        if len(colour) in (1, 3) and len(alpha) == 1:
            groups.append(colour + alpha)
        else:
            groups += [[i] for i in colour]
    grouped = {i for g in groups for i in g}
    averaged = [i for i, c in enumerate(channels) if i not in grouped and c.plane is not None]
    parts = len(groups) + (1 if averaged else 0)  # each colour group and the averaged channels share the bar
    for j, g in enumerate(groups):
        chain = color_mips(out[0][:, :, g], transfer=transfer, kernel="box", levels=count, threads=threads,
                           progress=within(step, 0.1 + 0.9 * j / parts, 0.1 + 0.9 * (j + 1) / parts))
        for k in range(1, count):
            out[k][:, :, g] = chain[k]
    for i, c in enumerate(channels):
        if c.plane is None:
            for k in range(1, count):
                out[k][:, :, i] = np.float32(c.constant)
    if averaged:
        cur = out[0][:, :, averaged]
        for k in range(1, count):
            cur = downsample(cur)
            mh, mw = cur.shape[:2]
            for j, i in enumerate(averaged):  # a chain level of this size replaces the average, and goes on
                given = channels[i].chain.get((mw, mh)) if channels[i].role in CHAIN_ROLES else None
                if given is not None:
                    cur[:, :, j] = given
            out[k][:, :, averaged] = cur
            step(0.1 + 0.9 * (len(groups) + min(1.0, 1 - 4.0 ** -k)) / parts, f"level {k}")
    step(1.0, "levels")
    return out


def resample_plane(plane: np.ndarray, size: tuple[int, int], *, srgb: bool = False) -> np.ndarray:
    """``plane`` (H, W) scaled to ``size`` = (width, height): area average on shrinking axes, bilinear on
    growing ones (OpenCV ``INTER_AREA`` / ``INTER_LINEAR``). With ``srgb`` the values are decoded to linear
    light first and encoded after (IEC 61966-2-1)."""
    import cv2

    from bakery.color import linear_to_srgb, srgb_to_linear

    a = np.ascontiguousarray(plane, dtype=np.float32)
    if (a.shape[1], a.shape[0]) == tuple(size):
        return a
    if srgb:
        a = srgb_to_linear(np.clip(a, 0.0, 1.0))
    shrink = size[0] <= a.shape[1] and size[1] <= a.shape[0]
    r = cv2.resize(a, tuple(int(s) for s in size), interpolation=cv2.INTER_AREA if shrink else cv2.INTER_LINEAR)
    return linear_to_srgb(np.clip(r, 0.0, 1.0)) if srgb else r.astype(np.float32)
