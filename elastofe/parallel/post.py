"""Post-processing on every rank: each recovers, samples and reduces its own part of the mesh.

After the solve each rank holds the displacements of its owned nodes for every load case. Here
each rank, on its own cells and nodes only:

- recovers nodal stresses (element sums at its nodes, shared nodes' sums added at their owner
  through :class:`~elastofe.parallel.halo.Halo`, the averages sent back to the ranks that share
  them), takes the thermal strain out, forms the combinations;
- computes reactions, equilibrium and strain-energy sums (:func:`elastofe.post.fields.reaction_sums`),
  element shape figures and quality, and the distances of its nodes to supports and loads;
- finds its candidates for every peak (largest displacement and von Mises, peak away from
  supports and loads, the envelope) and locates the named points, line samples and beam load
  points in its own cells.

Only reduced results travel to rank 0: sums, peak candidates, the located samples' values, and
the *kept part* of the mesh (every boundary face and the cells around the peaks, with their
fields; see :class:`elastofe.result.WholeModel`). Rank 0 then builds the :class:`Result` with
:func:`elastofe.post.run.build_result`, the function a single-process run ends with, so the
governing peak, the beam estimates and every check are computed by the same code.

The full fields go to result.vtu: gathered on rank 0 when the mesh has at most
:func:`gather_limit` nodes, else written by each rank as a piece of ``result.pvtu``.
"""
from __future__ import annotations

import os
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Optional

import numpy as np
from scipy.spatial import cKDTree

from ..bc import Held, split_reactions
from ..bodies import assign_materials
from ..case.schema import Case
from ..fem.mixed import choose_formulation, element_nodal_stress_for
from ..mesh import Mesh, write_vtu
from ..post.checks import (
    AWAY_REGION_ELEMENTS,
    element_shape_figures,
    idealised_regions,
    local_size,
    merge_shape_figures,
)
from ..post.fields import add_sums, finish_reactions, point_fields, reaction_sums, thermal_stress_offset
from ..post.probe import Locator, interpolate
from ..post.recovery import element_quality, nodal_stress_sums, principal, von_mises
from ..post.run import build_result, combination_loads, combination_weights, combined_temperature
from ..post.sampling import line_result, line_samples, part_tolerance, point_results, values_at
from ..result import CaseResult, Model, NearRegions, Result, WholeModel
from ..stages import load_case_groups
from .halo import Halo
from .partition import Piece

#: Meshes with at most this many nodes have their fields gathered on rank 0 for one result.vtu
#: (about 0.2 kB per node and load case there: 60 MB at this size for one load case); larger
#: ones are written as one piece per rank (result.pvtu). ``ELASTOFE_GATHER_NODES`` overrides it.
GATHER_NODES = 300_000


def gather_limit() -> int:
    """The node count up to which the fields are gathered on rank 0 (see :data:`GATHER_NODES`)."""
    try:
        return int(os.environ.get("ELASTOFE_GATHER_NODES", GATHER_NODES))
    except ValueError:
        return GATHER_NODES


@dataclass(frozen=True)
class Kept:
    """What rank 0 keeps of the whole model after dealing it out (the boundary, not the volume).

    ``faces (f, 3|6)`` every boundary face and ``face_surface (f,)`` its surface (old node
    numbers); ``face_points (b, 3)`` coordinates of ``face_nodes (b,)`` the boundary nodes;
    ``regions`` {support or load region: (r, 3) coordinates of its nodes}; ``size`` the part's
    bounding-box diagonal; ``pieces`` summary.json's geometry pieces; ``model`` the Model with
    its whole-mesh arrays emptied (mesh, load vectors, temperatures, elastic-support matrices);
    ``mesh`` the whole mesh when its fields are to be gathered (small models), else None.
    """

    faces: np.ndarray
    face_surface: np.ndarray
    face_nodes: np.ndarray
    face_points: np.ndarray
    groups: dict
    source: object
    regions: dict
    size: float
    pieces: list
    model: Model
    mesh: Optional[Mesh]
    #: The bodies of the whole mesh and their material (summary.json's ``bodies``).
    materials: object = None


