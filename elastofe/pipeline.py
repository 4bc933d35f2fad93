"""The solve pipeline: case -> mesh -> regions -> supports and loads -> K u = f -> recovery -> post.

Each stage is a function of the previous stage's plain data. :func:`solve_case` runs them all and
returns a :class:`Result` of arrays; :mod:`elastofe.output` writes it.
"""
from __future__ import annotations

import logging
import resource
import time
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np
import scipy.sparse as sp

from . import solve as solvers
from .bc import AppliedLoad, Held, check_restrained, held_dofs, load_vectors
from .case.schema import Case
from .errors import CaseError, ModelError
from .fem.assembly import assemble_stiffness
from .geometry import mesh_geometry
from .mesh import Mesh, SurfaceInfo, surface_catalogue
from .post.probe import Location, interpolate, locate
from .post.recovery import element_quality, nodal_stress, principal, von_mises
from .regions import model_size, resolve_regions, select
from .resources import check_memory, estimate, estimate_from_volume

log = logging.getLogger(__name__)

#: A progress callback: (stage name, message) -> None. The CLI prints; the library only calls it.
Progress = Callable[[str, str], None]


def _quiet(stage: str, message: str) -> None:
    log.info("%s: %s", stage, message)


@dataclass
class LineResult:
    """Samples along a line: ``s (k,)`` distance from start, ``xyz (k, 3)``, ``u (k, 3)``,
    ``stress (k, 6)``, ``von_mises (k,)``; NaN where a sample lies outside the part."""

    name: str
    s: np.ndarray
    xyz: np.ndarray
    u: np.ndarray
    stress: np.ndarray
    von_mises: np.ndarray
    outside: int


@dataclass
class Result:
    """Everything a run computed, as arrays in the case's unit system.

    Attributes
    ----------
    u : (n, 3) nodal displacements.
    stress : (n, 6) nodally averaged stress (xx, yy, zz, xy, yz, xz).
    von_mises : (n,) ; principal : (n, 3) largest first.
    element_stress : (m, k, 6) unaveraged stress at each element's nodes.
    quality : (m,) element shape quality in (0, 1].
    reactions : {support region: {"force": (3,), "moment": (3,)}} about the origin.
    """

    case: Case
    mesh: Mesh
    catalogue: list[SurfaceInfo]
    region_ids: dict[str, list[int]]
    held: Held
    loads: list[AppliedLoad]
    u: np.ndarray
    stress: np.ndarray
    von_mises: np.ndarray
    principal: np.ndarray
    element_stress: np.ndarray
    quality: np.ndarray
    reaction_nodal: np.ndarray
    reactions: dict
    applied_force: np.ndarray
    applied_moment: np.ndarray
    equilibrium_error: float
    strain_energy: float
    residual: float
    backend: str
    points: dict = field(default_factory=dict)
    lines: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    #: Estimated peak memory of assembly and solve [bytes] (see :mod:`elastofe.resources`).
    memory_estimate: Optional[float] = None

    @property
    def dofs(self) -> int:
        return 3 * self.mesh.nodes


def peak_memory_mb() -> float:
    """Peak resident memory of this process so far [MiB]."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def build_mesh(case: Case, progress: Progress = _quiet) -> Mesh:
    """Mesh the case's geometry (or read its mesh file) with its mesh parameters."""
    refine = None
    if case.mesh.refine:
        def refine(surface_mesh: Mesh):
            cat = surface_catalogue(surface_mesh)
            return [(select(case.regions[r.region], surface_mesh, cat, f"regions.{r.region}"), r.size)
                    for r in case.mesh.refine if r.region in case.regions]
    def before_mesh(volume: float, size: float) -> None:
        # Refuse a mesh whose solve cannot fit before Gmsh spends minutes (and memory) on it.
        est = estimate_from_volume(volume, size, 4 if case.mesh.order == 1 else 10,
                                   solvers.choose_backend(case.solver.backend, 0))
        check_memory(est, alternatives=tuple(solvers.available_backends()))

    return mesh_geometry(case.geometry.file, order=case.mesh.order, size=case.mesh.size, refine=refine,
                         before_mesh=before_mesh)


