"""Plausibility checks run on every result: each gives pass / warn / fail (or skip) and says why.

The checks read a :class:`~elastofe.pipeline.Result` only (they never reach into the stages) and
return plain data, so :mod:`elastofe.output` can put them under ``checks`` in ``summary.json``.
Every threshold is a module constant with the reason it was chosen beside it; they are rules of
thumb of the trade ("common practice"), not limits from a code or standard.
"""
from __future__ import annotations

import math
from dataclasses import asdict
from typing import Optional

import numpy as np
from scipy.spatial import cKDTree

from ..bodies import MaterialMap, assign_materials
from ..case.schema import Case
from ..fem.assembly import gradients
from ..fem.elements import element_for
from ..fem.mixed import element_nodal_stress_for
from ..fem.quadrature import tet_rule
from ..fem.surface import face_normals
from ..mesh import BodyNodes, Mesh, body_nodes
from ..regions import model_size, point_node
from ..result import STATUSES, Check, NearRegions, Result
from ..units import registry
from .recovery import von_mises

# Equilibrium: a direct solve balances to round-off (1e-10 or better here); 1e-6 leaves room for
# iterative solvers, 1e-3 is where reactions can no longer be trusted to three figures.
EQUILIBRIUM_PASS = 1e-6
EQUILIBRIUM_WARN = 1e-3
# Small displacement: max |u| against the bounding-box diagonal. Geometric non-linearity grows
# roughly with the square of the rotation, so 2 % keeps it well under 1 % (common practice).
SMALL_DISP_PASS = 0.02
SMALL_DISP_WARN = 0.10
# Engineering solids: Young's modulus from soft elastomers (~0.1 MPa) to diamond (~1.2e12 Pa),
# density from light foams (~10 kg/m^3) to osmium (~22,600 kg/m^3) (from memory, rounded out).
MODULUS_RANGE_PA = (1e5, 1.2e12)
MODULUS_STIFF_PA = 1e9        # below this only polymers, elastomers and foams
DENSITY_RANGE_SI = (10.0, 23000.0)
DENSE_SI = 2500.0             # above this only metals and ceramics, all with E > ~10 GPa (from memory)
METAL_MIN_MODULUS_PA = 5e9
# Peak near an idealised support or load: within this many local element sizes of the region.
NEAR_REGION_ELEMENTS = 1.0
AWAY_REGION_ELEMENTS = 2.0
# ... and it counts as concentrated there when the peak away from those regions is lower than this share.
CONCENTRATED = 0.95
# Averaged against unaveraged von Mises at the peak node: a spread over 10 % of the averaged
# value says the mesh there is too coarse for the gradient (common practice).
JUMP_WARN = 0.10
# Boundary edges whose face normals differ by more than this are sharp (a CAD edge, not the
# facets of a curved surface, which differ by a few degrees per element) (common practice).
SHARP_EDGE_DEG = 30.0
# Element shape: aspect ratio (1 for a regular tetrahedron) over 10 and Jacobian ratio
# (min/max det J over the element, 1 for a straight element) under 0.1 count as poor (common practice).
ASPECT_POOR = 10.0
JACOBIAN_POOR = 0.1
POOR_SHARE_FAIL = 0.05
# Near incompressibility: 4-node tetrahedra lock well before 0.5 (common practice); 10-node ones
# hold out longer but also lock as nu -> 0.5.
NU_TET4_WARN = 0.45
NU_TET4_FAIL = 0.49
NU_TET10_WARN = 0.499


