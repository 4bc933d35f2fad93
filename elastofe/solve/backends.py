"""Linear solvers behind one interface, in an explicit registry (re-exported by :mod:`elastofe.solve`).

``factorize(K, backend=..., **options)`` returns an object whose ``solve(b)`` may be called for
many right-hand sides (a direct factorisation, or an iterative solver's multigrid hierarchy, is
built once and reused); ``solve(K, f, ...)`` is the one-shot form and returns a :class:`Solution`.
Every backend raises :class:`~elastofe.errors.SolverError` on a singular or indefinite system, or
when an iterative solve does not converge, instead of returning an answer.

Backends (``BACKENDS``: name -> (constructor, availability check)):

- ``pardiso``: MKL PARDISO, symmetric positive-definite mode (upper triangle), through pypardiso.
- ``cholmod``: CHOLMOD supernodal Cholesky through scikit-sparse (optional: it builds from source
  against the system's SuiteSparse, which must link an optimised BLAS).
- ``scipy``: scipy's SuperLU with a symmetric ordering (always there; slow and memory-hungry).
- ``amg``: conjugate gradients preconditioned with pyamg's smoothed-aggregation multigrid with the
  six rigid-body modes as near-nullspace (3 DOF per node blocks); for 10-node meshes it can run as a
  two-level p-multigrid (Gauss-Seidel on the quadratic system, smoothed aggregation on the system
  of the corner nodes). Its stopping test is on the energy norm of the error, which is the
  compliance-weighted L2 norm of the stress error: ``tol`` is the relative stress accuracy.
"""
from __future__ import annotations

import logging
import time
from dataclasses import dataclass, field
from typing import Any, Callable, Optional, Protocol

import numpy as np
import scipy.sparse as sp

from ..errors import SolverError
from ..progress import Progress
from ..resources import meminfo_available

log = logging.getLogger(__name__)

#: Pivots below this fraction of the largest count as zero in the SuperLU backend.
PIVOT_RTOL = 1e-12

#: Seconds between the iterative solver's residual reports.
PROGRESS_INTERVAL = 2.0


@dataclass(frozen=True)
class Solution:
    """Result of a linear solve: ``u (n,)``, backend name and info, relative residual."""

    u: np.ndarray
    backend: str
    residual: float
    info: dict = field(default_factory=dict)


class Factor(Protocol):
    backend: str
    info: dict

    def solve(self, b: np.ndarray) -> np.ndarray: ...


def upper_triangle(K: sp.csr_matrix) -> sp.csr_matrix:
    """The upper triangle (diagonal included) of a CSR matrix with sorted indices, in O(nnz).

    scipy's ``triu`` goes through COO and back; this keeps CSR and only filters.
    """
    K = K.tocsr()
    if not K.has_sorted_indices:
        K = K.sorted_indices()
    n = K.shape[0]
    rows = np.repeat(np.arange(n, dtype=K.indices.dtype), np.diff(K.indptr))
    keep = K.indices >= rows
    counts = np.bincount(rows[keep], minlength=n)
    indptr = np.zeros(n + 1, dtype=K.indptr.dtype)
    np.cumsum(counts, out=indptr[1:])
    U = sp.csr_matrix((K.data[keep], K.indices[keep], indptr), shape=K.shape)
    U.has_sorted_indices = True
    return U


class _Pardiso:
    """MKL PARDISO in symmetric positive-definite mode (matrix type 2, upper triangle)."""

    backend = "pardiso"

    def __init__(self, K: sp.csr_matrix, **_):
        import pypardiso

        self.info: dict[str, Any] = {}
        self._err = pypardiso.pardiso_wrapper.PyPardisoError
        self.solver = pypardiso.PyPardisoSolver(mtype=2)
        self.A = upper_triangle(K)
        try:
            self.solver.factorize(self.A)
        except self._err as err:
            raise SolverError(f"the stiffness matrix is singular or not positive definite (PARDISO: {err})") from None

    def solve(self, b: np.ndarray) -> np.ndarray:
        try:
            return self.solver.solve(self.A, np.ascontiguousarray(b, dtype=float))
        except self._err as err:
            raise SolverError(f"PARDISO solve failed: {err}") from None


