"""The stages of a run before post-processing: mesh, model, assembly, solve.

Each is a function of the previous stage's plain data; :func:`elastofe.pipeline.solve_case` runs
them in one process and :mod:`elastofe.parallel.distributed` runs the first two on rank 0 before
its own distributed assembly and solve. Both then call :func:`elastofe.post.run.postprocess`.
"""
from __future__ import annotations

import math
import time
from dataclasses import replace
from typing import Callable, Optional

import numpy as np
import scipy.sparse as sp

from . import solve as solvers
from .bc import check_restrained, foundations, held_dofs, load_vectors
from .bodies import MaterialMap, assign_materials
from .case.load import check_locking
from .case.schema import Case
from .elimination import expand_solution, reduce_system
from .errors import CaseError, ModelError
from .fem.mixed import assemble_stiffness_for, choose_formulation
from .fem.nullspace import amg_options
from .geometry import mesh_geometry
from .mesh import Mesh, check_readable, mesh_pieces, surface_catalogue
from .post.probe import locate
from .post.sampling import check_points_and_lines, line_samples, on_part_tolerance
from .progress import Progress, quiet
from .regions import describe_matches, model_size, point_node, resolve_regions, select, vector_text
from .resources import MemoryEstimate, MeshDemand, cells_estimate, check_memory, estimate, estimate_from_cells
from .result import Model

__all__ = ["build_mesh", "check_inputs_on_mesh", "load_case_groups", "prepare_model", "assemble",
           "solve_load_cases", "mesh_stage", "mesh_guard", "check_scales"]


#: A global element size more than this many times the part's bounding-box diagonal is refused as
#: a mistake (a size beyond the diagonal meshes as the diagonal does).
SIZE_OVER_PART = 100.0


def mesh_guard(order: int, backend: str = "auto", size_key: str = "mesh.size") -> Callable[[MeshDemand], None]:
    """A ``before_mesh`` check for :func:`elastofe.geometry.mesh_geometry`: raises
    :class:`ModelError` (before Gmsh meshes) when solving a mesh of that demand would not fit in
    the memory available. The expected element count counts the volume, the boundary area
    (thin parts) and every local size (:func:`elastofe.resources.cells_estimate`). A size far
    larger than the part is refused as :class:`CaseError` on ``size_key``."""
    k = 4 if order == 1 else 10

    def guard(demand: MeshDemand) -> None:
        if demand.diagonal > 0 and not demand.size <= SIZE_OVER_PART * demand.diagonal:
            raise CaseError(size_key, demand.size, f"is more than {SIZE_OVER_PART:g} times the part's size (its "
                            f"bounding-box diagonal is {demand.diagonal:.4g}); give an element size smaller "
                            "than the part")
        cells = cells_estimate(demand)
        dofs = 3 * cells * (0.18 if k == 4 else 1.56)
        est = estimate_from_cells(cells, k, solvers.choose_backend(backend, int(min(dofs, 1e15))))
        try:
            check_memory(est, alternatives=tuple(solvers.available_backends()))
        except ModelError as err:
            base = cells_estimate(replace(demand, zones=(), points=()))
            by_volume = cells_estimate(replace(demand, area=0.0, zones=(), points=()))
            notes = []
            if cells > 0 and base < 0.5 * cells:
                notes.append(f"the local sizes of mesh.refine make {100 * (1 - base / cells):.0f} % of the about "
                             f"{cells:.3g} elements expected: give them larger sizes")
            elif by_volume < 0.5 * base:
                notes.append(f"the part is thin: its boundary area, not its volume, sets the about {cells:.3g} "
                             "elements expected")
            if notes:
                raise ModelError(f"{err} Here {'; '.join(notes)}.") from None
            raise

    return guard


