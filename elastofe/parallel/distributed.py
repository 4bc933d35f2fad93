"""The case solved on many ranks: distributed assembly, supports, CG + GAMG, results on rank 0.

Stages (the same data flow as :func:`elastofe.pipeline.solve_case`, split by where each runs):

1. rank 0: mesh, surface catalogue, regions, supports, loads (as a single-process run). The
   load vectors are integrated here, not per rank: they are surface and body integrals costing
   O(n), and rank 0 needs each load's full vector anyway for the resultants, the equilibrium
   check and summary.json; each rank then receives the sums on the DOF it owns;
2. all ranks: cells partitioned (:mod:`.partition`), each rank receives its cells, the
   coordinates of their nodes, the loads and held DOF of the nodes it owns;
3. all ranks: each assembles its own cells with the project's element kernels
   (:func:`elastofe.fem.assembly.assemble_stiffness` on its share) and sends the rows it does not
   own to their owners, so that every rank holds its owned rows complete and preallocates the
   distributed matrix exactly;
4. all ranks: held rows and columns eliminated symmetrically (``MatZeroRowsColumns`` moves the
   prescribed values to the right-hand side), CG + GAMG with the rigid-body near-nullspace;
   the held rows of the unmodified matrix are kept aside for the reactions ``r = K u − f``;
5. rank 0: displacements and reactions gathered, then :func:`elastofe.post.run.postprocess`, the
   post-processing every run shares.

Stages 1 and 5 are the very functions :func:`elastofe.pipeline.solve_case` calls
(:mod:`elastofe.stages`, :mod:`elastofe.post.run`); ``tests/test_mpi.py`` compares every
section of the two summaries.
"""
from __future__ import annotations

import logging
import time
from typing import Optional

import numpy as np
import scipy.sparse as sp

from ..case.schema import Case
from ..errors import CaseError, ModelError
from ..fem.assembly import assemble_stiffness
from ..mesh import Mesh
from ..post.run import postprocess
from ..progress import Progress, quiet
from ..resources import peak_memory_mb
from ..result import Model, Result
from ..stages import mesh_stage, prepare_model, report_model
from ..solve.petsc import RTOL, configure_ksp, converged_or_raise, import_petsc, rigid_body_near_nullspace
from .mpi import abort_on_error, install_abort_hook, on_root, raise_collectively
from .partition import Piece, make_piece, number_nodes, partition_cells

log = logging.getLogger(__name__)


def prepare(case: Case, progress: Progress = quiet, mesh: Optional[Mesh] = None,
            timings: Optional[dict] = None, *, allow_locking: bool = False) -> Model:
    """Stage 1 on rank 0: mesh, input checks, regions, held DOF and load vectors, as
    :func:`elastofe.pipeline.solve_case` does (the same stage functions)."""
    timings = {} if timings is None else timings
    mesh = mesh_stage(case, mesh, progress, timings, allow_locking=allow_locking)
    model = prepare_model(case, mesh, timings)
    report_model(case, model, progress)
    unsupported(case, model.held, model.foundations)
    return model


def unsupported(case: Case, held, found) -> None:
    """Raise :class:`CaseError` for what the distributed solve does not do (yet).

    Named load cases (several right-hand sides), elastic supports (a second stiffness) and
    supports in rotated nodal frames (a change of basis before elimination) run with the
    single-process backends only.
    """
    why = "is not supported by the petsc backend yet; solve this case with --solver auto (one process)"
    for section in ("modes", "buckling"):
        if getattr(case, section, None) is not None:
            raise CaseError(section, f"[{section}]", f"natural frequencies and buckling factors: {why}")
    if getattr(case, "load_cases", None):
        raise CaseError("load_case", [lc.name for lc in case.load_cases], f"named load cases: {why}")
    if found:
        raise CaseError(f"support[{found[0].index + 1}]", found[0].region, f"an elastic support {why}")
    if getattr(held, "rotated", None) is not None and held.rotated.size:
        raise CaseError("support", "rotated frame", f"a support in a rotated (normal/radial) frame {why}")


def _deal_pieces(comm, prep: Optional[Model], progress: Progress, timings: dict) -> tuple[Piece, object]:
    """Stage 2: partition and send each rank its :class:`Piece`; returns (mine, numbering on rank 0)."""
    PETSc, _ = import_petsc()
    t = time.perf_counter()
    mesh = prep.mesh if comm.rank == 0 else None
    part = partition_cells(comm, PETSc, None if mesh is None else mesh.points, None if mesh is None else mesh.cells)
    num = None
    if comm.rank == 0:
        num = number_nodes(mesh.cells, part, comm.size, mesh.nodes)
        for r in range(1, comm.size):
            comm.send(make_piece(r, mesh.points, mesh.cells, num, prep.F[:, 0], prep.held.dofs, prep.held.values),
                      dest=r, tag=21)
        mine = make_piece(0, mesh.points, mesh.cells, num, prep.F[:, 0], prep.held.dofs, prep.held.values)
    else:
        mine = comm.recv(source=0, tag=21)
    timings["partition"] = time.perf_counter() - t
    if comm.size > 1:
        counts = np.diff(num.starts) if num is not None else None
        if comm.rank == 0:
            progress("partition", f"{comm.size} parts: {int(counts.min()):,} to {int(counts.max()):,} owned nodes "
                     f"per rank ({timings['partition']:.2f} s)")
    return mine, num


