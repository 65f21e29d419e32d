"""Gaussian conditional simulation: circulant embedding, joint draw at the samples, kriging of residuals."""

from .simulate import BlockSummary, SimulationResult, simulate

__all__ = ["BlockSummary", "SimulationResult", "simulate"]