def build_mesh(case: Case, progress: Progress = quiet) -> Mesh:
    """Mesh the case's geometry (or read its mesh file) with its mesh parameters."""
    check_readable(case.geometry.file)  # missing, a folder or unreadable: CaseError before Gmsh starts
    refine = None
    if case.mesh.refine:
        def refine(surface_mesh: Mesh):
            cat = surface_catalogue(surface_mesh)
            return [(select(case.regions[r.region], surface_mesh, cat, f"regions.{r.region}"), r.size)
                    for r in case.mesh.refine if r.region in case.regions]

    return mesh_geometry(case.geometry.file, order=case.mesh.order, size=case.mesh.size, refine=refine,
                         before_mesh=mesh_guard(case.mesh.order, case.solver.backend),
                         length_unit=case.units.length, unit=case.geometry.unit)


def check_inputs_on_mesh(case: Case, mesh: Mesh, *, allow_locking: bool = False) -> MaterialMap:
    """Checks of the case against the mesh made, before any solving (cheap; raise :class:`CaseError`).

    A body without a material (or with two), a 4-node mesh with a Poisson's ratio near 0.5 in any
    material, named points outside the part and lines wholly outside it are refused here instead
    of after a long solve. Returns the material of every body.
    """
    materials = assign_materials(case, mesh)
    if not allow_locking:  # studies that show locking on purpose pass allow_locking=True
        for mat in case.materials:
            check_locking(mat.nu, mesh.cells.shape[1], f"{mat.key}.nu")
    check_points_and_lines(case, mesh)
    return materials


def mesh_stage(case: Case, mesh: Optional[Mesh], progress: Progress, timings: dict, *,
               allow_locking: bool = False) -> Mesh:
    """Mesh (unless ``mesh`` is given), report its size and check the case's inputs against it."""
    t0 = time.perf_counter()
    if mesh is None:
        progress("mesh", f"meshing {case.geometry.file.name} (order {case.mesh.order}) ...")
        mesh = build_mesh(case, progress)
    timings["mesh"] = time.perf_counter() - t0
    progress("mesh", f"{mesh.nodes:,} nodes, {mesh.cells.shape[0]:,} elements, {3 * mesh.nodes:,} DOF "
             f"({timings['mesh']:.2f} s)")
    source = getattr(mesh, "source", None)
    if source is not None:
        progress("geometry", source.describe())
        for w in source.warnings:
            progress("WARNING", w)
    check_inputs_on_mesh(case, mesh, allow_locking=allow_locking)
    return mesh


def load_case_groups(case: Case) -> list[tuple[str, tuple[int, ...]]]:
    """(name, load indices) of each load case; one implicit case of every load when none are named."""
    if not case.load_cases:
        return [("", tuple(range(len(case.loads))))]
    return [(lc.name, tuple(lc.loads)) for lc in case.load_cases]


#: Poisson's ratio from which the automatic solver choice prefers a direct factorisation (multigrid
#: iterations grow like sqrt(lambda/mu): 51 at 0.49, 535 at 0.4999 against 13 at 0.3, measured).
ILL_CONDITIONED_NU = 0.49


def nearly_incompressible(case: Case) -> bool:
    """Whether a material is close enough to incompressible to prefer a direct solver."""
    return max(m.nu for m in case.materials) >= ILL_CONDITIONED_NU


def free_motion_allowed(case: Case) -> bool:
    """A part may keep free rigid-body motions only in a natural-frequency run with no loads: its free
    motions are then modes at zero frequency, and there is no static solve."""
    return case.modes is not None and not case.loads and case.buckling is None