# ----------------------------------------------------------------------------- element shape
def aspect_ratio(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Aspect ratio of each element's corner tetrahedron ``(m,)``, 1 for a regular one.

    Longest edge over ``2 sqrt(6)`` times the inradius (inradius = 3 V / total face area); a
    regular tetrahedron of edge a has inradius a / (2 sqrt 6), hence 1 (common practice).
    Degenerate elements get ``inf``.
    """
    X = points[cells[:, :4]]
    e = np.array([(0, 1), (1, 2), (2, 0), (0, 3), (1, 3), (2, 3)])
    lmax = np.linalg.norm(X[:, e[:, 0]] - X[:, e[:, 1]], axis=2).max(axis=1)
    V = np.abs(np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0])) / 6.0
    f = np.array([(0, 1, 2), (0, 1, 3), (1, 2, 3), (0, 2, 3)])
    A = 0.5 * np.linalg.norm(np.cross(X[:, f[:, 1]] - X[:, f[:, 0]], X[:, f[:, 2]] - X[:, f[:, 0]]), axis=2).sum(axis=1)
    r = 3.0 * V / np.where(A > 0, A, 1.0)
    with np.errstate(divide="ignore"):
        return np.where(r > 0, lmax / (2.0 * np.sqrt(6.0) * np.where(r > 0, r, 1.0)), np.inf)


def jacobian_ratio(points: np.ndarray, cells: np.ndarray, block: int = 50000) -> np.ndarray:
    """Jacobian ratio of each element ``(m,)``: min over max of det J at its nodes and 4 interior points.

    1 for straight-sided elements (det J is constant); below 1 for curved 10-node elements; zero or
    negative where the element folds over somewhere.
    """
    el = element_for(cells.shape[1])
    if el.nodes == 4:
        return np.ones(cells.shape[0])
    xi = np.vstack([el.ref_nodes, tet_rule(2).points])
    out = np.empty(cells.shape[0])
    for s in range(0, cells.shape[0], block):
        det = gradients(points[cells[s:s + block]], el, xi)[1]  # (e, q)
        mx = det.max(axis=1)
        out[s:s + block] = det.min(axis=1) / np.where(mx > 0, mx, 1.0)
    return out


def local_size(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Mean corner-edge length of the elements around each node ``(n,)`` [length]."""
    X = points[cells[:, :4]]
    e = np.array([(0, 1), (1, 2), (2, 0), (0, 3), (1, 3), (2, 3)])
    h_el = np.linalg.norm(X[:, e[:, 0]] - X[:, e[:, 1]], axis=2).mean(axis=1)  # (m,)
    flat = cells.ravel()
    cnt = np.bincount(flat, minlength=points.shape[0]).astype(float)
    h = np.bincount(flat, weights=np.repeat(h_el, cells.shape[1]), minlength=points.shape[0])
    return h / np.maximum(cnt, 1.0)


# ----------------------------------------------------------------------------- the checks
def check_equilibrium(res: Result) -> Check:
    """The worst equilibrium error over every load case and combination (each right-hand side is
    solved on its own: an iterative solve may settle for one and not another)."""
    err = float(res.equilibrium_error)
    where = ""
    for name, cr in (getattr(res, "load_cases", None) or {}).items():
        e = getattr(cr, "equilibrium_error", None)
        if e is not None and math.isfinite(float(e)) and float(e) > err:
            err, where = float(e), f" in '{name}'"
    if err <= EQUILIBRIUM_PASS:
        st, why = "pass", f"reactions balance the applied loads to {err:.1e} (relative){where}"
    elif err <= EQUILIBRIUM_WARN:
        st, why = "warn", (f"reactions balance the applied loads only to {err:.1e} (relative){where}; "
                           "a direct solve reaches round-off, so check the solver settings")
    else:
        st, why = "fail", (f"reactions and applied loads differ by {err:.1e} of the load{where}: the solution "
                           "is not in equilibrium and its stresses cannot be trusted")
    return Check("equilibrium", st, why, err, EQUILIBRIUM_PASS)


def check_small_displacement(res: Result) -> Check:
    """The largest displacement over every load case and combination (as the yield check takes the
    governing peak over all of them) against the part size."""
    L = model_size(res.mesh)
    umax = float(np.linalg.norm(res.u, axis=1).max())
    where = ""
    for name, cr in (getattr(res, "load_cases", None) or {}).items():
        u = float(np.linalg.norm(cr.u, axis=1).max())
        if u > umax:
            umax, where = u, f" (in '{name}')"
    ratio = umax / L
    lab = res.case.units.labels["length"]
    base = f"max displacement {umax:.4g} {lab}{where} is {100 * ratio:.3g} % of the part size ({L:.4g} {lab})"
    if ratio <= SMALL_DISP_PASS:
        st, why = "pass", base + f"; small-displacement theory holds (limit {100 * SMALL_DISP_PASS:g} %)"
    elif ratio <= SMALL_DISP_WARN:
        st, why = "warn", base + "; geometric non-linearity may matter: confirm with a large-displacement analysis"
    else:
        st, why = "fail", base + ("; far beyond small-displacement theory: the linear result is not valid "
                                  "(or a load or modulus is wrong by a large factor)")
    return Check("small_displacement", st, why, ratio, SMALL_DISP_PASS, {"max_displacement": umax, "part_size": L})


def _region_nodes(mesh: Mesh, region_ids: dict, names) -> np.ndarray:
    ids = [i for n in names for i in region_ids.get(n, [])]
    if not ids:
        return np.zeros(0, dtype=np.int64)
    return np.unique(mesh.surface_faces(ids))


def idealised_regions(case: Case) -> dict[str, str]:
    """Support and load regions (a point support by its name): {name: 'support' | 'load'}."""
    out: dict[str, str] = {}
    for s in case.supports:
        out.setdefault(s.label, "support")
    for ld in case.loads:
        r = getattr(ld, "region", None)
        if r is not None:
            out.setdefault(r, "load")
    return out


#: Of a hole loaded only by pin bearing, the nodes where the bearing pressure is at least this
#: fraction of its peak (within ±60° of the load direction) count as the idealised load. The edge of
#: the net section, at 90°, carries no bearing pressure: its stress concentration is the part's own
#: (the peak of a pin-loaded lug; Peterson's stress concentration factors, lugs), not an artefact
#: of the assumed pressure, so it is not left out of the governing peak as "next to the load".
BEARING_NEAR_COS = 0.5


def _bearing_arcs(case: Case, loads) -> dict[str, list]:
    """{region: [(axis (3,), axis point (3,), force (3,)), ...]} of the pin-bearing loads."""
    out: dict[str, list] = {}
    for ld in loads or ():
        if getattr(ld, "kind", "") == "bearing" and 0 <= ld.index < len(case.loads) and "axis" in ld.info:
            out.setdefault(case.loads[ld.index].region, []).append(
                (np.asarray(ld.info["axis"], dtype=float), np.asarray(ld.info["axis_point"], dtype=float),
                 np.asarray(ld.force, dtype=float)))
    return out


def near_regions(case: Case, mesh: Mesh, region_ids: dict, loads=None) -> NearRegions:
    """Distance of every node to the nearest support or load region node (a point support's node),
    and which region. With the run's applied ``loads``, a region loaded only by pin bearing counts
    by its loaded arc (:data:`BEARING_NEAR_COS`), not by the whole hole."""
    regs = idealised_regions(case)
    names = list(regs)
    n = mesh.nodes
    best = np.full(n, np.inf)
    which = np.full(n, -1)
    points = {s.label: s for s in case.supports if s.at is not None}
    arcs = _bearing_arcs(case, loads)
    shared = {s.label for s in case.supports} | {getattr(ld, "region", None) for ld in case.loads
                                                  if not (getattr(ld, "distribution", "") == "bearing")}
    for k, name in enumerate(names):
        if name in points:
            s = points[name]
            nodes = np.array([point_node(mesh, s.at, s.tol, f"support[{case.supports.index(s) + 1}].at")[0]])
        else:
            nodes = _region_nodes(mesh, region_ids, [name])
            if name in arcs and name not in shared and nodes.size:
                x = mesh.points[nodes]
                keep = np.zeros(nodes.size, dtype=bool)
                for axis, p0, F in arcs[name]:    # one per pin-bearing force on the hole (few)
                    a = axis / np.linalg.norm(axis)
                    r = (x - p0) - np.outer((x - p0) @ a, a)
                    d = F - (F @ a) * a
                    cos = (r @ d) / np.maximum(np.linalg.norm(r, axis=1) * np.linalg.norm(d), 1e-300)
                    keep |= cos >= BEARING_NEAR_COS
                nodes = nodes[keep]
        if nodes.size == 0:
            continue
        d, _ = cKDTree(mesh.points[nodes]).query(mesh.points)
        closer = d < best
        best[closer] = d[closer]
        which[closer] = k
    return NearRegions(distance=best, which=which, names=names, kinds=regs,
                       local_size=local_size(mesh.points, mesh.cells))


def _near(res: Result) -> NearRegions:
    near = getattr(res, "near", None)
    return near if near is not None else near_regions(res.case, res.mesh, res.region_ids, getattr(res, "loads", None))


def peak_away(near: NearRegions, vm: np.ndarray, points: np.ndarray) -> dict:
    """Max of ``vm (n,)`` over nodes more than two local element sizes from every support and load
    region: ``{"value", "at", "nodes"}`` (value None when no node lies that far)."""
    away = near.distance > AWAY_REGION_ELEMENTS * near.local_size
    if not away.any():
        return {"value": None, "at": None, "nodes": 0}
    idx = np.flatnonzero(away)
    i = idx[int(np.argmax(vm[idx]))]
    return {"value": float(vm[i]), "at": points[i].tolist(), "nodes": int(away.sum()), "node": int(i)}


def peak_away_from_regions(res: Result) -> dict:
    """Max von Mises over nodes more than two local element sizes from every support and load region."""
    found = getattr(res, "peak_away", None)
    if found:
        return found
    return peak_away(_near(res), res.von_mises, res.mesh.points)


def _case_fields_list(res: Result) -> list[tuple[Optional[str], np.ndarray]]:
    """(load case or combination name, von Mises (n,)) of every case of the run (the run itself
    when it names none)."""
    cases = getattr(res, "load_cases", None) or {}
    if cases:
        return [(name, cr.von_mises) for name, cr in cases.items()]
    return [(None, res.von_mises)]


def _split_fields_list(res: Result) -> list[tuple[Optional[str], np.ndarray]]:
    """As :func:`_case_fields_list`, von Mises at the split nodes ``(q,)`` (averaged within each body)."""
    cases = getattr(res, "load_cases", None) or {}
    if cases:
        return [(name, von_mises(cr.stress_by_body)) for name, cr in cases.items()]
    body = getattr(res, "body_stress", None)
    return [(None, res.von_mises if body is None else von_mises(body))]


def _body_nodes(res: Result) -> BodyNodes:
    nodes = getattr(res, "body_nodes", None)
    if nodes is not None and (nodes.identity or getattr(res, "body_stress", None) is not None):
        return nodes
    return body_nodes(res.mesh.cells, None, res.mesh.nodes)  # stresses not split: the mesh's own nodes


def _materials(res: Result) -> MaterialMap:
    mm = getattr(res, "materials", None)
    return mm if mm is not None else assign_materials(res.case, res.mesh)


def _peak_of(vm: np.ndarray, node: np.ndarray, near: NearRegions, pts: np.ndarray, lab: str) -> dict:
    """The governing peak of von Mises ``vm (p,)`` at the mesh nodes ``node (p,)``: overall, or away
    from supports and loads when the overall peak lies next to one (see :func:`governing_peak`)."""
    iv = int(np.argmax(vm))
    nv = int(node[iv])
    overall = {"value": float(vm[iv]), "at": pts[nv].tolist(), "node": nv}
    k = int(near.which[nv])
    is_near = k >= 0 and near.distance[nv] <= NEAR_REGION_ELEMENTS * near.local_size[nv]
    overall["next_to"] = near.names[k] if is_near else None
    away_mask = near.distance[node] > AWAY_REGION_ELEMENTS * near.local_size[node]
    if away_mask.any():
        idx = np.flatnonzero(away_mask)
        ia = idx[int(np.argmax(vm[idx]))]
        away = {"value": float(vm[ia]), "at": pts[node[ia]].tolist(), "nodes": int(np.unique(node[idx]).size),
                "node": int(node[ia])}
    else:
        away = {"value": None, "at": None, "nodes": 0}
    if is_near and away["value"] is not None:
        kind = near.kinds[near.names[k]]
        gov = {"value": away["value"], "at": away["at"], "basis": "away",
               "why": (f"the overall peak {overall['value']:.4g} {lab} lies on or next to {kind} region "
                       f"'{near.names[k]}', where the idealised {kind} concentrates stress (its value depends "
                       f"on the mesh); more than two elements away from every support and load the peak is "
                       f"{away['value']:.4g} {lab}, which governs")}
    elif is_near:
        gov = {"value": overall["value"], "at": overall["at"], "basis": "overall",
               "why": ("every node lies within two elements of a support or load, so the overall peak is used; "
                       "it may be an artefact of the idealised supports or loads: refine the mesh")}
    else:
        gov = {"value": overall["value"], "at": overall["at"], "basis": "overall",
               "why": "the overall peak lies away from every support and load, so it governs"}
    gov.update({"overall": overall, "away": away})
    return gov


def governing_peak(res: Result) -> dict:
    """The von Mises peak that governs the part, over every load case and combination, and for a
    part of several materials over every material, judged against each material's own yield
    strength.

    An idealised support or load (a face held rigidly, a force on a small face) concentrates stress
    in the elements next to it; that peak depends on the idealisation and the mesh, not on the part.
    So when the overall peak lies on or next to a support or load region and some nodes lie more
    than two element sizes from every such region, the peak away from them governs; otherwise the
    overall peak does. Stresses are averaged within each body, and each material's peak is taken
    over its own bodies; the peak that governs is the one of the largest utilisation (von Mises
    over the material's yield strength) among the materials that have one, else the largest.

    Returns ``{"value", "at", "basis": "away" | "overall", "load_case", "why", "overall": {...},
    "away": {...}, "material", "yield_strength", "utilisation", "by_material": {name: {...}}}``
    (values in the case's stress unit; "load_case" None when the case names none; "utilisation"
    None without a yield strength).
    """
    near = _near(res)
    lab = res.case.units.labels["stress"]
    pts = res.mesh.points
    nodes = _body_nodes(res)
    mm = _materials(res)
    mat_q = mm.material_index_of_bodies(nodes.body) if not mm.single else np.zeros(nodes.count, dtype=np.int64)
    by_material: dict[str, dict] = {}
    for i, mat in enumerate(mm.materials):
        sel = np.flatnonzero(mat_q == i)
        if sel.size == 0:
            continue
        best = None
        for name, vm in _split_fields_list(res):
            gov = _peak_of(vm[sel], nodes.node[sel], near, pts, lab)
            gov["load_case"] = name
            if best is None or gov["value"] > best["value"]:
                best = gov
        assert best is not None
        fy = mat.yield_strength
        best.update(material=mat.name, yield_strength=fy,
                    utilisation=(best["value"] / fy) if fy else None)
        if best["load_case"] is not None:
            best["why"] += f" (load case or combination '{best['load_case']}' governs)"
        by_material[mat.name] = best
    judged = [g for g in by_material.values() if g["utilisation"] is not None]
    top = max(judged, key=lambda g: g["utilisation"]) if judged else max(by_material.values(), key=lambda g: g["value"])
    out = dict(top)
    if len(by_material) > 1:
        out["why"] = f"in material '{top['material']}': " + out["why"]
        out["by_material"] = by_material
    return out


def check_yield(res: Result) -> Check:
    lab = res.case.units.labels["stress"]
    gov = getattr(res, "governing", None) or governing_peak(res)
    per = gov.get("by_material") or {gov.get("material", res.case.material.name): gov}
    several = len(per) > 1
    # Yield strengths from the case itself (a study may judge one run against another strength).
    strength = {m.name: m.yield_strength for m in res.case.materials}
    if not several:
        strength = {name: res.case.material.yield_strength for name in per}
    judged = {name: dict(g, yield_strength=strength.get(name)) for name, g in per.items() if strength.get(name)}
    unjudged = [name for name in per if name not in judged]
    if not judged:
        return Check("yield", "skip", "cannot judge: no material.yield_strength given, so stress was not "
                     "compared with yield" if not several else "cannot judge: no material has a yield_strength, "
                     "so stress was not compared with yield")
    cases = _split_fields_list(res)
    nodes = _body_nodes(res)
    mm = _materials(res)
    mat_q = mm.material_index_of_bodies(nodes.body) if not mm.single else np.zeros(nodes.count, dtype=np.int64)
    names = [m.name for m in mm.materials]
    results = []
    for name, g in judged.items():
        fy = g["yield_strength"]
        sel = mat_q == names.index(name)
        value, overall = g["value"], g["overall"]["value"]
        # The governing case is the one of the largest governing value; another case's peak next to a
        # support or load may still be the largest and exceed yield there: judge the largest of all.
        overall_case = g["load_case"]
        if sel.any():
            for case_name, vm in cases:
                peak = float(vm[sel].max())
                if peak > overall:
                    overall, overall_case = peak, case_name
        ratio = value / fy
        whole = getattr(res, "whole", None)  # a distributed run counts every node across its ranks
        above = whole.nodes_above_yield if whole is not None else \
            sum(int(np.unique(nodes.node[sel][vm[sel] > fy]).size) for _, vm in cases)
        where = f" in '{g['load_case']}'" if g["load_case"] is not None else ""
        basis = "away from supports and loads" if g["basis"] == "away" else "overall"
        who = f"in material '{name}' " if several else ""
        if value < fy and overall < fy:
            st = "pass"
            margin = 100 * (fy / value - 1) if value > 0 else float("inf")
            why = (f"the governing von Mises {who}({basis}{where}) {value:.4g} {lab} is {100 * ratio:.3g} % of the "
                   f"yield strength {fy:.4g} {lab} (margin {margin:.3g} %)")
        elif value < fy:
            st = "warn"
            why = (f"the governing von Mises {who}({basis}{where}) {value:.4g} {lab} is {100 * ratio:.3g} % of the "
                   f"yield strength {fy:.4g} {lab}, but next to a support or load the peak reaches {overall:.4g} "
                   f"{lab}{'' if overall_case is None else f' in {overall_case!r}'}, above yield: local "
                   "yielding there if the idealised support or load is real; the linear "
                   "result is not valid at that spot")
        else:
            st = "fail"
            why = (f"the governing von Mises {who}({basis}{where}) {value:.4g} {lab} is {ratio:.3g} times the yield "
                   f"strength {fy:.4g} {lab}: the material yields and a linear-elastic analysis does not describe "
                   "it there")
        det = {"yield_strength": fy, "governing_von_mises": value, "basis": g["basis"], "load_case": g["load_case"],
               "utilisation": ratio, "margin": fy / value - 1.0 if value > 0 else None, "max_von_mises": overall,
               "max_von_mises_load_case": overall_case,
               "max_von_mises_away_from_supports_and_loads": g["away"]["value"], "nodes_above_yield": above}
        results.append((STATUSES.index(st), ratio, name, st, why, det))
    results.sort(key=lambda r: (r[0], r[1]), reverse=True)
    _, ratio, name, st, why, det = results[0]
    if several:
        others = [f"'{r[2]}' {100 * r[1]:.3g} %" for r in results[1:]]
        if others:
            why += "; utilisation of the other materials: " + ", ".join(others)
        if unjudged:
            why += f"; not judged (no yield_strength): {', '.join(repr(u) for u in unjudged)}"
            if st == "pass":  # a pass for some materials says nothing of the others
                st = "warn"
                why = (f"only partly judged: {', '.join(repr(u) for u in unjudged)} "
                       f"{'has' if len(unjudged) == 1 else 'have'} no yield_strength, so its stress was not "
                       "compared with yield (give one to judge the whole part); " + why)
        det = dict(det, material=name, by_material={r[2]: r[5] for r in results}, not_judged=unjudged)
    return Check("yield", st, why, ratio, 1.0, det)


def _to_si(value: float, unit: str, target: str) -> float:
    return float(registry().Quantity(value, unit).to(target).magnitude)


def check_units(res: Result) -> Check:
    """Young's modulus and density of every material against the range of engineering solids."""
    mats = res.case.materials
    found = [_material_units(m, res.case.units) for m in mats]
    if len(found) == 1:
        st, why, E_pa, det = found[0]
        return Check("units", st, why, E_pa, None, det)
    worst_i = max(range(len(found)), key=lambda i: STATUSES.index(found[i][0]))
    st = found[worst_i][0]
    parts = [f"material '{m.name}': {f[1]}" for m, f in zip(mats, found) if f[0] == st or st == "pass"]
    det = {"materials": {m.name: f[3] for m, f in zip(mats, found)}}
    return Check("units", st, "; ".join(parts), found[worst_i][2], None, det)


def _material_units(m, units) -> tuple[str, str, float, dict]:
    """(status, why, E [Pa], details) of one material's modulus and density."""
    lab = units.labels["stress"]
    E_pa = _to_si(m.E, units.stress, "Pa")
    problems: list[tuple[str, str]] = []
    if not MODULUS_RANGE_PA[0] <= E_pa <= MODULUS_RANGE_PA[1]:
        if E_pa < MODULUS_RANGE_PA[0]:
            hint = (f"far too soft for any solid: was E written in GPa (or MPa) as a plain number where the "
                    f"case expects {lab}? Write it with its unit, e.g. \"200 GPa\"")
        else:
            hint = (f"far too stiff for any solid: was E written in Pa (or kPa) where the case expects {lab}? "
                    "Write it with its unit, e.g. \"200 GPa\"")
        problems.append(("fail", f"E = {m.E:.4g} {lab} ({E_pa / 1e9:.4g} GPa) lies outside the range of "
                                 f"engineering solids (0.0001 to 1200 GPa): {hint}"))
    rho_si = None
    if m.density is not None:
        rho_si = _to_si(m.density, units.density, "kg/m^3")
        if not DENSITY_RANGE_SI[0] <= rho_si <= DENSITY_RANGE_SI[1]:
            problems.append(("fail", f"density {rho_si:.4g} kg/m^3 lies outside the range of engineering solids "
                                     "(10 to 23,000 kg/m^3): the value is probably in another unit than the case's "
                                     f"{units.labels['density']} (write it with a unit, e.g. \"7850 kg/m^3\")"))
        elif rho_si >= DENSE_SI and E_pa < METAL_MIN_MODULUS_PA and not problems:
            problems.append(("warn", f"density {rho_si:.4g} kg/m^3 is that of a metal or ceramic, but E = "
                                     f"{E_pa / 1e9:.4g} GPa is that of a polymer: was E given in GPa where "
                                     f"the case expects {lab}?"))
    if not problems and E_pa < MODULUS_STIFF_PA:
        problems.append(("warn", f"E = {E_pa / 1e9:.4g} GPa is in the range of polymers and elastomers; if the "
                                 f"part is metal, E was probably given in GPa where the case expects {lab}"))
    det = {"E_GPa": E_pa / 1e9, "density_kg_m3": rho_si}
    if problems:
        worst_st = max(problems, key=lambda p: STATUSES.index(p[0]))[0]
        return worst_st, "; ".join(p[1] for p in problems), E_pa, det
    why = f"E = {E_pa / 1e9:.4g} GPa" if lab in ("MPa", "GPa", "Pa") else f"E = {m.E:.4g} {lab} ({E_pa / 1e9:.4g} GPa)"
    if rho_si is not None:
        why += f" and density {rho_si:.4g} kg/m^3"
    why += " lie" if rho_si is not None else " lies"
    return "pass", why + " in the range of engineering materials", E_pa, det


def _governing_case_result(res: Result):
    """The :class:`~elastofe.result.CaseResult` of the load case or combination that governs when
    it is not the first (whose fields the run shows at the top level); None otherwise. A
    distributed run keeps the cells around every case's peak with every case's displacements at
    their nodes, which is what the recovery at the peak needs."""
    shown = getattr(res, "load_case", None)
    gname = (getattr(res, "governing", None) or {}).get("load_case")
    cases = getattr(res, "load_cases", None) or {}
    if gname is None or shown is None or gname == shown or gname not in cases:
        return None
    cr = cases[gname]
    if cr.u is None or np.shape(cr.u) != np.shape(res.u):
        return None
    return cr


def check_peak_location(res: Result) -> Check:
    vm = res.von_mises
    away = None
    # With several load cases, judge the case or combination that governs (as the yield check does),
    # not the one shown at the top level.
    cr = _governing_case_result(res)
    in_case = ""
    if cr is not None:
        vm = cr.von_mises
        away = peak_away(_near(res), vm, res.mesh.points)
        in_case = f" in '{cr.name}'"
    iv = int(np.argmax(vm))
    near = _near(res)
    d, which, names, regs, h = near.distance, near.which, near.names, near.kinds, near.local_size
    lab = res.case.units.labels
    at = res.mesh.points[iv]
    where = "(" + ", ".join(f"{c:.4g}" for c in at) + f") {lab['length']}" + in_case
    if away is None:
        away = peak_away_from_regions(res)
    det = {"peak_at": at.tolist(), "distance_to_region": None if not np.isfinite(d[iv]) else float(d[iv]),
           "local_element_size": float(h[iv]), "max_von_mises_away": away["value"], "away_at": away["at"],
           "load_case": cr.name if cr is not None else getattr(res, "load_case", None)}
    near = which[iv] >= 0 and d[iv] <= NEAR_REGION_ELEMENTS * h[iv]
    if near and away["value"] is not None and away["value"] >= CONCENTRATED * vm[iv]:
        return Check("peak_location", "pass", f"the peak von Mises ({vm[iv]:.4g} {lab['stress']}) lies "
                     f"next to region '{names[which[iv]]}', but the stress away from every support and load "
                     f"reaches {away['value']:.4g} {lab['stress']}: the peak is not concentrated there",
                     float(d[iv]), float(NEAR_REGION_ELEMENTS * h[iv]), det)
    if near:
        name = names[which[iv]]
        det["region"] = name
        extra = ("; every node lies within two elements of a support or load, so a concentration cannot be "
                 "told apart from the general stress level here")
        if away["value"] is not None:
            extra = (f"; more than two elements away from every support and load the peak is "
                     f"{away['value']:.4g} {lab['stress']}")
        return Check("peak_location", "warn", f"the peak von Mises ({vm[iv]:.4g} {lab['stress']} at "
                     f"{where}) lies on or next to {regs[name]} region '{name}': likely an artefact of the "
                     f"idealised {regs[name]}; read stresses away from it{extra}",
                     float(d[iv]), float(NEAR_REGION_ELEMENTS * h[iv]), det)
    return Check("peak_location", "pass", f"the peak von Mises at {where} lies away from every support and "
                 "load region", None if not np.isfinite(d[iv]) else float(d[iv]),
                 float(NEAR_REGION_ELEMENTS * h[iv]), det)


def case_element_stress(res: Result, cr, cells: np.ndarray) -> np.ndarray:
    """Unaveraged stress ``(len(cells), nodes per cell, 6)`` [stress] of the load case or
    combination ``cr`` (a :class:`~elastofe.result.CaseResult`) at the nodes of the elements
    ``cells (c,)``, recovered from its displacements as the run recovers the first case's (same
    formulation, per-cell materials, thermal part taken out)."""
    mm = _materials(res)
    lam, mu = mm.lame()

    def of(v):
        return v if np.ndim(v) == 0 else np.asarray(v)[cells]

    kw: dict = {}
    if cr.temperature is not None:
        kw = {"delta_t": cr.temperature, "coefficient": of(mm.per_cell(mm.thermal_coefficients()))}
    return element_nodal_stress_for(res.mesh.points, res.mesh.cells[cells], np.asarray(cr.u).reshape(-1, 3),
                                    of(lam), of(mu), getattr(res, "formulation", "displacement"), **kw)


def stress_jump_at(res: Result, node: int, cr=None) -> dict:
    """Averaged against unaveraged von Mises at one node, of the first load case or of the load
    case or combination ``cr`` (its element values recovered here: see :func:`case_element_stress`).

    Returns the averaged value, the min and max of the per-element values of the elements that
    share the node, and the spread (max - min) / averaged. At a node on an interface between
    bodies only the elements of the body whose side the node reports count (the stress jumps
    across a bonded interface of two materials: that jump is no sign of a coarse mesh).
    """
    e, a = np.nonzero(res.mesh.cells == node)
    nodes = getattr(res, "body_nodes", None)
    body_stress = getattr(res if cr is None else cr, "body_stress", None)
    if nodes is not None and not nodes.identity and body_stress is not None:
        sides = np.flatnonzero(nodes.node == node)
        side = sides[int(np.argmax(von_mises(body_stress[sides])))]
        mine = nodes.cells[e, a] == side
        e, a = e[mine], a[mine]
    if cr is None:
        vm_el = von_mises(res.element_stress[e, a])
        avg = float(res.von_mises[node])
    else:
        vm_el = von_mises(case_element_stress(res, cr, e)[np.arange(e.size), a])
        avg = float(cr.von_mises[node])
    spread = float((vm_el.max() - vm_el.min()) / avg) if avg > 0 else 0.0
    return {"averaged": avg, "element_min": float(vm_el.min()), "element_max": float(vm_el.max()),
            "elements": int(e.size), "spread": spread}


def check_stress_jump(res: Result) -> Check:
    cr = _governing_case_result(res)
    iv = int(np.argmax(res.von_mises if cr is None else cr.von_mises))
    j = stress_jump_at(res, iv, cr)
    lab = res.case.units.labels["stress"]
    j["load_case"] = cr.name if cr is not None else getattr(res, "load_case", None)
    if j["elements"] < 2:
        which = f" of '{cr.name}', which governs," if cr is not None else ""
        return Check("stress_jump", "skip", f"cannot judge: the peak node{which} belongs to one element only, so "
                     "there is no jump between elements to measure; refine there (or read the peak with care)",
                     None, JUMP_WARN, j)
    base = (f"at the peak node the {j['elements']} elements sharing it give von Mises from "
            f"{j['element_min']:.4g} to {j['element_max']:.4g} {lab} against the averaged {j['averaged']:.4g} {lab} "
            f"(spread {100 * j['spread']:.3g} %)")
    # The governing case's element values are recovered for the elements at its peak; should its
    # displacements be missing, the first case is judged, and the text says so.
    shown = getattr(res, "load_case", None)
    gcase = (getattr(res, "governing", None) or {}).get("load_case")
    if cr is not None:
        base += f" in '{cr.name}', which governs"
    elif gcase is not None and shown is not None and gcase != shown:
        base += (f" in load case '{shown}' (the first; its peak node is judged, not that of '{gcase}', which "
                 "governs: element values are kept for the first case only)")
    if j["spread"] <= JUMP_WARN:
        return Check("stress_jump", "pass", base + "; the mesh resolves the peak", j["spread"], JUMP_WARN, j)
    return Check("stress_jump", "warn", base + "; the mesh is coarse for the stress gradient there: refine "
                 "locally and see whether the peak settles", j["spread"], JUMP_WARN, j)


def reentrant_edge_nodes(mesh: Mesh, angle_deg: float = SHARP_EDGE_DEG) -> np.ndarray:
    """Material angle [degrees] at each node on a re-entrant (concave) sharp boundary edge ``(n,)``,
    NaN elsewhere.

    Two boundary faces sharing an edge form a re-entrant edge when the second turns out of the
    first's outward side (the material angle exceeds 180°); it is sharp when their normals differ by
    more than ``angle_deg``. Linear elasticity gives unbounded stress at such an edge (Williams,
    J. Appl. Mech. 19 (1952) 526-528), so a peak there depends on the mesh.
    """
    faces = mesh.faces[:, :3]
    n_out = np.full(mesh.nodes, np.nan)
    if faces.shape[0] == 0:
        return n_out
    nrm = face_normals(mesh.points, mesh.faces)
    cen = mesh.points[faces].mean(axis=1)
    e = np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]])
    owner = np.tile(np.arange(faces.shape[0]), 3)
    key = np.sort(e, axis=1)
    order = np.lexsort((key[:, 1], key[:, 0]))
    key, owner, e = key[order], owner[order], e[order]
    same = np.all(key[1:] == key[:-1], axis=1)
    i = np.flatnonzero(same)
    f1, f2 = owner[i], owner[i + 1]
    cosang = np.einsum("ij,ij->i", nrm[f1], nrm[f2])
    sharp = cosang < np.cos(np.radians(angle_deg))
    concave = np.einsum("ij,ij->i", cen[f2] - cen[f1], nrm[f1]) > 0
    sel = sharp & concave
    if not sel.any():
        return n_out
    # material angle = 180 deg + the angle between the normals
    ang = 180.0 + np.degrees(np.arccos(np.clip(cosang[sel], -1.0, 1.0)))
    nodes = key[i[sel]]
    for col in (0, 1):
        cur = n_out[nodes[:, col]]
        n_out[nodes[:, col]] = np.fmax(cur, ang)
    if mesh.faces.shape[1] == 6:  # mid-side nodes of those edges
        mids = mesh.faces[:, 3:]
        # the mid-side node of the edge (a, b) in face order (0,1),(1,2),(2,0) is column 3, 4, 5
        emid = np.concatenate([mids[:, 0], mids[:, 1], mids[:, 2]])[order]
        n_out[emid[i[sel]]] = np.fmax(n_out[emid[i[sel]]], ang)
    return n_out


