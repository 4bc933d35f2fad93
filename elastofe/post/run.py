"""Everything after the solve, behind one function that the serial pipeline and the distributed
driver both call: recovery, reactions and equilibrium, load-case combinations and their envelope,
points and lines, stress linearization, beam estimates and the plausibility checks."""
from __future__ import annotations

import time
from dataclasses import replace
from typing import Optional

import numpy as np

from ..bodies import interfaces
from ..case.schema import Case, Combination
from ..errors import ModelError
from ..fem.mixed import average_at_nodes, element_nodal_stress_for
from ..mesh import body_nodes, cell_bodies
from ..progress import Progress, quiet
from ..resources import peak_memory_mb
from ..result import BucklingModes, CaseResult, Model, Modes, Result, WholeModel
from .checks import governing_peak, near_regions, peak_away, run_checks
from .estimates import beam_estimates
from .fields import case_fields, materials_of
from .linearize import linearize_samples
from .recovery import element_quality, nodal_stresses
from .sampling import probe_points, sample_lines

__all__ = ["postprocess", "build_result", "combination_weights", "envelope", "combination_loads",
           "combined_temperature"]


def combination_weights(case: Case, groups: list[tuple[str, tuple[int, ...]]]) -> list[tuple[Combination, np.ndarray]]:
    """``[(combination, w (k,))]``: each combination's factor on every load case's column."""
    col = {name: j for j, (name, _) in enumerate(groups)}
    out = []
    for comb in case.combinations:
        w = np.zeros(len(groups))
        for name, fac in comb.factors:
            w[col[name]] += fac
        out.append((comb, w))
    return out


def combination_loads(comb, groups: list[tuple[str, tuple[int, ...]]]) -> tuple[int, ...]:
    """Indices of the loads in a combination's load cases."""
    return tuple(sorted({i for (name, fac) in comb.factors for i in dict(groups)[name]}))


def combined_temperature(temperatures: list, w: np.ndarray) -> Optional[np.ndarray]:
    """``Σ w_j T_j`` of the load cases' temperature fields ``(p,)`` [K] (None when none applies)."""
    T = None
    for j, temp in enumerate(temperatures):
        if temp is not None and w[j] != 0:
            T = w[j] * temp if T is None else T + w[j] * temp
    return T


def envelope(results: dict[str, CaseResult]) -> dict:
    """Largest von Mises stress at every node over all load cases and combinations.

    Returns {"von_mises": (n,), "governing": (n,) index into ``names``, "names": [...]}.
    """
    names = list(results)
    stack = np.stack([results[n].von_mises for n in names])
    gov = np.argmax(stack, axis=0)
    return {"von_mises": stack[gov, np.arange(stack.shape[1])], "governing": gov, "names": names}


def postprocess(case: Case, model: Model, U: np.ndarray, KU: np.ndarray, *, residual: float, backend: str,
                solver_info: Optional[dict] = None, timings: Optional[dict] = None,
                memory_estimate: Optional[float] = None, modes: Optional[Modes] = None,
                buckling: Optional[BucklingModes] = None, progress: Progress = quiet) -> Result:
    """The :class:`Result` of a solved model.

    Parameters
    ----------
    U : (3n, k) [length] displacements of each load case (columns in ``model.groups`` order).
    KU : (3n, k) [force] the stiffness matrix (elastic supports included) times ``U``.
    residual, backend, solver_info : what the solve reports.
    timings : {stage: seconds} of the stages so far; "recovery" and "post" are added.
    """
    timings = dict(timings or {})
    mesh = model.mesh
    groups = model.groups
    k = len(groups)
    materials = materials_of(case, model)
    model = replace(model, materials=materials)
    lam, mu = materials.lame()
    t = time.perf_counter()
    # Stresses are averaged within each body (nodes split at the interfaces between bodies).
    nodes = body_nodes(mesh.cells, cell_bodies(mesh), mesh.nodes)
    mixed = model.formulation == "mixed"
    if mixed:
        # The mixed element's stress takes its pressure from the element (thermal part included):
        # recovered per load case, element by element, then averaged at the (split) nodes.
        therm = materials.per_cell(materials.thermal_coefficients())
        els = [element_nodal_stress_for(mesh.points, mesh.cells, U[:, j].reshape(-1, 3), lam, mu, "mixed",
                                        delta_t=model.temperatures[j], coefficient=therm) for j in range(k)]
        stresses = np.stack([average_at_nodes(nodes.cells, e, nodes.count) for e in els])
        s_el0 = els[0]
    else:
        stresses, s_el0 = nodal_stresses(mesh.points, mesh.cells, U.T.reshape(k, -1, 3), lam, mu, nodes=nodes)
    named: dict[str, CaseResult] = {}
    first_el = None
    for j, (name, idx) in enumerate(groups):
        cr, s_el = case_fields(case, model, name=name, kind="load case", factors={name: 1.0}, loads=idx,
                               u=U[:, j], Ku=KU[:, j], f=model.F[:, j], stress=stresses[j],
                               temperature=model.temperatures[j], element_stress=s_el0 if j == 0 else None,
                               thermal_done=mixed, nodes=nodes)
        named[name] = cr
        if j == 0:
            first_el = s_el
    for comb, w in combination_weights(case, groups):
        T = combined_temperature(model.temperatures, w)
        # Everything is linear: the combination's stress is the factored sum of its cases' stresses
        # (thermal parts already taken out of each).
        stress = np.zeros_like(stresses[0])
        for j, (name, _) in enumerate(groups):
            if w[j] != 0:
                stress = stress + w[j] * named[name].stress_by_body
        loads = combination_loads(comb, groups)
        cr, _ = case_fields(case, model, name=comb.name, kind="combination", factors=dict(comb.factors),
                            loads=loads, u=U @ w, Ku=KU @ w, f=model.F @ w, stress=stress, temperature=T,
                            thermal_done=True, nodes=nodes)
        named[comb.name] = cr
    for name, cr in named.items():
        if not (np.all(np.isfinite(cr.u)) and np.all(np.isfinite(cr.stress))):
            raise ModelError(f"the solution of {'load case ' + repr(name) if name else 'the case'} holds non-finite "
                             "displacements or stresses: a load, a material value or a field is beyond "
                             "floating-point range; check the loads' magnitudes and the material's E, nu and "
                             "expansion")
    quality = element_quality(mesh.points, mesh.cells)
    timings["recovery"] = time.perf_counter() - t

    t = time.perf_counter()
    near = near_regions(case, mesh, model.region_ids, model.loads)
    found = interfaces(mesh) if (case.points or case.lines) else None  # once, for every case's samples
    for name, cr in named.items():
        named[name] = replace(cr, points=probe_points(case, mesh, cr.u, cr.stress_by_body, nodes=nodes,
                                                      materials=materials, found=found),
                              lines=sample_lines(case, mesh, cr.u, cr.stress_by_body, nodes=nodes, found=found),
                              peak_away=peak_away(near, cr.von_mises, mesh.points))
    assert first_el is not None  # there is always a first load case
    res = build_result(case, model, named, element_stress=first_el, quality=quality, near=near,
                       residual=residual, backend=backend, solver_info=solver_info,
                       memory_estimate=memory_estimate, modes=modes, buckling=buckling,
                       materials=materials, nodes=nodes)
    timings["post"] = time.perf_counter() - t
    progress("post", f"stresses, reactions, points, lines and checks ({timings['recovery'] + timings['post']:.2f} s)")
    return replace(res, timings=timings, peak_memory_mb=peak_memory_mb())


