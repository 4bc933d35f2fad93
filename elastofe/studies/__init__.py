"""Convergence studies (pure functions)."""

from .gci import GridConvergence, grid_convergence, representative_size

__all__ = ["GridConvergence", "grid_convergence", "representative_size"]
