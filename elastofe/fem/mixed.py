"""Nearly incompressible elasticity on 10-node tetrahedra: the displacement–pressure element with an
element-wise constant pressure, condensed at element level (the P2–P0 pair, "mean dilatation").

Formulation
-----------
The stress is split into a deviatoric part from the displacement and an independent pressure
(mean stress, positive in tension) ``σ = 2μ dev ε(u) + p I``. With the bulk modulus
``κ = λ + 2μ/3`` and an initial volumetric strain ``θ₀`` (a temperature load: ``θ₀ = 3 α ΔT``),
the mixed weak form is::

    ∫ 2μ dev ε(v) : dev ε(u) dV + ∫ p div v dV = ℓ(v)        for all v   (quadratic, TET10)
    ∫ q (div u − θ₀ − p / κ) dV = 0                           for all q   (constant per element)

Because the pressure is discontinuous and constant per element, the second equation gives it
element by element, ``p_e = κ_e (θ̄_e − θ̄₀_e)`` with the element means
``θ̄_e = (1/V_e) ∫ div u dV = b_eᵀ u_e / V_e``, ``b_e = ∫_e ∇N dV`` (3k,). Substituted into the
first, the pressure is condensed out and the element stiffness is::

    K_e = ∫ 2μ Bᵀ P_dev B dV  +  (κ_e / V_e) b_e b_eᵀ

symmetric positive semi-definite with the same node-to-node pattern as the displacement element,
so the global matrix stays symmetric positive definite once supported and every solver backend
(direct, multigrid, PETSc) applies unchanged. This is Hughes' B̄ method with the mean dilatation
(Nagtegaal, Parks & Rice, Comput. Methods Appl. Mech. Eng. 4 (1974) 153–177; T. J. R. Hughes,
The Finite Element Method, Dover 2000, ch. 4, "mixed and penalty methods", the B̄ method and its
equivalence with the mixed form; O. C. Zienkiewicz, R. L. Taylor, The Finite Element Method,
vol. 1, ch. "incompressible materials, mixed methods", u–p elements with discontinuous pressure
condensed per element; chapter and section numbers from memory).

Why constant pressure (P2–P0) and not linear (P2–P1 discontinuous)
-------------------------------------------------------------------
* P2–P0 satisfies the inf–sup (LBB) condition, so the pressure and the stresses stay bounded as
  ν → 1/2 (F. Brezzi, M. Fortin, Mixed and Hybrid Finite Element Methods, Springer 1991, and
  D. Boffi, F. Brezzi, M. Fortin, Mixed Finite Element Methods and Applications, Springer 2013,
  ch. 8: the P2–P0 element, stable in 2D by the edge-flux Fortin operator; its 3D status there is
  from memory). Measured here (``verify.element_cases.inf_sup_constants``, every boundary node
  held): on distorted cube meshes β_h = 0.051, 0.071, 0.080 for 3, 4, 5 boxes per side, only the
  constant pressure in the kernel, i.e. bounded. On the exactly regular Kuhn split of a cube
  (``meshes.structured_cube``) it is not: three spurious pressure modes and β_h ≈ 0.45 h, modes
  that live in the layer of cells at the held boundary. A mesh from Gmsh is never that regular.
* P2–P1 discontinuous on tetrahedra over-constrains: a tetrahedral mesh has about 6 tetrahedra
  and 7 edges per vertex, i.e. about 3 × 8 = 24 displacement equations against 4 × 6 = 24 pressure
  constraints per vertex, Hughes' constraint ratio about 1 where 3 is ideal in 3D (Hughes 2000,
  ch. 4, constraint counting; a ratio ≤ 1 locks). It is stable only with cubic face and quartic
  interior bubbles added to the displacement (the 3D Crouzeix–Raviart element, Boffi–Brezzi–Fortin
  ch. 8), whose face bubbles are shared between elements and cannot be condensed locally.
  Measured: 273 of its 648 pressure modes on the 3-box distorted cube are spurious (zero β).
* P2–P1 continuous (Taylor–Hood) is stable and second order in the pressure, but its pressure is
  global: a symmetric indefinite saddle-point system that neither a Cholesky-type solver nor
  smoothed-aggregation multigrid accepts.

Known limits
------------
* The pressure (hydrostatic stress) is constant per element: first order, O(h), where it varies;
  the displacement error in the energy norm is then O(h) too in the incompressible limit (the
  quasi-optimality bound is the sum of the best displacement and best pressure approximation
  errors, Brezzi–Fortin). The nodal average of the element pressures (what the nodal stresses
  carry) is much better inside the part (measured RMS error falling about as h^1.6 on a
  manufactured solution) but stays first order at boundary nodes. Where the exact pressure is
  constant, as in the thick cylinder and sphere of Lamé, nothing of this shows. Next to curved
  loaded surfaces the element pressures oscillate about the exact value when ν → 1/2 (±50 % of
  a small mean stress on a coarse sphere); the oscillation shrinks with the mesh size there.
* For ordinary ν the displacement element is second order in the stresses; hence
  :func:`choose_formulation` selects this element only from :data:`MIXED_NU` on (measurements
  there).
* ν = 1/2 exactly (κ infinite) is not possible: the condensation needs 1/κ > 0, and without it the
  pressure is a global unknown (a saddle point). Up to ν = 0.4999 (κ/μ ≈ 5000) the condensed
  system is fine for the direct solvers; its condition number grows like κ/μ, as the displacement
  element's does, and the multigrid CG's iterations like √(κ/μ) (13, 51, 175, 535 at ν = 0.3,
  0.49, 0.499, 0.4999 on a cylinder with 57k free DOF; the displacement element needs as many).
* Each element matrix has, besides the six rigid-body modes, three zero-energy modes: the
  quadratic conformal fields ``2 (a·d) d − |d|² a`` about its centroid ``d = x − x_c`` (no
  deviatoric strain, zero mean dilatation). They differ from element to element, so neighbours
  restrain them (a mesh is never singular through them; the tests check the global matrix).
* 4-node tetrahedra: the dilatation of a linear element is constant, so this element is identical
  to the displacement element there (P1–P0 locks); :func:`choose_formulation` never selects it.

Temperature loads
-----------------
A thermal strain ``α ΔT I`` is volumetric, so it enters only the pressure equation and only
through its element mean ``ΔT̄_e``: the load is ``f_e = c ΔT̄_e b_e`` (:func:`thermal_load_mixed`)
and the pressure ``p_e = κ θ̄_e − c ΔT̄_e`` with ``c = (3λ + 2μ) α = 3κα``. Subtracting ``c ΔT`` at
the nodes afterwards, as the displacement element's recovery does, would be inconsistent: near
ν = 1/2 the difference between the nodal and the mean ΔT, times ``c``, is of the size of the
stresses themselves. So for the mixed element the stresses come out with the thermal part
already taken out (``delta_t`` and ``coefficient`` of :func:`element_nodal_stress_mixed`); the
caller must not subtract it again. For a temperature uniform over each element the loads of both
elements are the same.

Arrays: ``points (n, 3)`` [length], ``cells (m, k)`` (k = 10, or 4), DOF ``3*node + component``,
stresses in Voigt order xx, yy, zz, xy, yz, xz [stress]; ``lam``, ``mu`` scalars or ``(m,)``
per cell [stress].
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .assembly import (
    ASSEMBLY_BLOCK,
    BLOCK,
    StiffnessPattern,
    affine_jacobians,
    affine_operator,
    affine_products,
    assemble_stiffness,
    check_det,
    element_blocks,
    element_stiffness,
    gradients,
    stiffness_rule,
    strain_displacement,
    stress_at,
    thermal_load,
)
from .elements import element_for

__all__ = [
    "FORMULATIONS",
    "MIXED_NU",
    "assemble_stiffness_for",
    "assemble_stiffness_mixed",
    "average_at_nodes",
    "bulk_modulus",
    "choose_formulation",
    "dilatation_operators",
    "element_nodal_stress_for",
    "element_nodal_stress_mixed",
    "element_pressure",
    "nodal_stress_mixed",
    "stress_at_mixed",
    "thermal_load_for",
    "thermal_load_mixed",
]

#: Poisson's ratio from which 10-node meshes use the mixed element. The two elements cross over
#: between ν = 0.45 and 0.49 depending on the problem (``benchmarks/incompressible.py``): on the
#: Gmsh thick cylinder (catalogue mesh) the displacement element's largest bore hoop-stress error is
#: 1.0 % at ν = 0.3, 2.4 % at 0.45, 5.7 % at 0.48 and 11 % at 0.49, the mixed one's 0.6 %
#: throughout; on a plate with a hole in plane strain the mixed element's peak stress is 1 % below
#: the displacement element's at 0.45, and 1.5 % above it (the displacement element then 3 % low)
#: at 0.49. 0.45 (λ/μ = 9) keeps the displacement element where its error is still small.
MIXED_NU = 0.45

#: The formulations :func:`choose_formulation` may return.
FORMULATIONS = ("displacement", "mixed")


def choose_formulation(nu, nodes_per_cell: int) -> str:
    """The element formulation for Poisson's ratio ``nu`` on cells with ``nodes_per_cell`` nodes.

    ``"mixed"`` (this module) for 10-node cells with ν ≥ :data:`MIXED_NU`; ``"displacement"``
    (``fem.assembly``, bit-for-bit today's element) otherwise, and always for 4-node cells (on a
    linear tetrahedron the mixed element equals the displacement one).

    Parameters
    ----------
    nu : float or (m,) array
        Poisson's ratio; for per-cell materials the largest decides (the mixed element is valid
        for every ν, so a part with one rubber-like material uses it throughout).
    nodes_per_cell : int
        4 or 10.
    """
    element_for(nodes_per_cell)  # raises for an unknown cell type
    nu_max = float(np.max(np.asarray(nu, dtype=float)))
    return "mixed" if nodes_per_cell == 10 and nu_max >= MIXED_NU else "displacement"


def bulk_modulus(lam, mu):
    """κ = λ + 2μ/3 [stress], scalar or per cell."""
    return np.asarray(lam, dtype=float) + 2.0 * np.asarray(mu, dtype=float) / 3.0


def _per_cell(value, m: int, name: str) -> np.ndarray:
    a = np.asarray(value, dtype=float)
    if a.ndim == 0:
        return np.full(m, float(a))
    if a.shape != (m,):
        raise ValueError(f"{name} must be a scalar or one value per cell ({m},), got shape {a.shape}")
    return a


def _reference_sums(el, rule) -> tuple[np.ndarray, np.ndarray]:
    """``Σ_q w_q dN(ξ_q)`` (k, 3) and ``Σ_q w_q N(ξ_q)`` (k,): the integrals of a straight cell per det J."""
    return (np.einsum("q,qkl->kl", rule.weights, el.grad(rule.points)),
            rule.weights @ el.shape(rule.points))


def dilatation_operators(points: np.ndarray, cells: np.ndarray, sel: np.ndarray, rule,
                         straight: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-cell integrals behind the element pressure, for the cells ``sel (e,)``.

    Returns
    -------
    b : (e, k, 3) ``∫ ∂N_a/∂x_i dV`` [length²]; ``b[e].ravel() · u_e = ∫ div u dV``.
    vol : (e,) cell volumes [length³].
    wN : (e, k) ``∫ N_a dV`` [length³] (the weights of a nodal field's element mean).

    Straight cells use the constant Jacobian. On curved (quadratic-geometry) cells all three are
    polynomials of degree ≤ 5 in the reference coordinates (``det J ∂N/∂x = ∂N/∂ξ adj J`` is cubic,
    ``det J N`` quintic), so the degree-5 rule integrates them exactly.
    """
    el = element_for(cells.shape[1])
    X = points[cells[sel]]
    if straight:
        det, Jinv = affine_jacobians(X, el)
        check_det(det, sel)
        Rb, Rn = _reference_sums(el, rule)
        b = det[:, None, None] * np.einsum("kl,eli->eki", Rb, Jinv)
        vol = det * rule.weights.sum()
        wN = det[:, None] * Rn[None, :]
    else:
        G, det = gradients(X, el, rule.points)
        check_det(det, sel)
        wdet = det * rule.weights  # (e, q)
        b = np.einsum("eq,eqki->eki", wdet, G)
        vol = wdet.sum(axis=1)
        wN = wdet @ el.shape(rule.points)
    return b, vol, wN


