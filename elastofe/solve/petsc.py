"""The ``petsc`` backend: conjugate gradients with PETSc's algebraic multigrid (GAMG).

petsc4py and mpi4py are imported only when this backend is asked for; when they are missing the
error says how to install them (``scripts/install-mpi.sh``). Two entry points:

- :class:`PetscCG`, the single-process form behind the one solver interface
  (``solve.solve(K, f, backend="petsc")``): it copies a scipy CSR matrix into PETSc;
- :func:`configure_ksp` and :func:`rigid_body_near_nullspace`, used by the distributed driver in
  :mod:`elastofe.parallel.distributed`, which assembles straight into a distributed PETSc matrix.

The Krylov method is CG (the stiffness matrix with supports eliminated is symmetric positive
definite); the preconditioner is smoothed-aggregation GAMG told the block size 3 (three DOF per
node aggregate together) and the six rigid-body modes as its near-nullspace, without which the
coarse spaces cannot represent rotations and the iteration count grows with the mesh.
"""
from __future__ import annotations

import logging
from typing import Optional

import numpy as np
import scipy.sparse as sp

from ..errors import SolverError

log = logging.getLogger(__name__)

#: The residual reduction the backend solves to at least: tight enough that the stresses agree
#: with a direct solve's to the digits a report prints (the stress error follows the residual
#: times the condition number, ~1e6 for these meshes).
RTOL = 1e-10

#: Options prefix of the backend's KSP: ``PETSC_OPTIONS="-elastofe_ksp_monitor"`` or
#: ``-elastofe_pc_gamg_threshold 0.02`` reach it without code changes.
PREFIX = "elastofe_"

INSTALL_HINT = (
    "the petsc backend needs PETSc with petsc4py and mpi4py. On Debian/Ubuntu install them with "
    "scripts/install-mpi.sh from the elastofe repository (about three minutes): it runs "
    "`apt-get install -y petsc-dev libopenmpi-dev openmpi-bin`, then `pip install mpi4py` and "
    "`pip install --no-build-isolation petsc4py==X.Y.*` with X.Y the installed PETSc's version "
    "(`pkg-config --modversion PETSc`) and PETSC_DIR from `pkg-config --variable=prefix PETSc`; "
    "see docs/mpi.md, 'Installing the distributed engine'")


def have_petsc() -> bool:
    """Whether petsc4py and mpi4py import (without initialising PETSc or MPI)."""
    import importlib.util

    return all(importlib.util.find_spec(m) is not None for m in ("petsc4py", "mpi4py"))


def import_petsc():
    """Initialise MPI and PETSc and return ``(PETSc, MPI)`` modules.

    PETSc reads no command-line options of ours; it reads the ``PETSC_OPTIONS`` environment
    variable as usual.

    Raises
    ------
    SolverError
        When petsc4py or mpi4py is not installed, with the way to install them.
    """
    try:
        import petsc4py
        from mpi4py import MPI

        petsc4py.init([])
        from petsc4py import PETSc
    except ImportError as err:
        raise SolverError(f"{INSTALL_HINT} (import failed: {err})") from None
    return PETSc, MPI


#: GAMG's settings: smoothed aggregation with one prolongator smoothing step, Chebyshev/Jacobi
#: level smoothers (symmetric, so CG stays valid) and a small drop threshold that keeps
#: aggregates compact on stretched cells. Defaults only: PETSC_OPTIONS may override each of them.
GAMG_DEFAULTS = (("pc_gamg_type", "agg"), ("pc_gamg_agg_nsmooths", "1"), ("pc_gamg_threshold", "0.05"),
                 ("mg_levels_ksp_type", "chebyshev"), ("mg_levels_pc_type", "jacobi"), ("mg_levels_ksp_max_it", "2"))


def _defaults(PETSc, prefix: str, pairs) -> None:
    opts = PETSc.Options(prefix)
    for key, value in pairs:
        if not opts.hasName(key):
            opts.setValue(key, value)


