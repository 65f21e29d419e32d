"""Kriging: systems, neighbourhood search, cross-validation and predictions."""
