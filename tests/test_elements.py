"""Element and quadrature properties (common practice in FE verification)."""
import itertools
import math

import numpy as np
import pytest

from elastofe.fem.assembly import element_stiffness, gradients
from elastofe.fem.elements import Tet4, Tet10, Tri3, Tri6
from elastofe.fem.quadrature import TET_RULES, TRI_RULES


@pytest.mark.parametrize("el", [Tet4, Tet10])
def test_partition_of_unity_and_nodality(el):
    xi = np.random.default_rng(0).random((50, 3)) / 3
    assert np.allclose(el.shape(xi).sum(axis=1), 1.0, atol=1e-14)
    assert np.allclose(el.grad(xi).sum(axis=1), 0.0, atol=1e-13)
    assert np.allclose(el.shape(el.ref_nodes), np.eye(el.nodes), atol=1e-14)


@pytest.mark.parametrize("el", [Tet4, Tet10, Tri3, Tri6])
def test_gradients_match_finite_differences(el):
    dim = 2 if el in (Tri3, Tri6) else 3
    xi = np.random.default_rng(1).random((10, dim)) / (dim + 1)
    h = 1e-6
    fd = np.stack([(el.shape(xi + h * np.eye(dim)[k]) - el.shape(xi - h * np.eye(dim)[k])) / (2 * h)
                   for k in range(dim)], axis=2)
    assert np.allclose(el.grad(xi), fd, atol=1e-8)


@pytest.mark.parametrize("rules,dim", [(TET_RULES, 3), (TRI_RULES, 2)])
def test_quadrature_exact_to_its_degree(rules, dim):
    # Exact monomial integrals over the unit simplex: a! b! c! / (a + b + c + dim)! (common practice).
    for deg, rule in rules.items():
        for powers in itertools.product(range(deg + 1), repeat=dim):
            if sum(powers) > deg:
                continue
            exact = math.prod(math.factorial(p) for p in powers) / math.factorial(sum(powers) + dim)
            val = np.sum(rule.weights * np.prod(rule.points ** np.array(powers), axis=1))
            assert val == pytest.approx(exact, rel=1e-12), (deg, powers)


def _rigid(X):
    c = X.mean(axis=0)
    x = X - c
    R = np.zeros((X.shape[0], 3, 6))
    R[:, 0, 0] = R[:, 1, 1] = R[:, 2, 2] = 1
    R[:, 1, 3], R[:, 2, 3] = -x[:, 2], x[:, 1]
    R[:, 0, 4], R[:, 2, 4] = x[:, 2], -x[:, 0]
    R[:, 0, 5], R[:, 1, 5] = -x[:, 1], x[:, 0]
    return R.reshape(-1, 6)


@pytest.mark.parametrize("el,curved", [(Tet4, False), (Tet10, False), (Tet10, True)])
def test_element_stiffness_symmetric_psd_six_rigid_modes(el, curved):
    X = np.array([[0.0, 0, 0], [1.2, 0.1, 0], [0.2, 0.9, 0.1], [0.1, 0.2, 1.1]])
    if el is Tet10:
        mid = 0.5 * (X[Tet10.edges[:, 0]] + X[Tet10.edges[:, 1]])
        if curved:
            mid[0] += [0.0, -0.08, 0.03]  # a bowed edge
        X = np.vstack([X, mid])
    from elastofe.fem.quadrature import tet_rule

    rule = tet_rule(5)
    G, det = gradients(X[None], el, rule.points)
    assert np.all(det > 0)
    K = element_stiffness(G, det * rule.weights, lam=1.0, mu=0.7)[0]
    assert np.allclose(K, K.T, atol=1e-12 * np.abs(K).max())
    w = np.linalg.eigvalsh(K)
    assert w.min() > -1e-10 * w.max()
    assert np.sum(w < 1e-9 * w.max()) == 6  # exactly the six rigid-body modes
    R = _rigid(X)
    assert np.abs(K @ R).max() < 1e-10 * np.abs(K).max()
