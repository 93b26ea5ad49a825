"""bakery: texture-map baking for real-time renderers.

The public functions are plain array-in, array-out functions; file formats live in :mod:`bakery.io`.
They are imported on first use (PEP 562 module ``__getattr__``), so ``import bakery`` and the command line
start without loading numpy, OpenCV or scipy until a bake needs them.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

from bakery._version import __version__
from bakery.errors import BakeryError, BakeryWarning

#: public name -> module that defines it
_LAZY = {
    "brdf_lut": "bakery.envmap.brdf_lut",
    "prefilter_specular": "bakery.envmap.specular",
    "read_image": "bakery.io",
    "write_image": "bakery.io",
    "blend_normals": "bakery.normals",
    "decode_normals": "bakery.normals",
    "encode_normals": "bakery.normals",
    "height_from_normal": "bakery.normals",
    "normal_from_height": "bakery.normals",
    "normal_mips": "bakery.normals",
    "strength_from_size": "bakery.normals",
    "convert_specular": "bakery.roughness",
    "exponent_from_roughness": "bakery.roughness",
    "roughness_from_exponent": "bakery.roughness",
    "roughness_mips": "bakery.roughness",
}

__all__ = ["BakeryError", "BakeryWarning", "__version__", *sorted(_LAZY)]

if TYPE_CHECKING:  # for type checkers and IDEs; at run time these load lazily
    from bakery.envmap.brdf_lut import brdf_lut  # noqa: F401
    from bakery.envmap.specular import prefilter_specular  # noqa: F401
    from bakery.io import read_image, write_image  # noqa: F401
    from bakery.normals import (  # noqa: F401
        blend_normals,
        decode_normals,
        encode_normals,
        height_from_normal,
        normal_from_height,
        normal_mips,
        strength_from_size,
    )
    from bakery.roughness import (  # noqa: F401
        convert_specular,
        exponent_from_roughness,
        roughness_from_exponent,
        roughness_mips,
    )


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'bakery' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))
