"""Time of k load cases solved from one factorisation against k separate runs.

Run:  PYTHONPATH=. python benchmarks/load_cases.py [--size 2.0] [--k 1 2 5 10]

A cantilever bar 100 x 10 x 10 (10-node tetrahedra) gets k load cases (tip forces in turn along
y, z, x and a top pressure, cycled). For each k it prints the wall time of one run with k named
load cases, of k separate single-case runs (each meshing, assembling and factorising again), and
of k separate runs on a mesh made once (so only assembly and solve repeat), with the ratios.
"""
from __future__ import annotations

import argparse
import platform
import tempfile
import time
from pathlib import Path

import elastofe
from elastofe.case import parse_case
from elastofe.geometry import gmsh_session


def make_bar(path: Path) -> Path:
    with gmsh_session() as gmsh:
        gmsh.model.occ.addBox(0, -5, -5, 100, 10, 10)
        gmsh.model.occ.synchronize()
        gmsh.write(str(path))
    return path


LOADS = [{"region": "tip", "force": [0, -100, 0]}, {"region": "tip", "force": [0, 0, -100]},
         {"region": "tip", "force": [1000, 0, 0]}, {"region": "top", "pressure": 0.01}]


def doc(step: Path, size: float, k: int, named: bool) -> dict:
    loads = []
    for j in range(k):
        ld = dict(LOADS[j % len(LOADS)])
        if named:
            ld["case"] = f"c{j + 1}"
        loads.append(ld)
    return {"geometry": {"file": str(step)}, "material": {"E": 200000.0, "nu": 0.3},
            "mesh": {"order": 2, "size": size},
            "regions": {"root": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}},
                        "tip": {"plane": {"point": [100, 0, 0], "normal": [1, 0, 0]}},
                        "top": {"plane": {"point": [0, 0, 5], "normal": [0, 0, 1]}}},
            "support": [{"region": "root", "fix": "xyz"}], "load": loads,
            "point": [{"name": "tip", "at": [100, 0, 0]}]}


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=float, default=2.0, help="element size (default 2.0)")
    ap.add_argument("--k", type=int, nargs="+", default=[1, 2, 5, 10])
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as d:
        step = make_bar(Path(d) / "bar.step")
        mesh = elastofe.solve_case(parse_case(doc(step, args.size, 1, False))).mesh
        print(f"elastofe {elastofe.__version__}, Python {platform.python_version()}, {platform.machine()}; "
              f"{time.strftime('%Y-%m-%d')}")
        print(f"cantilever, 10-node tetrahedra: {mesh.nodes:,} nodes, {3 * mesh.nodes:,} DOF")
        print(f"{'k':>3} {'one run, k cases':>17} {'k full runs':>12} {'ratio':>6} "
              f"{'k runs, mesh reused':>20} {'ratio':>6}  {'solve share':>11}")
        for k in args.k:
            t = time.perf_counter()
            res = elastofe.solve_case(parse_case(doc(step, args.size, k, k > 1)))
            t_one = time.perf_counter() - t
            t = time.perf_counter()
            for j in range(k):
                elastofe.solve_case(parse_case(doc(step, args.size, 1, False) | {"load": [LOADS[j % len(LOADS)]]}))
            t_full = time.perf_counter() - t
            t = time.perf_counter()
            for j in range(k):
                elastofe.solve_case(parse_case(doc(step, args.size, 1, False) | {"load": [LOADS[j % len(LOADS)]]}),
                                    mesh=res.mesh)
            t_mesh = time.perf_counter() - t
            share = res.timings["solve"] / sum(res.timings.values())
            print(f"{k:>3} {t_one:>15.2f} s {t_full:>10.2f} s {t_full / t_one:>6.2f} {t_mesh:>18.2f} s "
                  f"{t_mesh / t_one:>6.2f}  {100 * share:>10.0f} %")


if __name__ == "__main__":
    main()
