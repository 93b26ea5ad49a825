"""Cube layouts inside single images (bakery.io.layouts): detection, split/assemble, seamless joins.

Orientation: the Vulkan cube-map face selection table with bakery's handedness flip (bakery.sphere); the
cross arrangement is bakery's own, documented in docs/envmaps.md.
"""

import numpy as np
import pytest

from bakery import sphere as S
from bakery.errors import BakeryError
from bakery.io import layouts as L


@pytest.mark.parametrize("w, h, name", [(512, 256, "equirect"), (256, 192, "cross-wide"), (192, 256, "cross-tall"),
                                        (384, 64, "row"), (64, 384, "stack")])
def test_detect_layout(w, h, name):
    assert L.detect_layout(w, h) == name


@pytest.mark.parametrize("w, h", [(300, 200), (100, 100), (257, 192)])
def test_unknown_aspect_is_refused(w, h):
    with pytest.raises(BakeryError, match=f"{w}x{h}.*aspect ratio"):
        L.detect_layout(w, h, where="pano.exr")


@pytest.mark.parametrize("layout", L.CUBE_IMAGE_LAYOUTS)
def test_split_assemble_round_trip(layout):
    faces = np.random.default_rng(0).random((6, 8, 8, 3), dtype=np.float32)
    img = L.assemble(faces, layout)
    cols, rows = L.IMAGE_LAYOUTS[layout]
    assert img.shape == (8 * rows, 8 * cols, 3)
    np.testing.assert_array_equal(L.split(img, layout), faces)


def test_wrong_cross_size_is_refused():
    with pytest.raises(BakeryError, match="4N x 3N"):
        L.split(np.zeros((30, 41, 3), np.float32), "cross-wide", where="x.exr")


@pytest.mark.parametrize("layout", ["cross-wide", "cross-tall"])
def test_crosses_join_without_seams(layout):
    # a smooth field sampled at texel centres: across every edge shared inside the cross, neighbouring
    # pixels differ about as much as neighbours inside a face (no jumps, no flipped faces)
    n = 32
    d = S.cube_directions(n, dtype=np.float64)
    field = (d[..., 0] * 3 + d[..., 1] * 2 + d[..., 2]).astype(np.float32)[..., None]
    img = L.assemble(field, layout)[..., 0]
    inside = np.abs(np.diff(field[4, :, :, 0], axis=1)).max()
    cols, rows = L.IMAGE_LAYOUTS[layout]
    used = L.assemble(np.ones((6, n, n, 1), np.float32), layout)[..., 0] > 0
    for axis in (0, 1):
        diff = np.abs(np.diff(img, axis=axis))
        both = np.logical_and(*(np.delete(used, -1, axis=axis), np.delete(used, 0, axis=axis)))
        assert diff[both].max() < 2.5 * inside


def test_vcross_back_face_is_turned():
    faces = np.zeros((6, 4, 4, 1), np.float32)
    faces[5, 0, 0] = 1  # top-left texel of -Z
    img = L.assemble(faces, "cross-tall")
    assert img[15, 7, 0] == 1  # ends bottom-right of its cell (rows 12..15, columns 4..7)
