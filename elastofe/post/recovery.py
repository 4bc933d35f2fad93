"""Stress recovery: element stresses to nodes, von Mises and principal stresses.

Stress arrays are ``(..., 6)`` in the order xx, yy, zz, xy, yz, xz [stress].
"""
from __future__ import annotations

import numpy as np

from ..fem.assembly import stress_at
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


def nodal_stress(points: np.ndarray, cells: np.ndarray, u: np.ndarray, lam: float, mu: float):
    """Stress at the nodes, averaged over the elements that share each node.

    Each element's stress field is evaluated at its own nodes, then averaged node by node.

    Returns
    -------
    averaged : (n, 6)
    element_nodal : (m, k, 6) the unaveraged values at each element's nodes.
    """
    el = element_for(cells.shape[1])
    s_el = stress_at(points, cells, u, el.ref_nodes, lam, mu)  # (m, k, 6)
    n = points.shape[0]
    flat = cells.ravel()
    count = np.bincount(flat, minlength=n).astype(float)
    avg = np.empty((n, 6))
    for c in range(6):
        avg[:, c] = np.bincount(flat, weights=s_el[..., c].ravel(), minlength=n)
    avg /= np.maximum(count, 1)[:, None]
    return avg, s_el


def element_quality(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Shape quality of each element's corner tetrahedron in (0, 1], 1 for a regular tetrahedron.

    q = 12 (3V)^(2/3) / Σ l_i² over the six edges (a mean-ratio measure, common practice).
    """
    X = points[cells[:, :4]]
    V = np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0]) / 6.0
    e = [(0, 1), (1, 2), (2, 0), (0, 3), (1, 3), (2, 3)]
    l2 = sum(((X[:, a] - X[:, b]) ** 2).sum(axis=1) for a, b in e)
    return 12.0 * np.cbrt(3.0 * np.abs(V)) ** 2 / l2
