"""Mesh-convergence study: the same case on successively refined meshes, with Richardson
extrapolation and the Grid Convergence Index of every reported quantity.

Sources: P. J. Roache, J. Fluids Eng. 116 (1994) 405-413 (GCI, safety factor 1.25 for three or more
grids, asymptotic-range check); I. B. Celik et al., J. Fluids Eng. 130 (2008) 078001 (representative
size ``h = (V/N)^(1/3)``, observed order for non-constant refinement ratios); ASME V&V 20-2009. The
arithmetic is :func:`elastofe.studies.gci.grid_convergence`.

Each level is a full run through :func:`elastofe.pipeline.solve_case` with the case's global and
every local element size multiplied by the level's factor (``MeshSpec.scaled``). Levels run in
separate worker processes when more than one core is free and the predicted memory of the levels
running at once fits in the available memory (predicted from the first level's measured peak).
"""
from __future__ import annotations

import contextlib
import logging
import math
import multiprocessing
import os
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from pathlib import Path
from typing import Optional

import numpy as np

from ..case.schema import Case
from ..errors import CaseError
from ..progress import Progress, quiet
from ..resources import current_memory_mb, meminfo_available, peak_memory_mb
from .gci import grid_convergence

log = logging.getLogger(__name__)


#: |asymptotic ratio - 1| at or below this counts as in the asymptotic range (our own threshold).
ASYMPTOTIC_TOL = 0.10
#: A quantity whose finest magnitude is below this fraction of its kind's scale is negligible:
#: no order or GCI is reported for it (they would measure round-off and mesh noise).
NEGLIGIBLE = 1e-3
#: Exponent of the peak memory's growth with the DOF count used to predict finer levels (a direct
#: sparse factorisation in 3D grows faster than linearly; 1.3 is our own conservative estimate from
#: the measured 100k -> 300k DOF figures in the project's solver notes).
MEMORY_EXPONENT = 1.3
#: Share of the available memory that levels running at once may take.
MEMORY_SHARE = 0.7
SAFETY_FACTOR = 1.25

_THREAD_VARS = ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS")


def level_factors(levels: int, ratio: float, case_mesh: str = "coarsest") -> list[float]:
    """Size factors of the levels, coarsest first.

    ``case_mesh="coarsest"``: the case's own sizes are level 1, each later level divides every
    size by ``ratio``; ``"finest"``: the case's sizes are the last level.
    """
    if case_mesh == "coarsest":
        return [ratio ** -i for i in range(levels)]
    return [ratio ** (levels - 1 - i) for i in range(levels)]


def available_memory_mb() -> float:
    """Memory the machine has available [MiB], or a large number where unknown."""
    avail = meminfo_available()
    return float("inf") if avail is None else avail / 2**20


def solve_level(case: Case, factor: float, index: int, keep_dir: Optional[str] = None) -> dict:
    """Solve ``case`` with every element size times ``factor``; return its tracked values.

    Runs in a worker process (it must be picklable and import-safe); returns plain data only:
    the summary document, the sampled lines, the mesh size measures, time and memory.
    """
    from ..fem.assembly import cell_volumes
    from ..output import summary, write_results
    from ..pipeline import solve_case
    from ..regions import region_nodes

    rss0 = current_memory_mb()
    t0 = time.perf_counter()
    lcase = case.with_mesh(case.mesh.scaled(factor))
    res = solve_case(lcase)
    doc = write_results(res, Path(keep_dir)) if keep_dir else summary(res, {})
    wall = time.perf_counter() - t0
    corners = res.mesh.cells[:, :4]
    volume = float(cell_volumes(res.mesh.points, corners).sum())
    iv = int(np.argmax(res.von_mises))
    where = [name for name, ids in res.region_ids.items() if iv in set(region_nodes(res.mesh, ids).tolist())]
    support_regions = {s.region for s in case.supports}
    peak = peak_memory_mb()
    return {
        "index": index, "factor": factor, "size": lcase.mesh.size,
        "refine": [{"region": r.region, "size": r.size} for r in lcase.mesh.refine],
        "nodes": res.mesh.nodes, "elements": int(res.mesh.cells.shape[0]), "dofs": res.dofs,
        "volume": volume, "wall_s": wall, "peak_mb": peak, "rss_start_mb": rss0, "pid": os.getpid(),
        "doc": doc,
        "lines": {n: {"s": ln.s, "stress": ln.stress, "von_mises": ln.von_mises} for n, ln in res.lines.items()},
        "max_von_mises_regions": where,
        "max_von_mises_at_support": sorted(set(where) & support_regions),
    }


