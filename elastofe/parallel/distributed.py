"""The case solved on many ranks: distributed assembly, supports, CG + GAMG, distributed post.

Stages (the data flow of :func:`elastofe.pipeline.solve_case`, split by where each runs):

1. rank 0: mesh (or the ranks' mesh files gathered, :mod:`.meshfiles`), surface catalogue,
   regions, supports, loads and their checks, as a single-process run does (the same stage
   functions). The load vectors are integrated here: they are surface and body integrals
   costing O(n), and the resultants and summary need them anyway;
2. all ranks: cells partitioned (:mod:`.partition`); each rank receives its cells, its nodes'
   coordinates, the loads of every load case and the held DOF, nodal frames and elastic-support
   rows of the nodes it owns, and its nodes' temperatures. Rank 0 then drops the volume mesh,
   the load vectors and the temperatures and keeps the boundary (:class:`.post.Kept`);
3. all ranks: each assembles its own cells (:mod:`.assembly`), rotates its rotated nodes, and
   sends the rows it does not own to their owners; the owned rows fill a preallocated PETSc
   matrix, elastic supports added;
4. all ranks: held rows and columns eliminated symmetrically after moving the prescribed values
   to the right-hand sides; one CG + GAMG set-up (rigid-body near-nullspace, rotated with the
   frames) and one solve per load case; the unmodified rows of the held nodes kept for the
   reactions;
5. all ranks: :func:`.post.distributed_post`, each rank on its own cells; rank 0 builds the
   :class:`Result` from reduced results with :func:`elastofe.post.run.build_result`.

``tests/test_mpi.py`` compares every section of the summary, the lines and the fields with a
single-process direct solve on 1, 2 and 3 ranks.
"""
from __future__ import annotations

import logging
import time
import uuid
from dataclasses import replace
from pathlib import Path
from typing import Optional

import numpy as np
import scipy.sparse as sp

from ..case.schema import Case
from ..errors import CaseError, ModelError, SolverError
from ..mesh import Mesh
from ..progress import Progress, quiet
from ..resources import peak_memory_mb
from ..result import Model, Result
from ..solve.petsc import RTOL, STOPPING_RULE, configure_ksp, import_petsc, rigid_body_near_nullspace, stopping_rule
from ..stages import mesh_stage, prepare_model, report_model
from .assembly import corner_interpolation, owned_matrix, piece_stiffness, rotate_in_place
from .halo import Halo
from .meshfiles import check_per_rank, is_per_rank, merge_rank_meshes, read_rank_meshes
from .mpi import abort_on_error, install_abort_hook, on_root, raise_collectively
from .partition import Piece, make_piece, number_nodes, partition_cells
from .post import Kept, Solved, distributed_post, keep_for_post

log = logging.getLogger(__name__)


def prepare(case: Case, progress: Progress = quiet, mesh: Optional[Mesh] = None,
            timings: Optional[dict] = None, *, allow_locking: bool = False) -> Model:
    """Stage 1 on rank 0: mesh, input checks, regions, held DOF and load vectors, as
    :func:`elastofe.pipeline.solve_case` does (the same stage functions)."""
    timings = {} if timings is None else timings
    mesh = mesh_stage(case, mesh, progress, timings, allow_locking=allow_locking)
    model = prepare_model(case, mesh, timings)
    report_model(case, model, progress)
    return model


def unsupported(case: Case) -> None:
    """Raise :class:`CaseError` (on every rank alike, before any work) for what the distributed
    run does not do.

    The ``[reference]`` comparison evaluates our fields at another solver's points across the
    whole mesh in one process; the distributed run keeps no process with every node's fields. A part
    of several materials needs per-cell Lamé parameters on each rank's cells (not yet).
    """
    why = "is not supported by the petsc backend yet; solve this case with --solver auto (one process)"
    for section in ("modes", "buckling"):
        if getattr(case, section, None) is not None:
            raise CaseError(section, f"[{section}]", f"natural frequencies and buckling factors: {why}")
    if case.reference is not None:
        raise CaseError("reference", "[reference]",
                        "the comparison with another solver's results needs every node's field in one process, "
                        "which the petsc backend does not keep; compare with a single-process run (--solver auto), "
                        "or remove [reference] from the case")
    if len(getattr(case, "materials", ())) > 1:
        raise CaseError("material", [m.name for m in case.materials], f"a part of several materials {why}")


