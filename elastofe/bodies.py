"""The bodies of a part and the material of each.

A body is a volume entity of the CAD or mesh file (:attr:`elastofe.mesh.Mesh.cell_body`; a mesh
that does not say is one body, id 1). Bodies that touch share nodes (they are bonded, see
:func:`elastofe.geometry.join_bodies`); each gets exactly one material of the case
(:func:`assign_materials`), named by body id, by a point inside it or by a volume physical group.
Per-cell material arrays (Lamé parameters, density, thermal stress coefficient) come from the
:class:`MaterialMap`; a part of one material keeps scalars, so its numerics are unchanged.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .case.schema import Case, Material
from .errors import CaseError
from .fem.assembly import BLOCK, cell_volumes, is_curved
from .fem.elements import element_for
from .mesh import Mesh, cell_bodies, row_order
from .post.probe import Location, locate
from .regions import model_size

__all__ = ["Body", "body_table", "MaterialMap", "assign_materials", "interface_faces", "Interfaces", "interfaces",
           "point_sides", "volumes", "LOCATE_RTOL"]

#: How far outside the part (share of its size) a point ``at`` of a material may lie.
LOCATE_RTOL = 1e-4
#: A located point whose corner barycentric coordinate is below this lies on that cell face.
ON_FACE = 1e-6


@dataclass(frozen=True)
class Body:
    """One body of the part.

    Attributes
    ----------
    id : int
        Body id (the volume entity of the file), as ``elastofe surfaces`` lists it.
    cells : int
        Number of cells.
    volume : float
        Volume [length^3] (curved 10-node cells integrated exactly).
    centroid, bbox_min, bbox_max : tuple of 3 floats
        Centroid and bounding box [length].
    """

    id: int
    cells: int
    volume: float
    centroid: tuple
    bbox_min: tuple
    bbox_max: tuple

    def describe(self, length: str = "") -> str:
        """Words naming the body: id, volume, centroid and bounding box."""
        u = f" {length}" if length else ""
        fmt = lambda v: "[" + ", ".join(f"{c:.4g}" for c in v) + "]"  # noqa: E731
        return (f"body {self.id}: {self.cells:,} elements, volume {self.volume:.4g}{u}^3, centroid "
                f"{fmt(self.centroid)}, bounding box {fmt(self.bbox_min)} to {fmt(self.bbox_max)}{u}")

    def as_dict(self) -> dict:
        """Plain values for summary.json."""
        return {"id": self.id, "cells": self.cells, "volume": self.volume, "centroid": list(self.centroid),
                "bbox_min": list(self.bbox_min), "bbox_max": list(self.bbox_max)}


def body_table(mesh: Mesh) -> tuple[np.ndarray, list[Body]]:
    """The bodies of a mesh, in increasing id.

    Returns
    -------
    index : (m,) int64
        Position in the returned list of each cell's body.
    bodies : list of Body
    """
    cb = cell_bodies(mesh)
    ids, index = np.unique(cb, return_inverse=True)
    nb = ids.size
    vol = volumes(mesh.points, mesh.cells)
    cen = mesh.points[mesh.cells[:, :4]].mean(axis=1)  # the corner tetrahedron's centroid
    volume = np.bincount(index, weights=vol, minlength=nb)
    centroid: np.ndarray = np.stack([np.bincount(index, weights=vol * cen[:, j], minlength=nb)
                                     for j in range(3)], axis=1)
    centroid = centroid / np.where(volume > 0, volume, 1.0)[:, None]
    order = np.argsort(index, kind="stable")
    starts = np.flatnonzero(np.r_[True, index[order][1:] != index[order][:-1]])
    X = mesh.points[mesh.cells]
    lo = np.minimum.reduceat(X.min(axis=1)[order], starts, axis=0)
    hi = np.maximum.reduceat(X.max(axis=1)[order], starts, axis=0)
    count = np.bincount(index, minlength=nb)
    return index, [Body(int(ids[i]), int(count[i]), float(volume[i]), tuple(map(float, centroid[i])),
                        tuple(map(float, lo[i])), tuple(map(float, hi[i]))) for i in range(nb)]


def volumes(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Volume of each cell ``(m,)`` [length^3]: the corner tetrahedron's for straight cells, the
    quadrature of :func:`elastofe.fem.assembly.cell_volumes` for curved 10-node cells (in blocks)."""
    X = points[cells[:, :4]]
    vol = np.abs(np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0])) / 6.0
    curved = np.flatnonzero(is_curved(points, cells))
    for s in range(0, curved.size, BLOCK):
        sel = curved[s:s + BLOCK]
        vol[sel] = cell_volumes(points, cells[sel])
    return vol


