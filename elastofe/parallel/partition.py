"""Mesh partitioning and the distributed numbering of nodes and DOF.

Cells are split into one part per rank along the element dual graph (cells sharing a face),
by PETSc's partitioner (PT-Scotch or ParMETIS, whichever PETSc was built with) or, when PETSc
has neither, by recursive coordinate bisection of the cell centroids. Each node is then owned
by the lowest-numbered part among the cells that contain it, and nodes are renumbered so that
rank r owns one contiguous range of them: the rows ``3*start_r .. 3*stop_r`` of the distributed
matrix. Everything here except :func:`partition_cells` is plain numpy, run on rank 0.

Arrays: ``cells (m, k)`` node indices, ``points (n, 3)``, ``part (m,)`` part of each cell,
``new_id (n,)`` the new number of each old node, ``order (n,)`` the old node of each new number.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

log = logging.getLogger(__name__)

#: The four faces of a tetrahedron by its corner nodes (node order irrelevant: keys are sorted).
_TET_FACES = np.array([[1, 2, 3], [0, 2, 3], [0, 1, 3], [0, 1, 2]])


def dual_graph(cells: np.ndarray) -> sp.csr_matrix:
    """Cells adjacent through a shared face: symmetric ``(m, m)`` CSR of ones, no diagonal.

    Faces are matched by their sorted corner triples (mid-side nodes do not matter); an
    interior face appears exactly twice among the ``4 m`` cell faces.
    """
    m = cells.shape[0]
    f = np.sort(cells[:, _TET_FACES], axis=2).reshape(-1, 3)
    owner = np.repeat(np.arange(m), 4)
    o = np.lexsort((f[:, 2], f[:, 1], f[:, 0]))
    fs = f[o]
    same = np.all(fs[1:] == fs[:-1], axis=1)
    a, b = owner[o[:-1][same]], owner[o[1:][same]]
    rows = np.concatenate([a, b])
    cols = np.concatenate([b, a])
    itype = np.int32 if m < 2**31 - 1 else np.int64
    g = sp.csr_matrix((np.ones(rows.size, dtype=itype), (rows.astype(itype), cols.astype(itype))), shape=(m, m))
    g.sum_duplicates()
    return g


def coordinate_bisection(centroids: np.ndarray, nparts: int) -> np.ndarray:
    """Parts ``(m,)`` by recursive bisection along the longest extent, sized in proportion.

    The fallback when PETSc has no graph partitioner: it balances cell counts exactly but
    ignores connectivity, so interfaces are somewhat larger than a graph partitioner's.
    """
    m = centroids.shape[0]
    part = np.zeros(m, dtype=np.int64)
    # Work list of (cell indices, first part, number of parts); the loop runs O(nparts) times.
    todo = [(np.arange(m), 0, nparts)]
    while todo:
        idx, first, k = todo.pop()
        if k == 1 or idx.size == 0:
            part[idx] = first
            continue
        k_lo = k // 2
        c = centroids[idx]
        axis = int(np.argmax(c.max(axis=0) - c.min(axis=0)))
        cut = int(round(idx.size * k_lo / k))
        srt = idx[np.argsort(c[:, axis], kind="stable")]
        todo.append((srt[:cut], first, k_lo))
        todo.append((srt[cut:], first + k_lo, k - k_lo))
    return part


def partition_cells(comm, PETSc, points: np.ndarray | None, cells: np.ndarray | None,
                    method: str = "auto") -> np.ndarray | None:
    """Part (rank) of each cell; collective over ``comm``, inputs and result on rank 0 only.

    Parameters
    ----------
    comm : mpi4py communicator; one part per rank.
    PETSc : the petsc4py.PETSc module.
    points, cells : the mesh on rank 0 (None elsewhere).
    method : "auto" (PETSc's PT-Scotch or ParMETIS, else coordinate bisection), "ptscotch",
        "parmetis" or "bisection".

    Returns
    -------
    part : (m,) int64 on rank 0, None elsewhere.
    """
    size, rank = comm.size, comm.rank
    if size == 1:
        return np.zeros(cells.shape[0], dtype=np.int64)
    if method == "auto":
        method = next((p for p in ("ptscotch", "parmetis") if PETSc.Sys.hasExternalPackage(p)), "bisection")
    if method == "bisection":
        if rank != 0:
            return None
        el_nodes = 4  # corners only: the centroid of the corners is the cell's
        return coordinate_bisection(points[cells[:, :el_nodes]].mean(axis=1), size)

    # The dual graph is built on rank 0 and dealt out in contiguous row blocks; PETSc's
    # partitioner then runs on all ranks and returns each local row's new part.
    if rank == 0:
        g = dual_graph(cells)
        m = g.shape[0]
        bounds = np.linspace(0, m, size + 1).round().astype(np.int64)
        for r in range(1, size):
            blk = g[bounds[r]:bounds[r + 1]]
            comm.send((m, bounds[r], blk.indptr, blk.indices), dest=r, tag=11)
        blk = g[bounds[0]:bounds[1]]
        mine = (m, 0, blk.indptr, blk.indices)
    else:
        mine = comm.recv(source=0, tag=11)
    m, first, indptr, indices = mine
    nloc = indptr.size - 1
    it = PETSc.IntType
    adj = PETSc.Mat().createAIJ(size=((nloc, m), (nloc, m)), comm=comm,
                                csr=(indptr.astype(it), indices.astype(it), np.ones(indices.size)))
    adj.assemble()
    mp = PETSc.MatPartitioning().create(comm=comm)
    mp.setAdjacency(adj)
    mp.setType(method)
    mp.setFromOptions()
    is_part = PETSc.IS()
    mp.apply(is_part)
    local = is_part.getIndices().astype(np.int64)
    mp.destroy()
    adj.destroy()
    is_part.destroy()
    gathered = comm.gather(local, root=0)
    if rank != 0:
        return None
    part = np.concatenate(gathered)
    if np.unique(part).size < size:
        # A partitioner may leave a part empty on tiny meshes; every rank must own DOF.
        log.warning("%s left a part empty; using coordinate bisection", method)
        part = coordinate_bisection(points[cells[:, :4]].mean(axis=1), size)
    return part


@dataclass(frozen=True)
class Numbering:
    """Distributed node numbering: rank r owns new nodes ``starts[r] .. starts[r+1]``.

    ``new_id (n,)`` new number of each old node; ``order (n,)`` old node of each new number;
    ``starts (P+1,)`` node ranges; ``part (m,)`` part of each cell.
    """

    new_id: np.ndarray
    order: np.ndarray
    starts: np.ndarray
    part: np.ndarray

    def dof_new(self, dofs: np.ndarray) -> np.ndarray:
        """New DOF numbers of old DOF numbers ``3*node + component``."""
        return 3 * self.new_id[dofs // 3] + dofs % 3


def number_nodes(cells: np.ndarray, part: np.ndarray, nparts: int, nodes: int) -> Numbering:
    """Owner of each node (lowest part among its cells) and the contiguous renumbering.

    Nodes in no cell (none in a valid mesh) go to the last rank; their DOF stay unrestrained
    and the solve reports the singular system, as a single-process solve does.
    """
    owner = np.full(nodes, nparts - 1, dtype=np.int64)
    k = cells.shape[1]
    np.minimum.at(owner, cells.ravel(), np.repeat(part, k))
    order = np.argsort(owner, kind="stable")
    new_id = np.empty(nodes, dtype=np.int64)
    new_id[order] = np.arange(nodes)
    starts = np.concatenate([[0], np.cumsum(np.bincount(owner, minlength=nparts))])
    return Numbering(new_id, order, starts, part)


@dataclass
class Piece:
    """What one rank needs to assemble, solve and post-process its share.

    Node arrays use the rank's *local* numbering: ``nodes (l,)`` the sorted new numbers of the
    nodes its cells use (owned nodes first among equals: they are the run ``first ..
    first + stop - start`` of ``nodes``), ``old (l,)`` their numbers in the mesh, ``points (l, 3)``
    their coordinates; ``cells (c, k)`` its cells as indices into ``nodes``, ``cell_ids (c,)``
    their numbers in the mesh. ``start, stop`` its owned node range (new numbers), ``total``
    nodes in the mesh.

    Supports and loads on its owned nodes: ``F (3 (stop - start), k)`` [force] load of each load
    case (global components); ``held (h,)`` owned held DOF (new numbers, components in each
    node's frame) and ``held_values (h,)``; ``rotated (r,)`` local indices of the nodes with a
    rotated frame (ghost nodes too: the rotation is applied to the rank's element sums) and
    ``rotation (r, 3, 3)`` their bases (rows); ``con_nodes (N,)`` local indices of the owned
    nodes with held directions, ``con_dirs (N, 3, 3)`` and ``con_owner (N, 3)`` those directions
    and their supports (for splitting reactions); ``foundations``: per elastic support
    ``(support index, global, local)`` its stiffness on
    the owned rows, as ``(rows, cols, values)`` in global components and again in the nodes'
    frames (row: owned DOF index from 0, col: new DOF number); ``temperatures``: per load
    case the temperature change (l,) [K] at the local nodes, or None.
    """

    nodes: np.ndarray
    old: np.ndarray
    points: np.ndarray
    cells: np.ndarray
    cell_ids: np.ndarray
    start: int
    stop: int
    total: int
    F: np.ndarray
    held: np.ndarray
    held_values: np.ndarray
    rotated: np.ndarray
    rotation: np.ndarray
    con_nodes: np.ndarray
    con_dirs: np.ndarray
    con_owner: np.ndarray
    foundations: list
    temperatures: list

    @property
    def first(self) -> int:
        """Local index of the first owned node."""
        return int(np.searchsorted(self.nodes, self.start))

    @property
    def owned(self) -> slice:
        """The owned nodes in the local numbering."""
        f = self.first
        return slice(f, f + self.stop - self.start)

    @property
    def nown(self) -> int:
        return self.stop - self.start


def make_piece(rank: int, points: np.ndarray, cells: np.ndarray, num: Numbering, F: np.ndarray, held,
               foundations: tuple = (), temperatures: tuple = (), transform=None) -> Piece:
    """The :class:`Piece` of ``rank`` from the whole model on rank 0.

    Parameters
    ----------
    points, cells : the mesh (old numbering).
    F : (3n,) or (3n, k) load vectors.
    held : :class:`elastofe.bc.Held` (old numbering).
    foundations : :class:`elastofe.bc.Foundation` records.
    temperatures : per load case (n,) or None.
    transform : ``held.transform(3n)`` (None when no node is rotated), passed in so that it is
        built once for all ranks.
    """
    cid = np.flatnonzero(num.part == rank)
    g = num.new_id[cells[cid]]
    nodes, inv = np.unique(g, return_inverse=True)
    s, e = int(num.starts[rank]), int(num.starts[rank + 1])
    old = num.order[nodes]
    F2 = np.asarray(F, dtype=float).reshape(points.shape[0] * 3, -1)
    Fo = F2.reshape(-1, 3, F2.shape[1])[num.order[s:e]].reshape(-1, F2.shape[1])
    hd = num.dof_new(held.dofs)
    keep = (hd >= 3 * s) & (hd < 3 * e)
    o = np.argsort(hd[keep])
    itype = np.int32 if nodes.size < 2**31 - 1 else np.int64
    first = int(np.searchsorted(nodes, s))
    rot_idx, rot = np.zeros(0, dtype=np.int64), np.zeros((0, 3, 3))
    if held.rotated is not None and held.rotated.size:
        rn = num.new_id[held.rotated]
        pos = np.searchsorted(nodes, rn)
        hit = (pos < nodes.size) & (nodes[np.minimum(pos, nodes.size - 1)] == rn)
        rot_idx, rot = pos[hit], held.rotation[hit]
    cn, cdirs, cown = held.constraints()
    cnn = num.new_id[cn]
    mine = (cnn >= s) & (cnn < e)
    o2 = np.argsort(cnn[mine])
    con_nodes = first + (cnn[mine][o2] - s)
    found = []
    rows_old = (3 * num.order[s:e][:, None] + np.arange(3)).ravel()
    for fd in foundations:
        Kr = fd.K[rows_old].tocoo()
        Kt = (transform @ fd.K @ transform.T).tocsr()[rows_old].tocoo() if transform is not None else Kr
        found.append((fd.index, (Kr.row.astype(np.int64), num.dof_new(Kr.col.astype(np.int64)), Kr.data.copy()),
                      (Kt.row.astype(np.int64), num.dof_new(Kt.col.astype(np.int64)), Kt.data.copy())))
    temps = [None if T is None else np.asarray(T)[old] for T in temperatures]
    return Piece(nodes=nodes, old=old, points=points[old], cells=inv.reshape(g.shape).astype(itype), cell_ids=cid,
                 start=s, stop=e, total=int(points.shape[0]), F=Fo, held=hd[keep][o], held_values=held.values[keep][o],
                 rotated=rot_idx, rotation=rot, con_nodes=con_nodes, con_dirs=cdirs[mine][o2], con_owner=cown[mine][o2],
                 foundations=found, temperatures=temps)
