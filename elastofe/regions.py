"""Region selectors: from a selector and the surface catalogue to surface ids, faces and nodes."""
from __future__ import annotations

import numpy as np

from .case.schema import At, Box, Cylinder, Edge, Group, Plane, Surfaces
from .errors import CaseError, short_repr
from .mesh import Mesh, SurfaceInfo, surface_catalogue


def _unit(v) -> np.ndarray:
    v = np.asarray(v, dtype=float)
    return v / np.linalg.norm(v)


def point_triangle_distance(p: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """Distance from point ``p (3,)`` to each triangle ``tri (f, 3, 3)`` [length], ``(f,)``."""
    a, b, c = tri[:, 0], tri[:, 1], tri[:, 2]
    n = np.cross(b - a, c - a)
    nn = np.einsum("ij,ij->i", n, n)
    nn = np.where(nn > 0, nn, 1.0)
    # Barycentric coordinates of the projection.
    w = p - a
    proj = p - (np.einsum("ij,ij->i", w, n) / nn)[:, None] * n
    v0, v1, v2 = b - a, c - a, proj - a
    d00 = np.einsum("ij,ij->i", v0, v0)
    d01 = np.einsum("ij,ij->i", v0, v1)
    d11 = np.einsum("ij,ij->i", v1, v1)
    d20 = np.einsum("ij,ij->i", v2, v0)
    d21 = np.einsum("ij,ij->i", v2, v1)
    den = d00 * d11 - d01 ** 2
    den = np.where(den != 0, den, 1.0)
    v = (d11 * d20 - d01 * d21) / den
    ww = (d00 * d21 - d01 * d20) / den
    inside = (v >= 0) & (ww >= 0) & (v + ww <= 1)
    d_in = np.linalg.norm(p - proj, axis=1)

    def seg(x, y):
        d = y - x
        t = np.clip(np.einsum("ij,ij->i", p - x, d) / np.maximum(np.einsum("ij,ij->i", d, d), 1e-300), 0, 1)
        return np.linalg.norm(p - (x + t[:, None] * d), axis=1)

    d_edge = np.minimum(np.minimum(seg(a, b), seg(b, c)), seg(c, a))
    return np.where(inside, d_in, d_edge)


def model_size(mesh: Mesh) -> float:
    """Bounding-box diagonal of the mesh [length]."""
    return float(np.linalg.norm(mesh.points.max(axis=0) - mesh.points.min(axis=0)))


def length_label(mesh: Mesh) -> str:
    """" mm" (with its leading space): the length unit of ``mesh``'s numbers for messages, from the
    geometry it was read from; empty for a mesh built in code."""
    src = getattr(mesh, "source", None)
    return f" {src.length_unit}" if src is not None and getattr(src, "length_unit", None) else ""


def vector_text(v, fmt: str = ".4g", scale: float | None = None) -> str:
    """``(x, y, z)`` for messages: components below 1e-9 of ``scale`` (default: the largest
    component) are round-off of a fit or a sum, shown as 0."""
    big = max((abs(c) for c in v), default=0.0) if scale is None else scale
    return "(" + ", ".join(f"{(c if abs(c) > 1e-9 * big else 0.0):{fmt}}" for c in v) + ")"


def select(selector, mesh: Mesh, catalogue: list[SurfaceInfo], key: str) -> list[int]:
    """Surface ids matched by ``selector``; raises :class:`CaseError` when none match."""
    diag = model_size(mesh)
    L = length_label(mesh)
    ids: list[int] = []
    if isinstance(selector, Plane):
        tol = selector.tol if selector.tol is not None else 1e-5 * diag
        n = _unit(selector.normal)
        p0 = np.asarray(selector.point, dtype=float)
        for s in catalogue:
            pts = mesh.points[np.unique(mesh.surface_faces([s.id]))]
            if np.abs((pts - p0) @ n).max() <= tol:
                ids.append(s.id)
        parallel = [s.centroid for s in catalogue
                    if s.kind == "plane" and s.normal is not None and abs(abs(np.dot(s.normal, n)) - 1) < 1e-6]
        shown = ", ".join("(" + ", ".join(f"{c:.4g}" for c in cen) + ")" for cen in parallel[:8])
        near = (f"; planar surfaces parallel to it pass through {shown}{L}" if parallel
                else "; no planar surface of the part has that normal")
        what = (f"no boundary surface lies in the plane through {list(selector.point)}{L} with normal "
                f"{list(selector.normal)}{near} (run `elastofe surfaces FILE` to list the surfaces)")
    elif isinstance(selector, Cylinder):
        tol = selector.tol if selector.tol is not None else max(1e-4 * diag, 1e-3 * selector.radius)
        for s in catalogue:
            if s.kind != "cylinder" or abs(s.radius - selector.radius) > tol:
                continue
            if selector.axis is not None and abs(abs(np.dot(_unit(selector.axis), s.axis)) - 1) > 1e-4:
                continue
            if selector.point is not None:
                d = np.asarray(selector.point) - np.asarray(s.axis_point)
                if np.linalg.norm(d - np.dot(d, s.axis) * np.asarray(s.axis)) > tol:
                    continue
            ids.append(s.id)
        radii = sorted({round(s.radius, 6) for s in catalogue if s.kind == "cylinder"})
        def vec(v, fmt=".4g"):  # components below 1e-9 of the part's size are round-off, shown as 0
            return vector_text(v, fmt, diag)

        extra = (f" with axis {vec(selector.axis, 'g')}" if selector.axis is not None else "") + \
            (f" through {vec(selector.point, 'g')}{L}" if selector.point is not None else "")
        what = (f"no cylindrical surface of radius {selector.radius:g}{L}{extra} matches"
                f" (cylinder radii in the model: {(', '.join(f'{r:g}' for r in radii) + L) if radii else 'none'})")
        same_r = [s for s in catalogue if s.kind == "cylinder" and abs(s.radius - selector.radius) <= tol]
        if same_r and extra:  # the radius matched: say where those cylinders are instead
            shown = "; ".join(f"surface {s.id}: axis {vec(s.axis, '.3g')} through {vec(s.axis_point)}{L}"
                              for s in same_r[:6])
            what = (f"no cylindrical surface of radius {selector.radius:g}{L}{extra} matches; the cylinders of that "
                    f"radius are {shown} (an axis in either sense matches; a point must lie on the axis)")
    elif isinstance(selector, At):
        tol = selector.tol if selector.tol is not None else 1e-4 * diag
        p = np.asarray(selector.point, dtype=float)
        tri = mesh.points[mesh.faces[:, :3]]
        d = point_triangle_distance(p, tri)
        ids = sorted({int(i) for i in np.unique(mesh.face_surface[d <= tol])})
        what = (f"the point {list(selector.point)}{L} lies on no boundary surface (nearest is {d.min():.4g}{L} "
                f"away, tolerance {tol:.3g}{L}); give a point on the surface or a larger tol")
    elif isinstance(selector, Box):
        lo, hi = np.asarray(selector.min), np.asarray(selector.max)
        ids = [s.id for s in catalogue if np.all(np.asarray(s.bbox_min) >= lo) and np.all(np.asarray(s.bbox_max) <= hi)]
        lo_m, hi_m = mesh.points.min(axis=0), mesh.points.max(axis=0)
        what = (f"no boundary surface lies wholly inside the box {list(selector.min)}..{list(selector.max)} "
                f"(the part spans [{', '.join(f'{v:.4g}' for v in lo_m)}]..[{', '.join(f'{v:.4g}' for v in hi_m)}]; "
                "run `elastofe surfaces FILE` to list the surfaces and their extents)")
    elif isinstance(selector, Surfaces):
        known = {s.id for s in catalogue}
        bad = [i for i in selector.ids if i not in known]
        if bad:
            raise CaseError(key, list(selector.ids), f"unknown surface id(s) {short_repr(bad, 80)}; valid ids: "
                            f"1..{max(known)} "
                            "(run `elastofe surfaces FILE` to list them)")
        ids = list(selector.ids)
        what = ""
    elif isinstance(selector, Edge):
        raise CaseError(key, _describe(selector), "is an edge region (nodes along a line), not a set of "
                        "surfaces; only [[support]] may use it")
    elif isinstance(selector, Group):
        if selector.name not in mesh.groups:
            raise CaseError(key, selector.name, f"no physical group of that name; groups in the mesh: "
                            f"{', '.join(mesh.groups) or 'none'}")
        ids = list(mesh.groups[selector.name])
        what = f"physical group {selector.name!r} has no surfaces"
    else:  # pragma: no cover
        raise TypeError(selector)
    if not ids:
        raise CaseError(key, _describe(selector), what)
    return ids


def _describe(selector) -> object:
    from dataclasses import asdict

    return {type(selector).__name__.lower(): {k: v for k, v in asdict(selector).items() if v is not None}}


def resolve_regions(case, mesh: Mesh, catalogue=None) -> dict[str, list[int]]:
    """Surface ids of every region of the case, plus physical groups of the mesh under their names."""
    catalogue = catalogue if catalogue is not None else surface_catalogue(mesh)
    out = {name: select(sel, mesh, catalogue, f"regions.{name}") for name, sel in case.regions.items()
           if not isinstance(sel, Edge)}
    for name, ids in mesh.groups.items():
        out.setdefault(name, list(ids))
    # Edge regions hold nodes, not surfaces: listed with no surface ids, checked to match nodes.
    for name, sel in case.regions.items():
        if isinstance(sel, Edge):
            edge_nodes(sel, mesh, out, f"regions.{name}.edge")
            out[name] = []
    return out


def edge_nodes(selector: Edge, mesh: Mesh, region_ids: dict[str, list[int]], key: str) -> np.ndarray:
    """Sorted boundary node indices ``(k,)`` on an edge selector's line; raises when none match.

    A straight segment takes boundary nodes within ``tol`` (default 1e-5 of the model size) of
    it; the plane form takes the nodes of ``region`` within ``tol`` of the plane.
    """
    diag = model_size(mesh)
    tol = selector.tol if selector.tol is not None else 1e-5 * diag
    if selector.start is not None:
        nodes = np.unique(mesh.faces)
        p = mesh.points[nodes]
        a, b = np.asarray(selector.start), np.asarray(selector.end)
        d = b - a
        t = np.clip((p - a) @ d / (d @ d), 0.0, 1.0)
        dist = np.linalg.norm(p - (a + t[:, None] * d), axis=1)
        hit = nodes[dist <= tol]
        what = f"no boundary node lies on the segment {list(selector.start)}..{list(selector.end)}" \
               f" (nearest is {dist.min():.4g} away)"
    else:
        if selector.region not in region_ids:
            raise CaseError(f"{key}.region", selector.region, "unknown surface region")
        nodes = region_nodes(mesh, region_ids[selector.region])
        n = _unit(selector.normal)
        dist = np.abs((mesh.points[nodes] - np.asarray(selector.point)) @ n)
        hit = nodes[dist <= tol]
        what = (f"no node of region {selector.region!r} lies in the plane through {list(selector.point)} "
                f"with normal {list(selector.normal)} (nearest is {dist.min():.4g} away)")
    if hit.size < 2:
        raise CaseError(key, _describe(selector), what + "; an edge needs at least two nodes")
    return hit


def region_nodes(mesh: Mesh, ids) -> np.ndarray:
    """Sorted node indices on the given surfaces, ``(k,)``."""
    return np.unique(mesh.surface_faces(ids))


def point_node(mesh: Mesh, at, tol=None, key: str = "support.at") -> tuple[int, float]:
    """The node held by a point support at ``at (3,)`` [length]: ``(node index, its distance)``.

    A node at the point (a vertex of the geometry, where the mesher always puts one) is taken;
    otherwise the nearest node, when it lies within ``tol`` (default: the mean corner-edge length of
    the elements around that node, one local element size). Corner nodes and mid-side nodes count
    alike. Raises :class:`CaseError` (``key``) when the nearest node is farther.
    """
    p = np.asarray(at, dtype=float)
    L = length_label(mesh)
    d = np.linalg.norm(mesh.points - p, axis=1)
    node = int(np.argmin(d))
    dist = float(d[node])
    if tol is None:
        e, _ = np.nonzero(mesh.cells == node)
        X = mesh.points[mesh.cells[e, :4]]
        pairs = np.array([(0, 1), (1, 2), (2, 0), (0, 3), (1, 3), (2, 3)])
        tol = float(np.linalg.norm(X[:, pairs[:, 0]] - X[:, pairs[:, 1]], axis=2).mean()) if e.size else 0.0
        limit = f"one local element size ({tol:.4g}{L})"
    else:
        limit = f"tol = {tol:.4g}{L}"
    if dist > tol:
        raise CaseError(key, list(map(float, p)), f"has no node near it: the nearest node, at "
                        f"[{', '.join(f'{c:.4g}' for c in mesh.points[node])}]{L}, lies {dist:.4g}{L} away, "
                        f"farther than {limit}; give a vertex of the part (or a point on it with a larger tol)")
    return node, dist


def surface_patches(mesh: Mesh, ids) -> list[list[int]]:
    """The given surfaces grouped into connected patches (surfaces sharing a boundary edge), each
    sorted, the patches in order of their smallest id."""
    ids = sorted({int(i) for i in ids})
    if len(ids) <= 1:
        return [ids] if ids else []
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components

    sel = np.isin(mesh.face_surface, ids)
    faces = mesh.faces[sel][:, :3]
    sid = mesh.face_surface[sel]
    e = np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]])
    e = np.sort(e, axis=1)
    owner = np.tile(sid, 3)
    order = np.lexsort((e[:, 1], e[:, 0]))
    e, owner = e[order], owner[order]
    same = np.all(e[1:] == e[:-1], axis=1) & (owner[1:] != owner[:-1])
    pos = {s: k for k, s in enumerate(ids)}
    a = np.array([pos[int(s)] for s in owner[:-1][same]], dtype=np.int64)
    b = np.array([pos[int(s)] for s in owner[1:][same]], dtype=np.int64)
    g = sp.coo_matrix((np.ones(a.size), (a, b)), shape=(len(ids), len(ids)))
    _, lab = connected_components(g, directed=False)
    groups: dict[int, list[int]] = {}
    for s, l in zip(ids, lab):
        groups.setdefault(int(l), []).append(s)
    return sorted(groups.values(), key=lambda g: g[0])


