"""Meshes built in code for the element-level benchmarks: the MacNeal & Harder solid patch and
structured cube meshes for manufactured solutions. Plain arrays; no Gmsh.

``points (n, 3)`` [length]; ``cells (m, 4|10)`` in VTK node order (TET10 edge nodes on edges
(0,1), (1,2), (2,0), (0,3), (1,3), (2,3)).
"""
from __future__ import annotations

import numpy as np

from ..fem.elements import Tet10

#: Interior nodes of the solid patch, listed in the order of the cube corners they sit near:
#: (0,0,0), (1,0,0), (1,1,0), (0,1,0), (0,0,1), (1,0,1), (1,1,1), (0,1,1).
#: Source: R. H. MacNeal and R. L. Harder, Finite Elem. Anal. Des. 1 (1985) 3-20, the solid
#: patch test (coordinates as /work/shared/reference/benchmarks.md 2.5 gives them).
PATCH_INTERIOR = np.array([
    [0.249, 0.342, 0.192], [0.826, 0.288, 0.288], [0.850, 0.649, 0.263], [0.273, 0.750, 0.230],
    [0.320, 0.186, 0.643], [0.677, 0.305, 0.683], [0.788, 0.693, 0.644], [0.165, 0.745, 0.702]])

_CUBE = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], float)
#: The six faces of a hexahedron (corner order as _CUBE), each as a cycle of four corners.
_HEX_FACES = np.array([[0, 3, 2, 1], [4, 5, 6, 7], [0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6], [3, 0, 4, 7]])


