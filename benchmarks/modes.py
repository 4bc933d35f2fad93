"""Time of the first natural modes against one static solve of the same model, side by side.

Run:  PYTHONPATH=. python benchmarks/modes.py [--sizes 0.25 0.18 0.132] [--count 10] [--lobpcg]

The model is the benchmark cantilever of ``benchmarks/cantilever.py`` (10 x 1 x 1, 10-node
tetrahedra, root face held, steel-like with density 7850 kg/m³, a tip traction for the static
case). For each element size it assembles K and M once, eliminates the root, and times:

- static: factorise K_ff and solve one load case, with the backend the static pipeline would
  choose (``choose_backend(..., nrhs=1)``: PARDISO up to 50k DOF, multigrid CG above) and with
  PARDISO alone;
- modes: ``natural_modes(K_ff, M_ff, count, method="shift-invert")``: ARPACK's Lanczos on a PARDISO
  factorisation (the automatic choice up to 400k DOF), split into factorisation and iterations
  (one solve per Lanczos vector; the last column gives one solve's cost over the factorisation's);
- with ``--lobpcg``: LOBPCG with the multigrid preconditioner (no factorisation).

It prints the figures, the ratio modes / static, and the growth exponents between sizes.
MKL's thread count is MKL's own setting (``MKL_NUM_THREADS``): on a shared machine a solve phase
with two threads suffers more from other work than the factorisation does, so compare both.
"""
from __future__ import annotations

import argparse
import math
import platform
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import cantilever

from elastofe.fem.assembly import StiffnessPattern, assemble_stiffness
from elastofe.fem.mass import assemble_mass
from elastofe.fem.nullspace import amg_options, rigid_modes
from elastofe.fem.surface import traction_load
from elastofe.geometry import mesh_geometry
from elastofe.mesh import boundary_faces
from elastofe.solve import choose_backend, factorize, natural_modes

RHO = 7850.0


def model(step: Path, h: float):
    mesh = mesh_geometry(step, order=2, size=h, threads=2)
    p, c = mesh.points, mesh.cells
    lam = cantilever.E * cantilever.NU / ((1 + cantilever.NU) * (1 - 2 * cantilever.NU))
    mu = cantilever.E / (2 * (1 + cantilever.NU))
    t = time.perf_counter()
    pat = StiffnessPattern(c, p.shape[0])
    K = assemble_stiffness(p, c, lam, mu, pattern=pat)
    M = assemble_mass(p, c, RHO, pattern=pat)
    t_asm = time.perf_counter() - t
    faces = boundary_faces(c)
    tip = np.abs(p[:, 0] - cantilever.L) < 1e-9
    f = traction_load(p, faces[tip[faces].all(axis=1)], np.array([0.0, cantilever.FORCE, 0.0]))
    free = ~np.repeat(p[:, 0] < 1e-9, 3)
    Kf, Mf = K[free][:, free].tocsr(), M[free][:, free].tocsr()
    return p, c, free, Kf, Mf, f[free], t_asm


def static(Kf, b, backend, options):
    t = time.perf_counter()
    fac = factorize(Kf, backend, **options)
    t_f = time.perf_counter() - t
    fac.solve(b)
    return time.perf_counter() - t, t_f, fac.backend


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=float, nargs="+", default=[0.25, 0.18, 0.132],
                    help="element sizes (0.25: ~20k DOF, 0.132: ~100k DOF)")
    ap.add_argument("--count", type=int, default=10)
    ap.add_argument("--lobpcg", action="store_true", help="also time LOBPCG with the multigrid preconditioner")
    args = ap.parse_args(argv)
    print(f"Python {platform.python_version()}, {platform.machine()}; {time.strftime('%Y-%m-%d %H:%M')}")
    rows = []
    with tempfile.TemporaryDirectory() as d:
        step = cantilever.write_step(Path(d) / "bar.step")
        for h in args.sizes:
            p, c, free, Kf, Mf, b, t_asm = model(step, h)
            n = Kf.shape[0]
            opts = amg_options(p, c, free)
            auto = choose_backend("auto", n)
            t_static, t_sf, name = static(Kf, b, auto, opts if auto == "amg" else {})
            t_pardiso, t_pf, _ = static(Kf, b, "pardiso", {}) if auto != "pardiso" else (t_static, t_sf, "pardiso")
            B = rigid_modes(p)[free]
            t = time.perf_counter()
            res = natural_modes(Kf, Mf, args.count, near_nullspace=B, method="shift-invert", backend="pardiso")
            t_modes = time.perf_counter() - t

            f = np.sqrt(res.values) / (2 * math.pi)
            row = {"h": h, "n": n, "asm": t_asm, "static": t_static, "static_name": name, "pardiso": t_pardiso,
                       "modes": t_modes, "fact": res.info.get("factorise_s", 0.0),
                       "lanczos": res.info.get("iterate_s", 0.0),
                       "solves": res.info.get("solves", 0), "method": res.method, "f1": f[0]}
            if args.lobpcg:
                t = time.perf_counter()
                r2 = natural_modes(Kf, Mf, args.count, method="lobpcg", backend="amg", **opts)
                row["lobpcg"] = time.perf_counter() - t
                row["lobpcg_it"] = r2.info.get("iterations")
                row["lobpcg_dev"] = float(np.max(np.abs(r2.values / res.values - 1)))
            rows.append(row)
            print(f"h = {h:g}: {n:,} free DOF; assembly of K and M {t_asm:.2f} s; "
                  f"static ({name}) {t_static:.2f} s, static (pardiso) {t_pardiso:.2f} s "
                  f"[factorisation {t_pf:.2f} s]; {args.count} modes ({res.method}) {t_modes:.2f} s "
                  f"[factorisation {row['fact']:.2f} s + Lanczos {row['lanczos']:.2f} s, {row['solves']} solves]; "
                  f"f1 = {f[0]:.3f} Hz" + (f"; LOBPCG {row['lobpcg']:.1f} s ({row['lobpcg_it']} iterations, "
                                            f"largest deviation {row['lobpcg_dev']:.1e})" if args.lobpcg else ""),
                  flush=True)
    print()
    print(f"{'DOF':>9} {'static auto':>12} {'static PARDISO':>15} {'modes':>8} {'modes/static':>13} "
          f"{'modes/PARDISO':>14} {'solve/factorisation':>20}"
          + (f" {'LOBPCG':>8} {'LOBPCG/static':>14}" if args.lobpcg else ""))
    for r in rows:
        per_solve = r["lanczos"] / max(r["solves"], 1) / max(r["fact"], 1e-9)
        print(f"{r['n']:>9,} {r['static']:>10.2f} s {r['pardiso']:>13.2f} s {r['modes']:>6.2f} s "
              f"{r['modes'] / r['static']:>13.2f} {r['modes'] / r['pardiso']:>14.2f} {per_solve:>20.3f}"
              + (f" {r['lobpcg']:>6.1f} s {r['lobpcg'] / r['static']:>14.1f}" if args.lobpcg else ""))
    if len(rows) > 1:
        a, z = rows[0], rows[-1]

        def g(key):
            return math.log(z[key] / a[key]) / math.log(z["n"] / a["n"])

        print(f"growth from {a['n']:,} to {z['n']:,} DOF: static ~DOF^{g('static'):.2f}, "
              f"static PARDISO ~DOF^{g('pardiso'):.2f}, modes ~DOF^{g('modes'):.2f}"
              + (f", LOBPCG ~DOF^{g('lobpcg'):.2f}" if args.lobpcg else ""))


if __name__ == "__main__":
    main()
