"""Consistent mass matrix of 4- and 10-node tetrahedra, vectorised over elements.

``M[3a + i, 3b + j] = δ_ij ∫ ρ N_a N_b dV``. Arrays: ``points (n, 3)`` [length], ``cells (m, k)``
(k = 4 or 10, VTK order), density ``ρ`` [mass/length³] scalar or per cell; DOF ``3*node + component``
as in :mod:`elastofe.fem.assembly`. The matrix is written on the stiffness matrix's CSR pattern
(:class:`~elastofe.fem.assembly.StiffnessPattern`), so ``K - σ M`` on the same pattern is a sum of
two data arrays and the eliminated ``M_ff`` has the pattern of ``K_ff``.

Quadrature is exact for the integrand: ``N_a N_b`` is of degree 2 on 4-node cells and 4 on straight
10-node cells (whose Jacobian is constant); on curved 10-node cells the Jacobian determinant adds
degree 3, so those take a degree-7 rule.
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

#: Quadrature degree of ``N_a N_b det J``: (straight cells, curved cells), by nodes per cell.
MASS_DEGREE = {4: (2, 2), 10: (4, 7)}


def cell_densities(density, m: int) -> np.ndarray:
    """Density per cell ``(m,)`` [mass/length³] from a scalar or an ``(m,)`` array.

    Raises
    ------
    ValueError
        Wrong length, or a density that is not finite and positive.
    """
    rho = np.asarray(density, dtype=float)
    rho = np.full(m, float(rho)) if rho.ndim == 0 else rho
    if rho.shape != (m,):
        raise ValueError(f"density must be a scalar or one value per cell ({m},), got shape {rho.shape}")
    if not np.all(np.isfinite(rho)) or np.any(rho <= 0):
        raise ValueError("density must be finite and positive in every cell")
    return rho


def reference_mass(el, degree: int) -> np.ndarray:
    """``∫ N_a N_b dξ`` over the reference tetrahedron (volume 1/6), ``(k, k)``."""
    rule = tet_rule(degree)
    N = el.shape(rule.points)
    return np.einsum("q,qa,qb->ab", rule.weights, N, N)


def mass_rules(el) -> tuple[Rule, Rule]:
    """The quadrature rules (straight cells, curved cells) exact for ``N_a N_b det J``."""
    d_straight, d_curved = MASS_DEGREE[el.nodes]
    return tet_rule(d_straight), tet_rule(d_curved)


def _block_mass(X: np.ndarray, el, rho: np.ndarray, rule: Rule, straight: bool, blk: np.ndarray) -> np.ndarray:
    """Scalar element mass matrices ``(e, k, k)`` of one block of cells ``X (e, k, 3)``."""
    if straight:
        det, _ = affine_jacobians(X, el)
        check_det(det, blk)
        # Constant Jacobian: every cell's matrix is a multiple of the reference one.
        return (rho * det)[:, None, None] * reference_mass(el, rule.degree)
    N = el.shape(rule.points)
    _, det = gradients(X, el, rule.points)
    check_det(det, blk)
    return np.einsum("eq,qa,qb->eab", det * rule.weights * rho[:, None], N, N, optimize=True)


def element_mass(points: np.ndarray, cells: np.ndarray, density=1.0) -> np.ndarray:
    """Scalar element mass matrices ``m_ab = ∫ ρ N_a N_b dV``, ``(m, k, k)`` [mass].

    The 3D element matrix is ``m_ab δ_ij``; this is its part without the identity.
    """
    el = element_for(cells.shape[1])
    rho = cell_densities(density, cells.shape[0])
    rules = list(mass_rules(el))
    which = is_curved(points, cells).astype(np.int8)
    out = np.empty((cells.shape[0], el.nodes, el.nodes))
    for blk, rule in element_blocks(points, cells, which=which, rules=rules):
        out[blk] = _block_mass(points[cells[blk]], el, rho[blk], rule, which[blk[0]] == 0, blk)
    return out


def assemble_mass(points: np.ndarray, cells: np.ndarray, density=1.0, *,
                  pattern: StiffnessPattern | None = None, block: int = ASSEMBLY_BLOCK) -> sp.csr_matrix:
    """Global consistent mass matrix ``(3n, 3n)`` in CSR form on the stiffness matrix's pattern.

    Parameters
    ----------
    points : (n, 3) node coordinates [length].
    cells : (m, 4 | 10) node indices, VTK order.
    density : float or (m,) array, mass per volume [mass/length³] (per cell for several materials).
    pattern : StiffnessPattern, optional; the one the stiffness matrix was built on (reused, so
        ``M`` and ``K`` share ``indices`` and ``indptr``).
    block : elements per batch.

    Returns
    -------
    M : (3n, 3n) CSR, symmetric positive definite; for a unit translation ``t`` along any axis
        ``tᵀ M t = ∫ ρ dV`` (the total mass).

    Raises
    ------
    ValueError
        Bad density, or a cell with a non-positive Jacobian determinant.
    """
    n = points.shape[0]
    el = element_for(cells.shape[1])
    rho = cell_densities(density, cells.shape[0])
    if pattern is None:
        pattern = StiffnessPattern(cells, n)
    rules = list(mass_rules(el))
    which = is_curved(points, cells).astype(np.int8)
    eye = np.eye(3)
    data = np.zeros(pattern.nnz)
    for blk, rule in element_blocks(points, cells, block, which, rules):
        # straight or curved by index: for 4-node cells both rules are the same object
        me = _block_mass(points[cells[blk]], el, rho[blk], rule, which[blk[0]] == 0, blk)
        Me = me[:, :, None, :, None] * eye[None, None, :, None, :]  # (e, k, 3, k, 3)
        np.add.at(data, pattern.dof_positions(cells, blk).ravel(), Me.ravel())
    return pattern.matrix(data)

