"""Element-level benchmarks solved in code (no case file can express them): the MacNeal & Harder
solid patch test and the observed order of convergence on a manufactured solution.

Each function returns a dict of named quantities; the catalogue (``catalogue.toml``) says which
quantity is checked against what target, with its source and tolerance.
"""
from __future__ import annotations

import numpy as np

from .. import solve as solvers
from ..elimination import expand_solution, reduce_system
from ..fem.assembly import assemble_stiffness, is_curved, stress_at
from ..fem.fields import body_force_field, error_norms
from ..fem.mixed import (
    assemble_stiffness_for,
    average_at_nodes,
    element_nodal_stress_for,
    element_pressure,
    stress_at_mixed,
)
from ..fem.surface import pressure_load, traction_load
from ..mesh import boundary_faces
from .meshes import (
    cook_membrane_mesh,
    distorted_block,
    quarter_ring_mesh,
    solid_patch,
    structured_cube,
)


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


def solid_patch_test(order: int = 1, E: float = 1.0e6, nu: float = 0.25, backend: str = "auto",
                     formulation: str = "displacement") -> dict:
    """Impose the patch field on the boundary nodes of the 7-hexahedron patch (split into
    tetrahedra), solve for the interior nodes, and measure how far the solution departs.

    Returns
    -------
    dict with ``sx, sy, sz, txy, tyz, txz`` the extreme (furthest from the patch value) stress
    components over every element at its nodes and centroid [stress], ``u_error`` the largest
    interior displacement error [length], ``stress_error`` the largest |σ − σ_patch| [stress], and
    ``interior`` the number of free nodes. ``formulation`` ``"mixed"`` solves with the condensed
    displacement–pressure element of ``fem.mixed`` (10-node cells) and recovers its stresses.
    """
    pts, cells = solid_patch(order)
    lam, mu = _lame(E, nu)
    K = assemble_stiffness_for(pts, cells, lam, mu, formulation)
    bnd = np.unique(boundary_faces(cells))
    dofs = (3 * bnd[:, None] + np.arange(3)).ravel()
    exact = patch_field(pts).ravel()
    u = solve_prescribed(K, np.zeros(K.shape[0]), dofs, exact[dofs], backend)
    from ..fem.elements import element_for

    el = element_for(cells.shape[1])
    xi = np.vstack([el.ref_nodes, [[0.25, 0.25, 0.25]]])
    if formulation == "mixed":
        s = stress_at_mixed(pts, cells, u.reshape(-1, 3), xi, lam, mu).reshape(-1, 6)
    else:
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





# ----------------------------------------------------------------------------- nearly incompressible
def solve_formulation(points: np.ndarray, cells: np.ndarray, lam, mu, formulation: str, f: np.ndarray,
                      held: np.ndarray, values: np.ndarray | None = None, backend: str = "auto",
                      delta_t: np.ndarray | None = None, coefficient=0.0) -> tuple[np.ndarray, np.ndarray]:
    """Assemble with ``formulation``, solve with the DOFs ``held (c,)`` at ``values`` (default 0),
    and recover the nodally averaged stress.

    Returns ``u (n, 3)`` [length] and ``stress (n, 6)`` [stress] (thermal part out with ``delta_t``).
    """
    K = assemble_stiffness_for(points, cells, lam, mu, formulation)
    vals = np.zeros(held.size) if values is None else values
    u = solve_prescribed(K, f, held, vals, backend).reshape(-1, 3)
    s_el = element_nodal_stress_for(points, cells, u, lam, mu, formulation, delta_t=delta_t, coefficient=coefficient)
    return u, average_at_nodes(cells, s_el, points.shape[0])


def _plane_dofs(points: np.ndarray, axis: int, value: float, component: int, tol: float = 1e-9) -> np.ndarray:
    return 3 * np.flatnonzero(np.abs(points[:, axis] - value) < tol) + component


