"""What the report's pictures show, worked out with numpy alone (no drawing here).

From a run's output folder (``result.vtu``, ``boundary.vtu`` and ``summary.json``) this module
builds the plan of every picture: the surface triangles, the field drawn and its colour range, the
views (an isometric one and the ones that show the overall and the governing peak, each checked by
a ray from the peak toward the viewer), the marked peaks, and for the model picture one symbol per
held direction at points spread over every support region and arrows for every load. Both
renderers (:mod:`.render`: pyvista, or matplotlib as the fallback) draw the same plan, so the
counts recorded in ``pictures.json`` are those of the picture whichever draws it.

Arrays: points ``(n, 3)`` [length], triangles ``(k, 3)`` int (node numbers of result.vtu),
nodal fields ``(n,)``.
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import Optional

import numpy as np

from ..files import safe_name
from ..plotting import body_color

#: Deformed shapes are drawn with the largest displacement at this share of the part size.
DEFORMED_SHARE = 0.06
#: Points per support region that carry the held-direction symbols (spread by farthest-point sampling).
SUPPORT_POINTS = 8
#: Points per distributed load (pressure, pin bearing) that carry an arrow.
LOAD_POINTS = 12
#: Length of the longest resultant-force arrow, and the shortest drawn, as shares of the part size.
FORCE_SHARE = 0.22
MIN_ARROW_SHARE = 0.05
#: Length of the arrows of the largest pressure, as a share of the part size.
PRESSURE_SHARE = 0.08
#: Length of a held-direction symbol as a share of the part size.
PEG_SHARE = 0.04
#: Two peaks closer than this share of the part size are one place (one view, one mark).
SAME_PLACE = 0.01
#: The isometric views tried, best first: from above (z up), then from below.
ISO_DIRECTIONS = [np.array(v, dtype=float) / math.sqrt(3) for v in
                  ((1, -1, 1), (-1, -1, 1), (1, 1, 1), (-1, 1, 1), (1, -1, -1), (-1, -1, -1), (1, 1, -1), (-1, 1, -1))]

# Local faces of the 4- and 10-node tetrahedra (VTK order), outward; used only when a folder has no
# boundary.vtu (written by runs before it existed).
_TET_FACES = np.array([[0, 2, 1], [0, 1, 3], [1, 2, 3], [0, 3, 2]])
_TET10_FACES = np.array([[0, 2, 1, 6, 5, 4], [0, 1, 3, 4, 8, 7], [1, 2, 3, 5, 9, 8], [0, 3, 2, 7, 9, 6]])


def unit(v) -> np.ndarray:
    v = np.asarray(v, dtype=float)
    n = np.linalg.norm(v)
    return v / n if n > 0 else v


def nice_scale(raw: float) -> float:
    """The largest of 1, 2, 5 x 10^k not above ``raw`` (a readable displacement scale factor)."""
    if not raw > 0 or not math.isfinite(raw):
        return 1.0
    k = math.floor(math.log10(raw))
    for m in (5.0, 2.0, 1.0):
        if m * 10 ** k <= raw:
            return m * 10 ** k
    return 10.0 ** k  # pragma: no cover


def deformation_scale(size: float, umax: float) -> float:
    """Scale factor so the largest displacement is drawn at about :data:`DEFORMED_SHARE` of ``size``."""
    if umax <= 0:
        return 1.0
    raw = DEFORMED_SHARE * size / umax
    return nice_scale(raw) if raw >= 1 else 1.0  # never shrink a displacement that is already large


def color_limits(values: np.ndarray) -> tuple[float, float]:
    """Colour range of a field: its min and max, or from zero when it is constant to round-off
    (so a uniform field shows as one colour, not as magnified noise)."""
    lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
    big = max(abs(lo), abs(hi))
    if big == 0:
        return 0.0, 1.0
    if hi - lo <= 1e-6 * big:
        return min(0.0, lo), max(0.0, hi) if hi > 0 else 0.0
    return lo, hi


def candidate_directions(normal: np.ndarray) -> list[np.ndarray]:
    """View directions (from the focus toward the viewer) to try, best first: the outward normal at
    the peak tilted toward each of the eight octant diagonals, then the diagonals, then the normal."""
    n = unit(normal)
    diag = sorted(ISO_DIRECTIONS, key=lambda d: -float(d @ n))
    out = []
    for d in diag:
        v = n + 0.7 * d
        if np.linalg.norm(v) > 1e-6:
            out.append(unit(v))
    return out + diag + [n]


def view_up(direction: np.ndarray) -> np.ndarray:
    """z up unless the view looks along z, then y."""
    return np.array([0.0, 1.0, 0.0]) if abs(direction[2]) > 0.9 else np.array([0.0, 0.0, 1.0])


# ----------------------------------------------------------------------------- reading
def outer_faces(cells: np.ndarray) -> np.ndarray:
    """Faces that belong to one cell only, outward ``(f, 3|6)``."""
    table = _TET10_FACES if cells.shape[1] == 10 else _TET_FACES
    allf = cells[:, table].reshape(-1, table.shape[1])
    key = np.sort(allf[:, :3], axis=1)
    _, inv, counts = np.unique(key, axis=0, return_inverse=True, return_counts=True)
    return allf[counts[inv.ravel()] == 1]


def split_faces(faces: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Linear triangles ``(k, 3)`` of faces ``(f, 3|6)`` (a 6-node face gives four, through its
    mid-side nodes, so a field is drawn with every node's value) and the face of each ``(k,)``."""
    if faces.shape[1] == 3:
        return faces, np.arange(faces.shape[0])
    a, b, c, ab, bc, ca = faces.T
    tri = np.stack([np.column_stack([a, ab, ca]), np.column_stack([ab, b, bc]),
                    np.column_stack([ca, bc, c]), np.column_stack([ab, bc, ca])], axis=1).reshape(-1, 3)
    return tri, np.repeat(np.arange(faces.shape[0]), 4)


