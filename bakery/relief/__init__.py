"""Maps that asset preparation derives from height maps: ambient occlusion, bent normals, curvature, cavity.

Pure array-in, array-out functions; the relief they see is the normal map's (same strength, same kernel).
"""

from bakery.relief.curvature import CurvatureMaps, curvature_maps, mean_curvature
from bakery.relief.occlusion import occlusion_from_height

__all__ = ["CurvatureMaps", "curvature_maps", "mean_curvature", "occlusion_from_height"]