def prepare_model(case: Case, mesh: Mesh, timings: Optional[dict] = None) -> Model:
    """Regions, supports (checked against every rigid-body motion) and load vectors on a mesh."""
    t = time.perf_counter()
    catalogue = surface_catalogue(mesh)
    region_ids = resolve_regions(case, mesh, catalogue)
    for key, name in [(f"support[{i}].region", s.region) for i, s in enumerate(case.supports, 1) if s.at is None] + \
                     [(f"load[{i}].region", ld.region) for i, ld in enumerate(case.loads, 1) if hasattr(ld, "region")]:
        if name not in region_ids:
            raise CaseError(key, name, f"unknown region; defined: {', '.join(region_ids) or 'none'}")
    matches = describe_matches(case, mesh, catalogue, region_ids)
    warnings = check_region_matches(case, matches)
    materials = assign_materials(case, mesh)
    held = held_dofs(case, mesh, region_ids, catalogue)
    found = foundations(case, mesh, region_ids)
    pieces: list = []
    # A frequency run without loads may leave a part of one piece free (its rigid-body modes come out
    # at 0 Hz); separate pieces are checked as in a static run, so that a body that touches nothing
    # is named rather than left to a singular factorisation or a spread of zero-frequency modes.
    if not (free_motion_allowed(case) and not np.any(held.values)) or \
            len(mesh_pieces(mesh.points, mesh.cells, mesh.cell_body)[1]) > 1:
        try:
            pieces = check_restrained(mesh.points, held, model_size(mesh), found, mesh=mesh,
                                      length=case.units.labels["length"])
        except ModelError as err:
            if not free_motion_allowed(case):
                raise
            raise ModelError(f"{err} (a [modes] run without loads may leave a part of one piece free, not "
                             "one of several separate pieces)") from None
    # Pieces held each on its own yet lying against one another (a mesh made body by body) are
    # solved as separate parts: say so, as they are not bonded where they touch.
    L = case.units.labels["length"]
    warnings += [f"pieces {pc.id} and {j} lie against each other over {a:.4g} {L}^2 without sharing nodes there, "
                 "so they are not joined: no bond, and contact is not modelled (each piece is held on its own); "
                 "mesh the bodies conformally (shared nodes) to bond them" for pc in pieces
                 for j, a in pc.touching if j > pc.id]
    # One formulation for the whole part, chosen from the material nearest incompressibility.
    formulation = choose_formulation([m.nu for m in case.materials], mesh.cells.shape[1])
    with np.errstate(over="ignore", invalid="ignore"):  # out-of-range loads are named just below
        loads = load_vectors(case, mesh, region_ids, catalogue, materials, formulation)
    check_finite_loads(case, loads)
    check_scales(case, mesh, loads)
    warnings += loads_on_held_dofs(case, loads, held, 3 * mesh.nodes)
    warnings += point_data_off_scale(case, mesh, loads)
    warnings += repeated_entries(case)
    warnings += lines_partly_outside(case, mesh)
    groups = load_case_groups(case)
    F = np.zeros((3 * mesh.nodes, len(groups)))
    temps: list[Optional[np.ndarray]] = []
    for j, (_, idx) in enumerate(groups):
        T = None
        for i in idx:
            F[:, j] += loads[i].f
            if loads[i].temperature is not None:
                T = loads[i].temperature.copy() if T is None else T + loads[i].temperature
        temps.append(T)
    if timings is not None:
        timings["loads"] = time.perf_counter() - t
    return Model(mesh=mesh, catalogue=catalogue, region_ids=region_ids, held=held, foundations=found,
                 loads=loads, groups=groups, F=F, temperatures=temps, matches=matches, formulation=formulation,
                 warnings=tuple(warnings), materials=materials)


def match_lines(case: Case, matches: dict) -> list[str]:
    """One line per region: what it matched (surface ids, kinds, total area, axis of a cylinder)."""
    L = case.units.labels["length"]
    out = []
    for name, e in matches.items():
        if "nodes" in e:
            out.append(f"region '{name}': {e['nodes']} nodes along an edge")
            continue
        kinds = sorted({s["kind"] for s in e["surfaces"]})
        ids = ", ".join(str(s["id"]) for s in e["surfaces"][:12]) + (" ..." if len(e["surfaces"]) > 12 else "")
        text = (f"region '{name}': {len(e['surfaces'])} {'/'.join(kinds)} surface(s) [{ids}], "
                f"area {e['area']:.4g} {L}^2")
        cyl = [s for s in e["surfaces"] if s["kind"] == "cylinder"]
        if cyl:
            c = cyl[0]
            # Coordinates below 1e-9 of the point's largest (or of the radius) are round-off of the fit.
            size = max(max(abs(v) for v in c["axis_point"]), c["radius"])
            text += (f", radius {c['radius']:.4g} {L}, axis {vector_text(c['axis'], '.3g')} through "
                     f"{vector_text(c['axis_point'], '.4g', size)} {L}")
        if len(e.get("patches") or []) > 1:
            text += f", {len(e['patches'])} separate patches"
        out.append(text)
    return out


