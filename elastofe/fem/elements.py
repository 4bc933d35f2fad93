"""Tetrahedral solid elements and their triangular faces: small, stateless classes.

Node ordering follows VTK (and meshio): TET10 edge nodes 4..9 sit on edges (0,1), (1,2), (2,0),
(0,3), (1,3), (2,3). A new element is a new class here plus one entry in :data:`ELEMENTS`.
"""
from __future__ import annotations

import numpy as np


class Tri3:
    """3-node triangle on the reference triangle (0,0), (1,0), (0,1)."""

    nodes = 3
    degree = 1

    @staticmethod
    def shape(rs: np.ndarray) -> np.ndarray:
        """Shape functions ``(q, 3)`` at reference points ``rs (q, 2)``."""
        r, s = rs[:, 0], rs[:, 1]
        return np.stack([1 - r - s, r, s], axis=1)

    @staticmethod
    def grad(rs: np.ndarray) -> np.ndarray:
        """Gradients ``(q, 3, 2)`` with respect to (r, s)."""
        g = np.array([[-1.0, -1.0], [1.0, 0.0], [0.0, 1.0]])
        return np.broadcast_to(g, (rs.shape[0], 3, 2)).copy()


class Tri6:
    """6-node triangle: corners, then mid-side nodes on (0,1), (1,2), (2,0)."""

    nodes = 6
    degree = 2

    @staticmethod
    def shape(rs: np.ndarray) -> np.ndarray:
        r, s = rs[:, 0], rs[:, 1]
        t = 1 - r - s
        return np.stack([t * (2 * t - 1), r * (2 * r - 1), s * (2 * s - 1), 4 * t * r, 4 * r * s, 4 * s * t], axis=1)

    @staticmethod
    def grad(rs: np.ndarray) -> np.ndarray:
        r, s = rs[:, 0], rs[:, 1]
        t = 1 - r - s
        z = np.zeros_like(r)
        dr = np.stack([1 - 4 * t, 4 * r - 1, z, 4 * (t - r), 4 * s, -4 * s], axis=1)
        ds = np.stack([1 - 4 * t, z, 4 * s - 1, -4 * r, 4 * r, 4 * (t - s)], axis=1)
        return np.stack([dr, ds], axis=2)


class Tet4:
    """4-node linear tetrahedron on the reference tetrahedron."""

    nodes = 4
    degree = 1
    face = Tri3
    ref_nodes = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    #: Local node indices of the four faces, ordered so that their normal points outward.
    faces = np.array([[0, 2, 1], [0, 1, 3], [1, 2, 3], [0, 3, 2]])
    #: Quadrature degree adequate for the stiffness of straight / curved elements.
    stiffness_degree = (1, 1)
    vtk_name = "tetra"

    @staticmethod
    def shape(xi: np.ndarray) -> np.ndarray:
        """Shape functions ``(q, 4)`` at reference points ``xi (q, 3)``."""
        x, y, z = xi[:, 0], xi[:, 1], xi[:, 2]
        return np.stack([1 - x - y - z, x, y, z], axis=1)

    @staticmethod
    def grad(xi: np.ndarray) -> np.ndarray:
        """Reference gradients ``(q, 4, 3)``."""
        g = np.array([[-1.0, -1, -1], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
        return np.broadcast_to(g, (xi.shape[0], 4, 3)).copy()


class Tet10:
    """10-node quadratic tetrahedron (VTK node order)."""

    nodes = 10
    degree = 2
    face = Tri6
    edges = np.array([[0, 1], [1, 2], [2, 0], [0, 3], [1, 3], [2, 3]])
    ref_nodes = np.vstack([Tet4.ref_nodes, 0.5 * (Tet4.ref_nodes[edges[:, 0]] + Tet4.ref_nodes[edges[:, 1]])])
    faces = np.array([[0, 2, 1, 6, 5, 4], [0, 1, 3, 4, 8, 7], [1, 2, 3, 5, 9, 8], [0, 3, 2, 7, 9, 6]])
    stiffness_degree = (2, 5)
    vtk_name = "tetra10"

    @staticmethod
    def shape(xi: np.ndarray) -> np.ndarray:
        L = np.stack([1 - xi.sum(axis=1), xi[:, 0], xi[:, 1], xi[:, 2]], axis=1)
        e = Tet10.edges
        return np.hstack([L * (2 * L - 1), 4 * L[:, e[:, 0]] * L[:, e[:, 1]]])

    @staticmethod
    def grad(xi: np.ndarray) -> np.ndarray:
        q = xi.shape[0]
        L = np.stack([1 - xi.sum(axis=1), xi[:, 0], xi[:, 1], xi[:, 2]], axis=1)  # (q, 4)
        dL = np.array([[-1.0, -1, -1], [1, 0, 0], [0, 1, 0], [0, 0, 1]])  # (4, 3)
        e = Tet10.edges
        g = np.empty((q, 10, 3))
        g[:, :4, :] = (4 * L - 1)[:, :, None] * dL[None, :, :]
        g[:, 4:, :] = 4 * (L[:, e[:, 0], None] * dL[e[:, 1]][None] + L[:, e[:, 1], None] * dL[e[:, 0]][None])
        return g


ELEMENTS = {4: Tet4, 10: Tet10}


def element_for(nodes_per_cell: int):
    """The element class for cells with ``nodes_per_cell`` nodes."""
    try:
        return ELEMENTS[nodes_per_cell]
    except KeyError:
        raise ValueError(f"no tetrahedral element with {nodes_per_cell} nodes; known: {sorted(ELEMENTS)}") from None
