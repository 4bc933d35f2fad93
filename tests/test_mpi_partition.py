"""Partitioning and distributed numbering (plain numpy: runs without MPI or PETSc)."""
import sys

import numpy as np
import pytest
from scipy.spatial import Delaunay

from elastofe.bc import Held
from elastofe.errors import SolverError
from elastofe.parallel import launched_ranks, limit_threads_under_mpi
from elastofe.parallel.partition import coordinate_bisection, dual_graph, make_piece, number_nodes


def block_mesh(n=6, seed=3):
    """A Delaunay tetrahedral mesh of a jittered n^3 grid of the unit cube, positively oriented."""
    g = np.linspace(0, 1, n)
    X = np.array(np.meshgrid(g, g, g, indexing="ij")).reshape(3, -1).T
    X += np.random.default_rng(seed).uniform(-0.02, 0.02, X.shape)
    T = Delaunay(X).simplices.astype(np.int64)
    e = X[T[:, 1:]] - X[T[:, :1]]
    T[np.linalg.det(e) < 0] = T[np.linalg.det(e) < 0][:, [1, 0, 2, 3]]
    return X, T


def test_dual_graph_counts_shared_faces():
    # Two tetrahedra sharing the face (1, 2, 3): one edge each way, no diagonal.
    cells = np.array([[0, 1, 2, 3], [4, 3, 2, 1]])
    g = dual_graph(cells)
    assert g.toarray().tolist() == [[0, 1], [1, 0]]
    # A closed triangulation: every cell has at most 4 neighbours, and the number of interior
    # faces is (4 m - boundary faces) / 2 (each interior face is shared by exactly two cells).
    X, T = block_mesh()
    g = dual_graph(T)
    assert (g != g.T).nnz == 0 and g.diagonal().sum() == 0
    assert g.getnnz(axis=1).max() <= 4
    faces = np.sort(T[:, [[1, 2, 3], [0, 2, 3], [0, 1, 3], [0, 1, 2]]], axis=2).reshape(-1, 3)
    _, counts = np.unique(faces, axis=0, return_counts=True)
    assert g.nnz == 2 * int((counts == 2).sum())


@pytest.mark.parametrize("parts", [2, 3, 7])
def test_coordinate_bisection_balances_cells(parts):
    X, T = block_mesh()
    part = coordinate_bisection(X[T].mean(axis=1), parts)
    counts = np.bincount(part, minlength=parts)
    assert counts.sum() == T.shape[0] and counts.max() - counts.min() <= 1 + T.shape[0] // 100


def test_numbering_gives_each_rank_one_contiguous_owned_range():
    X, T = block_mesh()
    P = 3
    part = coordinate_bisection(X[T].mean(axis=1), P)
    num = number_nodes(T, part, P, X.shape[0])
    assert sorted(num.new_id.tolist()) == list(range(X.shape[0]))
    assert np.array_equal(num.new_id[num.order], np.arange(X.shape[0]))
    # The owner is the lowest part among the node's cells.
    owner = np.searchsorted(num.starts, num.new_id, side="right") - 1
    lowest = np.full(X.shape[0], P)
    np.minimum.at(lowest, T.ravel(), np.repeat(part, 4))
    assert np.array_equal(owner, lowest)
    f = np.arange(3 * X.shape[0], dtype=float)
    held = Held(np.array([0, 1, 2, 3 * 17 + 1]), np.array([0.0, 0.0, 0.0, 0.5]), np.zeros(4, dtype=np.int64))
    total_owned, all_held = 0, []
    for r in range(P):
        pc = make_piece(r, X, T, num, f, held)
        # Owned nodes are one run of the piece's sorted nodes, with their own coordinates.
        first = np.searchsorted(pc.nodes, pc.start)
        assert first == pc.first
        assert np.array_equal(pc.nodes[first:first + pc.stop - pc.start], np.arange(pc.start, pc.stop))
        assert np.allclose(pc.points, X[num.order[pc.nodes]])
        assert np.array_equal(pc.old, num.order[pc.nodes])
        assert np.allclose(pc.points[pc.cells], X[T[part == r]])
        assert np.array_equal(pc.cell_ids, np.flatnonzero(part == r))
        assert np.array_equal(pc.F[:, 0], f.reshape(-1, 3)[num.order[pc.start:pc.stop]].ravel())
        total_owned += pc.stop - pc.start
        all_held.append(pc.held)
        assert np.all((pc.held >= 3 * pc.start) & (pc.held < 3 * pc.stop))
        # The held nodes' constraint directions go with the owner of the node.
        assert np.all((pc.nodes[pc.con_nodes] >= pc.start) & (pc.nodes[pc.con_nodes] < pc.stop))
    assert total_owned == X.shape[0]
    assert sorted(np.concatenate(all_held).tolist()) == sorted(num.dof_new(held.dofs).tolist())


