"""Vectorised element kernels and global assembly for 3D isotropic linear elasticity.

Arrays: ``points (n, 3)`` [length]; ``cells (m, k)`` node indices (k = 4 or 10, VTK order);
DOF ``3*node + component``. Nothing here loops over elements in Python: element blocks are
processed as arrays of shape ``(elements, quadrature points, ...)``.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .elements import element_for
from .quadrature import Rule, tet_rule

#: Elements per block; bounds the memory of the batched kernels.
BLOCK = 20000


def is_curved(points: np.ndarray, cells: np.ndarray, rtol: float = 1e-9) -> np.ndarray:
    """Which 10-node cells have edge nodes off their straight edge midpoints, ``(m,)`` bool."""
    if cells.shape[1] == 4:
        return np.zeros(cells.shape[0], dtype=bool)
    el = element_for(cells.shape[1])
    X = points[cells]
    mid = 0.5 * (X[:, el.edges[:, 0]] + X[:, el.edges[:, 1]])
    dev = np.linalg.norm(X[:, 4:] - mid, axis=2).max(axis=1)
    h = np.linalg.norm(X[:, 1] - X[:, 0], axis=1)
    return dev > rtol * h


def stiffness_rule(points: np.ndarray, cells: np.ndarray) -> tuple[np.ndarray, list[Rule]]:
    """Quadrature per cell: ``(m,)`` index into the returned rules (0 straight, 1 curved)."""
    el = element_for(cells.shape[1])
    d_straight, d_curved = el.stiffness_degree
    which = is_curved(points, cells).astype(np.int8)
    return which, [tet_rule(d_straight), tet_rule(d_curved)]


def gradients(X: np.ndarray, el, xi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Physical shape-function gradients and Jacobian determinants.

    Parameters
    ----------
    X : (e, k, 3) node coordinates of each element.
    el : element class.
    xi : (q, 3) reference points.

    Returns
    -------
    G : (e, q, k, 3) dN/dx.
    det : (e, q) det of the Jacobian (6 x volume for straight cells).
    """
    dN = el.grad(xi)  # (q, k, 3)
    J = np.einsum("enk,qnl->eqkl", X, dN, optimize=True)
    det = np.linalg.det(J)
    Jinv = np.linalg.inv(J)
    G = np.einsum("qnl,eqlk->eqnk", dN, Jinv, optimize=True)
    return G, det


def element_stiffness(G: np.ndarray, wdet: np.ndarray, lam: float, mu: float) -> np.ndarray:
    """Element stiffness matrices ``(e, 3k, 3k)`` from gradients and weighted determinants.

    Uses the Lamé form K[ai, bj] = ∫ λ g_a,i g_b,j + μ g_a,j g_b,i + μ δ_ij g_a·g_b dV.
    """
    e, q, k, _ = G.shape
    Gf = G.reshape(e, q, 3 * k)
    A = np.matmul((Gf * wdet[:, :, None]).transpose(0, 2, 1), Gf).reshape(e, k, 3, k, 3)
    tr = np.einsum("eakbk->eab", A)
    K = lam * A + mu * A.transpose(0, 1, 4, 3, 2)
    K += mu * tr[:, :, None, :, None] * np.eye(3)[None, None, :, None, :]
    return K.reshape(e, 3 * k, 3 * k)


def cell_dofs(cells: np.ndarray) -> np.ndarray:
    """DOF numbers ``(m, 3k)`` of each cell, node-major."""
    return (3 * cells[:, :, None] + np.arange(3)).reshape(cells.shape[0], -1)


def assemble_stiffness(points: np.ndarray, cells: np.ndarray, lam: float, mu: float) -> sp.csr_matrix:
    """Global stiffness matrix ``(3n, 3n)`` in CSR form (duplicates summed).

    Raises
    ------
    ValueError
        When a cell has a non-positive Jacobian determinant (inverted or degenerate).
    """
    n = points.shape[0]
    el = element_for(cells.shape[1])
    which, rules = stiffness_rule(points, cells)
    m, k = cells.shape
    data = np.empty((m, 3 * k, 3 * k))
    for r, rule in enumerate(rules):
        idx = np.flatnonzero(which == r)
        for s in range(0, idx.size, BLOCK):
            blk = idx[s:s + BLOCK]
            G, det = gradients(points[cells[blk]], el, rule.points)
            if np.any(det <= 0):
                bad = blk[np.flatnonzero((det <= 0).any(axis=1))]
                raise ValueError(f"{bad.size} element(s) inverted or degenerate (first: {bad[:5].tolist()})")
            data[blk] = element_stiffness(G, det * rule.weights, lam, mu)
    dofs = cell_dofs(cells)
    itype = np.int32 if 3 * n < 2**31 - 1 else np.int64
    rows = np.broadcast_to(dofs[:, :, None], data.shape).astype(itype, copy=False).ravel()
    cols = np.broadcast_to(dofs[:, None, :], data.shape).astype(itype, copy=False).ravel()
    K = sp.coo_matrix((data.ravel(), (rows, cols)), shape=(3 * n, 3 * n)).tocsr()
    K.sum_duplicates()
    return K