def keep_for_post(case: Case, model: Model) -> Kept:
    """Rank 0, before dealing: the boundary and the whole-mesh facts the post-processing needs."""
    from ..mesh import mesh_pieces
    from ..regions import model_size, region_nodes

    mesh = model.mesh
    nodes = np.unique(mesh.faces)
    regions = {}
    for name in idealised_regions(case):
        ids = model.region_ids.get(name, [])
        regions[name] = mesh.points[region_nodes(mesh, ids)] if ids else np.zeros((0, 3))
    _, pieces = mesh_pieces(mesh.points, mesh.cells, getattr(mesh, "cell_body", None))
    light = replace(model, mesh=None, F=None, temperatures=None, foundations=[],
                    loads=[replace(ld, f=None, temperature=None) for ld in model.loads])
    small = mesh.nodes <= gather_limit()
    return Kept(faces=mesh.faces, face_surface=mesh.face_surface, face_nodes=nodes, face_points=mesh.points[nodes],
                groups=dict(mesh.groups), source=getattr(mesh, "source", None), regions=regions,
                size=model_size(mesh), pieces=[p.as_dict() for p in pieces], model=light,
                mesh=mesh if small else None, materials=assign_materials(case, mesh))


@dataclass
class Solved:
    """What the solve leaves on each rank for the post-processing (owned nodes, ``k`` load cases).

    ``U (nown, k, 3)`` [length] displacements in global components; ``KU (nown, k, 3)`` [force]
    the stiffness times ``U`` (the loads on unheld nodes, the unmodified rows on held ones);
    ``found (list of (support index, (nown, k, 3)))`` each elastic support's reaction ``-K_s u``.
    """

    U: np.ndarray
    KU: np.ndarray
    found: list


def _peak(comm, value: np.ndarray, ids: np.ndarray, payload) -> Optional[tuple]:
    """The largest of ``value`` over every rank (ties: smallest ``ids``, as ``np.argmax`` over the
    whole mesh would pick): ``(value, id, payload(i))`` on rank 0, None elsewhere."""
    if value.size:
        i = int(np.argmax(value))
        tie = np.flatnonzero(value == value[i])
        i = int(tie[np.argmin(ids[tie])])
        mine = (float(value[i]), int(ids[i]), payload(i))
    else:
        mine = (-np.inf, np.iinfo(np.int64).max, None)
    every = comm.gather(mine, root=0)
    if comm.rank != 0:
        return None
    return max(every, key=lambda c: (c[0], -c[1]))