def report_model(case: Case, model: Model, progress: Progress) -> None:
    """Print what each region matched, the node each point support holds, the bodies of a part of
    several and their materials, and the warnings found while preparing the model."""
    for line in match_lines(case, model.matches):
        progress("regions", line)
    L = case.units.labels["length"]
    for i, s in enumerate(case.supports, 1):
        if s.at is not None:
            node, dist = point_node(model.mesh, s.at, s.tol, f"support[{i}].at")
            xyz = ", ".join(f"{c:.4g}" for c in model.mesh.points[node])
            progress("supports", f"point support '{s.label}' (support[{i}]) holds {s.fix} at node {node} "
                     f"({xyz}) {L}, {dist:.3g} {L} from the point given")
    mm = model.materials
    if mm is not None and len(mm.bodies) > 1:
        for b, k in zip(mm.bodies, mm.body_material):
            progress("bodies", f"body {b.id}: {mm.materials[int(k)].name}, volume {b.volume:.4g} {L}^3")
    for w in model.warnings:
        progress("WARNING", w)


def regions_used(case: Case) -> dict[str, list[str]]:
    """{region name: the keys of the supports and loads that use it}."""
    used: dict[str, list[str]] = {}
    for i, s in enumerate(case.supports, 1):
        if getattr(s, "at", None) is None and getattr(s, "region", None) is not None:  # not a point support
            used.setdefault(s.region, []).append(f"support[{i}]")
    for i, ld in enumerate(case.loads, 1):
        if getattr(ld, "region", None) is not None:
            used.setdefault(ld.region, []).append(f"load[{i}]")
    return used


def check_region_matches(case: Case, matches: dict) -> list[str]:
    """Refuse a support or load on a region that matched several separate patches or cylinders with
    different axes (unless the region says ``several = true``); such matches elsewhere are warnings."""
    used = regions_used(case)
    warnings = []
    for name, entry in matches.items():
        for w in entry.get("warnings", []):
            if name in used and name not in case.several_regions:
                raise CaseError(f"regions.{name}", [s["id"] for s in entry["surfaces"]],
                                f"{w}, and {', '.join(used[name])} would act on all of them. Narrow the selector "
                                "(an axis and a point for a cylinder, a box, or surfaces = [...]; "
                                "`elastofe check CASE` lists what each region matches), or write several = true "
                                f"in regions.{name} if all of them are meant")
            warnings.append(w)
    return warnings


#: Bounds beyond any physical load, in the case's units (the loader refuses constants beyond
#: these; fields from formulas and files are checked here, once evaluated).
MAX_TEMPERATURE_CHANGE = 1e5
MAX_NODAL_FORCE = 1e15


def check_finite_loads(case: Case, loads) -> None:
    """Refuse a load whose nodal forces or temperatures are not finite (a formula or field that
    overflows), naming it."""
    for ld in loads:
        key = f"load[{ld.index + 1}]" if ld.index >= 0 else ld.label
        if not np.all(np.isfinite(ld.f)):
            raise CaseError(key, ld.label, "gives non-finite nodal forces (a value beyond floating-point range); "
                            "check its magnitude, formula or field file")
        if ld.temperature is not None and not np.all(np.isfinite(ld.temperature)):
            raise CaseError(key, ld.label, "gives non-finite temperatures; check its formula or field file")
        if ld.temperature is not None and np.abs(ld.temperature).max(initial=0.0) > MAX_TEMPERATURE_CHANGE:
            raise CaseError(key, ld.label, f"gives a temperature change of {np.abs(ld.temperature).max():.3g} K, "
                            f"beyond any physical range (at most {MAX_TEMPERATURE_CHANGE:g} K); check its formula "
                            "or field file and its unit")
        fmax = float(np.abs(ld.f).max(initial=0.0))
        if fmax > MAX_NODAL_FORCE:
            raise CaseError(key, ld.label, f"gives nodal forces up to {fmax:.3g} {case.units.labels['force']}, "
                            f"beyond any physical range (at most {MAX_NODAL_FORCE:g}); check its magnitude, "
                            "formula or field file and its unit")


