"""Element-level benchmarks solved in code (no case file can express them): the MacNeal & Harder
solid patch test and the observed order of convergence on a manufactured solution.

Each function returns a dict of named quantities; the catalogue (``catalogue.toml``) says which
quantity is checked against what target, with its source and tolerance.
"""
from __future__ import annotations

import numpy as np

from ..fem.assembly import assemble_stiffness, stress_at
from .. import solve as solvers
from ..elimination import expand_solution, reduce_system
from ..fem.fields import body_force_field, error_norms
from ..mesh import boundary_faces
from .meshes import solid_patch, structured_cube


def solve_prescribed(K, f: np.ndarray, dofs: np.ndarray, values: np.ndarray, backend: str = "auto") -> np.ndarray:
    """Solve ``K u = f`` with ``u[dofs] = values`` held (elimination), returning ``u (3n,)``."""
    red = reduce_system(K, f, dofs, values)
    uf = solvers.solve(red.K, red.rhs[:, 0], backend=solvers.choose_backend(backend, int(red.free.sum()))).u
    return expand_solution(red, uf)[:, 0]


def _lame(E: float, nu: float) -> tuple[float, float]:
    return E * nu / ((1 + nu) * (1 - 2 * nu)), E / (2 * (1 + nu))


def patch_field(x: np.ndarray) -> np.ndarray:
    """The solid patch's linear field ``(p, 3)`` at ``x (p, 3)``: u = 1e-3 (2x + y + z)/2,
    v = 1e-3 (x + 2y + z)/2, w = 1e-3 (x + y + 2z)/2 (MacNeal & Harder 1985)."""
    X, Y, Z = x.T
    return 1e-3 * np.stack([(2 * X + Y + Z) / 2, (X + 2 * Y + Z) / 2, (X + Y + 2 * Z) / 2], axis=1)


def solid_patch_test(order: int = 1, E: float = 1.0e6, nu: float = 0.25, backend: str = "auto") -> dict:
    """Impose the patch field on the boundary nodes of the 7-hexahedron patch (split into
    tetrahedra), solve for the interior nodes, and measure how far the solution departs.

    Returns
    -------
    dict with ``sx, sy, sz, txy, tyz, txz`` the extreme (furthest from the patch value) stress
    components over every element at its nodes and centroid [stress], ``u_error`` the largest
    interior displacement error [length], ``stress_error`` the largest |σ − σ_patch| [stress], and
    ``interior`` the number of free nodes.
    """
    pts, cells = solid_patch(order)
    lam, mu = _lame(E, nu)
    K = assemble_stiffness(pts, cells, lam, mu)
    bnd = np.unique(boundary_faces(cells))
    dofs = (3 * bnd[:, None] + np.arange(3)).ravel()
    exact = patch_field(pts).ravel()
    u = solve_prescribed(K, np.zeros(K.shape[0]), dofs, exact[dofs], backend)
    from ..fem.elements import element_for

    el = element_for(cells.shape[1])
    xi = np.vstack([el.ref_nodes, [[0.25, 0.25, 0.25]]])
    s = stress_at(pts, cells, u.reshape(-1, 3), xi, lam, mu).reshape(-1, 6)
    # Hooke's law on the patch strain: eps_ii = 1e-3, gamma = 1e-3 -> sigma_ii = (3 lam + 2 mu) 1e-3,
    # tau = mu 1e-3; with E = 1e6, nu = 0.25 these are 2000 and 400 (MacNeal & Harder 1985).
    target = np.array([(3 * lam + 2 * mu) * 1e-3] * 3 + [mu * 1e-3] * 3)
    dev = s - target
    far = np.abs(dev).argmax(axis=0)
    ext = s[far, np.arange(6)]
    return {"sx": ext[0], "sy": ext[1], "sz": ext[2], "txy": ext[3], "tyz": ext[4], "txz": ext[5],
            "stress_error": float(np.abs(dev).max()), "u_error": float(np.abs(u - exact).max()),
            "interior": int(pts.shape[0] - bnd.size)}


# ----------------------------------------------------------------------------- manufactured solution
#: Wave number and amplitudes of the manufactured field on the unit cube.
K_WAVE, A_SOL, A_GRAD = np.pi, 0.01, 0.01


