"""bakery: texture-map baking for real-time renderers.

The public functions are plain array-in, array-out functions; file formats live in :mod:`bakery.io`.
"""

from bakery._version import __version__
from bakery.errors import BakeryError, BakeryWarning
from bakery.io import read_image, write_image

__all__ = ["BakeryError", "BakeryWarning", "__version__", "read_image", "write_image"]
