"""Fields at named points and along named lines, and the checks that they lie on the part."""
from __future__ import annotations

import numpy as np

from ..case.schema import Case
from ..errors import CaseError
from ..mesh import Mesh
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
            f"give a point inside or on the part (its bounding box is {format_xyz(lo)} to {format_xyz(hi)})")


def values_at(u: np.ndarray, stress: np.ndarray) -> dict[str, np.ndarray]:
    """``{"u", "stress", "von_mises", "principal"}`` of interpolated ``u (k, 3)`` and ``stress (k, 6)``."""
    return {"u": u, "stress": stress, "von_mises": von_mises(stress), "principal": principal(stress)}


def fields_at(mesh: Mesh, loc: Location, u: np.ndarray, stress: np.ndarray) -> dict[str, np.ndarray]:
    """Displacement ``u (k, 3)``, stress ``(k, 6)``, von Mises ``(k,)`` and principal ``(k, 3)`` at
    located points, interpolated from nodal ``u (n, 3)`` and ``stress (n, 6)``."""
    return values_at(interpolate(mesh.cells, loc, u), interpolate(mesh.cells, loc, stress))


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
                            f"{format_xyz(lo)} to {format_xyz(hi)})")


def probe_points(case: Case, mesh: Mesh, u: np.ndarray, stress: np.ndarray) -> dict:
    """``{name: {"at", "displacement", "von_mises", "stress", "principal"}}`` at each named point.

    ``u (n, 3)`` and ``stress (n, 6)`` are nodal fields. Raises :class:`CaseError` for a point
    outside the part.
    """
    if not case.points:
        return {}
    at = np.array([p.at for p in case.points], dtype=float)
    loc = locate(mesh.points, mesh.cells, at)
    for i, p in enumerate(case.points):
        if loc.outside[i] > on_part_tolerance(mesh):
            raise CaseError(f"point[{i + 1}].at", list(p.at), outside_message(mesh, loc.outside[i], case))
    return point_results(case, fields_at(mesh, loc, u, stress))


def point_results(case: Case, v: dict) -> dict:
    """The named points' entries from :func:`values_at` of the case's points, in order."""
    return {p.name: {"at": np.asarray(p.at), "displacement": v["u"][i], "von_mises": float(v["von_mises"][i]),
                     "stress": v["stress"][i], "principal": v["principal"][i]}
            for i, p in enumerate(case.points)}


def sample_lines(case: Case, mesh: Mesh, u: np.ndarray, stress: np.ndarray) -> dict[str, LineResult]:
    """Fields at evenly spaced samples along each named line (NaN outside the part)."""
    out = {}
    for i, ln in enumerate(case.lines, 1):
        tpar, xyz = line_samples(ln)
        loc = locate(mesh.points, mesh.cells, xyz)
        out_mask = loc.outside > on_part_tolerance(mesh)
        if out_mask.all():
            raise CaseError(f"line[{i}]", {"start": list(ln.start), "end": list(ln.end)},
                            "lies wholly outside the part; give a line through the part")
        out[ln.name] = line_result(ln, fields_at(mesh, loc, u, stress), out_mask)
    return out


def line_result(ln, v: dict, out_mask: np.ndarray) -> LineResult:
    """A line's :class:`LineResult` from :func:`values_at` of its samples; NaN where ``out_mask (k,)``."""
    tpar, xyz = line_samples(ln)
    for key in ("u", "stress", "von_mises"):
        v[key] = np.where(out_mask.reshape((-1,) + (1,) * (v[key].ndim - 1)), np.nan, v[key])
    length = float(np.linalg.norm(np.asarray(ln.end, dtype=float) - np.asarray(ln.start, dtype=float)))
    return LineResult(name=ln.name, s=tpar * length, xyz=xyz, u=v["u"], stress=v["stress"],
                      von_mises=v["von_mises"], outside=int(out_mask.sum()))