def distributed_post(comm, case: Case, piece: Piece, halo: Halo, solved: Solved, kept: Optional[Kept], *,
                     residual: float,
                     backend: str, solver_info: dict, fields_dir: Optional[Path] = None,
                     token: str = "") -> Optional[Result]:
    """The post-processing of a distributed solve (collective): the :class:`Result` on rank 0.

    ``kept`` is rank 0's :class:`Kept` (None elsewhere). With ``fields_dir`` and a mesh too large
    to gather, each rank writes its piece of result.pvtu there under a staged name (``.NAME.
    token.part``) that :func:`elastofe.output.write_results` commits.
    """
    rank = comm.rank
    groups = load_case_groups(case)
    k = len(groups)
    lam, mu = case.material.lame
    own = piece.owned
    old_own = piece.old[own]
    pts_own = piece.points[own]
    ncells = comm.allreduce(piece.cells.shape[0])

    # Nodal stresses: element sums at the rank's nodes, shared nodes summed at their owner.
    U_loc = halo.spread(solved.U)  # (l, k, 3)
    therm = thermal_stress_offset(case)
    temps = piece.temperatures or [None] * k
    mixed = choose_formulation(case.material.nu, piece.cells.shape[1]) == "mixed"
    if mixed:
        # The mixed element's stresses come from its element pressure (thermal part included).
        nl = piece.points.shape[0]
        flat = piece.cells.ravel()
        els = [element_nodal_stress_for(piece.points, piece.cells, U_loc[:, j], lam, mu, "mixed",
                                        delta_t=temps[j], coefficient=therm) for j in range(k)]
        sums = np.stack([np.stack([np.bincount(flat, weights=e[..., c].ravel(), minlength=nl) for c in range(6)],
                                  axis=1) for e in els])
        count = np.bincount(flat, minlength=nl).astype(float)
        s_el = els[0]
        del els
    else:
        sums, count, s_el = nodal_stress_sums(piece.points, piece.cells, U_loc.transpose(1, 0, 2), lam, mu)
    S = halo.reduce(sums.transpose(1, 0, 2))  # (nown, k, 6)
    cnt = halo.reduce(count)
    del sums
    S /= np.maximum(cnt, 1)[:, None, None]
    T_own = [None if T is None else T[own] for T in temps]
    for j in range(k):
        if T_own[j] is not None and therm and not mixed:
            S[:, j, :3] -= (therm * T_own[j])[:, None]
    if temps[0] is not None and therm and not mixed:
        s_el[..., :3] -= (therm * temps[0][piece.cells])[..., None]

    # Load cases and combinations on the owned nodes: u, stress, loads, K u, temperature, reactions.
    F = piece.F.reshape(piece.nown, 3, k).transpose(0, 2, 1)  # (nown, k, 3)
    con = piece.con_nodes - piece.first  # owned constrained nodes, from 0
    held_local = Held(np.zeros(0, np.int64), np.zeros(0), np.zeros(0, np.int64), con_nodes=np.arange(con.size),
                      con_dirs=piece.con_dirs, con_owner=piece.con_owner)
    nsup = len(case.supports)
    found = dict(solved.found)

    def reactions(u, Ku, f, fd_reac):
        nodal_c, per_c = split_reactions(held_local, pts_own[con], (Ku - f)[con], nsup)
        nodal = np.zeros((piece.nown, 3))
        nodal[con] = nodal_c
        per = []
        for i in range(nsup):
            p = np.zeros((piece.nown, 3))
            p[con] = per_c[i]
            if i in fd_reac:
                p = fd_reac[i]
                nodal = nodal + p
            per.append(p)
        return nodal, per

    named: dict[str, dict] = {}
    for j, (name, idx) in enumerate(groups):
        u, Ku, f = solved.U[:, j], solved.KU[:, j], F[:, j]
        nodal, per = reactions(u, Ku, f, {i: r[:, j] for i, r in found.items()})
        named[name] = {"kind": "load case", "factors": {name: 1.0}, "loads": idx, "u": u, "stress": S[:, j],
                       "temperature": T_own[j], "nodal": nodal,
                       "sums": reaction_sums(case, pts_own, nodal, per, f.ravel(), u.ravel(), Ku.ravel()),
                       "w": np.eye(k)[j]}
    for comb, w in combination_weights(case, groups):
        u, Ku, f = solved.U.transpose(0, 2, 1) @ w, solved.KU.transpose(0, 2, 1) @ w, F.transpose(0, 2, 1) @ w
        nodal, per = reactions(u, Ku, f, {i: r.transpose(0, 2, 1) @ w for i, r in found.items()})
        stress = np.zeros((piece.nown, 6))
        for j in range(k):
            if w[j] != 0:
                stress = stress + w[j] * S[:, j]
        named[comb.name] = {"kind": "combination", "factors": dict(comb.factors),
                            "loads": combination_loads(comb, groups), "u": u, "stress": stress,
                            "temperature": combined_temperature(T_own, w), "nodal": nodal,
                            "sums": reaction_sums(case, pts_own, nodal, per, f.ravel(), u.ravel(), Ku.ravel()),
                            "w": w}
    del S
    for v in named.values():
        v["von_mises"] = von_mises(v["stress"])

    # Distances to supports and loads, and the local element size, of the owned nodes.
    regions = comm.bcast(kept.regions if rank == 0 else None, root=0)
    names = list(regions)
    dist = np.full(piece.nown, np.inf)
    which = np.full(piece.nown, -1)
    for r_i, name in enumerate(names):
        if len(regions[name]):
            d, _ = cKDTree(regions[name]).query(pts_own)
            closer = d < dist
            dist[closer], which[closer] = d[closer], r_i
    cnt_loc = np.bincount(piece.cells.ravel(), minlength=piece.nodes.size).astype(float)
    h = halo.reduce(local_size(piece.points, piece.cells) * cnt_loc) / np.maximum(cnt, 1.0)
    away = dist > AWAY_REGION_ELEMENTS * h
    fy = case.material.yield_strength

    # Peaks: every rank's candidates, the largest on rank 0.
    facts: dict[str, dict] = {}
    for name, v in named.items():
        umag = np.linalg.norm(v["u"], axis=1)
        vm = v["von_mises"]
        idx_away = np.flatnonzero(away)
        facts[name] = {
            "u": _peak(comm, umag, old_own, lambda i: None),
            "vm": _peak(comm, vm, old_own, lambda i: None),
            "away": _peak(comm, vm[idx_away], old_own[idx_away], lambda i, idx_away=idx_away: pts_own[idx_away[i]]),
            "away_nodes": comm.reduce(int(away.sum()), root=0),
            "above": comm.reduce(int((vm > fy).sum()) if fy is not None else 0, root=0),
        }
    env_vm = np.max(np.stack([v["von_mises"] for v in named.values()]), axis=0) if named else np.zeros(0)
    env_peak = _peak(comm, env_vm, old_own, lambda i: None)
    sums = {name: comm.gather(v["sums"], root=0) for name, v in named.items()}

    # The cells the checks look at: around every peak node, and those holding the beams' load points.
    keys = None
    if rank == 0:
        keys = {env_peak[1]}
        for fc in facts.values():
            keys |= {fc["u"][1], fc["vm"][1]}
            if fc["away"][2] is not None:
                keys.add(fc["away"][1])
    keys = np.array(sorted(comm.bcast(keys, root=0)), dtype=np.int64)

    # Named points, line samples and beam load points, each located on the rank that holds it.
    targets = [np.array([p.at for p in case.points], dtype=float).reshape(-1, 3)]
    targets += [line_samples(ln)[1] for ln in case.lines]
    targets.append(np.array([b.load_point for b in getattr(case, "beams", ())], dtype=float).reshape(-1, 3))
    cuts = np.cumsum([0] + [t.shape[0] for t in targets])
    X = np.concatenate(targets)
    sampled = {}
    beam_cells = np.zeros(0, dtype=np.int64)
    if X.shape[0]:
        loc = Locator(piece.points, piece.cells).locate(X)
        every = np.array(comm.allgather(loc.outside))  # (P, t)
        win = np.argmin(every, axis=0)
        outside = every.min(axis=0)
        mine = np.flatnonzero(win == rank)
        for name, v in named.items():
            u_loc = halo.spread(v["u"])
            s_loc = halo.spread(v["stress"])
            sel = replace(loc, cell=loc.cell[mine], xi=loc.xi[mine], outside=loc.outside[mine])
            sampled[name] = (mine, interpolate(piece.cells, sel, u_loc), interpolate(piece.cells, sel, s_loc))
        nb = cuts[-1] - cuts[-2]
        if nb:
            bsel = np.arange(cuts[-2], cuts[-1])
            bsel = bsel[win[bsel] == rank]
            beam_cells = piece.cell_ids[loc.cell[bsel]]
    else:
        outside = np.zeros(0)
    sampled = comm.gather(sampled, root=0)

    # The kept part: cells around the peaks (and beam load points) with their element stresses.
    node_old = piece.old[piece.cells]
    kc = np.flatnonzero(np.isin(node_old, keys).any(axis=1) | np.isin(piece.cell_ids, beam_cells))
    quality = element_quality(piece.points, piece.cells)
    kept_cells = comm.gather((piece.cell_ids[kc], node_old[kc], s_el[kc], quality[kc]), root=0)
    shape = comm.gather(element_shape_figures(piece.points, piece.cells), root=0)
    min_quality = comm.reduce(float(quality.min(initial=np.inf)), op=_min_op(comm), root=0)
    del s_el

    digest_nodes = None
    if rank == 0:
        cid = np.concatenate([c[0] for c in kept_cells])
        o = np.argsort(cid)
        kcells = np.concatenate([c[1] for c in kept_cells])[o]
        digest_nodes = np.union1d(kept.face_nodes, kcells.ravel())
    digest_nodes = comm.bcast(digest_nodes, root=0)
    at = np.flatnonzero(np.isin(old_own, digest_nodes))
    per_node = {"old": old_own[at], "points": pts_own[at], "dist": dist[at], "which": which[at], "h": h[at],
                "cases": {name: (v["u"][at], v["stress"][at],
                                 None if v["temperature"] is None else v["temperature"][at], v["nodal"][at])
                          for name, v in named.items()}}
    per_node = comm.gather(per_node, root=0)

    if piece.total <= gather_limit():
        vtu, vtu_pieces = _gather_fields(comm, case, piece, named, quality, kept), None
    else:
        vtu, vtu_pieces = None, _write_fields(comm, case, piece, halo, named, quality, fields_dir, token)
    if rank != 0:
        return None

    # ---- rank 0: the Result from the reduced parts
    model = kept.model
    o_nodes = np.concatenate([p["old"] for p in per_node])
    order = np.argsort(o_nodes)
    assert np.array_equal(o_nodes[order], digest_nodes)
    cat = {key: np.concatenate([p[key] for p in per_node])[order] for key in ("points", "dist", "which", "h")}
    remap = np.full(int(digest_nodes.max(initial=-1)) + 1, -1, dtype=np.int64)
    remap[digest_nodes] = np.arange(digest_nodes.size)
    el_stress = np.concatenate([c[2] for c in kept_cells])[o]
    mesh = Mesh(points=cat["points"], cells=remap[kcells], faces=remap[kept.faces], face_surface=kept.face_surface,
                groups=kept.groups, cell_body=None, source=kept.source)
    near = NearRegions(distance=cat["dist"], which=cat["which"], names=names, kinds=idealised_regions(case),
                       local_size=cat["h"])
    size = kept.size
    tol = part_tolerance(size)
    out_pts = np.flatnonzero(outside[cuts[0]:cuts[1]] > tol) if len(case.points) else np.zeros(0, np.int64)
    assert out_pts.size == 0, "named points were checked against the mesh before the solve"
    results: dict[str, CaseResult] = {}
    for name, v in named.items():
        u_t = np.zeros((X.shape[0], 3))
        s_t = np.zeros((X.shape[0], 6))
        for part in sampled:
            if name in part:  # nothing to sample without points, lines or beams
                idx, ui, si = part[name]
                u_t[idx], s_t[idx] = ui, si
        lines = {}
        for i, ln in enumerate(case.lines):
            sl = slice(cuts[1 + i], cuts[2 + i])
            lines[ln.name] = line_result(ln, values_at(u_t[sl], s_t[sl]), outside[sl] > tol)
        pts = point_results(case, values_at(u_t[cuts[0]:cuts[1]], s_t[cuts[0]:cuts[1]])) if case.points else {}
        fields = [None if per_node[0]["cases"][name][i] is None else
                  np.concatenate([p["cases"][name][i] for p in per_node])[order] for i in range(4)]
        reac, F_app, M_app, eq, eq_m, energy = finish_reactions(case, add_sums(sums[name]), size)
        fc = facts[name]
        aw = fc["away"]
        peak_away = {"value": None, "at": None, "nodes": 0} if aw[2] is None else \
            {"value": aw[0], "at": aw[2].tolist(), "nodes": int(fc["away_nodes"]), "node": int(aw[1])}
        results[name] = CaseResult(
            name=name, kind=v["kind"], factors=v["factors"], loads=tuple(v["loads"]), u=fields[0], stress=fields[1],
            von_mises=von_mises(fields[1]), principal=principal(fields[1]), temperature=fields[2],
            reaction_nodal=fields[3], reactions=reac, applied_force=F_app, applied_moment=M_app,
            equilibrium_error=eq, moment_equilibrium_error=eq_m, strain_energy=energy, points=pts, lines=lines,
            peak_away=peak_away)
    above = sum(int(fc["above"]) for fc in facts.values()) if fy is not None else None
    whole = WholeModel(nodes=int(piece.total), elements=int(ncells), min_quality=float(min_quality),
                       pieces=kept.pieces, element_shape=merge_shape_figures(shape), nodes_above_yield=above,
                       node_ids=digest_nodes, vtu=vtu, vtu_pieces=vtu_pieces, materials=kept.materials)
    quality_kept = np.concatenate([c[3] for c in kept_cells])[o]
    return build_result(case, replace(model, mesh=mesh), results, element_stress=el_stress, quality=quality_kept,
                        near=near, residual=residual, backend=backend, solver_info=solver_info, whole=whole)