def _pool(workers: int) -> ProcessPoolExecutor:
    """Worker processes started fresh ("spawn"): a forked copy of a process that already ran Gmsh or
    a threaded solver can hang on a lock held by a thread that does not exist in the copy."""
    return ProcessPoolExecutor(max_workers=workers, initializer=_worker_init,
                               mp_context=multiprocessing.get_context("spawn"))


def _worker_init() -> None:
    logging.getLogger().setLevel(logging.WARNING)


@contextlib.contextmanager
def _single_threaded_children(active: bool):
    """Environment for worker processes: one BLAS/solver thread each, so that parallel levels do
    not oversubscribe the cores. Restored afterwards."""
    if not active:
        yield
        return
    saved = {k: os.environ.get(k) for k in _THREAD_VARS}
    try:
        for k in _THREAD_VARS:
            os.environ[k] = "1"
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


# ------------------------------------------------------------------------------- quantities
def _vec(prefix: str, v, names="xyz") -> list[tuple[str, float]]:
    return [(f"{prefix}.{c}", float(x)) for c, x in zip(names, v)]


def tracked_scalars(doc: dict) -> list[tuple[str, str, float]]:
    """``(name, kind, value)`` of every scalar a summary reports, kinds: displacement, stress,
    force, moment, energy. Names are dotted paths into summary.json."""
    out: list[tuple[str, str, float]] = [
        ("max_displacement", "displacement", doc["max_displacement"]["value"]),
        ("max_von_mises", "stress", doc["max_von_mises"]["value"]),
        ("strain_energy", "energy", doc["strain_energy"]),
    ]
    for name, p in doc.get("points", {}).items():
        out += [(n, "displacement", v) for n, v in _vec(f"points.{name}.displacement", p["displacement"])]
        out.append((f"points.{name}.von_mises", "stress", p["von_mises"]))
        out += [(f"points.{name}.stress.{c}", "stress", float(v)) for c, v in p["stress"].items()]
        out += [(n, "stress", v) for n, v in _vec(f"points.{name}.principal", p["principal"], "123")]
    for name, r in doc.get("reactions", {}).items():
        out += [(n, "force", v) for n, v in _vec(f"reactions.{name}.force", r["force"])]
        out += [(n, "moment", v) for n, v in _vec(f"reactions.{name}.moment", r["moment"])]
    for name, lin in doc.get("linearized", {}).items():
        if "von_mises" in lin:
            vm = lin["von_mises"]
            out.append((f"linearized.{name}.von_mises.membrane", "stress", vm["membrane"]))
            out.append((f"linearized.{name}.von_mises.membrane_plus_bending.start", "stress",
                        vm["membrane_plus_bending"]["start"]))
            out.append((f"linearized.{name}.von_mises.membrane_plus_bending.end", "stress",
                        vm["membrane_plus_bending"]["end"]))
    return [(n, k, float("nan") if v is None else float(v)) for n, k, v in out]