def check_sharp_edge(res: Result) -> Check:
    """Whether the peak (overall and governing) sits on a re-entrant sharp edge, where the stress
    grows without bound under refinement."""
    lab = res.case.units.labels["stress"]
    angle = reentrant_edge_nodes(res.mesh)
    gov = getattr(res, "governing", None) or governing_peak(res)
    nodes = {"overall": gov["overall"]["node"]}
    if gov["away"].get("node") is not None:
        nodes["governing"] = gov["away"]["node"] if gov["basis"] == "away" else gov["overall"]["node"]
    on_edge = np.isfinite(angle)
    hits = {k: float(angle[v]) for k, v in nodes.items() if on_edge[v]}
    # A peak one element from the edge is as much the singularity's as one on it: the averaged value at
    # an edge node can sit below its neighbour's (the L bracket's peak fell 1.26 mm from its 270 deg edge
    # on a 4 mm mesh), so nodes of the elements touching an edge node count as next to the edge.
    next_to = {}
    if on_edge.any():
        cells = res.mesh.cells
        for k, v in nodes.items():
            if k in hits:
                continue
            mine = cells[np.any(cells == v, axis=1)]
            ang = angle[mine]
            if np.isfinite(ang).any():
                next_to[k] = float(np.nanmax(ang))
    det = {"reentrant_edge_nodes": int(on_edge.sum()), "angle_limit_deg": SHARP_EDGE_DEG,
           **{f"{k}_on_reentrant_edge": k in hits for k in nodes},
           **{f"{k}_next_to_reentrant_edge": k in next_to for k in nodes}}
    where_on = {k: "lies on" for k in hits} | {k: "lies within one element of" for k in next_to}
    hits = hits | next_to
    if "governing" in hits or ("overall" in hits and gov["basis"] == "overall"):
        where = "governing" if "governing" in hits else "overall"
        node = nodes[where]
        return Check("sharp_edge", "warn", f"the {where} peak von Mises {res.von_mises[node]:.4g} {lab} "
                     f"{where_on[where]} a "
                     f"re-entrant sharp edge (material angle about {hits[where]:.0f} deg), where linear elasticity "
                     "predicts unbounded stress: the value depends on the mesh and grows with refinement. Model the "
                     "real fillet radius, read stress a little away from the edge, or run a convergence study "
                     "(elastofe study) to see it grow", hits[where], SHARP_EDGE_DEG, det)
    if "overall" in hits:
        return Check("sharp_edge", "pass", f"the overall peak {where_on['overall']} a re-entrant edge next to a "
                     "support or load, "
                     "but the governing peak away from them does not", None, SHARP_EDGE_DEG, det)
    if not np.isfinite(angle).any():
        return Check("sharp_edge", "pass", "the part has no re-entrant sharp edge", None, SHARP_EDGE_DEG, det)
    return Check("sharp_edge", "pass", f"the peaks lie neither on nor within one element of the "
                 f"{int(on_edge.sum())} nodes of re-entrant sharp edges", None, SHARP_EDGE_DEG, det)


