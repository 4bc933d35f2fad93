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
from .bc import (AppliedLoad, Held, check_restrained, foundations, held_dofs, load_vectors,
                 split_reactions)
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
    #: Backend details for summary.json's "solver" block (ranks, iterations, ...); may be empty.
    solver_info: dict = field(default_factory=dict)
    #: Estimated peak memory of assembly and solve [bytes] (see :mod:`elastofe.resources`).
    memory_estimate: Optional[float] = None
    #: Nodal temperature change ``(n,)`` [K] of the (first) load case, or None without one.
    temperature: Optional[np.ndarray] = None
    #: |Σ reaction moments + Σ applied moments| / (force scale x model size).
    moment_equilibrium_error: float = 0.0
    #: With named load cases: the name of the one the fields above describe (the first) ...
    load_case: Optional[str] = None
    #: ... every load case and combination by name (:class:`CaseResult`) ...
    load_cases: dict = field(default_factory=dict)
    #: ... and the envelope of von Mises over them ({"von_mises", "governing", "names"}).
    envelope: Optional[dict] = None
    #: {line name: (LinearizedStress or None, info dict)}: membrane/bending/peak split per line.
    linearized: dict = field(default_factory=dict)
    #: {beam name: dict}: beam-theory estimates next to the FE values (``[[beam]]`` of the case).
    estimates: dict = field(default_factory=dict)

    @property
    def dofs(self) -> int:
        return 3 * self.mesh.nodes


def peak_memory_mb() -> float:
    """Peak resident memory of this process so far [MiB]."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def build_mesh(case: Case, progress: Progress = _quiet) -> Mesh:
    """Mesh the case's geometry (or read its mesh file) with its mesh parameters."""
    from .mesh import check_readable

    check_readable(case.geometry.file)  # missing, a folder or unreadable: CaseError before Gmsh starts
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


def check_inputs_on_mesh(case: Case, mesh: Mesh, *, allow_locking: bool = False) -> None:
    """Checks of the case against the mesh made before any solving (cheap; raise :class:`CaseError`).

    A 4-node mesh file with a Poisson's ratio near 0.5, named points outside the part and lines
    wholly outside it are refused here instead of after a long solve.
    """
    from .case.load import check_locking

    if not allow_locking:  # studies that show locking on purpose pass allow_locking=True
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