def _scales(levels: list[dict]) -> dict[str, float]:
    """Magnitude of each kind of quantity over all levels, for the negligible test."""
    sc = {"displacement": 0.0, "stress": 0.0, "force": 0.0, "moment": 0.0, "energy": 0.0}
    for lv in levels:
        d = lv["doc"]
        sc["displacement"] = max(sc["displacement"], d["max_displacement"]["value"])
        sc["stress"] = max(sc["stress"], d["max_von_mises"]["value"])
        sc["energy"] = max(sc["energy"], abs(d["strain_energy"]))
        sc["force"] = max(sc["force"], float(np.linalg.norm(d["applied_force"])))
        for r in d.get("reactions", {}).values():
            sc["force"] = max(sc["force"], float(np.abs(r["force"]).max()))
            sc["moment"] = max(sc["moment"], float(np.abs(r["moment"]).max()))
    return sc


def assess(values_coarse_to_fine: np.ndarray, h_coarse_to_fine: np.ndarray, *, kind: str, scale: float,
           ratio: float) -> dict:
    """Order, Richardson value, GCI and verdicts of one quantity (values ordered coarse to fine)."""
    v = np.asarray(values_coarse_to_fine, dtype=float)
    h = np.asarray(h_coarse_to_fine, dtype=float)
    out: dict = {"values": v, "h": h}
    finest = float(v[-1])
    if not np.all(np.isfinite(v)):
        out.update(status="missing", advice="not available on every level")
        return out
    if abs(finest) < NEGLIGIBLE * scale and np.abs(v).max() < 10 * NEGLIGIBLE * scale:
        out.update(status="negligible", advice=f"below {NEGLIGIBLE:g} of the largest {kind} of the study; "
                   "not assessed")
        return out
    if not np.all(np.diff(h) < 0):
        out.update(status="not refined", advice="the representative size did not fall from level to level")
        return out
    gc = grid_convergence(v[::-1], h[::-1], safety_factor=SAFETY_FACTOR)
    growing = bool(np.all(np.diff(np.abs(v)) > 0))
    # Only a stress can be singular here: displacements and energies of a linear-elastic part stay
    # finite at corners and support edges, so a displacement that "grows" is divergent, not singular.
    singular = bool(kind == "stress" and (gc.likely_singular or (growing and (
        gc.convergence == "divergent" or (gc.convergence == "monotonic" and gc.observed_order < 1.0)))))
    r21 = gc.refinement_ratios[0]
    band = None
    if math.isfinite(gc.gci_fine):
        half = gc.gci_fine * abs(finest)
        band = [finest - half, finest + half]
    in_range = None
    if math.isfinite(gc.asymptotic_ratio):
        in_range = bool(abs(gc.asymptotic_ratio - 1.0) <= ASYMPTOTIC_TOL)
    out.update(
        status="assessed", convergence=gc.convergence, observed_order=gc.observed_order,
        extrapolated=gc.extrapolated, gci_fine=gc.gci_fine, gci_coarse=gc.gci_coarse,
        gci_fine_32=gc.gci_fine_32, band=band, approx_rel_error=gc.approx_rel_error,
        extrap_rel_error=gc.extrap_rel_error, refinement_ratios=list(gc.refinement_ratios),
        gci_ratio=(gc.gci_fine_32 / gc.gci_fine) if gc.gci_fine > 0 else None,
        r_to_p=r21 ** gc.observed_order if math.isfinite(gc.observed_order) else None,
        asymptotic_ratio=gc.asymptotic_ratio, in_asymptotic_range=in_range,
        orders_all=list(gc.orders_all), singular=singular, growing=growing,
    )
    if singular:
        out["advice"] = ("grows under refinement without settling: likely a singular point (re-entrant corner, "
                         "edge of an idealised support or a point-like load); do not read this as a converged "
                         "number; read stress a little away from that point or linearize across the section")
    elif gc.convergence == "divergent":
        out["advice"] = "diverges under refinement; check the model and refine further"
    elif gc.convergence == "oscillatory":
        out["advice"] = "oscillates between levels; the GCI is indicative only"
    elif gc.convergence == "converged":
        out["advice"] = "unchanged between the finest levels (to round-off)"
    elif in_range is False:
        out["advice"] = ("monotonic, but the finest levels are not yet in the asymptotic range "
                         f"(ratio {gc.asymptotic_ratio:.3g}, 1 expected); treat the GCI as indicative")
    else:
        out["advice"] = f"monotonic, order {gc.observed_order:.2g}, GCI {100 * gc.gci_fine:.2g} %"
    return out


