"""Fields at named points and along named lines, and the checks that they lie on the part."""
from __future__ import annotations

from typing import Optional

import numpy as np

from ..bodies import Interfaces, MaterialMap, assign_materials, interfaces, point_sides
from ..case.schema import Case
from ..errors import CaseError
from ..mesh import BodyNodes, Mesh
from ..regions import model_size
from ..result import LineResult
from .probe import Location, interpolate, locate
from .recovery import principal, von_mises

__all__ = ["on_part_tolerance", "part_tolerance", "fields_at", "values_at", "probe_points", "point_results",
           "sample_lines", "line_result", "line_samples", "check_points_and_lines", "outside_message", "format_xyz"]


def part_tolerance(size: float) -> float:
    """How far outside a part of bounding-box diagonal ``size`` a point may lie and still count as
    on the part [length]."""
    return 1e-4 * size


def on_part_tolerance(mesh: Mesh) -> float:
    """How far outside the mesh a point may lie and still count as on the part [length]."""
    return part_tolerance(model_size(mesh))


def format_xyz(v) -> str:
    """``[x, y, z]`` with four significant figures."""
    return "[" + ", ".join(f"{c:.4g}" for c in v) + "]"


def outside_message(mesh: Mesh, distance: float, case: Case) -> str:
    """Why a point is refused: its distance to the part and the part's bounding box."""
    lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
    return (f"lies outside the part (about {distance:.3g} {case.units.labels['length']} from it); "
            f"give a point inside or on the part (its bounding box is {format_xyz(lo)} to {format_xyz(hi)} "
            f"{case.units.labels['length']})")


def values_at(u: np.ndarray, stress: np.ndarray) -> dict[str, np.ndarray]:
    """``{"u", "stress", "von_mises", "principal"}`` of interpolated ``u (k, 3)`` and ``stress (k, 6)``."""
    return {"u": u, "stress": stress, "von_mises": von_mises(stress), "principal": principal(stress)}


def fields_at(mesh: Mesh, loc: Location, u: np.ndarray, stress: np.ndarray,
              nodes: Optional[BodyNodes] = None, found: Optional[Interfaces] = None) -> dict[str, np.ndarray]:
    """Displacement ``u (k, 3)``, stress ``(k, 6)``, von Mises ``(k,)`` and principal ``(k, 3)`` at
    located points, interpolated from nodal ``u (n, 3)`` and ``stress (n, 6)``, or ``stress (q, 6)``
    at the split nodes ``nodes`` (the stress of the body of the cell holding each point).

    For a part of several bodies ``body (k,)`` (the body each point reports) and ``on_interface
    (k,)`` (points on an interface between bodies) are added; ``found`` (:func:`elastofe.bodies.
    interfaces`, built once per mesh) saves finding the interfaces again.
    """
    ui = interpolate(mesh.cells, loc, u)
    s = interpolate(nodes.cells if nodes is not None and not nodes.identity else mesh.cells, loc, stress)
    out = values_at(ui, s)
    found = found if found is not None else interfaces(mesh)
    if found is not None:
        out["body"], out["on_interface"] = point_sides(mesh, loc, found)
    return out


def line_samples(ln) -> tuple[np.ndarray, np.ndarray]:
    """``(t (k,), xyz (k, 3))``: the evenly spaced parameters and points of a case's line."""
    a, b = np.asarray(ln.start, dtype=float), np.asarray(ln.end, dtype=float)
    t = np.linspace(0.0, 1.0, ln.samples)
    return t, a + t[:, None] * (b - a)


def check_points_and_lines(case: Case, mesh: Mesh) -> None:
    """Refuse (:class:`CaseError`) named points outside the part and lines wholly outside it.

    Cheap; run right after meshing so that a wrong input never costs a solve.
    """
    tol = on_part_tolerance(mesh)
    if case.points:
        loc = locate(mesh.points, mesh.cells, np.array([p.at for p in case.points], dtype=float))
        for i, p in enumerate(case.points):
            if loc.outside[i] > tol:
                raise CaseError(f"point[{i + 1}].at", list(p.at), outside_message(mesh, loc.outside[i], case))
    for i, ln in enumerate(case.lines, 1):
        _, xyz = line_samples(ln)
        loc = locate(mesh.points, mesh.cells, xyz)
        if (loc.outside > tol).all():
            lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
            raise CaseError(f"line[{i}]", {"start": list(ln.start), "end": list(ln.end)},
                            "lies wholly outside the part; give a line through the part (its bounding box is "
                            f"{format_xyz(lo)} to {format_xyz(hi)} {case.units.labels['length']})")