@dataclass(frozen=True)
class MaterialMap:
    """The material of every body and cell.

    Attributes
    ----------
    materials : tuple of Material
        The case's materials (``case.materials``).
    bodies : list of Body
        The bodies, in increasing id.
    body_material : (b,) int64
        Index into ``materials`` of each body's material.
    cell_index : (m,) int64
        Position in ``bodies`` of each cell's body.
    """

    materials: tuple
    bodies: list
    body_material: np.ndarray
    cell_index: np.ndarray

    @property
    def single(self) -> bool:
        """One material for the whole part (scalars are used)."""
        return len(self.materials) == 1

    @property
    def cell_material(self) -> np.ndarray:
        """Index into ``materials`` of each cell's material ``(m,)``."""
        return self.body_material[self.cell_index]

    def material_of_body(self, body_id: int) -> Material:
        """The material of the body with id ``body_id``."""
        pos = [b.id for b in self.bodies].index(int(body_id))
        return self.materials[int(self.body_material[pos])]

    def body_ids_of(self, i: int) -> list[int]:
        """Ids of the bodies of material ``i``."""
        return [b.id for b, m in zip(self.bodies, self.body_material) if m == i]

    def material_index_of_bodies(self, body_ids: np.ndarray) -> np.ndarray:
        """Index into ``materials`` for an array of body ids ``(q,)``."""
        ids = np.array([b.id for b in self.bodies], dtype=np.int64)
        return self.body_material[np.searchsorted(ids, np.asarray(body_ids, dtype=np.int64))]

    def per_cell(self, values) -> float | np.ndarray:
        """``values`` (one per material) as a scalar for a part of one material, else per cell ``(m,)``."""
        v = np.asarray(values, dtype=float)
        return float(v[0]) if self.single else v[self.cell_material]

    def lame(self) -> tuple:
        """Lamé parameters ``(lam, mu)`` [stress]: scalars for one material, else ``(m,)`` arrays."""
        lm = np.array([m.lame for m in self.materials])
        return self.per_cell(lm[:, 0]), self.per_cell(lm[:, 1])

    def thermal_coefficients(self) -> np.ndarray:
        """``(3λ + 2μ) α`` [stress / K] of each material ``(k,)`` (0 without an expansion)."""
        return np.array([(3 * m.lame[0] + 2 * m.lame[1]) * (m.expansion or 0.0) for m in self.materials])

    def masses(self) -> list:
        """Mass of each body [mass unit of the case], None where its material has no density."""
        return [None if self.materials[int(k)].density is None else self.materials[int(k)].density * b.volume
                for b, k in zip(self.bodies, self.body_material)]


def _body_list(bodies: list[Body]) -> str:
    ids = [b.id for b in bodies]
    return ", ".join(str(i) for i in ids[:20]) + (f", ... ({len(ids)} bodies)" if len(ids) > 20 else "")


def assign_materials(case: Case, mesh: Mesh) -> MaterialMap:
    """The material of every body of ``mesh`` from the case's materials.

    A single material without ``bodies``/``at``/``groups`` takes every body. Otherwise each
    material claims bodies by id, by a point inside each (the body of the cell holding it) or by
    volume physical groups of a mesh file.

    Raises
    ------
    CaseError
        A body id, group or point that names no body, a point on an interface between bodies, a
        body claimed by two materials, or a body left without a material (named with its volume
        and bounding box, exit 2).
    """
    index, bodies = body_table(mesh)
    mats = case.materials
    owner = -np.ones(len(bodies), dtype=np.int64)
    if len(mats) == 1 and not mats[0].selects:
        return MaterialMap(tuple(mats), bodies, np.zeros(len(bodies), dtype=np.int64), index)
    ids = np.array([b.id for b in bodies], dtype=np.int64)
    where: list[str] = [""] * len(bodies)
    length = case.units.labels["length"]
    for i, m in enumerate(mats):
        claims: list[tuple[int, str]] = []
        for j, b in enumerate(m.bodies):
            if b not in ids:
                raise CaseError(f"{m.key}.bodies[{j}]", b, f"names no body of the part; its bodies are "
                                f"{_body_list(bodies)} (as 'elastofe surfaces' lists them)")
            claims.append((int(np.searchsorted(ids, b)), f"{m.key}.bodies[{j}]"))
        if m.at:
            pts = np.array(m.at, dtype=float)
            loc = locate(mesh.points, mesh.cells, pts)
            tol = LOCATE_RTOL * model_size(mesh)
            body, on_iface = point_sides(mesh, loc)
            for j, p in enumerate(m.at):
                if loc.outside[j] > tol:
                    raise CaseError(f"{m.key}.at[{j}]", list(p), f"lies outside the part (about {loc.outside[j]:.3g} "
                                    f"{length} from it); give a point inside the body")
                if on_iface[j]:
                    raise CaseError(f"{m.key}.at[{j}]", list(p), f"lies on the interface between body {body[j]} "
                                    "and another body; give a point inside the body")
                claims.append((int(np.searchsorted(ids, body[j])), f"{m.key}.at[{j}]"))
        for j, g in enumerate(m.groups):
            groups = getattr(mesh, "body_groups", {}) or {}
            if g not in groups:
                have = ", ".join(repr(k) for k in groups) or "none (volume physical groups come with a .msh file)"
                raise CaseError(f"{m.key}.groups[{j}]", g, f"is no volume physical group of the mesh file; its "
                                f"groups are {have}")
            for b in groups[g]:
                if b in ids:
                    claims.append((int(np.searchsorted(ids, b)), f"{m.key}.groups[{j}]"))
        for pos, key in claims:
            if owner[pos] >= 0 and owner[pos] != i:
                other = mats[int(owner[pos])]
                raise CaseError(key, bodies[pos].id, f"gives body {bodies[pos].id} the material {m.name!r}, but "
                                f"{where[pos]} already gives it {other.name!r}; every body gets exactly one material")
            owner[pos] = i
            where[pos] = key
    free = np.flatnonzero(owner < 0)
    if free.size:
        named = "; ".join(bodies[p].describe(length) for p in free[:3])
        more = f"; and {free.size - 3} more" if free.size > 3 else ""
        raise CaseError("material", [bodies[p].id for p in free],
                        f"{free.size} of the part's {len(bodies)} bodies {'has' if free.size == 1 else 'have'} "
                        f"no material: {named}{more}. Add each "
                        "to one [[material]] (bodies = [ids], at = [[x, y, z]] or groups = [...])")
    return MaterialMap(tuple(mats), bodies, owner, index)