#: Share of a load's force on held DOFs above which it is reported (it goes into the reaction).
HELD_LOAD_SHARE = 0.5


def loads_on_held_dofs(case: Case, loads, held, ndof: int) -> list[str]:
    """Warnings for surface loads whose forces land (mostly) on held DOFs: they go straight into the
    reactions and do not load the part."""
    T = held.transform(ndof)
    out = []
    for ld in loads:
        if ld.temperature is not None or ld.kind in ("gravity", "temperature"):
            continue
        f = T @ ld.f if T is not None else ld.f
        total = float(np.linalg.norm(f))
        if total == 0.0:
            continue
        share = float(np.linalg.norm(f[held.dofs])) / total
        if share > HELD_LOAD_SHARE:
            what = "entirely" if share > 0.999 else f"{100 * share:.0f} %"
            out.append(f"{ld.label} acts {what} on held degrees of freedom: that part goes straight into the "
                       "reaction and does not load the part (is the load on a supported surface?)")
    return out


#: A temperature file whose points span more than this factor more (or less) than the part is
#: likely written in another length unit (25.4 for inches, 1000 for metres against mm).
POINT_DATA_SPAN_FACTOR = 5.0


def point_data_off_scale(case: Case, mesh: Mesh, loads) -> list[str]:
    """Warnings for temperature files whose points span a very different size than the part: their
    coordinates are probably in another length unit, and the nodes would take the values of
    far-away points."""
    out = []
    size = model_size(mesh)
    L = case.units.labels["length"]
    for ld in loads:
        span = ld.info.get("file_points_span")
        if span is None or size <= 0:
            continue
        if span > POINT_DATA_SPAN_FACTOR * size or span < size / POINT_DATA_SPAN_FACTOR:
            name = getattr(case.loads[ld.index], "file", None) if 0 <= ld.index < len(case.loads) else None
            what = f"the points of {name.name}" if name is not None else "the file's points"
            out.append(f"{ld.label}: {what} span {span:.4g} {L} (bounding-box diagonal) against the part's "
                       f"{size:.4g} {L}: are its coordinates in another unit? Name it in a CSV header "
                       "(x [mm], y [mm], z [mm]) or write the file in the case's length unit")
    return out


def _same(a, b) -> bool:
    """Equal entries of a case; a case built in code may hold numpy arrays, whose ``==`` is no bool."""
    try:
        return bool(a == b)
    except (ValueError, TypeError):
        return False


def repeated_entries(case: Case) -> list[str]:
    """Warnings for a [[load]] repeated exactly in the same load case (its force counts twice) and a
    [[support]] repeated exactly (a copy left in by mistake; it holds nothing more)."""
    out = []
    for name, idx in load_case_groups(case):
        for a, i in enumerate(idx):
            for j in idx[a + 1:]:
                if _same(case.loads[i], case.loads[j]):
                    where = f" in load case '{name}'" if name else ""
                    out.append(f"load[{j + 1}] repeats load[{i + 1}] exactly{where}: both are applied, so that "
                               "load counts twice (give one load with the total if that is meant, else remove one)")
    for a, s in enumerate(case.supports):
        for b in range(a + 1, len(case.supports)):
            if _same(case.supports[b], s):
                out.append(f"support[{b + 1}] repeats support[{a + 1}] exactly: remove one")
    return out


def lines_partly_outside(case: Case, mesh: Mesh) -> list[str]:
    """Warnings for lines with samples outside the part (they are written as empty values)."""
    out = []
    tol = on_part_tolerance(mesh)
    for i, ln in enumerate(case.lines, 1):
        _, xyz = line_samples(ln)
        outside = int((locate(mesh.points, mesh.cells, xyz).outside > tol).sum())
        if 0 < outside < len(xyz):
            out.append(f"line[{i}] '{ln.name}': {outside} of {len(xyz)} samples lie outside the part and are "
                       "left empty in its CSV (NaN in summary.json)")
    return out


