"""Quadrature rules on the reference tetrahedron and triangle, as frozen data chosen by degree.

Reference tetrahedron: vertices (0,0,0), (1,0,0), (0,1,0), (0,0,1), volume 1/6.
Reference triangle: vertices (0,0), (1,0), (0,1), area 1/2. Weights sum to the reference measure.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Rule:
    """Points ``(q, dim)`` in reference coordinates and weights ``(q,)``; exact to ``degree``."""

    points: np.ndarray
    weights: np.ndarray
    degree: int


def _tet_orbit4(a: float) -> np.ndarray:
    b = 1.0 - 3.0 * a
    bary = np.array([[b, a, a, a], [a, b, a, a], [a, a, b, a], [a, a, a, b]])
    return bary[:, 1:]


def _tet_orbit6(a: float) -> np.ndarray:
    b = 0.5 - a
    bary = np.array([[a, a, b, b], [a, b, a, b], [a, b, b, a], [b, a, a, b], [b, a, b, a], [b, b, a, a]])
    return bary[:, 1:]


def _tet_rules() -> dict[int, Rule]:
    rules = {}
    rules[1] = Rule(np.array([[0.25, 0.25, 0.25]]), np.array([1.0 / 6.0]), 1)
    # 4-point rule exact for quadratics (common practice; e.g. Zienkiewicz & Taylor, The FEM vol. 1).
    a = (5.0 - np.sqrt(5.0)) / 20.0
    rules[2] = Rule(_tet_orbit4(a), np.full(4, 1.0 / 24.0), 2)
    # 14-point rule with positive weights exact to degree 5 (Walkington 2000 / Keast 1986 family);
    # its exactness is asserted in the tests by integrating all monomials up to degree 5.
    p = np.vstack([_tet_orbit4(0.09273525031089123), _tet_orbit4(0.3108859192633006),
                   _tet_orbit6(0.04550370412564965)])
    w = np.concatenate([np.full(4, 0.01224884051939366), np.full(4, 0.01878132095300264),
                        np.full(6, 0.007091003462846911)])
    rules[5] = Rule(p, w, 5)
    rules[7] = conical_product_rule(4)
    return rules


def conical_product_rule(n: int) -> Rule:
    """Stroud's conical product rule with ``n`` Gauss-Jacobi points per direction: ``n^3`` points,
    positive weights, exact to degree ``2n - 1`` on the reference tetrahedron.

    The collapsed map ``x = u, y = v (1 - u), z = w (1 - u)(1 - v)`` takes the unit cube onto the
    tetrahedron with Jacobian ``(1 - u)^2 (1 - v)``; the Jacobian's factors become the weights of
    Gauss-Jacobi rules in u and v (A. H. Stroud, Approximate Calculation of Multiple Integrals,
    1971; common practice). Used where no smaller rule of the degree is stored (the mass of curved
    10-node cells needs degree 7).
    """
    from scipy.special import roots_jacobi

    def on_unit(alpha: int) -> tuple[np.ndarray, np.ndarray]:
        # weight (1 - t)^alpha on [-1, 1] mapped to (1 - s)^alpha on [0, 1]
        t, w = roots_jacobi(n, alpha, 0)
        return 0.5 * (t + 1.0), w / 2.0 ** (alpha + 1)

    (u, wu), (v, wv), (s, ws) = on_unit(2), on_unit(1), on_unit(0)
    U, V, S = np.meshgrid(u, v, s, indexing="ij")
    W = (wu[:, None, None] * wv[None, :, None] * ws[None, None, :]).ravel()
    pts = np.stack([U.ravel(), (V * (1 - U)).ravel(), (S * (1 - U) * (1 - V)).ravel()], axis=1)
    return Rule(pts, W, 2 * n - 1)


def _tri_rules() -> dict[int, Rule]:
    rules = {}
    rules[1] = Rule(np.array([[1 / 3, 1 / 3]]), np.array([0.5]), 1)
    rules[2] = Rule(np.array([[1 / 6, 1 / 6], [2 / 3, 1 / 6], [1 / 6, 2 / 3]]), np.full(3, 1 / 6), 2)
    # Dunavant (1985) 6-point rule, degree 4.
    a1, w1 = 0.445948490915965, 0.223381589678011
    a2, w2 = 0.091576213509771, 0.109951743655322
    pts = np.array([[a1, a1], [1 - 2 * a1, a1], [a1, 1 - 2 * a1],
                    [a2, a2], [1 - 2 * a2, a2], [a2, 1 - 2 * a2]])
    rules[4] = Rule(pts, 0.5 * np.array([w1] * 3 + [w2] * 3), 4)
    return rules


TET_RULES = _tet_rules()
TRI_RULES = _tri_rules()


def tet_rule(degree: int) -> Rule:
    """The smallest stored tetrahedron rule exact to at least ``degree``."""
    for d in sorted(TET_RULES):
        if d >= degree:
            return TET_RULES[d]
    raise ValueError(f"no tetrahedron rule of degree {degree}; highest is {max(TET_RULES)}")


def tri_rule(degree: int) -> Rule:
    """The smallest stored triangle rule exact to at least ``degree``."""
    for d in sorted(TRI_RULES):
        if d >= degree:
            return TRI_RULES[d]
    raise ValueError(f"no triangle rule of degree {degree}; highest is {max(TRI_RULES)}")