def _xyz(v) -> list:
    return [float(c) for c in v]


def describe_matches(case, mesh: Mesh, catalogue: list[SurfaceInfo], region_ids: dict[str, list[int]]) -> dict:
    """What each region of the case matched, for people and for summary.json.

    Returns ``{region: {"kind": selector kind, "surfaces": [{"id", "kind", "area", "centroid", and
    "normal" or "axis", "axis_point", "radius"}], "area", "patches": [[ids]], "warnings": [str]}}``
    (areas in the case's length unit squared). Regions of node kind (edges) list their node count.
    """
    by_id = {s.id: s for s in catalogue}
    out: dict = {}
    for name, sel in case.regions.items():
        entry: dict = {"kind": type(sel).__name__.lower()}
        if isinstance(sel, Edge):
            entry["nodes"] = int(edge_nodes(sel, mesh, region_ids, f"regions.{name}.edge").size)
            out[name] = entry
            continue
        ids = region_ids.get(name, [])
        surfs = []
        for i in ids:
            s = by_id.get(i)
            if s is None:
                continue
            d = {"id": s.id, "kind": s.kind, "area": float(s.area), "centroid": _xyz(s.centroid)}
            if s.kind == "plane" and s.normal is not None:
                d["normal"] = _xyz(s.normal)
            if s.kind == "cylinder":
                d.update(axis=_xyz(s.axis), axis_point=_xyz(s.axis_point), radius=float(s.radius))
            surfs.append(d)
        entry["surfaces"] = surfs
        entry["area"] = float(sum(d["area"] for d in surfs))
        entry["patches"] = surface_patches(mesh, ids)
        entry["warnings"] = ambiguity(name, entry, model_size(mesh))
        out[name] = entry
    for name, ids in region_ids.items():  # physical groups of a mesh file used by name
        if name not in out and ids:
            out[name] = {"kind": "group", "surfaces": [{"id": int(i), "kind": by_id[i].kind,
                                                        "area": float(by_id[i].area),
                                                        "centroid": _xyz(by_id[i].centroid)}
                                                       for i in ids if i in by_id],
                         "area": float(sum(by_id[i].area for i in ids if i in by_id)),
                         "patches": surface_patches(mesh, ids), "warnings": []}
    return out


