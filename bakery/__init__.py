"""bakery: texture-map baking for real-time renderers.

The public functions are plain array-in, array-out functions; file formats live in :mod:`bakery.io`.
"""

from bakery._version import __version__
from bakery.envmap.brdf_lut import brdf_lut
from bakery.envmap.specular import prefilter_specular
from bakery.errors import BakeryError, BakeryWarning
from bakery.io import read_image, write_image
from bakery.normals import (
    blend_normals,
    decode_normals,
    encode_normals,
    height_from_normal,
    normal_from_height,
    normal_mips,
    strength_from_size,
)
from bakery.roughness import convert_specular, exponent_from_roughness, roughness_from_exponent, roughness_mips

__all__ = ["BakeryError", "BakeryWarning", "__version__", "blend_normals", "brdf_lut", "convert_specular",
           "decode_normals", "encode_normals", "exponent_from_roughness", "height_from_normal", "normal_from_height",
           "normal_mips", "prefilter_specular", "read_image", "roughness_from_exponent", "roughness_mips",
           "strength_from_size", "write_image"]