def check_inputs_on_mesh(case: Case, mesh: Mesh) -> None:
    """Checks of the case against the mesh made before any solving (cheap; raise :class:`CaseError`).

    A 4-node mesh file with a Poisson's ratio near 0.5, named points outside the part and lines
    wholly outside it are refused here instead of after a long solve.
    """
    from .case.load import check_locking

    check_locking(case.material.nu, mesh.cells.shape[1])
    tol = _tolerance(mesh)
    if case.points:
        loc = locate(mesh.points, mesh.cells, np.array([p.at for p in case.points]))
        for i, p in enumerate(case.points):
            if loc.outside[i] > tol:
                raise CaseError(f"point[{i + 1}].at", list(p.at), _outside_message(mesh, loc.outside[i], case))
    for i, ln in enumerate(case.lines, 1):
        a, b = np.asarray(ln.start), np.asarray(ln.end)
        xyz = a + np.linspace(0.0, 1.0, ln.samples)[:, None] * (b - a)
        loc = locate(mesh.points, mesh.cells, xyz)
        if (loc.outside > tol).all():
            lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
            raise CaseError(f"line[{i}]", {"start": list(ln.start), "end": list(ln.end)},
                            "lies wholly outside the part; give a line through the part (its bounding box is "
                            f"{_fmt_xyz(lo)} to {_fmt_xyz(hi)})")


def _fmt_xyz(v) -> str:
    return "[" + ", ".join(f"{c:.4g}" for c in v) + "]"


def _outside_message(mesh: Mesh, distance: float, case: Case) -> str:
    lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
    return (f"lies outside the part (about {distance:.3g} {case.units.labels['length']} from the nearest "
            f"element); give a point inside or on the part (its bounding box is {_fmt_xyz(lo)} to {_fmt_xyz(hi)})")


def solve_case(case: Case, progress: Progress = _quiet, mesh: Optional[Mesh] = None) -> Result:
    """Run the whole pipeline on a validated case.

    Parameters
    ----------
    case : Case
    progress : callable, optional
        Called with (stage, message) as stages finish.
    mesh : Mesh, optional
        A mesh to use instead of meshing the case's geometry.

    Raises
    ------
    CaseError
        Inputs that do not fit the model (a region matching nothing, a point outside the part).
    ModelError
        A model that cannot be solved (not restrained, singular).
    """
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    if mesh is None:
        progress("mesh", f"meshing {case.geometry.file.name} (order {case.mesh.order}) ...")
        mesh = build_mesh(case, progress)
    timings["mesh"] = time.perf_counter() - t0
    progress("mesh", f"{mesh.nodes:,} nodes, {mesh.cells.shape[0]:,} elements, {3 * mesh.nodes:,} DOF "
             f"({timings['mesh']:.2f} s)")
    check_inputs_on_mesh(case, mesh)

    t = time.perf_counter()
    catalogue = surface_catalogue(mesh)
    region_ids = resolve_regions(case, mesh, catalogue)
    for key, name in [(f"support[{i}].region", s.region) for i, s in enumerate(case.supports, 1)] + \
                     [(f"load[{i}].region", ld.region) for i, ld in enumerate(case.loads, 1) if hasattr(ld, "region")]:
        if name not in region_ids:
            raise CaseError(key, name, f"unknown region; defined: {', '.join(region_ids) or 'none'}")
    held = held_dofs(case, mesh, region_ids)
    scale = model_size(mesh)
    check_restrained(mesh.points, held, scale)
    loads = load_vectors(case, mesh, region_ids)
    ndof = 3 * mesh.nodes
    f = np.zeros(ndof)
    for ld in loads:
        f += ld.f
    timings["loads"] = time.perf_counter() - t

    t = time.perf_counter()
    backend = solvers.choose_backend(case.solver.backend, ndof - held.dofs.size)
    mem = estimate(ndof, mesh.cells.shape[0], mesh.cells.shape[1], backend)
    check_memory(mem, alternatives=tuple(solvers.available_backends()))
    lam, mu = case.material.lame
    try:
        K = assemble_stiffness(mesh.points, mesh.cells, lam, mu)
    except ValueError as err:
        raise ModelError(f"assembly failed: {err}") from None
    timings["assembly"] = time.perf_counter() - t
    progress("assembly", f"stiffness {ndof:,} x {ndof:,}, {K.nnz:,} non-zeros ({timings['assembly']:.2f} s)")

    t = time.perf_counter()
    free = np.ones(ndof, dtype=bool)
    free[held.dofs] = False
    u = np.zeros(ndof)
    u[held.dofs] = held.values
    Kff = K[free][:, free].tocsr()
    rhs = f[free] - K[free][:, held.dofs] @ held.values if np.any(held.values) else f[free]
    progress("solve", f"solving {int(free.sum()):,} equations with {backend} ...")
    sol = solvers.solve(Kff, rhs, backend=backend, tol=case.solver.tol, maxiter=case.solver.maxiter)
    u[free] = sol.u
    timings["solve"] = time.perf_counter() - t
    progress("solve", f"relative residual {sol.residual:.2e} ({timings['solve']:.2f} s)")

    t = time.perf_counter()
    Ku = K @ u
    r = Ku - f
    r[free] = 0.0
    pts = mesh.points
    R3 = r.reshape(-1, 3)
    reactions = {}
    node_owner = np.full(ndof, -1)
    node_owner[held.dofs] = held.owner
    for i, s in enumerate(case.supports):
        mask = (node_owner == i).reshape(-1, 3)
        Ri = np.where(mask, R3, 0.0)
        entry = reactions.setdefault(s.region, {"force": np.zeros(3), "moment": np.zeros(3)})
        entry["force"] = entry["force"] + Ri.sum(axis=0)
        entry["moment"] = entry["moment"] + np.cross(pts, Ri).sum(axis=0)
    F_app = f.reshape(-1, 3).sum(axis=0)
    M_app = np.cross(pts, f.reshape(-1, 3)).sum(axis=0)
    R_tot = R3.sum(axis=0)
    denom = max(np.linalg.norm(F_app), np.abs(R3).sum(axis=0).max(), 1e-300)
    equilibrium_error = float(np.linalg.norm(R_tot + F_app) / denom)
    energy = 0.5 * float(u @ Ku)

    U = u.reshape(-1, 3)
    stress, s_el = nodal_stress(pts, mesh.cells, U, lam, mu)
    vm = von_mises(stress)
    pr = principal(stress)
    quality = element_quality(pts, mesh.cells)
    timings["recovery"] = time.perf_counter() - t

    res = Result(case, mesh, catalogue, region_ids, held, loads, U, stress, vm, pr, s_el, quality,
                 R3, reactions, F_app, M_app, equilibrium_error, energy, sol.residual, sol.backend)
    res.memory_estimate = mem.peak
    t = time.perf_counter()
    res.points = probe_points(case, res)
    res.lines = sample_lines(case, res)
    timings["post"] = time.perf_counter() - t
    res.timings = timings
    return res