# ------------------------------------------------------------------------------- the study
def _predict_peaks(first: dict, factors: list[float]) -> list[float]:
    base = first["rss_start_mb"]
    own = max(first["peak_mb"] - base, 1.0)
    return [base + own * (first["factor"] / f) ** (3 * MEMORY_EXPONENT) for f in factors]


def _choose_jobs(requested: Optional[int], pending: list[float], cores: int,
                 load: float = 0.0) -> tuple[int, str]:
    avail = available_memory_mb()
    budget = MEMORY_SHARE * avail
    if requested is not None and requested <= 1:
        return 1, "one process (as requested)"
    # Other work already on the cores (the load average before the study began) leaves fewer free:
    # measured here, two parallel levels gained nothing (0.99x) at a load average of 9 on 2 cores.
    free = max(1, cores - int(load))
    cap = free if requested is None else min(requested, cores)
    cap = min(cap, len(pending))
    if cap <= 1:
        return 1, (f"one process ({cores} core{'s' if cores != 1 else ''}, load average {load:.1f} before the "
                   f"study: {free} free; or one level left)")
    biggest = sorted(pending, reverse=True)
    jobs = cap
    while jobs > 1 and sum(biggest[:jobs]) > budget:
        jobs -= 1
    if jobs == 1:
        return 1, (f"one process: the two largest levels would need about {sum(biggest[:2]):.0f} MiB at once, "
                   f"more than {MEMORY_SHARE:.0%} of the {avail:.0f} MiB available")
    return jobs, (f"{jobs} processes: the {jobs} largest remaining levels need about {sum(biggest[:jobs]):.0f} MiB "
                  f"at once (predicted), within {MEMORY_SHARE:.0%} of the {avail:.0f} MiB available")