class _Cholmod:
    """CHOLMOD supernodal Cholesky (scikit-sparse); ordering chosen by CHOLMOD (AMD/METIS)."""

    backend = "cholmod"

    def __init__(self, K: sp.csr_matrix, **_):
        from sksparse.cholmod import CholmodNotPositiveDefiniteError, cholesky

        self.info: dict[str, Any] = {}
        try:
            # CSC of a symmetric CSR is its transpose: no conversion cost beyond the wrapper.
            self.factor = cholesky(sp.csc_matrix((K.data, K.indices, K.indptr), shape=K.shape))
        except CholmodNotPositiveDefiniteError as err:
            raise SolverError(f"the stiffness matrix is singular or not positive definite (CHOLMOD: {err})") from None

    def solve(self, b: np.ndarray) -> np.ndarray:
        return self.factor(np.asarray(b, dtype=float))


class _SuperLU:
    """scipy's SuperLU with a symmetric ordering (always available; slower)."""

    backend = "scipy"

    def __init__(self, K: sp.csr_matrix, **_):
        import scipy.sparse.linalg as spla

        self.info: dict[str, Any] = {}
        try:
            self.lu = spla.splu(K.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                                options={"SymmetricMode": True})
        except RuntimeError as err:
            raise SolverError(f"the stiffness matrix is singular ({err})") from None
        d = self.lu.U.diagonal()
        # A pivot within round-off of zero (relative to the largest) is a singular direction whose
        # sign is a matter of rounding: count it as singular too (1e-12 is far below the smallest
        # relative pivot of a restrained elasticity system, and far above round-off, ~1e-15).
        tiny = d <= PIVOT_RTOL * np.abs(d).max(initial=0.0)
        if np.any(tiny) or not np.all(np.isfinite(d)):
            raise SolverError("the stiffness matrix is singular or not positive definite "
                              f"({int(np.sum(tiny))} non-positive or vanishing pivots)")

    def solve(self, b: np.ndarray) -> np.ndarray:
        return self.lu.solve(np.asarray(b, dtype=float))


class _AMG:
    """Conjugate gradients with a smoothed-aggregation multigrid preconditioner (pyamg).

    Parameters
    ----------
    K : (n, n) SPD CSR matrix.
    modes : (n, 6) near-nullspace (rigid-body modes on the free DOFs); translations only if absent.
    blocksize : 3 when the DOFs come as whole nodes (x, y, z of each node in order), else 1.
    prolongation : (n, n1) optional map from the corner-node DOFs of a 10-node mesh to all DOFs;
        with it, the preconditioner is a two-level p-multigrid whose coarse level
        ``P^T K P`` (the 4-node stiffness on straight cells) gets the smoothed aggregation.
    coarse_modes : (n1, 6) near-nullspace of the coarse level (needed with ``prolongation``).
    coarse_blocksize : block size of the coarse level.
    tol : relative accuracy of the energy norm of the error (= of the stress, compliance-weighted).
    maxiter : iteration limit; exceeding it raises SolverError.
    progress : progress(stage, message) callback for residual reports.
    """

    backend = "amg"

    def __init__(self, K: sp.csr_matrix, *, modes: Optional[np.ndarray] = None, blocksize: int = 1,
                 prolongation: Optional[sp.spmatrix] = None, coarse_modes: Optional[np.ndarray] = None,
                 coarse_blocksize: int = 1, tol: float = 1e-6, maxiter: int = 2000,
                 progress: Optional[Progress] = None, **_):
        import pyamg

        t = time.perf_counter()
        self.K = K.tocsr()
        self.tol, self.maxiter = float(tol), int(maxiter)
        self.progress = progress
        n = K.shape[0]
        if prolongation is not None:
            self.P = sp.csr_matrix(prolongation)
            self.PT = self.P.T.tocsr()
            A1 = (self.PT @ (self.K @ self.P)).tocsr()
            self.ml = _sa_hierarchy(pyamg, A1, coarse_modes, coarse_blocksize)
            self._coarse = self.ml.aspreconditioner(cycle="V")
            self._gs = pyamg.relaxation.relaxation.gauss_seidel
            self.M = sp.linalg.LinearOperator((n, n), matvec=self._pmg, dtype=float)
            kind = "p-multigrid (Gauss-Seidel on the quadratic system, smoothed aggregation on the corner nodes)"
        else:
            self.ml = _sa_hierarchy(pyamg, self.K, modes, blocksize)
            self.M = self.ml.aspreconditioner(cycle="V")
            kind = "smoothed aggregation"
        self.info: dict[str, Any] = {"preconditioner": kind, "setup_s": time.perf_counter() - t,
                                     "levels": len(self.ml.levels),
                                     "operator_complexity": float(self.ml.operator_complexity()),
                                     "iterations": [], "tol": self.tol}

    def _pmg(self, r: np.ndarray) -> np.ndarray:
        """One symmetric two-level cycle: forward GS, coarse correction, backward GS."""
        x = np.zeros_like(r)
        self._gs(self.K, x, r, iterations=1, sweep="forward")
        rc = self.PT @ (r - self.K @ x)
        x += self.P @ self._coarse(rc)
        self._gs(self.K, x, r, iterations=1, sweep="backward")
        return x

    def solve(self, b: np.ndarray) -> np.ndarray:
        """``b (n,)`` or ``(n, k)``: one CG solve per column, the hierarchy reused."""
        b = np.asarray(b, dtype=float)
        if b.ndim == 2:
            return np.column_stack([self.solve(b[:, j]) for j in range(b.shape[1])])
        x, its, est = pcg(self.K, b, self.M, self.tol, self.maxiter, self.progress)
        self.info["iterations"].append(its)
        self.info["error_estimate"] = max(est, self.info.get("error_estimate", 0.0))
        return x


