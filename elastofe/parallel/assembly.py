"""The distributed stiffness matrix: each rank's cells, rotated nodal frames, owned rows in PETSc.

Every rank assembles its own cells with the project's element kernels (one call,
:func:`piece_stiffness`, the place to pass per-cell materials), rotates the nodes with a
rotated support frame (``T K Tᵀ`` is a sum over elements of ``T K_e Tᵀ`` because ``T`` is
block-diagonal by node, so each rank rotates its own sums, ghost nodes included), then sends the
rows of its ghost nodes to their owners. The owned rows go straight into a preallocated
``MPIAIJ`` matrix (block size 3): the local matrix, its owned rows' global column numbers and the
PETSc matrix are all that live at once, about twice the rank's share of the matrix.

Arrays follow :class:`elastofe.parallel.partition.Piece`: local DOF ``3 a + c`` of local node
``a``; global DOF ``3 g + c`` of new node number ``g``.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..case.schema import Case
from ..errors import ModelError
from ..fem.mixed import assemble_stiffness_for, choose_formulation
from .partition import Piece

#: Entries handled per chunk when rotating columns (bounds the temporaries).
CHUNK = 1 << 22


def piece_stiffness(case: Case, piece: Piece) -> sp.csr_matrix:
    """The rank's element sums ``(3l, 3l)`` in its local numbering (sorted indices, 3 x 3 blocks).

    The one place the distributed run assembles elements, so that material per cell goes here.

    Raises
    ------
    ModelError
        On an inverted or degenerate cell.
    """
    lam, mu = case.material.lame
    try:
        return assemble_stiffness_for(piece.points, piece.cells, lam, mu,
                                      choose_formulation(case.material.nu, piece.cells.shape[1]))
    except ValueError as err:
        raise ModelError(f"assembly failed: {err}") from None


def _segments(starts: np.ndarray, lengths: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(segment of each position, position) of the concatenated ranges ``starts[i] + arange(lengths[i])``."""
    seg = np.repeat(np.arange(lengths.size), lengths)
    first = np.concatenate([[0], np.cumsum(lengths)[:-1]])
    return seg, starts[seg] + (np.arange(seg.size) - first[seg])


