"""Normal maps: from height maps, back to height maps, blending, mip chains, encodings.

Pure array-in, array-out functions; files are read and written by :mod:`bakery.bakes.normals`.
"""

from bakery.edges import EDGES
from bakery.mips import mip_count, mip_size
from bakery.normals.blend import BLEND_METHODS, blend_normals
from bakery.normals.encode import decode_normals, encode_normals, unit_normals
from bakery.normals.from_height import normal_from_height, strength_from_size
from bakery.normals.integrate import fit_height, height_from_normal
from bakery.normals.kernels import DEFAULT_KERNEL, KERNELS, derivatives
from bakery.normals.mips import normal_mips

__all__ = ["BLEND_METHODS", "DEFAULT_KERNEL", "EDGES", "KERNELS", "blend_normals", "decode_normals",
           "derivatives", "encode_normals", "fit_height", "height_from_normal", "mip_count", "mip_size",
           "normal_from_height", "normal_mips", "strength_from_size", "unit_normals"]
