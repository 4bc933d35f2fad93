"""Comparison of a run with another solver's exported results (the ``[reference]`` section).

Our fields are evaluated at the reference points by element location and shape-function
interpolation (:mod:`elastofe.post.probe`). A point a little outside our mesh (their mesh and ours
approximate curved surfaces differently) is moved to the nearest point of our boundary when it lies
within the snap distance, and reported as snapped with its distance; a point farther out is
reported as outside and not compared. Nothing is dropped silently.

Tolerances: a percentage on a scalar is of the reference value; a percentage on a point set is of
the largest reference magnitude of that kind (displacement or stress) in the set, so values and
components near zero are not judged by their own tiny size; an absolute tolerance is used as it
is; with both, the larger allowance counts.

:func:`compare` returns a JSON-ready document (``comparison.json``); :func:`write_comparison`
writes it with ``comparison.csv`` (one row per point and quantity) and the plots.
"""
from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Optional

import numpy as np
from scipy.spatial import cKDTree

from ..case.reference import POINT_QUANTITIES, SCALAR_QUANTITIES, RefScalar, RefSet
from ..errors import CaseError
from ..files import check_input_file, json_ready, read_input_bytes, safe_name, sha256_file, write_text
from ..post.probe import interpolate, locate
from ..post.recovery import principal, von_mises
from ..regions import model_size
from ..resources import file_read_limit

if TYPE_CHECKING:  # pragma: no cover
    from ..result import Result

INSIDE, SNAPPED, OUTSIDE = 0, 1, 2
#: A reference field (a mesh of the same part) whose points span more than this factor more or
#: less than our part is likely in another length unit.
FIELD_SPAN_FACTOR = 5.0
STATUS_WORDS = ("inside", "snapped", "outside")
#: Default snap distance as a share of the bounding-box diagonal.
SNAP_SHARE = 0.01
_COMP = {"sxx": 0, "syy": 1, "szz": 2, "sxy": 3, "syz": 4, "sxz": 5}


# ----------------------------------------------------------------------------- evaluation
def quantities_from(u: np.ndarray, s: np.ndarray) -> dict[str, np.ndarray]:
    """Every point quantity from displacements ``(p, 3)`` and stresses ``(p, 6)``; each ``(p,)``."""
    out = {"ux": u[:, 0], "uy": u[:, 1], "uz": u[:, 2], "u": np.linalg.norm(u, axis=1)}
    for k, c in _COMP.items():
        out[k] = s[:, c]
    out["von_mises"] = von_mises(s)
    pr = principal(s)
    out["s1"], out["s2"], out["s3"] = pr[:, 0], pr[:, 1], pr[:, 2]
    return out


