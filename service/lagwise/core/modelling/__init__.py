"""Variogram models: families, nested and anisotropic structures, fitting."""