def configure_ksp(PETSc, A, *, tol: float = RTOL, maxiter: int = 2000, near_nullspace=None, coarse=None):
    """A KSP of CG on the SPD matrix ``A`` (block size 3 set on it), preconditioned by multigrid.

    Parameters
    ----------
    PETSc : the petsc4py.PETSc module.
    A : PETSc Mat, block size 3.
    tol : relative tolerance on the true (unpreconditioned) residual ‖b − A u‖ / ‖b‖;
        ``min(tol, RTOL)`` is used.
    maxiter : iteration limit.
    near_nullspace : PETSc NullSpace of the rigid-body modes, or None.
    coarse : ``(P, Ac)`` for a two-level preconditioner: one Chebyshev/Jacobi sweep on ``A``
        before and after the correction from one GAMG cycle on ``Ac = Pᵀ A P`` (``P`` the
        interpolation from the corner-node system of a 10-node mesh, ``Ac`` with its own
        near-nullspace set by the caller); None for GAMG on ``A`` itself.
    """
    if near_nullspace is not None:
        A.setNearNullSpace(near_nullspace)
    ksp = PETSc.KSP().create(comm=A.getComm())
    ksp.setOptionsPrefix(PREFIX)
    ksp.setOperators(A)
    ksp.setType(PETSc.KSP.Type.CG)
    # The true residual, so that the tolerance means the same thing on any number of ranks and
    # for any preconditioner (the default for CG is the preconditioned norm).
    ksp.setNormType(PETSc.KSP.NormType.UNPRECONDITIONED)
    ksp.setTolerances(rtol=min(float(tol), RTOL), atol=0.0, max_it=int(maxiter))
    pc = ksp.getPC()
    _defaults(PETSc, PREFIX, GAMG_DEFAULTS)
    if coarse is None:
        pc.setType(PETSc.PC.Type.GAMG)
    else:
        # The p-multigrid of the single-process amg backend (DEVELOPERS.md, "Solvers"): the
        # quadratic system smoothed, the linear (corner-node) one handed to GAMG. GAMG then
        # works on a system about 15 times smaller, which is most of its set-up time and memory.
        P, Ac = coarse
        pc.setType(PETSc.PC.Type.MG)
        pc.setMGLevels(2)
        pc.setMGType(PETSc.PC.MGType.MULTIPLICATIVE)
        pc.setMGInterpolation(1, P)
        ck = pc.getMGCoarseSolve()
        ck.setOperators(Ac)
        ck.setType(PETSc.KSP.Type.PREONLY)
        ck.getPC().setType(PETSc.PC.Type.GAMG)
        _defaults(PETSc, PREFIX + "mg_coarse_", GAMG_DEFAULTS)
        _defaults(PETSc, PREFIX, (("mg_levels_ksp_chebyshev_esteig", "0,0.1,0,1.1"),))
    ksp.setFromOptions()
    return ksp


def rigid_body_near_nullspace(PETSc, coords):
    """MatNullSpace of the six rigid-body modes from a coordinates Vec (block size 3, length 3n)."""
    return PETSc.NullSpace().createRigidBody(coords)


def converged_or_raise(ksp) -> int:
    """Iteration count of a finished solve; raise when it did not converge (the same on every rank)."""
    reason = ksp.getConvergedReason()
    its = ksp.getIterationNumber()
    if reason <= 0:
        names = {v: k for k, v in vars(type(ksp).ConvergedReason).items() if isinstance(v, int)}
        raise SolverError(f"CG with GAMG did not converge: {names.get(reason, reason)} after {its} iterations "
                          f"(residual {ksp.getResidualNorm():.3g}); the system may be singular or not "
                          "positive definite (check the supports), or raise solver.maxiter")
    return its


#: Restarts of CG from its last iterate while the true residual meets neither bound of
#: :func:`stopping_rule`.
RESTARTS = 3
#: Unit round-off of double precision.
EPS = float(np.finfo(np.float64).eps)
#: The stopping rule in words, for summary.json (see :func:`stopping_rule`).
STOPPING_RULE = ("true residual r = b - A u of the system with the held DOF eliminated, 2-norm: "
                 "|r| <= max(rtol |b|, eps (|A|inf |u| + |b|)), eps = 2.2e-16 the unit round-off")