def rotate_in_place(K: sp.csr_matrix, nodes: np.ndarray, rotation: np.ndarray) -> None:
    """``K <- T K Tᵀ`` in place, ``T`` block-diagonal with ``rotation (r, 3, 3)`` at ``nodes (r,)``
    and the identity elsewhere.

    ``K`` must have the assembly's layout: the three rows of a node share one sorted column set,
    in which the three columns of a node are adjacent. Rows: the three rows of each rotated
    node are mixed by its rotation; columns: every triple of columns of a rotated node is.
    """
    if nodes.size == 0:
        return
    ip, data = K.indptr, K.data
    lens = (ip[3 * nodes + 1] - ip[3 * nodes]).astype(np.int64)
    seg, pos0 = _segments(ip[3 * nodes].astype(np.int64), lens)
    pos = [pos0, pos0 + lens[seg], pos0 + 2 * lens[seg]]  # rows 3a + 1 and 3a + 2 follow row 3a
    d = np.stack([data[p] for p in pos])  # (3, E)
    R = rotation[seg]  # (E, 3, 3)
    for c in range(3):
        data[pos[c]] = np.einsum("ed,de->e", R[:, c, :], d)
    which = np.full(K.shape[0] // 3, -1, dtype=np.int64)
    which[nodes] = np.arange(nodes.size)
    col = K.indices
    for s in range(0, col.size, CHUNK):
        c = col[s:s + CHUNK]
        p = s + np.flatnonzero((c % 3 == 0) & (which[c // 3] >= 0))
        if not p.size:
            continue
        Rj = rotation[which[col[p] // 3]]  # (E, 3, 3)
        d = np.stack([data[p], data[p + 1], data[p + 2]])
        for cc in range(3):
            data[p + cc] = np.einsum("ed,de->e", Rj[:, cc, :], d)


def owned_matrix(comm, PETSc, piece: Piece, K: sp.csr_matrix, extra: tuple = ()):
    """The distributed matrix ``(3N, 3N)`` (block size 3) from every rank's element sums.

    Parameters
    ----------
    comm : mpi4py communicator; PETSc : the petsc4py.PETSc module.
    piece : this rank's :class:`Piece`.
    K : (3l, 3l) this rank's sums in its local numbering (rotated already); its column indices
        are overwritten (the caller drops it).
    extra : ``(rows, cols, values)`` more entries of owned rows (row: owned DOF from 0, col: global
        DOF), e.g. elastic supports; their pattern must lie within the elements' pattern.

    Returns
    -------
    PETSc Mat (MPIAIJ), assembled.
    """
    it = PETSc.IntType
    nodes, first, nown = piece.nodes, piece.first, piece.nown
    gdof = (3 * nodes[:, None] + np.arange(3)).ravel().astype(it)
    f0, f1 = 3 * first, 3 * (first + nown)
    s3, e3, N3 = 3 * piece.start, 3 * piece.stop, 3 * piece.total
    ip = K.indptr

    # Ghost rows to their owners (one exchange).
    ghost = np.concatenate([np.arange(0, f0), np.arange(f1, K.shape[0])])
    starts3 = 3 * np.asarray(comm.allgather(piece.start) + [piece.total])
    xr = [np.zeros(0, np.int64)]
    xc = [np.zeros(0, it)]
    xv = [np.zeros(0)]
    if comm.size > 1:
        G = K[ghost].tocoo()
        grow = gdof[ghost][G.row].astype(np.int64)
        gcol = gdof[G.col]
        dest = np.searchsorted(starts3, grow, side="right") - 1
        o = np.argsort(dest, kind="stable")
        grow, gcol, gval, dest = grow[o], gcol[o], G.data[o], dest[o]
        cuts = np.searchsorted(dest, np.arange(comm.size + 1))
        got = comm.alltoall([(grow[cuts[p]:cuts[p + 1]], gcol[cuts[p]:cuts[p + 1]], gval[cuts[p]:cuts[p + 1]])
                             for p in range(comm.size)])
        del G, grow, gcol, gval, dest
        for r, c, v in got:
            xr.append(r - s3)
            xc.append(c.astype(it))
            xv.append(v)
    for r, c, v in extra:
        xr.append(np.asarray(r, dtype=np.int64))
        xc.append(np.asarray(c).astype(it))
        xv.append(np.asarray(v, dtype=float))
    X = sp.csr_matrix((np.concatenate(xv), (np.concatenate(xr), np.concatenate(xc))), shape=(f1 - f0, N3))
    X.sum_duplicates()

    # Exact preallocation: the owned rows' own pattern, plus what the others add outside it.
    p0, p1 = int(ip[f0]), int(ip[f1])
    own_ip = (ip[f0:f1 + 1] - p0).astype(it)
    # The owned rows' columns to global numbers in place (chunk by chunk: no second copy of them);
    # K is the caller's to drop after this call.
    cols = K.indices[p0:p1]
    if cols.dtype != gdof.dtype:
        cols = cols.astype(gdof.dtype)
    for s in range(0, cols.size, CHUNK):
        cols[s:s + CHUNK] = gdof[cols[s:s + CHUNK]]
    inside = (cols >= s3) & (cols < e3)
    row_len = np.diff(own_ip)
    d_nnz = np.add.reduceat(inside, own_ip[:-1], dtype=np.int64) if row_len.size else np.zeros(0, np.int64)
    o_nnz = row_len - d_nnz
    del inside
    xrows = np.flatnonzero(np.diff(X.indptr))
    if xrows.size:
        xseg, xpos = _segments(X.indptr[xrows].astype(np.int64), np.diff(X.indptr)[xrows].astype(np.int64))
        xkey = xrows[xseg].astype(np.int64) * N3 + X.indices[xpos]
        lseg, lpos = _segments(own_ip[xrows].astype(np.int64), row_len[xrows].astype(np.int64))
        lkey = xrows[lseg].astype(np.int64) * N3 + cols[lpos]
        new = np.setdiff1d(xkey, lkey, assume_unique=True)
        nrow, ncol = new // N3, new % N3
        nin = (ncol >= s3) & (ncol < e3)
        d_nnz += np.bincount(nrow[nin], minlength=d_nnz.size)
        o_nnz += np.bincount(nrow[~nin], minlength=o_nnz.size)
    A = PETSc.Mat().createAIJ(size=((f1 - f0, N3), (f1 - f0, N3)), bsize=3, comm=comm,
                              nnz=(d_nnz.astype(it), o_nnz.astype(it)))
    A.setValuesCSR(own_ip, cols, K.data[p0:p1], addv=PETSc.InsertMode.ADD)
    del cols
    A.setValuesCSR(X.indptr.astype(it), X.indices.astype(it), X.data, addv=PETSc.InsertMode.ADD)
    A.assemble()
    return A


def corner_interpolation(comm, PETSc, piece: Piece, halo):
    """The interpolation from the corner-node (4-node) system to the 10-node one, distributed.

    Corner nodes keep their value; an edge node takes the mean of its edge's two corners (the
    4-node element's field); in rotated nodal frames each 3 x 3 block is ``w R_i R_aᵀ``. Rows:
    owned DOF (the matrix's row layout); columns: the corner nodes' DOF, numbered rank by rank
    over their owners. Used as the coarse level of the two-level multigrid
    (:func:`elastofe.solve.petsc.configure_ksp`), as the single-process ``amg`` backend does.

    Returns
    -------
    (P, coarse points (c, 3) of the owned corner nodes, local indices (c,) of those nodes), or
    None for a 4-node mesh.
    """
    from ..fem.elements import element_for

    cells = piece.cells
    if cells.shape[1] != 10:
        return None
    it = PETSc.IntType
    nloc, first, nown = piece.nodes.size, piece.first, piece.nown
    corner = np.zeros(nloc, dtype=bool)
    corner[cells[:, :4].ravel()] = True
    oc = np.flatnonzero(corner[first:first + nown])  # owned corners, from 0
    nco = oc.size
    cstart = comm.scan(nco) - nco
    NC = comm.allreduce(nco)
    cid_own = np.full(nown, -1, dtype=np.int64)
    cid_own[oc] = cstart + np.arange(nco)
    cid = halo.spread(cid_own)
    R = np.broadcast_to(np.eye(3), (nloc, 3, 3)).copy()
    R[piece.rotated] = piece.rotation
    e = element_for(10).edges
    mids = cells[:, 4:].ravel()
    ends = np.stack([cells[:, e[:, 0]].ravel(), cells[:, e[:, 1]].ravel()], axis=1)
    mine = (mids >= first) & (mids < first + nown)
    mids, idx = np.unique(mids[mine], return_index=True)
    ends = ends[mine][idx]
    # Blocks (fine node, corner, weight): corners to themselves, edge nodes to both ends.
    fi = np.concatenate([first + oc, mids, mids])
    ci = np.concatenate([first + oc, ends[:, 0], ends[:, 1]])
    w = np.concatenate([np.ones(nco), np.full(2 * mids.size, 0.5)])
    if (cid[ci] < 0).any():  # pragma: no cover - a conforming 10-node mesh has none
        raise ValueError("an edge node's end is not a corner node")
    B = w[:, None, None] * np.einsum("nij,nkj->nik", R[fi], R[ci])  # w R_i R_aᵀ
    rows = (3 * (fi - first))[:, None, None] + np.arange(3)[None, :, None] + np.zeros((1, 1, 3), dtype=np.int64)
    cols = (3 * cid[ci])[:, None, None] + np.arange(3)[None, None, :] + np.zeros((1, 3, 1), dtype=np.int64)
    Pl = sp.csr_matrix((B.ravel(), (rows.ravel(), cols.ravel())), shape=(3 * nown, 3 * NC))
    Pl.sum_duplicates()
    Pl.sort_indices()
    P = PETSc.Mat().createAIJ(size=((3 * nown, 3 * piece.total), (3 * nco, 3 * NC)), bsize=3, comm=comm,
                              csr=(Pl.indptr.astype(it), Pl.indices.astype(it), Pl.data))
    P.assemble()
    return P, piece.points[first + oc], first + oc