def element_shape_figures(points: np.ndarray, cells: np.ndarray) -> dict:
    """Aspect and Jacobian ratio figures of a set of cells; figures of disjoint sets of cells
    combine with :func:`merge_shape_figures` (a distributed run computes them rank by rank)."""
    ar = aspect_ratio(points, cells)
    jr = jacobian_ratio(points, cells)
    return {"elements": int(cells.shape[0]), "aspect_ratio_max": float(ar.max(initial=-np.inf)),
            "aspect_ratio_sum": float(ar.sum()), "poor_aspect": int((ar > ASPECT_POOR).sum()),
            "jacobian_ratio_min": float(jr.min(initial=np.inf)), "poor_jacobian": int((jr < JACOBIAN_POOR).sum()),
            "folded": int((jr <= 0).sum()), "poor": int(((ar > ASPECT_POOR) | (jr < JACOBIAN_POOR)).sum())}


def merge_shape_figures(parts: list[dict]) -> dict:
    """The :func:`element_shape_figures` of the union of disjoint sets of cells."""
    out = {k: sum(p[k] for p in parts) for k in ("elements", "aspect_ratio_sum", "poor_aspect", "poor_jacobian",
                                                 "folded", "poor")}
    out["aspect_ratio_max"] = max(p["aspect_ratio_max"] for p in parts)
    out["jacobian_ratio_min"] = min(p["jacobian_ratio_min"] for p in parts)
    return out