def stopping_rule(ksp, A, b, u, r, rtol: float, a_norm: float, restarts: int = RESTARTS) -> dict:
    """Solve ``A u = b`` until the true residual meets the stopping rule; ``u`` starts from its
    content and holds the solution on return, ``r`` is a work vector.

    The rule, on the true residual ``r = b − A u`` in the 2-norm::

        ‖r‖₂ <= max(rtol ‖b‖₂, ε (‖A‖∞ ‖u‖₂ + ‖b‖₂))

    relative to the load, or, where double precision cannot resolve that, absolute at the
    round-off floor of the system (``ε`` the unit round-off, ``‖A‖∞ = a_norm``, the largest row
    sum, which bounds ‖A‖₂ for a symmetric matrix): the residual of ``u`` rounded to double
    precision is of that size, so no solver can promise less. CG itself tests the residual it
    updates recursively, which drifts from the true one by round-off; when the true residual
    meets neither bound, CG starts again from ``u`` (a fresh residual), at most ``restarts``
    times.

    Returns
    -------
    {"iterations", "relative_residual" (‖r‖₂/‖b‖₂), "floor" (the round-off bound / ‖b‖₂),
    "met" ("relative" or "round-off"), "restarts"}

    Raises
    ------
    SolverError
        When CG does not converge, or the true residual still meets neither bound after the
        restarts.
    """
    bnorm = max(b.norm(), 1e-300)
    total = 0
    for attempt in range(restarts + 1):
        ksp.setInitialGuessNonzero(attempt > 0)
        ksp.solve(b, u)
        total += converged_or_raise(ksp)
        A.mult(u, r)
        r.aypx(-1.0, b)
        rn = r.norm()
        floor = EPS * (a_norm * u.norm() + bnorm)
        if rn <= rtol * bnorm or rn <= floor:
            return {"iterations": total, "relative_residual": float(rn / bnorm), "floor": float(floor / bnorm),
                    "met": "relative" if rn <= rtol * bnorm else "round-off", "restarts": attempt}
    raise SolverError(f"CG with GAMG stopped at a true relative residual of {rn / bnorm:.3g} after {total} iterations "
                      f"and {restarts} restarts, above both {rtol:.1g} and the round-off floor {floor / bnorm:.3g}; "
                      "the system may be badly conditioned (check the supports and the mesh)")


class PetscCG:
    """Single-process CG + GAMG on a scipy CSR matrix, behind the one solver interface.

    Parameters
    ----------
    K : (N, N) SPD CSR matrix, DOF ``3*node + component`` (N divisible by 3 for the block size).
    coordinates : (N/3, 3) node coordinates for the rigid-body near-nullspace, optional; without
        them GAMG uses only the three translations per block.
    tol, maxiter : see :func:`configure_ksp`.
    """

    backend = "petsc"

    def __init__(self, K: sp.csr_matrix, *, coordinates: Optional[np.ndarray] = None, tol: float = RTOL,
                 maxiter: int = 2000, **_):
        PETSc, _mpi = import_petsc()
        self.PETSc = PETSc
        K = sp.csr_matrix(K)
        K.sort_indices()
        n = K.shape[0]
        bs = 3 if n % 3 == 0 else 1
        itype = PETSc.IntType
        A = PETSc.Mat().createAIJ(size=(n, n), bsize=bs, comm=PETSc.COMM_SELF,
                                  csr=(K.indptr.astype(itype), K.indices.astype(itype), K.data))
        A.assemble()
        A.setOption(PETSc.Mat.Option.SPD, True)
        nns = None
        if coordinates is not None and bs == 3:
            xyz = PETSc.Vec().createWithArray(np.ascontiguousarray(coordinates, dtype=float).ravel(),
                                              bsize=3, comm=PETSc.COMM_SELF)
            nns = rigid_body_near_nullspace(PETSc, xyz)
        self.A = A
        self.ksp = configure_ksp(PETSc, A, tol=tol, maxiter=maxiter, near_nullspace=nns)
        self.iterations = 0

    def solve(self, b: np.ndarray) -> np.ndarray:
        x, rhs = self.A.createVecs()
        rhs.setArray(np.asarray(b, dtype=float))
        self.ksp.solve(rhs, x)
        self.iterations = converged_or_raise(self.ksp)
        return x.getArray().copy()


def register(backends: dict) -> None:
    """Add the ``petsc`` entry to a solver registry (name -> (constructor, availability check))."""
    backends["petsc"] = (PetscCG, have_petsc)
