"""Environment maps: layouts, seamless resampling, diffuse irradiance, specular prefiltering and the split-sum
BRDF table (pure array functions)."""
