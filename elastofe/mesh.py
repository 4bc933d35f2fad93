"""The mesh as plain arrays, its boundary, and the surface catalogue.

``Mesh.points (n, 3)`` float64 [length]; ``Mesh.cells (m, 4|10)`` int64 in VTK node order;
``Mesh.faces (f, 3|6)`` boundary faces ordered so their normal points out of the part;
``Mesh.face_surface (f,)`` the boundary-surface id of each face (ids start at 1).
"""
from __future__ import annotations

import contextlib
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional, Sequence

import numpy as np

from .errors import CaseError, ModelError
from .fem.elements import element_for
from .fem.surface import face_areas, face_normals
from .xdmf import read_xdmf


@dataclass(frozen=True)
class GeometrySource:
    """How the numbers of the geometry file became the mesh's lengths.

    Attributes
    ----------
    file : str
        Name of the geometry or mesh file.
    file_unit : str or None
        The length unit the file states (``"mm"``, ``"inch"``, ``"m"``, ...), None when it states
        none (BREP, mesh files) or it could not be read.
    unit : str
        The unit the file's numbers were taken in: ``geometry.unit`` of the case when given,
        else the file's own unit, else the case's length unit.
    unit_origin : str
        ``"case"`` (``geometry.unit``), ``"file"`` (stated in the file) or ``"assumed"`` (stated
        nowhere: the case's length unit).
    length_unit : str
        The case's length unit, the unit of :attr:`Mesh.points`.
    scale : float
        Case length units per unit of the file's numbers (25.4 for an inch file in a mm case).
    size : float
        Bounding-box diagonal of the part [case length].
    warnings : tuple of str
        Things a person should know (no unit in the file, an implausible part size, ...).
    """

    file: str
    file_unit: Optional[str]
    unit: str
    unit_origin: str
    length_unit: str
    scale: float
    size: float = 0.0
    warnings: tuple = ()

    def describe(self) -> str:
        """One line for the run's log: which unit the file was read in and the scale used."""
        origin = {"case": "geometry.unit of the case", "file": "stated in the file",
                  "assumed": "no unit in the file: the case's length unit assumed"}[self.unit_origin]
        text = f"{self.file} read in {self.unit} ({origin})"
        if self.unit_origin == "case" and self.file_unit and self.file_unit != self.unit:
            text += f"; the file states {self.file_unit}"
        if self.scale != 1.0:
            text += f", scale 1 {self.unit} = {self.scale:.10g} {self.length_unit}"
        return text + f"; part size {self.size:.4g} {self.length_unit} (bounding-box diagonal)"

    def as_dict(self) -> dict:
        """Plain values for summary.json."""
        return {"file": self.file, "file_unit": self.file_unit, "unit": self.unit,
                "unit_origin": self.unit_origin, "length_unit": self.length_unit, "scale": self.scale,
                "size": self.size, "warnings": list(self.warnings)}


@dataclass(frozen=True)
class Mesh:
    """A tetrahedral mesh with its boundary faces grouped into surfaces.

    Attributes
    ----------
    points : (n, 3) float64
    cells : (m, k) int64, k = 4 or 10
    faces : (f, 3 or 6) int64, outward boundary faces
    face_surface : (f,) int64, surface id per face
    groups : dict[str, tuple[int, ...]]
        Named physical groups of the source file, as sets of surface ids.
    cell_body : (m,) int64 or None
        The body (volume entity of the CAD or .msh file) each cell belongs to, when known.
    source : GeometrySource or None
        The file's unit, the scale applied and warnings about the geometry, when read from a file.
    body_groups : dict[str, tuple[int, ...]]
        Named volume physical groups of the source file, as sets of body ids.
    """

    points: np.ndarray
    cells: np.ndarray
    faces: np.ndarray
    face_surface: np.ndarray
    groups: dict = field(default_factory=dict)
    cell_body: Optional[np.ndarray] = None
    source: Optional[GeometrySource] = None
    body_groups: dict = field(default_factory=dict)

    @property
    def order(self) -> int:
        return element_for(self.cells.shape[1]).degree

    @property
    def nodes(self) -> int:
        return self.points.shape[0]

    @property
    def surface_ids(self) -> np.ndarray:
        return np.unique(self.face_surface)

    def surface_faces(self, ids) -> np.ndarray:
        """Faces ``(f', k)`` of the given surface ids."""
        return self.faces[np.isin(self.face_surface, np.asarray(list(ids)))]

    def scaled(self, factor: float) -> Mesh:
        """The same mesh with every coordinate multiplied by ``factor`` (a change of length unit)."""
        from dataclasses import replace

        return replace(self, points=self.points * float(factor))

    def with_source(self, source: Optional[GeometrySource]) -> Mesh:
        """The same mesh with another :class:`GeometrySource` record."""
        from dataclasses import replace

        return replace(self, source=source)


def boundary_faces(cells: np.ndarray) -> np.ndarray:
    """Faces that belong to exactly one cell, outward, ``(f, 3|6)``."""
    el = element_for(cells.shape[1])
    allf = cells[:, el.faces].reshape(-1, el.faces.shape[1])  # (4m, k)
    key = np.sort(allf[:, :3], axis=1)
    _, inv, counts = np.unique(key, axis=0, return_inverse=True, return_counts=True)
    return allf[counts[inv.ravel()] == 1]