def _sa_hierarchy(pyamg, A: sp.csr_matrix, B: Optional[np.ndarray], blocksize: int):
    """pyamg smoothed aggregation tuned for elasticity: node blocks, rigid modes, symmetric GS."""
    if blocksize > 1 and A.shape[0] % blocksize == 0:
        A = A.tobsr(blocksize=(blocksize, blocksize))
    smoother = ("block_gauss_seidel", {"sweep": "symmetric", "iterations": 1}) if blocksize > 1 else \
        ("gauss_seidel", {"sweep": "symmetric", "iterations": 1})
    return pyamg.smoothed_aggregation_solver(
        A, B=B, symmetry="hermitian", strength=("symmetric", {"theta": 0.0}),
        smooth=("jacobi", {"omega": 4.0 / 3.0}), presmoother=smoother, postsmoother=smoother,
        max_coarse=1000, coarse_solver="splu", keep=False)


def pcg(K: sp.spmatrix, b: np.ndarray, M, tol: float, maxiter: int,
        progress: Optional[Progress] = None) -> tuple[np.ndarray, int, float]:
    """Preconditioned conjugate gradients stopped on an estimate of the energy-norm error.

    ``‖e‖_K² = rᵀ K⁻¹ r ≤ rᵀ M⁻¹ r / λ_min(M⁻¹K)``; λ_min is estimated from the Lanczos
    tridiagonal built from CG's own coefficients, and ``‖u‖_K² ≈ xᵀ b``. The energy norm of the
    displacement error is the compliance-weighted L2 norm of the stress error, so the test
    ``‖e‖_K / ‖u‖_K ≤ tol`` ties the tolerance to the accuracy of the stresses.

    Returns
    -------
    x : (n,) solution; iterations : int; estimate : float, the final relative error estimate.

    Raises
    ------
    SolverError
        Not converged within ``maxiter``, or a non-positive curvature (matrix not SPD).
    """
    n = b.shape[0]
    x = np.zeros(n)
    bn = float(np.linalg.norm(b))
    if bn == 0.0:
        return x, 0, 0.0
    r = b.copy()
    z = M @ r
    p = z.copy()
    rz = float(r @ z)
    alphas, betas = [], []
    lam_min = 1.0
    t_last = time.perf_counter()
    est = np.inf
    for it in range(1, maxiter + 1):
        q = K @ p
        pq = float(p @ q)
        if not pq > 0:
            raise SolverError("conjugate gradients met a non-positive curvature: the stiffness matrix is "
                              "singular or not positive definite")
        alpha = rz / pq
        x += alpha * p
        r -= alpha * q
        z = M @ r
        rz_new = float(r @ z)
        beta = rz_new / rz
        alphas.append(alpha)
        betas.append(beta)
        rz = rz_new
        if it % 5 == 0 or it < 5:
            lam_min = min(max(_lanczos_min(alphas, betas), 1e-3), 1.0)
        energy = float(x @ b)
        est = np.sqrt(max(rz, 0.0) / (lam_min * energy)) if energy > 0 else np.inf
        now = time.perf_counter()
        if progress is not None and (now - t_last > PROGRESS_INTERVAL):
            progress("solve", f"iteration {it}: residual {np.linalg.norm(r) / bn:.2e}, "
                              f"energy-norm error estimate {est:.2e} (target {tol:.1e})")
            t_last = now
        log.debug("pcg %d: est %.3e", it, est)
        if est <= tol:
            return x, it, float(est)
        p *= beta
        p += z
    raise SolverError(f"conjugate gradients did not converge in {maxiter} iterations (energy-norm error "
                      f"estimate {est:.2e}, target {tol:.1e}); raise solver.maxiter or use a direct backend")