def assemble_stiffness_mixed(points: np.ndarray, cells: np.ndarray, lam, mu, *,
                             pattern: StiffnessPattern | None = None, block: int = ASSEMBLY_BLOCK) -> sp.csr_matrix:
    """Global stiffness ``(3n, 3n)`` (CSR, sorted, the same pattern as ``assemble_stiffness``) of the
    condensed displacement–pressure element (module docstring).

    Parameters
    ----------
    points : (n, 3) node coordinates [length].
    cells : (m, 10) node indices, VTK order (4-node cells are accepted and give the displacement
        element's matrix to round-off).
    lam, mu : Lamé constants [stress], scalars or ``(m,)`` per cell.
    pattern : StiffnessPattern, optional; one built for these ``cells``.
    block : elements per batch.

    Raises
    ------
    ValueError
        When a cell has a non-positive Jacobian determinant, ``lam``/``mu`` have a wrong shape, or
        the material is incompressible (ν = 0.5: infinite bulk modulus) or not positive definite.
    """
    n, m = points.shape[0], cells.shape[0]
    el = element_for(cells.shape[1])
    lam_c, mu_c = _per_cell(lam, m, "lam"), _per_cell(mu, m, "mu")
    kappa = bulk_modulus(lam_c, mu_c)
    if not (np.all(np.isfinite(kappa)) and np.all(kappa > 0) and np.all(mu_c > 0)):
        raise ValueError("the mixed element needs a finite bulk modulus and a positive shear modulus "
                         "(ν strictly between -1 and 0.5)")
    if pattern is None:
        pattern = StiffnessPattern(cells, n)
    data = np.zeros(pattern.nnz)
    which, rules = stiffness_rule(points, cells)
    # The deviatoric energy 2μ dev ε : dev ε is the Lamé form with λ = −2μ/3: linear in μ.
    Q_dev = affine_operator(el, rules[0], -2.0 / 3.0, 1.0)
    for blk, rule in element_blocks(points, cells, block, which, rules):
        straight = rule is rules[0]
        X = points[cells[blk]]
        if straight:  # one BLAS product per block, as in assemble_stiffness
            det, Jinv = affine_jacobians(X, el)
            check_det(det, blk)
            Ke = mu_c[blk, None] * (affine_products(det, Jinv) @ Q_dev)
        else:
            G, det = gradients(X, el, rule.points)
            check_det(det, blk)
            Ke = element_stiffness(G, det * rule.weights * mu_c[blk, None], -2.0 / 3.0, 1.0).reshape(len(blk), -1)
        b, vol, _ = dilatation_operators(points, cells, blk, rule, straight)
        bf = b.reshape(len(blk), -1)
        Ke = Ke.reshape(len(blk), bf.shape[1], bf.shape[1])
        Ke += (kappa[blk] / vol)[:, None, None] * bf[:, :, None] * bf[:, None, :]
        np.add.at(data, pattern.dof_positions(cells, blk).ravel(), Ke.ravel())
    return pattern.matrix(data)