#: The range of stiffness (shear modulus times the part's size [force/length]), nodal forces
#: [force] and displacements [length] a solve is allowed to meet. Squares of these (norms,
#: energies) must stay inside floating point (about 1e308), and nothing physical comes near them.
STIFFNESS_RANGE = (1e-150, 1e150)
FORCE_MAX = 1e150
DISPLACEMENT_MAX = 1e120
FACTOR_MAX = 1e30
#: Largest lambda/mu (nu = 0.4999995): beyond it the condition number of K (about lambda/mu times
#: the mesh's own) leaves double precision too few digits for the residual check (common practice:
#: nearly incompressible solids are modelled with nu of 0.49-0.4999 or a mixed formulation).
LAME_RATIO_MAX = 1e6


def _load_key(case: Case, index: int) -> tuple[str, object]:
    """The case-file key (and value) behind the load ``case.loads[index]``'s magnitude."""
    ld = case.loads[index]
    k = f"load[{index + 1}]"
    kind = type(ld).__name__
    if kind == "PressureLoad":
        return f"{k}.pressure", ld.pressure
    if kind == "GravityLoad":
        return "material.density", case.material.density
    if kind == "TemperatureLoad":
        return "material.expansion", case.material.expansion
    if kind == "CouplingLoad" and not any(ld.force) and any(ld.moment):
        return f"{k}.moment", list(ld.moment)
    return f"{k}.force", list(getattr(ld, "force", ()))


def check_scales(case: Case, mesh: Mesh, loads: list) -> None:
    """Refuse (:class:`CaseError` naming the key) a stiffness, load or combination factor so far out
    of range that the solve would overflow or underflow floating point, instead of a "singular"
    system and numpy warnings after the solve."""
    L = model_size(mesh)
    lam, mu = case.material.lame
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        stiff = abs(mu) * L
    lo, hi = STIFFNESS_RANGE
    if not (lo <= stiff <= hi):
        raise CaseError("material.E", case.material.E,
                        f"gives a stiffness of about {stiff:.3g} (shear modulus times the part's size, {L:.4g}), "
                        f"outside the range a solve can represent ({lo:g} to {hi:g}); check the value and its unit")
    for ld in loads:
        if ld.index < 0 or not ld.f.size:
            continue
        with np.errstate(over="ignore", invalid="ignore"):
            fmax = float(np.max(np.abs(ld.f)))
        key, value = _load_key(case, ld.index)
        if not (fmax <= FORCE_MAX):
            raise CaseError(key, value, f"makes nodal forces of {fmax:.3g}, beyond the range a solve can represent "
                            f"(at most {FORCE_MAX:g} {case.units.labels['force']}); check the value and its unit")
        u = fmax / stiff
        if not (u <= DISPLACEMENT_MAX):
            # The culprit is whichever of the nominal stress (force over the part's size squared)
            # and E lies further from 1 in orders of magnitude (unit choices shift both by far less).
            stress = fmax / L ** 2 if L > 0 else fmax
            blame_e = abs(math.log10(abs(case.material.E))) > abs(math.log10(max(stress, 1e-300)))
            what = f"would displace the part by about {u:.3g} {case.units.labels['length']} (it is {L:.4g} across) " \
                   "under its loads, beyond the range a solve can represent; check the value and its unit"
            if blame_e:
                raise CaseError("material.E", case.material.E, what)
            raise CaseError(key, value, f"with material.E = {case.material.E:g} {what}")
    if not (lam <= LAME_RATIO_MAX * mu):
        nu_max = LAME_RATIO_MAX / (2.0 * (LAME_RATIO_MAX + 1.0))
        raise CaseError("material.nu", case.material.nu, f"makes the material so nearly incompressible (lambda/mu = "
                        f"{lam / mu:.3g}) that the stiffness matrix cannot be solved accurately; at most "
                        f"{nu_max:.7f} (rubber-like solids: 0.49 to 0.4999 with mesh.order = 2)")
    for i, comb in enumerate(case.combinations, 1):
        for lc, factor in comb.factors:
            if not (abs(factor) <= FACTOR_MAX):
                raise CaseError(f"combination[{i}].factors.{lc}", factor, f"must be at most {FACTOR_MAX:g} in size "
                                "(a load factor, typically 0 to 2)")


