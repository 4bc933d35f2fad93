"""The eigen stages of a run: natural frequencies and mode shapes (``[modes]``) and linear buckling
load factors (``[buckling]``), on the same mesh, supports and stiffness as the static solve.

Supports are eliminated from the mass and geometric stiffness exactly as from the stiffness
(:mod:`elastofe.elimination`, rotated nodal frames included); the solvers see arrays only
(:func:`elastofe.solve.natural_modes`, :func:`elastofe.solve.buckling_factors`), with the rigid-body
modes on the free DOFs as near-nullspace built here from the mesh.
"""
from __future__ import annotations

import math
import time
from typing import Optional

import numpy as np
import scipy.sparse as sp

from . import solve as solvers
from .case.schema import Case
from .elimination import reduce_system
from .errors import CaseError, ModelError, SolverError
from .fem.geometric import assemble_geometric
from .fem.mass import assemble_mass
from .fem.mixed import element_nodal_stress_for
from .fem.nullspace import amg_options, rigid_modes
from .post.fields import materials_of
from .post.modal import modal_mass, name_rigid_modes
from .post.run import combination_weights
from .progress import Progress, quiet
from .result import BucklingModes, Model, Modes
from .solve.eigen import SHIFT_INVERT_SOLVES

__all__ = ["solve_modes", "solve_buckling", "expand_shapes"]


#: Why an element the stiffness accepted may fail the mass or geometric stiffness: their quadrature
#: has more points, and a 10-node element whose mid-side nodes fold it near a corner shows a
#: negative Jacobian only there.
FOLDED = ("; a 10-node element folded by its mid-side nodes (a coarse mesh on a curved surface) is "
          "inverted at points the stiffness does not sample: refine the mesh there (mesh.size or "
          "mesh.refine) or use mesh.order = 1")


def _reduced_matrix(A: sp.spmatrix, free: np.ndarray, T: Optional[sp.spmatrix]) -> sp.csr_matrix:
    """``A`` in the local nodal frames, restricted to the free DOFs."""
    Al = (T @ A @ T.T).tocsr() if T is not None else sp.csr_matrix(A)
    return Al[free][:, free].tocsr()


def expand_shapes(V: np.ndarray, free: np.ndarray, T: Optional[sp.spmatrix], n: int) -> np.ndarray:
    """Shapes ``(p, n, 3)`` in global components from vectors ``(f, p)`` on the free (local) DOFs,
    each scaled to a largest displacement magnitude of 1."""
    p = V.shape[1]
    full = np.zeros((3 * n, p))
    full[free] = V
    if T is not None:
        full = T.T @ full
    shapes = full.T.reshape(p, n, 3)
    mag = np.linalg.norm(shapes, axis=2).max(axis=1)
    return shapes / np.where(mag > 0, mag, 1.0)[:, None, None]


def _solver_options(case: Case, model: Model, free: np.ndarray, T, backend: str) -> dict:
    if backend != "amg":
        return {}
    return amg_options(model.mesh.points, model.mesh.cells, free, transform=T)


def solve_modes(case: Case, model: Model, K: sp.csr_matrix, progress: Progress = quiet,
                timings: Optional[dict] = None) -> Modes:
    """The lowest ``case.modes.count`` natural modes of the supported part.

    A part with free rigid-body motions is allowed: those modes come out at zero frequency and are
    named. Frequencies in Hz (every consistent unit system of the case has the second as time unit).
    """
    t0 = time.perf_counter()
    spec = case.modes
    assert spec is not None
    mesh = model.mesh
    n = mesh.nodes
    ndof = 3 * n
    materials = materials_of(case, model)
    for mat in materials.materials:
        if mat.density is None:  # the loader refuses this; kept for cases built in code
            raise CaseError(f"{mat.key}.density", None, "is required by [modes] (the mass matrix)")
    # Each body's own density (a scalar for a part of one material).
    try:
        M = assemble_mass(mesh.points, mesh.cells, materials.per_cell([mat.density for mat in materials.materials]))
    except ValueError as err:
        raise ModelError(f"the mass matrix cannot be built: {err}{FOLDED}") from None
    T = model.held.transform(ndof)
    red = reduce_system(K, np.zeros(ndof), model.held.dofs, np.zeros(model.held.dofs.size), T)
    Mff = _reduced_matrix(M, red.free, T)
    R = rigid_modes(mesh.points)
    B = (T @ R if T is not None else R)[red.free]
    nfree = int(red.free.sum())
    count = min(spec.count, nfree - 1) if nfree > 1 else 1
    backend = solvers.choose_backend(case.solver.backend, nfree, nrhs=SHIFT_INVERT_SOLVES)
    progress("modes", f"{count} natural mode(s) of {nfree:,} free DOF with {backend} ...")
    try:
        eig = solvers.natural_modes(red.K, Mff, count, backend=backend, near_nullspace=B, progress=progress,
                                    **_solver_options(case, model, red.free, T, backend))
    except SolverError as err:
        raise ModelError(f"the natural modes could not be computed: {err}") from None
    V, labels = name_rigid_modes(Mff, eig.vectors, B)
    # Effective masses along the directions in which some mass can move (a direction held at every
    # node, as in a plane-strain slab, moves none and gets zero).
    D = B[:, :3]
    moving = np.einsum("ij,ij->j", D, Mff @ D) > 0
    frac = np.zeros((V.shape[1], 3))
    cum = np.zeros((V.shape[1], 3))
    total = np.zeros(3)
    if moving.any():
        mm = modal_mass(Mff, V, D[:, moving])
        frac[:, moving], cum[:, moving], total[moving] = mm.fraction, mm.cumulative, mm.total
    omega2 = np.asarray(eig.values, dtype=float)
    freq = np.sqrt(np.clip(omega2, 0.0, None)) / (2.0 * math.pi)
    for i, lab in enumerate(labels):
        if lab is not None:
            freq[i] = 0.0
    dt = time.perf_counter() - t0
    if timings is not None:
        timings["modes"] = dt
    elastic = [f for f, lab in zip(freq, labels) if lab is None]
    first = f"first elastic mode {elastic[0]:.5g} Hz" if elastic else "no elastic mode among them"
    rigid = sum(lab is not None for lab in labels)
    progress("modes", f"{len(freq)} mode(s): {first}" + (f"; {rigid} rigid-body mode(s) at 0 Hz" if rigid else "")
             + f" ({dt:.2f} s, {eig.method})")
    return Modes(frequencies=freq, omega2=omega2, shapes=expand_shapes(V, red.free, T, n),
                 effective_mass=frac, cumulative=cum, moving_mass=total,
                 rigid=tuple(labels), method=eig.method, info=dict(eig.info))