def manufactured_u(x: np.ndarray) -> np.ndarray:
    """A smooth field with both a divergence-free and a gradient part, ``(p, 3)``:

    u = A (sin ky sin kz, sin kz sin kx, sin kx sin ky) + B ∇ψ,  ψ = sin kx sin ky sin kz.
    """
    X, Y, Z = (K_WAVE * np.asarray(x)).T
    s, c = np.sin, np.cos
    sol = np.stack([s(Y) * s(Z), s(Z) * s(X), s(X) * s(Y)], axis=1)
    grad = K_WAVE * np.stack([c(X) * s(Y) * s(Z), s(X) * c(Y) * s(Z), s(X) * s(Y) * c(Z)], axis=1)
    return A_SOL * sol + A_GRAD * grad


def manufactured_grad(x: np.ndarray) -> np.ndarray:
    """Gradient of :func:`manufactured_u`, ``(p, 3, 3)`` with ``[:, i, k] = ∂u_i/∂x_k``."""
    X, Y, Z = (K_WAVE * np.asarray(x)).T
    s, c = np.sin, np.cos
    z = np.zeros_like(X)
    Hs = np.stack([np.stack([z, c(Y) * s(Z), s(Y) * c(Z)], 1),
                   np.stack([s(Z) * c(X), z, c(Z) * s(X)], 1),
                   np.stack([c(X) * s(Y), s(X) * c(Y), z], 1)], 1)
    sss = s(X) * s(Y) * s(Z)
    Hg = np.stack([np.stack([-sss, c(X) * c(Y) * s(Z), c(X) * s(Y) * c(Z)], 1),
                   np.stack([c(X) * c(Y) * s(Z), -sss, s(X) * c(Y) * c(Z)], 1),
                   np.stack([c(X) * s(Y) * c(Z), s(X) * c(Y) * c(Z), -sss], 1)], 1)
    return A_SOL * K_WAVE * Hs + A_GRAD * K_WAVE ** 2 * Hg


def manufactured_body_force(x: np.ndarray, lam: float, mu: float) -> np.ndarray:
    """b = −div σ(u) for :func:`manufactured_u`, ``(p, 3)`` [force/volume].

    Navier: div σ = μ Δu + (λ + μ) ∇(div u). The first part is divergence-free with
    Δ = −2k², so it gives 2μk²·A(...); the gradient part has div = Δψ = −3k²ψ, so it gives
    3k²(λ + 2μ)·B∇ψ.
    """
    X, Y, Z = (K_WAVE * np.asarray(x)).T
    s, c = np.sin, np.cos
    sol = np.stack([s(Y) * s(Z), s(Z) * s(X), s(X) * s(Y)], axis=1)
    grad = K_WAVE * np.stack([c(X) * s(Y) * s(Z), s(X) * c(Y) * s(Z), s(X) * s(Y) * c(Z)], axis=1)
    k2 = K_WAVE ** 2
    return 2 * mu * k2 * A_SOL * sol + 3 * k2 * (lam + 2 * mu) * A_GRAD * grad


#: Refinements (cubes per side) for each order: chosen so that each is in the asymptotic range.
REFINEMENTS = {1: (4, 6, 8, 12), 2: (2, 3, 4, 6)}


def convergence_study(order: int, ns=None, E: float = 1.0, nu: float = 0.3, backend: str = "auto") -> dict:
    """Solve the manufactured problem on successive structured meshes of the unit cube and fit
    log(error) against log(h).

    Returns
    -------
    dict with ``h`` (k,), ``l2`` (k,), ``energy`` (k,), and the fitted slopes ``l2_order`` and
    ``energy_order``.
    """
    ns = REFINEMENTS[order] if ns is None else ns
    lam, mu = _lame(E, nu)
    h, l2, en = [], [], []
    for n in ns:
        pts, cells = structured_cube(n, order)
        K = assemble_stiffness(pts, cells, lam, mu)
        f = body_force_field(pts, cells, lambda x: manufactured_body_force(x, lam, mu))
        bnd = np.unique(boundary_faces(cells))
        dofs = (3 * bnd[:, None] + np.arange(3)).ravel()
        u = solve_prescribed(K, f, dofs, manufactured_u(pts).ravel()[dofs], backend)
        a, b = error_norms(pts, cells, u.reshape(-1, 3), manufactured_u, manufactured_grad, lam, mu)
        h.append(1.0 / n)
        l2.append(a)
        en.append(b)
    lh = np.log(h)
    return {"h": np.array(h), "l2": np.array(l2), "energy": np.array(en),
            "l2_order": float(np.polyfit(lh, np.log(l2), 1)[0]),
            "energy_order": float(np.polyfit(lh, np.log(en), 1)[0])}


#: Registry of the code-defined benchmarks the catalogue may name.
CODE_CASES = {"solid_patch": solid_patch_test, "convergence": convergence_study}