def interface_faces(cells: np.ndarray, cell_body: np.ndarray) -> np.ndarray:
    """Corner triples ``(f, 3)`` (sorted) of the faces shared by cells of two different bodies."""
    el = element_for(cells.shape[1])
    f = np.sort(cells[:, el.faces[:, :3]].reshape(-1, 3), axis=1)
    owner = np.repeat(np.asarray(cell_body), el.faces.shape[0])
    order = row_order(f)
    fs, os_ = f[order], owner[order]
    same = np.all(fs[1:] == fs[:-1], axis=1) & (os_[1:] != os_[:-1])
    return fs[:-1][same]


@dataclass(frozen=True)
class Interfaces:
    """Where the bodies of a mesh meet, for telling which side a point reports.

    Attributes
    ----------
    cell_body : (m,) int64 body id of each cell.
    face_keys : (f,) int64 sorted keys of the corner triples of the interface faces.
    multi : (n,) bool nodes that belong to more than one body.
    n : int number of nodes.
    """

    cell_body: np.ndarray
    face_keys: np.ndarray
    multi: np.ndarray
    n: int

    def key(self, tri: np.ndarray) -> np.ndarray:
        """Keys ``(f,)`` of sorted corner triples ``(f, 3)``."""
        t = tri.astype(np.int64)
        return (t[:, 0] * (self.n + 1) + t[:, 1]) * (self.n + 1) + t[:, 2]


def interfaces(mesh: Mesh) -> Interfaces | None:
    """The interfaces between the bodies of ``mesh``, or None for a mesh of one body."""
    cb = cell_bodies(mesh)
    if cb.size == 0 or np.all(cb == cb[0]):
        return None
    n = mesh.nodes
    faces = interface_faces(mesh.cells, cb)
    out = Interfaces(cb, np.zeros(0, dtype=np.int64), np.zeros(n, dtype=bool), n)
    keys = np.sort(out.key(faces)) if faces.size else out.face_keys
    ids, b = np.unique(cb, return_inverse=True)
    pairs = np.unique(mesh.cells.astype(np.int64) * ids.size + b.reshape(-1, 1))  # distinct (node, body)
    multi = np.bincount(pairs // ids.size, minlength=n) > 1
    return Interfaces(cb, keys, multi, n)


def point_sides(mesh: Mesh, loc: Location, found: Interfaces | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Which body each located point reports and whether it lies on an interface between bodies.

    A point reports the body of the cell that holds it; it lies on an interface when it lies on a
    face of that cell (corner barycentric coordinate of the opposite corner below :data:`ON_FACE`)
    that cells of two bodies share, or on an edge or at a vertex whose corners all belong to more
    than one body. ``found`` (from :func:`interfaces`, built once per mesh) saves finding the
    interfaces again.

    Returns
    -------
    body : (p,) int64 body id; on_interface : (p,) bool
    """
    found = found if found is not None else interfaces(mesh)
    if found is None:
        return cell_bodies(mesh)[loc.cell], np.zeros(loc.cell.size, dtype=bool)
    body = found.cell_body[loc.cell].astype(np.int64)
    on = np.zeros(body.size, dtype=bool)
    corners = mesh.cells[loc.cell, :4]
    lam = np.column_stack([1.0 - loc.xi.sum(axis=1), loc.xi])  # corner barycentric coordinates
    zero = lam < ON_FACE
    if found.face_keys.size:
        for c in range(4):  # the face opposite corner c (four faces, not a loop over points)
            sel = zero[:, c]
            if sel.any():
                k = found.key(np.sort(np.delete(corners[sel], c, axis=1), axis=1))
                pos = np.clip(np.searchsorted(found.face_keys, k), 0, found.face_keys.size - 1)
                on[np.flatnonzero(sel)[found.face_keys[pos] == k]] = True
    # On an edge or at a vertex: the corners the point touches all lie on several bodies.
    edge = zero.sum(axis=1) >= 2
    if edge.any():
        touch = np.where(~zero[edge], found.multi[corners[edge]], True).all(axis=1)
        on[np.flatnonzero(edge)[touch]] = True
    return body, on