def uniaxial_block_test(nu: float = 0.4999, *, formulation: str = "mixed", n: int = 3, distortion: float = 0.0,
                        curved: float = 0.0, boundary: str = "traction", E: float = 1.0, stress: float = 1.0,
                        seed: int = 0) -> dict:
    """A unit cube under uniaxial stress σ_xx = ``stress``: the patch test of an element at any ν.

    The exact field is ``u = (σ/E) (x, −ν y, −ν z)``, linear, so any isoparametric element that
    passes the patch test reproduces it and its stress to round-off, on distorted and curved cells
    too (MacNeal & Harder 1985; common practice). ``boundary = "traction"``: symmetry supports on
    x = 0, y = 0, z = 0 and the traction on x = 1 (the cube's faces stay planar; only interior
    nodes move); ``"prescribed"``: the exact displacement held on every boundary node (boundary
    mid-side nodes move too, so the faces are curved). Mesh: :func:`meshes.distorted_block`.

    Returns
    -------
    dict with ``stress_error`` max |σ − σ_exact| / σ over all element nodes, ``u_error`` max
    |u − u_exact| / (σ/E), ``pressure_error`` max |p_e − σ/3| / σ over the element pressures.
    """
    lam, mu = _lame(E, nu)
    pts, cells = distorted_block(n, distortion, curved, move_boundary=(boundary == "prescribed"), seed=seed)
    exact = (stress / E) * pts * np.array([1.0, -nu, -nu])
    ndof = 3 * pts.shape[0]
    if boundary == "traction":
        held = np.concatenate([_plane_dofs(pts, i, 0.0, i) for i in range(3)])
        faces = boundary_faces(cells)
        right = faces[np.all(np.abs(pts[faces, 0] - 1.0) < 1e-9, axis=1)]
        f = traction_load(pts, right, np.array([stress, 0.0, 0.0]))
        values = np.zeros(held.size)
    elif boundary == "prescribed":
        bnd = np.unique(boundary_faces(cells))
        held = (3 * bnd[:, None] + np.arange(3)).ravel()
        f = np.zeros(ndof)
        values = exact.ravel()[held]
    else:
        raise ValueError(f"boundary must be 'traction' or 'prescribed', got {boundary!r}")
    u, _ = solve_formulation(pts, cells, lam, mu, formulation, f, held, values)
    s_el = element_nodal_stress_for(pts, cells, u, lam, mu, formulation)
    target = np.array([stress, 0, 0, 0, 0, 0])
    out = {"stress_error": float(np.abs(s_el - target).max() / stress),
           "u_error": float(np.abs(u - exact).max() / (stress / E)),
           "curved_cells": int(is_curved(pts, cells).sum()), "cells": int(cells.shape[0])}
    if formulation == "mixed":
        out["pressure_error"] = float(np.abs(element_pressure(pts, cells, u, lam, mu) - stress / 3).max() / stress)
    return out


def _bore_nodes(points: np.ndarray, cells: np.ndarray, radius, a: float) -> np.ndarray:
    faces = boundary_faces(cells)
    return np.unique(faces[np.all(np.abs(radius[faces] - a) < 1e-6 * a, axis=1)]), \
        faces[np.all(np.abs(radius[faces] - a) < 1e-6 * a, axis=1)]


def thick_cylinder_test(nu: float, *, formulation: str = "mixed", mesh=None, nr: int = 12, nt: int = 24,
                        E: float = 1000.0, a: float = 3.0, b: float = 9.0, p: float = 1.0,
                        backend: str = "auto") -> dict:
    """MacNeal & Harder's thick-walled cylinder (benchmarks.md 2.4): quarter ring a..b, internal
    pressure p, plane strain (u_z held on both end faces), symmetry on x = 0 and y = 0.

    ``mesh``: ``(points, cells)`` of a quarter ring of height 1 (e.g. from the ``quarter_ring``
    builder); default :func:`meshes.quarter_ring_mesh` (``nr`` × ``nt``, one layer, curved cells).
    Errors against Lamé's solution (``handcalc.thick_cylinder``, Timoshenko & Goodier) at every
    bore node (corner and mid-side), the nodally averaged stress.

    Returns
    -------
    dict: ``u_error`` max |u_r/u_r,exact − 1|, ``hoop_error`` max |σ_θ/σ_θ,exact − 1|,
    ``radial_error`` max |σ_r − σ_r,exact| / p, the exact bore values ``u_r``, ``hoop``, ``radial``,
    ``dof``.
    """
    from ..handcalc.solids import thick_cylinder

    lam, mu = _lame(E, nu)
    pts, cells = quarter_ring_mesh(a, b, 1.0, nr, nt, 1, 2) if mesh is None else mesh
    r = np.hypot(pts[:, 0], pts[:, 1])
    at, bore = _bore_nodes(pts, cells, r, a)
    f = pressure_load(pts, bore, p)
    top = float(pts[:, 2].max())
    held = np.unique(np.concatenate([_plane_dofs(pts, 2, 0.0, 2), _plane_dofs(pts, 2, top, 2),
                                     _plane_dofs(pts, 0, 0.0, 0), _plane_dofs(pts, 1, 0.0, 1)]))
    u, s = solve_formulation(pts, cells, lam, mu, formulation, f, held, backend=backend)
    c, sn = pts[at, 0] / r[at], pts[at, 1] / r[at]
    ur = u[at, 0] * c + u[at, 1] * sn
    hoop = sn * sn * s[at, 0] + c * c * s[at, 1] - 2 * c * sn * s[at, 3]
    radial = c * c * s[at, 0] + sn * sn * s[at, 1] + 2 * c * sn * s[at, 3]
    ex = thick_cylinder(a, a, b, p, E=E, nu=nu, end_condition="plane_strain")
    return {"u_error": float(np.abs(ur / ex.u_r - 1).max()),
            "hoop_error": float(np.abs(hoop / ex.sigma_theta - 1).max()),
            "radial_error": float(np.abs(radial - ex.sigma_r).max() / p), "u_r": float(ex.u_r),
            "hoop": float(ex.sigma_theta), "radial": float(ex.sigma_r), "dof": 3 * pts.shape[0]}