def check_element_quality(res: Result) -> Check:
    whole = getattr(res, "whole", None)
    f = whole.element_shape if whole is not None else element_shape_figures(res.mesh.points, res.mesh.cells)
    m, poor_ar, poor_jr, folded, poor = f["elements"], f["poor_aspect"], f["poor_jacobian"], f["folded"], f["poor"]
    ar_max, jr_min = f["aspect_ratio_max"], f["jacobian_ratio_min"]
    det = {"elements": m, "aspect_ratio_max": ar_max, "aspect_ratio_mean": f["aspect_ratio_sum"] / m,
           "poor_aspect": poor_ar, "jacobian_ratio_min": jr_min, "poor_jacobian": poor_jr,
           "folded": folded, "poor": poor, "aspect_limit": ASPECT_POOR, "jacobian_limit": JACOBIAN_POOR}
    base = (f"{poor_ar} of {m} elements have aspect ratio over {ASPECT_POOR:g} (worst {ar_max:.3g}), "
            f"{poor_jr} have Jacobian ratio under {JACOBIAN_POOR:g} (worst {jr_min:.3g})")
    if folded or poor > POOR_SHARE_FAIL * m:
        why = base + (f"; {folded} element(s) fold over" if folded else "") + \
            f": {100 * poor / m:.3g} % poor elements, remesh before trusting the stresses"
        return Check("element_quality", "fail", why, poor / m, POOR_SHARE_FAIL, det)
    if poor:
        return Check("element_quality", "warn", base + "; stresses in those elements are less accurate",
                     poor / m, POOR_SHARE_FAIL, det)
    return Check("element_quality", "pass", base, 0.0, POOR_SHARE_FAIL, det)