def probe_points(case: Case, mesh: Mesh, u: np.ndarray, stress: np.ndarray,
                 nodes: Optional[BodyNodes] = None, materials: Optional[MaterialMap] = None,
                 found: Optional[Interfaces] = None) -> dict:
    """``{name: {"at", "displacement", "von_mises", "stress", "principal"}}`` at each named point.

    ``u (n, 3)`` is nodal, ``stress`` nodal ``(n, 6)`` or at the split nodes ``(q, 6)`` of
    ``nodes``. For a part of several bodies each point also says which body (and material) it
    reports and whether it lies on an interface between bodies (``"body"``, ``"material"``,
    ``"on_interface"``). Raises :class:`CaseError` for a point outside the part.
    """
    if not case.points:
        return {}
    at = np.array([p.at for p in case.points], dtype=float)
    loc = locate(mesh.points, mesh.cells, at)
    for i, p in enumerate(case.points):
        if loc.outside[i] > on_part_tolerance(mesh):
            raise CaseError(f"point[{i + 1}].at", list(p.at), outside_message(mesh, loc.outside[i], case))
    v = fields_at(mesh, loc, u, stress, nodes, found)
    out = point_results(case, v)
    if "body" in v:
        mm = materials if materials is not None else assign_materials(case, mesh)
        for i, p in enumerate(case.points):
            b = int(v["body"][i])
            out[p.name].update(body=b, on_interface=bool(v["on_interface"][i]), material=mm.material_of_body(b).name)
    return out


def point_results(case: Case, v: dict) -> dict:
    """The named points' entries from :func:`values_at` of the case's points, in order."""
    return {p.name: {"at": np.asarray(p.at), "displacement": v["u"][i], "von_mises": float(v["von_mises"][i]),
                     "stress": v["stress"][i], "principal": v["principal"][i]}
            for i, p in enumerate(case.points)}


def sample_lines(case: Case, mesh: Mesh, u: np.ndarray, stress: np.ndarray,
                 nodes: Optional[BodyNodes] = None, found: Optional[Interfaces] = None) -> dict[str, LineResult]:
    """Fields at evenly spaced samples along each named line (NaN outside the part); ``stress`` as
    for :func:`probe_points`. For a part of several bodies each sample says which body it reports."""
    out = {}
    for i, ln in enumerate(case.lines, 1):
        tpar, xyz = line_samples(ln)
        loc = locate(mesh.points, mesh.cells, xyz)
        out_mask = loc.outside > on_part_tolerance(mesh)
        if out_mask.all():
            raise CaseError(f"line[{i}]", {"start": list(ln.start), "end": list(ln.end)},
                            "lies wholly outside the part; give a line through the part")
        out[ln.name] = line_result(ln, fields_at(mesh, loc, u, stress, nodes, found), out_mask)
    return out


def line_result(ln, v: dict, out_mask: np.ndarray) -> LineResult:
    """A line's :class:`LineResult` from :func:`values_at` (or :func:`fields_at`) of its samples; NaN
    where ``out_mask (k,)``; for a part of several bodies the body each sample reports."""
    tpar, xyz = line_samples(ln)
    for key in ("u", "stress", "von_mises"):
        v[key] = np.where(out_mask.reshape((-1,) + (1,) * (v[key].ndim - 1)), np.nan, v[key])
    body = iface = None
    if "body" in v:
        body = np.where(out_mask, 0, v["body"])
        iface = v["on_interface"] & ~out_mask
    length = float(np.linalg.norm(np.asarray(ln.end, dtype=float) - np.asarray(ln.start, dtype=float)))
    return LineResult(name=ln.name, s=tpar * length, xyz=xyz, u=v["u"], stress=v["stress"],
                      von_mises=v["von_mises"], outside=int(out_mask.sum()), body=body, on_interface=iface)