def _reference_state(case: Case, model: Model, U: np.ndarray) -> tuple[str, np.ndarray, Optional[np.ndarray]]:
    """(name, u (3n,), temperature (n,) or None) of the load case or combination that buckles."""
    groups = model.groups
    name = case.buckling.load_case if case.buckling is not None else None
    if name is None:
        return groups[0][0], U[:, 0], model.temperatures[0]
    for j, (g, _) in enumerate(groups):
        if g == name:
            return g, U[:, j], model.temperatures[j]
    for comb, w in combination_weights(case, groups):
        if comb.name == name:
            T = None
            for j, temp in enumerate(model.temperatures):
                if temp is not None and w[j] != 0:
                    T = w[j] * temp if T is None else T + w[j] * temp
            return name, U @ w, T
    raise CaseError("buckling.load_case", name, "is not a load case or combination of this case")


def solve_buckling(case: Case, model: Model, K: sp.csr_matrix, U: np.ndarray, progress: Progress = quiet,
                   timings: Optional[dict] = None) -> BucklingModes:
    """The lowest ``case.buckling.count`` linear buckling load factors of a load case's stress state.

    ``(K + λ K_σ) φ = 0`` with the geometric stiffness ``K_σ`` of the static stress (thermal part
    taken out) at each cell's own nodes. Linear buckling is an upper bound that imperfections and
    plasticity lower (Timoshenko & Gere, Theory of Elastic Stability, 1961).
    """
    t0 = time.perf_counter()
    spec = case.buckling
    assert spec is not None
    mesh = model.mesh
    n = mesh.nodes
    ndof = 3 * n
    name, u, temperature = _reference_state(case, model, U)
    materials = materials_of(case, model)
    lam, mu = materials.lame()  # per cell for a part of several materials
    s_el = element_nodal_stress_for(mesh.points, mesh.cells, u.reshape(-1, 3), lam, mu, model.formulation,
                                    delta_t=temperature,
                                    coefficient=materials.per_cell(materials.thermal_coefficients()))
    try:
        Kg = assemble_geometric(mesh.points, mesh.cells, s_el)
    except ValueError as err:
        raise ModelError(f"the geometric stiffness cannot be built: {err}{FOLDED}") from None
    T = model.held.transform(ndof)
    red = reduce_system(K, np.zeros(ndof), model.held.dofs, np.zeros(model.held.dofs.size), T)
    Kgff = _reduced_matrix(Kg, red.free, T)
    nfree = int(red.free.sum())
    backend = solvers.choose_backend(case.solver.backend, nfree, nrhs=SHIFT_INVERT_SOLVES)
    what = f"load case {name!r}" if name else "the case's loads"
    progress("buckling", f"{spec.count} buckling factor(s) of {what} with {backend} ...")
    try:
        res = solvers.buckling_factors(red.K, Kgff, min(spec.count, max(nfree - 1, 1)), backend=backend,
                                       progress=progress, **_solver_options(case, model, red.free, T, backend))
    except SolverError as err:
        raise ModelError(f"the buckling factors could not be computed: {err}") from None
    dt = time.perf_counter() - t0
    if timings is not None:
        timings["buckling"] = dt
    factors = np.asarray(res.factors, dtype=float)
    note = None
    if factors.size < spec.count:
        note = (f"only {factors.size} of the {spec.count} factors asked for exist below the range where the "
                "stress would exceed a quarter of the modulus: the load compresses too little to buckle the part")
    progress("buckling", (f"first factor {factors[0]:.5g}" if factors.size else "no buckling factor found")
             + f" ({dt:.2f} s, {res.method})")
    return BucklingModes(factors=factors, shapes=expand_shapes(res.vectors, red.free, T, n) if factors.size
                         else np.zeros((0, n, 3)), load_case=name or None, method=res.method, note=note,
                         info=dict(res.info))