def row_order(rows: np.ndarray) -> np.ndarray:
    """Order that sorts integer rows ``(r, 3)`` lexicographically (equal rows end up adjacent).

    One int64 key per row where the node numbers allow it (fast), a three-key sort otherwise.
    """
    if rows.shape[0] == 0:
        return np.zeros(0, dtype=np.int64)
    n = int(rows.max()) + 1
    if n < 2_000_000:  # n^3 < 2^63
        key = (rows[:, 0].astype(np.int64) * n + rows[:, 1]) * n + rows[:, 2]
        return np.argsort(key, kind="stable")
    return np.lexsort((rows[:, 2], rows[:, 1], rows[:, 0]))


def connected_pieces(cells: np.ndarray) -> tuple[int, np.ndarray]:
    """The pieces of a mesh: sets of cells connected through shared faces.

    Cells that share only an edge or a vertex are not connected (such a joint carries no moment
    and its stresses are singular). The graph whose vertices are the cells and whose edges are
    shared faces (found by sorting the corner-node triples of all faces) is split with
    :func:`scipy.sparse.csgraph.connected_components`.

    Parameters
    ----------
    cells : (m, 4 or 10) int64

    Returns
    -------
    count : int
        The number of pieces.
    labels : (m,) int64
        The piece of each cell, 0 .. count - 1, numbered in the order of their first cell.
    """
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components

    m = cells.shape[0]
    if m == 0:
        return 0, np.zeros(0, dtype=np.int64)
    el = element_for(cells.shape[1])
    f = np.sort(cells[:, el.faces[:, :3]].reshape(-1, 3), axis=1)  # (4m, 3) corner triples
    owner = np.repeat(np.arange(m, dtype=np.int64), el.faces.shape[0])
    order = row_order(f)
    fs, os_ = f[order], owner[order]
    same = np.all(fs[1:] == fs[:-1], axis=1)
    a, b = os_[:-1][same], os_[1:][same]
    g = sp.coo_matrix((np.ones(a.size, dtype=np.int8), (a, b)), shape=(m, m)).tocsr()
    count, labels = connected_components(g, directed=False)
    # Number the pieces by their first cell, so the numbering does not depend on the graph search.
    first = np.full(count, m, dtype=np.int64)
    np.minimum.at(first, labels, np.arange(m))
    rank = np.empty(count, dtype=np.int64)
    rank[np.argsort(first)] = np.arange(count)
    return int(count), rank[labels]


