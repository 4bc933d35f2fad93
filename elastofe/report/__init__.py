"""Verification report: one self-contained HTML file (pictures, plots, comparison, checks, traceability)."""

from .document import write_report

__all__ = ["write_report"]
