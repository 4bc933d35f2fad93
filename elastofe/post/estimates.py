"""Beam-theory estimates of a run, side by side with its FE values.

Each ``[[beam]]`` of a case describes the part as an idealised cantilever: an axis from the held end
(station 0) to the loaded point, its section at two or more stations (linear between them) and the
force at the loaded point. From :mod:`elastofe.handcalc` it estimates

* the bending stress ``sigma = N/A - P (a - x) y / I`` along each compared line and at each
  compared point (Euler-Bernoulli flexure formula with the local section, slowly varying sections);
* the deflection at the load point from the unit-load integral with the local ``I(x)`` (plus the
  Timoshenko shear term with Cowper's coefficient where the section has one), with the deflections
  of constant-section beams at the largest and smallest section as bounds (common practice);
* the deflection at each compared point from the same integral.

and reports each next to the FE value and their difference. Builds on a finished
:class:`~elastofe.result.Result` only.

Frame: ``ex`` from the held end to the load point, ``ey`` the depth direction (the force's part
across the axis unless the case gives one), ``ez = ex x ey``. Section polygons are given in
``(y, z)`` of that frame, measured from the axis; the neutral axis passes through the centroid.
"""
from __future__ import annotations

from dataclasses import dataclass
from types import SimpleNamespace
from typing import Any, Callable

import numpy as np

from ..case.load import beam_force
from ..case.schema import Beam, Case, ForceLoad
from ..fem.surface import face_areas
from ..handcalc import beams as hb
from ..handcalc import sections as hs
from .probe import Locator, locate
from .sampling import fields_at, on_part_tolerance

#: A pure-bending check along a line is meaningful only where the estimate is not ~0.
_SMALL = 1e-12


@dataclass(frozen=True)
class BeamFrame:
    """Axis frame of an idealised beam: origin (3,), unit vectors ex, ey, ez (3,), load station a."""

    origin: np.ndarray
    ex: np.ndarray
    ey: np.ndarray
    ez: np.ndarray
    a: float


def beam_frame(beam: Beam, force: np.ndarray) -> BeamFrame:
    """The frame of ``beam`` (see module docstring) for the force ``force (3,)``."""
    o = np.asarray(beam.held_end, dtype=float)
    ax = np.asarray(beam.load_point, dtype=float) - o
    a = float(np.linalg.norm(ax))
    ex = ax / a
    d = np.asarray(beam.depth_direction if beam.depth_direction is not None else force, dtype=float)
    ey = d - (d @ ex) * ex
    ey /= np.linalg.norm(ey)
    if beam.depth_direction is None and ey @ force > 0:
        # Depth measured against the load: with a downward pull the top fibres (y > 0) are in
        # tension, the usual picture of a cantilever.
        ey = -ey
    return BeamFrame(o, ex, ey, np.cross(ex, ey), a)


@dataclass(frozen=True)
class SectionProps:
    """Section properties at stations ``x (m,)``: area, I about the bending axis, centroid offset
    along ey, extreme-fibre distances (top: +y, bottom: -y), shear stiffness factor k (or None)."""

    area: np.ndarray
    I: np.ndarray
    yc: np.ndarray
    c_top: np.ndarray
    c_bottom: np.ndarray
    k: np.ndarray | None


def section_props(beam: Beam, x: np.ndarray, nu: float) -> SectionProps:
    """Properties of ``beam``'s section at stations ``x (m,)`` [length], linear between stations.

    Rectangles and circles interpolate their dimensions; polygons their vertices. Beyond the last
    station the last section is used.
    """
    x = np.atleast_1d(np.asarray(x, dtype=float))
    st = np.array([s.at for s in beam.sections])
    kind = beam.sections[0].kind
    dims = np.array([np.asarray(s.dims, dtype=float).ravel() for s in beam.sections])  # (s, d)
    d = np.stack([np.interp(x, st, dims[:, j]) for j in range(dims.shape[1])], axis=1)  # (m, d)
    if kind == "rectangle":
        b, h = d[:, 0], d[:, 1]
        k = np.full(x.shape, hs.cowper_shear_coefficient_rectangle(nu))
        return SectionProps(b * h, b * h ** 3 / 12.0, np.zeros_like(x), h / 2, h / 2, k)
    if kind == "circle":
        do, di = d[:, 0], d[:, 1]
        k = np.array([hs.cowper_shear_coefficient_hollow_circle(nu, q) for q in di / do])
        return SectionProps(np.pi * (do ** 2 - di ** 2) / 4, np.pi * (do ** 4 - di ** 4) / 64,
                            np.zeros_like(x), do / 2, do / 2, k)
    props = [hs.polygon(row.reshape(-1, 2)) for row in d]
    return SectionProps(np.array([p.area for p in props]), np.array([p.I_zz for p in props]),
                        np.array([p.centroid[0] for p in props]), np.array([p.c_y_max for p in props]),
                        np.array([p.c_y_min for p in props]), None)


