"""Supports (held DOFs and their values, elastic foundations) and loads (consistent nodal forces).

Held displacement components may lie in a local frame at each node (the normal of a planar
region, or the radial/tangential/axial directions of a cylindrical region). They are imposed
exactly, by elimination, in a rotated nodal basis: ``u_local = T u`` with ``T`` sparse block
diagonal (3 x 3 blocks whose rows are each node's local basis), ``K' = T K Tᵀ``. Nodes held only
along global axes keep the identity block, so the common case costs nothing extra.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional

import numpy as np
import scipy.sparse as sp

from .bodies import MaterialMap, assign_materials
from .case.schema import Case, Edge, ElasticSupport, ForceLoad, GravityLoad, PressureLoad, SpreadLoad, TemperatureLoad
from .errors import CaseError, ModelError
from .fem.assembly import body_force
from .fem.mixed import thermal_load_for
from .fem.nullspace import rigid_modes
from .fem.surface import (
    face_areas,
    face_normals,
    field_load,
    foundation_stiffness,
    node_areas,
    pressure_load,
    traction_load,
)
from .mesh import Mesh, PieceInfo, mesh_pieces, node_pieces
from .regions import edge_nodes, model_size, point_node, region_nodes

#: Constraint directions at one node closer to the span of earlier ones than this are dropped.
DEPENDENT_TOL = 1e-6
#: A piece's rigid motion is free when the restraint it meets is below this share of the strongest
#: restraint of that piece (eigenvalues of the normalised 6 x 6 restraint matrix; 1e-12 is a held
#: patch a millionth of the piece's size across, far below any real support, and far above the
#: 1e-16 round-off of a truly free motion).
PIECE_FREE_TOL = 1e-12
#: Free pieces named in the message (the rest are counted).
PIECES_NAMED = 3


@dataclass(frozen=True)
class Held:
    """Held DOFs of the (possibly rotated) nodal basis.

    Attributes
    ----------
    dofs : (c,) sorted DOF numbers ``3*node + component``; the component is a global axis for
        nodes with the identity frame and a local axis (0, 1, 2 of ``rotation``) for rotated nodes.
    values : (c,) prescribed displacement of each held component [length].
    owner : (c,) index of the support (in ``case.supports``) each DOF belongs to.
    rotated : (r,) nodes with a rotated frame, or None when every node keeps the global axes.
    rotation : (r, 3, 3) rows are the local basis vectors of each rotated node.
    con_nodes : (N,) nodes with any held direction.
    con_dirs : (N, 3, 3) the held unit directions at each (rows; zero rows pad).
    con_owner : (N, 3) support index of each held direction (-1 pads).
    """

    dofs: np.ndarray
    values: np.ndarray
    owner: np.ndarray
    rotated: Optional[np.ndarray] = None
    rotation: Optional[np.ndarray] = None
    con_nodes: Optional[np.ndarray] = None
    con_dirs: Optional[np.ndarray] = None
    con_owner: Optional[np.ndarray] = None

    def constraints(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Held directions as padded arrays ``(nodes (N,), dirs (N, 3, 3), owner (N, 3))``."""
        if self.con_nodes is not None:
            return self.con_nodes, self.con_dirs, self.con_owner
        nodes, inv = np.unique(self.dofs // 3, return_inverse=True)
        comp = self.dofs % 3
        dirs = np.zeros((nodes.size, 3, 3))
        owner = -np.ones((nodes.size, 3), dtype=np.int64)
        dirs[inv, comp, comp] = 1.0
        owner[inv, comp] = self.owner
        return nodes, dirs, owner

    def transform(self, ndof: int) -> Optional[sp.csr_matrix]:
        """``T (3n, 3n)`` with ``u_local = T u``, or None when no node is rotated."""
        if self.rotated is None or self.rotated.size == 0:
            return None
        n = ndof // 3
        plain = np.setdiff1d(np.arange(n), self.rotated)
        r = self.rotated
        rows = [3 * plain[:, None] + np.arange(3)]
        rr = (3 * r[:, None, None] + np.arange(3)[None, :, None]).repeat(3, axis=2)
        cc = (3 * r[:, None, None] + np.arange(3)[None, None, :]).repeat(3, axis=1)
        data = np.concatenate([np.ones(3 * plain.size), self.rotation.ravel()])
        ri = np.concatenate([rows[0].ravel(), rr.ravel()])
        ci = np.concatenate([rows[0].ravel(), cc.ravel()])
        return sp.csr_matrix((data, (ri, ci)), shape=(ndof, ndof))


def _unit(v) -> np.ndarray:
    v = np.asarray(v, dtype=float)
    return v / np.linalg.norm(v)


def region_plane(mesh: Mesh, ids, key: str) -> tuple[np.ndarray, np.ndarray]:
    """Unit normal ``(3,)`` and a point ``(3,)`` of a planar region; CaseError when it is not planar."""
    pts = mesh.points[region_nodes(mesh, ids)]
    c = pts.mean(axis=0)
    _, sv, Vt = np.linalg.svd(pts - c, full_matrices=False)
    n = Vt[-1]
    dev = np.abs((pts - c) @ n).max()
    if dev > 1e-6 * model_size(mesh):
        raise CaseError(key, "n", f"needs a planar region, but its nodes lie up to {dev:.3g} off the best plane; "
                        "use r/t/a for a cylindrical region or x/y/z")
    # Orient like the mean outward normal of the faces, for stable reporting.
    fn = face_normals(mesh.points, mesh.surface_faces(ids)).sum(axis=0)
    return (n if n @ fn >= 0 else -n), c


#: What to write instead, by the use of a cylindrical region (the key's last part).
CYLINDER_HINTS = {"fix": "use n for a planar region or x/y/z",
                  "region": "pin bearing acts in a hole; use distribution = \"uniform\" on other surfaces"}


def region_cylinder(mesh: Mesh, ids, key: str, catalogue=None) -> tuple[np.ndarray, np.ndarray, float]:
    """Axis ``(3,)``, a point on it ``(3,)`` and the radius of a cylindrical region (fitted to its
    nodes); CaseError when the region is not a cylinder (a flat region too: a cylinder fitted to a
    plane has a huge radius and an arbitrary axis)."""
    from .mesh import fit_cylinder

    nodes = region_nodes(mesh, ids)
    pts = mesh.points[nodes]
    hint = CYLINDER_HINTS.get(key.rsplit(".", 1)[-1], CYLINDER_HINTS["fix"])
    diag = model_size(mesh)
    c = pts.mean(axis=0)
    n_flat = np.linalg.svd(pts - c, full_matrices=False)[2][-1]
    if np.abs((pts - c) @ n_flat).max() <= 1e-6 * diag:
        raise CaseError(key, ids if isinstance(ids, list) else list(ids),
                        f"needs a cylindrical region, but these surfaces lie in one plane; {hint}")
    faces = mesh.surface_faces(ids)
    axis0 = None
    if catalogue is not None:
        cyl = [s for s in catalogue if s.id in set(ids) and s.kind == "cylinder"]
        if cyl:
            axis0 = np.asarray(cyl[0].axis)
    if axis0 is None:
        nrm = face_normals(mesh.points, faces)
        w, V = np.linalg.eigh(nrm.T @ nrm)
        axis0 = V[:, 0]
    fit = fit_cylinder(pts, _unit(axis0), pts.mean(axis=0))
    if fit is None or fit[3] > max(1e-5 * diag, 1e-4 * fit[2]):
        dev = "?" if fit is None else f"{fit[3]:.3g}"
        raise CaseError(key, ids if isinstance(ids, list) else list(ids),
                        f"needs a cylindrical region (its nodes lie up to {dev} off the best cylinder); {hint}")
    a, p0, r, _ = fit
    if a[np.abs(a).argmax()] < 0:
        a = -a
    return a, p0, r


def cylindrical_frames(points: np.ndarray, axis: np.ndarray, axis_point: np.ndarray) -> np.ndarray:
    """Radial, tangential, axial unit vectors ``(p, 3, 3)`` (rows) at points ``(p, 3)`` about an axis."""
    a = _unit(axis)
    d = points - axis_point
    rv = d - np.outer(d @ a, a)
    rn = np.linalg.norm(rv, axis=1, keepdims=True)
    if np.any(rn[:, 0] <= 1e-12 * max(rn.max(), 1e-300)):
        raise ModelError("a node lies on the axis of the cylinder of a radial/tangential/axial hold: "
                         "its radial direction is undefined")
    er = rv / rn
    et = np.cross(a, er)
    return np.stack([er, et, np.broadcast_to(a, er.shape)], axis=1)


def _support_constraints(case: Case, mesh: Mesh, region_ids, catalogue=None):
    """Held directions of every rigid support: nodes (c,), unit dirs (c, 3), values (c,), owner (c,)."""
    nodes_l, dirs_l, vals_l, own_l = [], [], [], []
    for i, s in enumerate(case.supports):
        if isinstance(s, ElasticSupport):
            continue
        key = f"support[{i + 1}].fix"
        sel = case.regions.get(s.region)
        if s.at is not None:  # a point support: one node, global components
            nodes = np.array([point_node(mesh, s.at, s.tol, f"support[{i + 1}].at")[0]], dtype=np.int64)
        elif isinstance(sel, Edge):
            # An edge region holds nodes along a line, in the global frame only.
            if s.frame != "global":
                raise CaseError(key, s.fix, f"region {s.region!r} is an edge (nodes along a line); hold "
                                "global components x, y, z there")
            nodes = edge_nodes(sel, mesh, region_ids, f"regions.{s.region}.edge")
        else:
            nodes = region_nodes(mesh, region_ids[s.region])
        if s.frame == "global":
            basis = np.broadcast_to(np.eye(3), (nodes.size, 3, 3))
        elif s.frame == "normal":
            n, _ = region_plane(mesh, region_ids[s.region], key)
            basis = np.broadcast_to(np.stack([n, np.zeros(3), np.zeros(3)]), (nodes.size, 3, 3))
        else:
            a, p0, _ = region_cylinder(mesh, region_ids[s.region], key, catalogue)
            basis = cylindrical_frames(mesh.points[nodes], a, p0)
        for c in s.components:
            nodes_l.append(nodes)
            dirs_l.append(basis[:, c, :])
            vals_l.append(np.full(nodes.size, s.value[c]))
            own_l.append(np.full(nodes.size, i))
    if not nodes_l:
        return np.zeros(0, np.int64), np.zeros((0, 3)), np.zeros(0), np.zeros(0, np.int64)
    return (np.concatenate(nodes_l), np.concatenate(dirs_l), np.concatenate(vals_l),
            np.concatenate(own_l))


def held_dofs(case: Case, mesh: Mesh, region_ids: dict[str, list[int]], catalogue=None) -> Held:
    """Collect the held directions of every support and build the nodal frames.

    At each node the held directions of all supports are merged in support order: a direction in
    the span of earlier ones is dropped (it keeps the first support, as a DOF held twice does),
    the rest span the held subspace. Nodes whose held directions are global axes, or which are
    held in all three directions, keep the global frame; the others get a local frame whose
    first axes span the held subspace.
    """
    cn, cd, cv, co = _support_constraints(case, mesh, region_ids, catalogue)
    if cn.size == 0:
        z = np.zeros(0, np.int64)
        return Held(z, np.zeros(0), z)
    order = np.argsort(cn, kind="stable")
    cn, cd, cv, co = cn[order], cd[order], cv[order], co[order]
    U, start, counts = np.unique(cn, return_index=True, return_counts=True)
    N = U.size
    m = max(int(counts.max()), 3)
    slot = np.arange(cn.size) - np.repeat(start, counts)
    grp = np.repeat(np.arange(N), counts)
    D = np.zeros((N, m, 3))
    V = np.zeros((N, m))
    O = -np.ones((N, m), dtype=np.int64)
    valid = np.zeros((N, m), dtype=bool)
    D[grp, slot], V[grp, slot], O[grp, slot], valid[grp, slot] = cd, cv, co, True
    # Gram-Schmidt over the directions at each node, vectorised over nodes.
    Q = np.zeros((N, 3, 3))
    k = np.zeros(N, dtype=np.int64)
    keep = np.zeros((N, m), dtype=bool)
    for j in range(m):
        d = D[:, j]
        r = d - np.einsum("nl,nld->nd", np.einsum("nld,nd->nl", Q, d), Q)
        nr = np.linalg.norm(r, axis=1)
        ok = valid[:, j] & (nr > DEPENDENT_TOL) & (k < 3)
        Q[ok, k[ok]] = r[ok] / nr[ok, None]
        k[ok] += 1
        keep[ok, j] = True
    # Compact the kept directions into the first k slots.
    pos = np.argsort(~keep, axis=1, kind="stable")[:, :3]
    E = np.take_along_axis(D, pos[:, :, None], axis=1)
    Vk = np.take_along_axis(V, pos, axis=1)
    Ok = np.take_along_axis(O, pos, axis=1)
    pad = np.arange(3)[None, :] >= k[:, None]
    E[pad] = 0.0
    Vk[pad] = 0.0
    Ok[pad] = -1

    axis_aligned = np.all((np.abs(E).max(axis=2) > 1 - 1e-12) | pad, axis=1)
    rot = (k < 3) & ~axis_aligned
    dofs_l, vals_l, own_l = [], [], []
    # Global frame, held in all three directions: u solves E u = v.
    full = k == 3
    if full.any():
        u = np.linalg.solve(E[full], Vk[full][..., None])[..., 0]
        c_own = np.take_along_axis(Ok[full], np.argmax(np.abs(E[full]), axis=1), axis=1)
        dofs_l.append((3 * U[full][:, None] + np.arange(3)).ravel())
        vals_l.append(u.ravel())
        own_l.append(c_own.ravel())
    # Global frame, held along axes: the component of each kept direction.
    ax = (k < 3) & axis_aligned
    if ax.any():
        sel = ~pad[ax]
        comp = np.argmax(np.abs(E[ax]), axis=2)
        sign = np.take_along_axis(E[ax], comp[:, :, None], axis=2)[..., 0]
        dofs_l.append((3 * U[ax][:, None] + comp)[sel])
        vals_l.append((Vk[ax] / np.where(sel, sign, 1.0))[sel])
        own_l.append(Ok[ax][sel])
    rotated = rotation = None
    if rot.any():
        Qr, kr = Q[rot].copy(), k[rot]
        one = kr == 1
        if one.any():
            q1 = Qr[one, 0]
            e = np.eye(3)[np.argmin(np.abs(q1), axis=1)]
            q2 = np.cross(q1, e)
            q2 /= np.linalg.norm(q2, axis=1, keepdims=True)
            Qr[one, 1] = q2
        Qr[:, 2] = np.cross(Qr[:, 0], Qr[:, 1])
        Qr[:, 2] /= np.linalg.norm(Qr[:, 2], axis=1, keepdims=True)
        # Local values a solve L a = v with L[j, l] = e_j . q_l (lower triangular on the held block).
        L = np.einsum("njd,nld->njl", E[rot], Qr)
        padr = pad[rot]
        L[padr] = 0.0
        idx = np.nonzero(padr)
        L[idx[0], idx[1], idx[1]] = 1.0
        a = np.linalg.solve(L, Vk[rot][..., None])[..., 0]
        sel = ~padr
        dofs_l.append((3 * U[rot][:, None] + np.arange(3))[sel])
        vals_l.append(a[sel])
        own_l.append(Ok[rot][sel])
        rotated, rotation = U[rot], Qr
    d = np.concatenate(dofs_l)
    o = np.argsort(d)
    return Held(d[o], np.concatenate(vals_l)[o], np.concatenate(own_l)[o], rotated, rotation, U, E, Ok)


def split_reactions(held: Held, points: np.ndarray, r: np.ndarray, n_supports: int):
    """Split the nodal reactions ``r (n, 3)`` at held nodes among the supports that hold them.

    At each node the reaction lies in the span of the held directions ``e_j``; it is written as
    ``Σ λ_j e_j`` (least squares), and ``λ_j e_j`` goes to the support of ``e_j``.

    Returns
    -------
    nodal : (n, 3) the reactions, restricted to the held directions.
    per_support : list of (n, 3) arrays, one per support.
    """
    nodes, E, O = held.constraints()
    n = points.shape[0]
    nodal = np.zeros((n, 3))
    per = [np.zeros((n, 3)) for _ in range(n_supports)]
    if nodes.size == 0:
        return nodal, per
    rn = r[nodes]
    G = np.einsum("njd,nld->njl", E, E)
    padded = O < 0
    idx = np.nonzero(padded)
    G[idx[0], idx[1], idx[1]] = 1.0
    lam = np.linalg.solve(G, np.einsum("njd,nd->nj", E, rn)[..., None])[..., 0]
    lam[padded] = 0.0
    parts = lam[..., None] * E  # (N, 3, 3)
    nodal[nodes] = parts.sum(axis=1)
    for i in range(n_supports):
        mine = (O == i)[..., None]
        per[i][nodes] = np.where(mine, parts, 0.0).sum(axis=1)
    return nodal, per


@dataclass(frozen=True)
class Foundation:
    """An elastic support's stiffness ``K (3n, 3n)`` (CSR), with the support's index and region."""

    index: int
    region: str
    K: sp.csr_matrix


def foundations(case: Case, mesh: Mesh, region_ids: dict[str, list[int]]) -> list[Foundation]:
    """Consistent stiffness matrices of every elastic support."""
    out = []
    for i, s in enumerate(case.supports):
        if isinstance(s, ElasticSupport):
            faces = mesh.surface_faces(region_ids[s.region])
            out.append(Foundation(i, s.region, foundation_stiffness(mesh.points, faces, s.normal, s.tangential)))
    return out


@dataclass(frozen=True)
class AppliedLoad:
    """One load's nodal forces ``f (3n,)`` and its resultant force and moment about the origin.

    ``temperature (n,)`` is the nodal temperature change [K] of a temperature load (its thermal
    strain is subtracted again in stress recovery); ``info`` holds kind-specific facts (peak
    bearing pressure, the point of a spread load and the moment about it, ...).
    """

    label: str
    f: np.ndarray
    force: np.ndarray
    moment: np.ndarray
    area: float | None = None
    kind: str = ""
    index: int = -1
    temperature: Optional[np.ndarray] = None
    info: dict = field(default_factory=dict)


def resultant(points: np.ndarray, f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Resultant force ``(3,)`` and moment about the origin ``(3,)`` of nodal forces ``f (3n,)``."""
    F = f.reshape(-1, 3)
    return F.sum(axis=0), np.cross(points, F).sum(axis=0)


def bearing_load(points: np.ndarray, faces: np.ndarray, axis: np.ndarray, axis_point: np.ndarray,
                 force: np.ndarray) -> tuple[np.ndarray, Callable[[np.ndarray], np.ndarray], float]:
    """Pin-bearing pressure on a cylindrical hole whose resultant equals ``force`` exactly.

    The radial pressure ``p = p0 cos θ (1 + γ sin θ)`` on the half of the hole facing the load
    (θ the angle between the radial direction and the load direction, |θ| < 90°; zero on the
    other half) pushes the material away from the axis. ``p0`` is set so that the resultant
    equals |F|; the small ``γ`` (zero on a symmetric mesh) cancels the sideways resultant that a
    discrete mesh leaves, so the resultant vector is exact to round-off. The traction is along
    the exact radial direction of the fitted axis, so it has no axial component.

    Parameters
    ----------
    points : (n, 3); faces : (f, k) the hole's faces; axis, axis_point : (3,) the hole's axis.
    force : (3,) [force], perpendicular to the axis.

    Returns
    -------
    f : (3n,) nodal forces; pressure : callable ``(p, 3) -> (p,)`` [stress]; p0 [stress].
    """
    a = _unit(axis)
    F = np.asarray(force, dtype=float)
    Fp = F - (F @ a) * a
    d = _unit(Fp)
    t = np.cross(a, d)

    def angles(x):
        rv = x - axis_point - np.einsum("...d,d->...", x - axis_point, a)[..., None] * a
        er = rv / np.linalg.norm(rv, axis=-1, keepdims=True)
        return er, er @ d, er @ t

    def shape(k):
        def traction(x, _n):
            er, c, s = angles(x)
            w = np.maximum(c, 0.0) * (s if k else 1.0)
            return w[..., None] * er
        return traction

    f1, f2 = field_load(points, faces, shape(0)), field_load(points, faces, shape(1))
    R1, R2 = f1.reshape(-1, 3).sum(axis=0), f2.reshape(-1, 3).sum(axis=0)
    A = np.array([[R1 @ d, R2 @ d], [R1 @ t, R2 @ t]])
    alpha, beta = np.linalg.solve(A, np.array([np.linalg.norm(Fp), 0.0]))
    f = alpha * f1 + beta * f2

    def pressure(x):
        _, c, s = angles(np.asarray(x, dtype=float))
        return np.maximum(c, 0.0) * (alpha + beta * s)

    return f, pressure, float(alpha)


def spread_load(points: np.ndarray, faces: np.ndarray, at: np.ndarray, force: np.ndarray,
                  moment: np.ndarray) -> np.ndarray:
    """Nodal forces ``(3n,)`` of a force and moment at the point ``at`` passed to faces, spread by nodal area.

    With nodal weights ``w_i = ∫ N_i dA``, weighted centroid ``c`` and ``r_i = x_i − c``, the nodal
    forces are ``f_i = w_i (F / Σw + ω × r_i)`` with ``J ω = M_c``, ``J = Σ w_i (|r_i|² I − r_i r_iᵀ)``
    and ``M_c = M + (at − c) × F``: their resultant is F and their moment about ``at`` is M exactly.
    No stiffness is added (the region deforms freely).
    """
    w = node_areas(points, faces)
    nodes = np.flatnonzero(w != 0)
    wi = w[nodes]
    W = wi.sum()
    x = points[nodes]
    c = (wi[:, None] * x).sum(axis=0) / W
    r = x - c
    J = (wi * (r * r).sum(axis=1)).sum() * np.eye(3) - np.einsum("i,id,ie->de", wi, r, r)
    F = np.asarray(force, dtype=float)
    Mc = np.asarray(moment, dtype=float) + np.cross(np.asarray(at, dtype=float) - c, F)
    if np.linalg.cond(J) > 1e12:
        raise ModelError("the region of a force at a point is degenerate (its nodes lie on a line): "
                         "it cannot carry a moment")
    omega = np.linalg.solve(J, Mc)
    f = np.zeros((points.shape[0], 3))
    f[nodes] = wi[:, None] * (F / W + np.cross(omega, r))
    return f.ravel()


def _csv_column(header: str, length_unit: str, key: str, path: Path) -> tuple[str, float]:
    """A CSV column's name (lower case) and the factor that turns its numbers into the case's
    ``length_unit`` (1 for the value column and for coordinates without a unit): ``"x [mm]"``."""
    name, _, rest = header.partition("[")
    name = name.strip().lower()
    if not rest:
        return name, 1.0
    unit = rest.rstrip().rstrip("]").strip()
    if name not in ("x", "y", "z"):
        # A temperature column: the size of its degree in kelvin, as the case loader reads a
        # temperature change (its differences from the reference, given on the same scale, are
        # turned into kelvin; the offset of the scale cancels out).
        from .units import SYSTEMS, convert_quantity

        try:  # a temperature difference is the same in every unit system of ours
            return name, convert_quantity(f"1 {unit}", "temperature", SYSTEMS["mm-N"], key=f"{key}.file")
        except CaseError:
            raise CaseError(f"{key}.file", str(path), f"column {header!r}: a value column's unit must be a "
                            "temperature scale (K, degC, degF, degR); the reference is given on the same "
                            "scale") from None
    from .units import length_unit_metres

    return name, length_unit_metres(unit, key=f"{key}.file") / length_unit_metres(length_unit, key=f"{key}.file")


def read_point_data(path: Path, field_name: Optional[str], key: str,
                    length_unit: str = "", meta: Optional[dict] = None
                    ) -> tuple[np.ndarray, np.ndarray, Optional[np.ndarray]]:
    """Points ``(p, 3)`` [case length], values ``(p,)`` and tetrahedral cells (or None) of a CSV or
    VTU/VTK file. CSV coordinates may name their unit (``x [mm]``), converted to ``length_unit``
    (the case's, a pint expression such as "mm" or "inch"); without one, and in VTU/VTK files, the
    numbers are taken in the case's length unit. A CSV value column may name its temperature scale
    (``T [degF]``): ``meta``, when given, receives ``value_degree_k``, kelvin per degree of its
    values (1 without a unit); the values themselves are returned as written."""
    from .files import check_input_file, read_input_bytes
    from .resources import file_read_limit

    limit, why = file_read_limit(path)
    check_input_file(path, f"{key}.file", max_bytes=limit, limit_reason=why)
    if path.suffix.lower() == ".csv":
        raw = read_input_bytes(path, f"{key}.file", max_bytes=limit, limit_reason=why)
        try:
            lines = [ln for ln in raw.decode("utf-8-sig").splitlines() if ln.strip()]
        except UnicodeDecodeError as err:
            raise CaseError(f"{key}.file", str(path), f"cannot be read as UTF-8 text ({err})") from None
        cols = [_csv_column(h, length_unit or "mm", key, path) for h in lines[0].split(",")] if lines else []
        head = [c[0] for c in cols]
        if not {"x", "y", "z"} <= set(head):
            raise CaseError(f"{key}.file", str(path), "needs a header row naming the columns x, y, z and the value")
        others = [h for h in head if h not in ("x", "y", "z")]
        name = field_name.lower() if field_name else (others[0] if len(others) == 1 else None)
        if name not in head:
            raise CaseError(f"{key}.field", field_name, f"must name one column of {', '.join(others)}")
        try:
            data = np.array([[float(v) for v in ln.split(",")] for ln in lines[1:]])
        except ValueError as err:
            raise CaseError(f"{key}.file", str(path), f"has a value that is not a number ({err})") from None
        if data.size and not np.isfinite(data).all():
            row = int(np.flatnonzero(~np.isfinite(data).all(axis=1))[0]) + 2
            raise CaseError(f"{key}.file", str(path), f"row {row}: a value that is not a finite number")
        if data.ndim != 2 or data.shape[0] == 0 or data.shape[1] != len(head):
            raise CaseError(f"{key}.file", str(path), "has no data rows, or rows of unequal length")
        scale = np.array([cols[head.index(c)][1] for c in "xyz"])
        if meta is not None:
            meta["value_degree_k"] = cols[head.index(name)][1]
        return data[:, [head.index(c) for c in "xyz"]] * scale, data[:, head.index(name)], None
    import meshio

    from .fdcapture import captured_fds

    failure = None
    with captured_fds():  # meshio prints to fd 1/2 and may call sys.exit on a corrupt file
        try:
            m = meshio.read(str(path))
        except (Exception, SystemExit) as err:
            failure = f"{type(err).__name__}: {err}"
    if failure is not None:
        raise CaseError(f"{key}.file", str(path), f"cannot be read ({failure[:300]})") from None
    arrays = [k for k, v in m.point_data.items() if np.asarray(v).ndim == 1 or np.asarray(v).shape[1:] == (1,)]
    name = field_name if field_name else (arrays[0] if len(arrays) == 1 else None)
    if name not in arrays:
        raise CaseError(f"{key}.field", field_name,
                        f"must name one scalar point array of {', '.join(arrays) or 'none'}")
    cells = None
    for c in m.cells:
        if c.type in ("tetra", "tetra10"):
            cells = c.data[:, :4] if c.type == "tetra10" else c.data
    pts, vals = m.points[:, :3].astype(float), np.asarray(m.point_data[name], dtype=float).ravel()
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(pts).all(axis=1) | ~np.isfinite(vals)
    if bad.any():
        raise CaseError(f"{key}.file", str(path), f"{int(bad.sum())} point(s) have coordinates or values that are not "
                        f"finite numbers (first: point {int(np.flatnonzero(bad)[0])})")
    return pts, vals, cells


def interpolate_point_data(src: np.ndarray, values: np.ndarray, cells: Optional[np.ndarray],
                           targets: np.ndarray, tol: float) -> np.ndarray:
    """Values at ``targets (n, 3)`` from point data: linear within the file's tetrahedra (or a
    Delaunay tetrahedralisation of scattered points), nearest point beyond them."""
    from scipy.spatial import cKDTree

    near = values[cKDTree(src).query(targets)[1]]
    if cells is not None:
        from .post.probe import interpolate, locate

        loc = locate(src, cells, targets)
        out = interpolate(cells, loc, values)
        return np.where(loc.outside <= tol, out, near)
    if src.shape[0] < 5:
        return near
    from scipy.interpolate import LinearNDInterpolator

    try:
        lin = LinearNDInterpolator(src, values)(targets)
    except Exception:  # coplanar or otherwise degenerate point sets
        return near
    return np.where(np.isfinite(lin), lin, near)


def temperature_field(ld: TemperatureLoad, mesh: Mesh, key: str, length_unit: str = "",
                      info: Optional[dict] = None) -> np.ndarray:
    """Nodal temperature change ``(n,)`` [K] of a temperature load. ``length_unit`` is the case's
    (for CSV coordinates that name theirs); ``info``, when given, receives ``file_points_span``, the
    bounding-box diagonal of a file's points [case length]."""
    degree = 1.0  # kelvin per degree of the field's numbers (a CSV column may name its scale)
    if ld.delta is not None:
        return np.full(mesh.nodes, float(ld.delta))
    if ld.formula is not None:
        from .formula import parse_formula

        T = parse_formula(ld.formula)(mesh.points)
    else:
        meta: dict = {}
        src, vals, cells = read_point_data(Path(ld.file), ld.field, key, length_unit, meta)
        degree = float(meta.get("value_degree_k", 1.0))
        if info is not None:
            info["file_points_span"] = float(np.linalg.norm(src.max(axis=0) - src.min(axis=0))) if len(src) else 0.0
        T = interpolate_point_data(src, vals, cells, mesh.points, 1e-3 * model_size(mesh))
    if not np.all(np.isfinite(T)):
        bad = int(np.sum(~np.isfinite(T)))
        raise CaseError(key, ld.formula or str(ld.file), f"gives a value that is not finite at {bad} node(s)")
    return (T - ld.reference) * degree


def load_vectors(case: Case, mesh: Mesh, region_ids: dict[str, list[int]], catalogue=None,
                 materials: Optional[MaterialMap] = None, formulation: str = "displacement") -> list[AppliedLoad]:
    """Consistent nodal force vectors of every load of the case, in order.

    Gravity and temperature loads take each cell's density and expansion from ``materials`` (the
    material of every body; :func:`elastofe.bodies.assign_materials` when not given); a thermal load
    is consistent with the element ``formulation`` (see :mod:`elastofe.fem.mixed`).
    """
    out = []
    if materials is None and any(isinstance(ld, (GravityLoad, TemperatureLoad)) for ld in case.loads):
        materials = assign_materials(case, mesh)
    for i, ld in enumerate(case.loads, 1):
        area = None
        info: dict = {}
        temperature = None
        if isinstance(ld, ForceLoad) and ld.distribution == "bearing":
            faces = mesh.surface_faces(region_ids[ld.region])
            area = float(face_areas(mesh.points, faces).sum())
            a, p0, radius = region_cylinder(mesh, region_ids[ld.region], f"load[{i}].region", catalogue)
            F = np.asarray(ld.force)
            if abs(F @ a) > 1e-9 * np.linalg.norm(F):
                raise CaseError(f"load[{i}].force", list(ld.force),
                                "a pin-bearing force must be perpendicular to the hole axis "
                                f"({', '.join(f'{c:.4g}' for c in a)}); "
                                "apply an axial force as a separate uniform force load")
            f, _, peak = bearing_load(mesh.points, faces, a, p0, F)
            length = area / (2 * np.pi * radius)
            info = {"peak_pressure": peak, "nominal_bearing_stress": float(np.linalg.norm(F) / (2 * radius * length)),
                    "axis": a, "axis_point": p0, "radius": radius}
            label = f"load[{i}] pin bearing on {ld.region}"
        elif isinstance(ld, ForceLoad):
            faces = mesh.surface_faces(region_ids[ld.region])
            area = float(face_areas(mesh.points, faces).sum())
            f = traction_load(mesh.points, faces, np.asarray(ld.force) / area)
            label = f"load[{i}] force on {ld.region}"
        elif isinstance(ld, SpreadLoad):
            faces = mesh.surface_faces(region_ids[ld.region])
            area = float(face_areas(mesh.points, faces).sum())
            f = spread_load(mesh.points, faces, np.asarray(ld.at), np.asarray(ld.force), np.asarray(ld.moment))
            Fr = f.reshape(-1, 3)
            info = {"at": np.asarray(ld.at),
                    "moment_about_at": np.cross(mesh.points - np.asarray(ld.at), Fr).sum(axis=0)}
            label = (f"load[{i}] force and moment at ({', '.join(f'{c:g}' for c in ld.at)}) "
                     f"{case.units.labels['length']} on {ld.region}")
        elif isinstance(ld, PressureLoad) and ld.gradient is not None:
            faces = mesh.surface_faces(region_ids[ld.region])
            area = float(face_areas(mesh.points, faces).sum())
            g, x0 = np.asarray(ld.gradient), np.asarray(ld.origin)

            def traction(x, nhat, ld=ld, g=g, x0=x0):
                p = ld.pressure + (x - x0) @ g
                if ld.clip:
                    p = np.maximum(p, 0.0)
                return -p[..., None] * nhat

            f = field_load(mesh.points, faces, traction)
            info = {"pressure": ld.pressure, "gradient": g, "origin": x0, "clip": bool(ld.clip)}
            label = f"load[{i}] varying pressure on {ld.region}"
        elif isinstance(ld, PressureLoad):
            faces = mesh.surface_faces(region_ids[ld.region])
            area = float(face_areas(mesh.points, faces).sum())
            f = pressure_load(mesh.points, faces, ld.pressure)
            info = {"pressure": ld.pressure}
            label = f"load[{i}] pressure on {ld.region}"
        elif isinstance(ld, GravityLoad):
            for mat in materials.materials:
                if mat.density is None:
                    raise CaseError(f"{mat.key}.density", None, f"is required by the gravity load load[{i}]")
            rho = materials.per_cell([mat.density for mat in materials.materials])
            g = case.units.gravity() * np.asarray(ld.gravity)
            f = body_force(mesh.points, mesh.cells, rho * g if np.ndim(rho) == 0 else rho[:, None] * g)
            label = f"load[{i}] gravity"
        elif isinstance(ld, TemperatureLoad):
            for mat in materials.materials:
                if mat.expansion is None:
                    raise CaseError(f"{mat.key}.expansion", None, f"is required by the temperature load load[{i}]")
            span: dict = {}
            temperature = temperature_field(ld, mesh, f"load[{i}].temperature", case.units.length, span)
            f = thermal_load_for(mesh.points, mesh.cells, temperature,
                                 materials.per_cell(materials.thermal_coefficients()), formulation)
            info = {"min_change": float(temperature.min()), "max_change": float(temperature.max()), **span}
            label = f"load[{i}] temperature change"
        else:  # pragma: no cover
            raise TypeError(ld)
        F, M = resultant(mesh.points, f)
        kind = type(ld).__name__.replace("Load", "").lower()
        if isinstance(ld, ForceLoad) and ld.distribution == "bearing":
            kind = "bearing"
        out.append(AppliedLoad(label, f, F, M, area, kind, i - 1, temperature, info))
    return out


def _direction(v: np.ndarray) -> str:
    v = v / np.linalg.norm(v)
    for i, name in enumerate("xyz"):
        if abs(abs(v[i]) - 1) < 1e-6:
            return name
    return "(" + ", ".join(f"{c:.3g}" for c in v) + ")"


def free_rigid_motions(points: np.ndarray, held: np.ndarray, scale: float, *,
                       directions: Optional[tuple[np.ndarray, np.ndarray]] = None,
                       foundations: Optional[list] = None) -> list[str]:
    """Rigid-body motions not prevented by the supports, described in words (empty when restrained).

    ``held`` are held global DOFs; ``directions = (nodes (N,), dirs (N, 3, 3))`` gives held
    directions in local frames instead (zero rows pad); each of ``foundations`` (CSR stiffness
    matrices of elastic supports) restrains the motions it resists, ``Rᵀ K R`` not zero.
    """
    c = points.mean(axis=0)
    R = rigid_modes(points, c)
    Rs = R.copy()
    Rs[:, 3:] /= scale  # rotations scaled to displacements of order one over the model
    if directions is not None:
        nodes, dirs = directions
        rows = np.einsum("njd,ndk->njk", dirs, Rs.reshape(-1, 3, 6)[nodes]).reshape(-1, 6)
        Rc = rows[np.abs(dirs).sum(axis=2).ravel() > 0]
    else:
        Rc = Rs[held]
    for K in foundations or []:
        Qf = Rs.T @ (K @ Rs)
        w, V = np.linalg.eigh(0.5 * (Qf + Qf.T))
        if w.max() > 0:
            w = np.clip(w / w.max(), 0.0, None)
            Rc = np.vstack([Rc, (np.sqrt(w)[:, None] * V.T)])
    if Rc.shape[0] == 0:
        return ["translation along x", "translation along y", "translation along z",
                "rotation about x", "rotation about y", "rotation about z"]
    if Rc.shape[0] < 6:
        Rc = np.vstack([Rc, np.zeros((6 - Rc.shape[0], 6))])
    _, s, Vt = np.linalg.svd(Rc, full_matrices=False)  # thin: (c, 6) rows, never a c x c factor
    s = np.concatenate([s, np.zeros(6 - s.size)]) if s.size < 6 else s
    smax = max(s.max(), 1e-300)
    N = np.array([Vt[i] for i in range(6) if s[i] <= 1e-8 * smax or i >= Rc.shape[0]])  # (d, 6)
    if N.size == 0:
        return []
    return _describe_free(N, c, scale)


def _span_names(Q: np.ndarray, tol: float = 1e-6) -> list[np.ndarray]:
    """Directions spanning the column space of orthonormal ``Q (3, r)``: coordinate axes first."""
    eye = np.eye(3)
    found = [eye[i] for i in range(3) if Q.shape[1] and np.linalg.norm(eye[i] - Q @ (Q.T @ eye[i])) < tol]
    dirs = list(found)
    if len(dirs) < Q.shape[1]:
        A = np.array(found).T if found else np.zeros((3, 0))
        u, sv, _ = np.linalg.svd(Q - A @ (A.T @ Q), full_matrices=False)
        dirs += [u[:, j] for j in range(Q.shape[1] - len(found)) if sv[j] > tol]
    return dirs


def _orth(M: np.ndarray, tol: float = 1e-6) -> np.ndarray:
    """Orthonormal basis ``(3, r)`` of the column space of ``M (3, k)``."""
    if M.shape[1] == 0:
        return np.zeros((3, 0))
    u, sv, _ = np.linalg.svd(M, full_matrices=False)
    return u[:, sv > tol * sv.max()] if sv.max() > 1e-300 else np.zeros((3, 0))


def _describe_free(N: np.ndarray, c: np.ndarray, scale: float) -> list[str]:
    """Words for the free subspace spanned by the rows of ``N (d, 6)`` (scaled rigid modes about ``c``).

    The subspace is described in a canonical basis, not the arbitrary one an SVD returns: free
    translations first, along the coordinate axes where they lie in it; then free rotations, about
    axes parallel to the coordinate axes where possible, each through the point its axis passes
    (a rotation about an axis through the centroid is named "rotation about x" alone).
    """
    F = np.vstack([N[:, :3].T, N[:, 3:].T / scale])  # columns (t; w): u(x) = t + w x (x - c)
    W = F[3:]
    _, sw, vtw = np.linalg.svd(W)
    rank_w = int(np.sum(sw > 1e-6 / max(scale, 1e-300))) if sw.size else 0
    Qt = _orth(F[:3] @ vtw[rank_w:].T)  # combinations with no rotation: pure translations
    out = [f"translation along {_direction(d)}" for d in _span_names(Qt)]
    for d in _span_names(_orth(W) if rank_w else np.zeros((3, 0))):
        t = F[:3] @ np.linalg.lstsq(W, d, rcond=None)[0]
        t = t - Qt @ (Qt.T @ t)  # adding a free translation changes nothing
        t = t - d * np.dot(d, t)
        p = c + np.cross(d, t)
        if np.linalg.norm(p - c) <= 1e-9 * max(scale, 1e-300) and len(_direction(d)) == 1:
            out.append(f"rotation about {_direction(d)}")
            continue
        p = np.where(np.abs(p) < 1e-9 * max(scale, 1e-300), 0.0, p)  # no "1.1e-16" for zero
        out.append(f"rotation about an axis along {_direction(d)} through ({', '.join(f'{x:.4g}' for x in p)})")
    return out


def piece_restraint(points: np.ndarray, cells: np.ndarray, labels: np.ndarray, count: int,
                     directions: tuple[np.ndarray, np.ndarray], foundations: Optional[list] = None
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The restraint of each face-connected piece against its own six rigid-body motions.

    Each piece is checked on its own: a node shared with another piece along an edge or at a
    vertex is no connection (such a joint carries no moment), so only the piece's held
    directions and elastic supports count. Vectorised over pieces: the 6 x 6 matrices
    ``Σ rᵀ r`` of the held rows ``r = [d, ((x - c) x d) / s]`` (direction d held at x; piece
    centroid c, size s) and ``Rᵀ K R`` of each foundation, each normalised by its largest
    eigenvalue, are summed and diagonalised in one batch.

    Parameters
    ----------
    points : (n, 3) [length]
    cells : (m, k) int64
    labels : (m,) int64
        Piece of each cell (:func:`elastofe.mesh.connected_pieces`).
    count : int
        Number of pieces.
    directions : (nodes (N,), dirs (N, 3, 3))
        Held unit directions at each node (zero rows pad), as :meth:`Held.constraints` gives.
    foundations : list of (3n, 3n) CSR matrices, optional
        Stiffness of elastic supports.

    Returns
    -------
    free : (count,) int64
        Number of free rigid-body motions of each piece (0: restrained).
    w : (count, 6)
        Eigenvalues of each piece's normalised restraint matrix (ascending).
    V : (count, 6, 6)
        Its eigenvectors (columns), in scaled rigid modes (translation; rotation times size).
    centre : (count, 3) [length]
        Centroid of each piece's nodes.
    size : (count,) [length]
        Bounding-box diagonal of each piece.
    """
    n = points.shape[0]
    pn, pp = node_pieces(cells, labels, count)  # (node, piece) pairs, sorted by node
    centre = np.stack([np.bincount(pp, weights=points[pn, j], minlength=count) for j in range(3)], axis=1)
    centre /= np.maximum(np.bincount(pp, minlength=count), 1)[:, None]
    order = np.argsort(pp, kind="stable")
    cut = np.flatnonzero(np.r_[True, pp[order][1:] != pp[order][:-1]])
    lo = np.minimum.reduceat(points[pn[order]], cut, axis=0)
    hi = np.maximum.reduceat(points[pn[order]], cut, axis=0)
    size = np.maximum(np.linalg.norm(hi - lo, axis=1), 1e-300)

    def normalised(G: np.ndarray) -> np.ndarray:
        top = np.linalg.eigvalsh(G)[:, -1]
        return np.where(top[:, None, None] > 0, G / np.where(top > 0, top, 1.0)[:, None, None], 0.0)

    M = np.zeros((count, 6, 6))
    nodes, dirs = directions
    if len(nodes):
        # Held rows for every (held node, piece containing it) pair.
        start = np.searchsorted(pn, nodes, side="left")
        stop = np.searchsorted(pn, nodes, side="right")
        reps = stop - start
        held_idx = np.repeat(np.arange(len(nodes)), reps)
        pair = np.repeat(start, reps) + np.arange(reps.sum()) - np.repeat(np.cumsum(reps) - reps, reps)
        piece = pp[pair]
        r = points[nodes[held_idx]] - centre[piece]  # (h, 3)
        d = dirs[held_idx]  # (h, 3, 3) rows: held directions (zero rows pad)
        rows = np.concatenate([d, np.cross(r[:, None, :], d) / size[piece][:, None, None]], axis=2)  # (h, 3, 6)
        outer = np.einsum("hji,hjk->hik", rows, rows).reshape(-1, 36)
        S = sp.csr_matrix((np.ones(piece.size), (piece, np.arange(piece.size))), shape=(count, piece.size))
        M += normalised(np.asarray(S @ outer).reshape(count, 6, 6))
    if foundations:
        # B (3n, 6 count): the scaled rigid modes of each piece on its own nodes.
        r = points[pn] - centre[pp]
        q = pn.size
        Rm = np.zeros((q, 3, 6))
        Rm[:, 0, 0] = Rm[:, 1, 1] = Rm[:, 2, 2] = 1.0
        Rm[:, 1, 3], Rm[:, 2, 3] = -r[:, 2], r[:, 1]
        Rm[:, 0, 4], Rm[:, 2, 4] = r[:, 2], -r[:, 0]
        Rm[:, 0, 5], Rm[:, 1, 5] = -r[:, 1], r[:, 0]
        Rm[:, :, 3:] /= size[pp][:, None, None]
        ri = np.broadcast_to((3 * pn[:, None] + np.arange(3))[:, :, None], (q, 3, 6))
        ci = np.broadcast_to((6 * pp[:, None] + np.arange(6))[:, None, :], (q, 3, 6))
        B = sp.csr_matrix((Rm.ravel(), (ri.ravel(), ci.ravel())), shape=(3 * n, 6 * count))
        for K in foundations:
            G = (B.T @ (K @ B)).tocoo()
            same = G.row // 6 == G.col // 6
            blocks = np.zeros((count, 6, 6))
            np.add.at(blocks, (G.row[same] // 6, G.row[same] % 6, G.col[same] % 6), G.data[same])
            M += normalised(0.5 * (blocks + blocks.transpose(0, 2, 1)))
    w, V = np.linalg.eigh(M)
    free = np.sum(w <= PIECE_FREE_TOL * np.maximum(w[:, -1:], 1e-300), axis=1)
    free[w[:, -1] <= 0] = 6
    return free, w, V, centre, size


def free_pieces(points: np.ndarray, cells: np.ndarray, held: Held, foundations: Optional[list] = None,
                cell_body: Optional[np.ndarray] = None) -> tuple[list[PieceInfo], list[tuple[PieceInfo, list[str]]]]:
    """The face-connected pieces of a mesh and those the supports leave free, with their free motions.

    Returns
    -------
    pieces : list of PieceInfo
        Every piece (one for a connected mesh).
    free : list of (PieceInfo, list of str)
        Each piece that can move as a rigid body, with its free motions in words; empty when
        every piece is restrained. For a mesh of one piece this is the check of
        :func:`free_rigid_motions` on the whole part.
    """
    labels, pieces = mesh_pieces(points, cells, cell_body)
    nodes, dirs, _ = held.constraints()
    Ks = [getattr(f, "K", f) for f in (foundations or [])]
    if len(pieces) <= 1:
        scale = float(np.linalg.norm(points.max(axis=0) - points.min(axis=0))) if points.size else 1.0
        words = free_rigid_motions(points, held.dofs, scale, directions=(nodes, dirs), foundations=Ks)
        return pieces, ([(pieces[0], words)] if words and pieces else [])
    free, w, V, centre, size = piece_restraint(points, cells, labels, len(pieces), (nodes, dirs), Ks)
    out = []
    for p in np.flatnonzero(free):  # free pieces only (few)
        thr = PIECE_FREE_TOL * max(w[p, -1], 1e-300)
        N = V[p][:, (w[p] <= thr) | (w[p, -1] <= 0)].T  # (d, 6) free directions in scaled modes
        out.append((pieces[p], _describe_free(N, centre[p], float(size[p]))))
    return pieces, out


def check_restrained(points: np.ndarray, held: Held, scale: float, foundations: Optional[list] = None, *,
                     mesh: Optional[Mesh] = None, length: str = "") -> list:
    """Raise :class:`ModelError` naming the free rigid-body motions when the supports leave any.
    Returns the mesh's pieces (:class:`~elastofe.mesh.PieceInfo`; empty without ``mesh``).

    Held directions in local frames count as held; so does an elastic support (``foundations``:
    its CSR stiffness matrices, or :class:`Foundation` objects) for the motions it resists.
    With ``mesh``, every piece of the mesh connected through shared element faces is checked on
    its own (pieces that touch only along an edge or at a vertex are not connected), and a free
    piece is named by number, body, volume and bounding box (``length`` labels the lengths).
    This check decides for every solver backend, before any of them runs: a direct solver may
    factorise a singular matrix without a word when the load happens to be orthogonal to a free
    motion, and an iterative one may converge to one of infinitely many answers.
    """
    if mesh is not None:
        pieces, free = free_pieces(mesh.points, mesh.cells, held, foundations, mesh.cell_body)
        if len(pieces) == 1 and free:
            raise ModelError("the part is not restrained: the supports leave these rigid-body motions free: "
                             + "; ".join(free[0][1]) + ". Add or extend [[support]] entries.")
        if len(pieces) > 1:
            if free:
                named = "; ".join(
                    f"{info.describe(length)}"
                    + (f" (it touches another piece only along an edge or at a vertex: {info.shared_nodes} shared "
                       "nodes, which is no connection)" if info.shared_nodes else "")
                    + (f" ({info.contact_words(length)})" if info.touching else "")
                    + ", free: " + ", ".join(words) for info, words in free[:PIECES_NAMED])
                more = f"; and {len(free) - PIECES_NAMED} more" if len(free) > PIECES_NAMED else ""
                raise ModelError(
                    f"the part is not restrained: {len(free)} of its {len(pieces)} pieces (parts of the mesh "
                    f"joined through shared element faces) can move freely: {named}{more}. Hold every piece "
                    "with a [[support]], or join the bodies so that they share faces")
        if pieces:
            return pieces
    nodes, dirs, _ = held.constraints()
    Ks = [getattr(f, "K", f) for f in (foundations or [])]
    free = free_rigid_motions(points, held.dofs, scale, directions=(nodes, dirs), foundations=Ks)
    if free:
        raise ModelError("the part is not restrained: the supports leave these rigid-body motions free: "
                         + "; ".join(free) + ". Add or extend [[support]] entries.")
    return []