def check_incompressibility(res: Result) -> Check:
    """Poisson's ratio against the element order and formulation, judged on the material nearest 0.5."""
    mats = res.case.materials
    mat = max(mats, key=lambda m: m.nu)
    nu = mat.nu
    who = f" (material '{mat.name}')" if len(mats) > 1 else ""
    tet4 = res.mesh.cells.shape[1] == 4
    kind = "4-node" if tet4 else "10-node"
    if tet4 and nu >= NU_TET4_FAIL:
        return Check("incompressibility", "fail", f"nu = {nu:g}{who} with 4-node tetrahedra: they lock (far too "
                     "stiff) for nearly incompressible material; use order 2", nu, NU_TET4_FAIL)
    if tet4 and nu >= NU_TET4_WARN:
        return Check("incompressibility", "warn", f"nu = {nu:g}{who} with 4-node tetrahedra: expect them to be "
                     "too stiff (volumetric locking); prefer order 2", nu, NU_TET4_WARN)
    form = getattr(res, "formulation", "displacement")
    if not tet4 and form == "mixed":
        return Check("incompressibility", "pass", f"nu = {nu:g}{who} with 10-node tetrahedra: the mixed "
                     "displacement-pressure element ran (pressure constant per element, condensed; "
                     "Nagtegaal, Parks & Rice 1974), which keeps stresses free of volumetric locking",
                     nu, NU_TET4_WARN, {"formulation": form})
    if not tet4 and nu >= NU_TET10_WARN:
        return Check("incompressibility", "warn", f"nu = {nu:g}{who}: even 10-node tetrahedra lose accuracy this "
                     "close to incompressibility", nu, NU_TET10_WARN, {"formulation": form})
    return Check("incompressibility", "pass", f"nu = {nu:g}{who if len(mats) == 1 else ' at most'} with {kind} "
                 "tetrahedra: no volumetric locking expected", nu, NU_TET4_WARN if tet4 else NU_TET10_WARN,
                 {"formulation": form})


