"""Time of exact point location and of the piece (loose body) check, against the previous
nearest-centroid-only location.

Run:  PYTHONPATH=. python benchmarks/point_location.py [--sizes 0.1 0.05 0.03] [--points 100000]

The unit cube is meshed with 4- and 10-node tetrahedra at each size; 100,000 random points inside
it are located with ``Locator`` (nearest centroids, then the exact search for the rest) and with
the previous method (the 24 nearest centroids only, kept below as the baseline); the count of
points each calls outside (all are inside) and the times are printed. Then 10,000 points 850
units away (the distance search), and ``connected_pieces`` / ``check_restrained`` with the mesh
(the per-piece check every run now pays) on the same meshes.
"""
from __future__ import annotations

import argparse
import platform
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

from elastofe.bc import Held, check_restrained
from elastofe.fem.elements import element_for
from elastofe.geometry import gmsh_session, mesh_geometry
from elastofe.mesh import connected_pieces
from elastofe.post.probe import Locator


def centroid_only(points, cells, targets, candidates=24):
    """The previous location: the best of the 24 cells with the nearest centroids (baseline)."""
    el = element_for(cells.shape[1])
    X4 = points[cells[:, :4]]
    _, cand = cKDTree(X4.mean(axis=1)).query(targets, k=min(candidates, cells.shape[0]))
    X = X4[cand]
    T = np.stack([X[..., 1, :] - X[..., 0, :], X[..., 2, :] - X[..., 0, :], X[..., 3, :] - X[..., 0, :]], axis=-1)
    lam = np.linalg.solve(T, (targets[:, None, :] - X[..., 0, :])[..., None])[..., 0]
    L = np.concatenate([1 - lam.sum(axis=-1, keepdims=True), lam], axis=-1).min(axis=-1)
    del el
    return (L.max(axis=1) < -1e-6).sum()


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=float, nargs="+", default=[0.1, 0.05, 0.03])
    ap.add_argument("--points", type=int, default=100_000)
    a = ap.parse_args()
    print(f"# {platform.node()} {platform.processor() or platform.machine()}; "
          f"{a.points:,} random points in the unit cube")
    step = Path(tempfile.mkdtemp()) / "cube.step"
    with gmsh_session() as gmsh:
        gmsh.model.occ.addBox(0, 0, 0, 1, 1, 1)
        gmsh.model.occ.synchronize()
        gmsh.write(str(step))
    pts = np.random.default_rng(1).random((a.points, 3))
    far = np.random.default_rng(2).random((10_000, 3)) + np.array([850.0, 0, 0])
    print(f"{'order':>5} {'size':>6} {'cells':>9} | {'baseline s':>10} {'outside':>7} | {'build s':>7} "
          f"{'locate s':>8} {'outside':>7} {'pts/s':>9} | {'far s':>6} {'dist err':>8} | "
          f"{'pieces s':>8} {'check s':>7}")
    for order in (1, 2):
        for h in a.sizes:
            m = mesh_geometry(step, order=order, size=h)
            t = time.perf_counter()
            base_out = centroid_only(m.points, m.cells, pts)
            t_base = time.perf_counter() - t
            t = time.perf_counter()
            L = Locator(m.points, m.cells)
            t_build = time.perf_counter() - t
            t = time.perf_counter()
            loc = L.locate(pts)
            t_loc = time.perf_counter() - t
            t = time.perf_counter()
            lf = L.locate(far)
            t_far = time.perf_counter() - t
            exact = np.linalg.norm(np.maximum(far - 1.0, 0.0), axis=1)  # distance to the unit cube
            t = time.perf_counter()
            connected_pieces(m.cells)
            t_pieces = time.perf_counter() - t
            root = np.flatnonzero(m.points[:, 0] < 1e-9)
            dofs = np.sort((3 * root[:, None] + np.arange(3)).ravel())
            held = Held(dofs, np.zeros(dofs.size), np.zeros(dofs.size, dtype=np.int64))
            t = time.perf_counter()
            check_restrained(m.points, held, 1.7, mesh=m)
            t_check = time.perf_counter() - t
            print(f"{order:>5} {h:>6} {m.cells.shape[0]:>9,} | {t_base:>10.2f} {base_out:>7} | {t_build:>7.2f} "
                  f"{t_loc:>8.2f} {np.count_nonzero(loc.outside):>7} {a.points / (t_build + t_loc):>9,.0f} | "
                  f"{t_far:>6.2f} {np.abs(lf.outside - exact).max():>8.1e} | {t_pieces:>8.2f} {t_check:>7.2f}")


if __name__ == "__main__":
    main()