def _orient(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Reorder 4-node cells to positive volume."""
    X = points[cells]
    v = np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0])
    out = cells.copy()
    out[v < 0] = out[v < 0][:, [0, 2, 1, 3]]
    return out


def tet10_from_tet4(points: np.ndarray, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Add a mid-side node at the midpoint of every edge: straight TET10 cells ``(m, 10)``."""
    e = Tet10.edges
    pairs = np.sort(cells[:, e].reshape(-1, 2), axis=1)  # (6m, 2)
    uniq, inv = np.unique(pairs, axis=0, return_inverse=True)
    mid = 0.5 * (points[uniq[:, 0]] + points[uniq[:, 1]])
    new = points.shape[0] + inv.reshape(-1, 6)
    return np.vstack([points, mid]), np.hstack([cells, new])


def hexes_to_tets(points: np.ndarray, hexes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Split hexahedra ``(h, 8)`` into 24 tetrahedra each, conformingly.

    Each hexahedron gets a node at its centroid and each face a node at the mean of its four
    corners (shared by both hexahedra of an interior face); every face is cut into four
    triangles about its node, and each triangle joined to the centroid. Because a face's
    triangles depend only on its four corners, neighbouring hexahedra match without any
    choice of diagonals.
    """
    faces = hexes[:, _HEX_FACES]  # (h, 6, 4)
    key = np.sort(faces.reshape(-1, 4), axis=1)
    ukey, finv = np.unique(key, axis=0, return_inverse=True)
    finv = finv.reshape(hexes.shape[0], 6)
    fnode = points.shape[0] + finv
    fpts = points[ukey].mean(axis=1)
    cnode = points.shape[0] + ukey.shape[0] + np.arange(hexes.shape[0])
    cpts = points[hexes].mean(axis=1)
    tets = []
    for k in range(4):  # each face edge (a, b) with its face node and the hexahedron centroid
        a, b = faces[:, :, k], faces[:, :, (k + 1) % 4]
        tets.append(np.stack([a, b, fnode, np.broadcast_to(cnode[:, None], a.shape)], axis=-1))
    cells = np.concatenate(tets, axis=1).reshape(-1, 4)
    pts = np.vstack([points, fpts, cpts])
    return pts, _orient(pts, cells)


def solid_patch(order: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """The MacNeal & Harder (1985) solid patch: the unit cube as 7 hexahedra (an inner one on the
    eight published interior nodes and six joining it to the cube's faces), split into tetrahedra.

    Returns ``points (n, 3)``, ``cells (m, 4 or 10)``; the first 8 points are the cube's corners,
    the next 8 the published interior nodes.
    """
    pts = np.vstack([_CUBE, PATCH_INTERIOR])
    inner = np.arange(8, 16)
    hexes = [inner]
    for f in _HEX_FACES:  # outer face corners f, inner face corners f + 8, same cyclic order
        hexes.append(np.concatenate([f, f + 8]))
    # Each joining hex: its corner order (outer quad, inner quad) is a valid hexahedron cycle
    # up to orientation; _orient fixes the sign of every tetrahedron.
    p, c = hexes_to_tets(pts, np.array(hexes))
    if order == 2:
        p, c = tet10_from_tet4(p, c)
    return p, c


def structured_block(nx: int, ny: int, nz: int, order: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """The unit cube as nx × ny × nz boxes, each split into six tetrahedra about its main diagonal
    (Kuhn's split; it matches between neighbours because every box uses the same diagonal
    direction), with straight mid-side nodes for order 2."""
    gx, gy, gz = np.linspace(0, 1, nx + 1), np.linspace(0, 1, ny + 1), np.linspace(0, 1, nz + 1)
    X, Y, Z = np.meshgrid(gx, gy, gz, indexing="ij")
    pts = np.stack([X.ravel(), Y.ravel(), Z.ravel()], axis=1)
    idx = np.arange(pts.shape[0]).reshape(nx + 1, ny + 1, nz + 1)
    i, j, k = (a.ravel() for a in np.meshgrid(np.arange(nx), np.arange(ny), np.arange(nz), indexing="ij"))
    v = [idx[i + a, j + b, k + c] for a, b, c in
         [(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0), (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)]]
    # Six tetrahedra sharing the diagonal v0-v6; consecutive pairs of the ring 1-2-3-7-4-5.
    ring = [(1, 2), (2, 3), (3, 7), (7, 4), (4, 5), (5, 1)]
    cells = _orient(pts, np.concatenate([np.stack([v[0], v[a], v[b], v[6]], axis=1) for a, b in ring]))
    if order == 2:
        pts, cells = tet10_from_tet4(pts, cells)
    return pts, cells


def structured_cube(n: int, order: int = 1, length: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """The cube [0, length]³ as n³ boxes split into tetrahedra (:func:`structured_block`)."""
    pts, cells = structured_block(n, n, n, order)
    return pts * length, cells


def mapped_block(nx: int, ny: int, nz: int, mapping, order: int = 1,
                 curved: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """A :func:`structured_block` of the unit cube carried by ``mapping((p, 3) -> (p, 3))``.

    With ``curved`` (order 2) the mid-side nodes are mapped too, so the cells follow a curved image
    (isoparametric, quadratic geometry); otherwise only the corners are mapped and the mid-side
    nodes sit at the straight edge midpoints. ``mapping`` must keep the orientation (positive
    Jacobian) for the cells to keep positive volumes.
    """
    if order == 2 and curved:
        pts, cells = structured_block(nx, ny, nz, 2)
        return np.asarray(mapping(pts), dtype=float), cells
    pts, cells = structured_block(nx, ny, nz, 1)
    pts = np.asarray(mapping(pts), dtype=float)
    if order == 2:
        pts, cells = tet10_from_tet4(pts, cells)
    return pts, cells


def quarter_ring_mesh(a: float, b: float, height: float, nr: int, nt: int, nz: int = 1,
                      order: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """Quarter (x, y ≥ 0) of a thick-walled tube, radii a..b, z from 0 to ``height``: a structured
    nr × nt × nz block mapped to polar coordinates, radial spacing uniform. Order 2 cells are curved
    (their mid-side nodes on the mapped arcs), so the bore and outer surface are quadratic arcs."""
    def polar(p):
        r = a + (b - a) * p[:, 0]
        t = 0.5 * np.pi * p[:, 1]
        return np.stack([r * np.cos(t), r * np.sin(t), height * p[:, 2]], axis=1)

    return mapped_block(nr, nt, nz, polar, order, curved=True)


#: Corners of Cook's tapered panel (R. D. Cook, J. Struct. Div. ASCE 100 (1974) 1851-1863), in the
#: order (0, 0), (48, 44), (48, 60), (0, 44).
COOK_CORNERS = np.array([[0.0, 0.0], [48.0, 44.0], [48.0, 60.0], [0.0, 44.0]])


def cook_membrane_mesh(n: int, order: int = 2, thickness: float = 1.0,
                       layers: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Cook's tapered panel as a slab: n × n divisions of the quadrilateral (bilinear map of the
    unit square, x = 48 ξ, y from 44 ξ to 44 + 16 ξ), ``layers`` through the ``thickness``.
    The panel's edges are straight, so the cells are straight (mid-side nodes at edge midpoints)."""
    def cook(p):
        xi, eta = p[:, 0], p[:, 1]
        y0, y1 = 44.0 * xi, 44.0 + 16.0 * xi
        return np.stack([48.0 * xi, y0 + eta * (y1 - y0), thickness * p[:, 2]], axis=1)

    return mapped_block(n, n, layers, cook, order, curved=False)


def distorted_block(n: int, distortion: float = 0.0, curved: float = 0.0, *, move_boundary: bool = False,
                    seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """The unit cube as a 10-node :func:`structured_cube` with its nodes moved at random.

    Corner nodes not on the boundary move by up to ``distortion`` × the box size h in each
    direction (the cells stay straight); then mid-side nodes move off their edge midpoints by up to
    ``curved`` × h (quadratic-geometry cells with curved edges). Mid-side nodes on the boundary move
    too only with ``move_boundary`` (then the cube's faces become curved surfaces). Keep both
    factors below about 0.2 so that no cell inverts.
    """
    rng = np.random.default_rng(seed)
    pts, cells = structured_block(n, n, n, 1)
    h = 1.0 / n
    inner = np.all((pts > 1e-12) & (pts < 1 - 1e-12), axis=1)
    pts = pts.copy()
    pts[inner] += distortion * h * rng.uniform(-1, 1, (int(inner.sum()), 3))
    pts, cells = tet10_from_tet4(pts, cells)
    mids = np.unique(cells[:, 4:])
    if not move_boundary:
        on_bnd = np.any((pts[mids] < 1e-12) | (pts[mids] > 1 - 1e-12), axis=1)
        mids = mids[~on_bnd]
    pts[mids] += curved * h * rng.uniform(-1, 1, (mids.size, 3))
    return pts, cells
