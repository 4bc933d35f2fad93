"""The package version (a leaf: imported by the outputs and the command line)."""
__version__ = "0.2.0"
