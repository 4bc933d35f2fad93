"""The pattern-based assembly against a plain COO assembly of the same element matrices.

Reference: summing every element matrix as COO triplets (scipy sums duplicates) is the textbook
definition of the global stiffness (common practice); the fast path must equal it to round-off.
"""
import numpy as np
import pytest
import scipy.sparse as sp

from elastofe.fem import assembly as A
from elastofe.fem.elements import element_for
from elastofe.fem.quadrature import tet_rule
from elastofe.geometry import mesh_geometry
from elastofe.solve import upper_triangle

LAM, MU = 115384.6, 76923.1  # E = 200000, nu = 0.3 in the mm-N system


def _close(K, K0, rtol=1e-12):
    D = (K - K0).tocoo()
    return np.abs(D.data).max(initial=0.0) <= rtol * np.abs(K0.data).max()


@pytest.mark.parametrize("order", [1, 2])
def test_pattern_assembly_equals_coo_reference(parts, order):
    mesh = mesh_geometry(parts["bar"], order=order, size=4.0)
    K = A.assemble_stiffness(mesh.points, mesh.cells, LAM, MU)
    K0 = A.assemble_stiffness_coo(mesh.points, mesh.cells, LAM, MU)
    assert K.shape == K0.shape and K.nnz == K0.nnz
    assert _close(K, K0)
    # Sorted, no duplicates, 32-bit indices, symmetric.
    assert K.has_sorted_indices and np.all(np.diff(K.indices[K.indptr[0]:K.indptr[1]]) > 0)
    assert K.indices.dtype == np.int32 and K.indptr.dtype == np.int32
    assert _close(K.T.tocsr(), K)


def test_curved_cells_and_small_blocks(parts):
    # The quarter ring has curved 10-node cells (general quadrature path) and straight ones
    # (one-product path); blocks of 7 cells exercise the chunking.
    mesh = mesh_geometry(parts["ring"], order=2, size=3.0)
    which, _ = A.stiffness_rule(mesh.points, mesh.cells)
    assert 0 < which.sum() < which.size
    K = A.assemble_stiffness(mesh.points, mesh.cells, LAM, MU, block=7)
    K0 = A.assemble_stiffness_coo(mesh.points, mesh.cells, LAM, MU)
    assert _close(K, K0)


def test_pattern_reused_for_another_material(parts):
    mesh = mesh_geometry(parts["cube"], order=2, size=0.4)
    P = A.StiffnessPattern(mesh.cells, mesh.nodes)
    K1 = A.assemble_stiffness(mesh.points, mesh.cells, LAM, MU, pattern=P)
    K2 = A.assemble_stiffness(mesh.points, mesh.cells, 2 * LAM, 2 * MU, pattern=P)
    # Stiffness is linear in the Lamé constants.
    assert _close(K2, 2 * K1)


@pytest.mark.parametrize("k", [4, 10])
def test_affine_kernel_equals_quadrature_kernel(k):
    # On straight cells the one-product kernel must reproduce the quadrature kernel.
    rng = np.random.default_rng(7)
    el = element_for(k)
    X4 = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], float)
    T = np.eye(3) + 0.3 * rng.standard_normal((5, 3, 3))
    V = np.einsum("eij,nj->eni", T, X4) + rng.standard_normal((5, 1, 3))
    X = V if k == 4 else np.concatenate([V, 0.5 * (V[:, el.edges[:, 0]] + V[:, el.edges[:, 1]])], axis=1)
    det0 = np.linalg.det(T)
    X[det0 < 0] = X[det0 < 0][:, :, [1, 0, 2]]  # mirror inverted cells: keep det J > 0
    rule = tet_rule(el.stiffness_degree[0])
    G, det = A.gradients(X, el, rule.points)
    Kq = A.element_stiffness(G, det * rule.weights, LAM, MU)
    d, Jinv = A.affine_jacobians(X, el)
    Ka = (A.affine_products(d, Jinv) @ A.affine_operator(el, rule, LAM, MU)).reshape(Kq.shape)
    assert np.abs(Ka - Kq).max() <= 1e-12 * np.abs(Kq).max()


def test_inverted_cell_is_reported(parts):
    mesh = mesh_geometry(parts["cube"], order=1, size=0.5)
    cells = mesh.cells.copy()
    cells[3, [0, 1]] = cells[3, [1, 0]]
    with pytest.raises(ValueError, match="inverted"):
        A.assemble_stiffness(mesh.points, cells, LAM, MU)


def test_upper_triangle_equals_scipy_triu():
    M = sp.random(60, 60, density=0.2, random_state=4, format="csr")
    M = (M + M.T).tocsr()
    M.sort_indices()
    U = upper_triangle(M)
    assert (U != sp.triu(M, format="csr")).nnz == 0
    assert U.has_sorted_indices
