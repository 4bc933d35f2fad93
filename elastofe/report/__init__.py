"""Verification report: one self-contained HTML file (conclusion, the model as applied, results,
pictures, a 3D view, lines, estimates, convergence, comparison, checks, traceability), optionally
printed to PDF, built from a run's output folder only."""

from .document import write_report

__all__ = ["write_report"]
