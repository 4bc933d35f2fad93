"""Reactions, equilibrium, strain energy and stresses of one solved load case or combination."""
from __future__ import annotations

from typing import Optional

import numpy as np

from ..bc import split_reactions
from ..bodies import MaterialMap, assign_materials
from ..case.schema import Case
from ..files import safe_name
from ..mesh import BodyNodes
from ..regions import model_size
from ..result import CaseResult, Model
from .recovery import COMPONENTS, principal, von_mises

__all__ = ["case_fields", "thermal_stress_offset", "materials_of", "reaction_sums", "add_sums",
           "finish_reactions", "point_fields"]


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
    sums = reaction_sums(case, pts, nodal, per, f, u, Ku)
    reactions, F_app, M_app, eq, eq_m, energy = finish_reactions(case, sums, model_size(mesh))
    vm_q = von_mises(stress)
    split = nodes is not None and not nodes.identity
    node_stress = nodes.to_nodes(stress, vm_q) if nodes is not None and split else stress
    vm = von_mises(node_stress) if split else vm_q
    cr = CaseResult(name=name, kind=kind, factors=dict(factors), loads=tuple(loads), u=u.reshape(-1, 3),
                    stress=node_stress, von_mises=vm, principal=principal(node_stress),
                    temperature=temperature, reaction_nodal=nodal, reactions=reactions,
                    applied_force=F_app, applied_moment=M_app, equilibrium_error=eq,
                    moment_equilibrium_error=eq_m, strain_energy=energy,
                    body_stress=stress if split else None)
    return cr, element_stress


def reaction_sums(case: Case, points: np.ndarray, nodal: np.ndarray, per: list, f: np.ndarray, u: np.ndarray,
                  Ku: np.ndarray) -> dict[str, np.ndarray]:
    """The sums behind reactions, equilibrium and strain energy, over some nodes of the mesh.

    Sums over disjoint sets of nodes add up (:func:`add_sums`), so a distributed run sums each
    rank's owned nodes and adds; :func:`finish_reactions` turns the totals into the results.

    Parameters
    ----------
    points : (p, 3) [length] of the nodes summed over.
    nodal : (p, 3) [force] reaction at each node; ``per`` one (p, 3) array per support.
    f, u, Ku : (3p,) loads [force], displacements [length] and the stiffness times ``u`` [force].

    Returns
    -------
    {"support i": (9,) force, moment about the origin, moment about ``moment_about`` (zeros when
    not given); "reaction": (3,), "reaction_moment": (3,), "reaction_abs": (3,) Σ|R|;
    "load": (3,), "load_moment": (3,), "load_abs": (3,) Σ|f|; "work": (1,) uᵀ K u}.
    """
    out: dict[str, np.ndarray] = {}
    for i, s in enumerate(case.supports):
        Ri = per[i]
        P = np.asarray(s.moment_about, dtype=float) if getattr(s, "moment_about", None) is not None else np.zeros(3)
        out[f"support {i}"] = np.concatenate([Ri.sum(axis=0), np.cross(points, Ri).sum(axis=0),
                                              np.cross(points - P, Ri).sum(axis=0)])
    F3 = f.reshape(-1, 3)
    out.update({"reaction": nodal.sum(axis=0), "reaction_moment": np.cross(points, nodal).sum(axis=0),
                "reaction_abs": np.abs(nodal).sum(axis=0), "load": F3.sum(axis=0),
                "load_moment": np.cross(points, F3).sum(axis=0), "load_abs": np.abs(F3).sum(axis=0),
                "work": np.array([float(u @ Ku)])})
    return out


def add_sums(parts: list[dict]) -> dict[str, np.ndarray]:
    """The sums of :func:`reaction_sums` over several disjoint sets of nodes."""
    return {k: np.sum([p[k] for p in parts], axis=0) for k in parts[0]}


def finish_reactions(case: Case, sums: dict, size: float):
    """Reactions per support (its region, or a point support's name), applied force and moment,
    equilibrium errors and strain energy from the totals of :func:`reaction_sums`; ``size`` [length]
    the part's bounding-box diagonal. Returns ``(reactions, F_app, M_app, eq, eq_m, energy)``."""
    reactions: dict = {}
    for i, s in enumerate(case.supports):
        v = sums[f"support {i}"]
        entry = reactions.setdefault(s.label, {"force": np.zeros(3), "moment": np.zeros(3)})
        entry["force"] = entry["force"] + v[:3]
        entry["moment"] = entry["moment"] + v[3:6]
        if getattr(s, "moment_about", None) is not None:
            entry["about"] = np.asarray(s.moment_about)
            entry["moment_about"] = entry.get("moment_about", np.zeros(3)) + v[6:9]
    F_app, M_app = sums["load"], sums["load_moment"]
    denom = max(np.linalg.norm(F_app), sums["reaction_abs"].max(), sums["load_abs"].max(), 1e-300)
    eq = float(np.linalg.norm(sums["reaction"] + F_app) / denom)
    eq_m = float(np.linalg.norm(sums["reaction_moment"] + M_app) / (denom * max(size, 1e-300)))
    return reactions, F_app, M_app, eq, eq_m, 0.5 * float(sums["work"][0])


def point_fields(first: dict, cases: dict[str, dict], envelope: Optional[tuple] = None) -> dict[str, np.ndarray]:
    """The node arrays of result.vtu (one home for their names, serial and distributed alike).

    ``first`` and each of ``cases`` {load case or combination: fields} hold ``u (p, 3)``,
    ``stress (p, 6)``, ``von_mises (p,)``, ``principal (p, 3)`` and ``temperature (p,)`` or None;
    ``envelope`` is ``(von Mises (p,), index of the governing case (p,))`` or None.
    """
    out = {"displacement": first["u"], "von_mises": first["von_mises"], "stress": first["stress"],
           "principal": first["principal"]}
    for i, c in enumerate(COMPONENTS):
        out[f"stress_{c}"] = first["stress"][:, i]
    if first["temperature"] is not None:
        out["temperature_change"] = first["temperature"]
    for cname, cr in cases.items():
        sfx = f"-{safe_name(cname)}"
        out["displacement" + sfx] = cr["u"]
        out["von_mises" + sfx] = cr["von_mises"]
        out["stress" + sfx] = cr["stress"]
        out["principal" + sfx] = cr["principal"]
        if cr["temperature"] is not None:
            out["temperature_change" + sfx] = cr["temperature"]
    if envelope is not None:
        out["von_mises-envelope"] = envelope[0]
        out["envelope_governing"] = np.asarray(envelope[1]).astype(np.int32)
    return out
