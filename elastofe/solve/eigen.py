"""Generalized symmetric eigenproblems of vibration and linear buckling: arrays in, arrays out.

- :func:`natural_modes`: ``K φ = ω² M φ``, the lowest ``count`` pairs. Shift-invert Lanczos
  (ARPACK through scipy's ``eigsh``) with the project's own factorisation of ``K − σM`` as the
  inverse operator, or LOBPCG preconditioned with the multigrid hierarchy (no factorisation) for
  models too large to factorise. Free rigid-body motions are allowed: the shift is then a small
  negative ``σ`` so that ``K − σM`` is positive definite, and those modes come out at ω² ≈ 0.
- :func:`buckling_factors`: ``(K + λ K_σ) φ = 0``, the smallest positive load factors ``λ``.
  Written as ``K_σ φ = μ K φ`` with ``μ = −1/λ`` (``K`` positive definite, ``K_σ`` indefinite),
  the wanted factors are the most negative ``μ``: the extreme end of the spectrum of ``K⁻¹K_σ``,
  where Lanczos (ARPACK mode 2, ``K⁻¹`` from the factorisation) converges fastest.

Everything here sees matrices only; the caller eliminates supports and passes ``K_ff``, ``M_ff``,
``K_σ,ff`` (and the rigid-body modes on the free DOFs as ``near_nullspace`` or as the multigrid
backend's ``modes`` option). Non-convergence and results that fail their residual check raise
:class:`~elastofe.errors.SolverError`.
"""
from __future__ import annotations

import logging
import time
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..errors import SolverError
from .backends import ITERATIVE, Progress, choose_backend, factorize

log = logging.getLogger(__name__)


#: Up to this many unknowns a dense generalized eigensolver is used (exact, and faster than any
#: iteration on so small a matrix).
DENSE_MAX = 600

#: Solves a shift-invert Lanczos run typically needs (counts as several right-hand sides when the
#: automatic backend choice weighs a factorisation against multigrid).
SHIFT_INVERT_SOLVES = 40

#: Negative shift for a model with free rigid-body motions, as a fraction of the spectrum scale
#: ``median(diag K / diag M)`` (about the mesh's highest frequencies squared), when the rigid modes
#: cannot be projected out (no near-nullspace given): a smaller shift makes ``K − σM`` so nearly
#: singular that the solves' round-off spoils the elastic vectors (residuals 1e-3 at 1e-10 of the
#: scale against 1e-7 at 1e-8, measured). Lanczos still separates elastic ω² below |σ| from the
#: rigid modes: a 20:1 bar at 61k DOF has ω₁² = 6e-9 of the scale (measured).
FREE_SHIFT = 1e-8

#: The same with the free rigid motions projected out of every solve (near-nullspace given): the
#: round-off they carry is removed with them (residuals 1e-11 measured at this shift), so the shift
#: can sit well below the first elastic ω² of any practical part.
FREE_SHIFT_PROJECTED = 1e-10

#: A combination of the near-nullspace vectors whose Rayleigh quotient is below this fraction of
#: the spectrum scale is a free rigid-body motion (exact ones give ~1e-17; measured: the least
#: restrained motion of a 20:1 cantilever held on its root face 3e-7, of a block held at two
#: nodes 4e-6).
RIGID_RTOL = 1e-9

#: Largest relative eigen-residual ``‖K φ − λ M φ‖ / (‖K φ‖ + |λ| ‖M φ‖ + floor)`` accepted: a check
#: against wrong answers, not the accuracy target (an eigenvalue's relative error is about the
#: square of its vector's residual times λ over the gap to its neighbours).
RESIDUAL_RTOL = 1e-4

#: ω² below this fraction of the spectrum scale counts as zero in the residual check (a rigid-body
#: mode's ``K φ`` is round-off, about 1e-15 of the scale).
RESIDUAL_FLOOR = 1e-10

