"""Geometric (initial-stress) stiffness of 4- and 10-node tetrahedra, vectorised over elements.

``K_σ[3a + i, 3b + j] = δ_ij ∫ ∂N_a/∂x_k σ_kl ∂N_b/∂x_l dV``: the second variation of the work of a
pre-stress ``σ`` under the nonlinear part of the Green-Lagrange strain (common practice; e.g.
Zienkiewicz & Taylor, The Finite Element Method, vol. 2, the initial-stress matrix). With the
stiffness ``K`` of the same mesh, ``(K + λ K_σ) φ = 0`` gives the linear buckling factors ``λ`` of
the load that produced ``σ``.

The stress is given per cell, either constant ``(m, 6)`` or at the cell's own nodes ``(m, k, 6)``
(for example :func:`elastofe.fem.assembly.stress_at` at the element's reference nodes, before any
averaging between cells), Voigt order xx, yy, zz, xy, yz, xz [stress], and interpolated inside the
cell with its shape functions. For a stress field of the element's own displacement (constant on
4-node, linear on straight 10-node cells) that interpolation reproduces it exactly.

The matrix is written on the stiffness matrix's CSR pattern, as :mod:`elastofe.fem.mass` does.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .assembly import (
    ASSEMBLY_BLOCK,
    StiffnessPattern,
    affine_jacobians,
    check_det,
    element_blocks,
    gradients,
    is_curved,
)
from .elements import element_for
from .quadrature import Rule, tet_rule

#: Voigt index of each tensor component (xx, yy, zz, xy, yz, xz).
VOIGT = np.array([[0, 3, 5], [3, 1, 4], [5, 4, 2]])

#: Quadrature degree of ``N_c ∂N_a ∂N_b det J``: (straight, curved) by nodes per cell. Straight
#: 10-node cells: 2 + 1 + 1; curved cells take the stiffness's curved rule.
GEOMETRIC_DEGREE = {4: (1, 1), 10: (4, 5)}


def stress_tensors(stress: np.ndarray) -> np.ndarray:
    """Symmetric tensors ``(..., 3, 3)`` from Voigt stresses ``(..., 6)`` (xx, yy, zz, xy, yz, xz)."""
    return stress[..., VOIGT]


def reference_operator(el, rule: Rule) -> np.ndarray:
    """``T[c, l, m, a, b] = Σ_q w_q N_c dN_a,l dN_b,m`` on the reference cell, ``(k, 3, 3, k, k)``.

    On a straight cell the element matrix is ``det J Σ_c Σ_lm (J⁻¹ σ_c J⁻ᵀ)_lm T[c, l, m]``: one
    matrix product per block of cells.
    """
    N = el.shape(rule.points)
    dN = el.grad(rule.points)
    return np.einsum("q,qc,qal,qbm->clmab", rule.weights, N, dN, dN, optimize=True)


def _block_geometric(X: np.ndarray, S: np.ndarray, el, rule: Rule, straight: bool, T: np.ndarray,
                     blk: np.ndarray) -> np.ndarray:
    """Scalar element matrices ``(e, k, k)`` for cells ``X (e, k, 3)`` with nodal stress tensors
    ``S (e, k, 3, 3)``."""
    e, k = X.shape[0], el.nodes
    if straight:
        det, Jinv = affine_jacobians(X, el)
        check_det(det, blk)
        Sr = np.einsum("elx,ecxy,emy->eclm", Jinv, S, Jinv, optimize=True) * det[:, None, None, None]
        return (Sr.reshape(e, -1) @ T.reshape(-1, k * k)).reshape(e, k, k)
    G, det = gradients(X, el, rule.points)
    check_det(det, blk)
    Sq = np.einsum("qc,ecxy->eqxy", el.shape(rule.points), S, optimize=True)
    return np.einsum("eq,eqax,eqxy,eqby->eab", det * rule.weights, G, Sq, G, optimize=True)


def assemble_geometric(points: np.ndarray, cells: np.ndarray, stress: np.ndarray, *,
                       pattern: StiffnessPattern | None = None, block: int = ASSEMBLY_BLOCK) -> sp.csr_matrix:
    """Global geometric stiffness ``K_σ (3n, 3n)`` in CSR form on the stiffness matrix's pattern.

    Parameters
    ----------
    points : (n, 3) node coordinates [length].
    cells : (m, 4 | 10) node indices, VTK order.
    stress : (m, 6) constant per cell, or (m, k, 6) at each cell's own nodes [stress], Voigt order
        xx, yy, zz, xy, yz, xz (tension positive).
    pattern : StiffnessPattern, optional; the stiffness matrix's (reused).
    block : elements per batch.

    Returns
    -------
    K_sigma : (3n, 3n) CSR, symmetric (indefinite in general) [force/length]. Rigid translations
        are in its null space; a rigid rotation ``θ`` about axis ``e`` has
        ``θ² ∫ (tr σ − eᵀ σ e) dV`` as ``uᵀ K_σ u``.

    Raises
    ------
    ValueError
        A stress array of the wrong shape, or an inverted cell.
    """
    n = points.shape[0]
    m = cells.shape[0]
    el = element_for(cells.shape[1])
    k = el.nodes
    stress = np.asarray(stress, dtype=float)
    if stress.shape == (m, 6):
        constant = True
    elif stress.shape == (m, k, 6):
        constant = False
    else:
        raise ValueError(f"stress must have shape ({m}, 6) or ({m}, {k}, 6), got {stress.shape}")
    if pattern is None:
        pattern = StiffnessPattern(cells, n)
    d_straight, d_curved = GEOMETRIC_DEGREE[k]
    rules = [tet_rule(d_straight), tet_rule(d_curved)]
    T = reference_operator(el, rules[0])
    if constant:  # Σ_c N_c = 1: one tensor per cell against the operator summed over c
        T = T.sum(axis=0, keepdims=True)
    which = is_curved(points, cells).astype(np.int8)
    eye = np.eye(3)
    data = np.zeros(pattern.nnz)
    for blk, rule in element_blocks(points, cells, block, which, rules):
        S = stress_tensors(stress[blk])
        S = S[:, None] if constant else S
        straight = which[blk[0]] == 0  # by index: both rules may be the same object
        if constant and not straight:
            S = np.broadcast_to(S, (blk.size, k, 3, 3))
        ke = _block_geometric(points[cells[blk]], S, el, rule, straight, T, blk)
        Ke = ke[:, :, None, :, None] * eye[None, None, :, None, :]  # (e, k, 3, k, 3)
        np.add.at(data, pattern.dof_positions(cells, blk).ravel(), Ke.ravel())
    return pattern.matrix(data)