def test_threads_limited_only_under_a_launcher(monkeypatch):
    from elastofe.parallel import LAUNCHER_SIZE_VARS, THREAD_VARS

    for v in LAUNCHER_SIZE_VARS + THREAD_VARS:
        monkeypatch.setenv(v, "x")  # recorded, so that teardown restores the original state
        monkeypatch.delenv(v)
    assert launched_ranks() == 1
    limit_threads_under_mpi()
    assert "OMP_NUM_THREADS" not in __import__("os").environ
    monkeypatch.setenv("OMPI_COMM_WORLD_SIZE", "4")
    assert launched_ranks() == 4
    limit_threads_under_mpi()
    assert __import__("os").environ["OMP_NUM_THREADS"] == "1"


def test_missing_petsc_names_the_install_script(monkeypatch):
    from elastofe.solve import petsc

    monkeypatch.setitem(sys.modules, "petsc4py", None)  # import petsc4py now raises ImportError
    monkeypatch.setitem(sys.modules, "mpi4py", None)
    with pytest.raises(SolverError, match=r"scripts/install-mpi\.sh"):
        petsc.import_petsc()


def test_rotation_in_place_is_t_k_t_transposed():
    # The distributed assembly rotates each rank's element sums in place; it must equal the
    # product T K Tᵀ with the sparse rotation (as the single-process elimination forms it).
    from elastofe.fem.assembly import assemble_stiffness
    from elastofe.parallel.assembly import rotate_in_place

    X, T = block_mesh(4)
    K = assemble_stiffness(X, T, 1.0e5, 7.0e4)
    rng = np.random.default_rng(5)
    nodes = np.sort(rng.choice(X.shape[0], 9, replace=False))
    R = np.linalg.qr(rng.normal(size=(9, 3, 3)))[0]
    held = Held(np.zeros(0, np.int64), np.zeros(0), np.zeros(0, np.int64), rotated=nodes, rotation=R)
    Tm = held.transform(K.shape[0])
    want = (Tm @ K @ Tm.T).toarray()
    got = K.copy()
    rotate_in_place(got, nodes, R)
    assert np.abs(got.toarray() - want).max() <= 1e-12 * np.abs(want).max()
    assert not np.allclose(want, K.toarray())  # the rotation did something


@pytest.mark.parametrize("suffix", ["vtu", "xdmf"])
@pytest.mark.parametrize("with_ids", [True, False])
def test_mesh_parts_merge_into_the_whole_mesh(with_ids, suffix, tmp_path):
    # One mesh written as two VTU (or XDMF with HDF5) pieces (with the node_id array, or only
    # shared coordinates) is read back as the same mesh, the pieces' cells marked with their part.
    import meshio

    from elastofe.geometry import mesh_from_parts, mesh_part_arrays
    from elastofe.mesh import from_arrays

    X, T = block_mesh(5)
    part = coordinate_bisection(X[T].mean(axis=1), 2)
    whole = from_arrays(X, T)
    for p in range(2):
        cells = T[part == p]
        used = np.unique(cells)
        remap = np.full(X.shape[0], -1)
        remap[used] = np.arange(used.size)
        pd = {"node_id": used} if with_ids else {}
        meshio.write(tmp_path / f"p{p}.{suffix}", meshio.Mesh(X[used], [("tetra", remap[cells])], point_data=pd))
    parts = [mesh_part_arrays(tmp_path / f"p{p}.{suffix}") for p in range(2)]
    mesh, got_part = mesh_from_parts(parts, str(tmp_path / f"p{{rank}}.{suffix}"))
    assert mesh.nodes == whole.nodes and mesh.cells.shape == whole.cells.shape
    # The same cells (as sets of coordinates) and the same boundary.
    def centres(points, cells):
        return np.sort(np.round(points[cells].sum(axis=1), 9).view("f8,f8,f8").ravel())

    assert np.array_equal(centres(mesh.points, mesh.cells), centres(X, T))
    assert mesh.faces.shape == whole.faces.shape
    assert np.array_equal(np.bincount(got_part), np.bincount(part))
