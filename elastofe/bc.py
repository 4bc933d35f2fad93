"""Supports (held DOFs and their values) and loads (consistent nodal forces)."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .case.schema import Case, ForceLoad, GravityLoad, PressureLoad
from .errors import CaseError, ModelError
from .fem.assembly import body_force
from .fem.surface import face_areas, pressure_load, traction_load
from .mesh import Mesh
from .regions import region_nodes


@dataclass(frozen=True)
class Held:
    """Held DOFs: ``dofs (c,)`` sorted, prescribed ``values (c,)`` [length], and ``owner (c,)`` the
    index of the support each DOF belongs to (the first support that holds it)."""

    dofs: np.ndarray
    values: np.ndarray
    owner: np.ndarray


def held_dofs(case: Case, mesh: Mesh, region_ids: dict[str, list[int]]) -> Held:
    """Collect the held DOFs of every support (a DOF held twice keeps its first support)."""
    dofs, vals, owner = [], [], []
    for i, s in enumerate(case.supports):
        nodes = region_nodes(mesh, region_ids[s.region])
        for c in s.components:
            dofs.append(3 * nodes + c)
            vals.append(np.full(nodes.size, s.value[c]))
            owner.append(np.full(nodes.size, i))
    d = np.concatenate(dofs)
    v = np.concatenate(vals)
    o = np.concatenate(owner)
    uniq, first = np.unique(d, return_index=True)  # np.unique keeps the first occurrence's index
    return Held(uniq, v[first], o[first])


@dataclass(frozen=True)
class AppliedLoad:
    """One load's nodal forces ``f (3n,)`` and its resultant force and moment about the origin."""

    label: str
    f: np.ndarray
    force: np.ndarray
    moment: np.ndarray
    area: float | None = None


