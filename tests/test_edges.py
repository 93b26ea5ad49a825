"""Edge modes: padding agrees with numpy's own padding modes (an independent implementation)."""

from __future__ import annotations

import numpy as np
import pytest

from bakery.edges import pad

#: numpy.pad modes with the same meaning: a tiling map, the edge texel repeated, mirrored with the edge
#: texel repeated (numpy's "symmetric": ``dcba|abcd|dcba``).
NUMPY_MODES = {"wrap": "wrap", "clamp": "edge", "mirror": "symmetric"}


@pytest.mark.parametrize("edges", sorted(NUMPY_MODES))
@pytest.mark.parametrize("shape,halo", [((7, 9), 3), ((16, 16), 15), ((5, 40), 4), ((8, 8), 1), ((4, 6), 9)])
@pytest.mark.parametrize("dtype", [np.float32, np.float64, np.uint16])
@pytest.mark.parametrize("channels", [0, 3, 4, 5])
def test_pad_equals_numpy_pad(edges, shape, halo, dtype, channels):
    a = (np.random.default_rng(0).random(shape + ((channels,) if channels else ())) * 1000).astype(dtype)
    got = pad(a, halo, edges)
    assert got.flags.c_contiguous and got.dtype == a.dtype
    width = ((halo, halo), (halo, halo)) + (((0, 0),) if channels else ())
    np.testing.assert_array_equal(got, np.pad(a, width, mode=NUMPY_MODES[edges]))
