"""One run as the command line does it: check the folder, solve, compare with the reference,
write the results (and the report). ``elastofe run`` and :func:`elastofe.run` both call
:func:`run_case`, so the library and the command line never differ."""
from __future__ import annotations

import contextlib
import time
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable, Optional, TypeVar, Union

from .case import load_case
from .case.load import SOLVER_BACKENDS
from .case.schema import Case
from .errors import CaseError, ElastofeError
from .files import folder_lock, json_ready, os_problem, sha256_file, staged_outputs
from .output import check_target, commit_results, stage_results
from .pipeline import solve_case
from .progress import Progress, quiet
from .report import write_report
from .resources import estimate
from .result import Result
from .solve import choose_backend
from .stages import mesh_stage, prepare_model, regions_used
from .studies.compare import compare, read_references, write_comparison

T = TypeVar("T")

__all__ = ["RunOutcome", "run_case", "default_out", "with_solver", "check_case", "region_users"]


@dataclass(frozen=True)
class RunOutcome:
    """What a run produced: the :class:`Result` (None on MPI ranks other than 0), the summary.json
    document written (None without an output folder), the comparison document, the report's path."""

    result: Optional[Result]
    summary: Optional[dict]
    comparison: Optional[dict]
    report: Optional[Path]
    out: Optional[Path]


def default_out(case_path: Path) -> Path:
    """The results folder next to a case file: ``CASE-results``."""
    case_path = Path(case_path)
    return case_path.resolve().parent / f"{case_path.stem}-results"


def with_solver(case: Case, solver: Optional[str], key: str = "--solver") -> Case:
    """The case with another solver backend (checked against the known names)."""
    if not solver:
        return case
    if solver not in SOLVER_BACKENDS:
        raise CaseError(key, solver, f"must be one of {', '.join(SOLVER_BACKENDS)}")
    return replace(case, solver=replace(case.solver, backend=solver))


def run_case(case_or_path: Union[Case, str, Path], out: Union[str, Path, None] = None, *,
             overwrite: bool = False, progress: Progress = quiet, solver: Optional[str] = None,
             report: bool = False, require_reference: bool = False, write_on_this_rank: bool = True,
             pdf: bool = False) -> RunOutcome:
    """Load (if given a path), solve, compare with the case's ``[reference]`` and write.

    Parameters
    ----------
    case_or_path : Case or path of a case file
    out : results folder; None solves (and compares) without writing anything.
    overwrite : replace the results of a different case in ``out``.
    solver : a solver backend name overriding the case's.
    report : also write the verification report (needs ``out``).
    pdf : also print the report to ``report.pdf`` (needs a headless Chromium, see :mod:`elastofe.report.pdf`).
    require_reference : refuse a case without a ``[reference]`` section (the ``compare`` command).
    write_on_this_rank : False on MPI ranks other than 0 (they check nothing and write nothing).

    Raises
    ------
    CaseError, ModelError, SolverError
        As :func:`elastofe.pipeline.solve_case`; ``CaseError`` on ``--out`` when the folder cannot
        take the results.
    """
    case = load_case(case_or_path) if isinstance(case_or_path, (str, Path)) else case_or_path
    case = with_solver(case, solver)
    if require_reference and case.reference is None:
        raise CaseError("reference", None, "the case has no [reference] section: add one naming the other "
                                           "solver's results (see docs/comparing.md)")
    # Reference files are read (and refused when unusable) before the solve, not after it.
    references = read_references(case) if case.reference is not None and write_on_this_rank else None
    out_dir = Path(out) if out is not None else None
    with contextlib.ExitStack() as held:
        if out_dir is not None and write_on_this_rank:
            # One writer per folder from here to the switch-over: a second run is refused at once.
            held.enter_context(folder_lock(out_dir, "--out"))
            check_target(out_dir, case, overwrite=overwrite)
        res = solve_case(case, progress, fields_dir=out_dir)
        if res is None:  # a rank > 0 under mpiexec: its share of the solve is done; rank 0 writes
            return RunOutcome(None, None, None, None, out_dir)
        # A fault of ours after the solve (in the comparison, its plots or the report) must not lose
        # the solved results: they are written without the failed part, and the fault is raised after.
        failed: list[tuple[str, Exception]] = []
        comparison = None
        if case.reference is not None:
            comparison = (compare(res, references) if out_dir is None else
                          _kept_apart("the comparison with the reference", failed, lambda: compare(res, references)))
        if out_dir is None:
            return RunOutcome(res, None, comparison, None, None)
        t = time.perf_counter()
        report_path = None
        try:
            # Everything this run writes (results, comparison, report) goes into one staged set,
            # shown in the folder by one atomic switch at the end.
            with staged_outputs(out_dir, "--out") as st:
                extra: dict = {}
                if comparison is not None:
                    found = comparison
                    comparison = _kept_apart("writing the comparison", failed,
                                             lambda: write_comparison(res, found, st.dir), st.dir, "comparison*")
                if comparison is not None:
                    extra["comparison"] = {k: comparison[k] for k in ("label", "verdict", "compared",
                                                                        "within_tolerance", "points_outside")}
                    extra["comparison"]["file"] = "comparison.json"
                    # Ties the comparison file to this run: the report shows a comparison.json only
                    # when its bytes are the ones this summary records (an older run's file is stale).
                    extra["comparison"]["sha256"] = sha256_file(st.dir / "comparison.json")
                    progress("compare", f"{comparison['within_tolerance']} of {comparison['compared']} reference "
                                        f"values within tolerance: {comparison['verdict']}")
                if failed:
                    extra["failed_after_solve"] = [{"what": what, "error": f"{type(e).__name__}: {e}"}
                                                   for what, e in failed]
                doc = stage_results(res, st, extra)
                if report or pdf:
                    if failed:  # a report would present the run as complete
                        progress("report", "no report: " + failed[0][0] + " failed")
                    elif _kept_apart("writing the report", failed,
                                     lambda: write_report(st.dir, progress, pdf=pdf, folder=out_dir),
                                     st.dir, "report*") is not None:
                        report_path = out_dir / "report.html"
                commit_results(st, case, out_dir, overwrite)
        except OSError as err:
            raise CaseError("--out", str(out_dir), f"the results could not be written ({os_problem(err)}); "
                            "earlier results there were left as they were") from None
    progress("write", f"results in {out_dir} ({time.perf_counter() - t:.2f} s)")
    if failed:
        what, fault = failed[0]
        raise AfterSolveError(f"{what} failed ({type(fault).__name__}: {fault}); the solved results were written "
                              f"to {out_dir} without it (summary.json 'failed_after_solve')") from fault
    return RunOutcome(res, doc, comparison, report_path, out_dir)