def node_pieces(cells: np.ndarray, labels: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
    """The distinct (node, piece) pairs of a mesh, sorted by node: ``nodes (q,)``, ``pieces (q,)``.

    A node appears once per piece it belongs to (more than once only where pieces touch along an
    edge or at a vertex).
    """
    k = cells.shape[1]
    if count <= 1:
        nodes = np.unique(cells)
        return nodes, np.zeros(nodes.size, dtype=np.int64)
    key = np.unique(cells.ravel().astype(np.int64) * count + np.repeat(labels, k))
    return key // count, key % count


@dataclass(frozen=True)
class PieceInfo:
    """One face-connected piece of a mesh.

    Attributes
    ----------
    id : int
        Piece number from 1 (in the order of the pieces' first cells).
    cells : int
        Number of cells.
    volume : float
        Volume of the straight-sided cells [length^3].
    bbox_min, bbox_max : tuple of 3 floats
        Bounding box [length].
    bodies : tuple of int
        Body numbers (volume entities of the CAD or .msh file) of its cells, when known.
    shared_nodes : int
        Nodes it shares with other pieces along edges or at vertices (a contact that is no
        connection); 0 for a piece that touches no other.
    """

    id: int
    cells: int
    volume: float
    bbox_min: tuple
    bbox_max: tuple
    bodies: tuple = ()
    shared_nodes: int = 0
    #: ((other piece id, area [length^2]), ...): boundary of this piece that lies on another
    #: piece's boundary (within :data:`CONTACT_TOL` of the part size) without sharing its nodes, as
    #: in a mesh made body by body: the two lie against each other but are not joined there.
    touching: tuple = ()

    def contact_words(self, length: str = "") -> str:
        """Words for :attr:`touching` ("" when it touches no other piece)."""
        if not self.touching:
            return ""
        u = f" {length}^2" if length else ""
        return ("it lies against " + ", ".join(f"piece {j} over {a:.4g}{u}" for j, a in self.touching)
                + " without sharing nodes there, so it is not joined to it: no bond, and contact is not modelled")

    def describe(self, length: str = "") -> str:
        """Words naming the piece: number, body, volume and bounding box."""
        u = f" {length}" if length else ""
        fmt = lambda v: "[" + ", ".join(f"{c:.4g}" for c in v) + "]"  # noqa: E731
        body = ""
        if self.bodies:
            body = (f" (body {self.bodies[0]})" if len(self.bodies) == 1
                    else f" (bodies {', '.join(str(b) for b in self.bodies)})")
        return (f"piece {self.id}{body}: {self.cells:,} elements, volume {self.volume:.4g}{u}^3, "
                f"bounding box {fmt(self.bbox_min)} to {fmt(self.bbox_max)}{u}")

    def as_dict(self) -> dict:
        """Plain values for summary.json."""
        return {"id": self.id, "cells": self.cells, "volume": self.volume, "bbox_min": list(self.bbox_min),
                "bbox_max": list(self.bbox_max), "bodies": list(self.bodies), "shared_nodes": self.shared_nodes,
                "touching": [{"piece": j, "area": a} for j, a in self.touching]}


#: Distance, as a fraction of the part size (bounding-box diagonal), within which the boundaries of
#: two pieces count as lying against each other.
CONTACT_TOL = 1e-4


def piece_contacts(points: np.ndarray, cells: np.ndarray, labels: np.ndarray, count: int,
                   tol: Optional[float] = None) -> np.ndarray:
    """Area ``(count, count)`` [length^2] of the boundary of piece i whose faces lie on the boundary
    of piece j (i != j) without sharing nodes with it.

    A boundary face counts when its centroid lies within ``tol`` (default :data:`CONTACT_TOL` of
    the part size) of one of the six other-piece boundary faces with the nearest centroids, inside
    its straight-sided triangle. Faces of pieces joined through shared faces are not boundary faces,
    so a conformal (bonded) interface never counts.
    """
    from scipy.spatial import cKDTree

    out = np.zeros((count, count))
    if count <= 1:
        return out
    faces = boundary_faces(cells)[:, :3]
    owner = labels[face_owners(cells, faces)]
    tri = points[faces]                                   # (f, 3, 3)
    cen = tri.mean(axis=1)
    area = face_areas(points, faces)
    if tol is None:
        tol = CONTACT_TOL * float(np.linalg.norm(points.max(axis=0) - points.min(axis=0)))
    for p in range(count):                                # pieces are few
        mine, other = np.flatnonzero(owner == p), np.flatnonzero(owner != p)
        if mine.size == 0 or other.size == 0:
            continue
        k = min(6, other.size)
        _, near = cKDTree(cen[other]).query(cen[mine], k=k)
        near = other[np.asarray(near).reshape(mine.size, k)]   # (q, k) candidate faces
        a, b, c = tri[near, 0], tri[near, 1], tri[near, 2]     # (q, k, 3)
        n = np.cross(b - a, c - a)
        nn = np.einsum("...i,...i->...", n, n)
        ok = nn > 0
        x = cen[mine][:, None, :]
        dist = np.abs(np.einsum("...i,...i->...", x - a, n)) / np.sqrt(np.where(ok, nn, 1.0))
        proj = x - (np.einsum("...i,...i->...", x - a, n) / np.where(ok, nn, 1.0))[..., None] * n
        # barycentric coordinates of the projection (inside within a small margin)
        v0, v1, v2 = b - a, c - a, proj - a
        d00, d01, d11 = (np.einsum("...i,...i->...", u, w) for u, w in ((v0, v0), (v0, v1), (v1, v1)))
        d20, d21 = np.einsum("...i,...i->...", v2, v0), np.einsum("...i,...i->...", v2, v1)
        den = np.where(ok, d00 * d11 - d01 * d01, 1.0)
        s_, t_ = (d11 * d20 - d01 * d21) / den, (d00 * d21 - d01 * d20) / den
        inside = ok & (s_ >= -1e-6) & (t_ >= -1e-6) & (s_ + t_ <= 1 + 1e-6)
        hit = inside & (dist <= tol)
        rows = np.flatnonzero(hit.any(axis=1))
        if rows.size:
            first = hit[rows].argmax(axis=1)
            np.add.at(out[p], owner[near[rows, first]], area[mine[rows]])
    return out


def mesh_pieces(points: np.ndarray, cells: np.ndarray, cell_body: Optional[np.ndarray] = None
                ) -> tuple[np.ndarray, list[PieceInfo]]:
    """The face-connected pieces of a mesh and a description of each.

    Parameters
    ----------
    points : (n, 3) float64 [length]
    cells : (m, 4 or 10) int64
    cell_body : (m,) int64, optional
        Body number of each cell.

    Returns
    -------
    labels : (m,) int64
        Piece index (from 0) of each cell.
    pieces : list of PieceInfo
        One per piece, in index order (``pieces[i].id == i + 1``).
    """
    count, labels = connected_pieces(cells)
    if count == 0:
        return labels, []
    X = points[cells[:, :4]]
    vol = np.abs(np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0])) / 6.0
    volume = np.bincount(labels, weights=vol, minlength=count)
    ncell = np.bincount(labels, minlength=count)
    if count == 1:  # the usual case: no per-piece reductions needed
        lo, hi = points.min(axis=0)[None], points.max(axis=0)[None]  # a Mesh has no unused points
        shared = np.zeros(1, dtype=np.int64)
    else:
        order = np.argsort(labels, kind="stable")
        starts = np.flatnonzero(np.r_[True, labels[order][1:] != labels[order][:-1]])
        lo = np.minimum.reduceat(points[cells].min(axis=1)[order], starts, axis=0)
        hi = np.maximum.reduceat(points[cells].max(axis=1)[order], starts, axis=0)
        pn, pp = node_pieces(cells, labels, count)
        multi = np.bincount(pn, minlength=points.shape[0]) > 1  # a node of two pieces: edge or vertex contact
        shared = np.bincount(pp[multi[pn]], minlength=count)
    bodies: list[tuple] = [()] * count
    if cell_body is not None and len(cell_body) == cells.shape[0]:
        pb = np.unique(np.stack([labels, np.asarray(cell_body, dtype=np.int64)], axis=1), axis=0)
        cut = np.flatnonzero(np.r_[True, pb[1:, 0] != pb[:-1, 0]])
        for s, e in zip(cut, np.r_[cut[1:], pb.shape[0]]):  # one entry per piece (few)
            bodies[int(pb[s, 0])] = tuple(int(b) for b in pb[s:e, 1])
    touching: list[tuple] = [()] * count
    if count > 1:
        contact = piece_contacts(points, cells, labels, count)
        touching = [tuple((int(j) + 1, float(contact[i, j])) for j in np.flatnonzero(contact[i] > 0))
                    for i in range(count)]
    return labels, [PieceInfo(i + 1, int(ncell[i]), float(volume[i]), tuple(float(v) for v in lo[i]),
                              tuple(float(v) for v in hi[i]), bodies[i], int(shared[i]), touching[i])
                    for i in range(count)]