def _min_op(comm):
    from mpi4py import MPI

    return MPI.MIN


def _fields_of(case: Case, named: dict) -> dict:
    """VTU point data from per-case ``{"u", "stress", "temperature"}`` arrays of some nodes."""
    as_dict = {name: {"u": v["u"], "stress": v["stress"], "von_mises": von_mises(v["stress"]),
                      "principal": principal(v["stress"]), "temperature": v["temperature"]}
               for name, v in named.items()}
    first = next(iter(as_dict.values()))
    env = None
    if case.load_cases:
        stack = np.stack([c["von_mises"] for c in as_dict.values()])
        gov = np.argmax(stack, axis=0)
        env = (stack[gov, np.arange(stack.shape[1])], gov)
    out = point_fields(first, as_dict if case.load_cases else {}, env)
    fy = case.material.yield_strength
    if fy is not None and fy > 0:  # von Mises over the yield strength, as a single-process run writes it
        out["utilisation"] = np.asarray(env[0] if env is not None else first["von_mises"], dtype=float) / float(fy)
    return out


def _gather_fields(comm, case: Case, piece: Piece, named: dict, quality: np.ndarray, kept: Optional[Kept]):
    """Every owned node's fields and every cell's quality on rank 0, in the mesh's numbering:
    ``(points, cells, point_data, cell_data)`` for result.vtu on rank 0, None elsewhere."""
    mine = {"old": piece.old[piece.owned], "cells": piece.cell_ids, "quality": quality,
            "cases": {name: (v["u"], v["stress"], v["temperature"]) for name, v in named.items()}}
    every = comm.gather(mine, root=0)
    if comm.rank != 0:
        return None
    mesh = kept.mesh
    n = mesh.nodes
    full = {}
    for name in named:
        u, s = np.zeros((n, 3)), np.zeros((n, 6))
        T = None if every[0]["cases"][name][2] is None else np.zeros(n)
        for p in every:
            c = p["cases"][name]
            u[p["old"]], s[p["old"]] = c[0], c[1]
            if T is not None:
                T[p["old"]] = c[2]
        full[name] = {"u": u, "stress": s, "temperature": T}
    q = np.zeros(mesh.cells.shape[0])
    for p in every:
        q[p["cells"]] = p["quality"]
    return mesh.points, mesh.cells, _fields_of(case, full), {"quality": q}


