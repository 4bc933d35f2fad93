"""Near-nullspace and coarse-level arrays for the multigrid solver, built from the mesh.

The solver backends see arrays only (a matrix, a right-hand side, a near-nullspace ``B`` and any
coarse-level operator), as pyamg takes ``B`` and PETSc a near-nullspace; the caller builds them
here from the mesh and passes them on.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .elements import element_for

__all__ = ["rigid_modes", "corner_prolongation", "amg_options"]


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



def corner_prolongation(cells: np.ndarray, n: int) -> tuple[sp.csr_matrix, np.ndarray]:
    """Map ``P (3n, 3v)`` from the corner-node DOFs of a 10-node mesh to all its DOFs.

    A corner node keeps its own value; an edge node takes the mean of its edge's two corners, which
    reproduces every linear field, so ``Pᵀ K P`` is the 4-node stiffness on straight cells.

    Returns
    -------
    P : (3n, 3v) CSR.
    corners : (v,) node indices of the corner nodes.
    """
    el = element_for(cells.shape[1])
    corners = np.unique(cells[:, :4])
    col = np.full(n, -1, dtype=np.int64)
    col[corners] = np.arange(corners.size)
    rows = [corners]
    cols = [col[corners]]
    vals = [np.ones(corners.size)]
    if cells.shape[1] == 10:
        mid = cells[:, 4:].ravel()
        ends = cells[:, el.edges].reshape(-1, 2)
        mid, first = np.unique(mid, return_index=True)
        ends = ends[first]
        rows += [mid, mid]
        cols += [col[ends[:, 0]], col[ends[:, 1]]]
        vals += [np.full(mid.size, 0.5), np.full(mid.size, 0.5)]
    r, c, v = np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)
    Pn = sp.csr_matrix((v, (r, c)), shape=(n, corners.size))
    return sp.kron(Pn, sp.eye(3), format="csr"), corners


def amg_options(points: np.ndarray, cells: np.ndarray, free: np.ndarray, *, p_multigrid: bool = True,
                transform: sp.spmatrix | None = None) -> dict:
    """Options for the ``amg`` backend on the free DOFs ``free (3n,)`` bool of a mesh.

    Returns ``modes`` (rigid-body modes on the free DOFs), ``blocksize`` (3 when every node is
    either wholly free or wholly held), and for 10-node meshes with ``p_multigrid`` the corner-node
    ``prolongation`` with its ``coarse_modes`` and ``coarse_blocksize``.
    """
    n = points.shape[0]
    if transform is not None:
        # Rotated nodal frames (sliding or cylindrical supports): the modes in the local
        # components; node blocks and the corner-node level assume global components, so plain
        # scalar smoothed aggregation.
        return {"modes": np.asarray(transform @ rigid_modes(points))[free], "blocksize": 1}
    per_node = free.reshape(n, 3)
    whole = bool(np.all(per_node.all(axis=1) | ~per_node.any(axis=1)))
    opts = {"modes": rigid_modes(points)[free], "blocksize": 3 if whole else 1}
    if p_multigrid and cells.shape[1] == 10:
        P, corners = corner_prolongation(cells, n)
        cfree = per_node[corners].ravel()
        opts["prolongation"] = P[free][:, cfree]
        opts["coarse_modes"] = rigid_modes(points[corners])[cfree]
        opts["coarse_blocksize"] = 3 if whole else 1
    return opts
