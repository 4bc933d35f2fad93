"""Stress recovery: element stresses to nodes, von Mises and principal stresses.

Stress arrays are ``(..., 6)`` in the order xx, yy, zz, xy, yz, xz [stress].
"""
from __future__ import annotations

import numpy as np

from ..fem.assembly import BLOCK, gradients, hooke, strain_displacement
from ..fem.elements import element_for

COMPONENTS = ("xx", "yy", "zz", "xy", "yz", "xz")


def von_mises(s: np.ndarray) -> np.ndarray:
    """von Mises equivalent stress ``(...,)`` of stresses ``(..., 6)``."""
    return np.sqrt(0.5 * ((s[..., 0] - s[..., 1]) ** 2 + (s[..., 1] - s[..., 2]) ** 2 + (s[..., 2] - s[..., 0]) ** 2)
                   + 3.0 * (s[..., 3] ** 2 + s[..., 4] ** 2 + s[..., 5] ** 2))


def tensor(s: np.ndarray) -> np.ndarray:
    """Symmetric tensors ``(..., 3, 3)`` from Voigt ``(..., 6)``."""
    t = np.empty(s.shape[:-1] + (3, 3))
    t[..., 0, 0], t[..., 1, 1], t[..., 2, 2] = s[..., 0], s[..., 1], s[..., 2]
    t[..., 0, 1] = t[..., 1, 0] = s[..., 3]
    t[..., 1, 2] = t[..., 2, 1] = s[..., 4]
    t[..., 0, 2] = t[..., 2, 0] = s[..., 5]
    return t


def principal(s: np.ndarray) -> np.ndarray:
    """Principal stresses ``(..., 3)``, largest first (σ1 ≥ σ2 ≥ σ3)."""
    return np.linalg.eigvalsh(tensor(s))[..., ::-1]


def nodal_stress_sums(points: np.ndarray, cells: np.ndarray, U: np.ndarray, lam: float, mu: float):
    """Sums over the elements at each node of their stresses at that node, for several fields.

    The parts of nodal averaging that add up across pieces of a mesh: a distributed run sums
    each rank's cells, adds the sums of shared nodes across ranks, then divides.

    Parameters
    ----------
    points : (n, 3) [length]; cells : (m, 4 | 10)
    U : (k, n, 3) displacement fields [length]
    lam, mu : Lamé parameters [stress]

    Returns
    -------
    sums : (k, n, 6) [stress], the element values at each node added up.
    count : (n,) number of elements at each node (as float).
    element_nodal : (m, nodes per cell, 6) unaveraged values at each element's nodes, first field.
    """
    el = element_for(cells.shape[1])
    k, n = U.shape[0], points.shape[0]
    m, npc = cells.shape
    s_first = np.empty((m, npc, 6))
    acc = np.zeros((k, n, 6))
    count = np.bincount(cells.ravel(), minlength=n).astype(float)
    for b in range(0, m, BLOCK):
        c = cells[b:b + BLOCK]
        G, _ = gradients(points[c], el, el.ref_nodes)
        flat = c.ravel()
        for j in range(k):
            sj = hooke(strain_displacement(G, U[j][c]), lam, mu)  # (e, npc, 6)
            if j == 0:
                s_first[b:b + BLOCK] = sj
            for comp in range(6):
                acc[j, :, comp] += np.bincount(flat, weights=sj[..., comp].ravel(), minlength=n)
    return acc, count, s_first


def nodal_stresses(points: np.ndarray, cells: np.ndarray, U: np.ndarray, lam: float, mu: float):
    """Nodally averaged stresses of several displacement fields at once.

    Each element's stress field is evaluated at its own nodes, then averaged node by node; the
    shape-function gradients of each block of elements are computed once for all fields.

    Parameters
    ----------
    points : (n, 3) [length]; cells : (m, 4 | 10)
    U : (k, n, 3) displacement fields [length]
    lam, mu : Lamé parameters [stress]

    Returns
    -------
    averaged : (k, n, 6) [stress]
    element_nodal : (m, nodes per cell, 6) unaveraged values at each element's nodes, first field.
    """
    acc, count, s_first = nodal_stress_sums(points, cells, U, lam, mu)
    acc /= np.maximum(count, 1)[None, :, None]
    return acc, s_first


def nodal_stress(points: np.ndarray, cells: np.ndarray, u: np.ndarray, lam: float, mu: float):
    """Stress at the nodes of one displacement field ``u (n, 3)``, averaged over the elements that
    share each node: ``(averaged (n, 6), element_nodal (m, nodes per cell, 6))`` [stress]."""
    avg, s_el = nodal_stresses(points, cells, np.asarray(u)[None], lam, mu)
    return avg[0], s_el


def element_quality(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Shape quality of each element's corner tetrahedron in (0, 1], 1 for a regular tetrahedron.

    q = 12 (3V)^(2/3) / Σ l_i² over the six edges (a mean-ratio measure, common practice).
    """
    X = points[cells[:, :4]]
    V = np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0]) / 6.0
    e = [(0, 1), (1, 2), (2, 0), (0, 3), (1, 3), (2, 3)]
    l2 = sum(((X[:, a] - X[:, b]) ** 2).sum(axis=1) for a, b in e)
    return 12.0 * np.cbrt(3.0 * np.abs(V)) ** 2 / l2