def assemble(case: Case, model: Model, progress: Progress = quiet,
             timings: Optional[dict] = None) -> tuple[sp.csr_matrix, MemoryEstimate]:
    """The stiffness matrix (elastic supports included) after the memory check."""
    t = time.perf_counter()
    mesh = model.mesh
    ndof = 3 * mesh.nodes
    backend = solvers.choose_backend(case.solver.backend, ndof - model.held.dofs.size,
                                     ill_conditioned=nearly_incompressible(case))
    mem = estimate(ndof, mesh.cells.shape[0], mesh.cells.shape[1], backend)
    check_memory(mem, alternatives=tuple(solvers.available_backends()))
    lam, mu = (model.materials or assign_materials(case, mesh)).lame()  # scalars for one material
    try:
        K = assemble_stiffness_for(mesh.points, mesh.cells, lam, mu, model.formulation)
    except ValueError as err:
        raise ModelError(f"assembly failed: {err}") from None
    for fd in model.foundations:
        K = K + fd.K
    dt = time.perf_counter() - t
    if timings is not None:
        timings["assembly"] = dt
    form = " (mixed displacement-pressure element: nearly incompressible material)" \
        if model.formulation == "mixed" else ""
    progress("assembly", f"stiffness {ndof:,} x {ndof:,}, {K.nnz:,} non-zeros{form} ({dt:.2f} s)")
    return K, mem


def solve_load_cases(case: Case, K: sp.csr_matrix, F: np.ndarray, held, progress: Progress = quiet,
                     mesh: Optional[Mesh] = None) -> tuple[np.ndarray, float, str, dict]:
    """Solve ``K u = f`` for every column of ``F (3n, k)`` with one factorisation.

    Held components (possibly in rotated nodal frames) are eliminated; the factorisation of the
    reduced matrix is reused for every right-hand side. ``mesh`` lets the multigrid backend use
    the rigid-body modes and the corner-node coarse level (built here, passed to the solver as
    arrays). Returns ``(U (3n, k), largest relative residual, backend name, backend info)``.
    """
    ndof = K.shape[0]
    k = F.shape[1]
    if not np.any(F) and not np.any(held.values):
        # No load and nothing prescribed (a natural-frequency run): the answer is zero, and the
        # matrix may be singular (a free part), so nothing is solved.
        progress("solve", "no loads and no prescribed displacements: the static displacements are zero")
        return np.zeros((ndof, k)), 0.0, "none", {}
    red = reduce_system(K, F, held.dofs, held.values, held.transform(ndof))
    nfree = int(red.free.sum())
    # Several load cases favour a direct factorisation (reused for all of them): nrhs counts.
    backend = solvers.choose_backend(case.solver.backend, nfree, nrhs=k, ill_conditioned=nearly_incompressible(case))
    progress("solve", f"solving {nfree:,} equations with {backend}{f' for {k} load cases' if k > 1 else ''} ...")
    options: dict = {}
    if backend == "amg" and mesh is not None:
        options = amg_options(mesh.points, mesh.cells, red.free, transform=red.T)
    if backend == "amg":
        options["progress"] = progress
    # solvers.solve takes all right-hand sides at once (one factorisation) and checks residuals.
    sol = solvers.solve(red.K, red.rhs[:, 0] if k == 1 else red.rhs, backend=backend,
                        tol=case.solver.tol, maxiter=case.solver.maxiter, **options)
    return expand_solution(red, sol.u), sol.residual, sol.backend, dict(sol.info)
