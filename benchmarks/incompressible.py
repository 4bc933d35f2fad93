"""Nearly incompressible materials: the displacement element against the mixed one (fem/mixed.py).

Run:  PYTHONPATH=. python benchmarks/incompressible.py [--solver-size 0.25] [--skip-solvers]

Prints, for ν = 0.3 ... 0.4999 and both formulations (``disp`` the displacement element, ``mixed``
the condensed P2–P0 element):

1. the thick cylinder (MacNeal & Harder; Lamé) on the code-built curved mesh (12 × 24) and on the
   catalogue's Gmsh mesh (size 0.4): largest error over the bore nodes of u_r, σ_θ, σ_r;
2. the thick sphere (Lamé; Gmsh octant refined towards the bore), the same errors;
3. a plate with a hole in plane strain (Gmsh): the peak σ_xx at the hole beside the ν = 0.3
   displacement-element value on the same mesh (in-plane stresses of plane strain do not depend on
   ν, so the two should agree): where the two formulations cross over (``MIXED_NU``);
4. Cook's membrane (λ = 7500, G = 0.375) tip displacement on 4 meshes with observed orders;
5. solvers on the condensed system of a Gmsh cylinder (``--solver-size``): PARDISO and SuperLU
   times and residuals, and the iterations of PETSc's CG + GAMG (``petsc``, residual reduction
   1e-10, rigid-body near-nullspace, held DOFs as identity rows) and of our multigrid CG (``amg``: p-multigrid and
   plain smoothed aggregation, energy-norm tolerance 1e-6), for both formulations;
6. assembly time of both formulations on the same mesh.

Figures only: no assertion. Timings depend on the machine's load (2 shared cores here).
"""
from __future__ import annotations

import argparse
import platform
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from elastofe import solve as solvers
from elastofe.fem.assembly import assemble_stiffness
from elastofe.fem.mixed import (
    assemble_stiffness_for,
    assemble_stiffness_mixed,
    average_at_nodes,
    element_nodal_stress_for,
)
from elastofe.fem.nullspace import amg_options
from elastofe.fem.surface import pressure_load, traction_load
from elastofe.geometry import mesh_geometry
from elastofe.verify import builders
from elastofe.verify import element_cases as ec
from elastofe.verify.element_cases import solve_prescribed

NUS = (0.3, 0.45, 0.49, 0.499, 0.4999)
FORMS = ("displacement", "mixed")


def lame(E, nu):
    return E * nu / ((1 + nu) * (1 - 2 * nu)), E / (2 * (1 + nu))


def lame_tables(tmp: Path) -> None:
    ring = mesh_geometry(builders.quarter_ring(tmp / "ring.msh", 2, 0.4, a=3.0, b=9.0, heights=[1.0], layers=[1]))
    sphere = mesh_geometry(builders.spherical_shell(tmp / "sphere.msh", 2, 0.3, a=1.0, b=2.0, bore_size=0.06,
                                                    growth=0.4))
    cases = [("thick cylinder, code mesh 12 x 24 (curved cells)",
              lambda nu, f: ec.thick_cylinder_test(nu, formulation=f)),
             ("thick cylinder, Gmsh mesh size 0.4", lambda nu, f: ec.thick_cylinder_test(
                 nu, formulation=f, mesh=(ring.points, ring.cells))),
             ("thick sphere a = 1, b = 2, Gmsh octant, bore size 0.06",
              lambda nu, f: ec.thick_sphere_test(nu, (sphere.points, sphere.cells), formulation=f))]
    for title, run in cases:
        print(f"\n{title}: largest error over the bore nodes (u_r, σ_t relative; σ_r over p)")
        print(f"{'ν':>7}  {'disp u_r':>9} {'σ_θ':>9} {'σ_r':>9}   {'mixed u_r':>9} {'σ_θ':>9} {'σ_r':>9}   DOF")
        for nu in NUS:
            row = [run(nu, f) for f in FORMS]
            cells = "   ".join(" ".join(f"{100 * r[k]:8.2f}%" for k in ("u_error", "hoop_error", "radial_error"))
                               for r in row)
            print(f"{nu:7.4f}  {cells}   {row[0]['dof']:,}")


