"""Field loads and field errors at the element level: a body-force density that varies in space,
node-wise prescribed displacements, and L2 / energy-norm errors against a known displacement field.

These serve the verification suite (manufactured solutions, patch tests) and any study that
needs a load or a norm the case file does not express. Arrays: ``points (n, 3)`` [length],
``cells (m, 4|10)`` VTK order, DOF ``3*node + component``.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from .assembly import BLOCK, gradients, hooke, strain_displacement
from .elements import element_for
from .quadrature import tet_rule

#: A vector field of position: ``f(x (q, 3)) -> (q, 3)``.
VectorField = Callable[[np.ndarray], np.ndarray]
#: A tensor field of position: ``g(x (q, 3)) -> (q, 3, 3)`` with ``g[:, i, k] = d u_i / d x_k``.
TensorField = Callable[[np.ndarray], np.ndarray]


def _quadrature(points, cells, degree):
    el = element_for(cells.shape[1])
    rule = tet_rule(degree)
    N = el.shape(rule.points)  # (q, k)
    return el, rule, N


def body_force_field(points: np.ndarray, cells: np.ndarray, b: VectorField, degree: int = 5) -> np.ndarray:
    """Consistent nodal forces ``(3n,)`` of a body-force density ``b(x)`` [force/volume].

    Integrated with the tetrahedron rule exact to ``degree`` (default 5, the highest stored; for a
    smooth ``b`` the quadrature error then falls faster than the discretisation error of TET10).
    """
    el, rule, N = _quadrature(points, cells, degree)
    n = points.shape[0]
    f = np.zeros((n, 3))
    for s in range(0, cells.shape[0], BLOCK):
        c = cells[s:s + BLOCK]
        X = points[c]  # (e, k, 3)
        _, det = gradients(X, el, rule.points)  # (e, q)
        xq = np.einsum("qk,ekd->eqd", N, X)  # physical quadrature points
        bq = np.asarray(b(xq.reshape(-1, 3)), dtype=float).reshape(xq.shape)
        fe = np.einsum("eq,qk,eqd->ekd", det * rule.weights, N, bq)  # ∫ N_a b dV
        for i in range(3):
            f[:, i] += np.bincount(c.ravel(), weights=fe[..., i].ravel(), minlength=n)
    return f.ravel()


def error_norms(points: np.ndarray, cells: np.ndarray, u: np.ndarray, exact: VectorField,
                exact_grad: TensorField, lam: float, mu: float, degree: int = 5) -> tuple[float, float]:
    """L2 and energy-norm errors of a finite-element displacement against an exact field.

    Parameters
    ----------
    u : (n, 3) nodal displacements [length].
    exact, exact_grad : the exact displacement and its gradient (see :data:`VectorField`).
    lam, mu : Lamé parameters [stress].

    Returns
    -------
    l2 : float
        sqrt(∫ |u_h − u|² dV) [length · length^(3/2)].
    energy : float
        sqrt(∫ (ε_h − ε) : C : (ε_h − ε) dV), twice the error's strain energy, square-rooted.
    """
    el, rule, N = _quadrature(points, cells, degree)
    l2 = en = 0.0
    for s in range(0, cells.shape[0], BLOCK):
        c = cells[s:s + BLOCK]
        X = points[c]
        G, det = gradients(X, el, rule.points)
        w = det * rule.weights  # (e, q)
        xq = np.einsum("qk,ekd->eqd", N, X).reshape(-1, 3)
        uh = np.einsum("qk,ekd->eqd", N, u[c])
        du = uh - np.asarray(exact(xq)).reshape(uh.shape)
        l2 += float(np.einsum("eq,eqd,eqd->", w, du, du))
        eh = strain_displacement(G, u[c])  # (e, q, 6), engineering shear
        H = np.asarray(exact_grad(xq)).reshape(uh.shape + (3,))
        ex = np.stack([H[..., 0, 0], H[..., 1, 1], H[..., 2, 2], H[..., 0, 1] + H[..., 1, 0],
                       H[..., 1, 2] + H[..., 2, 1], H[..., 0, 2] + H[..., 2, 0]], axis=-1)
        de = eh - ex
        en += float(np.einsum("eq,eqv,eqv->", w, hooke(de, lam, mu), de))
    return float(np.sqrt(l2)), float(np.sqrt(en))