def _deal_pieces(comm, prep: Optional[Model], given: bool, part_given, progress: Progress,
                 timings: dict) -> tuple[Piece, object]:
    """Stage 2: partition (unless the mesh files gave the parts: ``given`` on every rank,
    ``part_given`` the part of each cell on rank 0) and send each rank its :class:`Piece`;
    returns (this rank's piece, numbering on rank 0)."""
    PETSc, _ = import_petsc()
    t = time.perf_counter()
    mesh = prep.mesh if comm.rank == 0 else None
    if given or comm.size == 1:  # the mesh files' parts, the same on every rank
        part = None
        if comm.rank == 0:
            part = part_given if part_given is not None else np.zeros(mesh.cells.shape[0], dtype=np.int64)
    else:
        part = partition_cells(comm, PETSc, None if mesh is None else mesh.points,
                               None if mesh is None else mesh.cells)
    num = None
    if comm.rank == 0:
        num = number_nodes(mesh.cells, part, comm.size, mesh.nodes)
        T = prep.held.transform(3 * mesh.nodes)
        args = (mesh.points, mesh.cells, num, prep.F, prep.held, prep.foundations, prep.temperatures, T)
        for r in range(1, comm.size):
            comm.send(make_piece(r, *args), dest=r, tag=21)
        mine = make_piece(0, *args)
    else:
        mine = comm.recv(source=0, tag=21)
    timings["partition"] = time.perf_counter() - t
    if comm.size > 1 and comm.rank == 0:
        counts = np.diff(num.starts)
        progress("partition", f"{comm.size} parts: {int(counts.min()):,} to {int(counts.max()):,} owned nodes "
                 f"per rank ({timings['partition']:.2f} s)")
    return mine, num


def _rotate_vectors(piece: Piece, v: np.ndarray, back: bool = False) -> np.ndarray:
    """``T v`` (or ``Tᵀ v``) of owned node vectors ``v (nown, ..., 3)`` (a copy)."""
    out = np.array(v, copy=True)
    sel = (piece.rotated >= piece.first) & (piece.rotated < piece.first + piece.nown)
    if sel.any():
        i = piece.rotated[sel] - piece.first
        R = piece.rotation[sel]
        out[i] = np.einsum("nji,n...j->n...i", R, v[i]) if back else np.einsum("nij,n...j->n...i", R, v[i])
    return out


def _modes_in_frames(PETSc, comm, piece: Piece, xyz: np.ndarray, nodes: np.ndarray):
    """The six rigid-body modes of owned nodes ``nodes (c,)`` (local indices) at ``xyz (c, 3)``,
    in the nodes' frames: ``T R`` (``T`` orthogonal, so PETSc's orthonormal modes stay so)."""
    v = PETSc.Vec().createWithArray(np.ascontiguousarray(xyz, dtype=float).ravel(), size=(3 * xyz.shape[0], None),
                                    bsize=3, comm=comm)
    nsp = rigid_body_near_nullspace(PETSc, v)
    if not comm.allreduce(int(piece.rotated.size)):
        return nsp
    pos = np.searchsorted(nodes, piece.rotated)
    hit = (pos < nodes.size) & (nodes[np.minimum(pos, max(nodes.size - 1, 0))] == piece.rotated)
    vecs = []
    for m in nsp.getVecs():
        a = m.getArray().reshape(-1, 3).copy()
        a[pos[hit]] = np.einsum("nij,nj->ni", piece.rotation[hit], a[pos[hit]])
        w = m.duplicate()
        w.setArray(a.ravel())
        vecs.append(w)
    return PETSc.NullSpace().create(vectors=vecs, comm=comm)