def holed_plate(tmp: Path) -> None:
    R, L = 1.0, 8.0
    m = mesh_geometry(builders.holed_plate(tmp / "plate.msh", 2, 1.5, half_length=L, half_width=L, radius=R,
                                           heights=[0.5], layers=[1], hole_size=0.1, growth=0.3))
    pts, cells = m.points, m.cells
    face_x = m.faces[np.all(np.abs(pts[m.faces[:, :3], 0] - L) < 1e-9, axis=1)]
    f = traction_load(pts, face_x, np.array([1.0, 0, 0]))
    held = np.unique(np.concatenate([3 * np.arange(pts.shape[0]) + 2, 3 * np.flatnonzero(np.abs(pts[:, 0]) < 1e-9),
                                     3 * np.flatnonzero(np.abs(pts[:, 1]) < 1e-9) + 1]))
    top = np.flatnonzero((np.abs(pts[:, 0]) < 1e-9) & (np.abs(np.hypot(pts[:, 0], pts[:, 1]) - R) < 1e-6))
    print(f"\nplate with a hole (R = 1, 16 x 16, plane strain, unit tension), {3 * pts.shape[0]:,} DOF:"
          " mean nodal σ_xx at the hole's top (Kirsch: 3 for an infinite plate)")
    print(f"{'ν':>7}  {'disp':>8} {'mixed':>8}")
    ref = None
    for nu in NUS:
        lam, mu = lame(1000.0, nu)
        vals = []
        for form in FORMS:
            K = assemble_stiffness_for(pts, cells, lam, mu, form)
            u = solve_prescribed(K, f, held, np.zeros(held.size)).reshape(-1, 3)
            s = element_nodal_stress_for(pts, cells, u, lam, mu, form)
            vals.append(float(average_at_nodes(cells, s, pts.shape[0])[top, 0].mean()))
        ref = vals[0] if ref is None else ref
        print(f"{nu:7.4f}  {vals[0]:8.4f} {vals[1]:8.4f}   (ν = 0.3 displacement element: {ref:.4f})")


def cook() -> None:
    print("\nCook's membrane, plane strain, λ = 7500, G = 0.375: tip displacement at C (regression value "
          "16.4326, unpublished)")
    for form in FORMS:
        r = ec.cook_membrane_test((4, 8, 16, 32), formulation=form)
        tips = "  ".join(f"{t:.4f}" for t in r["tip"])
        orders = ", ".join(f"{o:.2f}" for o in r["orders"])
        print(f"  {form:12s} n = 4, 8, 16, 32: {tips}   observed orders {orders}   Richardson {r['extrapolated']:.4f}")


