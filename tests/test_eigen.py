"""Eigensolvers of solve.eigen against LAPACK's dense generalized symmetric solver (scipy.linalg.eigh,
the reference), on a small elastic block; their failure modes raise SolverError."""
from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg as sla

from elastofe.errors import SolverError
from elastofe.fem.assembly import StiffnessPattern, assemble_stiffness
from elastofe.fem.geometric import assemble_geometric
from elastofe.fem.mass import assemble_mass
from elastofe.fem.nullspace import amg_options, rigid_modes
from elastofe.solve import buckling_factors, factorize, natural_modes
from elastofe.verify.meshes import structured_block

E, NU, RHO = 210e3, 0.3, 7.85e-9  # mm-N-s with t/mm³
LAM, MU = E * NU / ((1 + NU) * (1 - 2 * NU)), E / (2 * (1 + NU))


@pytest.fixture(scope="module")
def block():
    """A 40 x 10 x 10 bar of 4-node cells (900 free DOF, above the dense limit), root held."""
    p, c = structured_block(15, 4, 3, 1)
    p = p * [40.0, 10.0, 10.0]
    pat = StiffnessPattern(c, p.shape[0])
    K = assemble_stiffness(p, c, LAM, MU, pattern=pat)
    M = assemble_mass(p, c, RHO, pattern=pat)
    free = ~np.repeat(p[:, 0] < 1e-9, 3)
    s = np.zeros((c.shape[0], 6))
    s[:, 0] = -1.0 + 0.5 * p[c].mean(axis=1)[:, 1] / 10  # compression varying across the section
    Kg = assemble_geometric(p, c, s, pattern=pat)

    def sub(A):
        return A[free][:, free].tocsr()

    Kf, Mf, Kgf = sub(K), sub(M), sub(Kg)
    dense = sla.eigh(Kf.toarray(), Mf.toarray())
    return {"p": p, "c": c, "K": K, "M": M, "free": free, "Kf": Kf, "Mf": Mf, "Kgf": Kgf, "dense": dense}


@pytest.mark.parametrize("method,backend", [("shift-invert", "auto"), ("shift-invert", "scipy")])
def test_shift_invert_matches_dense(block, method, backend):
    w_ref, V_ref = block["dense"]
    assert block["Kf"].shape[0] > 600  # above DENSE_MAX: the iterative paths are the ones tested
    res = natural_modes(block["Kf"], block["Mf"], 6, method=method, backend=backend, tol=1e-8,
                        near_nullspace=rigid_modes(block["p"])[block["free"]])
    assert res.method == method and res.info["shift"] == 0.0
    assert res.values == pytest.approx(w_ref[:6], rel=1e-10)
    # mass-orthonormal, and each vector lies in the reference's eigenspace of its value
    V = res.vectors
    assert V.T @ (block["Mf"] @ V) == pytest.approx(np.eye(6), abs=1e-10)
    for j in range(6):
        near = np.abs(w_ref - res.values[j]) <= 1e-6 * res.values[j]
        W = V_ref[:, near]
        assert np.linalg.norm(V[:, j] - W @ (W.T @ (block["Mf"] @ V[:, j]))) < 1e-6 * np.linalg.norm(V[:, j])


def test_factor_reused(block):
    w_ref = block["dense"][0]
    fac = factorize(block["Kf"], "auto")
    res = natural_modes(block["Kf"], block["Mf"], 4, factor=fac, shift=0.0)
    assert res.values == pytest.approx(w_ref[:4], rel=1e-10)
    assert res.info["backend"] == fac.backend


def test_lobpcg_with_multigrid_matches_dense(block):
    w_ref = block["dense"][0]
    opts = amg_options(block["p"], block["c"], block["free"])
    res = natural_modes(block["Kf"], block["Mf"], 5, method="lobpcg", backend="amg", tol=1e-6, **opts)
    assert res.method == "lobpcg"
    # residual 1e-6 -> eigenvalue error of its square order
    assert res.values == pytest.approx(w_ref[:5], rel=1e-8)


def test_lobpcg_iteration_limit_raises(block):
    opts = amg_options(block["p"], block["c"], block["free"])
    with pytest.raises(SolverError, match="did not converge"):
        natural_modes(block["Kf"], block["Mf"], 5, method="lobpcg", backend="amg", tol=1e-9, maxiter=2, **opts)


@pytest.mark.parametrize("method", ["shift-invert", "lobpcg"])
def test_free_free_rigid_modes_at_zero(block, method):
    K, M, p = block["K"], block["M"], block["p"]
    ref = sla.eigh(K.toarray(), M.toarray(), subset_by_index=[0, 9])[0]
    B = rigid_modes(p)
    res = natural_modes(K, M, 10, method=method, backend="amg" if method == "lobpcg" else "auto",
                        near_nullspace=B, tol=1e-6)
    assert res.info["free_rigid"] == 6
    assert np.abs(res.values[:6]).max() < 1e-8 * res.values[6]
    assert res.values[6:] == pytest.approx(ref[6:], rel=1e-8)
    if method == "shift-invert":  # without the near-nullspace: a negative shift
        res2 = natural_modes(K, M, 10, method=method)
        assert res2.info["shift"] < 0
        assert res2.values[6:] == pytest.approx(ref[6:], rel=1e-8)
        assert np.abs(res2.values[:6]).max() < 1e-6 * res2.values[6]


def test_bad_requests(block):
    n = block["Kf"].shape[0]
    with pytest.raises(SolverError, match="asked for"):
        natural_modes(block["Kf"], block["Mf"], n + 1)
    with pytest.raises(SolverError, match="unknown eigen method"):
        natural_modes(block["Kf"], block["Mf"], 3, method="power")
    with pytest.raises(SolverError, match="unstressed"):
        buckling_factors(block["Kf"], 0 * block["Kgf"], 2)


@pytest.mark.parametrize("method", ["shift-invert", "lobpcg", "dense"])
def test_buckling_matches_dense(block, method):
    Kf, Kgf = block["Kf"], block["Kgf"]
    mu = sla.eigh(Kgf.toarray(), Kf.toarray(), eigvals_only=True)
    lam_ref = np.sort(-1.0 / mu[mu < 0])[:3]
    opts = amg_options(block["p"], block["c"], block["free"]) if method == "lobpcg" else {}
    res = buckling_factors(Kf, Kgf, 3, method=method, backend="amg" if method == "lobpcg" else "auto",
                           reverse=True, tol=1e-6, **opts)
    assert res.factors == pytest.approx(lam_ref, rel=1e-8)
    # The stress is compressive everywhere: the reversed load has no buckling factor.
    assert res.reversed_factors.size == 0
    # shapes scaled to a largest component of +1
    assert np.abs(res.vectors).max(axis=0) == pytest.approx(np.ones(3))
    # Reversing the stress swaps the two: no factor, and the reversed ones are the same.
    res2 = buckling_factors(Kf, -Kgf, 3, method=method, backend="amg" if method == "lobpcg" else "auto",
                            reverse=True, tol=1e-6, **opts)
    assert res2.factors.size == 0 and res2.info["no_buckling"] == 3
    assert res2.reversed_factors == pytest.approx(lam_ref, rel=1e-8)