def _blocks(points: np.ndarray, cells: np.ndarray, block: int = BLOCK):
    """``(sel, rule, straight)`` per block of cells, grouped as the stiffness groups them."""
    which, rules = stiffness_rule(points, cells)
    for sel, rule in element_blocks(points, cells, block, which, rules):
        yield sel, rule, rule is rules[0]


def _element_means(points, cells, u, delta_t):
    """Mean dilatation ``θ̄ (m,)`` of ``u (n, 3)`` and mean of ``delta_t (n,)`` (or None) per cell."""
    m = cells.shape[0]
    theta = np.empty(m)
    tbar = np.empty(m) if delta_t is not None else None
    for blk, rule, straight in _blocks(points, cells):
        b, vol, wN = dilatation_operators(points, cells, blk, rule, straight)
        c = cells[blk]
        theta[blk] = np.einsum("eki,eki->e", b, u[c]) / vol
        if tbar is not None:
            tbar[blk] = np.einsum("ek,ek->e", wN, delta_t[c]) / vol
    return theta, tbar


def element_pressure(points: np.ndarray, cells: np.ndarray, u: np.ndarray, lam, mu, *,
                     delta_t: np.ndarray | None = None, coefficient=0.0) -> np.ndarray:
    """The condensed pressure of each element ``p (m,)`` [stress], mean stress positive in tension.

    ``p_e = κ_e θ̄_e − c_e ΔT̄_e``: the mean dilatation of ``u (n, 3)`` [length] times the bulk
    modulus, less the thermal part, with ``ΔT̄_e`` the element mean of the nodal temperature change
    ``delta_t (n,)`` [K] and ``coefficient`` ``c = (3λ + 2μ) α = 3κα`` [stress/K] (scalar or
    ``(m,)``), as in ``fem.assembly.thermal_load``.
    """
    m = cells.shape[0]
    theta, tbar = _element_means(points, cells, np.asarray(u, dtype=float).reshape(-1, 3), delta_t)
    p = bulk_modulus(_per_cell(lam, m, "lam"), _per_cell(mu, m, "mu")) * theta
    if tbar is not None:
        p -= _per_cell(coefficient, m, "coefficient") * tbar
    return p