def resultant(points: np.ndarray, f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Resultant force ``(3,)`` and moment about the origin ``(3,)`` of nodal forces ``f (3n,)``."""
    F = f.reshape(-1, 3)
    return F.sum(axis=0), np.cross(points, F).sum(axis=0)


def load_vectors(case: Case, mesh: Mesh, region_ids: dict[str, list[int]]) -> list[AppliedLoad]:
    """Consistent nodal force vectors of every load of the case, in order."""
    out = []
    for i, ld in enumerate(case.loads, 1):
        area = None
        if isinstance(ld, ForceLoad):
            faces = mesh.surface_faces(region_ids[ld.region])
            area = float(face_areas(mesh.points, faces).sum())
            f = traction_load(mesh.points, faces, np.asarray(ld.force) / area)
            label = f"load[{i}] force on {ld.region}"
        elif isinstance(ld, PressureLoad):
            faces = mesh.surface_faces(region_ids[ld.region])
            area = float(face_areas(mesh.points, faces).sum())
            f = pressure_load(mesh.points, faces, ld.pressure)
            label = f"load[{i}] pressure on {ld.region}"
        elif isinstance(ld, GravityLoad):
            if case.material.density is None:
                raise CaseError("material.density", None, f"is required by the gravity load load[{i}]")
            b = case.material.density * case.units.gravity() * np.asarray(ld.gravity)
            f = body_force(mesh.points, mesh.cells, b)
            label = f"load[{i}] gravity"
        else:  # pragma: no cover
            raise TypeError(ld)
        F, M = resultant(mesh.points, f)
        out.append(AppliedLoad(label, f, F, M, area))
    return out


def rigid_modes(points: np.ndarray, center: np.ndarray | None = None) -> np.ndarray:
    """The six rigid-body modes ``(3n, 6)``: translations x, y, z; rotations about x, y, z through ``center``."""
    c = points.mean(axis=0) if center is None else center
    x = points - c
    n = points.shape[0]
    R = np.zeros((n, 3, 6))
    R[:, 0, 0] = R[:, 1, 1] = R[:, 2, 2] = 1.0
    R[:, 1, 3], R[:, 2, 3] = -x[:, 2], x[:, 1]
    R[:, 0, 4], R[:, 2, 4] = x[:, 2], -x[:, 0]
    R[:, 0, 5], R[:, 1, 5] = -x[:, 1], x[:, 0]
    return R.reshape(3 * n, 6)


def _direction(v: np.ndarray) -> str:
    v = v / np.linalg.norm(v)
    for i, name in enumerate("xyz"):
        if abs(abs(v[i]) - 1) < 1e-6:
            return name
    return "(" + ", ".join(f"{c:.3g}" for c in v) + ")"


def _span_names(Q: np.ndarray, tol: float = 1e-6) -> list[np.ndarray]:
    """Directions spanning the column space of orthonormal ``Q (3, r)``: coordinate axes first."""
    found = [np.eye(3)[i] for i in range(3) if Q.shape[1] and np.linalg.norm(np.eye(3)[i] - Q @ (Q.T @ np.eye(3)[i])) < tol]
    dirs = list(found)
    if len(dirs) < Q.shape[1]:
        # The rest: an orthonormal complement of the axes found, inside the span.
        A = np.array(found).T if found else np.zeros((3, 0))
        P = Q - A @ (A.T @ Q)
        u, sv, _ = np.linalg.svd(P, full_matrices=False)
        dirs += [u[:, j] for j in range(Q.shape[1] - len(found)) if sv[j] > tol]
    return dirs


def _orth(M: np.ndarray, tol: float) -> np.ndarray:
    """Orthonormal basis ``(3, r)`` of the column space of ``M (3, k)``."""
    if M.shape[1] == 0:
        return np.zeros((3, 0))
    u, sv, _ = np.linalg.svd(M, full_matrices=False)
    return u[:, sv > tol * max(sv.max(), 1e-300)] if sv.max() > 1e-300 else np.zeros((3, 0))


def free_rigid_motions(points: np.ndarray, held: np.ndarray, scale: float) -> list[str]:
    """Rigid-body motions not prevented by the held DOFs, described in words (empty when restrained).

    The free motions form a subspace of the six rigid-body modes; it is described in a canonical
    basis so the words are the ones an engineer would use: free translations first (along the
    coordinate axes where they lie in the subspace), then free rotations (about axes parallel to
    the coordinate axes where possible, through the point the axis passes).
    """
    c = points.mean(axis=0)
    R = rigid_modes(points, c)
    Rs = R.copy()
    Rs[:, 3:] /= scale  # rotations scaled to displacements of order one over the model
    Rc = Rs[held]
    if Rc.shape[0] == 0:
        return ["translation along x", "translation along y", "translation along z",
                "rotation about x", "rotation about y", "rotation about z"]
    _, s, Vt = np.linalg.svd(Rc, full_matrices=True)
    s = np.concatenate([s, np.zeros(6 - s.size)]) if s.size < 6 else s
    smax = max(s.max(), 1e-300)
    V = np.array([Vt[i] for i in range(6) if s[i] <= 1e-8 * smax or (i >= Rc.shape[0])])
    if V.size == 0:
        return []
    # Columns (t; w) of each free motion u(x) = t + w x (x - c), w in 1/length (scaled back).
    F = np.vstack([V[:, :3].T, V[:, 3:].T / scale])  # undo the scaling of the rotation columns
    W = F[3:]
    _, sw, vtw = np.linalg.svd(W)
    tol_w = 1e-6 / max(scale, 1e-300)
    rank_w = int(np.sum(sw > tol_w)) if sw.size else 0
    N = vtw[rank_w:].T  # combinations with no rotation: pure translations
    Qt = _orth(F[:3] @ N, 1e-6)
    out = [f"translation along {_direction(d)}" for d in _span_names(Qt)]
    Qw = _orth(W, 1e-6) if rank_w else np.zeros((3, 0))
    for d in _span_names(Qw):
        a = np.linalg.lstsq(W, d, rcond=None)[0]
        t = F[:3] @ a
        t = t - Qt @ (Qt.T @ t)  # a free translation added to it changes nothing
        t = t - d * np.dot(d, t) / np.dot(d, d)
        p = c + np.cross(d, t) / np.dot(d, d)
        p = np.where(np.abs(p) < 1e-9 * max(scale, 1e-300), 0.0, p)
        where = "(" + ", ".join(f"{x:.4g}" for x in p) + ")"
        axis = _direction(d)
        out.append(f"rotation about {axis} (the axis through {where})" if len(axis) == 1
                   else f"rotation about an axis along {axis} through {where}")
    return out


def check_restrained(points: np.ndarray, held: Held, scale: float) -> None:
    """Raise :class:`ModelError` naming the free rigid-body motions when the supports leave any."""
    free = free_rigid_motions(points, held.dofs, scale)
    if free:
        raise ModelError("the part is not restrained: the supports leave these rigid-body motions free: "
                         + "; ".join(free) + ". Add or extend [[support]] entries.")
