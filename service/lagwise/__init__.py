"""Lagwise: spatial continuity analysis (variograms, models, kriging) as a stateless service."""

__version__ = "0.1.0"
