"""Roughness: conversions from specular-exponent (gloss) maps, and specular anti-aliasing of mip chains."""
