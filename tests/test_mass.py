"""Consistent mass matrix: total mass, symmetry, definiteness, closed-form element matrices."""
from __future__ import annotations

import math
from collections import defaultdict

import numpy as np
import pytest

from elastofe.fem.assembly import (
    StiffnessPattern,
    assemble_stiffness,
    cell_volumes,
    is_curved,
)
from elastofe.fem.elements import Tet10
from elastofe.fem.mass import assemble_mass, element_mass
from elastofe.fem.nullspace import rigid_modes
from elastofe.verify.meshes import structured_block


def _curved_block(order=2):
    """A 2 x 1 x 1 block of 10-node cells with edge nodes pushed off their midpoints (curved)."""
    p, c = structured_block(3, 2, 2, order)
    p = p * [2.0, 1.0, 1.0]
    mids = np.unique(c[:, 4:])
    rng = np.random.default_rng(3)
    p = p.copy()
    p[mids] += 0.02 * rng.standard_normal((mids.size, 3))
    return p, c


@pytest.mark.parametrize("order", [1, 2])
@pytest.mark.parametrize("curved", [False, True])
def test_total_mass_in_every_direction(order, curved):
    if curved and order == 1:
        pytest.skip("4-node cells are always straight")
    if curved:
        p, c = _curved_block()
        assert is_curved(p, c).sum() > 0
        volume = cell_volumes(p, c).sum()
    else:
        p, c = structured_block(3, 2, 2, order)
        p = p * [2.0, 1.0, 1.0]
        volume = 2.0
    rho = 7.85e-9
    M = assemble_mass(p, c, rho)
    T = rigid_modes(p)[:, :3]
    # A unit translation along each axis carries the whole mass rho V, and no mass couples the
    # directions (∑_ab ∫ N_a N_b = ∫ 1: partition of unity; common practice).
    assert T.T @ (M @ T) == pytest.approx(rho * volume * np.eye(3), rel=1e-12, abs=1e-12 * rho * volume)


@pytest.mark.parametrize("order", [1, 2])
def test_symmetric_positive_definite_on_the_stiffness_pattern(order):
    p, c = structured_block(2, 2, 1, order)
    pat = StiffnessPattern(c, p.shape[0])
    M = assemble_mass(p, c, 2.0, pattern=pat)
    K = assemble_stiffness(p, c, 1.0, 1.0, pattern=pat)
    assert abs(M - M.T).max() <= 1e-15 * abs(M).max()
    w = np.linalg.eigvalsh(M.toarray())
    assert w.min() > 1e-6 * w.max()
    # Same CSR pattern as K, so K - sigma M is a sum of data arrays.
    assert np.array_equal(M.indptr, K.indptr) and np.array_equal(M.indices, K.indices)


def test_tet4_closed_form():
    # 4-node tetrahedron: m_ab = rho V (1 + δ_ab) / 20 (Zienkiewicz & Taylor, The Finite Element
    # Method, vol. 1; common textbook result, from memory).
    p = np.array([[0.0, 0, 0], [2, 0.1, 0], [0.3, 1.5, 0.2], [0.1, 0.4, 1.2]])
    c = np.array([[0, 1, 2, 3]])
    V = cell_volumes(p, c)[0]
    m = element_mass(p, c, 3.0)[0]
    assert m == pytest.approx(3.0 * V / 20 * (np.ones((4, 4)) + np.eye(4)), rel=1e-13)


def _barycentric_integral(powers) -> float:
    """∫ L1^a L2^b L3^c L4^d dV / V = a! b! c! d! 3! / (a + b + c + d + 3)! (Eisenberg & Malvern,
    Int. J. Numer. Meth. Eng. 7 (1973) 574; common practice)."""
    return math.prod(math.factorial(k) for k in powers) * 6 / math.factorial(sum(powers) + 3)


def _tet10_polynomials():
    """TET10 shape functions as {exponents of (L1..L4): coefficient}, in Tet10's node order."""
    polys = []
    for i in range(4):
        sq, lin = [0] * 4, [0] * 4
        sq[i], lin[i] = 2, 1
        polys.append({tuple(sq): 2.0, tuple(lin): -1.0})
    for i, j in Tet10.edges:
        e = [0] * 4
        e[i] += 1
        e[j] += 1
        polys.append({tuple(e): 4.0})
    return polys


def test_tet10_against_exact_barycentric_integration():
    polys = _tet10_polynomials()
    exact = np.zeros((10, 10))
    for a, pa in enumerate(polys):
        for b, pb in enumerate(polys):
            prod = defaultdict(float)
            for ea, ca in pa.items():
                for eb, cb in pb.items():
                    prod[tuple(x + y for x, y in zip(ea, eb))] += ca * cb
            exact[a, b] = sum(coef * _barycentric_integral(e) for e, coef in prod.items())
    p4 = np.array([[0.0, 0, 0], [1.3, 0.2, 0], [0.1, 0.9, 0.3], [0.2, 0.1, 1.1]])
    p = np.vstack([p4, 0.5 * (p4[Tet10.edges[:, 0]] + p4[Tet10.edges[:, 1]])])
    c = np.arange(10)[None]
    V = cell_volumes(p, c)[0]
    assert element_mass(p, c, 1.0)[0] == pytest.approx(V * exact, rel=1e-12, abs=1e-15)
    # corner-corner diagonal 6/420, edge-edge diagonal 32/420 (consequences of the same formula)
    assert exact[0, 0] == pytest.approx(6 / 420) and exact[4, 4] == pytest.approx(32 / 420)


def test_per_cell_density_and_bad_input():
    p, c = structured_block(2, 1, 1, 2)
    rho = np.where(np.arange(c.shape[0]) % 2 == 0, 1.0, 3.0)
    vol = cell_volumes(p, c)
    M = assemble_mass(p, c, rho)
    t = rigid_modes(p)[:, 0]
    assert t @ (M @ t) == pytest.approx(float(rho @ vol), rel=1e-12)
    with pytest.raises(ValueError, match="one value per cell"):
        assemble_mass(p, c, np.ones(3))
    with pytest.raises(ValueError, match="positive"):
        assemble_mass(p, c, -1.0)
