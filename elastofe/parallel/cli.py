"""``elastofe run`` with the petsc backend, on one rank or many: the checks before the solve.

:func:`elastofe.cli.cmd_run` calls :func:`check_distributed` instead of its own output-folder check,
then solves as usual: only rank 0 gets a Result, reports progress, writes and prints; ranks > 0
print nothing (the command line points their output at the null device) and leave with the
same exit code as rank 0 when an error is raised on every rank alike.
"""
from __future__ import annotations

from pathlib import Path
from typing import Callable

from ..case.schema import Case
from ..errors import CaseError
from . import launched_ranks
from .distributed import unsupported
from .mpi import on_root


def check_distributed(case: Case, out: Path, check_writable: Callable[[Path], None]) -> None:
    """Refuse a serial backend under mpiexec; check the output folder on rank 0 for every rank.

    Raises
    ------
    CaseError
        On every rank alike: a backend other than petsc under mpiexec, a case key the
        distributed run does not support (:func:`.distributed.unsupported`), or an output folder
        that rank 0 cannot write.
    """
    if case.solver.backend != "petsc":
        raise CaseError("--solver", case.solver.backend,
                        f"under mpiexec ({launched_ranks()} ranks) only the petsc backend runs in parallel: "
                        "add --solver petsc, or run without mpiexec")
    unsupported(case)
    from ..solve.petsc import import_petsc

    _, MPI = import_petsc()
    on_root(MPI.COMM_WORLD, lambda: check_writable(out))