def check_frequency(res: Result) -> Check:
    """The first elastic natural frequency against ``modes.above`` (an excitation frequency)."""
    modes = getattr(res, "modes", None)
    spec = getattr(res.case, "modes", None)
    if modes is None or spec is None:
        return Check("frequency", "skip", "no [modes] section: natural frequencies were not computed")
    elastic = [float(f) for f, lab in zip(modes.frequencies, modes.rigid) if lab is None]
    if not elastic:
        return Check("frequency", "skip", "cannot judge: none of the modes computed is elastic (all are "
                     "rigid-body modes of a free part); ask for more modes")
    f1 = elastic[0]
    det = {"first_frequency_hz": f1, "above_hz": spec.above}
    if spec.above is None:
        return Check("frequency", "skip", f"cannot judge: the first elastic mode is at {f1:.4g} Hz, but no "
                     "modes.above (the excitation frequency to stay above) was given", f1, None, det)
    margin = f1 / spec.above - 1.0
    det["margin"] = margin
    if f1 > spec.above:
        return Check("frequency", "pass", f"the first elastic mode at {f1:.4g} Hz lies {100 * margin:.3g} % above "
                     f"the excitation frequency {spec.above:.4g} Hz", f1, spec.above, det)
    return Check("frequency", "fail", f"the first elastic mode at {f1:.4g} Hz does not lie above the excitation "
                 f"frequency {spec.above:.4g} Hz ({100 * margin:.3g} %): the part may resonate; stiffen it or "
                 "move its mass", f1, spec.above, det)


