"""Reactions, equilibrium, strain energy and stresses of one solved load case or combination."""
from __future__ import annotations

from typing import Optional

import numpy as np

from ..bc import split_reactions
from ..bodies import MaterialMap, assign_materials
from ..case.schema import Case
from ..mesh import BodyNodes
from ..regions import model_size
from ..result import CaseResult, Model
from .recovery import principal, von_mises

__all__ = ["case_fields", "thermal_stress_offset", "materials_of"]


def thermal_stress_offset(case: Case) -> float:
    """``(3λ + 2μ) α`` [stress / K] of the first (only) material: what a unit temperature rise takes
    off each normal stress (per material: :meth:`elastofe.bodies.MaterialMap.thermal_coefficients`)."""
    lam, mu = case.material.lame
    return (3 * lam + 2 * mu) * (case.material.expansion or 0.0)


def materials_of(case: Case, model: Model) -> MaterialMap:
    """The material of every body of the model's mesh."""
    return model.materials if model.materials is not None else assign_materials(case, model.mesh)


def case_fields(case: Case, model: Model, *, name: str, kind: str, factors: dict, loads: tuple,
                u: np.ndarray, Ku: np.ndarray, f: np.ndarray, stress: np.ndarray,
                temperature: Optional[np.ndarray], thermal_done: bool = False,
                element_stress: Optional[np.ndarray] = None,
                nodes: Optional[BodyNodes] = None) -> tuple[CaseResult, Optional[np.ndarray]]:
    """The :class:`CaseResult` of one displacement field (points and lines not yet sampled).

    Parameters
    ----------
    u : (3n,) [length] displacements; ``Ku`` (3n,) [force] the stiffness (elastic supports
        included) times ``u``; ``f`` (3n,) [force] the applied loads.
    stress : (q, 6) [stress] stress of the elastic strain of ``u`` averaged at the split nodes
        ``nodes`` (the mesh's nodes, ``q = n``, without them).
    temperature : (n,) [K] or None. Unless ``thermal_done``, the thermal part
        ``(3λ + 2μ) α ΔT`` of each body's material is taken out of the normal stresses (and of
        ``element_stress``).
    nodes : BodyNodes, optional
        The nodes split at the interfaces between bodies.

    Returns
    -------
    (CaseResult, element_stress with the thermal part taken out, or None)
    """
    mesh = model.mesh
    pts = mesh.points
    stress = np.array(stress, dtype=float, copy=True)
    if temperature is not None and not thermal_done:
        mm = materials_of(case, model)
        coef = mm.thermal_coefficients()  # (k,) per material
        if np.any(coef):
            # Thermal strain out of the elastic strain: sigma = D (eps - alpha dT I), per body.
            if nodes is None:
                c_node = mm.per_cell(coef) if mm.single else None
                if c_node is None:
                    raise ValueError("a part of several materials needs the split nodes")
                stress[:, :3] -= (c_node * temperature)[:, None]
            else:
                c_q = coef[mm.material_index_of_bodies(nodes.body)]
                stress[:, :3] -= (c_q * temperature[nodes.node])[:, None]
            if element_stress is not None:
                c_cell = coef[mm.cell_material]
                element_stress = element_stress.copy()
                element_stress[..., :3] -= (c_cell[:, None] * temperature[mesh.cells])[..., None]
    r = (Ku - f).reshape(-1, 3)
    nodal, per = split_reactions(model.held, pts, r, len(case.supports))
    for fd in model.foundations:  # an elastic support pushes back with -K_s u
        per[fd.index] = -(fd.K @ u).reshape(-1, 3)
        nodal = nodal + per[fd.index]
    reactions: dict = {}
    for i, s in enumerate(case.supports):
        Ri = per[i]
        entry = reactions.setdefault(s.label, {"force": np.zeros(3), "moment": np.zeros(3)})
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
    vm_q = von_mises(stress)
    split = nodes is not None and not nodes.identity
    node_stress = nodes.to_nodes(stress, vm_q) if split else stress
    vm = von_mises(node_stress) if split else vm_q
    cr = CaseResult(name=name, kind=kind, factors=dict(factors), loads=tuple(loads), u=u.reshape(-1, 3),
                    stress=node_stress, von_mises=vm, principal=principal(node_stress),
                    temperature=temperature, reaction_nodal=nodal, reactions=reactions,
                    applied_force=F_app, applied_moment=M_app, equilibrium_error=eq,
                    moment_equilibrium_error=eq_m, strain_energy=energy,
                    body_stress=stress if split else None)
    return cr, element_stress