def run_study(case: Case, levels: int = 3, ratio: float = 1.5, *, case_mesh: str = "coarsest",
              jobs: Optional[int] = None, progress: Progress = quiet,
              keep_dir: Optional[Path] = None) -> dict:
    """Solve ``case`` on ``levels`` meshes and assess every tracked quantity.

    Parameters
    ----------
    case : Case
        A case whose geometry is meshed here (a CAD file; a given mesh cannot be refined).
    levels : int
        Number of meshes, >= 3.
    ratio : float
        Refinement ratio between successive levels, > 1 (every size divided by it), e.g. 1.5.
    case_mesh : {"coarsest", "finest"}
        Whether the case's own sizes are the coarsest or the finest level.
    jobs : int, optional
        Worker processes; default: as many as cores and memory allow.
    progress : callable
        ``progress(stage, message)`` per level.
    keep_dir : Path, optional
        Write each level's full results to ``keep_dir/level-N``.

    Returns
    -------
    dict
        The study document (JSON-ready after :func:`elastofe.output._clean`): ``levels``,
        ``quantities`` (name -> assessment), ``lines`` (profiles), ``execution``.
    """
    if levels < 3:
        raise CaseError("--levels", levels, "a convergence study needs at least 3 levels")
    if not (ratio > 1.0 and math.isfinite(ratio)):
        raise CaseError("--ratio", ratio, "must be a number greater than 1 (for example 1.5 or 2)")
    if case_mesh not in ("coarsest", "finest"):
        raise CaseError("--case-mesh", case_mesh, "must be 'coarsest' or 'finest'")
    if case.geometry.file.suffix.lower() in (".msh", ".vtu", ".vtk"):
        raise CaseError("geometry.file", str(case.geometry.file),
                        "a convergence study re-meshes the part; give a STEP/BREP/IGES geometry, not a mesh file")
    if case.mesh.size is None:
        raise CaseError("mesh.size", None, "a convergence study needs a global element size to scale; set mesh.size")
    factors = level_factors(levels, ratio, case_mesh)
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    load0 = os.getloadavg()[0] if hasattr(os, "getloadavg") else 0.0
    t_start = time.perf_counter()
    results: dict[int, dict] = {}

    def kd(i):
        return None if keep_dir is None else str(Path(keep_dir) / f"level-{i + 1}")

    def report(r):
        progress("study", f"level {r['index'] + 1}/{levels} done: size {r['size']:.4g}, {r['dofs']:,} DOF, "
                 f"{r['wall_s']:.1f} s, peak {r['peak_mb']:.0f} MiB")

    in_process = jobs is not None and jobs <= 1
    progress("study", f"{levels} levels, sizes x {', '.join(f'{f:.4g}' for f in factors)} "
             f"(ratio {ratio:g}); level 1 first to measure its memory ...")
    execution: dict = {"cores": cores, "available_memory_mb": available_memory_mb(), "load_average": load0}
    if in_process:
        for i, f in enumerate(factors):
            progress("study", f"level {i + 1}/{levels}: solving (size {case.mesh.size * f:.4g}) ...")
            results[i] = solve_level(case, f, i, kd(i))
            report(results[i])
        execution.update(jobs=1, reason="one process (as requested)", mode="in-process")
    else:
        with _single_threaded_children(True), _pool(1) as ex:
            results[0] = ex.submit(solve_level, case, factors[0], 0, kd(0)).result()
        report(results[0])
        predicted = _predict_peaks(results[0], factors)
        pending = list(range(1, levels))
        n, why = _choose_jobs(jobs, [predicted[i] for i in pending], cores, load0)
        progress("study", f"levels 2-{levels}: {why}")
        execution.update(jobs=n, reason=why, mode="worker processes", predicted_peak_mb=predicted)
        with _single_threaded_children(n > 1), _pool(n) as ex:
            # Largest first, so that the smaller levels fill the other workers meanwhile.
            futs = {ex.submit(solve_level, case, factors[i], i, kd(i)): i for i in sorted(pending, reverse=True)}
            for fut in as_completed(futs):
                r = fut.result()
                results[r["index"]] = r
                report(r)
    wall = time.perf_counter() - t_start
    lv = [results[i] for i in range(levels)]
    execution.update(wall_s=wall, sum_of_level_s=sum(r["wall_s"] for r in lv),
                     measured_peak_mb=[r["peak_mb"] for r in lv])
    execution["speedup"] = execution["sum_of_level_s"] / wall if wall > 0 else None
    return assemble_study(case, lv, ratio, factors, execution)


#: A point within this many finest global element sizes of a singular peak shares its verdict.
NEAR_PEAK = 2.0


def _flag_points_near(case: Case, quantities: dict, peak: np.ndarray, size: float) -> None:
    """Flag the stresses of named points that lie at a singular peak (e.g. on a re-entrant edge).

    The stress interpolated at such a point may even look settled between levels, because the nodal
    average there depends on how the elements happen to fan around the edge; its neighbourhood
    is what grows, so the point shares the peak's verdict.
    """
    for p in case.points:
        dist = float(np.linalg.norm(np.asarray(p.at) - peak))
        if dist > NEAR_PEAK * size:
            continue
        for n, q in quantities.items():
            if n.startswith(f"points.{p.name}.") and q["kind"] == "stress" and q["status"] == "assessed" \
                    and not q.get("singular"):
                q["singular"] = True
                q["near_singular_peak"] = dist
                q["advice"] = (f"lies {dist:.3g} from the growing (singular) peak of von Mises stress, within "
                               f"{NEAR_PEAK:g} element sizes: do not read this as a converged number; read stress "
                               "a little away from that point or linearize across the section")


