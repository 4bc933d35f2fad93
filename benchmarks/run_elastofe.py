"""Worker: one elastofe run of the benchmark cantilever; prints one JSON line (used by compare.py).

python benchmarks/run_elastofe.py --h 0.128 --dir DIR [--solver auto] [--loadcases 10] [--backends a,b]
"""
from __future__ import annotations

import argparse
import json
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from benchmarks.cantilever import L, write_case
from benchmarks.memory import StagePeaks


def main(argv=None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--h", type=float, required=True)
    ap.add_argument("--dir", required=True)
    ap.add_argument("--solver", default="auto")
    ap.add_argument("--loadcases", type=int, default=0, help="also time k load cases against one")
    ap.add_argument("--backends", default="", help="also time these backends on the same system")
    args = ap.parse_args(argv)

    from elastofe import solve as solvers
    from elastofe.case import load_case
    from elastofe.fem.assembly import assemble_stiffness
    from elastofe.output import write_results
    from elastofe.pipeline import solve_case

    folder = Path(args.dir)
    folder.mkdir(parents=True, exist_ok=True)
    case = load_case(write_case(folder, args.h))
    case = replace(case, solver=replace(case.solver, backend=args.solver))
    peaks = StagePeaks()
    info = {}

    def progress(stage: str, message: str) -> None:
        if stage == "mesh" and " DOF " in message:
            peaks.mark("mesh")
        elif stage == "assembly":
            peaks.mark("assembly")
        elif stage == "solve" and message.startswith("solving"):
            peaks.mark("loads")  # the free-DOF system extraction sits between assembly and solve
        elif stage == "solve" and "relative residual" in message:
            peaks.mark("solve")

    t0 = time.perf_counter()
    res = solve_case(case, progress)
    peaks.mark("recovery")
    t = time.perf_counter()
    write_results(res, folder / "out")
    t_write = time.perf_counter() - t
    peaks.mark("write")
    total = time.perf_counter() - t0
    mesh = res.mesh
    corners = np.unique(mesh.cells[:, :4])
    tip = corners[np.abs(mesh.points[corners, 0] - L) < 1e-9 * L]
    np.savez(folder / "mesh.npz", points=mesh.points, cells=mesh.cells)
    tm = dict(res.timings)
    out = {
        "library": "elastofe", "dofs": int(res.dofs), "nodes": int(mesh.nodes), "cells": int(mesh.cells.shape[0]),
        "backend": res.backend,
        "time": {"mesh": tm["mesh"], "loads": tm["loads"], "assembly": tm["assembly"], "solve": tm["solve"],
                 "recovery": tm["recovery"] + tm["post"], "write": t_write, "total": total},
        "peak_mib": {**peaks.peaks, "total": peaks.process_peak},
        "tip_mean_uy": float(res.u[tip, 1].mean()),
        "tip_point_uy": float(res.points["tip"]["displacement"][1]),
    }

    if args.loadcases or args.backends:
        lam, mu = case.material.lame
        K = assemble_stiffness(mesh.points, mesh.cells, lam, mu)
        held = res.held
        free = np.ones(K.shape[0], dtype=bool)
        free[held.dofs] = False
        Kff = K[free][:, free].tocsr()
        del K
        f = np.zeros(3 * mesh.nodes)
        for ld in res.loads:
            f += ld.f
        b = f[free]
        from elastofe.fem.nullspace import amg_options

        def opts(name):
            return amg_options(mesh.points, mesh.cells, free) if name == "amg" else {}

        if args.backends:
            info["backends"] = {}
            ref = None
            for name in [s for s in args.backends.split(",") if s]:
                if not solvers.BACKENDS[name][1]():
                    continue
                t = time.perf_counter()
                fac = solvers.factorize(Kff, name, tol=case.solver.tol, **opts(name))
                t_setup = time.perf_counter() - t
                u = fac.solve(b)
                t_all = time.perf_counter() - t
                ref = u if ref is None else ref
                info["backends"][name] = {"setup": t_setup, "total": t_all,
                                          "iterations": fac.info.get("iterations"),
                                          "max_rel_diff": float(np.abs(u - ref).max() / np.abs(ref).max())}
                del fac
        if args.loadcases:
            k = args.loadcases
            rng = np.random.default_rng(1)
            # k load cases: the tip force turned to random directions (our own scenario): the
            # y load's nodal pattern moved onto x, y and z and mixed.
            F3 = f.reshape(-1, 3)[:, 1]
            dirs = rng.normal(size=(k, 3))
            B = np.column_stack([(F3[:, None] * d).ravel()[free] for d in dirs])
            info["loadcases"] = {}
            # (CHOLMOD left out: with OpenBLAS's threads on a shared, oversubscribed 2-core machine its
            # times varied by 10-100x from run to run, which says nothing about reuse.)
            for name in [n for n in ("pardiso", "amg") if solvers.BACKENDS[n][1]()]:
                t = time.perf_counter()
                solvers.solve(Kff, b, backend=name, tol=case.solver.tol, **opts(name))
                one = time.perf_counter() - t
                t = time.perf_counter()
                solvers.solve(Kff, B, backend=name, tol=case.solver.tol, **opts(name))
                many = time.perf_counter() - t
                info["loadcases"][name] = {"k": k, "one": one, "many": many}
    out.update(info)
    print(json.dumps(out))
    return 0


if __name__ == "__main__":
    sys.exit(main())