def _owned_rows(comm, piece: Piece, K: sp.csr_matrix) -> sp.csr_matrix:
    """Stage 3: complete owned rows ``(3 owned, 3 total)`` from every rank's element sums.

    ``K`` is this rank's stiffness in its local numbering. Rows of nodes owned elsewhere go to
    their owners in one all-to-all exchange; duplicates are summed by the CSR conversion.
    """
    starts = np.asarray(comm.allgather(piece.start) + [piece.total]) * 3
    gdof = (3 * piece.nodes[:, None] + np.arange(3)).ravel()  # local DOF -> new global DOF
    coo = K.tocoo()
    rows = gdof[coo.row]
    cols = gdof[coo.col]
    vals = coo.data
    del coo
    dest = np.searchsorted(starts, rows, side="right") - 1
    mine = dest == comm.rank
    if comm.size > 1:
        o = np.argsort(dest[~mine], kind="stable")
        r_out, c_out, v_out, d_out = rows[~mine][o], cols[~mine][o], vals[~mine][o], dest[~mine][o]
        cuts = np.searchsorted(d_out, np.arange(comm.size + 1))
        send = [(r_out[cuts[p]:cuts[p + 1]], c_out[cuts[p]:cuts[p + 1]], v_out[cuts[p]:cuts[p + 1]])
                for p in range(comm.size)]
        got = comm.alltoall(send)
        rows = np.concatenate([rows[mine]] + [g[0] for g in got])
        cols = np.concatenate([cols[mine]] + [g[1] for g in got])
        vals = np.concatenate([vals[mine]] + [g[2] for g in got])
    nown = 3 * (piece.stop - piece.start)
    A = sp.csr_matrix((vals, (rows - 3 * piece.start, cols)), shape=(nown, 3 * piece.total))
    A.sum_duplicates()
    A.sort_indices()
    return A


class _Product:
    """Stands for the stiffness matrix in the single-process post-processing: ``K @ u`` of the
    solved ``u`` only, from the distributed solve (rank 0 holds no matrix)."""

    def __init__(self, u: np.ndarray, Ku: np.ndarray):
        self.u, self.Ku = u, Ku

    def __matmul__(self, v: np.ndarray) -> np.ndarray:
        if v is not self.u and not np.array_equal(v, self.u):  # pragma: no cover - a programming error
            raise ValueError("K @ v is known only for the solved displacement")
        return self.Ku


def _gather_on_root(comm, local: np.ndarray) -> Optional[np.ndarray]:
    parts = comm.gather(local, root=0)
    return np.concatenate(parts) if comm.rank == 0 else None