def closest_on_triangles(p: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """Closest point on each triangle to each point: ``p (p, 3)``, ``tri (p, k, 3, 3)`` -> ``(p, k, 3)``.

    The closest point is the projection onto the plane when that falls inside the triangle,
    otherwise the closest point on one of its three edges.
    """
    P = p[:, None, :]
    a, b, c = tri[..., 0, :], tri[..., 1, :], tri[..., 2, :]
    n = np.cross(b - a, c - a)
    nn = np.einsum("pki,pki->pk", n, n)
    nn = np.where(nn > 0, nn, 1.0)
    proj = P - (np.einsum("pki,pki->pk", P - a, n) / nn)[..., None] * n
    v0, v1, v2 = b - a, c - a, proj - a
    d00 = np.einsum("pki,pki->pk", v0, v0)
    d01 = np.einsum("pki,pki->pk", v0, v1)
    d11 = np.einsum("pki,pki->pk", v1, v1)
    d20 = np.einsum("pki,pki->pk", v2, v0)
    d21 = np.einsum("pki,pki->pk", v2, v1)
    den = d00 * d11 - d01 ** 2
    den = np.where(den != 0, den, 1.0)
    v = (d11 * d20 - d01 * d21) / den
    w = (d00 * d21 - d01 * d20) / den
    inside = (v >= 0) & (w >= 0) & (v + w <= 1)

    def seg(x, y):
        d = y - x
        t = np.clip(np.einsum("pki,pki->pk", P - x, d) / np.maximum(np.einsum("pki,pki->pk", d, d), 1e-300), 0, 1)
        return x + t[..., None] * d

    cands = np.stack([seg(a, b), seg(b, c), seg(c, a)], axis=2)  # (p, k, 3, 3)
    dist = np.linalg.norm(cands - P[:, :, None, :], axis=3)
    edge = np.take_along_axis(cands, np.argmin(dist, axis=2)[..., None, None], axis=2)[:, :, 0]
    return np.where(inside[..., None], proj, edge)


#: How close a reference point must lie to a [[line]] to be drawn on it, as a fraction of the
#: part's size: points of a CSV (written to a few digits) and nodes of a field file (exact).
LINE_TOL_POINTS = 1e-3
LINE_TOL_FIELD = 1e-6


@dataclass
class Evaluation:
    """Our fields at reference points: ``status (p,)`` (INSIDE, SNAPPED, OUTSIDE), ``distance (p,)``
    outside our mesh [length] (0 inside), ``used (p, 3)`` the point evaluated (the snapped one),
    ``values`` {quantity: (p,)} (NaN where outside)."""

    status: np.ndarray
    distance: np.ndarray
    used: np.ndarray
    values: dict


def evaluate_at(res: Result, xyz: np.ndarray, snap: float) -> Evaluation:
    """Evaluate our displacement and stress quantities at points ``xyz (p, 3)`` [length].

    Points within ``snap`` of our boundary but outside the mesh are moved to the nearest boundary
    point (on the straight-sided faces through the corner nodes).
    """
    mesh = res.mesh
    given = np.atleast_2d(np.asarray(xyz, dtype=float))
    npt = given.shape[0]
    # Points a million part sizes away (1e308, say) are outside: evaluated at the part's centre and
    # marked so below, never fed to the geometry (their squares would overflow).
    lo_m, hi_m = mesh.points.min(axis=0), mesh.points.max(axis=0)
    centre = 0.5 * (lo_m + hi_m)
    with np.errstate(all="ignore"):
        excess = np.abs(given - centre).max(axis=1) - 0.5 * float(np.max(hi_m - lo_m))
    far = ~(excess <= 1e6 * model_size(mesh) + snap)
    xyz = np.where(far[:, None], centre, given)
    inside_tol = 1e-4 * model_size(mesh)  # the same allowance as the [[point]] probes
    loc = locate(mesh.points, mesh.cells, xyz)
    flagged = np.flatnonzero(loc.outside > inside_tol)
    if flagged.size:
        # A point inside the part whose cell was not among the nearest few by centroid (large or
        # slender cells) would look outside: look again among many more candidates.
        again = locate(mesh.points, mesh.cells, xyz[flagged], candidates=256)
        better = again.outside < loc.outside[flagged]
        if better.any():
            cell, xi, outside = loc.cell.copy(), loc.xi.copy(), loc.outside.copy()
            idx = flagged[better]
            cell[idx], xi[idx], outside[idx] = again.cell[better], again.xi[better], again.outside[better]
            loc = type(loc)(cell, xi, outside)
    status = np.full(npt, INSIDE)
    dist = np.zeros(npt)
    used = xyz.copy()
    out = np.flatnonzero(loc.outside > inside_tol)
    if out.size:
        tri = mesh.points[mesh.faces[:, :3]]  # (f, 3, 3)
        k = min(32, tri.shape[0])
        _, cand = cKDTree(tri.mean(axis=1)).query(xyz[out], k=k)
        cand = cand.reshape(out.size, k)
        cp = closest_on_triangles(xyz[out], tri[cand])  # (o, k, 3)
        d = np.linalg.norm(cp - xyz[out][:, None, :], axis=2)
        best = np.argmin(d, axis=1)
        dist[out] = d[np.arange(out.size), best]
        used[out] = cp[np.arange(out.size), best]
        near = dist[out] <= snap
        status[out[near]] = SNAPPED
        status[out[~near]] = OUTSIDE
        if near.any():
            # Re-locate the snapped points on our boundary (interpolation clamps to the cell).
            loc2 = locate(mesh.points, mesh.cells, used[out[near]])
            cell = loc.cell.copy()
            xi = loc.xi.copy()
            cell[out[near]] = loc2.cell
            xi[out[near]] = loc2.xi
            loc = type(loc)(cell, xi, loc.outside)
    if far.any():
        status[far] = OUTSIDE
        dist[far] = np.where(np.isfinite(excess[far]), excess[far], np.inf)
        used[far] = given[far]
    u = interpolate(mesh.cells, loc, res.u)
    nodes = getattr(res, "body_nodes", None)
    if nodes is not None and not nodes.identity and getattr(res, "body_stress", None) is not None:
        s = interpolate(nodes.cells, loc, res.body_stress)  # each point: the stress of its own body
    else:
        s = interpolate(mesh.cells, loc, res.stress)
    vals = quantities_from(u, s)
    gone = status == OUTSIDE
    for q in vals:
        vals[q] = np.where(gone, np.nan, vals[q])
    return Evaluation(status, dist, used, vals)


# ----------------------------------------------------------------------------- reading files
def _factor(unit: str, kind: str, case, key: str) -> float:
    """Multiplier from ``unit`` to the case's unit of ``kind``."""
    from ..units import convert_quantity

    try:
        return convert_quantity(f"1 {unit}", kind, case.units, key=key)
    except CaseError as err:
        raise CaseError(key, unit, f"is not a {kind} unit ({err.expected})") from None


@dataclass
class PointData:
    """Reference points read from a file: ``xyz (p, 3)`` [case length], ``values`` {quantity: (p,)}
    [case units, NaN where blank], optional ``names (p,)`` and ``lines (p,)``, and header ``notes``."""

    xyz: np.ndarray
    values: dict
    names: Optional[list]
    lines: Optional[list]
    notes: list


def read_points_csv(rs: RefSet, case) -> PointData:
    """Read a CSV of points: a header ``x [mm], y [mm], z [mm], <quantity> [unit], ...``.

    Lines starting with ``#`` are notes (kept for the report). Optional text columns ``name`` and
    ``line`` (the name of a case [[line]] the point lies on). Blank fields are missing values.
    """
    key = f"{rs.key}.file"
    limit, why = file_read_limit(rs.file)
    raw = read_input_bytes(rs.file, key, max_bytes=limit, limit_reason=why)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        raise CaseError(key, str(rs.file), f"cannot be read as UTF-8 text ({err})") from None
    notes = [ln.lstrip("#").strip() for ln in text.splitlines() if ln.lstrip().startswith("#")]
    body = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    rows = list(csv.reader(io.StringIO("\n".join(body))))
    if len(rows) < 2:
        raise CaseError(key, str(rs.file), "needs a header line and at least one row of values")
    header = [h.strip() for h in rows[0]]
    cols: dict[str, tuple[int, float]] = {}
    names_col = lines_col = None
    valid = ", ".join(list(POINT_QUANTITIES))
    for j, h in enumerate(header):
        if h.lower() in ("name", "id", "label"):
            names_col = j
            continue
        if h.lower() == "line":
            lines_col = j
            continue
        if h.split("[")[0].strip() == "s":  # distance along a line (a run's own line CSV): not compared
            continue
        if "[" not in h or not h.endswith("]"):
            raise CaseError(key, h, "every column header needs a quantity and its unit in brackets, e.g. "
                                    "\"x [mm]\" or \"von_mises [MPa]\" (columns name and line need none)")
        q, unit = h[:h.index("[")].strip(), h[h.index("[") + 1:-1].strip()
        if q in ("x", "y", "z"):
            kind = "length"
        elif q in POINT_QUANTITIES:
            kind = POINT_QUANTITIES[q]
        else:
            raise CaseError(key, h, f"unknown quantity {q!r}; columns are x, y, z and any of {valid}")
        if q in cols:
            raise CaseError(key, h, "appears twice in the header")
        cols[q] = (j, _factor(unit, kind, case, f"{key} column {h!r}"))
    for c in ("x", "y", "z"):
        if c not in cols:
            raise CaseError(key, header, "needs columns x, y and z with their units, e.g. \"x [mm]\"")
    qs = [q for q in cols if q not in ("x", "y", "z")]
    if not qs:
        raise CaseError(key, header, f"needs at least one quantity column: {valid}")
    data = np.full((len(rows) - 1, len(cols)), np.nan)
    order = list(cols)
    for i, row in enumerate(rows[1:], start=2):
        if len(row) > len(header) and any(c.strip() for c in row[len(header):]):
            # A value beyond the header's columns: a misaligned row or decimal commas; which column
            # each value belongs to is unknown, so nothing of the row can be trusted.
            raise CaseError(key, str(rs.file), f"row {i} has {len(row)} values but the header names {len(header)} "
                                               "columns (a value too many, or a decimal comma?); give every row "
                                               "one value per header column, blank for a missing one")
        for jj, q in enumerate(order):
            j, fac = cols[q]
            cell = row[j].strip() if j < len(row) else ""
            if cell == "":
                if q in ("x", "y", "z"):
                    raise CaseError(key, row, f"row {i}: coordinate {q} is blank")
                continue
            try:
                v = float(cell)
            except ValueError:
                raise CaseError(key, cell, f"row {i}, column {q!r}: not a number") from None
            if not math.isfinite(v) or not math.isfinite(v * fac):
                raise CaseError(key, str(rs.file), f"row {i}, column {q!r}: {cell!r} is not a finite number (leave "
                                                   "the field blank for a missing value)")
            data[i - 2, jj] = v * fac
    xyz = data[:, [order.index(c) for c in ("x", "y", "z")]]
    values = {q: data[:, order.index(q)] for q in qs}
    names = [r[names_col].strip() if names_col < len(r) else "" for r in rows[1:]] if names_col is not None else None
    lines = [r[lines_col].strip() if lines_col < len(r) else "" for r in rows[1:]] if lines_col is not None else None
    if lines is not None:
        known = [ln.name for ln in case.lines]
        unknown = sorted({n for n in lines if n} - set(known))
        if unknown:  # a misspelt line name would leave its points off that line's comparison chart
            i = lines.index(unknown[0]) + 2
            raise CaseError(key, unknown[0], f"row {i}, column 'line': no [[line]] of the case has that name "
                            f"(lines: {', '.join(repr(n) for n in known) or 'none'}); leave the field blank for a "
                            "point on no line")
    return PointData(xyz, values, names, lines, notes)


def read_field(rs: RefSet, case) -> PointData:
    """Read point data of a VTU/VTK file (mapped by location, so their mesh may differ from ours)."""
    import meshio

    from ..fdcapture import captured_fds

    key = f"{rs.key}.file"
    limit, why = file_read_limit(rs.file)
    check_input_file(rs.file, key, max_bytes=limit, limit_reason=why)
    failure = None
    with captured_fds():  # meshio prints to fd 1/2 and may call sys.exit on a corrupt file
        try:
            m = meshio.read(str(rs.file))
        except (Exception, SystemExit) as err:  # meshio raises many kinds for corrupt files
            failure = f"{type(err).__name__}: {err}"
    if failure is not None:
        raise CaseError(key, str(rs.file), f"cannot be read as VTU/VTK ({failure[:300]})") from None
    fl = _factor(rs.units.get("length", case.units.length), "length", case, f"{rs.key}.units.length")
    fs = _factor(rs.units.get("stress", case.units.stress), "stress", case, f"{rs.key}.units.stress")
    with np.errstate(all="ignore"):
        xyz = np.asarray(m.points, dtype=float)[:, :3] * fl
    if not np.isfinite(xyz).all():
        bad = np.flatnonzero(~np.isfinite(xyz).all(axis=1))
        raise CaseError(key, str(rs.file), f"{bad.size} point(s) have coordinates that are not finite numbers "
                                           f"(first: point {int(bad[0])})")
    values: dict[str, np.ndarray] = {}
    have = ", ".join(m.point_data) or "none"
    for q, name in rs.arrays.items():
        if name not in m.point_data:
            raise CaseError(f"{rs.key}.arrays.{q}", name, f"no such point-data array in the file; it has: {have}")
        a = np.asarray(m.point_data[name], dtype=float)
        a = a.reshape(a.shape[0], -1)
        if q == "displacement":
            if a.shape[1] not in (2, 3):
                raise CaseError(f"{rs.key}.arrays.{q}", name, f"must have 3 components, has {a.shape[1]}")
            a3 = np.zeros((a.shape[0], 3))
            a3[:, :a.shape[1]] = a * fl
            values.update({"ux": a3[:, 0], "uy": a3[:, 1], "uz": a3[:, 2], "u": np.linalg.norm(a3, axis=1)})
        elif q == "stress":
            if a.shape[1] == 9:
                a = a[:, [0, 4, 8, 1, 5, 2]]
            if a.shape[1] != 6:
                raise CaseError(f"{rs.key}.arrays.{q}", name, "must have 6 components (xx, yy, zz, xy, yz, xz) or 9")
            for k, c in _COMP.items():
                values[k] = a[:, c] * fs
        elif q == "principal":
            if a.shape[1] != 3:
                raise CaseError(f"{rs.key}.arrays.{q}", name, "must have 3 components, largest first")
            values.update({"s1": a[:, 0] * fs, "s2": a[:, 1] * fs, "s3": a[:, 2] * fs})
        else:
            if a.shape[1] != 1:
                raise CaseError(f"{rs.key}.arrays.{q}", name, f"must have 1 component for {q}, has {a.shape[1]}")
            values[q] = a[:, 0] * (fl if POINT_QUANTITIES[q] == "length" else fs)
    for q, v in values.items():
        with np.errstate(all="ignore"):
            bad = np.flatnonzero(~np.isfinite(v))
        if bad.size:
            raise CaseError(f"{rs.key}.arrays", dict(rs.arrays), f"{q} is not a finite number at {bad.size} point(s) "
                                                                 f"(first: point {int(bad[0])})")
    return PointData(xyz, values, None, None, [])


def read_references(case) -> dict[str, PointData]:
    """Read every reference file of the case, ``{set key: PointData}``; :class:`CaseError` naming the
    file for one that is missing, special, too large, unreadable or holds values that are not finite.

    Called before the solve, so a bad reference never costs one."""
    if case.reference is None:
        return {}
    return {rs.key: (read_points_csv(rs, case) if rs.kind == "points" else read_field(rs, case))
            for rs in case.reference.sets}


# ----------------------------------------------------------------------------- comparing
def _f(v):
    return None if v is None or not math.isfinite(float(v)) else float(v)


def _verdict(diff: float, allowed: float) -> str:
    # A hair of slack so that a difference equal to the tolerance, up to round-off, agrees.
    return "agree" if abs(diff) <= allowed * (1 + 1e-9) + 1e-300 else "disagree"


def compare_scalar(res: Result, s: RefScalar, snap: float) -> dict:
    """One scalar: ours, theirs, difference, relative difference, allowed difference, verdict."""
    case = res.case
    kind = SCALAR_QUANTITIES[s.quantity]
    unit = {"frequency": "Hz", "dimensionless": ""}.get(kind) if kind in ("frequency", "dimensionless") \
        else case.units.labels[kind]
    where = ""
    status = "inside"
    distance = 0.0
    if s.quantity == "frequency":
        freqs = res.modes.frequencies if res.modes is not None else np.zeros(0)
        ours = float(freqs[s.mode - 1]) if s.mode is not None and s.mode <= freqs.size else float("nan")
        where = f"mode {s.mode}"
    elif s.quantity == "buckling_factor":
        fac = res.buckling.factors if res.buckling is not None else np.zeros(0)
        ours = float(fac[s.mode - 1]) if s.mode is not None and s.mode <= fac.size else float("nan")
        where = f"buckling mode {s.mode}"
    elif s.quantity == "max_displacement":
        ours = float(np.linalg.norm(res.u, axis=1).max())
        where = "whole part"
    elif s.quantity == "max_von_mises":
        ours = float(res.von_mises.max())
        where = "whole part"
    elif s.quantity.startswith("reaction"):
        F = np.asarray(res.reactions[s.support]["force"])
        ours = float(np.linalg.norm(F)) if s.quantity == "reaction" else float(F["xyz".index(s.quantity[-1])])
        where = f"support {s.support}"
    else:
        if s.point is not None:
            p = res.points[s.point]
            vals = quantities_from(np.asarray(p["displacement"])[None], np.asarray(p["stress"])[None])
            where = f"point {s.point}"
        else:
            ev = evaluate_at(res, np.asarray(s.at)[None], snap)
            vals = ev.values
            status, distance = STATUS_WORDS[int(ev.status[0])], float(ev.distance[0])
            where = "(" + ", ".join(f"{c:.4g}" for c in s.at) + f") {case.units.labels['length']}"
        ours = float(vals[s.quantity][0])
    theirs = s.value
    diff = ours - theirs if math.isfinite(ours) else float("nan")
    allowed = s.tolerance.allowed(theirs)
    return {
        "name": s.name or f"{s.quantity} at {where}", "quantity": s.quantity, "where": where, "unit": unit,
        "reference": theirs, "ours": _f(ours), "difference": _f(diff),
        "relative_difference": _f(diff / abs(theirs)) if theirs != 0 else None,
        "tolerance": s.tolerance.text(unit), "allowed_difference": allowed,
        "status": status, "distance_outside": distance,
        "verdict": "not compared" if status == "outside" else _verdict(diff, allowed),
    }


def _line_membership(res: Result, pd: PointData, tol: float) -> dict[str, np.ndarray]:
    """For each case line, ``(idx, s)``: the reference points on it and their distance from its start."""
    out = {}
    for ln in res.case.lines:
        a, b = np.asarray(ln.start), np.asarray(ln.end)
        L = float(np.linalg.norm(b - a))
        t = (pd.xyz - a) @ (b - a) / L ** 2
        foot = a + np.clip(t, 0, 1)[:, None] * (b - a)
        on = np.linalg.norm(pd.xyz - foot, axis=1) <= tol
        if pd.lines is not None:
            named = np.array([n == ln.name for n in pd.lines])
            on = named | (on & np.array([n == "" for n in pd.lines]))
        idx = np.flatnonzero(on)
        if idx.size:
            out[ln.name] = (idx, np.clip(t[idx], 0, 1) * L)
    return out


def compare_set(res: Result, rs: RefSet, snap_default: float, data: Optional[PointData] = None) -> dict:
    """Compare one reference file (``data``: its points as read already) per quantity and point."""
    case = res.case
    pd = data if data is not None else (read_points_csv(rs, case) if rs.kind == "points" else read_field(rs, case))
    snap = rs.snap if rs.snap is not None else snap_default
    ev = evaluate_at(res, pd.xyz, snap)
    npt = pd.xyz.shape[0]
    quantities = {}
    rows = []
    # The scale of a percentage: the largest reference magnitude of that kind (displacement or
    # stress) among the points compared, so a component that is nearly zero is judged against the
    # field's size; a point outside the part is not compared and must not widen the tolerance.
    kind_scale: dict[str, float] = {}
    for q, ref in pd.values.items():
        fin = np.abs(ref[np.isfinite(ref) & (ev.status != OUTSIDE)])
        k = POINT_QUANTITIES[q]
        kind_scale[k] = max(kind_scale.get(k, 0.0), float(fin.max()) if fin.size else 0.0)
    for q, ref in pd.values.items():
        tol = rs.tolerance_for(q)
        if tol is None:
            raise CaseError(f"{rs.key}.tolerance", None,
                            f"gives no tolerance for {q}; add {q} = \"5%\" or \"*\" = \"5%\"")
        unit = case.units.labels[POINT_QUANTITIES[q]]
        ours = ev.values[q]
        given = np.isfinite(ref)
        cmp = given & (ev.status != OUTSIDE)
        scale = kind_scale[POINT_QUANTITIES[q]]
        allowed = tol.allowed(scale)
        diff = ours - ref
        within = cmp & (np.abs(np.where(cmp, diff, 0.0)) <= allowed * (1 + 1e-9) + 1e-300)
        d = diff[cmp]
        entry = {
            "unit": unit, "tolerance": tol.text(unit), "allowed_difference": allowed, "reference_scale": scale,
            "points": int(given.sum()), "compared": int(cmp.sum()),
            "snapped": int((given & (ev.status == SNAPPED)).sum()),
            "outside": int((given & (ev.status == OUTSIDE)).sum()), "within": int(within.sum()),
            "max_abs_difference": _f(np.abs(d).max()) if d.size else None,
            "rms_difference": _f(np.sqrt(np.mean(d ** 2))) if d.size else None,
            "max_relative_difference": _f(np.abs(d).max() / scale) if d.size and scale > 0 else None,
            "rms_relative_difference": _f(np.sqrt(np.mean(d ** 2)) / scale) if d.size and scale > 0 else None,
            "verdict": ("no points compared" if not cmp.any()
                        else "agree" if within.sum() == cmp.sum() else "disagree"),
        }
        if d.size:
            iw = np.flatnonzero(cmp)[int(np.argmax(np.abs(d)))]
            entry["worst"] = {"index": int(iw), "at": pd.xyz[iw].tolist(), "reference": float(ref[iw]),
                              "ours": float(ours[iw]), "difference": float(diff[iw])}
        quantities[q] = entry
        for i in np.flatnonzero(given):
            st = STATUS_WORDS[int(ev.status[i])]
            rows.append({
                "source": rs.key, "index": int(i), "name": pd.names[i] if pd.names else "",
                "x": float(pd.xyz[i, 0]), "y": float(pd.xyz[i, 1]), "z": float(pd.xyz[i, 2]),
                "quantity": q, "unit": unit, "reference": float(ref[i]), "ours": _f(ours[i]),
                "difference": _f(diff[i]) if st != "outside" else None,
                "relative_difference": _f(diff[i] / abs(ref[i])) if st != "outside" and ref[i] != 0 else None,
                "difference_of_scale": _f(diff[i] / scale) if st != "outside" and scale > 0 else None,
                "allowed_difference": allowed, "location": st, "distance_outside": float(ev.distance[i]),
                "within": bool(within[i]) if st != "outside" else None,
            })
    # Points typed into a CSV sit on a line to the digits written (1e-3 of the part's size); the
    # nodes of another mesh are on it only when the mesh has nodes there (to round-off): a node a
    # little off a line in a stress gradient would plot as a disagreement that is not there.
    on_line = (LINE_TOL_FIELD if rs.kind == "field" else LINE_TOL_POINTS) * model_size(res.mesh)
    members = _line_membership(res, pd, max(on_line, 1e-12))
    lines = {}
    for name, (idx, s) in members.items():
        order = np.argsort(s)
        idx, s = idx[order], s[order]
        lines[name] = {"index": idx.tolist(), "s": s.tolist(),
                       "reference": {q: [_f(v) for v in pd.values[q][idx]] for q in pd.values}}
    outside = [{"index": int(i), "at": pd.xyz[i].tolist(), "distance": float(ev.distance[i]),
                "name": pd.names[i] if pd.names else ""} for i in np.flatnonzero(ev.status == OUTSIDE)]
    snapped = [{"index": int(i), "at": pd.xyz[i].tolist(), "distance": float(ev.distance[i]),
                "moved_to": ev.used[i].tolist()} for i in np.flatnonzero(ev.status == SNAPPED)]
    verdicts = [e["verdict"] for e in quantities.values()]
    warnings = []
    size = model_size(res.mesh)
    span = float(np.linalg.norm(pd.xyz.max(axis=0) - pd.xyz.min(axis=0))) if npt else 0.0
    if rs.kind == "field" and size > 0 and not (size / FIELD_SPAN_FACTOR <= span <= FIELD_SPAN_FACTOR * size):
        # A whole mesh of the same part spans about the part's size; 1/1000 or 25.4 times it means
        # its coordinates are in another unit, and every point is compared at the wrong place.
        L = case.units.labels["length"]
        warnings.append(f"the points of {Path(rs.file).name} span {span:.4g} {L} (bounding-box diagonal) against "
                        f"the part's {size:.4g} {L}: are its coordinates in another unit? Give them in "
                        f"{rs.key}.units, e.g. {{ length = \"m\", stress = \"Pa\" }}")
    return {
        "key": rs.key, "kind": rs.kind, "file": str(rs.file), "sha256": sha256_file(rs.file),
        "label": rs.label, "notes": pd.notes, "warnings": warnings, "points": npt, "snap_distance": snap,
        "quantities": quantities, "verdict": "disagree" if "disagree" in verdicts else
        ("agree" if "agree" in verdicts else "no points compared"),
        "snapped": snapped, "outside": outside, "lines": lines, "rows": rows,
    }


def compare(res: Result, data: Optional[dict] = None) -> dict:
    """Compare a result with its case's ``[reference]`` section; a JSON-ready document.

    ``data``: the reference files as read by :func:`read_references` (read here when not given).

    Raises
    ------
    CaseError
        When the case has no reference section, or a reference file cannot be read or used.
    """
    ref = res.case.reference
    if ref is None:
        raise CaseError("reference", None, "the case has no [reference] section to compare with")
    snap = ref.snap if ref.snap is not None else SNAP_SHARE * model_size(res.mesh)
    scalars = [compare_scalar(res, s, snap) for s in ref.scalars]
    sets = [compare_set(res, rs, snap, (data or {}).get(rs.key)) for rs in ref.sets]
    verdicts = [s["verdict"] for s in scalars] + [s["verdict"] for s in sets]
    n_out = sum(len(s["outside"]) for s in sets) + sum(1 for s in scalars if s["status"] == "outside")
    n_cmp = sum(1 for s in scalars if s["verdict"] in ("agree", "disagree")) + \
        sum(q["compared"] for s in sets for q in s["quantities"].values())
    n_ok = sum(1 for s in scalars if s["verdict"] == "agree") + \
        sum(q["within"] for s in sets for q in s["quantities"].values())
    return {
        "label": ref.label, "snap_distance": snap,
        "verdict": "disagree" if "disagree" in verdicts else ("agree" if "agree" in verdicts else "no data"),
        "compared": n_cmp, "within_tolerance": n_ok, "points_outside": n_out,
        "scalars": scalars, "sets": sets,
        "rule": ("a percentage on a scalar is of the reference value; on a point set it is of the largest "
                 "reference magnitude of that kind (displacement or stress) among the points compared (points "
                 "outside the part do not count); an absolute tolerance "
                 "is used as given"),
    }


# ----------------------------------------------------------------------------- writing
CSV_FIELDS = ("source", "index", "name", "x", "y", "z", "quantity", "unit", "reference", "ours", "difference",
              "relative_difference", "difference_of_scale", "allowed_difference", "location",
              "distance_outside", "within")


#: Columns of comparison.csv whose values are lengths (their header carries the case's length unit).
CSV_LENGTH_FIELDS = ("x", "y", "z", "distance_outside")


def comparison_header(length_unit: str) -> list[str]:
    """comparison.csv's header: lengths as ``x [mm]`` (the inputs' form); the value columns
    (reference, ours, difference, allowed_difference) mix quantities, so each row states its own
    ``unit``; the relative columns are fractions."""
    return [f"{f} [{length_unit}]" if f in CSV_LENGTH_FIELDS else f for f in CSV_FIELDS]


def comparison_csv(doc: dict, length_unit: str) -> str:
    """``comparison.csv``: one row per scalar and per (point, quantity) of every reference file."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(comparison_header(length_unit))

    def cell(v):
        if v is None:
            return ""
        if isinstance(v, float):
            return repr(v)
        return v

    for s in doc["scalars"]:
        w.writerow([cell(v) for v in ("scalar", "", s["name"], "", "", "", s["quantity"], s["unit"], s["reference"],
                                      s["ours"], s["difference"], s["relative_difference"], s["relative_difference"],
                                      s["allowed_difference"], s["status"], s["distance_outside"],
                                      s["verdict"] == "agree")])
    for st in doc["sets"]:
        for r in st["rows"]:
            w.writerow([cell(r[k]) for k in CSV_FIELDS])
    return buf.getvalue()


def _plot_lines(res: Result, doc: dict, out_dir: Path) -> list[str]:
    """One chart per case line with reference points on it: both solutions against distance."""
    return _styled(_plot_lines_impl)(res, doc, out_dir)


def _styled(fn):
    from ..plotting import styled

    return styled(fn)


def _plot_lines_impl(res: Result, doc: dict, out_dir: Path) -> list[str]:
    import matplotlib.pyplot as plt

    from ..plotting import OURS, THEIRS, save_figure, tidy_axis

    files = []
    lab = res.case.units.labels
    for name, line in res.lines.items():
        series = [(st, st["lines"][name]) for st in doc["sets"] if name in st["lines"]]
        if not series:
            continue
        qs = sorted({q for _, m in series for q in m["reference"]}, key=list(POINT_QUANTITIES).index)
        ours_all = quantities_from(line.u, line.stress)
        fig, axes = plt.subplots(len(qs), 1, figsize=(7.0, 2.6 * len(qs) + 0.6), sharex=True, squeeze=False)
        for ax, q in zip(axes[:, 0], qs):
            ax.plot(line.s, ours_all[q], color=OURS, lw=2.0, label="elastofe (this run)")
            for k, (st, m) in enumerate(series):
                if q not in m["reference"]:  # another file on this line gives other quantities
                    continue
                y = np.array([np.nan if v is None else v for v in m["reference"][q]])
                ax.plot(m["s"], y, ls="none", marker="os^D"[k % 4], mfc="none", mew=1.4, color=THEIRS,
                        label=f"reference: {st['label'] or Path(st['file']).name}")
            ax.set_ylabel(f"{q} [{lab[POINT_QUANTITIES[q]]}]")
            theirs = [v for _, m in series for v in m["reference"].get(q, ()) if v is not None]
            tidy_axis(ax, np.r_[ours_all[q], np.array(theirs, dtype=float)])
            ax.legend(loc="best", fontsize=8)
        axes[-1, 0].set_xlabel(f"distance along line '{name}' [{lab['length']}]")
        fig.suptitle(f"Along line '{name}': this run and the reference", fontsize=11)
        fig.tight_layout()
        fname = f"comparison-line-{safe_name(name)}.png"
        save_figure(fig, out_dir / fname)
        files.append(fname)
    return files


def _plot_scatter(doc: dict, out_dir: Path) -> list[str]:
    """Ours against theirs per file and quantity with the ±tolerance band; scalars as a bar chart."""
    return _styled(_plot_scatter_impl)(doc, out_dir)


def _plot_scatter_impl(doc: dict, out_dir: Path) -> list[str]:
    import matplotlib.pyplot as plt

    from ..plotting import BAND, OURS, save_figure, square_limits, tidy_axis

    files = []
    for k, st in enumerate(doc["sets"], 1):
        for q, e in st["quantities"].items():
            rows = [r for r in st["rows"] if r["quantity"] == q and r["location"] != "outside"]
            if not rows:
                continue
            x = np.array([r["reference"] for r in rows])
            y = np.array([np.nan if r["ours"] is None else r["ours"] for r in rows])
            tol = e["allowed_difference"]
            g = np.array(square_limits(np.r_[x, y], tol))
            fig, ax = plt.subplots(figsize=(5.2, 5.0))
            ax.fill_between(g, g - tol, g + tol, color=BAND, alpha=0.45, lw=0,
                            label=f"±tolerance ({e['tolerance']} → ±{tol:.3g} {e['unit']})")
            ax.plot(g, g, color="0.35", lw=1.0, ls="--", label="equal")
            ok = np.array([bool(r["within"]) for r in rows])
            ax.plot(x[ok], y[ok], ls="none", marker="o", ms=4, color=OURS, label=f"within ({ok.sum()})")
            if (~ok).any():
                ax.plot(x[~ok], y[~ok], ls="none", marker="x", ms=6, mew=1.6, color="#b2182b",
                        label=f"outside tolerance ({(~ok).sum()})")
            ax.set_xlim(g)
            ax.set_ylim(g)
            tidy_axis(ax, [], "x")
            tidy_axis(ax, [], "y")
            ax.set_aspect("equal")
            ax.set_xlabel(f"reference {q} [{e['unit']}]")
            ax.set_ylabel(f"this run {q} [{e['unit']}]")
            ax.set_title(f"{Path(st['file']).name}: {q}", fontsize=10)
            ax.legend(loc="upper left", fontsize=8)
            fig.tight_layout()
            fname = f"comparison-scatter-{k}-{safe_name(q)}.png"
            save_figure(fig, out_dir / fname)
            files.append(fname)
    if doc["scalars"]:
        sc = doc["scalars"]
        ratio = [abs(s["difference"]) / s["allowed_difference"] if s["difference"] is not None and
                 s["allowed_difference"] > 0 else np.nan for s in sc]
        fig, ax = plt.subplots(figsize=(7.0, 0.45 * len(sc) + 1.4))
        yy = np.arange(len(sc))
        colors = [OURS if r <= 1 else "#b2182b" for r in ratio]
        ax.barh(yy, ratio, color=colors)
        ax.axvline(1.0, color="0.2", ls="--", lw=1.0)
        ax.set_yticks(yy, [s["name"] for s in sc], fontsize=8)
        ax.invert_yaxis()
        ax.set_xlabel("|difference| / allowed difference (1 = at the tolerance)")
        ax.set_title("Scalars against the reference", fontsize=10)
        fig.tight_layout()
        save_figure(fig, out_dir / "comparison-scalars.png")
        files.append("comparison-scalars.png")
    return files


def write_comparison(res: Result, doc: dict, out_dir: Path) -> dict:
    """Write ``comparison.json``, ``comparison.csv`` and the plots into ``out_dir`` (atomically).

    Returns ``doc`` with ``files`` (the plots' names) added.
    """
    import json

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    plots = _plot_lines(res, doc, out_dir) + _plot_scatter(doc, out_dir)
    doc = dict(doc, plots=plots)
    write_text(out_dir / "comparison.csv", comparison_csv(doc, res.case.units.labels["length"]))
    write_text(out_dir / "comparison.json", json.dumps(json_ready(json_document(doc)), indent=2) + "\n")
    return doc


#: Snapped points listed one by one in comparison.json (all of them are in comparison.csv).
SNAPPED_LISTED = 1000


def json_document(doc: dict) -> dict:
    """``comparison.json``'s content: the document without the per-point rows (those are in
    comparison.csv, one per point and quantity) and with at most :data:`SNAPPED_LISTED` snapped
    points listed per file. Every point outside the part stays listed."""
    sets = []
    for st in doc["sets"]:
        st = {k: v for k, v in st.items() if k != "rows"}
        st["snapped_count"] = len(st["snapped"])
        st["snapped"] = st["snapped"][:SNAPPED_LISTED]
        st["rows_in"] = "comparison.csv"
        sets.append(st)
    return dict(doc, sets=sets)
