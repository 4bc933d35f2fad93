"""Held degrees of freedom by elimination: the reduced system and the full solution from it.

With held DOFs ``d`` (values ``g``) and free DOFs ``f``, ``K u = F`` becomes
``K_ff u_f = F_f − K_fd g``; the full ``u`` has ``u_d = g``. Held components in rotated nodal
frames are handled by the caller's rotation ``T`` (sparse, ``u_local = T u``): the system is
first written in the local components, ``T K Tᵀ`` and ``T F``, and the solution mapped back with
``Tᵀ``. One home for this: the pipeline, the modal and buckling solves and the verification cases
all call it.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np
import scipy.sparse as sp

__all__ = ["Reduced", "reduce_system", "expand_solution"]


@dataclass(frozen=True)
class Reduced:
    """The system on the free DOFs.

    Attributes
    ----------
    K : (f, f) CSR, the stiffness on the free (local) DOFs.
    rhs : (f, k) right-hand sides with the held values moved over.
    free : (N,) bool, which DOFs (in local components) are free.
    dofs, values : (c,) held DOFs and their values (local components).
    T : (N, N) sparse rotation to local components, or None (global components throughout).
    """

    K: sp.csr_matrix
    rhs: np.ndarray
    free: np.ndarray
    dofs: np.ndarray
    values: np.ndarray
    T: Optional[sp.spmatrix]


def reduce_system(K: sp.spmatrix, F: np.ndarray, dofs: np.ndarray, values: np.ndarray,
                  T: Optional[sp.spmatrix] = None) -> Reduced:
    """Eliminate held DOFs from ``K u = F``.

    Parameters
    ----------
    K : (N, N) sparse, symmetric.
    F : (N,) or (N, k) right-hand sides.
    dofs : (c,) unique held DOF numbers (in the local components when ``T`` is given).
    values : (c,) prescribed values of the held DOFs.
    T : (N, N) sparse rotation (``u_local = T u``), or None.
    """
    F2 = np.asarray(F, dtype=float).reshape(K.shape[0], -1)
    Kl = (T @ K @ T.T).tocsr() if T is not None else sp.csr_matrix(K)
    Fl = (T @ F2) if T is not None else F2
    ndof = K.shape[0]
    free = np.ones(ndof, dtype=bool)
    free[dofs] = False
    Kfree_rows = Kl[free]
    rhs = Fl[free]
    values = np.asarray(values, dtype=float)
    if np.any(values):
        rhs = rhs - (Kfree_rows[:, dofs] @ values)[:, None]
    return Reduced(K=Kfree_rows[:, free].tocsr(), rhs=np.ascontiguousarray(rhs), free=free,
                   dofs=np.asarray(dofs), values=values, T=T)


def expand_solution(red: Reduced, u_free: np.ndarray) -> np.ndarray:
    """The full solution ``(N, k)`` in global components from the free part ``(f,)`` or ``(f, k)``."""
    uf = np.asarray(u_free).reshape(int(red.free.sum()), -1)
    U = np.zeros((red.free.size, uf.shape[1]))
    U[red.dofs] = red.values[:, None]
    U[red.free] = uf
    return (red.T.T @ U) if red.T is not None else U