def solve_case_distributed(case: Case, progress: Progress = quiet, mesh: Optional[Mesh] = None, *,
                           allow_locking: bool = False) -> Optional[Result]:
    """Solve the case on every rank of ``MPI.COMM_WORLD``; the :class:`Result` on rank 0, None elsewhere.

    In one process (no ``mpiexec``) this is a complete run with PETSc's CG + GAMG. ``mesh``, when
    given, is used on rank 0 instead of meshing the geometry.

    Raises
    ------
    CaseError, ModelError
        On every rank alike (the model is checked on rank 0 and the verdict broadcast).
    SolverError
        When PETSc is not installed (with how to install it) or CG does not converge.
    """
    PETSc, MPI = import_petsc()
    comm = MPI.COMM_WORLD
    rank, size = comm.rank, comm.size
    install_abort_hook(comm)
    if rank != 0:
        progress = quiet
    timings: dict[str, float] = {}
    prep = on_root(comm, lambda: prepare(case, progress, mesh, timings, allow_locking=allow_locking))

    with abort_on_error(comm):
        piece, num = _deal_pieces(comm, prep, progress, timings)

    # Stage 3: each rank's own cells, then the owned rows completed across ranks.
    t = time.perf_counter()
    lam, mu = case.material.lame
    failure = None
    with abort_on_error(comm):
        try:
            K_loc = assemble_stiffness(piece.points, piece.cells, lam, mu)
        except ValueError as err:  # inverted cells: every rank must learn of it
            failure = ModelError(f"assembly failed: {err}")
            K_loc = sp.csr_matrix((3 * piece.nodes.size, 3 * piece.nodes.size))
    raise_collectively(comm, failure)
    with abort_on_error(comm):
        rows = _owned_rows(comm, piece, K_loc)
        del K_loc
        it = PETSc.IntType
        nown, ntot = rows.shape[0], 3 * piece.total
        A = PETSc.Mat().createAIJ(size=((nown, ntot), (nown, ntot)), bsize=3, comm=comm,
                                  csr=(rows.indptr.astype(it), rows.indices.astype(it), rows.data))
        A.assemble()
        nnz = comm.allreduce(rows.nnz)
        del rows
    timings["assembly"] = comm.allreduce(time.perf_counter() - t, op=MPI.MAX)
    progress("assembly", f"stiffness {ntot:,} x {ntot:,}, {nnz:,} non-zeros on {size} rank(s) "
             f"({timings['assembly']:.2f} s)")

    # Stage 4: supports, near-nullspace, solve.
    t = time.perf_counter()
    with abort_on_error(comm):
        s3 = 3 * piece.start
        held = piece.held.astype(it)
        u = A.createVecRight()
        b = A.createVecLeft()
        b.setArray(piece.f)
        u.set(0.0)
        u.getArray()[held - s3] = piece.held_values
        # Rows of the unmodified matrix at the held DOF, for the reactions r = K u - f.
        is_held = PETSc.IS().createGeneral(held, comm=comm)
        is_cols = PETSc.IS().createStride(nown, first=s3, step=1, comm=comm)
        K_held = A.createSubMatrix(is_held, is_cols)
        # A held row/column keeps a diagonal of the matrix's mean size, so that elimination does
        # not widen the spectrum that GAMG's smoothers see.
        d = A.getDiagonal()
        diag = d.sum() / ntot
        A.zeroRowsColumns(is_held, diag=diag, x=u, b=b)
        A.setOption(PETSc.Mat.Option.SPD, True)
        first = int(np.searchsorted(piece.nodes, piece.start))  # owned nodes: one run of `nodes`
        own_xyz = np.ascontiguousarray(piece.points[first:first + piece.stop - piece.start]).ravel()
        xyz = PETSc.Vec().createWithArray(own_xyz, size=(nown, ntot), bsize=3, comm=comm)
        ksp = configure_ksp(PETSc, A, tol=case.solver.tol, maxiter=case.solver.maxiter,
                            near_nullspace=rigid_body_near_nullspace(PETSc, xyz))
        nheld = comm.allreduce(int(held.size))
        progress("solve", f"CG + GAMG on {size} rank(s): {ntot - nheld:,} free and {nheld:,} held DOF ...")
        ts = time.perf_counter()
        ksp.setUp()
        t_setup = time.perf_counter() - ts
        ksp.solve(b, u)
        t_iter = time.perf_counter() - ts - t_setup
    err = None
    try:
        its = converged_or_raise(ksp)
    except ModelError as e:
        err = e
    raise_collectively(comm, err)
    with abort_on_error(comm):
        r = b.duplicate()
        A.mult(u, r)
        r.aypx(-1.0, b)
        residual = r.norm() / max(b.norm(), 1e-300)
        rh = K_held.createVecLeft()
        K_held.mult(u, rh)
        reac_local = rh.getArray() - piece.f[held - s3]
        U_new = _gather_on_root(comm, u.getArray().copy())
        H_new = _gather_on_root(comm, held.astype(np.int64))
        R_held = _gather_on_root(comm, reac_local)
        mem = comm.gather(peak_memory_mb(), root=0)
        ksp_type = f"{ksp.getType()}+{ksp.getPC().getType()}"
        levels = ksp.getPC().getMGLevels() if hasattr(ksp.getPC(), "getMGLevels") else None
        for obj in (ksp, A, K_held, u, b, r, rh, xyz, d, is_held, is_cols):
            obj.destroy()
    timings["solve"] = comm.allreduce(time.perf_counter() - t, op=MPI.MAX)
    if rank != 0:
        return None
    progress("solve", f"{its} iterations, relative residual {residual:.2e} ({timings['solve']:.2f} s: "
             f"setup {t_setup:.2f} s, iterations {t_iter:.2f} s)")

    # Stage 5 on rank 0: back to the mesh's numbering, then the post-processing every run shares.
    U = U_new.reshape(-1, 3)[num.new_id]
    u_flat = U.ravel()
    old_node = num.order[H_new // 3]
    held_old = 3 * old_node + H_new % 3
    # K u is f on the free DOF (to the solver's tolerance) and the unmodified held rows times u
    # on the held ones: all that the reactions, the equilibrium check and the strain energy need.
    f = prep.F[:, 0]
    Ku = f.copy()
    Ku[held_old] = R_held + f[held_old]
    info = {"ranks": size, "iterations": int(its), "method": ksp_type, "multigrid_levels": levels,
            "rtol": min(case.solver.tol, RTOL), "setup_seconds": round(t_setup, 4),
            "iteration_seconds": round(t_iter, 4), "peak_memory_mb_per_rank": [round(m, 1) for m in mem]}
    return postprocess(case, prep, u_flat[:, None], Ku[:, None], residual=float(residual), backend="petsc",
                       solver_info=info, timings=timings, progress=progress)
