"""Environment maps: layouts, seamless resampling, diffuse irradiance (pure array functions)."""