def solve_case(case: Case, progress: Progress = _quiet, mesh: Optional[Mesh] = None, *,
               allow_locking: bool = False) -> Result:
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

    Raises
    ------
    CaseError
        Inputs that do not fit the model (a region matching nothing, a point outside the part).
    ModelError
        A model that cannot be solved (not restrained, singular).
    """
    if case.solver.backend == "petsc":
        # The distributed engine (elastofe.parallel): the Result on rank 0, None on other ranks.
        from .parallel.distributed import solve_case_distributed

        return solve_case_distributed(case, progress, mesh)
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    if mesh is None:
        progress("mesh", f"meshing {case.geometry.file.name} (order {case.mesh.order}) ...")
        mesh = build_mesh(case, progress)
    timings["mesh"] = time.perf_counter() - t0
    progress("mesh", f"{mesh.nodes:,} nodes, {mesh.cells.shape[0]:,} elements, {3 * mesh.nodes:,} DOF "
             f"({timings['mesh']:.2f} s)")
    check_inputs_on_mesh(case, mesh, allow_locking=allow_locking)

    t = time.perf_counter()
    catalogue = surface_catalogue(mesh)
    region_ids = resolve_regions(case, mesh, catalogue)
    for key, name in [(f"support[{i}].region", s.region) for i, s in enumerate(case.supports, 1)] + \
                     [(f"load[{i}].region", ld.region) for i, ld in enumerate(case.loads, 1) if hasattr(ld, "region")]:
        if name not in region_ids:
            raise CaseError(key, name, f"unknown region; defined: {', '.join(region_ids) or 'none'}")
    held = held_dofs(case, mesh, region_ids, catalogue)
    found = foundations(case, mesh, region_ids)
    scale = model_size(mesh)
    check_restrained(mesh.points, held, scale, found)
    loads = load_vectors(case, mesh, region_ids, catalogue)
    ndof = 3 * mesh.nodes
    groups = load_case_groups(case)
    F = np.zeros((ndof, len(groups)))
    temps: list[Optional[np.ndarray]] = []
    for j, (_, idx) in enumerate(groups):
        T = None
        for i in idx:
            F[:, j] += loads[i].f
            if loads[i].temperature is not None:
                T = loads[i].temperature.copy() if T is None else T + loads[i].temperature
        temps.append(T)
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
    for fd in found:
        K = K + fd.K
    timings["assembly"] = time.perf_counter() - t
    progress("assembly", f"stiffness {ndof:,} x {ndof:,}, {K.nnz:,} non-zeros ({timings['assembly']:.2f} s)")

    t = time.perf_counter()
    U, sol_residual, backend = solve_load_cases(case, K, F, held, progress, mesh=mesh)
    timings["solve"] = time.perf_counter() - t
    progress("solve", f"{len(groups)} load case(s), relative residual {sol_residual:.2e} ({timings['solve']:.2f} s)")

    t = time.perf_counter()
    pts = mesh.points
    therm = (3 * lam + 2 * mu) * (case.material.expansion or 0.0)
    # Stresses of every load case in one pass over the elements (gradients computed once).
    stresses, s_el0 = nodal_stresses(pts, mesh.cells, U.T.reshape(len(groups), -1, 3), lam, mu)
    outs = []
    for j, (name, idx) in enumerate(groups):
        outs.append(_case_fields(case, mesh, K, held, found, U[:, j], F[:, j], temps[j], therm,
                                 stress=stresses[j], element_stress=s_el0 if j == 0 else None))
    quality = element_quality(pts, mesh.cells)
    timings["recovery"] = time.perf_counter() - t

    first = outs[0]
    res = Result(case, mesh, catalogue, region_ids, held, loads, first["u"], first["stress"], first["von_mises"],
                 first["principal"], first["element_stress"], quality, first["reaction_nodal"], first["reactions"],
                 first["applied_force"], first["applied_moment"], first["equilibrium_error"],
                 first["strain_energy"], sol_residual, backend)
    res.temperature = first["temperature"]
    res.moment_equilibrium_error = first["moment_equilibrium_error"]
    res.memory_estimate = mem.peak
    t = time.perf_counter()
    res.points = probe_points(case, res)
    res.lines = sample_lines(case, res)
    if case.load_cases:
        res.load_case = groups[0][0]
        res.load_cases = _named_results(case, res, K, held, found, groups, outs, U, F, temps, therm)
        res.envelope = _envelope(res.load_cases)
    res.linearized = linearize_lines(res)
    if getattr(case, "beams", ()):
        from .studies.estimate import beam_estimates

        res.estimates = beam_estimates(case, res)
    timings["post"] = time.perf_counter() - t
    res.timings = timings
    return res


def load_case_groups(case: Case) -> list[tuple[str, tuple[int, ...]]]:
    """(name, load indices) of each load case; one implicit case of every load when none are named."""
    if not case.load_cases:
        return [("", tuple(range(len(case.loads))))]
    return [(lc.name, lc.loads) for lc in case.load_cases]


def solve_load_cases(case: Case, K: sp.csr_matrix, F: np.ndarray, held: Held, progress: Progress = _quiet,
                     mesh: Optional[Mesh] = None):
    """Solve ``K u = f`` for every column of ``F (3n, k)`` with one factorisation.

    Held components (possibly in rotated nodal frames) are eliminated; the factorisation of the
    reduced matrix is reused for every right-hand side. ``mesh`` lets the multigrid backend use
    the rigid-body modes and the corner-node coarse level. Returns ``(U (3n, k), largest relative
    residual, backend name)``.
    """
    ndof = K.shape[0]
    k = F.shape[1]
    T = held.transform(ndof)
    Kl = (T @ K @ T.T).tocsr() if T is not None else K
    Fl = (T @ F) if T is not None else F
    free = np.ones(ndof, dtype=bool)
    free[held.dofs] = False
    Ul = np.zeros((ndof, k))
    Ul[held.dofs] = held.values[:, None]
    Kff = Kl[free][:, free].tocsr()
    rhs = Fl[free]
    if np.any(held.values):
        rhs = rhs - (Kl[free][:, held.dofs] @ held.values)[:, None]
    # Several load cases favour a direct factorisation (reused for all of them): nrhs counts.
    backend = solvers.choose_backend(case.solver.backend, int(free.sum()), nrhs=k)
    progress("solve", f"solving {int(free.sum()):,} equations with {backend}"
             f"{f' for {k} load cases' if k > 1 else ''} ...")
    options = {}
    if backend == "amg" and mesh is not None:
        from .solve.levels import amg_options

        options = amg_options(mesh.points, mesh.cells, free, transform=T)
    if backend == "amg":
        options["progress"] = progress
    # solvers.solve takes all right-hand sides at once (one factorisation) and checks residuals.
    sol = solvers.solve(Kff, rhs[:, 0] if k == 1 else np.ascontiguousarray(rhs), backend=backend,
                        tol=case.solver.tol, maxiter=case.solver.maxiter, **options)
    Ul[free] = sol.u.reshape(-1, k)
    residual, name = sol.residual, sol.backend
    U = (T.T @ Ul) if T is not None else Ul
    return U, residual, name


def nodal_stresses(points: np.ndarray, cells: np.ndarray, U: np.ndarray, lam: float, mu: float):
    """Nodally averaged stresses of several displacement fields at once.

    Like :func:`elastofe.post.recovery.nodal_stress` for each of ``U (k, n, 3)``, but the shape
    function gradients of each element block are computed once for all k fields.

    Returns
    -------
    averaged : (k, n, 6) [stress]; element_nodal : (m, nodes per cell, 6) of the first field.
    """
    from .fem.assembly import BLOCK, gradients, hooke, strain_displacement
    from .fem.elements import element_for

    el = element_for(cells.shape[1])
    k, n = U.shape[0], points.shape[0]
    m, npc = cells.shape
    s_first = np.empty((m, npc, 6))
    acc = np.zeros((k, n, 6))
    count = np.bincount(cells.ravel(), minlength=n).astype(float)
    for b in range(0, m, BLOCK):
        c = cells[b:b + BLOCK]
        G, _ = gradients(points[c], el, el.ref_nodes)
        flat = c.ravel()
        for j in range(k):
            sj = hooke(strain_displacement(G, U[j][c]), lam, mu)  # (e, npc, 6)
            if j == 0:
                s_first[b:b + BLOCK] = sj
            for comp in range(6):
                acc[j, :, comp] += np.bincount(flat, weights=sj[..., comp].ravel(), minlength=n)
    acc /= np.maximum(count, 1)[None, :, None]
    return acc, s_first


def _case_fields(case: Case, mesh: Mesh, K, held: Held, found, u: np.ndarray, f: np.ndarray,
                 temperature: Optional[np.ndarray], therm: float, stress: Optional[np.ndarray] = None,
                 element_stress: Optional[np.ndarray] = None, thermal_done: bool = False) -> dict:
    """Reactions, equilibrium and stresses of one displacement field ``u (3n,)`` under loads ``f``.

    ``stress (n, 6)`` (and ``element_stress``) may be given when already recovered; with
    ``thermal_done`` they already have the thermal part taken out.
    """
    pts = mesh.points
    lam, mu = case.material.lame
    Ku = K @ u
    r = (Ku - f).reshape(-1, 3)
    nodal, per = split_reactions(held, pts, r, len(case.supports))
    for fd in found:  # an elastic support pushes back with -K_s u
        per[fd.index] = -(fd.K @ u).reshape(-1, 3)
        nodal = nodal + per[fd.index]
    reactions: dict = {}
    for i, s in enumerate(case.supports):
        Ri = per[i]
        entry = reactions.setdefault(s.region, {"force": np.zeros(3), "moment": np.zeros(3)})
        entry["force"] = entry["force"] + Ri.sum(axis=0)
        entry["moment"] = entry["moment"] + np.cross(pts, Ri).sum(axis=0)
        if getattr(s, "moment_about", None) is not None:
            P = np.asarray(s.moment_about)
            entry["about"] = P
            entry["moment_about"] = entry.get("moment_about", np.zeros(3)) + np.cross(pts - P, Ri).sum(axis=0)
    F3 = f.reshape(-1, 3)
    F_app = F3.sum(axis=0)
    M_app = np.cross(pts, F3).sum(axis=0)
    R_tot = nodal.sum(axis=0)
    M_R = np.cross(pts, nodal).sum(axis=0)
    denom = max(np.linalg.norm(F_app), np.abs(nodal).sum(axis=0).max(), np.abs(F3).sum(axis=0).max(), 1e-300)
    eq = float(np.linalg.norm(R_tot + F_app) / denom)
    eq_m = float(np.linalg.norm(M_R + M_app) / (denom * max(model_size(mesh), 1e-300)))
    energy = 0.5 * float(u @ Ku)
    U3 = u.reshape(-1, 3)
    s_el = element_stress
    if stress is None:
        stress, s_el = nodal_stress(pts, mesh.cells, U3, lam, mu)
    if temperature is not None and therm and not thermal_done:
        # Thermal strain out of the elastic strain: sigma = D (eps - alpha dT I).
        stress[:, :3] -= (therm * temperature)[:, None]
        if s_el is not None:
            s_el[..., :3] -= (therm * temperature[mesh.cells])[..., None]
    return {"u": U3, "stress": stress, "von_mises": von_mises(stress), "principal": principal(stress),
            "element_stress": s_el, "reaction_nodal": nodal, "reactions": reactions,
            "applied_force": F_app, "applied_moment": M_app, "equilibrium_error": eq,
            "moment_equilibrium_error": eq_m, "strain_energy": energy, "temperature": temperature}


@dataclass
class CaseResult:
    """Results of one load case or combination (arrays as in :class:`Result`).

    ``kind`` is ``"load case"`` or ``"combination"``; ``factors`` {load case: factor} (a load
    case is itself with factor 1); ``loads`` the indices of its loads in ``case.loads``.
    """

    name: str
    kind: str
    factors: dict
    loads: tuple
    u: np.ndarray
    stress: np.ndarray
    von_mises: np.ndarray
    principal: np.ndarray
    temperature: Optional[np.ndarray]
    reactions: dict
    applied_force: np.ndarray
    applied_moment: np.ndarray
    equilibrium_error: float
    moment_equilibrium_error: float
    strain_energy: float
    points: dict = field(default_factory=dict)
    lines: dict = field(default_factory=dict)


def _view(res: Result, cr: CaseResult) -> Result:
    """A shallow copy of ``res`` carrying one load case's fields, for the probes."""
    from copy import copy

    v = copy(res)
    v.u, v.stress = cr.u, cr.stress
    return v


