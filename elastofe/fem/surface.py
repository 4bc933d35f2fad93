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


def quadrature_points(points: np.ndarray, faces: np.ndarray):
    """Quadrature data of the faces: points ``(f, q, 3)``, unit outward normals ``(f, q, 3)``,
    area weights ``(f, q)`` [length^2] and the shape functions ``(q, k)``."""
    el, rule, nvec = _face_geometry(points, faces)
    N = el.shape(rule.points)
    X = np.einsum("qk,fkd->fqd", N, points[faces])
    na = np.linalg.norm(nvec, axis=2)
    return X, nvec / na[..., None], na * rule.weights, N


def field_load(points: np.ndarray, faces: np.ndarray, traction) -> np.ndarray:
    """Consistent nodal forces ``(3n,)`` of a traction that varies over the faces.

    ``traction(x (f, q, 3), n (f, q, 3)) -> (f, q, 3)`` [stress] gives the traction at the
    quadrature points ``x`` with unit outward normals ``n``.
    """
    f = np.zeros((points.shape[0], 3))
    if faces.shape[0] == 0:
        return f.ravel()
    X, nhat, w, N = quadrature_points(points, faces)
    t = np.asarray(traction(X, nhat), dtype=float)
    contrib = np.einsum("fq,qk,fqd->fkd", w, N, t)
    for i in range(3):
        f[:, i] = np.bincount(faces.ravel(), weights=contrib[..., i].ravel(), minlength=points.shape[0])
    return f.ravel()


def node_areas(points: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Consistent nodal area ``∫ N_a dA`` of every node ``(n,)`` [length^2] (zero off the faces;
    zero too at the corners of 6-node faces, whose corner shape functions integrate to zero)."""
    return traction_load(points, faces, np.array([1.0, 0.0, 0.0])).reshape(-1, 3)[:, 0]


def foundation_stiffness(points: np.ndarray, faces: np.ndarray, k_normal: float, k_tangential: float):
    """Consistent stiffness ``(3n, 3n)`` CSR of an elastic foundation under ``faces``.

    ``K[ai, bj] = ∫ N_a N_b (k_n n_i n_j + k_t (δ_ij − n_i n_j)) dA`` with the local unit normal n,
    so the foundation pushes back with ``k_n`` per unit area and unit normal displacement and
    ``k_t`` per unit area and unit tangential displacement.
    """
    import scipy.sparse as sp

    n = points.shape[0]
    if faces.shape[0] == 0:
        return sp.csr_matrix((3 * n, 3 * n))
    _, nhat, w, N = quadrature_points(points, faces)
    nn = np.einsum("fqi,fqj->fqij", nhat, nhat)
    C = k_normal * nn + k_tangential * (np.eye(3) - nn)  # (f, q, 3, 3)
    Ke = np.einsum("fq,qa,qb,fqij->faibj", w, N, N, C)
    k = faces.shape[1]
    dofs = (3 * faces[:, :, None] + np.arange(3)).reshape(faces.shape[0], 3 * k)
    Ke = Ke.reshape(faces.shape[0], 3 * k, 3 * k)
    rows = np.broadcast_to(dofs[:, :, None], Ke.shape).ravel()
    cols = np.broadcast_to(dofs[:, None, :], Ke.shape).ravel()
    K = sp.coo_matrix((Ke.ravel(), (rows, cols)), shape=(3 * n, 3 * n)).tocsr()
    K.sum_duplicates()
    return K
