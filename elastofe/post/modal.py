"""Modal results: effective masses along excitation directions, and naming of rigid-body modes.

Arrays on the free DOFs of a model (supports eliminated): ``M (n, n)`` the consistent mass [mass],
``vectors (n, p)`` mass-normalised mode shapes (``φᵀ M φ = 1``), ``directions (n, d)`` the
displacement of a unit rigid motion along each excitation direction (the caller builds them, e.g.
the translation columns of :func:`elastofe.fem.nullspace.rigid_modes` on the free DOFs).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

#: Names of the canonical rigid motions, in the column order of :func:`elastofe.fem.nullspace.rigid_modes`
#: (translations, then rotations about axes through the centroid), as the restraint check says them.
RIGID_MOTIONS = ("translation along x", "translation along y", "translation along z",
                 "rotation about x", "rotation about y", "rotation about z")

#: A mode is a rigid-body mode when at least this share of it (by mass) lies in the span of the
#: rigid motions: elastic modes of a free part are mass-orthogonal to them (share ~1e-12), rigid
#: modes from an eigensolver carry round-off only.
RIGID_SHARE = 1.0 - 1e-6


@dataclass(frozen=True)
class ModalMass:
    """Effective modal masses of ``p`` modes along ``d`` directions.

    Attributes
    ----------
    participation : (p, d) participation factors ``Γ = φᵀ M r`` [mass^½].
    effective : (p, d) effective masses ``Γ²`` [mass].
    total : (d,) the mass that can move along each direction, ``rᵀ M r`` [mass] (the free DOFs'
        mass: the mass at held nodes does not take part).
    fraction : (p, d) ``Γ² / (rᵀ M r)``; over all modes each column sums to 1.
    cumulative : (p, d) running sums of ``fraction`` in mode order.
    """

    participation: np.ndarray
    effective: np.ndarray
    total: np.ndarray
    fraction: np.ndarray
    cumulative: np.ndarray


def modal_mass(M: sp.spmatrix, vectors: np.ndarray, directions: np.ndarray) -> ModalMass:
    """Effective modal masses and their fractions (see :class:`ModalMass`).

    Parameters
    ----------
    M : (n, n) mass matrix on the free DOFs [mass].
    vectors : (n, p) mass-normalised mode shapes.
    directions : (n, d) unit rigid motion per excitation direction on the same DOFs.

    Raises
    ------
    ValueError
        Mismatched shapes, or a direction that moves no mass.
    """
    V = np.asarray(vectors, dtype=float)
    R = np.asarray(directions, dtype=float)
    if V.ndim != 2 or R.ndim != 2 or V.shape[0] != M.shape[0] or R.shape[0] != M.shape[0]:
        raise ValueError(f"vectors {V.shape} and directions {R.shape} must have {M.shape[0]} rows")
    MR = M @ R
    total = np.einsum("ij,ij->j", R, MR)
    if np.any(total <= 0):
        raise ValueError("a direction moves no mass (all of its DOFs are held?)")
    gamma = V.T @ MR
    eff = gamma**2
    frac = eff / total
    return ModalMass(gamma, eff, total, frac, np.cumsum(frac, axis=0))


def rigid_share(M: sp.spmatrix, vectors: np.ndarray, rigid: np.ndarray) -> np.ndarray:
    """Share of each mode's mass-norm in the span of ``rigid (n, r)``, ``(p,)`` in [0, 1]."""
    V = np.asarray(vectors, dtype=float)
    R = np.asarray(rigid, dtype=float)
    G = R.T @ (M @ R)
    C = R.T @ (M @ V)  # (r, p)
    coef = np.linalg.lstsq(G, C, rcond=1e-12)[0]
    inside = np.einsum("rp,rp->p", coef, C)
    norm = np.einsum("ij,ij->j", V, M @ V)
    return np.clip(inside / np.where(norm > 0, norm, 1.0), 0.0, 1.0)


def name_rigid_modes(M: sp.spmatrix, vectors: np.ndarray, rigid: np.ndarray,
                     names: tuple[str, ...] = RIGID_MOTIONS) -> tuple[np.ndarray, list[str | None]]:
    """Find the rigid-body modes among ``vectors`` and give each one a name.

    Rigid modes share one eigenvalue (zero), so any mass-orthonormal basis of their span is as
    good as the eigensolver's arbitrary mix; this picks the basis of the named motions: each column
    of ``rigid`` that lies in that span (a free translation, a free rotation about an axis through
    the centroid), in order, mass-orthogonalised against the ones before it. Directions of the span
    that no single motion describes (a rotation about an axis off the centroid) keep the name
    "rigid-body motion"; :func:`elastofe.bc.free_rigid_motions` describes them in words.

    Parameters
    ----------
    M : (n, n) mass on the free DOFs.
    vectors : (n, p) mass-normalised modes.
    rigid : (n, r) rigid motions on the same DOFs, in the order of ``names`` (e.g.
        ``fem.nullspace.rigid_modes(points)[free]``).
    names : (r,) their names.

    Returns
    -------
    vectors : (n, p) the modes with the rigid ones replaced by the named basis (mass-normalised).
    labels : list of p names, ``None`` for an elastic mode.
    """
    V = np.array(vectors, dtype=float, copy=True)
    R = np.asarray(rigid, dtype=float)
    share = rigid_share(M, V, R)
    idx = np.flatnonzero(share >= RIGID_SHARE)
    labels: list[str | None] = [None] * V.shape[1]
    if idx.size == 0:
        return V, labels
    Z = V[:, idx]  # mass-orthonormal basis of the rigid span found
    basis: list[np.ndarray] = []
    chosen: list[str] = []
    for k in range(R.shape[1]):
        r = R[:, k]
        nr = float(r @ (M @ r))
        if nr <= 0:
            continue
        in_span = Z @ (Z.T @ (M @ r))
        if float((r - in_span) @ (M @ (r - in_span))) > 1e-8 * nr:
            continue  # this motion is held (at least in part)
        b = in_span
        for q in basis:
            b = b - q * float(q @ (M @ b))
        nb = float(b @ (M @ b))
        if nb <= 1e-8 * nr:
            continue
        basis.append(b / np.sqrt(nb))
        chosen.append(names[k] if k < len(names) else "rigid-body motion")
        if len(basis) == idx.size:
            break
    # Whatever the named motions leave of the span: its mass-orthonormal complement.
    rest = Z
    for q in basis:
        rest = rest - np.outer(q, q @ (M @ rest))
    while len(basis) < idx.size:
        norms = np.einsum("ij,ij->j", rest, M @ rest)
        j = int(np.argmax(norms))
        b = rest[:, j] / np.sqrt(norms[j])
        basis.append(b)
        chosen.append("rigid-body motion")
        rest = rest - np.outer(b, b @ (M @ rest))
    V[:, idx] = np.column_stack(basis)
    for i, name in zip(idx, chosen):
        labels[i] = name
    return V, labels