def _normal_stress(stress: np.ndarray, ex: np.ndarray) -> np.ndarray:
    """``ex . sigma . ex`` of stresses ``(k, 6)`` (xx, yy, zz, xy, yz, xz) -> (k,)."""
    xx, yy, zz, xy, yz, xz = np.moveaxis(np.asarray(stress, dtype=float), -1, 0)
    a, b, c = ex
    return xx * a * a + yy * b * b + zz * c * c + 2 * (xy * a * b + yz * b * c + xz * a * c)


def _rel(diff: float, ref: float) -> float | None:
    return float(diff / ref) if abs(ref) > _SMALL else None


def _region_mean_displacement(res, region: str) -> np.ndarray | None:
    """Area-weighted mean displacement (3,) over a region's boundary faces, or None."""
    ids = res.region_ids.get(region)
    if not ids:
        return None
    faces = res.mesh.surface_faces(ids)
    if faces.shape[0] == 0:
        return None
    w = face_areas(res.mesh.points, faces)
    u = res.u[faces[:, :3]].mean(axis=1)  # (f, 3): mean of the corner displacements of each face
    return (w[:, None] * u).sum(axis=0) / w.sum()


def _probe(res, xyz: np.ndarray) -> dict | None:
    """Fields at one point, or None when it lies outside the part."""
    loc = locate(res.mesh.points, res.mesh.cells, xyz.reshape(1, 3))
    if loc.outside[0] > on_part_tolerance(res.mesh):
        return None
    v = fields_at(res.mesh, loc, res.u, res.stress)
    return {"u": v["u"][0], "stress": v["stress"][0]}


#: Stations along the axis at which the material is looked up, and the section fractions
#: (of the depth either side of the centroid) sampled at each: enough to find a bonded joint across
#: the axis to within a/400 before bisection places it to round-off.
_AXIS_STATIONS = 400
_DEPTH_FRACTIONS = (-0.9, -0.5, 0.0, 0.5, 0.9)


@dataclass(frozen=True)
class AxisMaterials:
    """Materials met along a beam's axis: ``breaks (s + 1,)`` stations [length] from 0 to a, and
    ``index (s,)`` the material (index into ``case.materials``) on each span between them; or
    ``composite`` set to the first station [length] whose section holds more than one material."""

    breaks: np.ndarray
    index: np.ndarray
    composite: float | None = None


def axis_materials(res, beam: Beam, fr: BeamFrame, nu: float) -> AxisMaterials | None:
    """The materials of the part along ``beam``'s axis from the held end to the load point, or
    None for a part of one material (or a result without a material map).

    At each station the section is sampled along the depth direction (the sampled points that lie
    outside the part, as in a hollow section, are left out); a change of material between
    stations is placed by bisection."""
    mm = getattr(res, "materials", None)
    if mm is None or mm.single:
        return None
    loc = Locator(res.mesh.points, res.mesh.cells)
    tol = on_part_tolerance(res.mesh)
    frac = np.asarray(_DEPTH_FRACTIONS)
    cell_mat = mm.cell_material

    def lookup(t: np.ndarray) -> np.ndarray:
        """Material index at stations ``t (m,)``: -1 where no sample is inside, -2 where two differ."""
        sp = section_props(beam, t, nu)
        y = sp.yc[:, None] + np.where(frac < 0, frac * sp.c_bottom[:, None], frac * sp.c_top[:, None])
        xyz = fr.origin + t[:, None, None] * fr.ex + y[:, :, None] * fr.ey          # (m, f, 3)
        at = loc.locate(xyz.reshape(-1, 3))
        mat = np.where(at.outside <= tol, cell_mat[at.cell], -1).reshape(t.size, frac.size)
        lo = np.where(mat >= 0, mat, np.iinfo(np.int64).max).min(axis=1)
        hi = mat.max(axis=1)
        return np.where(hi < 0, -1, np.where(lo == hi, hi, -2))

    # Mid-interval stations: a joint across the axis at a round station is never sampled on its face.
    t = (np.arange(_AXIS_STATIONS) + 0.5) * fr.a / _AXIS_STATIONS
    m = lookup(t)
    if np.any(m == -2):
        return AxisMaterials(np.array([0.0, fr.a]), np.array([int(cell_mat[0])]), float(t[np.argmax(m == -2)]))
    known = np.flatnonzero(m >= 0)
    if known.size == 0:
        return None
    # Stations with no sample inside the part (a gap in the sampled fibres) take their nearest
    # known neighbour's material.
    m = m[known[np.abs(np.arange(t.size)[:, None] - known[None, :]).argmin(axis=1)]]
    breaks, index = [0.0], [int(m[0])]
    for k in np.flatnonzero(m[1:] != m[:-1]):
        lo_t, hi_t = float(t[k]), float(t[k + 1])
        for _ in range(40):
            mid = 0.5 * (lo_t + hi_t)
            if int(lookup(np.array([mid]))[0]) == m[k]:
                lo_t = mid
            else:
                hi_t = mid
        breaks.append(0.5 * (lo_t + hi_t))
        index.append(int(m[k + 1]))
    breaks.append(fr.a)
    return AxisMaterials(np.array(breaks), np.array(index))