def _lanczos_min(alphas: list[float], betas: list[float]) -> float:
    """Smallest eigenvalue of CG's Lanczos tridiagonal (an estimate of λ_min(M⁻¹K), from above)."""
    a = np.asarray(alphas)
    bt = np.asarray(betas)
    d = 1.0 / a
    d[1:] += bt[:-1] / a[:-1]
    e = np.sqrt(bt[:-1]) / a[:-1]
    from scipy.linalg import eigvalsh_tridiagonal

    return float(eigvalsh_tridiagonal(d, e, select="i", select_range=(0, 0))[0])


def _have(module: str) -> Callable[[], bool]:
    def check() -> bool:
        try:
            __import__(module)
        except Exception:
            return False
        return True
    check.__name__ = f"have_{module.replace('.', '_')}"
    return check


#: name -> (constructor, availability check)
BACKENDS: dict[str, tuple[Callable, Callable[[], bool]]] = {
    "pardiso": (_Pardiso, _have("pypardiso")),
    "cholmod": (_Cholmod, _have("sksparse.cholmod")),
    "scipy": (_SuperLU, lambda: True),
    "amg": (_AMG, _have("pyamg")),
}

#: Backends that stop on their own convergence test (their residual is reported, not checked).
ITERATIVE = ("amg", "petsc")

#: Order of preference among direct backends (fastest first, measured in shared/reference/solvers.md).
DIRECT_ORDER = ("pardiso", "cholmod", "scipy")

#: Up to this size the automatic choice takes a direct solver (robust, and as fast as multigrid CG
#: here: 20k DOF PARDISO 0.4 s against 1.2 s; at 100k DOF multigrid CG 1.6 s against 4.7 s).
DIRECT_FAST_DOF = 50_000
#: With several right-hand sides a direct factorisation is reused for all of them, while CG pays
#: every one again: up to this size (and within the memory estimate) several load cases go direct.
#: Past it the direct solvers' time grows about as n^1.9 and their memory as n^1.35 (measured:
#: 100k DOF 0.8 GiB, 300k 3.0 GiB, 1M 14 GiB), while multigrid CG stays near-linear.
DIRECT_MAX_DOF = 400_000


def available_backends() -> list[str]:
    """Names of the backends usable on this installation."""
    return [name for name, (_, ok) in BACKENDS.items() if ok()]


def direct_memory_estimate(ndof: int) -> float:
    """Peak memory of a direct factorisation of a 3D 10-node elasticity system [bytes].

    Fitted to PARDISO/CHOLMOD measurements on a cantilever (solvers.md): 0.8 GiB at 100k DOF
    growing as n^1.35 (3.0 GiB at 300k, 14 GiB at 1M). Compact parts fill in more than slender ones;
    treat it as an order of magnitude.
    """
    return 0.8 * 2**30 * (max(ndof, 1) / 1e5) ** 1.35


def available_memory() -> float:
    """Memory available to this process now [bytes] (8 GiB if unknown)."""
    avail = meminfo_available()
    return 8.0 * 2**30 if avail is None else avail


def choose_backend(requested: str, ndof: int, memory: Optional[float] = None, nrhs: int = 1,
                   ill_conditioned: bool = False) -> str:
    """The backend to use for ``requested``.

    ``"auto"``: the fastest available direct solver up to ``DIRECT_FAST_DOF`` unknowns, or up to
    ``DIRECT_MAX_DOF`` when there are several right-hand sides (``nrhs``) or the system is
    ``ill_conditioned`` (a nearly incompressible material: multigrid iterations grow like
    √(λ/μ), 535 at ν = 0.4999 against 13 at 0.3, measured in benchmarks/incompressible.md), as long
    as the estimated factor memory fits in half of the available ``memory`` [bytes]; multigrid CG
    otherwise (when pyamg is installed), else the best direct solver anyway.
    """
    if requested != "auto":
        if requested not in BACKENDS:
            raise SolverError(f"unknown solver backend {requested!r}; known: auto, {', '.join(BACKENDS)}")
        if not BACKENDS[requested][1]():
            raise SolverError(f"solver backend {requested!r} is not installed here; available: "
                              f"{', '.join(available_backends())}")
        return requested
    memory = available_memory() if memory is None else memory
    direct = next((name for name in DIRECT_ORDER if BACKENDS[name][1]()), "scipy")
    limit = DIRECT_MAX_DOF if (nrhs > 1 or ill_conditioned) else DIRECT_FAST_DOF
    fits = ndof <= limit and direct_memory_estimate(ndof) <= 0.5 * memory
    if not fits and BACKENDS["amg"][1]():
        return "amg"
    return direct