def thermal_load_mixed(points: np.ndarray, cells: np.ndarray, delta_t: np.ndarray, coefficient) -> np.ndarray:
    """Equivalent nodal forces ``(3n,)`` of the thermal strain ``α ΔT I`` for the mixed element.

    The initial volumetric strain enters the element's pressure equation, which only sees its
    element mean, so ``f_e = c_e ΔT̄_e b_e`` (module docstring) with ``c = (3λ + 2μ) α`` [stress/K]
    (scalar or ``(m,)``) and ``delta_t (n,)`` [K]. For a temperature uniform over each element this
    equals ``fem.assembly.thermal_load``; for a varying one it is the load consistent with the
    condensed pressure (the displacement element's load would leave a residual of order κ ΔT α in
    every element and spoil the stresses as ν → 1/2).
    """
    n, m = points.shape[0], cells.shape[0]
    c_cell = _per_cell(coefficient, m, "coefficient")
    f = np.zeros((n, 3))
    for blk, rule, straight in _blocks(points, cells):
        b, vol, wN = dilatation_operators(points, cells, blk, rule, straight)
        c = cells[blk]
        tbar = np.einsum("ek,ek->e", wN, delta_t[c]) / vol
        fe = (c_cell[blk] * tbar)[:, None, None] * b
        for i in range(3):
            f[:, i] += np.bincount(c.ravel(), weights=fe[..., i].ravel(), minlength=n)
    return f.ravel()


