"""Worker: the reference route with scikit-fem on the mesh elastofe wrote; prints one JSON line.

Its own elasticity form (``linear_elasticity``), its 10-node element (``ElementVector(ElementTetP2())``),
assembled and solved as its documentation shows (``asm``, ``condense``, ``solve``, which calls
scipy's default ``spsolve``), stresses by L2 projection onto discontinuous linear elements.
The 4-point rule (``intorder=2``) is exact for this form on straight cells, as elastofe's.

python benchmarks/run_reference.py --dir DIR [--solver spsolve|pardiso]
"""
from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from benchmarks.cantilever import FORCE, NU, B, E, H, L
from benchmarks.memory import StagePeaks


def main(argv=None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--dir", required=True)
    ap.add_argument("--solver", default="spsolve")
    args = ap.parse_args(argv)
    import skfem
    from skfem import Basis, ElementTetP2, ElementVector, FacetBasis, LinearForm, MeshTet, asm, condense, solve
    from skfem.helpers import dot, sym_grad
    from skfem.models.elasticity import lame_parameters, linear_elasticity, linear_stress

    data = np.load(Path(args.dir) / "mesh.npz")
    points, cells = data["points"], data["cells"]
    peaks = StagePeaks()
    T = {}
    t0 = time.perf_counter()

    # The same corner nodes and cells; scikit-fem makes its own (straight) edge nodes.
    corners = np.unique(cells[:, :4])
    renum = np.full(points.shape[0], -1)
    renum[corners] = np.arange(corners.size)
    m = MeshTet(np.ascontiguousarray(points[corners].T), np.ascontiguousarray(renum[cells[:, :4]].T))
    e = ElementVector(ElementTetP2())
    t = time.perf_counter()
    ib = Basis(m, e, intorder=2)
    K = asm(linear_elasticity(*lame_parameters(E, NU)), ib)
    T["assembly"] = time.perf_counter() - t
    peaks.mark("assembly")

    t = time.perf_counter()
    traction = np.array([0.0, FORCE / (B * H), 0.0])

    @LinearForm
    def load(v, w):
        return dot(traction, v)

    fb = FacetBasis(m, e, facets=m.facets_satisfying(lambda x: np.isclose(x[0], L)), intorder=4)
    f = asm(load, fb)
    D = ib.get_dofs(lambda x: np.isclose(x[0], 0.0)).all()
    T["loads"] = time.perf_counter() - t
    peaks.mark("loads")

    t = time.perf_counter()
    if args.solver == "spsolve":
        u = solve(*condense(K, f, D=D))  # scipy's default spsolve (SuperLU)
    else:  # only to check agreement at sizes where spsolve would take far too long
        from elastofe.solve import factorize
        Kc, fc, x, I = condense(K, f, D=D)
        x = x.copy()
        x[I] = factorize(Kc.tocsr(), args.solver).solve(fc)
        u = x
    T["solve"] = time.perf_counter() - t
    peaks.mark("solve")

    t = time.perf_counter()
    C = linear_stress(*lame_parameters(E, NU))
    sig = C(sym_grad(ib.interpolate(u)))
    pb = ib.with_element(skfem.ElementDG(skfem.ElementTetP1()))
    s = {ij: pb.project(sig[ij[0], ij[1]]) for ij in ((0, 0), (1, 1), (2, 2), (0, 1), (1, 2), (0, 2))}
    vm = np.sqrt(0.5 * ((s[0, 0] - s[1, 1]) ** 2 + (s[1, 1] - s[2, 2]) ** 2 + (s[2, 2] - s[0, 0]) ** 2)
                 + 3 * (s[0, 1] ** 2 + s[1, 2] ** 2 + s[0, 2] ** 2))
    T["recovery"] = time.perf_counter() - t
    peaks.mark("recovery")
    T["total"] = time.perf_counter() - t0

    tip = np.flatnonzero(np.abs(m.p[0] - L) < 1e-9 * L)
    out = {"library": "scikit-fem", "version": skfem.__version__, "solver": args.solver,
           "dofs": int(ib.N), "time": T, "peak_mib": {**peaks.peaks, "total": peaks.process_peak},
           "tip_mean_uy": float(u[ib.nodal_dofs[1, tip]].mean()), "max_von_mises": float(vm.max())}
    print(json.dumps(out))
    return 0


if __name__ == "__main__":
    sys.exit(main())
