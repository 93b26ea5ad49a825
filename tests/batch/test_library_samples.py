"""The procedural sample library (bakery.samples.library): a dozen invented materials and a sky."""

from __future__ import annotations

import numpy as np
import pytest

from bakery.io import read_image
from bakery.samples import MATERIALS, library, material_exponent, material_height


@pytest.mark.parametrize("kind", sorted({m[2] for m in MATERIALS}))
def test_heights_tile_and_repeat(kind):
    h = material_height(kind, 64, seed=5)
    assert h.dtype == np.float32 and h.shape == (64, 64)
    assert 0.0 <= h.min() and h.max() <= 1.0 and h.std() > 0.02
    assert np.array_equal(h, material_height(kind, 64, seed=5))
    # seamless (common practice): the step across the wrap is no larger than the steps inside the map
    inner = max(np.abs(np.diff(h, axis=0)).max(), np.abs(np.diff(h, axis=1)).max())
    wrap = max(np.abs(h[0] - h[-1]).max(), np.abs(h[:, 0] - h[:, -1]).max())
    assert wrap <= inner + 1e-6


def test_exponents_span_their_range():
    h = material_height("tiles", 64, seed=3)
    n = material_exponent(h, 5.0, 500.0, seed=3)
    assert n.dtype == np.float32 and 5.0 * 0.999 <= n.min() and n.max() <= 500.0 * 1.001


def test_library_files(tmp_path):
    files = library(tmp_path, size=32, sky_width=64)
    assert len(MATERIALS) == 12
    # 9 legacy materials (height + exponent), 3 authored (normal + roughness, mosaic without), detail, sky
    assert len(files) == 9 * 2 + 3 + 2 + 1 + 1
    assert files["oak_height"] == tmp_path / "wood" / "oak_height.png"
    assert "mosaic_normal" in files and "mosaic_roughness" not in files
    n = read_image(files["tile_normal"]).pixels * 2 - 1
    assert np.allclose(np.linalg.norm(n, axis=-1), 1, atol=0.02)  # unit vectors up to 8-bit rounding
    assert read_image(files["oak_height"]).bits == "16"
    assert read_image(files["oak_exponent"]).bits == "half"
    sky = read_image(files["sky"])
    assert sky.pixels.shape == (32, 64, 3) and sky.pixels.max() > 100


def test_sample_recipe_is_the_generated_one(tmp_path):
    from pathlib import Path

    from bakery.samples import LIBRARY_FOLDER_FILES, LIBRARY_RECIPE, write_library_recipe

    root = Path(__file__).resolve().parents[2]
    assert (root / "samples" / "library.toml").read_text(encoding="utf-8") == LIBRARY_RECIPE
    for sub, text in LIBRARY_FOLDER_FILES.items():
        assert (root / "samples" / "library" / sub / "bakery-folder.toml").read_text(encoding="utf-8") == text
    recipe = write_library_recipe(tmp_path / "lib")
    assert recipe == tmp_path / "lib.toml"
    text = recipe.read_text(encoding="utf-8")
    assert 'source = "lib"' in text and 'output = "lib-baked"' in text
    assert (tmp_path / "lib" / "stone" / "bakery-folder.toml").exists()