def cell_bodies(mesh: Mesh) -> np.ndarray:
    """The body id of every cell ``(m,)`` int64: :attr:`Mesh.cell_body`, or 1 for a mesh that
    does not say (one body)."""
    cb = getattr(mesh, "cell_body", None)
    if cb is None or len(cb) != mesh.cells.shape[0]:
        return np.ones(mesh.cells.shape[0], dtype=np.int64)
    return np.asarray(cb, dtype=np.int64)


@dataclass(frozen=True)
class BodyNodes:
    """The mesh's nodes split at the interfaces between bodies: a node shared by cells of several
    bodies becomes one node per body, so that a nodal field averaged over ``cells`` never mixes
    bodies (stresses jump across a bonded interface of two materials).

    Attributes
    ----------
    node : (q,) int64
        The mesh node each split node stands for (``q >= n``).
    body : (q,) int64
        Its body id.
    cells : (m, k) int64
        The cells on the split nodes.
    identity : bool
        No node is split (one body): ``node`` is ``arange(n)`` and ``cells`` the mesh's own array.
    """

    node: np.ndarray
    body: np.ndarray
    cells: np.ndarray
    identity: bool = False

    @property
    def count(self) -> int:
        """Number of split nodes ``q``."""
        return int(self.node.size)

    def index(self, node: np.ndarray, body: np.ndarray) -> np.ndarray:
        """The split node of each (mesh ``node``, ``body`` id) pair, same shape (the pair must exist)."""
        node = np.asarray(node, dtype=np.int64)
        if self.identity:
            return node
        ids = np.unique(self.body)
        nb = ids.size
        keys = self.node * nb + np.searchsorted(ids, self.body)  # sorted: split nodes are in (node, body) order
        want = node * nb + np.searchsorted(ids, np.asarray(body, dtype=np.int64))
        return np.searchsorted(keys, want)

    def to_nodes(self, values: np.ndarray, score: np.ndarray) -> np.ndarray:
        """Per-node values ``(n, ...)`` of per-split-node ``values (q, ...)``: at an interface node the
        value of the body whose ``score (q,)`` is largest there (the more stressed side)."""
        if self.identity:
            return values
        n = int(self.node.max()) + 1
        order = np.lexsort((score, self.node))  # by node, then by score: the last of each node wins
        last = order[np.r_[self.node[order][1:] != self.node[order][:-1], True]]
        out = np.empty((n,) + values.shape[1:], dtype=values.dtype)
        out[self.node[last]] = values[last]
        return out


def body_nodes(cells: np.ndarray, cell_body: Optional[np.ndarray], n: Optional[int] = None) -> BodyNodes:
    """Split the nodes of ``cells (m, k)`` at the interfaces between the bodies ``cell_body (m,)``.

    Each distinct (node, body) pair of the cells becomes one split node, numbered in node order
    (so a mesh of one body keeps its numbering and its ``cells``).
    """
    n = int(cells.max()) + 1 if n is None else int(n)
    if cell_body is None or cells.shape[0] == 0 or np.all(cell_body == cell_body[0]):
        body = np.full(n, int(cell_body[0]) if cell_body is not None and len(cell_body) else 1, dtype=np.int64)
        return BodyNodes(np.arange(n, dtype=np.int64), body, cells, identity=True)
    ids, b = np.unique(np.asarray(cell_body, dtype=np.int64), return_inverse=True)
    nb = ids.size
    key = cells.astype(np.int64) * nb + b.reshape(-1, 1)
    uniq, inv = np.unique(key.ravel(), return_inverse=True)
    return BodyNodes(uniq // nb, ids[uniq % nb], inv.reshape(cells.shape).astype(np.int64), identity=False)


def face_owners(cells: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """The cell ``(f,)`` each boundary face of ``faces (f, 3|6)`` belongs to (by its corner nodes)."""
    el = element_for(cells.shape[1])
    cf = np.sort(cells[:, el.faces[:, :3]].reshape(-1, 3), axis=1).astype(np.int64)
    n = int(cells.max()) + 1

    def key(t):
        return (t[:, 0] * n + t[:, 1]) * n + t[:, 2]

    ck = key(cf)
    order = np.argsort(ck, kind="stable")
    fk = key(np.sort(faces[:, :3], axis=1).astype(np.int64))
    pos = order[np.searchsorted(ck, fk, sorter=order)]
    return pos // el.faces.shape[0]


def match_faces(faces: np.ndarray, tri_vertices: np.ndarray, tri_ids: np.ndarray) -> np.ndarray:
    """Surface id of each boundary face from a labelled list of triangles (by their corner nodes).

    Faces not found get id 0.
    """
    a = np.sort(faces[:, :3], axis=1)
    b = np.sort(tri_vertices[:, :3], axis=1)
    nmax = int(max(a.max(initial=0), b.max(initial=0))) + 1
    ka = (a[:, 0] * nmax + a[:, 1]) * nmax + a[:, 2]
    kb = (b[:, 0] * nmax + b[:, 1]) * nmax + b[:, 2]
    order = np.argsort(kb)
    pos = np.searchsorted(kb[order], ka)
    pos = np.clip(pos, 0, len(kb) - 1) if len(kb) else pos
    out = np.zeros(len(ka), dtype=np.int64)
    if len(kb):
        hit = kb[order][pos] == ka
        out[hit] = tri_ids[order][pos[hit]]
    return out


def segment_by_angle(points: np.ndarray, faces: np.ndarray, angle_deg: float = 30.0) -> np.ndarray:
    """Group boundary faces into surfaces: connected sets whose neighbours' normals differ < angle."""
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components

    f = faces.shape[0]
    n = face_normals(points, faces)
    edges = np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]])
    owner = np.tile(np.arange(f), 3)
    ek = np.sort(edges, axis=1)
    _, inv = np.unique(ek, axis=0, return_inverse=True)
    inv = inv.ravel()
    order = np.argsort(inv, kind="stable")
    si = inv[order]
    same = si[1:] == si[:-1]
    a, b = owner[order][:-1][same], owner[order][1:][same]
    keep = np.einsum("ij,ij->i", n[a], n[b]) > np.cos(np.radians(angle_deg))
    g = sp.coo_matrix((np.ones(keep.sum()), (a[keep], b[keep])), shape=(f, f))
    _, labels = connected_components(g, directed=False)
    return labels.astype(np.int64) + 1