def thick_sphere_test(nu: float, mesh, *, formulation: str = "mixed", E: float = 1000.0, a: float = 1.0,
                      b: float = 2.0, p: float = 1.0, backend: str = "auto") -> dict:
    """Thick hollow sphere under internal pressure p: one octant ``mesh = (points, cells)`` (the
    ``spherical_shell`` builder), symmetry on the three coordinate planes. Errors against Lamé's
    solution (``handcalc.thick_sphere``, Timoshenko & Goodier) at every bore node.

    Returns
    -------
    dict: ``u_error``, ``hoop_error`` (tangential stress, relative), ``radial_error`` (|Δσ_r| / p),
    the exact bore values and ``dof``.
    """
    from ..handcalc.solids import thick_sphere

    lam, mu = _lame(E, nu)
    pts, cells = mesh
    r = np.linalg.norm(pts, axis=1)
    at, bore = _bore_nodes(pts, cells, r, a)
    f = pressure_load(pts, bore, p)
    held = np.unique(np.concatenate([_plane_dofs(pts, i, 0.0, i) for i in range(3)]))
    u, s = solve_formulation(pts, cells, lam, mu, formulation, f, held, backend=backend)
    nrm = pts[at] / r[at, None]
    ur = np.sum(u[at] * nrm, axis=1)
    S = tensor_of(s[at])
    radial = np.einsum("ni,nij,nj->n", nrm, S, nrm)
    tangential = 0.5 * (np.trace(S, axis1=1, axis2=2) - radial)
    ex = thick_sphere(a, a, b, p, E=E, nu=nu)
    return {"u_error": float(np.abs(ur / ex.u_r - 1).max()),
            "hoop_error": float(np.abs(tangential / ex.sigma_t - 1).max()),
            "radial_error": float(np.abs(radial - ex.sigma_r).max() / p), "u_r": float(ex.u_r),
            "hoop": float(ex.sigma_t), "radial": float(ex.sigma_r), "dof": 3 * pts.shape[0]}


def tensor_of(s: np.ndarray) -> np.ndarray:
    """Symmetric tensors ``(p, 3, 3)`` from Voigt stresses ``(p, 6)`` (xx, yy, zz, xy, yz, xz)."""
    i, j = np.array([0, 1, 2, 0, 1, 0]), np.array([0, 1, 2, 1, 2, 2])
    T = np.zeros(s.shape[:-1] + (3, 3))
    T[..., i, j] = s
    T[..., j, i] = s
    return T


#: Cook's membrane, nearly incompressible plane strain (benchmarks.md section 3): λ = 7500, G = 0.375.
COOK_LAME = (7500.0, 0.375)


def cook_membrane_test(ns=(4, 8, 16), *, formulation: str = "mixed", lam: float = COOK_LAME[0],
                       mu: float = COOK_LAME[1], backend: str = "auto") -> dict:
    """Cook's tapered panel (R. D. Cook, J. Struct. Div. ASCE 100 (1974)) as a slab of thickness 1
    in plane strain (u_z held at every node), clamped at x = 0, a vertical shear of total 1
    spread uniformly over the edge x = 48, on n × n meshes (:func:`meshes.cook_membrane_mesh`).

    Returns
    -------
    dict: ``n`` (k,), ``tip`` (k,) vertical displacement at C = (48, 52) (mean over the nodes there),
    ``orders`` (k−2,) observed orders log2(|Δ_i| / |Δ_{i+1}|) (meshes halving h), ``extrapolated``
    Richardson's limit from the last three, ``dof`` (k,), ``tip_finest`` and ``order_min`` (the
    finest mesh's value and the smallest observed order, for the catalogue).
    """
    tips, dofs = [], []
    for n in ns:
        pts, cells = cook_membrane_mesh(n, 2)
        faces = boundary_faces(cells)
        right = faces[np.all(np.abs(pts[faces[:, :3], 0] - 48.0) < 1e-9, axis=1)]
        f = traction_load(pts, right, np.array([0.0, 1.0 / 16.0, 0.0]))
        clamp = np.flatnonzero(np.abs(pts[:, 0]) < 1e-9)
        held = np.unique(np.concatenate([3 * np.arange(pts.shape[0]) + 2, 3 * clamp, 3 * clamp + 1]))
        K = assemble_stiffness_for(pts, cells, lam, mu, formulation)
        u = solve_prescribed(K, f, held, np.zeros(held.size), backend).reshape(-1, 3)
        C = np.flatnonzero((np.abs(pts[:, 0] - 48.0) < 1e-9) & (np.abs(pts[:, 1] - 52.0) < 1e-9))
        tips.append(float(u[C, 1].mean()))
        dofs.append(3 * pts.shape[0])
    t = np.array(tips)
    d = np.abs(np.diff(t))
    orders = np.log2(d[:-1] / d[1:]) if t.size >= 3 else np.zeros(0)
    extrap = float(t[-1] + (t[-1] - t[-2]) / (2.0 ** orders[-1] - 1.0)) if t.size >= 3 else float("nan")
    return {"n": np.array(ns), "tip": t, "orders": orders, "extrapolated": extrap, "dof": np.array(dofs),
            "tip_finest": float(t[-1]), "order_min": float(orders.min()) if orders.size else float("nan")}


