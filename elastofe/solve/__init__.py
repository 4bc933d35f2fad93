"""Linear solvers behind one interface, in an explicit registry.

``factorize(K, backend=...)`` returns an object whose ``solve(b)`` may be called for many
right-hand sides (the factorisation is reused); ``solve(K, f, ...)`` is the one-shot form and
returns a :class:`Solution`. Every backend raises :class:`~elastofe.errors.SolverError` on a
singular or indefinite system instead of returning an answer.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass, field
from typing import Callable, Protocol

import numpy as np
import scipy.sparse as sp

from ..errors import SolverError

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class Solution:
    """Result of a linear solve: ``u (n,)``, backend name and info, relative residual."""

    u: np.ndarray
    backend: str
    residual: float
    info: dict = field(default_factory=dict)


class Factor(Protocol):
    backend: str

    def solve(self, b: np.ndarray) -> np.ndarray: ...


class _Pardiso:
    """MKL PARDISO in symmetric positive-definite mode (matrix type 2, upper triangle)."""

    backend = "pardiso"

    def __init__(self, K: sp.csr_matrix):
        import pypardiso

        self._err = pypardiso.pardiso_wrapper.PyPardisoError
        self.solver = pypardiso.PyPardisoSolver(mtype=2)
        self.A = sp.triu(K, format="csr")
        self.A.sort_indices()
        try:
            self.solver.factorize(self.A)
        except self._err as err:
            raise SolverError(f"the stiffness matrix is singular or not positive definite (PARDISO: {err})") from None

    def solve(self, b: np.ndarray) -> np.ndarray:
        try:
            return self.solver.solve(self.A, np.ascontiguousarray(b))
        except self._err as err:
            raise SolverError(f"PARDISO solve failed: {err}") from None


class _SuperLU:
    """scipy's SuperLU with a symmetric ordering (always available; slower)."""

    backend = "scipy"

    def __init__(self, K: sp.csr_matrix):
        import scipy.sparse.linalg as spla

        try:
            self.lu = spla.splu(K.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                                options={"SymmetricMode": True})
        except RuntimeError as err:
            raise SolverError(f"the stiffness matrix is singular ({err})") from None
        d = self.lu.U.diagonal()
        if np.any(d <= 0) or not np.all(np.isfinite(d)):
            raise SolverError("the stiffness matrix is singular or not positive definite "
                              f"({int(np.sum(d <= 0))} non-positive pivots)")

    def solve(self, b: np.ndarray) -> np.ndarray:
        return self.lu.solve(np.asarray(b, dtype=float))


def _have_pardiso() -> bool:
    try:
        import pypardiso  # noqa: F401
    except Exception:
        return False
    return True


#: name -> (constructor, availability check)
BACKENDS: dict[str, tuple[Callable, Callable[[], bool]]] = {
    "pardiso": (_Pardiso, _have_pardiso),
    "scipy": (_SuperLU, lambda: True),
}


def available_backends() -> list[str]:
    """Names of the backends usable on this installation."""
    return [name for name, (_, ok) in BACKENDS.items() if ok()]


def choose_backend(requested: str, ndof: int) -> str:
    """The backend to use for ``requested`` ("auto" picks the fastest available)."""
    if requested != "auto":
        if requested not in BACKENDS:
            raise SolverError(f"unknown solver backend {requested!r}; known: {', '.join(BACKENDS)}")
        if not BACKENDS[requested][1]():
            raise SolverError(f"solver backend {requested!r} is not installed here; available: "
                              f"{', '.join(available_backends())}")
        return requested
    for name in ("pardiso", "scipy"):
        if BACKENDS[name][1]():
            return name
    return "scipy"  # pragma: no cover


def factorize(K: sp.csr_matrix, backend: str = "auto") -> Factor:
    """Factorise the SPD matrix ``K (n, n)`` once for many right-hand sides."""
    name = choose_backend(backend, K.shape[0])
    return BACKENDS[name][0](K)


def relative_residual(K: sp.spmatrix, u: np.ndarray, b: np.ndarray) -> float:
    """‖K u − b‖ / ‖b‖ (or ‖K u‖ when b = 0)."""
    r = np.linalg.norm(K @ u - b)
    nb = np.linalg.norm(b)
    return float(r / nb) if nb > 0 else float(r)


def solve(K: sp.csr_matrix, f: np.ndarray, *, backend: str = "auto", tol: float = 1e-10,
          maxiter: int = 2000, check: float = 1e-6) -> Solution:
    """Solve ``K u = f`` and verify the residual.

    Raises
    ------
    SolverError
        Singular/indefinite system, or a relative residual above ``check``.
    """
    fac = factorize(K, backend)
    u = fac.solve(f)
    if not np.all(np.isfinite(u)):
        raise SolverError("the solve produced non-finite values: the system is singular")
    res = relative_residual(K, u, f)
    if res > check:
        raise SolverError(f"relative residual {res:.3g} exceeds {check:g}: the system is singular or ill-conditioned")
    return Solution(u, fac.backend, res)


# The distributed engine's single-process form (CG + GAMG through petsc4py, imported on use).
from .petsc import register as _register_petsc  # noqa: E402

_register_petsc(BACKENDS)