def vtk_layout(data: dict) -> list[tuple[str, str, int]]:
    """``[(name, VTK type, components)]`` of point or cell data arrays, as a .pvtu lists them."""
    types = {"f": "Float", "i": "Int", "u": "UInt"}
    return [(name, f"{types[a.dtype.kind]}{8 * a.dtype.itemsize}", 1 if a.ndim == 1 else int(a.shape[1]))
            for name, a in data.items()]


def _write_fields(comm, case: Case, piece: Piece, halo: Halo, named: dict, quality: np.ndarray,
                  fields_dir: Optional[Path], token: str) -> Optional[dict]:
    """Each rank writes its cells and their nodes' fields as one VTU piece (staged name); rank 0
    returns the pieces' names and array layout for result.pvtu (None without ``fields_dir``)."""
    if fields_dir is None:
        return None
    temps = piece.temperatures or [None] * len(named)
    local = {name: {"u": halo.spread(v["u"]), "stress": halo.spread(v["stress"]),
                    "temperature": combined_temperature(temps, v["w"])} for name, v in named.items()}
    pdata = _fields_of(case, local)
    pdata["node_id"] = piece.old.astype(np.int64)
    cdata = {"quality": quality}
    fields_dir = Path(fields_dir)
    fields_dir.mkdir(parents=True, exist_ok=True)
    name = f"result-{comm.rank:04d}.vtu"
    staged = fields_dir / f".{name}.{token}.part"
    ok = True
    try:
        write_vtu(staged, Mesh(points=piece.points, cells=piece.cells, faces=np.zeros((0, 3), np.int64),
                               face_surface=np.zeros(0, np.int64)), pdata, cdata)
    except OSError:
        ok = False
    files = comm.gather((str(staged), name, ok), root=0)
    if comm.rank != 0:
        return None
    return {"files": files, "point_data": vtk_layout(pdata), "cell_data": vtk_layout(cdata)}
