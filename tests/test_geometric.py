"""Geometric (initial-stress) stiffness: symmetry, rigid translations, the energy of rigid rotations."""
from __future__ import annotations

import numpy as np
import pytest

from elastofe.fem.assembly import (
    StiffnessPattern,
    assemble_stiffness,
    cell_volumes,
    stress_at,
)
from elastofe.fem.elements import element_for
from elastofe.fem.geometric import assemble_geometric, stress_tensors
from elastofe.fem.nullspace import rigid_modes
from elastofe.verify.meshes import structured_block


def _mesh(order, curved=False):
    p, c = structured_block(3, 2, 2, order)
    p = p * [2.0, 1.0, 0.5]
    if curved:
        mids = np.unique(c[:, 4:])
        p = p.copy()
        p[mids] += 0.02 * np.random.default_rng(5).standard_normal((mids.size, 3))
    return p, c


CASES = [(1, False), (2, False), (2, True)]


@pytest.mark.parametrize("order,curved", CASES)
def test_symmetric_and_translations_free(order, curved):
    p, c = _mesh(order, curved)
    rng = np.random.default_rng(1)
    s = rng.standard_normal((c.shape[0], c.shape[1], 6))
    Kg = assemble_geometric(p, c, s)
    assert abs(Kg - Kg.T).max() <= 1e-14 * abs(Kg).max()
    # Σ_a ∂N_a/∂x = 0: a rigid translation has no initial-stress energy (common practice).
    T = rigid_modes(p)[:, :3]
    assert abs(Kg @ T).max() <= 1e-12 * abs(Kg).max()


@pytest.mark.parametrize("order,curved", CASES)
def test_rigid_rotation_energy(order, curved):
    # A rigid rotation θ about axis e has ∂u/∂x = θ [e]x, so uᵀ K_σ u = ∫ σ_kl u_i,k u_i,l dV
    # = θ² ∫ (tr σ − eᵀ σ e) dV (the second-order work of the pre-stress; common practice).
    p, c = _mesh(order, curved)
    s0 = np.array([3.0, -1.0, 2.0, 0.5, -0.25, 0.75])  # xx, yy, zz, xy, yz, xz
    S = stress_tensors(s0)
    V = cell_volumes(p, c).sum()
    R = rigid_modes(p)[:, 3:]  # unit rotations about x, y, z
    for stress in (np.tile(s0, (c.shape[0], 1)), np.tile(s0, (c.shape[0], c.shape[1], 1))):
        Kg = assemble_geometric(p, c, stress)
        E = R.T @ (Kg @ R)
        expected = V * (np.trace(S) * np.eye(3) - S)
        assert E == pytest.approx(expected, rel=1e-11, abs=1e-11 * np.abs(expected).max())


def test_linear_stress_interpolated_exactly():
    # The stress of a 10-node displacement field is linear in a straight cell; given at the cell's
    # nodes it is interpolated exactly, so a quadratic displacement gives the same K_σ as the
    # stress evaluated at the quadrature points directly (reference: a plain quadrature sum here).
    p, c = _mesh(2)
    u = np.stack([p[:, 0] ** 2, p[:, 0] * p[:, 1], p[:, 2] ** 2 - p[:, 1]], axis=1)
    el = element_for(10)
    s_nodes = stress_at(p, c, u, el.ref_nodes, 2.0, 1.0)
    Kg = assemble_geometric(p, c, s_nodes).toarray()
    from elastofe.fem.assembly import gradients
    from elastofe.fem.quadrature import tet_rule

    rule = tet_rule(5)
    G, det = gradients(p[c], el, rule.points)
    Sq = stress_tensors(stress_at(p, c, u, rule.points, 2.0, 1.0))
    ke = np.einsum("eq,eqax,eqxy,eqby->eab", det * rule.weights, G, Sq, G)
    ref = np.zeros((p.shape[0], p.shape[0]))
    np.add.at(ref, (c[:, :, None], c[:, None, :]), ke)
    assert Kg[0::3, 0::3] == pytest.approx(ref, abs=1e-11 * np.abs(ref).max())
    assert np.abs(Kg[0::3, 1::3]).max() == 0.0  # δ_ij: no coupling between components


def test_same_pattern_and_bad_shape():
    p, c = _mesh(2)
    pat = StiffnessPattern(c, p.shape[0])
    K = assemble_stiffness(p, c, 1.0, 1.0, pattern=pat)
    Kg = assemble_geometric(p, c, np.ones((c.shape[0], 6)), pattern=pat)
    assert np.array_equal(Kg.indices, K.indices) and np.array_equal(Kg.indptr, K.indptr)
    with pytest.raises(ValueError, match="stress must have shape"):
        assemble_geometric(p, c, np.ones((c.shape[0], 3, 6)))