def _fields_at(res: Result, loc: Location) -> dict[str, np.ndarray]:
    cells = res.mesh.cells
    u = interpolate(cells, loc, res.u)
    s = interpolate(cells, loc, res.stress)
    return {"u": u, "stress": s, "von_mises": von_mises(s), "principal": principal(s)}


def _tolerance(mesh: Mesh) -> float:
    """How far outside the mesh a point may lie and still count as on the part [length]."""
    return 1e-4 * model_size(mesh)


def probe_points(case: Case, res: Result) -> dict:
    """Displacement, stress, von Mises and principal stresses at each named point."""
    if not case.points:
        return {}
    at = np.array([p.at for p in case.points])
    loc = locate(res.mesh.points, res.mesh.cells, at)
    for i, p in enumerate(case.points):
        if loc.outside[i] > _tolerance(res.mesh):
            raise CaseError(f"point[{i + 1}].at", list(p.at), _outside_message(res.mesh, loc.outside[i], case))
    v = _fields_at(res, loc)
    return {p.name: {"at": np.asarray(p.at), "displacement": v["u"][i], "von_mises": float(v["von_mises"][i]),
                     "stress": v["stress"][i], "principal": v["principal"][i]}
            for i, p in enumerate(case.points)}


def sample_lines(case: Case, res: Result) -> dict[str, LineResult]:
    """Fields at evenly spaced samples along each named line (NaN outside the part)."""
    out = {}
    for i, ln in enumerate(case.lines, 1):
        a, b = np.asarray(ln.start), np.asarray(ln.end)
        tpar = np.linspace(0.0, 1.0, ln.samples)
        xyz = a + tpar[:, None] * (b - a)
        loc = locate(res.mesh.points, res.mesh.cells, xyz)
        out_mask = loc.outside > _tolerance(res.mesh)
        if out_mask.all():
            raise CaseError(f"line[{i}]", {"start": list(ln.start), "end": list(ln.end)},
                            "lies wholly outside the part; give a line through the part")
        v = _fields_at(res, loc)
        for key in ("u", "stress", "von_mises"):
            v[key] = np.where(out_mask.reshape((-1,) + (1,) * (v[key].ndim - 1)), np.nan, v[key])
        out[ln.name] = LineResult(ln.name, tpar * np.linalg.norm(b - a), xyz, v["u"], v["stress"],
                                  v["von_mises"], int(out_mask.sum()))
    return out