def inf_sup_constants(points: np.ndarray, cells: np.ndarray, pressure: str = "P0", count: int = 3) -> dict:
    """Discrete inf–sup constants of the 10-node displacement with a discontinuous pressure
    (``"P0"`` constant or ``"P1"`` linear per cell), every boundary node held (dense: small meshes).

    β_h² are the generalised eigenvalues of ``B A⁻¹ Bᵀ q = β² M q`` with ``A`` the H¹-type form
    ``∫ ε(u) : ε(v) dV`` on the free DOFs, ``B`` the divergence ``∫ q div v dV`` and ``M`` the
    pressure mass (Brezzi & Fortin 1991, the discrete inf–sup condition; the numerical test as
    D. Chapelle, K. J. Bathe, Comput. Struct. 47 (1993) 537–545, from memory). A stable pair keeps
    the smallest non-zero β_h bounded away from zero as the mesh is refined; zero eigenvalues
    beyond the constant pressure are spurious pressure modes.

    Returns
    -------
    dict: ``zero`` the number of zero eigenvalues (≤ 1e-10 of the largest; 1 = only the constant),
    ``beta`` (count,) the smallest non-zero β_h, ``pressures`` the number of pressure unknowns.
    """
    import scipy.linalg as sl
    import scipy.sparse as sp
    import scipy.sparse.linalg as sla

    from ..fem.assembly import assemble_stiffness, cell_dofs, gradients
    from ..fem.elements import element_for
    from ..fem.quadrature import tet_rule

    el = element_for(cells.shape[1])
    n, m = points.shape[0], cells.shape[0]
    A = assemble_stiffness(points, cells, 0.0, 0.5)  # ∫ 2·0.5 ε:ε
    bnd = np.unique(boundary_faces(cells))
    free = np.ones(3 * n, dtype=bool)
    free[(3 * bnd[:, None] + np.arange(3)).ravel()] = False
    rule = tet_rule(5)
    G, det = gradients(points[cells], el, rule.points)
    w = det * rule.weights
    if pressure == "P0":
        Q = np.ones((rule.points.shape[0], 1))
    elif pressure == "P1":
        Q = np.column_stack([1 - rule.points.sum(axis=1), rule.points])
    else:
        raise ValueError(f"pressure must be 'P0' or 'P1', got {pressure!r}")
    b = np.einsum("eq,qj,eqki->ejki", w, Q, G).reshape(m, Q.shape[1], -1)
    M = np.einsum("eq,qi,qj->eij", w, Q, Q)
    npc = Q.shape[1]
    rows = np.broadcast_to((np.arange(m)[:, None] * npc + np.arange(npc))[:, :, None], b.shape)
    cols = np.broadcast_to(cell_dofs(cells)[:, None, :], b.shape)
    B = sp.csr_matrix((b.ravel(), (rows.ravel(), cols.ravel())), shape=(m * npc, 3 * n))[:, free]
    lu = sla.splu(A[free][:, free].tocsc())
    S = B @ lu.solve(B.T.toarray())
    ev = sl.eigh(0.5 * (S + S.T), sl.block_diag(*M), eigvals_only=True)
    zero = int(np.sum(ev <= 1e-10 * ev.max()))
    return {"zero": zero, "beta": np.sqrt(ev[zero:zero + count]), "pressures": m * npc}


#: Registry of the code-defined benchmarks the catalogue may name.
CODE_CASES = {"solid_patch": solid_patch_test, "convergence": convergence_study,
              "uniaxial_block": uniaxial_block_test, "thick_cylinder": thick_cylinder_test,
              "cook_membrane": cook_membrane_test}