def _kept_apart(what: str, failed: list, step: Callable[[], T], staged: Optional[Path] = None,
                pattern: str = "") -> Optional[T]:
    """``step()``, or None when a fault of ours (not bad input, not the file system) stops it: the
    fault is recorded in ``failed`` as ``(what, error)`` to be raised once the solved results are
    written, and the files ``pattern`` it left in the staged folder ``staged`` are removed."""
    try:
        return step()
    except (ElastofeError, OSError):
        raise
    except Exception as err:  # kept, raised once the results are safe
        failed.append((what, err))
        if staged is not None:
            for f in staged.glob(pattern):
                f.unlink()
        return None


class AfterSolveError(RuntimeError):
    """A fault of the program after a successful solve (comparison, its plots, the report): the
    results were written without the failed part. The command line reports it as an internal error
    (exit 1)."""


def region_users(case: Case) -> dict[str, list[str]]:
    """``{region: ["support[1]", "load[2]", "mesh.refine[1]", ...]}``: where the case uses each region."""
    users: dict[str, list[str]] = {name: [] for name in case.regions}
    for name, keys in regions_used(case).items():
        users.setdefault(name, []).extend(keys)
    for i, r in enumerate(case.mesh.refine, 1):
        users.setdefault(r.region, []).append(f"mesh.refine[{i}]")
    return users


def check_case(case_or_path: Union[Case, str, Path], progress: Progress = quiet, *,
               solver: Optional[str] = None) -> dict:
    """Validate a case and its geometry without solving: load the case, mesh the geometry, check the
    points and lines against the part, match every region, build the supports (checked against
    every rigid-body motion) and the loads, and estimate the solve.

    Returns a JSON-ready document: ``title``, ``units``, ``geometry`` (the file's unit, scale,
    warnings), ``mesh`` (nodes, elements, order, dofs), ``regions`` (:func:`elastofe.regions.
    describe_matches`: per region the matched surfaces with kind, area, centroid and normal or
    axis and radius, patches, warnings), ``region_users``, ``warnings``, ``loads`` (label, force,
    moment, area), ``held_dofs``, ``solve`` (backend, estimated peak memory [MiB]) and ``timings`` [s].

    Raises
    ------
    CaseError, ModelError
        As a run would, before its solve.
    """
    case = load_case(case_or_path) if isinstance(case_or_path, (str, Path)) else case_or_path
    case = with_solver(case, solver)
    timings: dict[str, float] = {}
    mesh = mesh_stage(case, None, progress, timings)
    model = prepare_model(case, mesh, timings)
    ndof = 3 * mesh.nodes
    free = ndof - int(model.held.dofs.size)
    backend = "petsc" if case.solver.backend == "petsc" else choose_backend(case.solver.backend, free,
                                                                              nrhs=len(model.groups))
    mem = estimate(ndof, int(mesh.cells.shape[0]), int(mesh.cells.shape[1]), backend)
    source = getattr(mesh, "source", None)
    lab = case.units.labels
    return json_ready({
        "title": case.title,
        "case_file": str(case.source) if case.source else None,
        "units": {k: lab[k] for k in ("length", "force", "stress", "moment")},
        "geometry": source.as_dict() if source is not None else {"file": str(case.geometry.file)},
        "mesh": {"nodes": mesh.nodes, "elements": int(mesh.cells.shape[0]), "order": mesh.order, "dofs": ndof},
        "regions": model.matches,
        "region_users": region_users(case),
        "warnings": list(model.warnings),
        "loads": [{"label": ld.label, "force": ld.force, "moment": ld.moment, "area": ld.area} for ld in model.loads],
        "load_cases": [name for name, _ in model.groups if name],
        "held_dofs": int(model.held.dofs.size),
        "solve": {"backend": backend, "memory_estimate_mb": round(mem.peak / 2**20, 1)},
        "timings": {k: round(v, 3) for k, v in timings.items()},
    })