#: μ = −1/λ with |μ| below this fraction of ``ρ = max |diag K_σ / diag K|`` (about the largest
#: |stress| / modulus of the reference load) is no buckling: λ > 1/(NO_BUCKLING ρ) would take the
#: stress past a quarter of the modulus. The high modes of any stressed part crowd into that band;
#: a slender part's buckling factors lie far outside it (a 20:1 column: |μ₁| ≈ 10³ ρ).
NO_BUCKLING = 0.25

#: Lanczos steps (solves) of the probe that looks whether each end of the spectrum holds buckling.
PROBE_STEPS = 12

#: Shift c (in units of the same estimate) of the buckling pencil ``K_σ + cK`` given to ARPACK.
BUCKLING_SHIFT = 10.0

#: ARPACK's relative tolerance in the buckling runs (eigenvalues μ + c of the shifted pencil).
ARPACK_TOL = 1e-10

#: LOBPCG iterations between convergence checks (each call restarts from the current block).
LOBPCG_CHUNK = 25


@dataclass(frozen=True)
class Eigenpairs:
    """Lowest eigenpairs of ``K φ = ω² M φ``.

    Attributes
    ----------
    values : (p,) ω² [1/time²], ascending (rigid-body modes ≈ 0, possibly slightly negative).
    vectors : (n, p) mode shapes, mass-normalised (``φᵀ M φ = 1``).
    method : "shift-invert", "lobpcg" or "dense".
    info : shift, backend, solves / iterations, residuals, times.
    """

    values: np.ndarray
    vectors: np.ndarray
    method: str
    info: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Buckling:
    """Linear buckling factors of ``(K + λ K_σ) φ = 0``.

    Attributes
    ----------
    factors : (p,) positive load factors, ascending (p ≤ count; empty when the load compresses
        nothing that can buckle).
    vectors : (n, p) buckling shapes, scaled to a largest component of 1.
    reversed_factors : (q,) factors of the reversed load (``−λ`` for the negative λ), ascending;
        only when asked for.
    reversed_vectors : (n, q).
    method : "shift-invert", "lobpcg" or "dense".
    info : dict.
    """

    factors: np.ndarray
    vectors: np.ndarray
    reversed_factors: np.ndarray
    reversed_vectors: np.ndarray
    method: str
    info: dict = field(default_factory=dict)


def spectrum_scale(K: sp.spmatrix, M: sp.spmatrix) -> float:
    """``median(diag K / diag M)`` [1/time²]: the order of the mesh's highest ω²."""
    dk, dm = K.diagonal(), M.diagonal()
    ok = dm > 0
    if not np.any(ok):
        raise SolverError("the mass matrix has no positive diagonal entry")
    return float(np.median(np.abs(dk[ok]) / dm[ok]))


def free_rigid_subspace(K: sp.spmatrix, M: sp.spmatrix, B: np.ndarray, scale: float) -> np.ndarray:
    """Combinations of the near-nullspace ``B (n, r)`` that ``K`` does not resist, ``(n, d)``.

    The Rayleigh quotients of ``span(B)`` are the eigenvalues of the small pencil
    ``(Bᵀ K B, Bᵀ M B)``; those below ``RIGID_RTOL · scale`` are free motions. Returned mass-orthonormal.
    """
    B = np.asarray(B, dtype=float)
    if B.ndim != 2 or B.shape[0] != K.shape[0] or B.shape[1] == 0:
        return np.zeros((K.shape[0], 0))
    P = B.T @ (M @ B)
    P = 0.5 * (P + P.T)
    keep = np.diag(P) > 1e-300
    B, P = B[:, keep], P[np.ix_(keep, keep)]
    if B.shape[1] == 0:
        return np.zeros((K.shape[0], 0))
    Q = B.T @ (K @ B)
    w, V = sla.eigh(0.5 * (Q + Q.T), P)
    free = w < RIGID_RTOL * scale
    return B @ V[:, free]