#: What every buckling verdict says about the method (Timoshenko & Gere, Theory of Elastic
#: Stability, 1961: imperfections and plasticity lower the load a perfect elastic part reaches).
BUCKLING_CAUTION = ("linear buckling gives an upper bound: imperfections, residual stresses and yielding "
                    "lower the real buckling load")


def buckling_yield_factor(res: Result, name: Optional[str]) -> Optional[tuple[float, str]]:
    """The factor on the loads of load case ``name`` (None: the first) at which the von Mises stress
    more than two element sizes from every support and load first reaches a material's yield
    strength, with that material's name; None when no material has a yield strength (or the field
    is zero). Nodes next to supports and loads are left out, as for the governing peak: their
    stress depends on the idealisation."""
    fields = _split_fields_list(res)
    vm = dict(fields).get(name, fields[0][1])
    mm = _materials(res)
    nodes = _body_nodes(res)
    mat_q = mm.material_index_of_bodies(nodes.body) if not mm.single else np.zeros(nodes.count, dtype=np.int64)
    fy = np.array([m.yield_strength or np.nan for m in mm.materials], dtype=float)[mat_q]
    near = _near(res)
    away = near.distance[nodes.node] > AWAY_REGION_ELEMENTS * near.local_size[nodes.node]
    use = np.isfinite(fy) & (away if away.any() else True)
    if not use.any():
        return None
    util = np.where(use, vm / np.where(use, fy, 1.0), 0.0)
    k = int(np.argmax(util))
    if util[k] <= 0:
        return None
    return 1.0 / float(util[k]), mm.materials[int(mat_q[k])].name


def check_buckling(res: Result) -> Check:
    """The first linear buckling load factor against ``buckling.above`` (a required factor), and
    against the factor at which the part first yields: linear buckling beyond it is no buckling
    strength (the part yields first)."""
    b = getattr(res, "buckling", None)
    spec = getattr(res.case, "buckling", None)
    if b is None or spec is None:
        return Check("buckling", "skip", "no [buckling] section: buckling was not computed")
    if b.factors.size == 0:
        return Check("buckling", "pass" if spec.above is not None else "skip",
                     f"no buckling factor found: {b.note or 'the load compresses nothing that can buckle'}",
                     None, spec.above, {"note": b.note})
    lam = float(b.factors[0])
    det = {"first_factor": lam, "above": spec.above, "load_case": b.load_case}
    yf = buckling_yield_factor(res, b.load_case)
    first = ""
    if yf is not None:
        det["yield_factor"], det["yield_material"] = yf
        if yf[0] < lam:
            first = (f"; but at that factor the von Mises stress away from supports and loads would be "
                     f"{lam / yf[0]:.3g} times the yield strength of '{yf[1]}': the part yields first, at about "
                     f"{yf[0]:.3g} times the loads, so the linear factor overstates what it can carry (yielding "
                     "and inelastic buckling are beyond a linear analysis)")
    if spec.above is None:
        return Check("buckling", "skip", f"cannot judge: the first buckling factor is {lam:.4g}, but no "
                     f"buckling.above (the required factor) was given{first}; {BUCKLING_CAUTION}", lam, None, det)
    det["margin"] = lam / spec.above - 1.0
    if lam >= spec.above and yf is not None and yf[0] < spec.above:
        return Check("buckling", "warn", f"the loads buckle the part at {lam:.4g} times their value, above the "
                     f"required factor {spec.above:.4g}, but the part yields first, at about {yf[0]:.3g} times the "
                     f"loads (the von Mises stress away from supports and loads reaches the yield strength of "
                     f"'{yf[1]}'), below the required factor: linear buckling cannot show that margin; "
                     f"{BUCKLING_CAUTION}", lam, spec.above, det)
    if lam >= spec.above:
        return Check("buckling", "pass", f"the loads buckle the part at {lam:.4g} times their value, above the "
                     f"required factor {spec.above:.4g}{first}; {BUCKLING_CAUTION}", lam, spec.above, det)
    return Check("buckling", "fail", f"the loads buckle the part at {lam:.4g} times their value, below the "
                 f"required factor {spec.above:.4g}{first}; {BUCKLING_CAUTION}, so the real margin is smaller still",
                 lam, spec.above, det)


#: Every check, in the order they are reported.
CHECKS = (check_equilibrium, check_small_displacement, check_yield, check_units, check_peak_location,
          check_stress_jump, check_sharp_edge, check_element_quality, check_incompressibility, check_frequency,
          check_buckling)


#: Checks of analyses a case asks for by a section of its own: run only when it does (a check of
#: natural frequencies on a static run would read "cannot judge" where there is nothing to judge).
ON_REQUEST = {"check_frequency": "modes", "check_buckling": "buckling"}


def applicable_checks(case) -> tuple:
    """The checks that apply to ``case``, in the order of :data:`CHECKS`."""
    return tuple(c for c in CHECKS if c.__name__ not in ON_REQUEST
                 or getattr(case, ON_REQUEST[c.__name__], None) is not None)


#: Checks that judge the static displacement and stress: with no loads and no prescribed
#: displacement (a natural-frequency run) the field is zero and they cannot judge anything.
STATIC = ("check_equilibrium", "check_small_displacement", "check_yield", "check_peak_location", "check_stress_jump")


def run_checks(res: Result) -> list[Check]:
    """Run every plausibility check that applies to the run, in the order of :data:`CHECKS`."""
    unloaded = not res.case.loads and not np.any(res.u)
    return [Check(c.__name__.removeprefix("check_"), "skip", "cannot judge: the run has no loads and no "
                  "prescribed displacement, so there is no static displacement or stress to judge")
            if unloaded and c.__name__ in STATIC else c(res) for c in applicable_checks(res.case)]


def worst(checks) -> str:
    """The most severe status among checks (given as :class:`Check` or as dicts)."""
    sts = [c.status if isinstance(c, Check) else c["status"] for c in checks]
    return max(sts, key=STATUSES.index) if sts else "pass"


def as_dict(checks: list[Check]) -> dict:
    """``{name: {status, why, value, limit, details}}`` for summary.json (order kept)."""
    out = {}
    for c in checks:
        d = asdict(c)
        out[d.pop("name")] = d
    return out