def check_cells(points: np.ndarray, cells: np.ndarray) -> None:
    """Raise :class:`ModelError` for inverted or zero-volume cells."""
    from .fem.quadrature import tet_rule

    el = element_for(cells.shape[1])
    det = np.empty((cells.shape[0], 4 if el.nodes == 10 else 1))
    rule = tet_rule(2 if el.nodes == 10 else 1)
    dN = el.grad(rule.points)  # (q, k, 3)
    for s in range(0, cells.shape[0], 50000):
        # Determinants only: inverting the Jacobian would fail on the very cells looked for.
        J = np.einsum("enk,qnl->eqkl", points[cells[s:s + 50000]], dN, optimize=True)
        det[s:s + 50000] = np.linalg.det(J)
    scale = np.abs(det).max() if det.size else 1.0
    bad = np.flatnonzero((det <= 1e-12 * scale).any(axis=1))
    if bad.size:
        raise ModelError(f"{bad.size} of {cells.shape[0]} elements are inverted or have zero volume "
                         f"(first: {bad[:5].tolist()}); remesh or fix the mesh file")


#: Largest coordinate magnitude a mesh may have [length]: the volume and stiffness computations
#: cube coordinates, which must stay well inside the floating-point range (about 1.8e308).
MAX_COORDINATE = 1e60


def check_coordinates(points: np.ndarray) -> None:
    """Raise :class:`ModelError` for node coordinates that are not finite or beyond :data:`MAX_COORDINATE`."""
    with np.errstate(invalid="ignore"):
        bad = ~(np.abs(points) <= MAX_COORDINATE).all(axis=1)
    if bad.any():
        idx = np.flatnonzero(bad)
        first = points[idx[0]]
        what = "not finite numbers" if not np.isfinite(first).all() else f"beyond {MAX_COORDINATE:g} in size"
        raise ModelError(f"{idx.size} node(s) have coordinates that are {what} (first: node {int(idx[0])} at "
                         f"({', '.join(f'{v:.4g}' for v in first)}))")


def from_arrays(points: np.ndarray, cells: np.ndarray, tri_vertices: Optional[np.ndarray] = None,
                tri_ids: Optional[np.ndarray] = None, groups: Optional[dict] = None,
                strict_orientation: bool = False, cell_body: Optional[np.ndarray] = None) -> Mesh:
    """Build a :class:`Mesh`, labelling boundary faces from given triangles or by feature angle.

    Unreferenced points are removed, and cells with negative orientation are reordered.
    ``cell_body (m,)`` optionally gives the body (volume entity) of each cell.
    """
    points = np.ascontiguousarray(points, dtype=np.float64)
    cells = np.ascontiguousarray(cells, dtype=np.int64)
    if cells.ndim != 2 or cells.shape[1] not in (4, 10) or cells.shape[0] == 0:
        raise ModelError("the mesh has no 4- or 10-node tetrahedra")
    if cells.min() < 0 or cells.max() >= points.shape[0]:
        raise ModelError(f"cells refer to nodes that do not exist (node numbers from {int(cells.min())} to "
                         f"{int(cells.max())}, {points.shape[0]} nodes)")
    used = np.unique(cells)
    if used.size != points.shape[0]:
        remap = -np.ones(points.shape[0], dtype=np.int64)
        remap[used] = np.arange(used.size)
        points = points[used]
        cells = remap[cells]
        if tri_vertices is not None:
            keep = np.all(np.isin(tri_vertices[:, :3], used), axis=1)
            tri_vertices, tri_ids = remap[tri_vertices[keep]], tri_ids[keep]
    check_coordinates(points)  # of the nodes the cells use
    # Orientation by the corner tetrahedron.
    X = points[cells[:, :4]]
    vol6 = np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0])
    neg = vol6 < 0
    if strict_orientation and neg.any() and not neg.all():
        # In a mesh file, one node order with some cells reversed is a tangled mesh (elements
        # turned inside out), not a convention: flipping those would hide overlapping elements.
        # Meshes built in code (a mirrored half, say) are reordered cell by cell instead.
        bad = np.flatnonzero(neg if neg.sum() <= (~neg).sum() else ~neg)
        raise ModelError(f"{bad.size} of {cells.shape[0]} elements are inverted (negative volume; first: "
                         f"{bad[:5].tolist()}); remesh or fix the mesh file")
    if neg.any():  # every cell in the opposite convention: reorder them all
        cells = cells.copy()
        swap = [0, 2, 1, 3] if cells.shape[1] == 4 else [0, 2, 1, 3, 6, 5, 4, 7, 9, 8]
        cells[neg] = cells[neg][:, swap]
    check_cells(points, cells)
    faces = boundary_faces(cells)
    if tri_vertices is not None and len(tri_vertices):
        ids = match_faces(faces, tri_vertices, tri_ids)
        if (ids == 0).any():
            rest = segment_by_angle(points, faces[ids == 0])
            ids[ids == 0] = rest + ids.max()
    else:
        ids = segment_by_angle(points, faces)
    body = None if cell_body is None else np.ascontiguousarray(cell_body, dtype=np.int64)
    return Mesh(points, cells, faces, ids, dict(groups or {}), body)


