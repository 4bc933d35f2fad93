"""elastofe: an independent, scriptable second solver for 3D linear-elastic parts.

The public API: load or build a case, run it, get arrays back, write results.

>>> import elastofe
>>> case = elastofe.load_case("elastofe/models/lever/lever.toml")   # doctest: +SKIP
>>> res = elastofe.solve_case(case)                         # doctest: +SKIP
>>> res.von_mises.max()                                     # doctest: +SKIP
"""
from .parallel import limit_threads_under_mpi

limit_threads_under_mpi()  # one BLAS/OpenMP thread per MPI rank; must run before numpy is imported

from .case import load_case, parse_case  # noqa: E402
from .errors import CaseError, ElastofeError, ModelError, SolverError  # noqa: E402
from .pipeline import solve_case  # noqa: E402
from .progress import quiet  # noqa: E402
from .result import Result  # noqa: E402
from .version import __version__  # noqa: E402


def run(case_or_path, out=None, progress=None, overwrite=False, *, solver=None, report=False):
    """Load (if given a path), solve, compare with the case's ``[reference]`` and, when ``out`` is
    given, write the results, as the ``elastofe run`` command does (the same function runs both).

    ``out`` holding the results of a different case raises :class:`CaseError` unless
    ``overwrite``. Returns the :class:`Result` (None on MPI ranks other than 0).
    """
    from .job import run_case

    return run_case(case_or_path, out, overwrite=overwrite, progress=progress or quiet, solver=solver,
                    report=report).result


__all__ = ["__version__", "load_case", "parse_case", "solve_case", "run", "Result", "CaseError",
           "ElastofeError", "ModelError", "SolverError"]
