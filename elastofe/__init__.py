"""elastofe: an independent, scriptable second solver for 3D linear-elastic parts.

The public API: load or build a case, run it, get arrays back, write results.

>>> import elastofe
>>> case = elastofe.load_case(elastofe.demo_case())          # doctest: +SKIP
>>> res = elastofe.solve_case(case)                         # doctest: +SKIP
>>> res.von_mises.max()                                     # doctest: +SKIP
>>> res.tables["mid-span"]                                  # doctest: +SKIP
>>> back = elastofe.read_results("lever-results")           # doctest: +SKIP
"""
from .parallel import limit_threads_under_mpi

limit_threads_under_mpi()  # one BLAS/OpenMP thread per MPI rank; must run before numpy is imported

from .case import load_case, parse_case  # noqa: E402
from .errors import CaseError, CaseErrors, ElastofeError, ModelError, SolverError  # noqa: E402
from .notebook import Probe, ResultsFolder, RunResult, demo_case, read_results, run, solve_case  # noqa: E402
from .progress import quiet  # noqa: E402
from .result import LineResult, Result  # noqa: E402
from .version import __version__  # noqa: E402

__all__ = ["__version__", "load_case", "parse_case", "solve_case", "run", "read_results", "demo_case", "Result",
           "RunResult", "ResultsFolder", "LineResult", "Probe", "CaseError", "CaseErrors", "ElastofeError",
           "ModelError", "SolverError", "quiet"]
