"""Linear and eigen solvers: arrays in, arrays out.

The linear backends and their registry live in :mod:`.backends` (so that :mod:`.eigen` can build
on them without importing this package's ``__init__``); the eigensolvers of vibration and
buckling in :mod:`.eigen`. This module only re-exports their public names.
"""
from .backends import (
    BACKENDS,
    DIRECT_FAST_DOF,
    DIRECT_MAX_DOF,
    DIRECT_ORDER,
    ITERATIVE,
    PIVOT_RTOL,
    PROGRESS_INTERVAL,
    Factor,
    Progress,
    Solution,
    available_backends,
    available_memory,
    choose_backend,
    direct_memory_estimate,
    factorize,
    pcg,
    relative_residual,
    solve,
    upper_triangle,
)
from .eigen import Buckling, Eigenpairs, buckling_factors, natural_modes

__all__ = [
    "BACKENDS",
    "DIRECT_FAST_DOF",
    "DIRECT_MAX_DOF",
    "DIRECT_ORDER",
    "ITERATIVE",
    "PIVOT_RTOL",
    "PROGRESS_INTERVAL",
    "Buckling",
    "Eigenpairs",
    "Factor",
    "Progress",
    "Solution",
    "available_backends",
    "available_memory",
    "buckling_factors",
    "choose_backend",
    "direct_memory_estimate",
    "factorize",
    "natural_modes",
    "pcg",
    "relative_residual",
    "solve",
    "upper_triangle",
]
