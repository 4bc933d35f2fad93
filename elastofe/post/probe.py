"""Locating points in the mesh and interpolating nodal fields there with the shape functions.

Location is exact: a point is outside only when no cell contains it (barycentric or, for curved
10-node cells, reference coordinates all ``>= -rtol``). Most points are found among the cells
with the nearest centroids; the rest are tested against every cell that could contain them:
cells are grouped by the radius of the ball about their centroid that holds the whole cell
(corner nodes, or for 10-node cells the Bézier control points, whose convex hull holds the curved
cell), and each group's k-d tree of centroids is asked for the cells within that group's radius.
For points outside the part the distance to it is the distance to the nearest boundary face.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from ..fem.elements import element_for

#: Points located per batch (bounds the memory of the candidate arrays).
BATCH = 20_000
#: Relative accuracy of the distance of a far point to the part (messages show three digits);
#: points near the part get the exact distance.
DISTANCE_RTOL = 1e-3


@dataclass(frozen=True)
class Location:
    """Where points lie: ``cell (p,)`` index (the containing cell; for a point outside, the cell
    of the nearest boundary face), reference coordinates ``xi (p, 3)`` in that cell, and
    ``outside (p,)`` the distance from the point to the part [length] (0 inside)."""

    cell: np.ndarray
    xi: np.ndarray
    outside: np.ndarray


def closest_on_triangles(p: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """Closest point of each triangle to each point: ``p (..., 3)``, ``tri (..., 3, 3)`` -> ``(..., 3)``.

    The projection onto the plane when it falls inside the triangle, else the closest point of
    its three edges (degenerate triangles fall back to their edges).
    """
    a, b, c = tri[..., 0, :], tri[..., 1, :], tri[..., 2, :]
    n = np.cross(b - a, c - a)
    nn = np.einsum("...i,...i->...", n, n)
    ok = nn > 0
    proj = p - (np.einsum("...i,...i->...", p - a, n) / np.where(ok, nn, 1.0))[..., None] * n
    v0, v1, v2 = b - a, c - a, proj - a
    d00 = np.einsum("...i,...i->...", v0, v0)
    d01 = np.einsum("...i,...i->...", v0, v1)
    d11 = np.einsum("...i,...i->...", v1, v1)
    d20 = np.einsum("...i,...i->...", v2, v0)
    d21 = np.einsum("...i,...i->...", v2, v1)
    den = d00 * d11 - d01 ** 2
    den = np.where(den != 0, den, 1.0)
    v = (d11 * d20 - d01 * d21) / den
    w = (d00 * d21 - d01 * d20) / den
    inside = ok & (v >= 0) & (w >= 0) & (v + w <= 1)

    def seg(x, y):
        d = y - x
        t = np.clip(np.einsum("...i,...i->...", p - x, d) / np.maximum(np.einsum("...i,...i->...", d, d), 1e-300), 0, 1)
        return x + t[..., None] * d

    cands = np.stack([seg(a, b), seg(b, c), seg(c, a)], axis=-2)  # (..., 3, 3)
    dist = np.linalg.norm(cands - p[..., None, :], axis=-1)
    edge = np.take_along_axis(cands, np.argmin(dist, axis=-1)[..., None, None], axis=-2)[..., 0, :]
    return np.where(inside[..., None], proj, edge)


class Locator:
    """Point location in one mesh; the search structures are built once and reused.

    Parameters
    ----------
    points : (n, 3) float64 [length]
    cells : (m, 4 or 10) int64
    """

    def __init__(self, points: np.ndarray, cells: np.ndarray):
        self.points = np.asarray(points, dtype=float)
        self.cells = np.asarray(cells)
        self.el = element_for(self.cells.shape[1])
        X4 = self.points[self.cells[:, :4]]
        self.X0 = X4[:, 0]
        T = np.stack([X4[:, 1] - X4[:, 0], X4[:, 2] - X4[:, 0], X4[:, 3] - X4[:, 0]], axis=-1)  # (m, 3, 3)
        det = np.linalg.det(T)
        scale = np.abs(det).max() if det.size else 1.0
        self.valid = np.abs(det) > 1e-14 * scale  # a flat cell contains nothing
        Tv = np.where(self.valid[:, None, None], T, np.eye(3))
        self.Tinv = np.linalg.inv(Tv)
        self.centroid = X4.mean(axis=1)
        self.tree = cKDTree(self.centroid)
        if self.el.nodes == 10:
            # Bézier control points of the quadratic map: corners, and 2 m - (a + b) / 2 for the
            # edge node m of edge (a, b); the curved cell lies in their convex hull.
            Xe = self.points[self.cells]
            e = self.el.edges
            ctrl = np.concatenate([Xe[:, :4], 2 * Xe[:, 4:] - 0.5 * (Xe[:, e[:, 0]] + Xe[:, e[:, 1]])], axis=1)
        else:
            ctrl = X4
        self.box_lo, self.box_hi = ctrl.min(axis=1), ctrl.max(axis=1)
        self.radius = np.linalg.norm(ctrl - self.centroid[:, None, :], axis=2).max(axis=1)
        self._groups: list | None = None
        self._boundary: tuple | None = None

    # ------------------------------------------------------------------ pieces of the search
    def bary(self, cell: np.ndarray, x: np.ndarray) -> np.ndarray:
        """Barycentric coordinates ``(..., 4)`` of points ``x (..., 3)`` in the corner tetrahedra ``cell (...)``."""
        lam = np.einsum("...ij,...j->...i", self.Tinv[cell], x - self.X0[cell])
        L = np.concatenate([1 - lam.sum(axis=-1, keepdims=True), lam], axis=-1)
        return np.where(self.valid[cell][..., None], L, -np.inf)

    def newton(self, cell: np.ndarray, x: np.ndarray, xi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Reference coordinates ``(q, 3)`` of ``x (q, 3)`` in curved 10-node cells ``cell (q,)``, by
        Newton iterations on the isoparametric map from ``xi (q, 3)``, and the distance ``(q,)``
        [length] between ``x`` and the image of the result (about zero when converged)."""
        Xe = self.points[self.cells[cell]]  # (q, 10, 3)
        xi = np.array(xi, dtype=float)
        act = np.arange(xi.shape[0])  # points still iterating (most converge in one or two steps)
        for _ in range(15):
            if not act.size:
                break
            xa, Xa = xi[act], Xe[act]
            r = x[act] - np.einsum("qk,qkd->qd", self.el.shape(xa), Xa)
            J = np.einsum("qkd,qkl->qdl", Xa, self.el.grad(xa))
            ok = np.abs(np.linalg.det(J)) > 0
            dxi = np.zeros_like(xa)
            dxi[ok] = np.linalg.solve(J[ok], r[ok][..., None])[..., 0]
            xi[act] = np.clip(xa + dxi, -1.0, 2.0)
            act = act[(np.abs(dxi).max(axis=1) >= 1e-13) & ok]
        miss = np.linalg.norm(x - np.einsum("qk,qkd->qd", self.el.shape(xi), Xe), axis=1)
        return xi, miss

    def score(self, cell: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(smallest barycentric/reference coordinate ``(q,)``, ``xi (q, 3)``) of ``x (q, 3)`` in ``cell (q,)``.

        For 10-node cells a Newton result whose image misses the point (no convergence, as in a
        tangled curved cell) scores minus infinity: that cell does not hold the point.
        """
        L = self.bary(cell, x)
        xi = L[:, 1:]
        if self.el.nodes == 10:
            xi, miss = self.newton(cell, x, np.where(np.isfinite(xi), xi, 0.25))
            L = np.concatenate([1 - xi.sum(axis=1, keepdims=True), xi], axis=1)
            bad = ~self.valid[cell] | (miss > 1e-9 * self.radius[cell])
            L = np.where(bad[:, None], -np.inf, L)
        return L.min(axis=1), xi

    def groups(self):
        """Cells grouped by radius (factors of two): [(cell indices, k-d tree of centroids, radius)]."""
        if self._groups is None:
            r = np.maximum(self.radius, 1e-300)
            cls = np.floor(np.log2(r / r.min())).astype(np.int64)
            self._groups = []
            for c in np.unique(cls):  # a few tens of size classes at most
                idx = np.flatnonzero(cls == c)
                self._groups.append((idx, cKDTree(self.centroid[idx]), float(self.radius[idx].max())))
        return self._groups

    def boundary(self):
        """Corner triangles ``(f, 3, 3)`` of the boundary faces, their owner cells ``(f,)``, a k-d tree
        of their centroids and the largest centroid-to-corner distance."""
        if self._boundary is None:
            from ..mesh import row_order

            fl = self.el.faces[:, :3]
            allf = self.cells[:, fl].reshape(-1, 3)
            owner = np.repeat(np.arange(self.cells.shape[0]), fl.shape[0])
            key = np.sort(allf, axis=1)
            order = row_order(key)
            ks = key[order]
            diff = np.r_[True, np.any(ks[1:] != ks[:-1], axis=1), True]
            single = diff[:-1] & diff[1:]  # faces met once: on the boundary
            f = order[single]
            tri = self.points[allf[f]]
            cen = tri.mean(axis=1)
            rad = float(np.linalg.norm(tri - cen[:, None, :], axis=2).max()) if len(f) else 0.0
            self._boundary = (tri, owner[f], cKDTree(cen) if len(f) else None, rad)
        return self._boundary

    # ------------------------------------------------------------------ the search
    def locate(self, targets: np.ndarray, *, candidates: int = 24, rtol: float = 1e-6) -> Location:
        """Find the cell containing each point of ``targets (p, 3)`` [length].

        Parameters
        ----------
        targets : (p, 3)
        candidates : int
            Cells tried first per point (nearest centroids); the exact search follows for the rest.
        rtol : float
            Barycentric (reference-coordinate) tolerance of "inside": points on faces, edges and
            vertices, and within round-off of them, are inside.
        """
        given = np.asarray(targets, dtype=float).reshape(-1, 3)
        # A point far beyond the mesh (1e308, say) is located from the nearest point of a box a
        # million part sizes around the mesh, so that no distance overflows; its distance is that
        # point's plus how far beyond the box it lies (exact to 1e-6 at that range).
        lo, hi = self.points.min(axis=0), self.points.max(axis=0)
        pad = 1e6 * (float(np.max(hi - lo)) + 1e-300)
        targets = np.clip(np.where(np.isfinite(given), given, lo), lo - pad, hi + pad)
        with np.errstate(all="ignore"):
            beyond = np.where(np.isfinite(given), np.abs(given - targets), np.inf).max(axis=1)
        p = targets.shape[0]
        cell = np.zeros(p, dtype=np.int64)
        xi = np.zeros((p, 3))
        best = np.full(p, -np.inf)
        for s in range(0, p, BATCH):
            sl = slice(s, min(s + BATCH, p))
            cell[sl], xi[sl], best[sl] = self._nearest_candidates(targets[sl], candidates, rtol)
        rest = np.flatnonzero(best < -rtol)
        if rest.size:
            c, x, b = self._exact(targets[rest], rtol)
            better = b > best[rest]
            cell[rest[better]], xi[rest[better]], best[rest[better]] = c[better], x[better], b[better]
        outside = np.zeros(p)
        out = np.flatnonzero(best < -rtol)
        if out.size:
            d, c, x = self._distance(targets[out], cell[out], xi[out])
            outside[out], cell[out], xi[out] = d, c, x
        far = beyond > 0
        outside[far] = outside[far] + beyond[far]
        return Location(cell, xi, outside)

    def _nearest_candidates(self, x: np.ndarray, candidates: int, rtol: float = 1e-6):
        """The best of the cells with the nearest centroids: (cell, xi, smallest coordinate)."""
        m = self.cells.shape[0]
        k = max(1, min(candidates, m))
        _, cand = self.tree.query(x, k=k)
        cand = cand.reshape(x.shape[0], k)
        L = self.bary(cand, x[:, None, :])  # (p, k, 4)
        score = L.min(axis=2)
        rows = np.arange(x.shape[0])
        if self.el.nodes == 10:
            # Newton in the best straight candidate first (it holds nearly every point); the few
            # points it does not hold try the next three.
            order = np.argsort(-score, axis=1)[:, :min(4, k)]
            cc = np.take_along_axis(cand, order, axis=1)
            cell, (sc, xs) = cc[:, 0].copy(), self.score(cc[:, 0], x)
            again = np.flatnonzero(sc < -rtol)
            if again.size and cc.shape[1] > 1:
                c2 = cc[again, 1:]
                s2, x2 = self.score(c2.ravel(), np.repeat(x[again], c2.shape[1], axis=0))
                s2, x2 = s2.reshape(c2.shape), x2.reshape(c2.shape + (3,))
                b = np.argmax(s2, axis=1)
                r2 = np.arange(again.size)
                better = s2[r2, b] > sc[again]
                g = again[better]
                cell[g], sc[g], xs[g] = c2[r2, b][better], s2[r2, b][better], x2[r2, b][better]
            return cell, xs, sc
        b = np.argmax(score, axis=1)
        return cand[rows, b], L[rows, b, 1:], score[rows, b]

    def _exact(self, x: np.ndarray, rtol: float):
        """Every cell that may contain each point is tested: (cell, xi, smallest coordinate)."""
        p = x.shape[0]
        cell = np.zeros(p, dtype=np.int64)
        xi = np.zeros((p, 3))
        best = np.full(p, -np.inf)
        for s in range(0, p, BATCH):
            xs = x[s:s + BATCH]
            pts, cls = [], []
            for idx, tree, r in self.groups():
                lists = tree.query_ball_point(xs, r, return_sorted=False)
                n = np.fromiter((len(a) for a in lists), dtype=np.int64, count=len(lists))
                if n.sum():
                    pts.append(np.repeat(np.arange(xs.shape[0]), n))
                    cls.append(idx[np.concatenate([np.asarray(a, dtype=np.int64) for a in lists if len(a)])])
            if not pts:
                continue
            pi, ci = np.concatenate(pts), np.concatenate(cls)
            # Only cells whose box (of the control points) holds the point can hold it.
            tol = rtol * self.radius[ci]
            hit = np.all((xs[pi] >= self.box_lo[ci] - tol[:, None]) & (xs[pi] <= self.box_hi[ci] + tol[:, None]),
                         axis=1)
            pi, ci = pi[hit], ci[hit]
            if not pi.size:
                continue
            sc, xq = self.score(ci, xs[pi])
            # The best cell of each point: sort pairs by point, then by score.
            o = np.lexsort((-sc, pi))
            first = np.r_[True, pi[o][1:] != pi[o][:-1]]
            sel = o[first]
            g = s + pi[sel]
            cell[g], xi[g], best[g] = ci[sel], xq[sel], sc[sel]
        return cell, xi, best

    def _distance(self, x: np.ndarray, cell: np.ndarray, xi: np.ndarray):
        """Distance of outside points ``x (o, 3)`` to the nearest boundary face, that face's cell and
        the reference coordinates of the point in it (clamped when interpolating)."""
        tri, owner, tree, rad = self.boundary()
        o = x.shape[0]
        dist = np.full(o, np.inf)
        face = np.zeros(o, dtype=np.int64)
        done = np.zeros(o, dtype=bool)
        if tree is None:
            return dist, cell, xi
        nf = tri.shape[0]
        todo = np.arange(o)
        k = 8
        while todo.size:
            kk = min(k, nf)
            step = max(1, 2_000_000 // (kk * 9))  # bounds the (points, faces, 3, 3) work arrays
            for s in range(0, todo.size, step):
                t = todo[s:s + step]
                dc, fc = tree.query(x[t], k=kk)
                dc, fc = dc.reshape(t.size, kk), fc.reshape(t.size, kk)
                cp = closest_on_triangles(x[t][:, None, :], tri[fc])
                d = np.linalg.norm(cp - x[t][:, None, :], axis=2)
                b = np.argmin(d, axis=1)
                dist[t] = d[np.arange(t.size), b]
                face[t] = fc[np.arange(t.size), b]
                # Any face not yet tried has its centroid at least dc[:, -1] away, so it is at least
                # dc[:, -1] - rad away: the distance found is exact once it is no more than that, and
                # within 0.1 % (messages give three digits) once it is no more than that plus 0.1 %
                # of itself (far points, to which many faces are nearly equally far).
                done[t] = (kk == nf) | (dist[t] <= dc[:, -1] - rad + DISTANCE_RTOL * dist[t])
            todo = todo[~done[todo]]
            k *= 8
        c = owner[face]
        L = self.bary(c, x)
        xo = L[:, 1:]
        if self.el.nodes == 10:
            xo, _ = self.newton(c, x, np.where(np.isfinite(xo), xo, 0.25))
            # A point between a straight face and the curved surface: the distance to the
            # nearest point of the curved cell (clamped reference coordinates) is an upper bound.
            Lc = np.clip(np.concatenate([1 - xo.sum(axis=1, keepdims=True), xo], axis=1), 0.0, None)
            Lc /= Lc.sum(axis=1, keepdims=True)
            on = np.einsum("qk,qkd->qd", self.el.shape(Lc[:, 1:]), self.points[self.cells[c]])
            curved = np.linalg.norm(on - x, axis=1)
            dist = np.where(dist > 0, np.minimum(dist, curved), curved)
        return dist, c, np.where(np.isfinite(xo), xo, 0.0)


def locate(points: np.ndarray, cells: np.ndarray, targets: np.ndarray, *, candidates: int = 24,
           rtol: float = 1e-6) -> Location:
    """Find the cell containing each target point ``targets (p, 3)`` (see :class:`Locator`).

    Exact: a point is outside only when no cell contains it within ``rtol`` (barycentric, or
    reference coordinates of curved 10-node cells found by Newton iterations on the isoparametric
    map); for points outside, ``Location.outside`` is the distance to the nearest boundary face.
    Callers locating several sets of points in one mesh should build one :class:`Locator`.
    """
    return Locator(points, cells).locate(targets, candidates=candidates, rtol=rtol)


def interpolate(cells: np.ndarray, loc: Location, field: np.ndarray) -> np.ndarray:
    """Nodal ``field (n, ...)`` interpolated at the located points, ``(p, ...)``.

    Reference coordinates slightly outside the cell are clamped to it.
    """
    el = element_for(cells.shape[1])
    L = np.concatenate([1 - loc.xi.sum(axis=1, keepdims=True), loc.xi], axis=1)
    L = np.clip(L, 0.0, None)
    L /= L.sum(axis=1, keepdims=True)
    N = el.shape(L[:, 1:])  # (p, k)
    vals = field[cells[loc.cell]]  # (p, k, ...)
    return np.einsum("pk,pk...->p...", N, vals)