def choose_method(method: str, backend: str, n: int, count: int, factored: bool) -> tuple[str, str]:
    """``(method, backend)`` of an eigen solve of ``n`` unknowns for ``count`` pairs: "auto" takes
    shift-invert on a factorisation already made (``factored``), dense below ``DENSE_MAX``, else
    LOBPCG where the automatic backend is iterative and shift-invert where it is direct; any method
    turns dense when nearly every pair is asked for."""
    if method == "auto":
        if factored:
            method = "shift-invert"
        elif n <= DENSE_MAX:
            method = "dense"
        else:
            backend = choose_backend(backend, n, nrhs=SHIFT_INVERT_SOLVES)
            method = "lobpcg" if backend in ITERATIVE else "shift-invert"
    if method not in ("shift-invert", "lobpcg", "dense"):
        raise SolverError(f"unknown eigen method {method!r}; known: auto, shift-invert, lobpcg, dense")
    if method != "dense" and count >= n - 1:
        method = "dense"
    return method, backend

def _count(count: int, n: int) -> int:
    count = int(count)
    if count < 1 or count > n:
        raise SolverError(f"asked for {count} modes of a system with {n} unknowns")
    return count


def _as_operator(fac, n: int, counter: list, project: np.ndarray | None = None, M=None) -> spla.LinearOperator:
    """``fac.solve`` as a LinearOperator counting its solves; with ``project (n, d)``
    (mass-orthonormal) the result is made M-orthogonal to those vectors."""
    def apply(b):
        counter[0] += 1 if np.ndim(b) == 1 else np.shape(b)[1]
        x = np.asarray(fac.solve(np.ascontiguousarray(b, dtype=float)), dtype=float).reshape(np.shape(b))
        if project is not None:
            x = x - project @ (project.T @ (M @ x))
        return x
    return spla.LinearOperator((n, n), matvec=apply, matmat=apply, dtype=float)


def _residuals(K, M, values: np.ndarray, V: np.ndarray, floor: float) -> np.ndarray:
    """Relative residuals ``‖K v − λ M v‖ / (‖K v‖ + |λ| ‖M v‖ + floor ‖M v‖)`` per column."""
    KV, MV = K @ V, M @ V
    num = np.linalg.norm(KV - MV * values, axis=0)
    nm = np.linalg.norm(MV, axis=0)
    return num / (np.linalg.norm(KV, axis=0) + np.abs(values) * nm + floor * nm)