def _named_results(case, res, K, held, found, groups, outs, U, F, temps, therm) -> dict:
    """Every load case and combination as a :class:`CaseResult`, in order."""
    out: dict[str, CaseResult] = {}
    for j, (name, idx) in enumerate(groups):
        o = outs[j]
        out[name] = CaseResult(name, "load case", {name: 1.0}, tuple(idx), o["u"], o["stress"], o["von_mises"],
                               o["principal"], o["temperature"], o["reactions"], o["applied_force"],
                               o["applied_moment"], o["equilibrium_error"], o["moment_equilibrium_error"],
                               o["strain_energy"])
    col = {name: j for j, (name, _) in enumerate(groups)}
    for comb in case.combinations:
        w = np.zeros(len(groups))
        for name, fac in comb.factors:
            w[col[name]] += fac
        u = U @ w
        f = F @ w
        T = None
        for j, t in enumerate(temps):
            if t is not None and w[j] != 0:
                T = w[j] * t if T is None else T + w[j] * t
        # Everything is linear: the combination's stress is the factored sum of its cases' stresses.
        stress = sum(w[j] * outs[j]["stress"] for j in range(len(groups)) if w[j] != 0)
        if isinstance(stress, int):
            stress = np.zeros_like(outs[0]["stress"])
        o = _case_fields(case, res.mesh, K, held, found, u, f, T, therm, stress=stress, thermal_done=True)
        out[comb.name] = CaseResult(comb.name, "combination", dict(comb.factors),
                                    tuple(sorted({i for name, _ in comb.factors for i in groups[col[name]][1]})),
                                    o["u"], o["stress"], o["von_mises"], o["principal"], o["temperature"],
                                    o["reactions"], o["applied_force"], o["applied_moment"],
                                    o["equilibrium_error"], o["moment_equilibrium_error"], o["strain_energy"])
    for cr in out.values():
        view = _view(res, cr)
        cr.points = probe_points(case, view)
        cr.lines = sample_lines(case, view)
    return out


def _envelope(results: dict) -> dict:
    """Largest von Mises stress at every node over all load cases and combinations.

    Returns {"von_mises": (n,), "governing": (n,) index into ``names``, "names": [...]}.
    """
    names = list(results)
    stack = np.stack([results[n].von_mises for n in names])
    gov = np.argmax(stack, axis=0)
    return {"von_mises": stack[gov, np.arange(stack.shape[1])], "governing": gov, "names": names}


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


def linearize_lines(res: Result) -> dict:
    """Membrane / bending / peak split (ASME VIII-2 Part 5 linearization) of every sampled line."""
    from .post.linearize import linearize_samples

    return {name: linearize_samples(ln.s, ln.stress) for name, ln in res.lines.items()}