def ambiguity(name: str, entry: dict, size: float) -> list[str]:
    """Why a region's match may not be the one intended: several separate patches, or cylinders
    with different axes (each a sentence naming the surfaces)."""
    out = []
    patches = entry.get("patches") or []
    if len(patches) > 1:
        shown = "; ".join("surfaces " + ", ".join(str(i) for i in p) for p in patches[:6])
        more = f" and {len(patches) - 6} more" if len(patches) > 6 else ""
        out.append(f"region '{name}' matches {len(patches)} separate patches ({shown}{more})")
    cyl = [d for d in entry.get("surfaces", []) if d["kind"] == "cylinder"]
    if len(cyl) > 1:
        a0, p0 = np.asarray(cyl[0]["axis"]), np.asarray(cyl[0]["axis_point"])
        other = []
        for d in cyl[1:]:
            a, p = np.asarray(d["axis"]), np.asarray(d["axis_point"])
            off = (p - p0) - np.dot(p - p0, a0) * a0
            if abs(abs(float(np.dot(a, a0))) - 1.0) > 1e-4 or np.linalg.norm(off) > 1e-4 * max(size, 1e-300):
                other.append(d["id"])
        if other:
            out.append(f"region '{name}' matches cylinders with different axes (surface {cyl[0]['id']} and "
                       f"surface(s) {', '.join(str(i) for i in other)})")
    return out
