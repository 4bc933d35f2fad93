"""Finite elements: shape functions, quadrature, vectorised kernels and assembly."""