def _accepted(cls, options: dict) -> dict:
    """The options a backend's constructor takes (all of them if it takes ``**kwargs``)."""
    import inspect

    params = inspect.signature(cls).parameters.values()
    if any(p.kind is p.VAR_KEYWORD for p in params):
        return options
    names = {p.name for p in params}
    return {k: v for k, v in options.items() if k in names}


def factorize(K: sp.csr_matrix, backend: str = "auto", **options) -> Factor:
    """Factorise (or set up the preconditioner of) the SPD matrix ``K (n, n)`` once.

    ``options`` go to the backend (``modes``, ``blocksize``, ``prolongation``, ``tol``, ``maxiter``,
    ``progress`` for ``amg``); direct backends ignore them.
    """
    nrhs = options.pop("nrhs", 1)
    name = choose_backend(backend, K.shape[0], nrhs=nrhs)
    cls = BACKENDS[name][0]
    return cls(K, **_accepted(cls, options))


def relative_residual(K: sp.spmatrix, u: np.ndarray, b: np.ndarray) -> float:
    """‖K u − b‖ / ‖b‖ (or ‖K u‖ when b = 0)."""
    # Both norms of vectors scaled by the largest |b| (or |K u|): no square overflows.
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        Ku = K @ u
        scale = float(np.max(np.abs(b), initial=0.0)) or float(np.max(np.abs(Ku), initial=0.0)) or 1.0
        if not np.isfinite(scale):
            return float("nan")
        r = np.linalg.norm((Ku - b) / scale)
        nb = np.linalg.norm(b / scale)
        return float(r / nb) if nb > 0 else float(r * scale)


def solve(K: sp.csr_matrix, f: np.ndarray, *, backend: str = "auto", tol: float = 1e-6,
          maxiter: int = 2000, check: float = 1e-6, **options) -> Solution:
    """Solve ``K u = f`` (``f (n,)`` or ``(n, k)`` for k load cases) and verify the result.

    Direct backends: the relative residual of every column must not exceed ``check``. The
    iterative backend stops on its energy-norm error estimate (``tol``) and raises if it does not
    get there.

    Raises
    ------
    SolverError
        Singular/indefinite system, a residual above ``check`` (direct), or no convergence.
    """
    F = f.reshape(f.shape[0], -1)
    fac = factorize(K, backend, tol=tol, maxiter=maxiter, nrhs=F.shape[1], **options)
    U = np.empty_like(F, dtype=float)
    iterative = fac.backend in ITERATIVE
    X = None
    if not iterative and F.shape[1] > 1:
        try:  # direct backends take all right-hand sides in one call
            X = np.asarray(fac.solve(np.ascontiguousarray(F)), dtype=float)
        except (TypeError, ValueError):
            X = None
    if X is not None and X.size == U.size:
        U[:] = X.reshape(U.shape)
    else:  # one at a time (the iterative backend; any backend that takes single vectors)
        for j in range(F.shape[1]):
            U[:, j] = fac.solve(np.ascontiguousarray(F[:, j]))
    if not np.all(np.isfinite(U)):
        raise SolverError("the solve produced non-finite values: the system is singular")
    res = max(relative_residual(K, U[:, j], F[:, j]) for j in range(F.shape[1]))
    if not np.isfinite(res):
        raise SolverError(f"the relative residual is {res}: the system or the loads hold non-finite values")
    if not iterative and not res <= check:
        raise SolverError(f"relative residual {res:.3g} exceeds {check:g}: the system is singular or ill-conditioned")
    return Solution(U.reshape(f.shape), fac.backend, res, dict(getattr(fac, "info", {})))


# The distributed engine's single-process form (CG + GAMG through petsc4py, imported on use).
from .petsc import register as _register_petsc  # noqa: E402

_register_petsc(BACKENDS)