def beam_load_index(case: Case, i: int) -> int | None:
    """Index (0-based, into ``case.loads``) of the force load ``case.beams[i]`` takes its force from,
    or None when the beam gives its own force."""
    b = case.beams[i]
    if b.force is not None:
        return None
    for j, ld in enumerate(case.loads):
        if isinstance(ld, ForceLoad) and ((j + 1 == b.load) if isinstance(b.load, int) else ld.region == b.load):
            return j
    return None


def _fields_of_beam_case(case: Case, res, i: int, notes: list[str]):
    """The fields the beam's estimate is compared with: those of the load case holding the beam's
    load (the first load case when the beam gives its own force). Returns (view, name): ``view`` has
    ``mesh``, ``region_ids``, ``u (n, 3)``, ``stress (n, 6)``, ``points`` and ``lines`` of that case."""
    if not getattr(res, "load_cases", None):
        return res, None
    j = beam_load_index(case, i)
    cases = [cr for cr in res.load_cases.values() if cr.kind == "load case"]
    hit = [cr for cr in cases if j is not None and j in cr.loads]
    cr = hit[0] if hit else res.load_cases.get(res.load_case, cases[0])
    if j is None:
        notes.append(f"the beam gives its own force; it is compared with load case {cr.name!r}")
    elif len(hit) > 1:
        notes.append(f"the beam's load belongs to {len(hit)} load cases; compared with the first, {cr.name!r}")
    if len(cr.loads) > 1 or j is None:
        notes.append(f"only this beam's force is in the estimate; other loads of load case {cr.name!r} are not")
    view = SimpleNamespace(mesh=res.mesh, region_ids=res.region_ids, u=cr.u, stress=cr.stress,
                           points=cr.points, lines=cr.lines)
    return view, cr.name