def body_force(points: np.ndarray, cells: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Consistent nodal forces ``(3n,)`` of a uniform body force ``b (3,)`` [force/volume]."""
    el = element_for(cells.shape[1])
    rule = tet_rule(2 * el.degree)
    N = el.shape(rule.points)  # (q, k)
    _, det = gradients(points[cells], el, rule.points)
    wN = np.einsum("eq,qk->ek", det * rule.weights, N)  # (m, k): ∫ N_a dV
    f = np.zeros((points.shape[0], 3))
    for i in range(3):
        f[:, i] = np.bincount(cells.ravel(), weights=(wN * b[i]).ravel(), minlength=points.shape[0])
    return f.ravel()


def cell_volumes(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Volume of each cell ``(m,)`` [length^3]."""
    el = element_for(cells.shape[1])
    rule = tet_rule(2 * el.degree if cells.shape[1] == 10 else 1)
    _, det = gradients(points[cells], el, rule.points)
    return det @ rule.weights


def strain_displacement(G: np.ndarray, Ue: np.ndarray) -> np.ndarray:
    """Strains in Voigt order xx, yy, zz, xy, yz, xz (engineering shear) ``(e, q, 6)``.

    ``G (e, q, k, 3)``, ``Ue (e, k, 3)``.
    """
    H = np.einsum("eqnk,eni->eqik", G, Ue, optimize=True)  # du_i/dx_k
    return np.stack([H[..., 0, 0], H[..., 1, 1], H[..., 2, 2], H[..., 0, 1] + H[..., 1, 0],
                     H[..., 1, 2] + H[..., 2, 1], H[..., 0, 2] + H[..., 2, 0]], axis=-1)


def hooke(eps: np.ndarray, lam: float, mu: float) -> np.ndarray:
    """Stress ``(..., 6)`` from strain ``(..., 6)`` (Voigt, engineering shear), isotropic."""
    tr = eps[..., 0] + eps[..., 1] + eps[..., 2]
    s = np.empty_like(eps)
    s[..., :3] = 2 * mu * eps[..., :3] + lam * tr[..., None]
    s[..., 3:] = mu * eps[..., 3:]
    return s


def stress_at(points: np.ndarray, cells: np.ndarray, u: np.ndarray, xi: np.ndarray,
              lam: float, mu: float) -> np.ndarray:
    """Stress ``(m, q, 6)`` of every cell at reference points ``xi (q, 3)``; ``u (n, 3)``."""
    el = element_for(cells.shape[1])
    m = cells.shape[0]
    out = np.empty((m, xi.shape[0], 6))
    for s in range(0, m, BLOCK):
        c = cells[s:s + BLOCK]
        G, _ = gradients(points[c], el, xi)
        out[s:s + BLOCK] = hooke(strain_displacement(G, u[c]), lam, mu)
    return out


def strain_energy(K: sp.spmatrix, u: np.ndarray) -> float:
    """Strain energy 1/2 uᵀ K u [energy]; ``u (3n,)``."""
    return 0.5 * float(u @ (K @ u))


def thermal_load(points: np.ndarray, cells: np.ndarray, delta_t: np.ndarray, coefficient: float) -> np.ndarray:
    """Equivalent nodal forces ``(3n,)`` of a thermal strain ``α ΔT I``.

    ``f[a, i] = ∫ (∂N_a/∂x_i) c ΔT dV`` with ``c = (3λ + 2μ) α`` [stress/K] (the thermal stress
    ``D ε_th = c ΔT I``) and ``ΔT`` interpolated from the nodal values ``delta_t (n,)`` [K].
    """
    el = element_for(cells.shape[1])
    # ∂N (degree p-1) times ΔT (degree p): degree 2p-1; 5 also covers the curved cells well.
    rule = tet_rule(5 if el.degree == 2 else 1)
    N = el.shape(rule.points)  # (q, k)
    f = np.zeros((points.shape[0], 3))
    for s in range(0, cells.shape[0], BLOCK):
        c = cells[s:s + BLOCK]
        G, det = gradients(points[c], el, rule.points)  # (e, q, k, 3)
        T = np.einsum("qk,ek->eq", N, delta_t[c])
        fe = np.einsum("eq,eqkd->ekd", coefficient * T * det * rule.weights, G)
        for i in range(3):
            f[:, i] += np.bincount(c.ravel(), weights=fe[..., i].ravel(), minlength=points.shape[0])
    return f.ravel()