def rayleigh_ritz(K, M, V: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Best eigenpairs ``(values (p,), vectors (n, p))`` of ``(K, M)`` within ``span(V (n, p))``.

    After shift-invert with free rigid-body motions the elastic vectors carry a trace of the rigid
    ones (their inverse eigenvalues are 10⁴ or more times larger); the rigid modes are in the same
    span, so the projected p × p problem separates them exactly.
    """
    Q, _ = np.linalg.qr(V)
    Kr, Mr = Q.T @ (K @ Q), Q.T @ (M @ Q)
    w, C = sla.eigh(0.5 * (Kr + Kr.T), 0.5 * (Mr + Mr.T))
    return w, Q @ C


def _mass_normalised(M, V: np.ndarray) -> np.ndarray:
    d = np.einsum("ij,ij->j", V, M @ V)
    return V / np.sqrt(np.where(d > 0, d, 1.0))


def _shift_for(K, M, scale: float, shift: float | None, B: np.ndarray | None) -> tuple[float, np.ndarray]:
    """(σ, free rigid subspace ``(n, d)``): σ = 0 only when the near-nullspace shows the model
    restrained; without one, free motions cannot be ruled out, and a factorisation of a singular K
    need not fail (PARDISO factorises it with round-off pivots), so the shift is negative."""
    Z = free_rigid_subspace(K, M, B, scale) if B is not None else np.zeros((K.shape[0], 0))
    if shift is not None:
        return float(shift), Z
    if B is not None and Z.shape[1] == 0:
        return 0.0, Z
    return -(FREE_SHIFT_PROJECTED if Z.shape[1] else FREE_SHIFT) * scale, Z


def natural_modes(K: sp.spmatrix, M: sp.spmatrix, count: int, *, shift: float | None = None,
                  method: str = "auto", backend: str = "auto", near_nullspace: np.ndarray | None = None,
                  factor=None, tol: float = 1e-5, maxiter: int | None = None,
                  progress: Progress | None = None, **options) -> Eigenpairs:
    """The ``count`` lowest natural modes of ``K φ = ω² M φ``.

    Parameters
    ----------
    K : (n, n) sparse symmetric stiffness on the free DOFs, positive semi-definite [force/length].
    M : (n, n) sparse symmetric positive-definite mass on the same DOFs [mass].
    count : number of modes (rigid-body modes included).
    shift : σ of the shift-invert operator ``(K − σM)⁻¹``; default 0 when ``near_nullspace`` shows
        the model restrained, else ``−FREE_SHIFT · scale`` (so ``K − σM`` is positive definite
        with free rigid-body motions, which then come out at ω² ≈ 0).
    method : "auto" (shift-invert with a direct backend, LOBPCG with the multigrid one), or
        "shift-invert", "lobpcg", "dense".
    backend : solver backend of :func:`elastofe.solve.factorize` ("auto", "pardiso", "amg", ...).
    near_nullspace : (n, r) rigid-body modes on the free DOFs; defaults to ``options["modes"]``.
        Used to find free motions (and, for LOBPCG, to keep them out of the search exactly).
    factor : an object with ``solve(b)`` for ``(K − σM)⁻¹`` already built (``σ = shift or 0``),
        e.g. the static solve's factorisation of ``K``; then nothing is factorised here.
    tol : relative residual ``‖K φ − ω² M φ‖ / (ω² ‖M φ‖)`` at which LOBPCG stops (an eigenvalue's
        relative error is about its square); shift-invert Lanczos runs to machine precision.
    maxiter : iteration limit (ARPACK restarts / LOBPCG iterations).
    progress : progress(stage, message) callback.
    **options : passed to the backend (``modes``, ``blocksize``, ``prolongation`` ... for "amg").

    Returns
    -------
    Eigenpairs with ``values (count,)`` = ω² and ``vectors (n, count)`` mass-normalised.

    Raises
    ------
    SolverError
        No convergence, a failed factorisation, or eigenpairs that fail the residual check.
    """
    K = sp.csr_matrix(K)
    M = sp.csr_matrix(M)
    n = K.shape[0]
    count = _count(count, n)
    B = near_nullspace if near_nullspace is not None else options.get("modes")
    if B is not None and options.get("modes") is None:
        options["modes"] = B  # the multigrid's near-nullspace, when it is used
    scale = spectrum_scale(K, M)
    say = progress or (lambda stage, msg: None)
    method, backend = choose_method(method, backend, n, count, factor is not None)
    t0 = time.perf_counter()
    sigma, Z = _shift_for(K, M, scale, shift, B)
    info: dict = {"scale": scale, "free_rigid": int(Z.shape[1])}
    if method == "dense":
        w, V = sla.eigh(K.toarray(), M.toarray(), subset_by_index=[0, count - 1])
        info["shift"] = 0.0
    elif method == "shift-invert":
        w, V = _shift_invert_modes(K, M, count, sigma, Z, backend, factor, maxiter, info, say, options)
    else:
        w, V = _lobpcg_modes(K, M, count, sigma, Z, scale, backend, tol, maxiter, info, say, options)
    if method != "dense":
        w, V = rayleigh_ritz(K, M, V)
    order = np.argsort(w)
    w, V = w[order], _mass_normalised(M, V[:, order])
    # What counts as ω² = 0 in the check: a negative shift resolves ω² only down to about |σ|, and a
    # rigid-body mode found without the near-nullspace is a null vector to ~1e-12 of the scale
    # (the shifted matrix's conditioning), far below any elastic ω² wanted.
    floor = max(RESIDUAL_FLOOR * scale, -min(sigma, 0.0), 1e-3 * float(np.abs(w).max(initial=0.0)))
    res = _residuals(K, M, w, V, floor)
    info["residuals"] = res
    info["seconds"] = time.perf_counter() - t0
    if not np.all(np.isfinite(w)) or res.max(initial=0.0) > RESIDUAL_RTOL:
        worst = res.max() if np.all(np.isfinite(w)) else np.inf
        raise SolverError(f"the eigensolver's modes fail their residual check (largest relative residual "
                          f"{worst:.2e} > {RESIDUAL_RTOL:g}); the model may be badly "
                          "conditioned or the iteration limit too low")
    return Eigenpairs(w, V, method, info)


def _shifted_factor(K, M, sigma, backend, factor, options, info):
    """The factorisation of ``K − σM`` (the caller's, when given)."""
    t = time.perf_counter()
    if factor is None:
        factor = factorize(K - sigma * M if sigma else K, backend, nrhs=SHIFT_INVERT_SOLVES, **options)
    info.update(backend=getattr(factor, "backend", "given"), factorise_s=time.perf_counter() - t)
    return factor


def _shift_invert_modes(K, M, count, sigma, Z, backend, factor, maxiter, info, say, options):
    """Shift-invert Lanczos; the free rigid motions ``Z (n, d)`` (mass-orthonormal) are projected
    out of every solve and returned as they are: with a shift near zero their inverse eigenvalues
    dwarf the elastic ones, and the round-off they drag along would spoil the elastic vectors
    (measured: residual 1e-3 without the projection, 1e-11 with it)."""
    n = K.shape[0]
    d = min(Z.shape[1], count)
    elastic = count - d
    w_rigid = np.einsum("ij,ij->j", Z, K @ Z)[:d]
    info.update(shift=sigma)
    if elastic == 0:
        return w_rigid, Z[:, :d]
    factor = _shifted_factor(K, M, sigma, backend, factor, options, info)
    say("modes", f"shift-invert Lanczos for {elastic} modes ({n:,} equations, {info['backend']})")
    solves = [0]
    op = _as_operator(factor, n, solves, project=Z if d else None, M=M)
    v0 = _start_vector(n)
    if d:
        v0 = v0 - Z @ (Z.T @ (M @ v0))
    t = time.perf_counter()
    try:
        # tol=0: machine precision. The transformed problem's residual reaches the original one
        # amplified by ‖K‖/ω² (10⁵ and more), so a looser ARPACK tolerance leaves poor vectors.
        w, V = spla.eigsh(K, k=elastic, M=M, sigma=sigma, which="LM", OPinv=op, tol=0,
                          maxiter=maxiter, v0=v0)
    except spla.ArpackNoConvergence as err:
        raise SolverError(f"shift-invert Lanczos did not converge: {len(err.eigenvalues)} of {elastic} modes "
                          f"after {solves[0]} solves; raise the iteration limit") from None
    except spla.ArpackError as err:
        raise SolverError(f"shift-invert Lanczos failed: {err}") from None
    info.update(solves=solves[0], iterate_s=time.perf_counter() - t)
    return np.concatenate([w_rigid, w]), np.hstack([Z[:, :d], V])


def _start_vector(n: int) -> np.ndarray:
    """A fixed start vector, so that runs repeat exactly (ARPACK's own is random)."""
    return np.random.default_rng(12345).standard_normal(n)


def _preconditioner(A, backend: str, options: dict, info: dict):
    """An approximate inverse of ``A`` as a LinearOperator: one multigrid cycle for "amg", the
    factorisation's solve for a direct backend."""
    name = choose_backend(backend, A.shape[0])
    t = time.perf_counter()
    fac = factorize(A, name, **options)
    info.update(backend=fac.backend, setup_s=time.perf_counter() - t)
    cycle = getattr(fac, "M", None)
    if cycle is not None:
        return cycle
    return _as_operator(fac, A.shape[0], [0])


def _lobpcg(A, B, X, prec, Y, wanted: int, tol: float, maxiter: int, largest: bool,
            info: dict, say, label: str, floor: float = 0.0, none_beyond: float | None = None):
    """LOBPCG in chunks of ``LOBPCG_CHUNK`` iterations until the ``wanted`` lowest (highest with
    ``largest``) pairs have relative residuals ``‖A x − μ B x‖ / ((|μ| + floor) ‖B x‖) <= tol``;
    returns (μ, X) of the whole block. With ``none_beyond``, stops as soon as (after two chunks)
    even the first estimate lies beyond it (above it for the lowest, below for the highest): the
    wanted end is empty."""
    done = 0
    mu = None
    res = np.full(wanted, np.inf)
    while done < maxiter:
        steps = min(LOBPCG_CHUNK, maxiter - done)
        with warnings.catch_warnings(record=True):  # its "not reached the tolerance" note: we check below
            mu, X = spla.lobpcg(A, X, B=B, M=prec, Y=Y, tol=1e-300, maxiter=steps, largest=largest)
        done += steps
        order = np.argsort(-mu if largest else mu)
        mu, X = mu[order], X[:, order]
        AX, BX = A @ X[:, :wanted], B @ X[:, :wanted]
        num = np.linalg.norm(AX - BX * mu[:wanted], axis=0)
        res = num / ((np.abs(mu[:wanted]) + floor) * np.linalg.norm(BX, axis=0))
        say("modes", f"{label}: iteration {done}, largest relative residual {res.max():.1e} (target {tol:.0e})")
        log.debug("lobpcg %d: %s", done, res)
        if res.max() <= tol:
            info.update(iterations=done, lobpcg_residuals=res)
            return mu, X
        if none_beyond is not None and done >= 2 * LOBPCG_CHUNK and \
                (mu[0] < none_beyond if largest else mu[0] > none_beyond):
            info.update(iterations=done)
            return mu, X
    raise SolverError(f"{label} did not converge in {maxiter} iterations (largest relative residual "
                      f"{res.max():.1e}, target {tol:.0e}); raise the iteration limit or use a direct backend")


def _lobpcg_modes(K, M, count, sigma, Z, scale, backend, tol, maxiter, info, say, options):
    n = K.shape[0]
    d = min(Z.shape[1], count)
    elastic = count - d
    info.update(shift=sigma)
    w_rigid = np.einsum("ij,ij->j", Z, K @ Z)[:d]
    if elastic == 0:
        return w_rigid, Z[:, :d]
    # The multigrid cycle needs a comfortably definite matrix (its coarsest level is factorised):
    # the larger of the two free-motion shifts.
    ps = min(sigma, -FREE_SHIFT * scale) if Z.shape[1] else sigma
    prec = _preconditioner(K - ps * M if ps else K, "amg" if backend == "auto" else backend, options, info)
    size = min(elastic + max(5, elastic // 2), n - Z.shape[1] - 1)
    X = np.random.default_rng(12345).standard_normal((n, size))
    Y = Z if Z.shape[1] else None
    say("modes", f"LOBPCG for {elastic} modes ({n:,} equations, block of {size})")
    t = time.perf_counter()
    mu, X = _lobpcg(K, M, X, prec, Y, elastic, min(tol, 0.5 * RESIDUAL_RTOL), maxiter or 500, False,
                    info, say, "LOBPCG")
    info["iterate_s"] = time.perf_counter() - t
    return np.concatenate([w_rigid, mu[:elastic]]), np.hstack([Z[:, :d], X[:, :elastic]])


def _probe_ends(K, Kg, op, n: int, steps: int) -> tuple[float, float]:
    """Rough extreme eigenvalues ``(μ_min, μ_max)`` of ``K⁻¹K_σ``: Ritz values of ``steps`` Lanczos
    steps in the K inner product (full reorthogonalisation), no convergence test.

    The end a load does not reach (the tension side of a pure compression, where only the crowd of
    μ ≈ 0 of the high modes lies) is a dense spectrum that ARPACK resolves only very slowly; the
    probe says whether an end holds real buckling before ARPACK is asked for it. Ritz values lie
    inside the spectrum, and well-separated extremes (real buckling) show within a few steps.
    """
    steps = max(2, min(steps, n - 1))
    Q = np.zeros((n, steps))
    KQ = np.zeros((n, steps))
    alpha, beta = np.zeros(steps), np.zeros(steps)
    q = _start_vector(n)
    Kq = K @ q
    nq = np.sqrt(q @ Kq)
    q, Kq = q / nq, Kq / nq
    m = steps
    for j in range(steps):
        Q[:, j], KQ[:, j] = q, Kq
        g = Kg @ q
        alpha[j] = q @ g
        w = np.asarray(op.matvec(g), dtype=float)
        w -= Q[:, :j + 1] @ (KQ[:, :j + 1].T @ w)  # full reorthogonalisation in the K inner product
        w -= Q[:, :j + 1] @ (KQ[:, :j + 1].T @ w)
        Kw = K @ w
        b = np.sqrt(max(w @ Kw, 0.0))
        if b <= 1e-12 * max(abs(alpha[: j + 1]).max(), 1e-300) or j == steps - 1:
            m = j + 1
            break
        beta[j] = b
        q, Kq = w / b, Kw / b
    theta = sla.eigvalsh_tridiagonal(alpha[:m], beta[: m - 1]) if m > 1 else alpha[:1]
    return float(theta.min()), float(theta.max())


def buckling_factors(K: sp.spmatrix, Kg: sp.spmatrix, count: int, *, method: str = "auto", backend: str = "auto",
                     factor=None, tol: float = 1e-5, maxiter: int | None = None, reverse: bool = False,
                     progress: Progress | None = None, **options) -> Buckling:
    """The ``count`` smallest positive load factors of ``(K + λ K_σ) φ = 0``.

    Parameters
    ----------
    K : (n, n) sparse stiffness on the free DOFs, positive definite (a restrained model).
    Kg : (n, n) sparse geometric stiffness of the reference load's stress on the same DOFs.
    count : number of factors wanted.
    method : "auto" (Lanczos on ``K⁻¹K_σ`` with a direct factorisation, LOBPCG with the multigrid
        backend), "shift-invert", "lobpcg" or "dense".
    backend : solver backend for ``K`` (see :func:`elastofe.solve.factorize`).
    factor : an object with ``solve(b)`` for ``K⁻¹`` already built (the static solve's).
    tol : relative residual at which LOBPCG stops; Lanczos runs to ``ARPACK_TOL``.
    maxiter : iteration limit.
    reverse : also compute the factors of the reversed load (negative λ).
    progress : progress(stage, message) callback.
    **options : passed to the backend.

    Returns
    -------
    Buckling. ``factors`` holds the positive λ found among the ``count`` wanted, fewer (down to none)
    when the load reaches no more: a factor above ``info["none_below"]`` (``1 / (NO_BUCKLING ρ)``,
    ``ρ = max |diag K_σ / diag K|``, a load at which the stress would be of the order of the
    modulus) is reported as no buckling.

    Raises
    ------
    SolverError
        ``K`` not positive definite, no convergence, or a failed residual check.
    """
    K = sp.csr_matrix(K)
    Kg = sp.csr_matrix(Kg)
    n = K.shape[0]
    count = _count(count, n)
    say = progress or (lambda stage, msg: None)
    method, backend = choose_method(method, backend, n, count, factor is not None)
    t0 = time.perf_counter()
    dk = K.diagonal()
    if np.any(dk <= 0):
        raise SolverError("the stiffness matrix has non-positive diagonal entries: the model is not restrained")
    # Order of |μ| from the diagonals (slender parts reach 10³ times more): the unit of the floor
    # below which μ is no buckling, and of the shift that keeps ARPACK's relative test away from μ = 0.
    rho = float(np.max(np.abs(Kg.diagonal()) / dk, initial=0.0))
    if rho == 0.0:
        raise SolverError("the geometric stiffness is zero: the load leaves the part unstressed")
    floor = NO_BUCKLING * rho
    info: dict = {"none_below": 1.0 / floor}
    ends = [("SA", False)] + ([("LA", True)] if reverse else [])
    found = {}
    if method == "dense":
        mu_all, V_all = sla.eigh(Kg.toarray(), K.toarray())
        for which, rev in ends:
            sel = np.arange(count) if which == "SA" else np.arange(n - 1, n - 1 - count, -1)
            found[rev] = (mu_all[sel], V_all[:, sel])
    elif method == "shift-invert":
        t = time.perf_counter()
        if factor is None:
            factor = factorize(K, backend, nrhs=SHIFT_INVERT_SOLVES, **options)
        info.update(backend=getattr(factor, "backend", "given"), factorise_s=time.perf_counter() - t)
        solves = [0]
        op = _as_operator(factor, n, solves)
        # K_σ + cK has the eigenvalues μ + c and the same Krylov spaces; c keeps ARPACK's relative
        # test away from μ = 0, where the crowd of high modes sits.
        c = BUCKLING_SHIFT * rho
        A = spla.LinearOperator((n, n), matvec=lambda x: Kg @ x + c * (K @ x), dtype=float)
        lo, hi = _probe_ends(K, Kg, op, n, PROBE_STEPS)
        info["probe"] = (lo, hi)
        for which, rev in ends:
            if (hi if rev else -lo) <= floor:
                found[rev] = (np.zeros(0), np.zeros((n, 0)))
                continue
            say("buckling", f"Lanczos for {count} buckling factors{' of the reversed load' if rev else ''} "
                            f"({n:,} equations, {info['backend']})")
            try:
                theta, V = spla.eigsh(A, k=count, M=K, Minv=op, which=which, tol=ARPACK_TOL,
                                      maxiter=maxiter, v0=_start_vector(n))
            except spla.ArpackNoConvergence as err:
                raise SolverError(f"buckling Lanczos did not converge: {len(err.eigenvalues)} of {count} factors "
                                  f"after {solves[0]} solves; ask for fewer or raise the iteration limit") from None
            except spla.ArpackError as err:
                raise SolverError(f"buckling Lanczos failed: {err}") from None
            found[rev] = (theta - c, V)
        info["solves"] = solves[0]
    else:
        prec = _preconditioner(K, "amg" if backend == "auto" else backend, options, info)
        size = min(count + max(5, count // 2), n - 1)
        for _which, rev in ends:
            X = np.random.default_rng(12345).standard_normal((n, size))
            mu, X = _lobpcg(Kg, K, X, prec, None, count, min(tol, 0.5 * RESIDUAL_RTOL), maxiter or 500, rev,
                            info, say, "LOBPCG (buckling)", floor, none_beyond=(-floor if not rev else floor))
            found[rev] = (mu[:count], X[:, :count])
    out = {}
    for rev, (mu, V) in found.items():
        keep = (mu > floor) if rev else (mu < -floor)
        lam = -1.0 / mu[keep]
        Vk = V[:, keep]
        order = np.argsort(np.abs(lam))
        lam, Vk = np.abs(lam[order]), Vk[:, order]
        if Vk.shape[1]:
            res = _residuals(Kg, K, mu[keep][order], Vk, 0.0)
            info.setdefault("residuals", []).extend(res.tolist())
            if res.max() > RESIDUAL_RTOL:
                raise SolverError(f"the buckling eigenpairs fail their residual check (largest relative residual "
                                  f"{res.max():.2e} > {RESIDUAL_RTOL:g})")
            big = np.abs(Vk).max(axis=0)
            sign = np.sign(Vk[np.argmax(np.abs(Vk), axis=0), np.arange(Vk.shape[1])])
            Vk = Vk * (sign / big)
        out[rev] = (lam, Vk)
    info["seconds"] = time.perf_counter() - t0
    if out[False][0].size < count:
        info["no_buckling"] = count - out[False][0].size
    empty = (np.zeros(0), np.zeros((n, 0)))
    rf, rv = out.get(True, empty)
    return Buckling(out[False][0], out[False][1], rf, rv, method, info)