def beam_estimate(case: Case, res, i: int) -> dict:
    """Estimate, FE value and difference for ``case.beams[i]`` (a JSON-ready dict). With named load
    cases, the FE values are those of the load case holding the beam's load (``load_case``)."""
    beam = case.beams[i]
    F = np.asarray(beam_force(case, i), dtype=float)
    fr = beam_frame(beam, F)
    E, nu = case.material.E, case.material.nu
    a = fr.a
    along = axis_materials(res, beam, fr, nu)
    spans = []
    if along is not None and along.composite is None:
        mats = [case.materials[k] for k in along.index]
        E, nu = mats[0].E, mats[0].nu
        spans = [{"from": float(t0), "to": float(t1), "material": mt.name, "E": mt.E, "nu": mt.nu}
                 for t0, t1, mt in zip(along.breaks[:-1], along.breaks[1:], mats)]
    G = E / (2 * (1 + nu))
    P = float(F @ fr.ey)             # transverse force along ey
    N = float(F @ fr.ex)             # axial force
    lateral = float(F @ fr.ez)
    notes = []
    if abs(lateral) > 1e-9 * np.linalg.norm(F):
        notes.append(f"the force's part along ez ({lateral:.4g}) bends about another axis and is not in this estimate")
    res, load_case = _fields_of_beam_case(case, res, i, notes)
    if load_case is None and (len(case.loads) > 1 or (beam.force is not None and case.loads)):
        notes.append("only this beam's force is in the estimate; other loads of the case are not")
    if along is not None and along.composite is not None:
        notes.append(f"the section at station {along.composite:.4g} holds more than one material: a composite "
                     f"section is beyond this estimate, which takes '{case.material.name}' (E = {E:.4g}) for "
                     f"the whole beam")
    elif len(spans) > 1:
        notes.append("the axis crosses " + ", ".join(f"'{sp['material']}' on [{sp['from']:.4g}, {sp['to']:.4g}]"
                                                      for sp in spans)
                     + ": the deflection integrals take each span's E and G (stresses M y / I do not depend on E)")
    elif len(case.materials) > 1 and along is None:
        notes.append(f"the part has {len(case.materials)} materials; the estimate takes the first, "
                     f"'{case.material.name}' (E = {E:.4g}), for the whole beam")
    # E(x) / E and G(x) / G of the spans folded into I(x) and k G A(x), so the unit-load integrals
    # with the reference E and G take each span's stiffness.
    if len(spans) > 1 and along is not None:
        edges = along.breaks[1:-1]
        e_ratio = np.array([sp["E"] for sp in spans]) / E
        g_ratio = np.array([sp["E"] / (2 * (1 + sp["nu"])) for sp in spans]) / G

        def stiff_e(t):
            return e_ratio[np.searchsorted(edges, np.asarray(t, dtype=float), side="right")]

        def stiff_g(t):
            return g_ratio[np.searchsorted(edges, np.asarray(t, dtype=float), side="right")]
    else:
        def stiff_e(t):
            return 1.0

        stiff_g = stiff_e

    def I_of(t):
        return section_props(beam, np.asarray(t), nu).I * stiff_e(t)

    props = section_props(beam, np.array([0.0]), nu)
    has_shear = props.k is not None

    def shear_stiffness(t):
        p = section_props(beam, np.asarray(t), nu)
        assert p.k is not None  # only called for sections with a shear coefficient
        return p.k * G * p.area * stiff_g(t)

    kGA: Callable | None = shear_stiffness if has_shear else None
    if not has_shear:
        notes.append("no shear coefficient for a polygon section: the deflection estimate is bending only")

    # Load-point deflection and the constant-section bounds (handcalc.cantilever_variable_section).
    vs = hb.cantilever_variable_section(beam.sections[-1].at, I_of,
                                        lambda t: section_props(beam, np.asarray(t), nu).c_top,
                                        P, E, a=a, x=np.array([0.0]))
    shear = 0.0
    stiff = vs.deflection_stiff_bound
    soft = vs.deflection_soft_bound
    if kGA is not None:
        _, shear = hb.cantilever_variable_section_deflection_at(I_of, P, E, a, a, kGA=kGA)
        xs = np.linspace(0.0, a, 2049)
        ks = kGA(xs)
        stiff += P * a / ks.max()
        soft += P * a / ks.min()
    est = vs.deflection + shear
    I_geo = section_props(beam, np.linspace(0.0, a, 2049), nu).I    # the section's own I, without E(x) / E
    fe_u, src = None, None
    probe = _probe(res, np.asarray(beam.load_point, dtype=float))
    if probe is not None:
        fe_u, src = probe["u"], "probe at the load point"
    elif beam.load is not None or beam.force is None:
        region = beam.load if isinstance(beam.load, str) else None
        if isinstance(beam.load, int):
            region = getattr(case.loads[beam.load - 1], "region", None)
        if region is not None:
            fe_u = _region_mean_displacement(res, region)
            src = f"area-weighted mean over the load region {region!r}"
    deflection: dict[str, Any] = {
        "station": a, "estimate": est, "bending": vs.deflection, "shear": shear,
        "stiff_bound": stiff, "soft_bound": soft, "bounds": "constant sections at the largest and the "
        "smallest section on [0, a] (bending + shear where known)" if len(spans) < 2 else "constant sections "
        "at the stiffest and the softest E I on [0, a] (bending + shear where known)",
        "fe": None if fe_u is None else float(fe_u @ fr.ey), "fe_source": src,
    }
    if fe_u is not None:
        fe = float(fe_u @ fr.ey)
        d = fe - est
        lo, hi = sorted((stiff, soft))
        # A constant section (and material) has no range between its bounds: nothing to be inside.
        degenerate = hi - lo <= 1e-9 * max(abs(lo), abs(hi))
        deflection.update(difference=d, relative_difference=_rel(d, est),
                          fe_within_bounds=None if degenerate else bool(lo <= fe <= hi))
    else:
        notes.append("the load point lies outside the part and no load region was named: no FE deflection there")

    def sigma_est(xyz: np.ndarray):
        rel = xyz - fr.origin
        x = rel @ fr.ex
        sp = section_props(beam, x, nu)
        y = rel @ fr.ey - sp.yc
        M = np.where(x < a, P * (a - x), 0.0)       # bending moment about ez [force*length]
        Nx = np.where(x < a, N, 0.0)
        return Nx / sp.area - M * y / sp.I, x, y, M, sp

    out_pts = {}
    names = {p.name: p for p in case.points}
    for nm in beam.points:
        pres = res.points[nm]
        xyz = np.asarray(names[nm].at, dtype=float)
        s_est, x, y, M, sp = sigma_est(xyz.reshape(1, 3))
        db, ds = hb.cantilever_variable_section_deflection_at(I_of, P, E, a, float(max(x[0], 0.0)), kGA=kGA)
        fe_d = float(np.asarray(pres["displacement"]) @ fr.ey)
        fe_s = float(_normal_stress(np.asarray(pres["stress"])[None], fr.ex)[0])
        out_pts[nm] = {
            "station": float(x[0]), "fibre": float(y[0]), "moment": float(M[0]), "I": float(sp.I[0]),
            "deflection": {"estimate": db + ds, "fe": fe_d, "difference": fe_d - (db + ds),
                           "relative_difference": _rel(fe_d - (db + ds), db + ds)},
            "bending_stress": {"estimate": float(s_est[0]), "fe": fe_s, "difference": fe_s - float(s_est[0]),
                               "relative_difference": _rel(fe_s - float(s_est[0]), float(s_est[0]))},
        }

    out_lines = {}
    for nm in beam.lines:
        ln = res.lines[nm]
        ok = np.isfinite(ln.von_mises)
        s_est, x, y, M, sp = sigma_est(ln.xyz)
        fe_line = _normal_stress(ln.stress, fr.ex)
        entry = {"station": float(np.mean(x)), "moment": float(np.mean(M)), "I": float(np.mean(sp.I)),
                 "samples": {"s": ln.s, "y": y, "estimate": s_est, "fe": np.where(ok, fe_line, np.nan)}}
        if ok.sum() >= 2:
            yy, ff, ee = y[ok], fe_line[ok], s_est[ok]
            scale_fe = float(np.abs(ff).max())
            scale_est = float(np.abs(ee).max())
            # A line along the axis stays at one fibre: it has no distribution through the depth to
            # fit a straight line to, so its extremes are those of the estimate along the line.
            across = float(np.ptp(yy)) > 1e-6 * a
            if across:
                coef = np.polyfit(yy, ff, 1)
                i0, i1 = int(np.argmin(yy)), int(np.argmax(yy))
            else:
                i0, i1 = int(np.argmin(ee)), int(np.argmax(ee))
                notes.append(f"line {nm!r} runs at one fibre (y = {float(yy.mean()):.4g}): its samples are "
                             "compared with M·y/I along the line, with no fit through the depth")
            entry.update({
                "estimate_extremes": [float(ee[i0]), float(ee[i1])],
                "fe_extremes": [float(ff[i0]), float(ff[i1])],
                "extremes_at_y": [float(yy[i0]), float(yy[i1])],
                "estimate_slope": float(np.polyfit(yy, ee, 1)[0]) if across else None,
                "fe_slope": float(coef[0]) if across else None,
                "fe_departure_from_linear": float(np.abs(ff - np.polyval(coef, yy)).max() / scale_fe)
                if across and scale_fe > _SMALL else None,
                "fe_departure_from_estimate": float(np.abs(ff - ee).max() / scale_est) if scale_est > _SMALL else None,
            })
        else:
            notes.append(f"line {nm!r} has fewer than two samples inside the part")
        out_lines[nm] = entry

    return {
        "axis": {"held_end": fr.origin, "load_point": np.asarray(beam.load_point, dtype=float), "ex": fr.ex,
                 "ey": fr.ey, "ez": fr.ez, "length_to_load": a},
        "force": {"vector": F, "transverse": P, "axial": N, "lateral": lateral},
        "E": E, "nu": nu,
        "load_case": load_case,
        "materials_along_axis": spans,
        "section": {"kind": beam.sections[0].kind, "stations": [s.at for s in beam.sections],
                    "I_min": float(I_geo.min()), "I_max": float(I_geo.max())},
        "load_point_deflection": deflection,
        "points": out_pts,
        "lines": out_lines,
        "notes": notes,
        "sources": "Euler-Bernoulli flexure formula M y / I with the local section; unit-load integral "
                   "for the deflection, Timoshenko shear term with Cowper's coefficient (J. Appl. Mech. 33, "
                   "1966); bounds from constant sections (common practice)",
    }


def beam_estimates(case: Case, res) -> dict:
    """``{beam name: estimate dict}`` for every ``[[beam]]`` of the case (empty when none)."""
    return {b.name: beam_estimate(case, res, i) for i, b in enumerate(case.beams)}