# ----------------------------------------------------------------------------- catalogue
@dataclass(frozen=True)
class SurfaceInfo:
    """One boundary surface: what it is and where.

    ``kind`` is ``"plane"``, ``"cylinder"`` or ``"other"``; ``normal`` is set for planes (the
    outward normal), ``axis``, ``axis_point`` and ``radius`` for cylinders.
    """

    id: int
    kind: str
    area: float
    centroid: tuple
    bbox_min: tuple
    bbox_max: tuple
    faces: int
    normal: Optional[tuple] = None
    axis: Optional[tuple] = None
    axis_point: Optional[tuple] = None
    radius: Optional[float] = None


def _fit_surface(pts: np.ndarray, normals: np.ndarray, tol: float):
    c = pts.mean(axis=0)
    nm = normals.mean(axis=0)
    if np.linalg.norm(nm) > 1e-9:
        nhat = nm / np.linalg.norm(nm)
        if np.all(normals @ nhat > 1 - 1e-6) and np.abs((pts - c) @ nhat).max() <= tol:
            return "plane", {"normal": tuple(float(v) for v in nhat)}
    # Cylinder: normals nearly perpendicular to a common axis gives a first guess of the axis;
    # a least-squares fit of the points then sets axis, centre and radius.
    M = normals.T @ normals
    w, V = np.linalg.eigh(M)
    if w[1] > 1e-3 * w[2] and w[0] < 0.2 * w[2]:
        fit = fit_cylinder(pts, V[:, 0], c)
        if fit is not None:
            axis, p0, r, resid = fit
            if resid <= max(tol, 1e-6 * r):
                if axis[np.abs(axis).argmax()] < 0:
                    axis = -axis
                return "cylinder", {"axis": tuple(float(v) for v in axis),
                                    "axis_point": tuple(float(v) for v in p0), "radius": float(r)}
    return "other", {}


def fit_cylinder(pts: np.ndarray, axis0: np.ndarray, c: np.ndarray):
    """Least-squares cylinder through ``pts (p, 3)``: (axis, point on axis, radius, max residual)."""
    from scipy.optimize import least_squares

    def frame(a):
        a = a / np.linalg.norm(a)
        e1 = np.cross(a, [1.0, 0, 0] if abs(a[0]) < 0.9 else [0, 1.0, 0])
        e1 /= np.linalg.norm(e1)
        return a, e1, np.cross(a, e1)

    a0, e1, e2 = frame(axis0)
    xy = np.stack([(pts - c) @ e1, (pts - c) @ e2], axis=1)
    A = np.hstack([2 * xy, np.ones((xy.shape[0], 1))])
    sol, *_ = np.linalg.lstsq(A, (xy ** 2).sum(axis=1), rcond=None)
    r0 = np.sqrt(max(sol[2] + sol[0] ** 2 + sol[1] ** 2, 1e-300))

    def resid(x):
        a = a0 + x[0] * e1 + x[1] * e2
        a = a / np.linalg.norm(a)
        p0 = c + x[2] * e1 + x[3] * e2
        d = pts - p0
        radial = d - np.outer(d @ a, a)
        return np.linalg.norm(radial, axis=1) - x[4]

    try:
        out = least_squares(resid, np.array([0.0, 0.0, sol[0], sol[1], r0]), method="lm", xtol=1e-14, ftol=1e-14)
    except Exception:
        return None
    x = out.x
    a = a0 + x[0] * e1 + x[1] * e2
    a = a / np.linalg.norm(a)
    p0 = c + x[2] * e1 + x[3] * e2
    # Put the axis point at the foot of the centroid on the axis.
    p0 = p0 + np.dot(c - p0, a) * a
    return a, p0, abs(float(x[4])), float(np.abs(out.fun).max())


def surface_catalogue(mesh: Mesh) -> list[SurfaceInfo]:
    """Describe every boundary surface: kind, area, centroid, normal or axis and radius."""
    diag = float(np.linalg.norm(mesh.points.max(axis=0) - mesh.points.min(axis=0)))
    tol = 1e-6 * diag
    areas = face_areas(mesh.points, mesh.faces)
    normals = face_normals(mesh.points, mesh.faces)
    Xc = mesh.points[mesh.faces].mean(axis=1)
    out = []
    order = np.argsort(mesh.face_surface, kind="stable")
    sid = mesh.face_surface[order]
    starts = np.flatnonzero(np.r_[True, sid[1:] != sid[:-1]])
    ends = np.r_[starts[1:], sid.size]
    for s, e in zip(starts, ends):  # loop over surfaces (tens), not elements
        idx = order[s:e]
        nodes = np.unique(mesh.faces[idx])
        pts = mesh.points[nodes]
        a = areas[idx]
        kind, extra = _fit_surface(pts, normals[idx], tol)
        cen = (Xc[idx] * a[:, None]).sum(axis=0) / a.sum()
        out.append(SurfaceInfo(int(sid[s]), kind, float(a.sum()), tuple(float(v) for v in cen),
                               tuple(float(v) for v in pts.min(axis=0)),
                               tuple(float(v) for v in pts.max(axis=0)), int(idx.size), **extra))
    return out