def assemble_study(case: Case, lv: list[dict], ratio: float, factors: list[float], execution: dict) -> dict:
    """The study document from the per-level results (coarsest first)."""
    h = np.array([(r["volume"] / r["elements"]) ** (1.0 / 3.0) for r in lv])
    dofs = [r["dofs"] for r in lv]
    scales = _scales(lv)
    per_level = [tracked_scalars(r["doc"]) for r in lv]
    names = [n for n, _, _ in per_level[-1]]
    kinds = {n: k for n, k, _ in per_level[-1]}
    table = {n: np.full(len(lv), np.nan) for n in names}
    for i, rows in enumerate(per_level):
        for n, _, v in rows:
            if n in table:
                table[n][i] = v
    lab = case.units.labels
    unit_of = {"displacement": lab["length"], "stress": lab["stress"], "force": lab["force"],
               "moment": lab["moment"], "energy": lab["energy"]}
    quantities = {}
    for n in names:
        q = assess(table[n], h, kind=kinds[n], scale=scales[kinds[n]], ratio=ratio)
        q.update(kind=kinds[n], unit=unit_of[kinds[n]], dofs=dofs)
        quantities[n] = q
    mx = quantities.get("max_von_mises")
    if mx is not None:
        at_support = lv[-1]["max_von_mises_at_support"]
        mx["location"] = lv[-1]["doc"]["max_von_mises"]["at"]
        mx["on_regions"] = lv[-1]["max_von_mises_regions"]
        if at_support:
            mx["advice"] = (mx.get("advice", "") + f"; the peak lies on the support region(s) "
                            f"{', '.join(at_support)}: an idealised support edge makes stress there "
                            "mesh-dependent").lstrip("; ")
    if mx is not None and mx.get("singular"):
        _flag_points_near(case, quantities, np.asarray(mx["location"], dtype=float), lv[-1]["size"])
    lines = {}
    for name in lv[-1]["lines"]:
        s = np.asarray(lv[-1]["lines"][name]["s"])
        vm = np.array([np.asarray(r["lines"][name]["von_mises"]) for r in lv])  # (levels, k)
        prof = {"s": s, "von_mises": vm, "extrapolated": np.full(s.size, np.nan),
                "gci_fine": np.full(s.size, np.nan), "observed_order": np.full(s.size, np.nan),
                "convergence": [None] * s.size}
        for j in range(s.size):
            a = assess(vm[:, j], h, kind="stress", scale=scales["stress"], ratio=ratio)
            if a["status"] == "assessed":
                prof["extrapolated"][j] = a["extrapolated"]
                prof["gci_fine"][j] = a["gci_fine"]
                prof["observed_order"][j] = a["observed_order"]
                prof["convergence"][j] = a["convergence"]
        lines[name] = prof
    singular = [n for n, q in quantities.items() if q.get("singular")]
    return {
        "title": case.title,
        "case_file": str(case.source) if case.source else None,
        "units": {k: lab[k] for k in ("length", "force", "stress", "moment", "energy")},
        "ratio": ratio,
        "safety_factor": SAFETY_FACTOR,
        "asymptotic_tolerance": ASYMPTOTIC_TOL,
        "levels": [{"level": i + 1, "factor": r["factor"], "size": r["size"], "refine": r["refine"],
                    "nodes": r["nodes"], "elements": r["elements"], "dofs": r["dofs"], "h": float(h[i]),
                    "wall_s": r["wall_s"], "peak_mb": r["peak_mb"]} for i, r in enumerate(lv)],
        "quantities": quantities,
        "lines": lines,
        "singular": singular,
        "execution": execution,
        "method": ("Observed order from the three finest levels, Richardson extrapolation and GCI with "
                   "Fs = 1.25 (Roache, J. Fluids Eng. 116, 1994; Celik et al., J. Fluids Eng. 130, 2008; "
                   "ASME V&V 20-2009); h = (V/N)^(1/3) per level; band = finest value +- GCI"),
    }
