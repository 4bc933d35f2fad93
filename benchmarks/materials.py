"""What several materials cost: assembly and stress recovery with per-cell Lamé parameters and
nodes split at the body interfaces, against one material on the same mesh.

Run:  PYTHONPATH=. python benchmarks/materials.py [--n 30 30 20] [--repeat 3]

A structured block of 10-node tetrahedra (n_x x n_y x n_z cubes, six tetrahedra each) is cut into two
bodies at x = 0.5. For one material (scalars) and for two (per-cell arrays) it prints the best of
``--repeat`` wall times of ``assemble_stiffness``, of ``nodal_stresses`` (one field; averaged at the
mesh nodes for one body, at the split nodes for two) and of the body bookkeeping a run adds
(``assign_materials``, ``body_nodes``, ``interfaces``), with the ratios.
"""
from __future__ import annotations

import argparse
import platform
import time

import numpy as np

from elastofe.bodies import assign_materials, interfaces
from elastofe.case import parse_case
from elastofe.fem.assembly import assemble_stiffness
from elastofe.mesh import body_nodes, cell_bodies, from_arrays
from elastofe.post.recovery import nodal_stresses
from elastofe.verify.meshes import structured_block


def best(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, nargs=3, default=[30, 30, 20])
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    p, c = structured_block(*a.n, order=2)
    x = p[c[:, :4]].mean(axis=1)[:, 0]
    regions = {"r": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}}}
    one = parse_case({"geometry": {"file": "block.step"}, "material": {"E": 2.1e5, "nu": 0.3},
                      "support": [{"region": "r"}], "regions": regions})
    two = parse_case({"geometry": {"file": "block.step"}, "support": [{"region": "r"}], "regions": regions,
                      "material": [{"name": "steel", "E": 2.1e5, "nu": 0.3, "bodies": [1]},
                                   {"name": "aluminium", "E": 7.0e4, "nu": 0.33, "bodies": [2]}]})
    m1 = from_arrays(p, c)
    m2 = from_arrays(p, c, cell_body=np.where(x < 0.5, 1, 2))
    u = np.random.default_rng(0).normal(size=(1, p.shape[0], 3)) * 1e-3
    print(f"{platform.node()}: {c.shape[0]:,} TET10 cells, {3 * p.shape[0]:,} DOF, best of {a.repeat}")
    rows = []
    for label, case, mesh in (("one material", one, m1), ("two materials", two, m2)):
        mm = assign_materials(case, mesh)
        lam, mu = mm.lame()
        nodes = body_nodes(mesh.cells, cell_bodies(mesh), mesh.nodes)
        # best() calls each lambda at once; the defaults bind this iteration's values all the same.
        t_asm = best(lambda mesh=mesh, lam=lam, mu=mu: assemble_stiffness(mesh.points, mesh.cells, lam, mu), a.repeat)
        t_rec = best(lambda mesh=mesh, lam=lam, mu=mu, nodes=nodes:
                     nodal_stresses(mesh.points, mesh.cells, u, lam, mu, nodes=nodes), a.repeat)
        t_book = best(lambda case=case, mesh=mesh: (assign_materials(case, mesh),
                                                    body_nodes(mesh.cells, cell_bodies(mesh), mesh.nodes),
                                                    interfaces(mesh)), a.repeat)
        rows.append((label, t_asm, t_rec, t_book, nodes.count))
    print(f"{'':<14} {'assembly':>9} {'recovery':>9} {'bodies':>8} {'split nodes':>12}")
    for label, t_asm, t_rec, t_book, q in rows:
        print(f"{label:<14} {t_asm:>8.2f}s {t_rec:>8.2f}s {t_book:>7.2f}s {q:>12,}")
    print(f"ratio two/one  {rows[1][1] / rows[0][1]:>8.2f}x {rows[1][2] / rows[0][2]:>8.2f}x")


if __name__ == "__main__":
    main()