def _linearized(ln, materials) -> tuple:
    """:func:`linearize_samples` of a line, with ``materials`` (names along the line) and a ``note``
    in its info when the line crosses bodies of different materials: the membrane / bending split
    assumes one material through the wall, and the stress of bonded materials jumps at their
    interface, so the split of such a line is no membrane and bending of either."""
    lin, info = linearize_samples(ln.s, ln.stress)
    if materials is None or materials.single or ln.body is None:
        return lin, info
    ids = np.asarray(ln.body)
    inside = ids > 0
    if not inside.any():
        return lin, info
    idx = materials.material_index_of_bodies(ids[inside])
    keep = np.r_[True, idx[1:] != idx[:-1]]
    names = [materials.materials[int(k)].name for k in idx[keep]]
    if len(set(names)) > 1:
        info = dict(info, materials=names,
                    note="the line crosses " + " / ".join(f"'{n}'" for n in names) + ": membrane and bending "
                         "assume one material through the wall, and the stress jumps at a bonded interface of two "
                         "materials; read the samples of each material (the line's CSV) rather than this split")
    return lin, info


def build_result(case: Case, model: Model, named: dict[str, CaseResult], *, element_stress: np.ndarray,
                 quality: np.ndarray, near, residual: float, backend: str, solver_info: Optional[dict] = None,
                 memory_estimate: Optional[float] = None, whole: Optional[WholeModel] = None,
                 modes: Optional[Modes] = None, buckling: Optional[BucklingModes] = None,
                 materials=None, nodes=None) -> Result:
    """The :class:`Result` from the finished load cases and combinations (points, lines and peaks
    away from supports sampled): the governing peak, beam estimates and plausibility checks.

    Shared by the single-process run and the distributed one, whose ``model.mesh``, ``named``
    node arrays, ``element_stress``, ``quality`` and ``near`` cover the kept part of the mesh
    described by ``whole`` (see :class:`elastofe.result.WholeModel`). ``materials`` (the bodies'
    materials) and ``nodes`` (the nodes split at the interfaces between bodies) for a single-process run.
    """
    groups = model.groups
    labels = case.units.labels
    named = {n: replace(cr, lines={k: replace(ln, units=labels) for k, ln in cr.lines.items()})
             for n, cr in named.items()}
    first = named[groups[0][0]]
    res = Result(
        case=case, mesh=model.mesh, catalogue=model.catalogue, region_ids=model.region_ids, held=model.held,
        loads=model.loads, u=first.u, stress=first.stress, von_mises=first.von_mises,
        principal=first.principal, element_stress=element_stress, quality=quality,
        reaction_nodal=first.reaction_nodal, reactions=first.reactions, applied_force=first.applied_force,
        applied_moment=first.applied_moment, equilibrium_error=first.equilibrium_error,
        strain_energy=first.strain_energy, residual=float(residual), backend=backend,
        points=first.points, lines=first.lines, solver_info=dict(solver_info or {}),
        memory_estimate=memory_estimate, temperature=first.temperature,
        moment_equilibrium_error=first.moment_equilibrium_error,
        load_case=groups[0][0] if case.load_cases else None,
        load_cases=named if case.load_cases else {},
        envelope=envelope(named) if case.load_cases else None,
        linearized={name: _linearized(ln, materials) for name, ln in first.lines.items()},
        near=near, peak_away=first.peak_away, matches=model.matches, warnings=model.warnings,
        modes=modes, buckling=buckling, formulation=model.formulation, whole=whole,
        materials=materials, body_nodes=nodes, body_stress=first.body_stress,
    )
    res = replace(res, governing=governing_peak(res))
    if getattr(case, "beams", ()):
        res = replace(res, estimates=beam_estimates(case, res))
    return replace(res, checks=tuple(run_checks(res)))