def solver_table(tmp: Path, size: float) -> None:
    m = mesh_geometry(builders.quarter_ring(tmp / "ring_s.msh", 2, size, a=3.0, b=9.0, heights=[1.0], layers=[2]))
    pts, cells = m.points, m.cells
    r = np.hypot(pts[:, 0], pts[:, 1])
    bore = m.faces[np.all(np.abs(r[m.faces] - 3.0) < 1e-6, axis=1)]
    f = pressure_load(pts, bore, 1.0)
    z = pts[:, 2]
    held = np.unique(np.concatenate([3 * np.flatnonzero((np.abs(z) < 1e-9) | (np.abs(z - 1) < 1e-9)) + 2,
                                     3 * np.flatnonzero(np.abs(pts[:, 0]) < 1e-9),
                                     3 * np.flatnonzero(np.abs(pts[:, 1]) < 1e-9) + 1]))
    free = np.ones(3 * pts.shape[0], dtype=bool)
    free[held] = False
    print(f"\nsolvers on a Gmsh thick cylinder (size {size}, 2 layers): {int(free.sum()):,} free DOF;"
          " direct: time and relative residual; amg: CG iterations to tol 1e-6 and time")
    have = solvers.available_backends()
    print(f"{'ν':>7} {'element':>13}  {'pardiso':>16} {'scipy':>16}  {'petsc GAMG':>17} {'amg p-multigrid':>17}"
          f" {'amg SA':>17}")
    for nu in (0.3, 0.49, 0.499, 0.4999):
        lam, mu = lame(1000.0, nu)
        for form in FORMS:
            Kff = assemble_stiffness_for(pts, cells, lam, mu, form)[free][:, free].tocsr()
            b = f[free]
            out = []
            for backend in ("pardiso", "scipy"):
                if backend not in have:
                    out.append(f"{'n/a':>16}")
                    continue
                t = time.perf_counter()
                sol = solvers.solve(Kff, b, backend=backend)
                out.append(f"{time.perf_counter() - t:6.1f} s {sol.residual:7.1e}")
            if "petsc" in have:
                # GAMG needs whole nodes for its rigid-body near-nullspace: the full matrix with the
                # held DOFs' rows and columns replaced by the identity (same free-DOF solution).
                K = assemble_stiffness_for(pts, cells, lam, mu, form)
                keep = sp.diags(free.astype(float))
                Kfull = (keep @ K @ keep + sp.diags((~free).astype(float))).tocsr()
                t = time.perf_counter()
                try:
                    fac = solvers.factorize(Kfull, "petsc", coordinates=pts, maxiter=5000)
                    fac.solve(np.where(free, f, 0.0))
                    out.append(f"{fac.iterations:5d} it {time.perf_counter() - t:5.1f} s")
                except solvers.SolverError as err:
                    out.append(f"failed: {err}"[:17])
            else:
                out.append("n/a")
            for pmg in (True, False):
                t = time.perf_counter()
                try:
                    sol = solvers.solve(Kff, b, backend="amg", tol=1e-6, maxiter=3000,
                                        **amg_options(pts, cells, free, p_multigrid=pmg))
                    out.append(f"{sol.info['iterations'][0]:5d} it {time.perf_counter() - t:5.1f} s")
                except solvers.SolverError as err:
                    out.append(f"failed: {err}"[:17])
            print(f"{nu:7.4f} {form:>13}  {out[0]} {out[1]}  {out[2]:>17} {out[3]:>17} {out[4]:>17}", flush=True)


def assembly_time(tmp: Path, size: float) -> None:
    m = mesh_geometry(builders.quarter_ring(tmp / "ring_a.msh", 2, size, a=3.0, b=9.0, heights=[1.0], layers=[2]))
    lam, mu = lame(1000.0, 0.4999)
    times = {}
    for name, fn in (("displacement", assemble_stiffness), ("mixed", assemble_stiffness_mixed)):
        best = np.inf
        for _ in range(3):
            t = time.perf_counter()
            fn(m.points, m.cells, lam, mu)
            best = min(best, time.perf_counter() - t)
        times[name] = best
    print(f"\nassembly, {m.cells.shape[0]:,} cells ({3 * m.points.shape[0]:,} DOF), best of 3: displacement "
          f"{times['displacement']:.2f} s, mixed {times['mixed']:.2f} s "
          f"(ratio {times['mixed'] / times['displacement']:.2f})")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--solver-size", type=float, default=0.25, help="element size of the solver mesh")
    ap.add_argument("--skip-solvers", action="store_true", help="leave out the solver table (the slow part)")
    args = ap.parse_args()
    print(f"Python {platform.python_version()}, {platform.machine()}; {time.strftime('%Y-%m-%d')}")
    with tempfile.TemporaryDirectory() as d:
        tmp = Path(d)
        lame_tables(tmp)
        holed_plate(tmp)
        cook()
        assembly_time(tmp, args.solver_size)
        if not args.skip_solvers:
            solver_table(tmp, args.solver_size)


if __name__ == "__main__":
    main()