def read_fields_mesh(path):
    """A run's fields as one meshio mesh: result.vtu, or result.pvtu's pieces joined through their
    ``node_id`` array (a node shared by pieces once), as a distributed run writes them."""
    import xml.etree.ElementTree as ET

    import meshio

    path = Path(path)
    if path.suffix.lower() != ".pvtu":
        return meshio.read(str(path))
    pieces = [meshio.read(str(path.parent / p.get("Source"))) for p in ET.parse(path).getroot().iter("Piece")]
    ids = [np.asarray(m.point_data["node_id"], dtype=np.int64) for m in pieces]
    n = int(max(i.max() for i in ids)) + 1
    points = np.zeros((n, 3))
    data = {k: np.zeros((n,) + np.asarray(v).shape[1:], dtype=np.asarray(v).dtype)
            for k, v in pieces[0].point_data.items() if k != "node_id"}
    blocks: dict = {}
    for m, i in zip(pieces, ids):
        points[i] = m.points
        for k in data:
            data[k][i] = m.point_data[k]
        for c in m.cells:
            blocks.setdefault(c.type, []).append(i[c.data])
    return meshio.Mesh(points, [(t, np.vstack(b)) for t, b in blocks.items()], point_data=data)


def read_result(out_dir: Path) -> dict:
    """Points, cells, nodal fields (result.vtu) and the boundary with surface ids (boundary.vtu)."""
    import meshio

    vtu = Path(out_dir) / "result.vtu"
    m = meshio.read(str(vtu)) if vtu.is_file() else read_fields_mesh(Path(out_dir) / "result.pvtu")
    cells = max((c.data for c in m.cells if c.type in ("tetra", "tetra10")), key=lambda a: a.shape[1])
    out = {"points": np.asarray(m.points, dtype=float), "cells": np.asarray(cells, dtype=np.int64),
           "fields": {k: np.asarray(v) for k, v in m.point_data.items()}, "edges": {}}
    body = [np.asarray(b).ravel() for b, c in zip(m.cell_data.get("body") or [], m.cells)
            if c.type in ("tetra", "tetra10")]
    if body and sum(b.size for b in body) == cells.shape[0]:
        # Each point of result.vtu lies in one body (it is written broken at body interfaces).
        pb = np.zeros(out["points"].shape[0], dtype=np.int64)
        pb[out["cells"].ravel()] = np.repeat(np.concatenate(body), cells.shape[1])
        out["point_body"] = pb
    bpath = Path(out_dir) / "boundary.vtu"
    faces = surface = None
    if bpath.is_file():
        b = meshio.read(str(bpath))
        blk = [(i, c) for i, c in enumerate(b.cells) if c.type in ("triangle", "triangle6")]
        if blk and b.points.shape[0] == out["points"].shape[0]:
            i, c = blk[0]
            faces = np.asarray(c.data, dtype=np.int64)
            sid = b.cell_data.get("surface_id")
            surface = np.asarray(sid[i], dtype=np.int64).ravel() if sid else None
            out["edges"] = {k[5:]: np.flatnonzero(np.asarray(v).ravel() > 0) for k, v in b.point_data.items()
                            if k.startswith("edge-")}
    out["has_surface_ids"] = surface is not None
    if faces is None:
        faces = outer_faces(out["cells"])
    if surface is None:
        surface = np.zeros(faces.shape[0], dtype=np.int64)
    out["faces"] = faces
    out["face_surface"] = surface
    tri, of = split_faces(faces)
    out["tri"], out["tri_face"] = tri, of
    return out


