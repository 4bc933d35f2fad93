"""Surface integrals on boundary faces (3- or 6-node triangles): areas, tractions, pressure."""
from __future__ import annotations

import numpy as np

from .elements import Tri3, Tri6
from .quadrature import tri_rule


def face_element(nodes_per_face: int):
    return {3: Tri3, 6: Tri6}[nodes_per_face]


def _face_geometry(points: np.ndarray, faces: np.ndarray):
    el = face_element(faces.shape[1])
    rule = tri_rule(4 if el is Tri6 else 2)
    X = points[faces]  # (f, k, 3)
    dN = el.grad(rule.points)  # (q, k, 2)
    T = np.einsum("fkd,qkl->fqld", X, dN)  # (f, q, 2, 3)
    nvec = np.cross(T[:, :, 0], T[:, :, 1])  # (f, q, 3), |n| = dA / d(r,s), outward
    return el, rule, nvec


def face_areas(points: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Area of each face ``(f,)`` [length^2]."""
    if faces.shape[0] == 0:
        return np.zeros(0)
    _, rule, nvec = _face_geometry(points, faces)
    return np.linalg.norm(nvec, axis=2) @ rule.weights


def face_normals(points: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Unit outward normal at each face's centre ``(f, 3)``."""
    el = face_element(faces.shape[1])
    X = points[faces]
    dN = el.grad(np.array([[1 / 3, 1 / 3]]))[0]
    T = np.einsum("fkd,kl->fld", X, dN)
    n = np.cross(T[:, 0], T[:, 1])
    return n / np.linalg.norm(n, axis=1, keepdims=True)


def traction_load(points: np.ndarray, faces: np.ndarray, traction: np.ndarray) -> np.ndarray:
    """Consistent nodal forces ``(3n,)`` of a uniform traction ``(3,)`` [stress] on ``faces``."""
    f = np.zeros((points.shape[0], 3))
    if faces.shape[0] == 0:
        return f.ravel()
    el, rule, nvec = _face_geometry(points, faces)
    N = el.shape(rule.points)  # (q, k)
    wN = np.einsum("fq,qk->fk", np.linalg.norm(nvec, axis=2) * rule.weights, N)
    for i in range(3):
        f[:, i] = np.bincount(faces.ravel(), weights=(wN * traction[i]).ravel(), minlength=points.shape[0])
    return f.ravel()


def pressure_load(points: np.ndarray, faces: np.ndarray, pressure: float) -> np.ndarray:
    """Consistent nodal forces ``(3n,)`` of a normal pressure [stress]; positive pushes inward."""
    f = np.zeros((points.shape[0], 3))
    if faces.shape[0] == 0:
        return f.ravel()
    el, rule, nvec = _face_geometry(points, faces)
    N = el.shape(rule.points)
    # ∫ N_a (-p n̂) dA = -p Σ_q w N_a(q) n(q), with n unnormalised (|n| carries dA).
    contrib = -pressure * np.einsum("q,qk,fqd->fkd", rule.weights, N, nvec)
    for i in range(3):
        f[:, i] = np.bincount(faces.ravel(), weights=contrib[..., i].ravel(), minlength=points.shape[0])
    return f.ravel()
