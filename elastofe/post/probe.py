"""Locating points in the mesh and interpolating nodal fields there with the shape functions."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from ..fem.elements import element_for


@dataclass(frozen=True)
class Location:
    """Where points lie: ``cell (p,)`` index (-1 outside), reference coordinates ``xi (p, 3)``,
    and ``outside (p,)`` an estimate of how far outside the part each point is [length] (0 inside)."""

    cell: np.ndarray
    xi: np.ndarray
    outside: np.ndarray


def _bary(X4: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Barycentric coordinates ``(..., 4)`` of points ``p (..., 3)`` in tetrahedra ``X4 (..., 4, 3)``."""
    T = np.stack([X4[..., 1, :] - X4[..., 0, :], X4[..., 2, :] - X4[..., 0, :], X4[..., 3, :] - X4[..., 0, :]], axis=-1)
    lam = np.linalg.solve(T, (p - X4[..., 0, :])[..., None])[..., 0]
    return np.concatenate([1 - lam.sum(axis=-1, keepdims=True), lam], axis=-1)


def locate(points: np.ndarray, cells: np.ndarray, targets: np.ndarray, *, candidates: int = 24,
           rtol: float = 1e-6) -> Location:
    """Find the cell containing each target point ``targets (p, 3)``.

    Candidate cells come from a k-d tree of cell centroids; the best by barycentric coordinate is
    kept, then for 10-node cells the reference point is refined by Newton iterations on the
    isoparametric map (curved cells).
    """
    given = np.atleast_2d(np.asarray(targets, dtype=float))
    el = element_for(cells.shape[1])
    X4 = points[cells[:, :4]]
    cen = X4.mean(axis=1)
    # A target far beyond the mesh (1e308, say) is located from a point on a box around it, so
    # that no distance overflows; it is outside by at least how far it lies beyond that box.
    lo, hi = points.min(axis=0), points.max(axis=0)
    pad = float(np.max(hi - lo)) + 1e-300
    targets = np.clip(np.where(np.isfinite(given), given, lo), lo - pad, hi + pad)
    with np.errstate(all="ignore"):
        beyond = np.where(np.isfinite(given), np.abs(given - targets), np.inf).max(axis=1)
    tree = cKDTree(cen)
    k = min(candidates, cells.shape[0])
    _, cand = tree.query(targets, k=k)
    cand = cand.reshape(targets.shape[0], k)
    lam = _bary(X4[cand], targets[:, None, :])  # (p, k, 4)
    score = lam.min(axis=2)
    npt = targets.shape[0]
    if el.nodes == 10:
        # Curved cells: refine the best few candidates by Newton iterations on the isoparametric
        # map and keep the one whose reference point lies most inside.
        top = np.argsort(-score, axis=1)[:, :min(4, k)]  # (p, t)
        cc = np.take_along_axis(cand, top, axis=1)
        xi = np.take_along_axis(lam, top[:, :, None], axis=1)[:, :, 1:]  # (p, t, 3)
        Xe = points[cells[cc]]  # (p, t, 10, 3)
        tg = np.broadcast_to(targets[:, None, :], xi.shape)
        for _ in range(10):
            flat = xi.reshape(-1, 3)
            N = el.shape(flat).reshape(xi.shape[:2] + (10,))
            dN = el.grad(flat).reshape(xi.shape[:2] + (10, 3))
            x = np.einsum("ptk,ptkd->ptd", N, Xe)
            J = np.einsum("ptkd,ptkl->ptdl", Xe, dN)
            dxi = np.linalg.solve(J, (tg - x)[..., None])[..., 0]
            xi = np.clip(xi + dxi, -1.0, 2.0)
            if np.abs(dxi).max() < 1e-13:
                break
        Lc = np.concatenate([1 - xi.sum(axis=2, keepdims=True), xi], axis=2).min(axis=2)
        best = np.argmax(Lc, axis=1)
        cell = cc[np.arange(npt), best]
        xi = xi[np.arange(npt), best]
    else:
        best = np.argmax(score, axis=1)
        cell = cand[np.arange(npt), best]
        xi = lam[np.arange(npt), best, 1:]
    L = np.concatenate([1 - xi.sum(axis=1, keepdims=True), xi], axis=1)
    h = np.cbrt(np.abs(np.linalg.det(X4[cell, 1:] - X4[cell, :1])))
    outside = np.maximum(-L.min(axis=1), 0.0) * h
    inside = L.min(axis=1) >= -rtol
    outside[inside] = 0.0
    outside = np.maximum(outside, beyond)
    return Location(cell, xi, outside)


def interpolate(cells: np.ndarray, loc: Location, field: np.ndarray) -> np.ndarray:
    """Nodal ``field (n, ...)`` interpolated at the located points, ``(p, ...)``.

    Reference coordinates slightly outside the cell are clamped to it.
    """
    el = element_for(cells.shape[1])
    L = np.concatenate([1 - loc.xi.sum(axis=1, keepdims=True), loc.xi], axis=1)
    L = np.clip(L, 0.0, None)
    L /= L.sum(axis=1, keepdims=True)
    N = el.shape(L[:, 1:])  # (p, k)
    vals = field[cells[loc.cell]]  # (p, k, ...)
    return np.einsum("pk,pk...->p...", N, vals)