def solve_case_distributed(case: Case, progress: Progress = quiet, mesh: Optional[Mesh] = None, *,
                           allow_locking: bool = False, fields_dir: Optional[Path] = None) -> Optional[Result]:
    """Solve the case on every rank of ``MPI.COMM_WORLD``; the :class:`Result` on rank 0, None elsewhere.

    In one process (no ``mpiexec``) this is a complete run with PETSc's CG + GAMG. ``mesh``, when
    given, is used on rank 0 instead of meshing the geometry. ``fields_dir``: the results folder,
    where each rank writes its piece of the fields when the mesh is too large to gather them on
    rank 0 (see :mod:`.post`); :func:`elastofe.output.write_results` commits them.

    The Result on rank 0 keeps the boundary and the cells around the peaks, not the whole mesh
    (:class:`elastofe.result.WholeModel`).

    Raises
    ------
    CaseError, ModelError
        On every rank alike (the model is checked on rank 0 and the verdict broadcast).
    SolverError
        When PETSc is not installed (with how to install it) or CG does not converge.
    """
    unsupported(case)
    check_per_rank(case)
    PETSc, MPI = import_petsc()
    comm = MPI.COMM_WORLD
    rank, size = comm.rank, comm.size
    install_abort_hook(comm)
    if rank != 0:
        progress = quiet
    timings: dict[str, float] = {}

    # Stage 1: the model on rank 0 (from the mesh files of every rank when the case names one per rank).
    parts = None
    if is_per_rank(case):
        t = time.perf_counter()
        parts = read_rank_meshes(comm, case)
        timings["read"] = comm.allreduce(time.perf_counter() - t, op=MPI.MAX)

    def stage1(m: Optional[Mesh], merged: Optional[list]):
        part = None
        if merged is not None:
            m, part = merge_rank_meshes(case, merged, progress)
        return prepare(case, progress, m, timings, allow_locking=allow_locking), part

    prep, part_given = on_root(comm, lambda: stage1(mesh, parts)) or (None, None)
    with abort_on_error(comm):
        piece, _ = _deal_pieces(comm, prep, is_per_rank(case), part_given, progress, timings)
        parts = None  # the files' arrays: merged on rank 0, no longer needed
        kept: Optional[Kept] = keep_for_post(case, prep) if rank == 0 else None
        halo = Halo(comm, piece.nodes, piece.first, piece.nown,
                    np.asarray(comm.allgather(piece.start) + [piece.total]))
        prep = mesh = part_given = None  # rank 0 keeps only the boundary from here on

    # Stage 3: each rank's own cells, rotated frames, the owned rows completed across ranks.
    t = time.perf_counter()
    failure, K = None, None
    with abort_on_error(comm):
        try:
            K = piece_stiffness(case, piece)
        except ModelError as err:  # inverted cells: every rank must learn of it
            failure = err
    raise_collectively(comm, failure)
    with abort_on_error(comm):
        rotate_in_place(K, piece.rotated, piece.rotation)
        extra = [fd[2] for fd in piece.foundations]
        A = owned_matrix(comm, PETSc, piece, K, extra)
        del K
        nnz = int(A.getInfo(PETSc.Mat.InfoType.GLOBAL_SUM)["nz_used"])
        ntot = 3 * piece.total
    timings["assembly"] = comm.allreduce(time.perf_counter() - t, op=MPI.MAX)
    progress("assembly", f"stiffness {ntot:,} x {ntot:,}, {nnz:,} non-zeros on {size} rank(s) "
             f"({timings['assembly']:.2f} s)")

    # Stage 4: supports, near-nullspace, one set-up and one solve per load case.
    t = time.perf_counter()
    k = piece.F.shape[1]
    with abort_on_error(comm):
        it = PETSc.IntType
        nown = 3 * piece.nown
        s3 = 3 * piece.start
        held = piece.held.astype(it)
        g = A.createVecRight()
        g.set(0.0)
        g.getArray()[held - s3] = piece.held_values
        lift = A.createVecLeft()
        A.mult(g, lift)  # K g: what the prescribed values put on the right-hand sides
        lift_arr = lift.getArray().copy()
        # Rows of the unmodified matrix at every DOF of the held nodes, for K u at those nodes.
        con_rows = (3 * (piece.nodes[piece.con_nodes][:, None]) + np.arange(3)).ravel().astype(it)
        is_rows = PETSc.IS().createGeneral(con_rows, comm=comm)
        is_cols = PETSc.IS().createStride(nown, first=s3, step=1, comm=comm)
        K_held = A.createSubMatrix(is_rows, is_cols)
        # A held row/column keeps a diagonal of the matrix's mean size, so that elimination does
        # not widen the spectrum that GAMG's smoothers see.
        d = A.getDiagonal()
        diag = d.sum() / ntot
        is_held = PETSc.IS().createGeneral(held, comm=comm)
        A.zeroRowsColumns(is_held, diag=diag)
        A.setOption(PETSc.Mat.Option.SPD, True)
        coarse = corner_interpolation(comm, PETSc, piece, halo)
        if coarse is None:
            nsp = _modes_in_frames(PETSc, comm, piece, piece.points[piece.owned], np.arange(piece.first, piece.first
                                                                                            + piece.nown))
            ksp = configure_ksp(PETSc, A, tol=case.solver.tol, maxiter=case.solver.maxiter, near_nullspace=nsp)
        else:
            P, c_xyz, c_nodes = coarse
            Ac = A.PtAP(P)
            Ac.setBlockSize(3)
            Ac.setNearNullSpace(_modes_in_frames(PETSc, comm, piece, c_xyz, c_nodes))
            Ac.setOption(PETSc.Mat.Option.SPD, True)
            ksp = configure_ksp(PETSc, A, tol=case.solver.tol, maxiter=case.solver.maxiter, coarse=(P, Ac))
        nheld = comm.allreduce(int(held.size))
        progress("solve", f"CG + {'GAMG' if coarse is None else 'two-level multigrid (GAMG on the corner nodes)'} on "
                 f"{size} rank(s): {ntot - nheld:,} free and {nheld:,} held DOF"
                 f"{f', {k} load cases' if k > 1 else ''} ...")
        ts = time.perf_counter()
        ksp.setUp()
        t_setup = time.perf_counter() - ts
    U_l = np.zeros((nown, k))
    stops: list[dict] = []
    err = None
    u, b, r = A.createVecRight(), A.createVecLeft(), A.createVecLeft()
    ts = time.perf_counter()
    rtol = min(case.solver.tol, RTOL)
    a_norm = A.norm(PETSc.NormType.INFINITY)
    for j in range(k):
        with abort_on_error(comm):
            b.setArray(_rotate_vectors(piece, piece.F[:, j].reshape(-1, 3)).ravel() - lift_arr)
            b.getArray()[held - s3] = diag * piece.held_values
            u.set(0.0)
        try:
            stops.append(stopping_rule(ksp, A, b, u, r, rtol, a_norm))
        except SolverError as e:
            err = e
            break
        U_l[:, j] = u.getArray()
    raise_collectively(comm, err)
    t_iter = time.perf_counter() - ts
    with abort_on_error(comm):
        # K u at the held nodes (unmodified rows), back in global components.
        KU_con = np.zeros((con_rows.size, k))
        y = K_held.createVecLeft()
        for j in range(k):
            u.setArray(U_l[:, j])
            K_held.mult(u, y)
            KU_con[:, j] = y.getArray()
        U = _rotate_vectors(piece, U_l.reshape(-1, 3, k).transpose(0, 2, 1), back=True)  # (nown, k, 3)
        KU = piece.F.reshape(-1, 3, k).transpose(0, 2, 1).copy()
        con = piece.con_nodes - piece.first
        kc = KU_con.reshape(-1, 3, k).transpose(0, 2, 1)
        sel = np.isin(piece.rotated, piece.con_nodes)
        if sel.any():
            pos = np.searchsorted(piece.con_nodes, piece.rotated[sel])
            kc[pos] = np.einsum("nji,nkj->nki", piece.rotation[sel], kc[pos])
        KU[con] = kc
        # Elastic supports push back with -K_s u (global components).
        found = []
        for index, (rows, cols, vals), _ in piece.foundations:
            C = sp.csr_matrix((vals, (rows, cols)), shape=(nown, ntot))
            C.sum_duplicates()
            Kf = PETSc.Mat().createAIJ(size=((nown, ntot), (nown, ntot)), comm=comm,
                                       csr=(C.indptr.astype(it), C.indices.astype(it), C.data))
            Kf.assemble()
            reac = np.zeros((piece.nown, k, 3))
            x, yf = Kf.createVecRight(), Kf.createVecLeft()
            for j in range(k):
                x.setArray(U[:, j].ravel())
                Kf.mult(x, yf)
                reac[:, j] = -yf.getArray().reshape(-1, 3)
            found.append((index, reac))
            for o in (Kf, x, yf):
                o.destroy()
        ksp_type = f"{ksp.getType()}+{ksp.getPC().getType()}"
        levels = ksp.getPC().getMGLevels() if hasattr(ksp.getPC(), "getMGLevels") else None
        for obj in (ksp, A, K_held, u, b, r, y, g, lift, d, is_held, is_rows, is_cols) + \
                (() if coarse is None else (coarse[0], Ac)):
            obj.destroy()
    timings["solve"] = comm.allreduce(time.perf_counter() - t, op=MPI.MAX)
    residual = max(st["relative_residual"] for st in stops)
    its = [st["iterations"] for st in stops]
    progress("solve", f"{sum(its)} iterations{f' for {k} load cases' if k > 1 else ''}, relative residual "
             f"{residual:.2e} ({timings['solve']:.2f} s: setup {t_setup:.2f} s, iterations {t_iter:.2f} s)")

    # Stage 5: every rank post-processes its own cells; rank 0 builds the Result.
    t = time.perf_counter()
    info = {"ranks": size, "iterations": int(sum(its)), "iterations_per_case": its, "method": ksp_type,
            "multigrid_levels": levels, "stopping_rule": STOPPING_RULE, "rtol": rtol,
            "relative_residual_per_case": [st["relative_residual"] for st in stops],
            "round_off_floor_per_case": [st["floor"] for st in stops],
            "bound_met_per_case": [st["met"] for st in stops], "restarts": sum(st["restarts"] for st in stops),
            "setup_seconds": round(t_setup, 4), "iteration_seconds": round(t_iter, 4)}
    token = comm.bcast(uuid.uuid4().hex[:12] if rank == 0 else None, root=0)
    with abort_on_error(comm):
        res = distributed_post(comm, case, piece, halo, Solved(U=U, KU=KU, found=found), kept, residual=float(residual),
                               backend="petsc", solver_info=info, fields_dir=fields_dir, token=token)
    dt = comm.allreduce(time.perf_counter() - t, op=MPI.MAX)
    mem = comm.gather(peak_memory_mb(), root=0)  # the whole run's peak of every rank
    if rank != 0:
        return None
    timings["post"] = dt
    res = replace(res, solver_info={**res.solver_info, "peak_memory_mb_per_rank": [round(m, 1) for m in mem]})
    progress("post", f"stresses, reactions, points, lines and checks on {size} rank(s) ({dt:.2f} s)")
    return replace(res, timings=timings, peak_memory_mb=peak_memory_mb())
