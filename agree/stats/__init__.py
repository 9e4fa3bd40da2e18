"""Value patterns, shared kernels, resampling, the coefficients and `score`. Imports core."""