# ----------------------------------------------------------------------------- files
#: Volume cell types by name prefix (meshio's names; Gmsh's are mapped to these).
VOLUME_PREFIXES = ("tetra", "hexahedron", "wedge", "pyramid", "polyhedron", "VTK_LAGRANGE_TETRAHEDRON",
                   "VTK_LAGRANGE_HEXAHEDRON", "VTK_LAGRANGE_WEDGE", "VTK_LAGRANGE_PYRAMID")
#: Nodes per cell of the tetrahedra elastofe solves, by type name.
TET_TYPES = {"tetra": 4, "tetra10": 10}


def volume_cells(blocks: list, source: str) -> tuple[np.ndarray, np.ndarray]:
    """Every tetrahedron of a mesh file's cell blocks, merged; refuse what cannot be used.

    Parameters
    ----------
    blocks : list of (type name, (c, k) int array)
        The file's cell blocks (meshio type names); surface, line and vertex cells are ignored.
    source : str
        The file, for messages.

    Returns
    -------
    cells : (m, 4 or 10) int64
        All tetrahedra of all blocks, in block order.
    block : (m,) int64
        The index in ``blocks`` (from 0) of the block each cell came from.

    Raises
    ------
    CaseError
        (key ``geometry.file``) when the file holds no tetrahedra, 4- and 10-node tetrahedra
        together (not a conforming mesh: the 4-node cells have no mid-side nodes), or volume cells
        of another kind (hexahedra, wedges, pyramids, higher-order tetrahedra), naming the types
        and counts: no cell is ever dropped silently.
    """
    counts: dict[str, int] = {}
    for name, data in blocks:
        if name.startswith(VOLUME_PREFIXES):
            counts[name] = counts.get(name, 0) + int(len(data))
    counts = {k: v for k, v in counts.items() if v}
    listing = ", ".join(f"{v:,} {k}" for k, v in counts.items())
    other = [k for k in counts if k not in TET_TYPES]
    if other:
        raise CaseError("geometry.file", source, f"holds volume cells elastofe cannot use ({listing}); only "
                        "4-node (tetra) or 10-node (tetra10) tetrahedra are solved: remesh the part with "
                        "tetrahedra (no cell is dropped silently)")
    if not counts:
        raise CaseError("geometry.file", source, "contains no tetra or tetra10 cells; a volume mesh of "
                        "4- or 10-node tetrahedra is needed")
    if len(counts) > 1:
        raise CaseError("geometry.file", source, f"mixes 4- and 10-node tetrahedra ({listing}): such a mesh "
                        "is not conforming (the 4-node cells have no mid-side nodes); write it with one "
                        "element order")
    k = TET_TYPES[next(iter(counts))]
    parts = [(i, np.asarray(d, dtype=np.int64).reshape(-1, k)) for i, (name, d) in enumerate(blocks)
             if name in TET_TYPES and len(d)]
    cells = np.vstack([d for _, d in parts])
    block = np.concatenate([np.full(d.shape[0], i, dtype=np.int64) for i, d in parts])
    return cells, block


def mesh_file_arrays(path: Path) -> dict:
    """The raw arrays of a .vtu/.vtk (meshio) or XDMF (.xdmf/.xmf, arrays inline or in HDF5:
    :func:`elastofe.xdmf.read_xdmf`) mesh file.

    Returns ``{"ids": (p,) the point array node_id or None, "points": (p, 3), "cells": (c, 4|10),
    "tri": (t, 3), "tri_ids": (t,), "groups": {}, "cell_body": (c,) or None}``; every block of
    tetra or tetra10 cells is used (merged); triangles with an id array (``surface_id``,
    ``gmsh:geometrical`` or ``gmsh:physical``) label boundary surfaces. Mixed element orders and
    other volume cells are refused (:func:`volume_cells`).
    """
    import meshio

    from .case.load import XDMF_SUFFIXES
    from .fdcapture import captured_fds

    check_readable(path)
    if Path(path).suffix.lower() in XDMF_SUFFIXES:
        x = read_xdmf(Path(path))
        return file_arrays(path, x.points, x.blocks, x.point_data, x.cell_data)
    failure = None
    # meshio prints to fd 1/2 and even calls sys.exit on some corrupt files: keep both inside.
    with captured_fds() as cap:
        try:
            m = meshio.read(str(path))
        except (Exception, SystemExit) as err:
            failure = f"{type(err).__name__}: {err}" if not isinstance(err, SystemExit) else ""
    if failure is not None:
        detail = cap.first_error() or failure or "unreadable"
        raise CaseError("geometry.file", str(path), f"cannot be read as a {path.suffix[1:].upper()} mesh "
                        f"({detail}); the file may be truncated: write the mesh again") from None
    return file_arrays(path, m.points, [(c.type, c.data) for c in m.cells], m.point_data, m.cell_data)


def file_arrays(path: Path, points: np.ndarray, blocks: list, point_data: dict, cell_data: dict) -> dict:
    """The arrays of :func:`mesh_file_arrays` from a file's points (p, 3), cell blocks
    [(meshio type name, (c, k) int)], point data {name: (p, ...)} and cell data {name: [one array
    per block]} (meshio's layout, which the XDMF reader keeps)."""
    if points.ndim != 2 or points.shape[1] != 3:
        raise CaseError("geometry.file", str(path), f"has points with {points.shape[-1]} coordinates; a 3D "
                        "volume mesh (x, y, z) is needed")
    cells, block = volume_cells(blocks, str(path))
    body = None
    key = "gmsh:geometrical"
    if key in cell_data and all(cell_data[key][b] is not None for b in np.unique(block)):
        # Volume entity of each cell, as Gmsh wrote it: the body of the source geometry.
        per_block = {int(b): np.asarray(cell_data[key][b], dtype=np.int64).ravel() for b in np.unique(block)}
        body = np.concatenate([per_block[int(b)] for b in np.unique(block)])
    tri_parts, id_parts = [], []
    for i, (ctype, cdata) in enumerate(blocks):
        if ctype in ("triangle", "triangle6"):
            for key in ("surface_id", "gmsh:geometrical", "gmsh:physical"):
                if key in cell_data and cell_data[key][i] is not None:
                    tri_parts.append(np.asarray(cdata)[:, :3])
                    id_parts.append(np.asarray(cell_data[key][i], dtype=np.int64).ravel())
                    break
    ids = point_data.get("node_id")
    return {"ids": None if ids is None else np.asarray(ids, dtype=np.int64).ravel(),
            "points": np.asarray(points, dtype=np.float64), "cells": cells,
            "tri": np.vstack(tri_parts).astype(np.int64) if tri_parts else np.zeros((0, 3), np.int64),
            "tri_ids": np.concatenate(id_parts) if id_parts else np.zeros(0, np.int64), "groups": {},
            "cell_body": body}


