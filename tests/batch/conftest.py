"""A small library of invented maps and a recipe using the test bakes (tests/batch/bakes_for_tests.py)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import tests.batch.bakes_for_tests  # noqa: F401  (registers test-invert and test-mix)
from bakery.io import write_image

RECIPE = """\
source = "lib"
output = "out"

[defaults.test-invert]
gain = 0.9

[[rule]]
name = "inv"
bake = "test-invert"
match = "**/{m}_height.png"
output = "{dir}/{m}_inv.png"

[[rule]]
name = "mix"
bake = "test-mix"
match = "**/{m}_height.png"
inputs.detail = "{dir}/{m}_detail.png"
output = "{dir}/{m}_mix.png"
params = { weight = 0.25 }
"""

MATERIALS = ["stone", "wood/oak", "wood/pine", "metal"]


def write_library(root: Path, materials=MATERIALS, size: int = 16) -> dict[str, Path]:
    """Height and detail maps per material (16-bit PNG), from fixed seeds; metal has no detail map."""
    files = {}
    for i, m in enumerate(materials):
        folder = root / m
        folder.mkdir(parents=True, exist_ok=True)
        name = Path(m).name
        rng = np.random.default_rng(100 + i)
        files[f"{name}_height"] = write_image(folder / f"{name}_height.png",
                                              rng.random((size, size), dtype=np.float32), bits="16")
        if name != "metal":
            files[f"{name}_detail"] = write_image(folder / f"{name}_detail.png",
                                                  rng.random((size, size), dtype=np.float32), bits="16")
    return files


@pytest.fixture
def library(tmp_path: Path) -> Path:
    """``tmp_path/r.toml`` over ``tmp_path/lib``; returns the recipe path."""
    write_library(tmp_path / "lib")
    recipe = tmp_path / "r.toml"
    recipe.write_text(RECIPE, encoding="utf-8")
    return recipe


def outputs(root: Path) -> dict[str, bytes]:
    """Every file under ``root`` outside ``.bakery``, by relative path."""
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*"))
            if p.is_file() and ".bakery" not in p.relative_to(root).parts}