# ----------------------------------------------------------------------------- geometry helpers
def face_frames(points: np.ndarray, tri: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Centroids ``(k, 3)``, outward unit normals ``(k, 3)`` and areas ``(k,)`` of triangles."""
    p0, p1, p2 = points[tri[:, 0]], points[tri[:, 1]], points[tri[:, 2]]
    cr = np.cross(p1 - p0, p2 - p0)
    area = 0.5 * np.linalg.norm(cr, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        n = cr / np.where(area > 0, 2 * area, 1.0)[:, None]
    return (p0 + p1 + p2) / 3.0, n, area


def node_normals(points: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """Area-weighted outward normal at every node ``(n, 3)`` (zero off the boundary)."""
    p0, p1, p2 = points[tri[:, 0]], points[tri[:, 1]], points[tri[:, 2]]
    cr = np.cross(p1 - p0, p2 - p0)
    nn = np.zeros_like(points)
    for k in range(3):
        np.add.at(nn, tri[:, k], cr)
    norm = np.linalg.norm(nn, axis=1, keepdims=True)
    return nn / np.where(norm > 0, norm, 1.0)


def spread(xyz: np.ndarray, k: int, weights: Optional[np.ndarray] = None) -> np.ndarray:
    """Indices of up to ``k`` of the points ``xyz (m, 3)`` spread over them (farthest-point sampling,
    starting from the heaviest point)."""
    m = xyz.shape[0]
    if m == 0:
        return np.zeros(0, dtype=np.int64)
    first = int(np.argmax(weights)) if weights is not None else 0
    chosen = [first]
    d = np.linalg.norm(xyz - xyz[first], axis=1)
    for _ in range(min(k, m) - 1):
        j = int(np.argmax(d))
        if d[j] <= 0:
            break
        chosen.append(j)
        d = np.minimum(d, np.linalg.norm(xyz - xyz[j], axis=1))
    return np.asarray(chosen, dtype=np.int64)


def ray_hits(points: np.ndarray, tri: np.ndarray, origin: np.ndarray, direction: np.ndarray) -> bool:
    """Whether the ray ``origin + t direction`` (t > 0) meets any triangle (Moller-Trumbore, vectorised)."""
    p0, p1, p2 = points[tri[:, 0]], points[tri[:, 1]], points[tri[:, 2]]
    e1, e2 = p1 - p0, p2 - p0
    h = np.cross(direction, e2)
    a = np.einsum("ij,ij->i", e1, h)
    ok = np.abs(a) > 1e-14 * (np.linalg.norm(e1, axis=1) * np.linalg.norm(e2, axis=1) + 1e-300)
    f = np.where(ok, 1.0 / np.where(ok, a, 1.0), 0.0)
    s = origin - p0
    u = f * np.einsum("ij,ij->i", s, h)
    q = np.cross(s, e1)
    v = f * (q @ direction)
    t = f * np.einsum("ij,ij->i", e2, q)
    hit = ok & (u >= 0) & (v >= 0) & (u + v <= 1) & (t > 0)
    return bool(hit.any())


def visible(points: np.ndarray, tri: np.ndarray, node: int, direction: np.ndarray, size: float) -> bool:
    """Whether node ``node`` is seen from far along ``direction`` (parallel projection): no triangle
    lies on the ray from just outside the surface there toward the viewer."""
    nn = node_normals(points, tri)[node]
    start = points[node] + 2e-3 * size * (unit(direction) + nn)
    return not ray_hits(points, tri, start, unit(direction))


def choose_view(points: np.ndarray, tri: np.ndarray, node: int, size: float) -> tuple[np.ndarray, bool]:
    """A direction from which ``node`` is seen, and whether one was found (else the first tried)."""
    cands = candidate_directions(node_normals(points, tri)[node])
    for d in cands:
        if visible(points, tri, node, d, size):
            return d, True
    return cands[0], False


def fit_view(points: np.ndarray, direction: np.ndarray, aspect: float, reserve_right: float = 0.0,
             reserve_top: float = 0.1) -> dict:
    """A parallel-projection camera looking along ``-direction`` that fills the frame with ``points``.

    ``aspect`` is width over height of the viewport; ``reserve_right`` and ``reserve_top`` are shares of
    its width and height kept free (colour bar, title). Returns ``focal``, ``position``, ``up``,
    ``parallel_scale`` (half the viewport height in length units) and ``direction``.
    """
    d = unit(direction)
    if not (np.all(np.isfinite(d)) and np.linalg.norm(d) > 0.5):  # no direction known: the isometric one
        d = unit(np.ones(3))
    up = view_up(d)
    fwd = -d
    right = np.cross(fwd, up)
    if np.linalg.norm(right) < 1e-6:  # looking along the up vector: take another one
        right = np.cross(fwd, np.array([1.0, 0.0, 0.0]))
    right = unit(right)
    up = unit(np.cross(right, fwd))
    c = 0.5 * (points.min(axis=0) + points.max(axis=0))
    x, y = (points - c) @ right, (points - c) @ up
    cx, cy = 0.5 * (x.max() + x.min()), 0.5 * (y.max() + y.min())
    w, h = max(x.max() - x.min(), 1e-12), max(y.max() - y.min(), 1e-12)
    free_w, free_h = 1.0 - reserve_right, 1.0 - reserve_top
    ps = max(h / (2 * 0.92 * free_h), w / (2 * 0.94 * aspect * free_w))
    # Centred, moved only as far as the colour bar and the title need.
    shift_x = max(0.0, w / 2 - ps * aspect * (1 - 2 * reserve_right))
    shift_y = max(0.0, h / 2 - ps * (1 - 2 * reserve_top))
    focal = c + right * (cx + shift_x) + up * (cy + shift_y)
    size = float(np.linalg.norm(points.max(axis=0) - points.min(axis=0)))
    return {"focal": focal, "position": focal + d * 3.0 * max(size, 1e-9), "up": up, "parallel_scale": ps,
            "direction": d, "right": right}


def model_points(model: dict, points: np.ndarray) -> np.ndarray:
    """``(n + k, 3)``: the part's ``points`` and the ends of every load arrow, moment arrow, line and
    support symbol and every label anchor of ``model`` (case length unit), the extent a picture of the
    model as applied must frame: an arrow standing off the part is drawn whole, with its label."""
    extra = []
    for ld in model.get("loads", []):
        for pair in list(ld.get("arrows", [])) + list(ld.get("moments", [])) + list(ld.get("lines", [])):
            extra.extend(pair)
        if ld.get("label_at") is not None:
            extra.append(ld["label_at"])
    for sp in model.get("supports", []):
        for s in sp.get("symbols", []):
            extra.extend([s["at"], s["to"]])
    pts = np.asarray(points, dtype=float).reshape(-1, 3)
    return np.vstack([pts, np.asarray(extra, dtype=float).reshape(-1, 3)]) if extra else pts


# ----------------------------------------------------------------------------- the model as applied
def region_faces(summary: dict, region: str, surface: np.ndarray) -> np.ndarray:
    """Boolean ``(f,)``: the boundary faces of ``region`` (by its matched surface ids)."""
    entry = (summary.get("regions") or {}).get(region) or {}
    ids = [int(s["id"]) for s in entry.get("surfaces", []) if "id" in s]
    return np.isin(surface, ids) if ids else np.zeros(surface.shape[0], dtype=bool)


def _cylinder_of(summary: dict, region: str) -> Optional[tuple[np.ndarray, np.ndarray, float]]:
    for s in ((summary.get("regions") or {}).get(region) or {}).get("surfaces", []):
        if s.get("kind") == "cylinder" and s.get("axis") is not None:
            return unit(s["axis"]), np.asarray(s["axis_point"], dtype=float), float(s.get("radius") or 0.0)
    return None


def held_directions(fix: str, frame: str, at: np.ndarray, normal: np.ndarray,
                    cyl: Optional[tuple]) -> list[tuple[str, np.ndarray]]:
    """The held directions at a point, each as (letter, unit vector): x, y, z; n (the surface
    normal); r, t, a (radial, tangential, axial of the region's cylinder)."""
    out = []
    if frame == "elastic":
        return [("elastic", unit(normal))]
    for ch in fix:
        if ch in "xyz":
            e = np.zeros(3)
            e["xyz".index(ch)] = 1.0
            out.append((ch, e))
        elif ch == "n":
            out.append(("n", unit(normal)))
        elif ch in "rta" and cyl is not None:
            a, p0, _ = cyl
            r = at - p0
            r = unit(r - (r @ a) * a)
            out.append((ch, {"r": r, "t": unit(np.cross(a, r)), "a": a}[ch]))
    return out


def support_scene(summary: dict, data: dict, size: float) -> list[dict]:
    """One entry per support of the summary: its points and the held-direction symbols there.

    Each symbol is ``{"letter", "at", "to"}``: a short stalk from the surface point ``at`` to ``to``
    along the held direction (on the outer side of the surface; along the surface, lifted off it),
    ended by a round foot at ``to``.
    """
    pts, faces, surface = data["points"], data["faces"], data["face_surface"]
    cen, nrm, area = face_frames(pts, faces[:, :3])
    L = PEG_SHARE * size
    out = []
    for sp in summary.get("supports") or []:
        region, fix, frame = sp.get("region"), str(sp.get("fix") or ""), str(sp.get("frame") or "global")
        entry = {"region": region, "fix": fix, "frame": frame, "points": 0, "symbols": []}
        edge = data["edges"].get(safe_name(region)) if region else None
        if sp.get("node_at") is not None:  # a point support: its one node
            i = _nearest(pts, sp["node_at"])
            places = [(pts[i], node_normals(pts, data["tri"])[i])]
            entry["region"] = sp.get("name")
        elif edge is not None and edge.size:
            nn = node_normals(pts, data["tri"])
            idx = edge[spread(pts[edge], SUPPORT_POINTS)]
            places = [(pts[i], nn[i]) for i in idx]
        else:
            mask = region_faces(summary, region, surface)
            sel = np.flatnonzero(mask)
            idx = sel[spread(cen[sel], SUPPORT_POINTS, area[sel])] if sel.size else sel
            places = [(cen[i], nrm[i]) for i in idx]
        cyl = _cylinder_of(summary, region)
        for at, n in places:
            dirs = held_directions(fix, frame, at, n, cyl)
            for letter, d in dirs:
                s = 1.0 if d @ n >= 0 else -1.0
                lift = n * 0.35 * L if abs(d @ n) < 0.3 else 0.0
                entry["symbols"].append({"letter": letter, "at": at + lift, "to": at + lift + s * d * L})
        entry["points"] = len(places)
        out.append(entry)
    return out


def _arrow_length(F: float, Fmax: float, size: float) -> tuple[float, bool]:
    L = FORCE_SHARE * size * (F / Fmax if Fmax > 0 else 0.0)
    return max(L, MIN_ARROW_SHARE * size), L < MIN_ARROW_SHARE * size


def load_scene(summary: dict, data: dict, size: float) -> list[dict]:
    """One entry per load: arrows ``[(tail, tip)]`` scaled to the force (resultants) or to the local
    pressure (pressure, pin bearing: one per spread point), moment arrows ``[(at, vector end)]``,
    lines from a load's point to its region, and the place of its label."""
    pts, faces, surface = data["points"], data["faces"], data["face_surface"]
    cen, nrm, area = face_frames(pts, faces[:, :3])
    hi = pts.max(axis=0)
    loads = summary.get("loads") or []
    Fmax = max((float(np.linalg.norm(ld.get("force") or [0, 0, 0])) for ld in loads
                if ld.get("kind") not in ("pressure", "temperature")), default=0.0)
    pmax = max((abs(float(ld.get("pressure") or 0.0)) for ld in loads if ld.get("kind") == "pressure"), default=0.0)
    out = []
    for ld in loads:
        kind = ld.get("kind") or "force"
        F = np.asarray(ld.get("force") or [0.0, 0.0, 0.0], dtype=float)
        Fn = float(np.linalg.norm(F))
        region = ld.get("region")
        e = {"label": ld.get("label", "load"), "kind": kind, "arrows": [], "moments": [], "lines": [],
             "label_at": None, "shortened": False}
        mask = region_faces(summary, region, surface) if region else np.zeros(surface.shape[0], dtype=bool)
        sel = np.flatnonzero(mask)
        if kind == "pressure" and sel.size:
            p0 = float(ld.get("pressure") or 0.0)
            idx = sel[spread(cen[sel], LOAD_POINTS, area[sel])]
            g = ld.get("gradient")
            for i in idx:
                p = p0
                if g is not None:
                    p = p0 + float((cen[i] - np.asarray(ld.get("origin") or [0, 0, 0])) @ np.asarray(g))
                    if ld.get("clip"):
                        p = max(p, 0.0)
                scale = abs(p) / pmax if pmax > 0 else 1.0
                L = max(PRESSURE_SHARE * size * scale, 0.3 * MIN_ARROW_SHARE * size) if p != 0 else 0.0
                if L == 0:
                    continue
                if p > 0:  # pushes on the surface: the arrow ends there, coming from outside
                    e["arrows"].append((cen[i] + nrm[i] * L, cen[i]))
                else:
                    e["arrows"].append((cen[i], cen[i] + nrm[i] * L))
            e["label_at"] = cen[idx[0]] + nrm[idx[0]] * PRESSURE_SHARE * size if idx.size else None
        elif kind == "bearing" and sel.size and Fn > 0:
            axis = unit(ld.get("axis") or [0, 0, 1])
            p0 = np.asarray(ld.get("axis_point") or cen[sel].mean(axis=0), dtype=float)
            radius = float(ld.get("radius") or 0.0)
            fhat = F / Fn
            r = cen[sel] - p0
            r = r - (r @ axis)[:, None] * axis
            rhat = r / np.maximum(np.linalg.norm(r, axis=1, keepdims=True), 1e-300)
            cos = rhat @ fhat
            loaded = sel[cos > 0.1]
            Lb, short = _arrow_length(Fn, Fmax, size)
            Lb = min(0.5 * Lb, 1.6 * radius) if radius > 0 else 0.5 * Lb
            if loaded.size:
                idx = loaded[spread(cen[loaded], LOAD_POINTS, area[loaded] * (cos[cos > 0.1]))]
                for i in idx:
                    rr = cen[i] - p0
                    rr = unit(rr - (rr @ axis) * axis)
                    c = max(float(rr @ fhat), 0.0)
                    e["arrows"].append((cen[i] - rr * Lb * c, cen[i]))   # the pin pushes the wall outward
            e["label_at"] = p0
            e["shortened"] = short
        elif kind == "gravity" and Fn > 0:
            L, short = _arrow_length(Fn, Fmax, size)
            anchor = np.array([hi[0], hi[1], hi[2]]) + 0.04 * size
            e["arrows"].append((anchor, anchor + F / Fn * L))
            e["label_at"], e["shortened"] = anchor, short
        elif kind == "spread" and ld.get("at") is not None:
            at = np.asarray(ld["at"], dtype=float)
            if Fn > 0:
                L, short = _arrow_length(Fn, Fmax, size)
                e["arrows"].append((at - F / Fn * L, at))
                e["shortened"] = short
            M = np.asarray(ld.get("moment_about_at") or [0, 0, 0], dtype=float)
            if np.linalg.norm(M) > 1e-9 * max(Fn * size, 1e-300):   # a moment, not round-off of the force's
                e["moments"].append((at, at + unit(M) * FORCE_SHARE * 0.6 * size))
            if sel.size:
                for i in sel[spread(cen[sel], SUPPORT_POINTS, area[sel])]:
                    e["lines"].append((at, cen[i]))
            e["label_at"] = at
        elif kind != "temperature" and sel.size and Fn > 0:
            w = area[sel]
            c = (cen[sel] * w[:, None]).sum(axis=0) / max(w.sum(), 1e-300)
            cyl = _cylinder_of(summary, region)
            L, short = _arrow_length(Fn, Fmax, size)
            if cyl is not None:  # a hole: the arrow starts on its axis
                a, pa, _ = cyl
                base = pa + ((c - pa) @ a) * a
                e["arrows"].append((base, base + F / Fn * L))
            else:
                j = sel[int(np.argmin(np.linalg.norm(cen[sel] - c, axis=1)))]
                base, n = cen[j], nrm[j]
                if F @ n > 0:  # pulls away from the surface
                    e["arrows"].append((base, base + F / Fn * L))
                else:
                    e["arrows"].append((base - F / Fn * L, base))
            e["label_at"] = e["arrows"][-1][0]
            e["shortened"] = short
        out.append(e)
    return out


# ----------------------------------------------------------------------------- the plan
def _nearest(points: np.ndarray, at) -> Optional[int]:
    if at is None:
        return None
    return int(np.argmin(np.linalg.norm(points - np.asarray(at, dtype=float), axis=1)))


def element_size(points: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Nodal element size ``(n,)``: the smallest mean edge length of the cells at each node [length]."""
    c = cells[:, :4]
    pairs = [(0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3)]
    h = np.mean([np.linalg.norm(points[c[:, i]] - points[c[:, j]], axis=1) for i, j in pairs], axis=0)
    out = np.full(points.shape[0], np.inf)
    for k in range(cells.shape[1]):
        np.minimum.at(out, cells[:, k], h)
    out[~np.isfinite(out)] = np.nan
    return out


def _case_field(fields: dict, base: str, case: Optional[str]) -> tuple[Optional[np.ndarray], str]:
    if case:
        key = f"{base}-{safe_name(case)}"
        if key in fields:
            return fields[key], key
    return fields.get(base), base


#: Mode and buckling shapes are drawn with their largest displacement at this share of the part size.
SHAPE_SHARE = 0.08
#: At most this many mode pictures and buckling-shape pictures.
EIGEN_PICTURES = 4


def eigen_pictures(summary: dict, fields: dict, pts: np.ndarray, size: float) -> list[dict]:
    """Pictures of the first elastic natural modes and buckling shapes (shape magnitude on the shape)."""
    out = []
    elastic = [m for m in (summary.get("modes") or []) if not m.get("rigid_body")][:EIGEN_PICTURES]
    for m in elastic:
        key = f"mode-{m['number']}"
        if key not in fields:
            continue
        shp = np.asarray(fields[key], dtype=float).reshape(-1, 3)
        mag = np.linalg.norm(shp, axis=1)
        em = m.get("effective_mass") or [0, 0, 0]
        out.append({"file": f"picture-mode-{m['number']}.png", "kind": "field", "views": ["iso"], "field": key,
                    "values": mag, "clim": (0.0, float(mag.max()) or 1.0), "over": False,
                    "bar": "relative displacement [-]",
                    "title": f"Mode {m['number']}: {m['frequency']:.4g} Hz (effective mass x {100 * em[0]:.1f} %, "
                             f"y {100 * em[1]:.1f} %, z {100 * em[2]:.1f} %)",
                    "deformed": True, "warp": pts + SHAPE_SHARE * size * shp, "marks": []})
    for b in (summary.get("buckling") or [])[:EIGEN_PICTURES]:
        key = f"buckling-{b['number']}"
        if key not in fields:
            continue
        shp = np.asarray(fields[key], dtype=float).reshape(-1, 3)
        mag = np.linalg.norm(shp, axis=1)
        out.append({"file": f"picture-buckling-{b['number']}.png", "kind": "field", "views": ["iso"], "field": key,
                    "values": mag, "clim": (0.0, float(mag.max()) or 1.0), "over": False,
                    "bar": "relative displacement [-]",
                    "title": f"Buckling shape {b['number']}: load factor {b['factor']:.4g}",
                    "deformed": True, "warp": pts + SHAPE_SHARE * size * shp, "marks": []})
    return out


def plan(out_dir: Path, summary: dict, scale: Optional[float] = None) -> dict:
    """Everything the pictures of ``out_dir`` show, as plain arrays and numbers (see the module notes).

    Returns ``{"data", "size", "scale", "views", "pictures": [spec, ...], "model": {...}}``; each spec
    has ``file``, ``title``, ``kind`` ("model", "mesh", "field"), ``views`` (names), ``field``,
    ``values (n,)`` or None, ``clim``, ``over`` (colour values above the range), ``cmap``, ``bar``
    (colour-bar title), ``deformed`` (bool), ``marks`` ([{name, node, value}]).
    """
    data = read_result(out_dir)
    pts, tri, fields = data["points"], data["tri"], data["fields"]
    size = float(np.linalg.norm(pts.max(axis=0) - pts.min(axis=0)))
    lab = summary.get("units", {})
    gov = summary.get("governing_peak") or {}
    case = gov.get("load_case")
    u, ukey = _case_field(fields, "displacement", case)
    u = np.zeros_like(pts) if u is None else np.asarray(u, dtype=float).reshape(-1, 3)
    umag = np.linalg.norm(u, axis=1)
    sf = scale or deformation_scale(size, float(umag.max()) if umag.size else 0.0)
    warped = pts + sf * u
    several = bool(summary.get("load_cases"))
    if several and "von_mises-envelope" in fields:
        vm, vmkey = np.asarray(fields["von_mises-envelope"], dtype=float), "von_mises-envelope"
    else:
        vm, vmkey = np.asarray(fields["von_mises"], dtype=float), "von_mises"
    # On a part of several materials governing_peak.overall is the governing material's; the part's
    # overall peak (drawn and capped over every material) is the highest of the materials' ones.
    per = [m for m in (gov.get("by_material") or {}).values() if m.get("value") is not None]
    whole = max((m.get("overall") or {} for m in per), key=lambda o: float(o.get("value") or -np.inf),
                default={})
    overall = (whole.get("at") or (gov.get("overall") or {}).get("at") or summary["max_von_mises"]["at"])
    n_over = _nearest(pts, overall)
    n_gov = _nearest(pts, gov.get("at")) if gov.get("at") is not None else n_over
    same = n_gov is None or np.linalg.norm(pts[n_gov] - pts[n_over]) <= SAME_PLACE * size
    # The consistent set of views: an isometric one, and the ones that show each peak.
    iso, iso_sees = ISO_DIRECTIONS[0], False
    want = [n for n in (n_gov, n_over) if n is not None]
    for d in ISO_DIRECTIONS:
        if all(visible(warped, tri, n, d, size) for n in want):
            iso, iso_sees = d, True
            break
    views = {"iso": {"direction": iso, "sees_peaks": iso_sees}}
    d, ok = choose_view(warped, tri, n_over, size)
    views["overall peak"] = {"direction": d, "sees_peaks": ok}
    if not same:
        d, ok = choose_view(warped, tri, n_gov, size)
        views["governing peak"] = {"direction": d, "sees_peaks": ok}
    views["back"] = {"direction": -iso, "sees_peaks": None}
    S, Lu = lab.get("stress", ""), lab.get("length", "")
    marks = [{"name": "overall peak", "node": n_over, "value": float(vm[n_over])}]
    if not same:
        marks.append({"name": "governing peak", "node": n_gov, "value": float(vm[n_gov])})
    elif gov:
        marks[0]["name"] = "peak (governs)"
    kind = ((summary.get("load_cases") or {}).get(case) or {}).get("kind") or "load case"
    shown_case = f" ({kind} '{case}')" if case else ""
    pics = []
    model = {"supports": support_scene(summary, data, size), "loads": load_scene(summary, data, size)}
    pics.append({"file": "picture-model.png", "kind": "model", "views": ["iso", "back"], "field": None,
                 "values": None, "title": "Model as applied: held directions and loads", "deformed": False,
                 "marks": []})
    hsize = element_size(pts, data["cells"])
    pics.append({"file": "picture-mesh.png", "kind": "mesh", "views": ["iso"], "field": "element size",
                 "values": hsize, "clim": color_limits(hsize[np.isfinite(hsize)]), "over": False,
                 "bar": f"element size [{Lu}]", "title": "Mesh: element edges, coloured by element size",
                 "deformed": False, "marks": []})
    vm_title = "von Mises envelope over every load case" if vmkey.endswith("envelope") else "von Mises stress"
    pics.append({"file": "picture-von-mises.png", "kind": "field", "views": ["iso"], "field": vmkey, "values": vm,
                 "clim": color_limits(vm), "over": False, "bar": f"von Mises [{S}]",
                 "title": f"{vm_title}, full range (deformed x {sf:g}{shown_case})", "deformed": True,
                 "marks": marks})
    # The colour scale stops at the highest governing peak of the materials: every value above it then
    # lies above its own material's governing (away) peak, next to a support or load.
    top = max((float(m["value"]) for m in per), default=gov.get("value"))
    stop = "highest governing peak of the materials" if len(per) > 1 else "governing peak"
    capped = top is not None and float(vm.max()) > float(top) * (1 + 1e-9)
    if capped:
        for vname, fname in (("iso", "picture-von-mises-capped.png"),
                             ("governing peak", "picture-von-mises-capped-governing.png"),
                             ("overall peak", "picture-von-mises-capped-overall.png")):
            if vname not in views:
                continue
            pics.append({"file": fname, "kind": "field", "views": [vname], "field": vmkey, "values": vm,
                         "clim": (float(min(vm.min(), top)), float(top)), "over": True, "bar": f"von Mises [{S}]",
                         "title": f"{vm_title}, scale stopped at the {stop} ({vname} view)",
                         "deformed": True, "marks": marks})
    else:
        for vname, fname in (("overall peak", "picture-von-mises-peak.png"),):
            pics.append({"file": fname, "kind": "field", "views": [vname], "field": vmkey, "values": vm,
                         "clim": color_limits(vm), "over": False, "bar": f"von Mises [{S}]",
                         "title": f"{vm_title} ({vname} view)", "deformed": True, "marks": marks})
    iu = int(np.argmax(umag)) if umag.size else 0
    pics.append({"file": "picture-displacement.png", "kind": "field", "views": ["iso"], "field": ukey,
                 "values": umag, "clim": color_limits(umag), "over": False, "bar": f"displacement [{Lu}]",
                 "title": f"Displacement magnitude (deformed x {sf:g}{shown_case})", "deformed": True,
                 "marks": [{"name": "largest displacement", "node": iu, "value": float(umag[iu])}]})
    util = fields.get("utilisation")
    if util is not None:
        util = np.asarray(util, dtype=float) * 100.0
        ut = gov.get("utilisation")
        capped_u = ut is not None and float(util.max()) > 100.0 * ut * (1 + 1e-9)
        clim = (0.0, 100.0 * ut) if capped_u else (0.0, float(util.max()))
        um = [dict(m, value=float(util[m["node"]])) for m in marks]
        pics.append({"file": "picture-utilisation.png", "kind": "field", "views": ["iso"], "field": "utilisation",
                     "values": util, "clim": clim, "over": capped_u, "bar": "utilisation [% of yield]",
                     "title": "Utilisation: von Mises over the yield strength" + (
                         ", scale stopped at the governing peak" if capped_u else ""),
                     "deformed": True, "marks": um})
    pics += eigen_pictures(summary, fields, pts, size)
    pb = data.get("point_body")
    if pb is not None and np.unique(pb).size > 1:
        ids = np.unique(pb)
        names = {b["id"]: b.get("material", "") for b in summary.get("bodies") or []}
        colors = [body_color(i) for i in range(ids.size)]
        pics.append({"file": "picture-bodies.png", "kind": "field", "views": ["iso", "back"], "field": "body",
                     "values": np.searchsorted(ids, pb).astype(float), "clim": (-0.5, ids.size - 0.5),
                     "over": False, "bar": "body", "colors": colors, "deformed": False, "marks": [],
                     "title": "Bodies, one colour each (undeformed)",
                     "bodies": {str(int(b)): {"color": c, "material": names.get(int(b), "")}
                                for b, c in zip(ids, colors)}})
    for p in pics:
        vals = p.get("values")
        if p.get("over") and vals is not None:
            _, _, a = face_frames(pts, tri)
            above = vals[tri].mean(axis=1) > p["clim"][1]
            p["over_range_area"] = float(a[above].sum() / max(a.sum(), 1e-300))
    return {"data": data, "size": size, "scale": sf, "warped": warped, "views": views, "pictures": pics,
            "model": model, "deformed_by": ukey}


def record(pl: dict, drawn: list[dict], renderer: str) -> dict:
    """pictures.json: what each picture drew (plain JSON values)."""
    pts = pl["data"]["points"]
    warped = pl["warped"]
    views = {k: {"direction": [float(c) for c in v["direction"]], "sees_peaks": v["sees_peaks"]}
             for k, v in pl["views"].items()}
    out = {"renderer": renderer, "scale": pl["scale"], "deformed_by": pl["deformed_by"], "views": views,
           "surface_ids": bool(pl["data"]["has_surface_ids"]), "pictures": []}
    for spec, extra in zip(pl["pictures"], drawn):
        e = {"file": spec["file"], "kind": spec["kind"], "title": spec["title"], "views": spec["views"],
             "field": spec.get("field"), "deformed": spec["deformed"]}
        if spec.get("clim") is not None:
            e["clim"] = [float(spec["clim"][0]), float(spec["clim"][1])]
            e["over_range"] = bool(spec.get("over"))
        if "over_range_area" in spec:
            e["over_range_area"] = spec["over_range_area"]
        if spec.get("bodies"):
            e["bodies"] = spec["bodies"]
        e["marks"] = []
        for m in spec["marks"]:
            X = warped if spec["deformed"] else pts
            e["marks"].append({"name": m["name"], "value": m["value"], "at": pts[m["node"]].tolist(),
                               "drawn_at": X[m["node"]].tolist(),
                               "visible": [bool(visible(X, pl["data"]["tri"], m["node"],
                                                        pl["views"][v]["direction"], pl["size"]))
                                           for v in spec["views"]]})
        if spec["kind"] == "model":
            md = pl["model"]
            e["supports"] = [{"region": s["region"], "fix": s["fix"], "frame": s["frame"], "points": s["points"],
                              "symbols": len(s["symbols"])} for s in md["supports"]]
            e["loads"] = [{"label": ld["label"], "kind": ld["kind"], "arrows": len(ld["arrows"]),
                           "moments": len(ld["moments"]), "lines": len(ld["lines"]), "shortened": ld["shortened"]}
                          for ld in md["loads"]]
        e.update(extra)
        out["pictures"].append(e)
    return out
