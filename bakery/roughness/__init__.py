"""Roughness: conversions from specular-exponent (gloss) maps, and specular anti-aliasing of mip chains.

- :mod:`bakery.roughness.convert`: exponent / gloss / smoothness <-> perceptual roughness, GGX alpha, Beckmann m.
- :mod:`bakery.roughness.antialias`: roughness mip chains widened by the normal spread lost in mipmapping.
- :mod:`bakery.bakes.roughness`: the ``roughness`` and ``antialias`` bakes (files in, files out).
"""

from bakery.roughness.antialias import roughness_mips
from bakery.roughness.convert import convert_specular, exponent_from_roughness, roughness_from_exponent

__all__ = ["convert_specular", "exponent_from_roughness", "roughness_from_exponent", "roughness_mips"]