def read_mesh_file(path: Path, order: Optional[int] = None) -> Mesh:
    """Read a .vtu/.vtk (meshio) or .xdmf/.xmf mesh (see :func:`mesh_file_arrays`)."""
    a = mesh_file_arrays(path)
    tri = a["tri"] if len(a["tri"]) else None
    try:
        return from_arrays(a["points"], a["cells"], tri, a["tri_ids"] if tri is not None else None,
                           strict_orientation=True, cell_body=a["cell_body"])
    except ModelError as err:  # a mesh file is input: its defects are the case's
        raise CaseError("geometry.file", str(path), f"{err}; a volume mesh of 4- or 10-node tetrahedra "
                        "with positive volumes is needed") from None


def check_readable(path: Path) -> None:
    """Raise :class:`CaseError` (key ``geometry.file``) unless ``path`` is a readable regular file
    of a size the reader can hold in the memory available (checked before anything opens it: a
    named pipe would block the reader, a device such as /dev/zero never ends)."""
    from .files import check_input_file
    from .resources import file_read_limit

    path = Path(path)
    near = ""
    try:
        missing = not os.path.lexists(path)
    except (OSError, ValueError):
        missing = False
    if missing and path.parent.is_dir():
        import difflib

        with contextlib.suppress(OSError):
            names = [p.name for p in path.parent.iterdir() if p.is_file()]
            hint = difflib.get_close_matches(path.name, names, n=1)
            near = f"; did you mean {hint[0]!r}?" if hint else ""
    limit, why = file_read_limit(path)
    check_input_file(path, "geometry.file", max_bytes=limit, limit_reason=why,
                     not_found=f"file not found (paths are relative to the case file){near}")


def write_vtu(path: Path, mesh: Mesh, point_data: dict, cell_data: dict, *,
              components: Optional[dict[str, Sequence[str]]] = None,
              field_data: Optional[dict[str, np.ndarray]] = None) -> None:
    """Write the mesh and fields as VTU (quadratic cells for order 2).

    Parameters
    ----------
    point_data : {name: (n,) or (n, c)} ; cell_data : {name: (m,) or (m, c)}
    components : {array name: c component names}, written as VTK's ``ComponentName0..`` attributes
        (VTK and ParaView show them; meshio ignores them).
    field_data : {name: 1-D integer or float array}, written as the grid's ``FieldData`` (meshio
        writes none, so it is added to the file afterwards; meshio and VTK both read it back).
    """
    import meshio

    ctype = element_for(mesh.cells.shape[1]).vtk_name
    m = meshio.Mesh(mesh.points, [(ctype, mesh.cells)], point_data=point_data,
                    cell_data={k: [v] for k, v in cell_data.items()})
    meshio.write(str(path), m, file_format="vtu")
    if components or field_data:
        _add_vtu_metadata(Path(path), components or {}, field_data or {})


_VTU_TYPES = {np.dtype(np.uint8): "UInt8", np.dtype(np.int32): "Int32", np.dtype(np.int64): "Int64",
              np.dtype(np.float64): "Float64"}


def _add_vtu_metadata(path: Path, components: dict, field_data: dict) -> None:
    """Add component names and a FieldData block to a VTU file that meshio wrote.

    meshio writes every XML tag on a line of its own (the data on the next), so the file is
    copied line by line (a large file is never held whole) and the tags are edited as text.
    """
    import re
    from xml.sax.saxutils import quoteattr

    tag = re.compile(r'^<DataArray (.*)Name="([^"]*)"(.*)>\s*$')
    block = ["<FieldData>\n"]
    for name, arr in field_data.items():
        arr = np.asarray(arr).ravel()
        vtype = _VTU_TYPES[arr.dtype]
        block.append(f'<DataArray type="{vtype}" Name={quoteattr(name)} NumberOfTuples="{arr.size}" format="ascii">\n')
        block.append(" ".join(str(v) for v in arr.tolist()) + "\n</DataArray>\n")
    block.append("</FieldData>\n")
    tmp = path.with_name(path.name + ".meta")
    with open(path, encoding="utf-8", newline="") as src, open(tmp, "w", encoding="utf-8", newline="") as dst:
        for line in src:
            if line.startswith("<DataArray "):
                hit = tag.match(line)
                if hit and hit.group(2) in components:
                    names = "".join(f" ComponentName{i}={quoteattr(str(c))}"
                                    for i, c in enumerate(components[hit.group(2)]))
                    line = line.rstrip()[:-1] + names + ">\n"
            dst.write(line)
            if line.startswith("<UnstructuredGrid") and field_data:
                dst.writelines(block)
    os.replace(tmp, path)
