"""``elastofe run`` with the petsc backend, on one rank or many: rank 0 prints and writes.

Called from :func:`elastofe.cli.cmd_run`. Every rank takes part in the solve; only rank 0 reports
progress, writes the results and prints the table. Errors are raised on every rank alike
(:mod:`.mpi`): rank 0's message is printed once by the command line, the other ranks leave with
the same exit code silently.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

from ..case.schema import Case
from ..errors import CaseError, ModelError
from . import launched_ranks
from .mpi import on_root


def run_distributed(case: Case, out: Path, args) -> int:
    """Solve ``case`` with the petsc backend on every rank; rank 0 writes ``out``. Returns the exit code."""
    from ..cli import _Printer, _check_writable, print_table
    from ..output import write_results

    if case.solver.backend != "petsc":
        raise CaseError("--solver", case.solver.backend,
                        f"under mpiexec ({launched_ranks()} ranks) only the petsc backend runs in parallel: "
                        "add --solver petsc, or run without mpiexec")
    from ..solve.petsc import import_petsc

    _, MPI = import_petsc()
    comm = MPI.COMM_WORLD
    rank = comm.rank
    try:
        on_root(comm, lambda: _check_writable(out))  # rank 0's verdict, raised on every rank
        printer = _Printer(quiet=args.quiet or rank != 0)
        from ..pipeline import solve_case

        res = solve_case(case, printer)
    except (CaseError, ModelError):
        if rank == 0:
            raise
        return 2 if isinstance(sys.exc_info()[1], CaseError) else 3
    if res is None:  # ranks > 0: their share of the work is done
        return 0
    t = time.perf_counter()
    doc = write_results(res, out)
    printer("write", f"results in {out} ({time.perf_counter() - t:.2f} s)")
    if not args.quiet:
        print_table(doc, out)
    return 0