def stress_at_mixed(points: np.ndarray, cells: np.ndarray, u: np.ndarray, xi: np.ndarray, lam, mu, *,
                    delta_t: np.ndarray | None = None, coefficient=0.0) -> np.ndarray:
    """Stress ``(m, q, 6)`` [stress] of every cell at reference points ``xi (q, 3)``.

    ``σ = 2μ dev ε(u) + p_e I``: the deviatoric part from the displacement gradient at the point,
    the hydrostatic part the element's condensed pressure (:func:`element_pressure`, thermal part
    taken out when ``delta_t`` is given). ``u (n, 3)`` [length].
    """
    el = element_for(cells.shape[1])
    m = cells.shape[0]
    u = np.asarray(u, dtype=float).reshape(-1, 3)
    mu_c = _per_cell(mu, m, "mu")
    p = element_pressure(points, cells, u, lam, mu, delta_t=delta_t, coefficient=coefficient)
    out = np.empty((m, xi.shape[0], 6))
    for s in range(0, m, BLOCK):
        c = cells[s:s + BLOCK]
        G, _ = gradients(points[c], el, xi)
        eps = strain_displacement(G, u[c])  # (e, q, 6), engineering shear
        tr = eps[..., :3].sum(axis=-1, keepdims=True)
        mu_b = mu_c[s:s + BLOCK, None, None]
        sig = np.empty_like(eps)
        sig[..., :3] = 2.0 * mu_b * (eps[..., :3] - tr / 3.0) + p[s:s + BLOCK, None, None]
        sig[..., 3:] = mu_b * eps[..., 3:]
        out[s:s + BLOCK] = sig
    return out


def element_nodal_stress_mixed(points: np.ndarray, cells: np.ndarray, u: np.ndarray, lam, mu, *,
                               delta_t: np.ndarray | None = None, coefficient=0.0) -> np.ndarray:
    """Stress of each element at its own nodes ``(m, k, 6)`` [stress] (see :func:`stress_at_mixed`).

    The replacement of the displacement element's ``stress_at(..., el.ref_nodes, ...)``. With
    ``delta_t`` and ``coefficient`` the thermal part is already out: do not subtract it again.
    """
    el = element_for(cells.shape[1])
    return stress_at_mixed(points, cells, u, el.ref_nodes, lam, mu, delta_t=delta_t, coefficient=coefficient)


