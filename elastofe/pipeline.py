"""The conductor of a run: case -> mesh -> model -> K u = f -> post-processing -> :class:`Result`.

The stages live in :mod:`elastofe.stages` (mesh, model, assembly, solve) and
:mod:`elastofe.post.run` (everything after the solve); the distributed engine
(:mod:`elastofe.parallel.distributed`) runs the same stages around its own assembly and solve.
:mod:`elastofe.output` writes the result.
"""
from __future__ import annotations

import time
from pathlib import Path
from typing import Optional

from .case.schema import Case
from .eigenstages import solve_buckling, solve_modes
from .mesh import Mesh
from .parallel.distributed import solve_case_distributed
from .parallel.meshfiles import check_per_rank
from .post.run import postprocess
from .progress import Progress, quiet
from .result import Result
from .stages import assemble, mesh_stage, prepare_model, report_model, solve_load_cases

__all__ = ["solve_case"]


def solve_case(case: Case, progress: Progress = quiet, mesh: Optional[Mesh] = None, *,
               allow_locking: bool = False, fields_dir: Optional[Path] = None) -> Optional[Result]:
    """Run the whole pipeline on a validated case.

    Parameters
    ----------
    case : Case
    progress : callable, optional
        Called with (stage, message) as stages finish.
    mesh : Mesh, optional
        A mesh to use instead of meshing the case's geometry.
    allow_locking : bool
        Solve a Poisson's ratio of 0.49 or more on 4-node elements instead of refusing it
        (for studies that show volumetric locking on purpose).
    fields_dir : Path, optional
        The results folder of a distributed (``petsc``) run: where each rank writes its piece of
        the fields when the mesh is too large to gather them on rank 0 (committed by
        :func:`elastofe.output.write_results`). Unused by single-process runs.

    Returns
    -------
    Result, or None on the ranks other than 0 of a distributed (``petsc``) run.

    Raises
    ------
    CaseError
        Inputs that do not fit the model (a region matching nothing, a point outside the part).
    ModelError
        A model that cannot be solved (not restrained, singular).
    """
    if case.solver.backend == "petsc":
        # The distributed engine: the Result on rank 0, None on other ranks.
        return solve_case_distributed(case, progress, mesh, allow_locking=allow_locking, fields_dir=fields_dir)
    check_per_rank(case)  # one mesh file per rank: read by the distributed run only
    timings: dict[str, float] = {}
    mesh = mesh_stage(case, mesh, progress, timings, allow_locking=allow_locking)
    model = prepare_model(case, mesh, timings)
    report_model(case, model, progress)
    K, mem = assemble(case, model, progress, timings)

    t = time.perf_counter()
    U, residual, backend, info = solve_load_cases(case, K, model.F, model.held, progress, mesh=mesh)
    timings["solve"] = time.perf_counter() - t
    progress("solve", f"{U.shape[1]} load case(s), relative residual {residual:.2e} ({timings['solve']:.2f} s)")

    modes = solve_modes(case, model, K, progress, timings) if case.modes is not None else None
    buckling = solve_buckling(case, model, K, U, progress, timings) if case.buckling is not None else None
    KU = K @ U
    del K
    return postprocess(case, model, U, KU, residual=residual, backend=backend, solver_info=info,
                       timings=timings, memory_estimate=mem.peak, modes=modes, buckling=buckling,
                       progress=progress)
