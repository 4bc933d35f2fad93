"""Running one case on many processes: MPI helpers, mesh partitioning and the distributed solve.

The distributed path is chosen with ``--solver petsc`` (or ``[solver] backend = "petsc"``) and is
run as ``mpiexec -n N elastofe run CASE.toml --solver petsc``; it also works in one process
without ``mpiexec``. Rank 0 meshes the part, resolves regions, supports and loads, partitions the
cells and hands each rank its share; every rank assembles its own cells into one distributed PETSc
matrix; CG with GAMG solves it; rank 0 gathers the displacements and does recovery, probes and
output exactly as a single-process run does.

This package's ``__init__`` imports neither numpy nor MPI: :func:`limit_threads_under_mpi` must run
before numpy loads its BLAS.
"""
from __future__ import annotations

import os

#: Environment variables that MPI launchers set in every rank (Open MPI, MPICH/Hydra, Slurm's PMI).
LAUNCHER_SIZE_VARS = ("OMPI_COMM_WORLD_SIZE", "PMI_SIZE", "PMIX_SIZE", "MPI_LOCALNRANKS")

#: Thread pools of the numerical libraries a rank may load (OpenMP, OpenBLAS, MKL, BLIS, numexpr).
THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS",
               "NUMEXPR_NUM_THREADS", "VECLIB_MAXIMUM_THREADS")


def launched_ranks() -> int:
    """Number of ranks the MPI launcher started (1 when not run under ``mpiexec``).

    Read from the launcher's environment, so that it can be asked without initialising MPI.
    """
    for var in LAUNCHER_SIZE_VARS:
        try:
            return max(1, int(os.environ[var]))
        except (KeyError, ValueError):
            continue
    return 1


#: The rank number a launcher gives each process.
LAUNCHER_RANK_VARS = ("OMPI_COMM_WORLD_RANK", "PMI_RANK", "PMIX_RANK")


def launched_rank() -> int:
    """This process's rank as the MPI launcher numbered it (0 when not run under ``mpiexec``)."""
    for var in LAUNCHER_RANK_VARS:
        try:
            return max(0, int(os.environ[var]))
        except (KeyError, ValueError):
            continue
    return 0


def limit_threads_under_mpi() -> None:
    """One thread per rank when run under an MPI launcher (unless the user set a count).

    N ranks on N cores with a multi-threaded BLAS in each would oversubscribe the cores many
    times over and run slower than one thread each. Must be called before numpy is imported.
    """
    if launched_ranks() > 1 or any(v in os.environ for v in LAUNCHER_SIZE_VARS):
        for var in THREAD_VARS:
            os.environ.setdefault(var, "1")


__all__ = ["launched_rank", "launched_ranks", "limit_threads_under_mpi"]