def nodal_stress_mixed(points: np.ndarray, cells: np.ndarray, u: np.ndarray, lam, mu, *,
                       delta_t: np.ndarray | None = None, coefficient=0.0) -> tuple[np.ndarray, np.ndarray]:
    """Nodal stresses averaged over the elements sharing each node, as ``post.recovery.nodal_stress``.

    Returns
    -------
    averaged : (n, 6) [stress]
    element_nodal : (m, k, 6) the unaveraged values (:func:`element_nodal_stress_mixed`).
    """
    s_el = element_nodal_stress_mixed(points, cells, u, lam, mu, delta_t=delta_t, coefficient=coefficient)
    return average_at_nodes(cells, s_el, points.shape[0]), s_el


def average_at_nodes(cells: np.ndarray, element_nodal: np.ndarray, n: int) -> np.ndarray:
    """Node-wise mean ``(n, c)`` of element-nodal values ``(m, k, c)`` over the cells sharing each
    node (nodes in no cell get 0)."""
    flat = cells.ravel()
    count = np.maximum(np.bincount(flat, minlength=n), 1).astype(float)
    c = element_nodal.shape[-1]
    avg = np.stack([np.bincount(flat, weights=element_nodal[..., j].ravel(), minlength=n) for j in range(c)], axis=1)
    return avg / count[:, None]


# ----------------------------------------------------------------------------- one call per stage
def _check_formulation(formulation: str) -> None:
    if formulation not in FORMULATIONS:
        raise ValueError(f"unknown formulation {formulation!r}; known: {FORMULATIONS}")


def assemble_stiffness_for(points: np.ndarray, cells: np.ndarray, lam, mu, formulation: str, *,
                           pattern: StiffnessPattern | None = None) -> sp.csr_matrix:
    """The stiffness ``(3n, 3n)`` of ``formulation`` (from :func:`choose_formulation`).

    ``"displacement"`` calls ``fem.assembly.assemble_stiffness`` unchanged (scalar ``lam``, ``mu``);
    ``"mixed"`` calls :func:`assemble_stiffness_mixed` (scalars or ``(m,)`` per cell). Both give
    the same CSR pattern, so a ``pattern`` built once serves either.
    """
    _check_formulation(formulation)
    if formulation == "mixed":
        return assemble_stiffness_mixed(points, cells, lam, mu, pattern=pattern)
    return assemble_stiffness(points, cells, lam, mu, pattern=pattern)


def thermal_load_for(points: np.ndarray, cells: np.ndarray, delta_t: np.ndarray, coefficient,
                     formulation: str) -> np.ndarray:
    """Nodal forces ``(3n,)`` of the thermal strain ``α ΔT I`` consistent with ``formulation``.

    ``delta_t (n,)`` [K]; ``coefficient`` ``(3λ + 2μ) α`` [stress/K] (scalar; ``(m,)`` for the
    mixed element). See ``fem.assembly.thermal_load`` and :func:`thermal_load_mixed`.
    """
    _check_formulation(formulation)
    if formulation == "mixed":
        return thermal_load_mixed(points, cells, delta_t, coefficient)
    return thermal_load(points, cells, delta_t, coefficient)


def element_nodal_stress_for(points: np.ndarray, cells: np.ndarray, u: np.ndarray, lam, mu, formulation: str, *,
                             delta_t: np.ndarray | None = None, coefficient=0.0) -> np.ndarray:
    """Stress of each element at its own nodes ``(m, k, 6)`` [stress] for ``formulation``, with the
    thermal part taken out when ``delta_t (n,)`` [K] is given.

    ``"displacement"``: Hooke's law on the displacement gradient at the nodes (``stress_at`` at the
    reference nodes), less ``coefficient · ΔT`` at each node on the normal components, as the
    pipeline does today. ``"mixed"``: :func:`element_nodal_stress_mixed` (the thermal part is in the
    element pressure, through the element mean of ΔT). ``u (n, 3)`` [length].
    """
    _check_formulation(formulation)
    if formulation == "mixed":
        return element_nodal_stress_mixed(points, cells, u, lam, mu, delta_t=delta_t, coefficient=coefficient)
    el = element_for(cells.shape[1])
    s = stress_at(points, cells, np.asarray(u, dtype=float).reshape(-1, 3), el.ref_nodes, lam, mu)
    if delta_t is not None:
        s[..., :3] -= (coefficient * np.asarray(delta_t, dtype=float)[cells])[..., None]
    return s
