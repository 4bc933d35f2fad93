"""Writing a run's results: summary.json, result.vtu and one CSV per line, as one set.

Every file of a run (comparison and report files included) is written into a fresh hidden run
folder of the results folder and shown all at once by one atomic switch
(:class:`elastofe.files.StagedOutputs`): an interrupted run (a signal, an exception, a full disk,
SIGKILL at any instant) leaves the previous results as they were, and the folder never mixes two
runs. One writer at a time holds the folder's lock (:class:`elastofe.files.FolderLock`). The case
record ``.elastofe-case.json`` names the case file and its SHA-256 and every result file's, so a
run does not silently write over the results of a different case (:func:`check_target`), deletes
only what an earlier run of the folder wrote, and never touches an input of the case.
"""
from __future__ import annotations

import datetime
import fnmatch
import json
import math
import os
import time
from pathlib import Path

import numpy as np

from .bodies import assign_materials
from .case.load import XDMF_SUFFIXES
from .errors import CaseError
from .fem.elements import element_for
from .fem.surface import face_areas
from .files import (
    RECORD,
    StagedOutputs,
    atomic_path,
    check_folder,
    folder_lock,
    json_ready,
    read_consistent,
    safe_name,
    sha256_file,
    sha256_or_none,
    sha256_text,
    staged_outputs,
    write_text,
)
from .mesh import Mesh, cell_bodies, face_owners, mesh_pieces, write_vtu
from .notice import CAUTION
from .post import checks
from .post.fields import point_fields as node_fields
from .post.linearize import as_dict
from .post.recovery import COMPONENTS, principal, von_mises
from .regions import point_node
from .resources import peak_memory_mb
from .result import LINE_COLUMNS, Result, line_header
from .version import __version__
from .xdmf import heavy_data_files

__all__ = ["CAUTION", "MARKER", "BOUNDARY_FILE", "utilisation_field", "write_boundary", "RESULT_NAMES", "summary",
           "summary_extras", "write_results", "check_target", "read_marker", "case_identity", "verify_results",
           "line_csv", "line_header", "line_file_names", "LINE_COLUMNS", "point_fields", "array_units",
           "array_components", "vtu_field_data", "vtu_units_document", "read_units_field", "UNITS_FIELD",
           "linearized_file", "linearized_summary",
           "atomic_path", "write_text", "safe_name", "sha256_file", "input_files", "stage_results",
           "commit_results", "read_results", "result_names", "EXTRA_PATTERNS"]



def summary(res: Result, line_files: dict[str, str], case_files: dict | None = None) -> dict:
    """The summary.json document of a run (the keys are listed in docs/outputs.md)."""
    case, mesh = res.case, res.mesh
    lab = case.units.labels
    umag = np.linalg.norm(res.u, axis=1)
    iu = int(np.argmax(umag))
    iv = int(np.argmax(res.von_mises))
    doc = {
        "title": case.title,
        "caution": CAUTION,
        "units": {"length": lab["length"], "force": lab["force"], "stress": lab["stress"],
                  "moment": lab["moment"], "energy": lab["energy"], "mass": lab["mass"],
                  "density": lab["density"]},
        "case_file": str(case.source) if case.source else None,
        "geometry_file": str(case.geometry.file),
        "geometry": _geometry(res),
        "regions": res.matches,
        "warnings": list(res.warnings) + list(getattr(getattr(res.mesh, "source", None), "warnings", ()) or ()),
        "mesh": _mesh_entry(res),
        "material": {"name": case.material.name, "E": case.material.E, "nu": case.material.nu,
                     "density": case.material.density},
        "max_displacement": {"value": float(umag[iu]), "at": mesh.points[iu], "vector": res.u[iu]},
        "max_von_mises": {"value": float(res.von_mises[iv]), "at": mesh.points[iv]},
        "applied_force": res.applied_force,
        "applied_moment": res.applied_moment,
        "loads": [_load_entry(res, ld) for ld in res.loads],
        "reactions": _reactions(res.reactions),
        "equilibrium_error": res.equilibrium_error,
        "moment_equilibrium_error": res.moment_equilibrium_error,
        "strain_energy": res.strain_energy,
        "solver": {"backend": res.backend, "relative_residual": res.residual, **getattr(res, "solver_info", {})},
        "points": {name: point_entry(p) for name, p in res.points.items()},
        "lines": line_files,
        "linearized": linearized_summary(res, line_files),
        "timings": {k: round(v, 4) for k, v in res.timings.items()},
        "peak_memory_mb": round(peak_memory_mb(), 1),
        "memory_estimate_mb": None if res.memory_estimate is None else round(res.memory_estimate / 2**20, 1),
        "elastofe_version": __version__,
    }
    doc.update(summary_extras(res))
    if case.material.expansion is not None:
        doc["material"]["expansion"] = case.material.expansion
    doc.update(bodies_summary(res))
    if res.load_cases:
        doc["load_case"] = res.load_case
        doc["load_cases"] = {name: _case_entry(res, cr, (case_files or {}).get(name, {}))
                             for name, cr in res.load_cases.items()}
        env = res.envelope
        iv = int(np.argmax(env["von_mises"]))
        doc["envelope"] = {"max_von_mises": {"value": float(env["von_mises"][iv]), "at": mesh.points[iv],
                                             "case": env["names"][env["governing"][iv]]},
                           "cases": env["names"]}
    if res.estimates:
        doc["estimates"] = res.estimates
    if res.modes is not None:
        m = res.modes
        doc["modes"] = [{"number": i + 1, "frequency": float(m.frequencies[i]),
                         "effective_mass": m.effective_mass[i], "cumulative_effective_mass": m.cumulative[i],
                         "rigid_body": m.rigid[i]} for i in range(len(m.frequencies))]
        doc["modes_info"] = {"units": {"frequency": "Hz", "effective_mass": "fraction of the mass that can move"},
                             "moving_mass": m.moving_mass, "mass_unit": _mass_label(case),
                             "method": m.method, "shapes": "VTU point arrays mode-1, mode-2, ... (largest "
                             "displacement scaled to 1)"}
    if res.buckling is not None:
        b = res.buckling
        doc["buckling"] = [{"number": i + 1, "factor": float(f)} for i, f in enumerate(b.factors)]
        doc["buckling_info"] = {"load_case": b.load_case, "method": b.method, "note": b.note,
                                "caution": checks.BUCKLING_CAUTION, "shapes": "VTU point arrays buckling-1, "
                                "buckling-2, ... (largest displacement scaled to 1)"}
    return json_ready(doc)


def _mass_label(case) -> str:
    """The case's mass unit (force / acceleration of its length and second)."""
    return {"mm-N": "t", "m-N": "kg", "in-lbf": "lbf*s^2/in"}.get(case.units.name, "mass unit")


def _mesh_entry(res: Result) -> dict:
    """summary.json's ``mesh``: counts and the smallest element quality of the whole mesh."""
    whole, mesh = res.whole, res.mesh
    elements = whole.elements if whole is not None else int(mesh.cells.shape[0])
    q = whole.min_quality if whole is not None else float(res.quality.min())
    return {"nodes": res.nodes, "elements": elements, "order": mesh.order, "dofs": res.dofs,
            "size": res.case.mesh.size, "formulation": res.formulation, "min_quality": q}


def _geometry(res: Result) -> dict:
    """summary.json's ``geometry``: the file's length unit and the scale applied, warnings on the
    part's size, and the face-connected pieces (bodies) of the mesh."""
    mesh = res.mesh
    source = getattr(mesh, "source", None)
    out = dict(source.as_dict()) if source is not None else {"file": str(res.case.geometry.file)}
    if res.whole is not None:
        out["pieces"] = res.whole.pieces
    else:
        _, pieces = mesh_pieces(mesh.points, mesh.cells, getattr(mesh, "cell_body", None))
        out["pieces"] = [p.as_dict() for p in pieces]
    return out


def _governing(res: Result) -> dict:
    """summary.json's ``governing_peak``: which von Mises peak governs, where, in which load case and
    why; for a part of several materials also in which material and each material's own peak."""
    g = res.governing or checks.governing_peak(res)

    def entry(g: dict) -> dict:
        fy = g.get("yield_strength", res.case.material.yield_strength)
        out = {"value": g["value"], "at": g["at"], "basis": g["basis"], "load_case": g["load_case"], "why": g["why"],
               "overall": {k: g["overall"][k] for k in ("value", "at", "next_to")},
               "away": {k: g["away"].get(k) for k in ("value", "at")}}
        if fy is not None and g["value"] > 0:
            out["utilisation"] = g["value"] / fy
            out["margin"] = fy / g["value"] - 1.0
        return out

    out = entry(g)
    if g.get("by_material"):
        out["material"] = g["material"]
        out["yield_strength"] = g["yield_strength"]
        out["by_material"] = {name: dict(entry(e), yield_strength=e["yield_strength"])
                              for name, e in g["by_material"].items()}
    return out


def _material_entry(m) -> dict:
    return {"name": m.name, "E": m.E, "nu": m.nu, "density": m.density, "yield_strength": m.yield_strength,
            "expansion": m.expansion}


def bodies_summary(res: Result) -> dict:
    """summary.json's ``materials`` (every material and its bodies) and ``bodies`` (every body with
    its material, volume, mass, centroid and bounding box)."""
    whole = getattr(res, "whole", None)
    if whole is not None and getattr(whole, "materials", None) is not None:
        mm = whole.materials  # a distributed run: the whole mesh's bodies, not the kept part's
    else:
        mm = res.materials if getattr(res, "materials", None) is not None else assign_materials(res.case, res.mesh)
    mats = [dict(_material_entry(m), bodies=mm.body_ids_of(i)) for i, m in enumerate(mm.materials)]
    bodies = [dict(b.as_dict(), material=mm.materials[int(k)].name, mass=mass)
              for b, k, mass in zip(mm.bodies, mm.body_material, mm.masses())]
    return {"materials": mats, "bodies": bodies}


def point_entry(p: dict) -> dict:
    """One named point in summary.json; for a part of several bodies with the body (and material)
    whose stress it reports and whether it lies on an interface between bodies."""
    out = {"at": p["at"], "displacement": p["displacement"], "von_mises": p["von_mises"],
           "stress": dict(zip(COMPONENTS, p["stress"])), "principal": p["principal"]}
    for k in ("body", "material", "on_interface"):
        if k in p:
            out[k] = p[k]
    return out


def _reactions(reactions: dict) -> dict:
    out = {}
    for k, v in reactions.items():
        out[k] = {"force": v["force"], "moment": v["moment"]}
        if "about" in v:
            out[k]["about"] = v["about"]
            out[k]["moment_about"] = v["moment_about"]
    return out


def _load_entry(res: Result, ld) -> dict:
    e = {"label": ld.label, "force": ld.force, "moment": ld.moment, "area": ld.area}
    if getattr(ld, "kind", ""):
        e["kind"] = ld.kind
    idx = getattr(ld, "index", -1)
    region = getattr(res.case.loads[idx], "region", None) if 0 <= idx < len(res.case.loads) else None
    if region is not None:
        e["region"] = region
    for k, v in getattr(ld, "info", {}).items():
        e[k] = v
    if res.case.load_cases and getattr(ld, "index", -1) >= 0:
        e["cases"] = [lc.name for lc in res.case.load_cases if ld.index in lc.loads]
    return e


def _case_entry(res: Result, cr, line_files: dict) -> dict:
    """One load case's or combination's section of summary.json."""
    umag = np.linalg.norm(cr.u, axis=1)
    iu = int(np.argmax(umag))
    iv = int(np.argmax(cr.von_mises))
    pts = res.mesh.points
    return {
        "kind": cr.kind,
        "factors": cr.factors,
        "loads": [res.loads[i].label for i in cr.loads],
        "max_displacement": {"value": float(umag[iu]), "at": pts[iu], "vector": cr.u[iu]},
        "max_von_mises": {"value": float(cr.von_mises[iv]), "at": pts[iv]},
        "peak_away_from_supports_and_loads": {k: cr.peak_away.get(k) for k in ("value", "at", "nodes")},
        "applied_force": cr.applied_force,
        "applied_moment": cr.applied_moment,
        "reactions": _reactions(cr.reactions),
        "equilibrium_error": cr.equilibrium_error,
        "moment_equilibrium_error": cr.moment_equilibrium_error,
        "strain_energy": cr.strain_energy,
        "points": {name: point_entry(p) for name, p in cr.points.items()},
        "lines": line_files,
    }


def summary_extras(res: Result) -> dict:
    """Keys added for checks and reports: ``checks``, ``supports`` (region area, reaction),
    ``inputs`` (files and their sha256), ``peak_away_from_supports_and_loads``."""
    case, mesh = res.case, res.mesh
    supports = []
    for i, s in enumerate(case.supports, 1):
        if s.at is not None:  # a point support: the node it holds, named
            node, dist = point_node(mesh, s.at, s.tol, f"support[{i}].at")
            at = ", ".join(f"{c:.4g}" for c in mesh.points[node])
            supports.append({"label": f"support[{i}] {s.label} (node at [{at}])", "region": None, "name": s.label,
                             "fix": s.fix,
                             "value": s.value, "area": 0.0, "at": s.at, "node": node, "node_at": mesh.points[node],
                             "distance": dist, "reaction": res.reactions[s.label]["force"]})
            continue
        faces = mesh.surface_faces(res.region_ids[s.region])
        entry = {"label": f"support[{i}] on {s.region}", "region": s.region, "fix": s.fix,
                 "frame": getattr(s, "frame", "global"), "value": s.value,
                 "area": float(face_areas(mesh.points, faces).sum()), "reaction": res.reactions[s.region]["force"]}
        if entry["frame"] == "elastic":
            entry.update(normal_stiffness=s.normal, tangential_stiffness=s.tangential)
        supports.append(entry)
    inputs = {}
    if case.source is not None:
        inputs["case_file"] = {"path": str(case.source), "sha256": sha256_or_none(case.source)}
    inputs["geometry_file"] = {"path": str(case.geometry.file), "sha256": sha256_or_none(case.geometry.file)}
    if Path(case.geometry.file).suffix.lower() in XDMF_SUFFIXES:  # its arrays may live in .h5 files beside it
        heavy = heavy_data_files(Path(case.geometry.file))
        if heavy:
            inputs["geometry_data_files"] = [{"path": str(h), "sha256": sha256_or_none(h)} for h in heavy]
    if case.reference is not None:
        for rs in case.reference.sets:
            inputs[rs.key] = {"path": str(rs.file), "sha256": sha256_or_none(rs.file)}
    found = list(res.checks) or checks.run_checks(res)
    m = case.material
    return {
        "run_at": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC"),
        "material": {"E": m.E, "nu": m.nu, "density": m.density, "yield_strength": m.yield_strength},
        "checks": checks.as_dict(found),
        "checks_worst": checks.worst(found),
        "supports": supports,
        "inputs": inputs,
        "peak_away_from_supports_and_loads": res.peak_away or checks.peak_away_from_regions(res),
        "governing_peak": _governing(res),
    }


def result_vtu(res: Result, path: Path, point_data: dict, split_data: dict | None = None) -> tuple:
    """The arguments of ``write_vtu`` for result.vtu: ``(path, mesh, point data, cell data)``.

    ``point_data`` holds arrays at the mesh's nodes, ``split_data`` arrays already at the split nodes
    of ``res.body_nodes`` (the same thing for a part of one body).

    Cell arrays ``quality``, ``body`` (body id) and ``material`` (number of the material in
    summary.json's ``materials``, from 1). For a part of several bodies that touch, the mesh is
    written broken at the interfaces: every interface node once per body, so that each body shows
    its own stresses (the jump at a bonded interface of two materials is kept); node-based arrays
    are taken to the split nodes, stresses from the per-body averages.
    """
    mesh = res.mesh
    mm = _materials_of(res)
    cell = {"quality": res.quality, "body": cell_bodies(mesh).astype(np.int32),
            "material": (mm.cell_material + 1).astype(np.int32)}
    nodes = getattr(res, "body_nodes", None)
    if nodes is None or nodes.identity:
        return path, mesh, {**point_data, **(split_data or {})}, cell
    from dataclasses import replace

    split: dict = {}
    body_of = {"stress": res.stress_by_body}
    for cname, cr in res.load_cases.items():
        body_of["stress-" + safe_name(cname)] = cr.stress_by_body
    for key, v in point_data.items():
        if key in body_of:
            split[key] = body_of[key]
        elif key == "von_mises" or key.startswith("von_mises-") and key[10:] != "envelope":
            base = "stress" + key[9:]
            split[key] = von_mises(body_of[base]) if base in body_of else np.asarray(v)[nodes.node]
        elif key == "principal" or key.startswith("principal-"):
            base = "stress" + key[9:]
            split[key] = principal(body_of[base]) if base in body_of else np.asarray(v)[nodes.node]
        elif key.startswith("stress_") and key[7:] in COMPONENTS:
            split[key] = res.stress_by_body[:, COMPONENTS.index(key[7:])]
        else:
            split[key] = np.asarray(v)[nodes.node]
    split.update(split_data or {})
    broken = replace(mesh, points=mesh.points[nodes.node], cells=nodes.cells)
    return path, broken, split, cell


def linearized_file(line_name: str) -> str:
    """Name of a line's companion file with its stress linearization."""
    return f"line-{safe_name(line_name)}-linearized.json"


def linearized_summary(res: Result, line_files: dict[str, str] | None = None) -> dict:
    """``{line: {"file", "s_start", "s_end", ..., membrane/bending/peak}}`` for summary.json."""
    out = {}
    for name, (lin, info) in res.linearized.items():
        entry = dict(info)
        if line_files is not None and name in line_files:
            entry["file"] = linearized_file(name)
        if lin is not None:
            entry.update(as_dict(lin))
        out[name] = entry
    return out


def line_file_names(res: Result) -> tuple[dict[str, str], dict[str, dict[str, str]]]:
    """The line CSVs a run writes: ``({line: file}, {load case: {line: file}})``.

    One CSV per line, or with named load cases one per line and load case (or combination),
    ``line-NAME-CASE.csv``; the first mapping then lists the first load case's files.
    """
    if not res.load_cases:
        return {name: f"line-{safe_name(name)}.csv" for name in res.lines}, {}
    case_files = {cname: {name: f"line-{safe_name(name)}-{safe_name(cname)}.csv" for name in cr.lines}
                  for cname, cr in res.load_cases.items()}
    return dict(case_files[res.load_case]), case_files


def line_csv(line, labels: dict) -> str:
    """CSV text of one sampled line with unit-labelled headers (NaN samples outside the part written
    as empty fields). The same headers as a reference points file, so a run's line CSV can be given
    back as ``[[reference.points]]``.

    For a part of several bodies two columns follow: ``body`` (the body whose stress the sample
    reports, empty outside the part) and ``interface`` (1 where the sample lies on an interface
    between bodies).
    """
    header = line_header(labels)
    data = line.table()
    several = getattr(line, "body", None) is not None
    if several:
        header += ["body", "interface"]
        data = np.column_stack([data, np.where(line.body > 0, line.body, np.nan), line.on_interface.astype(float)])
    ints = data.shape[1] - 2 if several else data.shape[1]
    rows = [",".join(header)]
    for row in data:
        rows.append(",".join("" if not math.isfinite(v) else (repr(float(v)) if j < ints else str(int(v)))
                             for j, v in enumerate(row)))
    return "\n".join(rows) + "\n"


#: Component names of the multi-component point arrays of result.vtu, by the array's base name
#: (load-case arrays ``stress-NAME`` take those of ``stress``, mode shapes ``mode-N`` those of ``mode``).
ARRAY_COMPONENTS = {"displacement": ("x", "y", "z"), "stress": COMPONENTS, "principal": ("1", "2", "3"),
                    "mode": ("x", "y", "z"), "buckling": ("x", "y", "z")}
#: Kind of unit of each result.vtu array, by base name (see :func:`array_units`); mode and buckling
#: shapes are scaled to a largest displacement of 1, so they carry no unit.
ARRAY_KINDS = {"displacement": "length", "von_mises": "stress", "stress": "stress", "principal": "stress",
               "temperature_change": "temperature", "envelope_governing": "index", "quality": "dimensionless",
               "mode": "dimensionless", "buckling": "dimensionless", "utilisation": "dimensionless"}


def point_fields(res: Result) -> dict[str, np.ndarray]:
    """The point arrays of result.vtu: ``{name: (n,) or (n, c)}`` in the case's units.

    ``displacement (n, 3)`` [length]; ``von_mises (n,)``, ``stress (n, 6)`` (xx, yy, zz, xy, yz, xz),
    ``principal (n, 3)`` largest first and ``stress_xx`` ... ``stress_xz (n,)`` [stress];
    ``temperature_change (n,)`` [K] when the case has one; per named load case or combination the
    same arrays suffixed ``-NAME``; with load cases ``von_mises-envelope (n,)`` and
    ``envelope_governing (n,)`` (index into the envelope's case names, int32); ``mode-N`` and
    ``buckling-N (n, 3)`` shapes scaled to a largest displacement of 1; ``utilisation (n,)`` von Mises
    over the yield strength (of the envelope with load cases) when the case gives one.
    """
    env = (res.envelope["von_mises"], res.envelope["governing"]) if res.envelope is not None else None
    point_data = node_fields(_fields(res), {c: _fields(cr) for c, cr in res.load_cases.items()}, env)
    if res.modes is not None:
        for i, shape in enumerate(res.modes.shapes, 1):
            point_data[f"mode-{i}"] = shape
    if res.buckling is not None:
        for i, shape in enumerate(res.buckling.shapes, 1):
            point_data[f"buckling-{i}"] = shape
    util = utilisation_field(res)
    if util is not None:
        point_data["utilisation"] = util
    return point_data


def _base_name(name: str) -> str:
    base = name.split("-")[0]
    return "stress" if base.startswith("stress_") else base


def array_units(names, labels: dict) -> dict[str, str]:
    """``{array name: unit label}`` of result.vtu arrays (``"1"`` for a dimensionless number, ``""`` for
    an index); ``labels`` are the case's unit labels."""
    unit = dict(labels, temperature="K", index="", dimensionless="1")
    return {n: unit[ARRAY_KINDS[_base_name(n)]] for n in names if _base_name(n) in ARRAY_KINDS}


def array_components(point_data: dict) -> dict[str, tuple[str, ...]]:
    """``{array name: component names}`` of the multi-component arrays among ``point_data``."""
    return {n: ARRAY_COMPONENTS[_base_name(n)] for n, v in point_data.items()
            if np.ndim(v) == 2 and _base_name(n) in ARRAY_COMPONENTS}


#: Name of result.vtu's field-data array holding the units (UTF-8 bytes of a JSON object).
UNITS_FIELD = "units_json"


def vtu_units_document(res: Result, point_data: dict) -> dict:
    """What result.vtu's :data:`UNITS_FIELD` holds: ``{"units": {array: unit}, "components": {array:
    names}, "unit_system": {...}, "title": ...}``."""
    lab = res.case.units.labels
    return {"title": res.case.title, "unit_system": {k: lab[k] for k in ("length", "force", "stress")},
            "units": array_units(list(point_data) + ["quality"], lab),
            "components": {k: list(v) for k, v in array_components(point_data).items()}}


def vtu_field_data(res: Result, point_data: dict) -> dict[str, np.ndarray]:
    """result.vtu's field data: :data:`UNITS_FIELD` as UTF-8 bytes (uint8) of
    :func:`vtu_units_document`. A byte array, not a VTK string array, because meshio (the common
    Python reader, and ours for reference files) cannot read string arrays."""
    text = json.dumps(vtu_units_document(res, point_data), ensure_ascii=False)
    return {UNITS_FIELD: np.frombuffer(text.encode("utf-8"), dtype=np.uint8)}


def read_units_field(field_data: dict) -> dict:
    """The document of :func:`vtu_units_document` from a VTU's field data (``{}`` without one)."""
    raw = field_data.get(UNITS_FIELD)
    if raw is None:
        return {}
    try:
        doc = json.loads(bytes(np.asarray(raw, dtype=np.uint8).ravel()).decode("utf-8"))
    except (ValueError, UnicodeDecodeError):
        return {}
    return doc if isinstance(doc, dict) else {}


#: The case record in a results folder.
MARKER = RECORD
#: Names a run writes (line CSVs aside); a folder holding any of them holds results.
RESULT_NAMES = ("summary.json", "result.vtu", "result.pvtu", MARKER)
#: Names (glob patterns) of the files a run may write besides :data:`RESULT_NAMES` and the line files:
#: the comparison with a reference and the verification report.
EXTRA_PATTERNS = ("comparison.json", "comparison.csv", "comparison-*.png", "report.html", "report.pdf",
                  "pictures.json", "picture-*.png", "report-line-*.png", "report-conv-*.png", "result-*.vtu",
                  "boundary.vtu")


def input_files(case) -> list[tuple[str, Path]]:
    """``(key, path)`` of every file the case reads: the case file, the geometry, reference files,
    temperature fields."""
    out: list[tuple[str, Path]] = []
    if case.source is not None:
        out.append(("(case file)", Path(case.source)))
    out.append(("geometry.file", Path(case.geometry.file)))
    for i, ld in enumerate(case.loads, 1):
        f = getattr(ld, "file", None)
        if f is not None:
            out.append((f"load[{i}].temperature.file", Path(f)))
    if case.reference is not None:
        for rs in case.reference.sets:
            out.append((f"{rs.key}.file", Path(rs.file)))
    return out


def result_names(case) -> tuple[set[str], tuple[str, ...]]:
    """The names a run of ``case`` may write in its results folder: exact names and glob patterns."""
    exact = set(RESULT_NAMES)
    suffixes = [""] + [f"-{safe_name(n)}" for n in [lc.name for lc in case.load_cases] +
                       [c.name for c in case.combinations]]
    for ln in case.lines:
        exact |= {f"line-{safe_name(ln.name)}{s}.csv" for s in suffixes}
        exact.add(linearized_file(ln.name))
    return exact, EXTRA_PATTERNS


def _resolved(p: Path) -> Path:
    try:
        return p.resolve()
    except (OSError, RuntimeError):  # a loop of links: compare as given
        return p.absolute()


def _inputs_in(out_dir: Path, case) -> dict[str, tuple[str, Path]]:
    """The case's input files that lie in ``out_dir`` itself: ``{name: (key, path)}``."""
    here = _resolved(out_dir)
    found = {}
    for key, p in input_files(case):
        for q in {p.absolute(), _resolved(p)}:  # the path as given and where its links lead
            if _resolved(q.parent) == here:
                found[q.name] = (key, p)
    return found


def case_identity(case) -> dict:
    """``case_file`` (absolute path or None) and ``case_sha256`` of the case file's bytes (of the
    case's ``repr`` for a case built in code)."""
    if case.source is not None and Path(case.source).is_file():
        return {"case_file": str(Path(case.source).resolve()), "case_sha256": sha256_file(case.source)}
    return {"case_file": None, "case_sha256": sha256_text(repr(case))}


def read_marker(out_dir: Path) -> dict | None:
    """The case record of a results folder; None when there is none; ``{}`` when unreadable."""

    def read(d: Path):
        p = d / MARKER
        if not p.is_file():
            return None
        try:
            doc = json.loads(p.read_text(encoding="utf-8"))
        except ValueError:
            return {}
        return doc if isinstance(doc, dict) else {}

    try:
        return read_consistent(Path(out_dir), read)
    except OSError:
        return {}


def read_results(out_dir: Path) -> dict:
    """summary.json of the run a results folder shows (read from that run's own folder).

    Raises
    ------
    FileNotFoundError
        When the folder shows no run.
    """
    return read_consistent(Path(out_dir), lambda d: json.loads((d / "summary.json").read_text(encoding="utf-8")))


def _same_case(old: dict, new: dict) -> bool:
    """One case: the same file (edited or not) or the same bytes (a copy elsewhere)."""
    if old.get("case_sha256") and old.get("case_sha256") == new["case_sha256"]:
        return True
    return bool(old.get("case_file")) and old.get("case_file") == new["case_file"]


def check_target(out_dir: Path, case, overwrite: bool = False) -> None:
    """Refuse a results folder that cannot take this case's results.

    Raises :class:`CaseError` (key ``--out``) when ``out_dir`` is a file, when writing would
    replace an input file of the case (the case file, geometry, reference files, temperature
    fields: named in the message), or when it holds the results of a different case (another
    case file with other contents) or results with no case record, unless ``overwrite``.
    """
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise CaseError("--out", str(out_dir), "is a file, not a folder; choose a folder for the results")
    exact, patterns = result_names(case)
    for name, (key, _) in sorted(_inputs_in(out_dir, case).items()):
        if name in exact or any(fnmatch.fnmatchcase(name, pat) for pat in patterns) or name.startswith(".elastofe-"):
            raise CaseError("--out", str(out_dir), f"writing the results there would replace the input file {name} "
                            f"({key}); inputs are never overwritten: choose another --out")
    if not out_dir.is_dir() or overwrite:
        return
    old = read_marker(out_dir)
    new = case_identity(case)
    if old is None:
        present = [n for n in ("summary.json", "result.vtu", "result.pvtu") if os.path.lexists(out_dir / n)]
        if present:
            raise CaseError("--out", str(out_dir), f"holds results ({', '.join(present)}) with no record of "
                            f"their case ({MARKER}); pass --overwrite to replace them, or choose another --out")
        return
    if not _same_case(old, new):
        what = old.get("case_file") or "a case built in code"
        sha = (old.get("case_sha256") or "unknown")[:12]
        raise CaseError("--out", str(out_dir), f"holds the results of another case ({what}, sha256 {sha}...); "
                        "pass --overwrite to replace them, or choose another --out")


def stage_results(res: Result, st: StagedOutputs, extra: dict | None = None) -> dict:
    """Write the line CSVs, the fields (result.vtu, or result.pvtu and its pieces) and summary.json
    (last) into the staged set ``st``; return the summary. ``extra`` keys (for example
    ``comparison``) are added to the summary."""
    line_files, case_files = line_file_names(res)
    labels = res.case.units.labels
    if res.load_cases:
        for cname, cr in res.load_cases.items():
            for name, line in cr.lines.items():
                st.write_text(case_files[cname][name], line_csv(line, labels))
    else:
        for name, line in res.lines.items():
            st.write_text(line_files[name], line_csv(line, labels))
    for name, entry in linearized_summary(res, line_files).items():
        companion = {"line": name, "line_file": line_files[name], "units": {
            "length": res.case.units.labels["length"], "stress": res.case.units.labels["stress"]},
            "method": "membrane (mean), bending (linear part) and peak (the rest) of each stress component "
                      "along the line, ASME BPVC VIII-2 Part 5 stress linearization", "caution": CAUTION}
        companion.update({k: v for k, v in entry.items() if k != "file"})
        st.write_text(linearized_file(name), json.dumps(json_ready(companion), indent=2) + "\n")
    fields = _write_fields(st, res)
    doc = summary(res, line_files, case_files)
    # Where the node and cell fields are: one result.vtu, or result.pvtu and its pieces.
    doc["fields"] = fields[0] if fields else None
    if extra:
        doc.update(json_ready(extra))
    doc["run_id"] = st.run_id
    st.write_text("summary.json", json.dumps(doc, indent=2) + "\n")
    return doc


def commit_results(st: StagedOutputs, case, out_dir: Path, overwrite: bool = False) -> dict[str, str]:
    """Show the staged run in ``out_dir`` (one atomic switch) with its case record; return its files.

    Only names an earlier run of this folder recorded (or, with ``overwrite``, the names this run
    writes) may be replaced; the case's input files are never touched.
    """
    out_dir = Path(out_dir)
    inputs = set(_inputs_in(out_dir, case))
    old = read_marker(out_dir) or {}
    replace = {n.split("/")[0] for n in (old.get("files") or {})} | ({MARKER} if old else set())
    if overwrite:
        replace |= set(st.names()) | {MARKER}
    geo = Path(case.geometry.file)
    record = dict(case_identity(case), run_id=st.run_id, geometry_file=str(geo),
                  geometry_sha256=sha256_or_none(geo) if geo.is_file() else None,
                  written=time.strftime("%Y-%m-%dT%H:%M:%S%z"), elastofe_version=__version__)
    return st.commit(record=record, replace=replace - inputs, protect=inputs)


def write_results(res: Result, out_dir: Path, extra: dict | None = None, *, overwrite: bool = True) -> dict:
    """Write result.vtu, the line CSVs and summary.json into ``out_dir`` as one run; return the summary.

    Takes the folder's lock, checks it (:func:`check_target`; with ``overwrite=False`` the results
    of another case are refused), writes every file into a fresh run folder and shows it with one
    atomic switch (see the module notes). ``extra`` keys (for example ``comparison``) are added to
    the summary.
    """
    out_dir = Path(out_dir)
    with folder_lock(out_dir, "--out"):
        check_target(out_dir, res.case, overwrite=overwrite)
        with staged_outputs(out_dir) as st:
            doc = stage_results(res, st, extra)
            commit_results(st, res.case, out_dir, overwrite)
    return doc


#: The boundary of the mesh with its surface ids, written beside result.vtu for the report's
#: picture of the model as applied (and for a viewer that wants to see which surface is which).
BOUNDARY_FILE = "boundary.vtu"


def utilisation_field(res: Result, split: bool = False) -> np.ndarray | None:
    """Utilisation at the nodes: von Mises over the yield strength of each node's material, of the
    envelope over every load case and combination when there are several; None unless every
    material has a yield strength.

    Returns ``(n,)`` at the mesh's nodes (at an interface between bodies the larger side), or with
    ``split`` ``(q,)`` at the split nodes of ``res.body_nodes`` (each body's side; the same as the
    mesh's nodes for a part of one body).
    """
    mats = res.case.materials
    if any(m.yield_strength is None or not m.yield_strength > 0 for m in mats):
        return None
    nodes = getattr(res, "body_nodes", None)
    if nodes is None or nodes.identity:  # one body: one material
        vm = res.envelope["von_mises"] if res.envelope is not None else res.von_mises
        fy = mats[int(_materials_of(res).cell_material[0])].yield_strength
        return np.asarray(vm, dtype=float) / float(fy)
    cases = list(res.load_cases.values()) or [res]
    vm = np.max([von_mises(c.stress_by_body) for c in cases], axis=0)
    fy = np.array([m.yield_strength for m in mats])[_materials_of(res).material_index_of_bodies(nodes.body)]
    util = vm / fy
    return util if split else nodes.to_nodes(util, util)


def _materials_of(res: Result):
    return res.materials if getattr(res, "materials", None) is not None else assign_materials(res.case, res.mesh)


def write_boundary(path: Path, res: Result) -> None:
    """Write the boundary faces (3- or 6-node triangles, outward) with their surface ids as VTU.

    Cell data ``surface_id`` (f,); point data ``edge-NAME`` (n,) uint8, 1 on the nodes of every
    region selected by an edge (those regions have no surface). Points are all the points of
    result.vtu (for bodies that touch, the split nodes: each face on its own body's), so node
    numbers agree with result.vtu.
    """
    import meshio

    from .case.schema import Edge
    from .regions import edge_nodes

    mesh = res.mesh
    point_data = {}
    for name, sel in res.case.regions.items():
        if isinstance(sel, Edge):
            flag = np.zeros(mesh.nodes, dtype=np.uint8)
            try:
                flag[edge_nodes(sel, mesh, res.region_ids, f"regions.{name}.edge")] = 1
            except CaseError:  # a region no support uses was never checked; it matched nothing
                pass
            point_data[f"edge-{safe_name(name)}"] = flag
    kind = "triangle6" if mesh.faces.shape[1] == 6 else "triangle"  # faces are in VTK's node order
    points, faces = mesh.points, np.asarray(mesh.faces, dtype=np.int64)
    nodes = getattr(res, "body_nodes", None)
    if nodes is not None and not nodes.identity:
        body = cell_bodies(mesh)[face_owners(mesh.cells, faces)]
        faces = nodes.index(faces, np.broadcast_to(body[:, None], faces.shape))
        points = mesh.points[nodes.node]
        point_data = {k: v[nodes.node] for k, v in point_data.items()}
    m = meshio.Mesh(points, [(kind, faces)],
                    point_data=point_data, cell_data={"surface_id": [np.asarray(mesh.face_surface, dtype=np.int32)]})
    meshio.write(str(path), m, file_format="vtu")


def _fields(cr) -> dict:
    return {"u": cr.u, "stress": cr.stress, "von_mises": cr.von_mises, "principal": cr.principal,
            "temperature": cr.temperature}


def _write_fields(st, res: Result) -> tuple[str, ...]:
    """Stage result.vtu, or result.pvtu and its pieces (a distributed run too large to gather);
    returns the names staged."""
    whole = res.whole
    if whole is None:
        point_data = point_fields(res)
        util = utilisation_field(res, split=True)  # for a part of several bodies: each side its own
        write_vtu(*result_vtu(res, st.path("result.vtu"), point_data,
                              {"utilisation": util} if util is not None else {}),
                  components=array_components(point_data), field_data=vtu_field_data(res, point_data))
        write_boundary(st.path(BOUNDARY_FILE), res)
        return ("result.vtu", BOUNDARY_FILE)
    if whole.vtu is not None:
        points, cells, point_data, cell_data = whole.vtu
        write_vtu(st.path("result.vtu"), Mesh(points=points, cells=cells, faces=np.zeros((0, 3), np.int64),
                                              face_surface=np.zeros(0, np.int64)), point_data, cell_data,
                  components=array_components(point_data), field_data=vtu_field_data(res, point_data))
        return ("result.vtu",)
    if whole.vtu_pieces is None:
        return ()
    pieces = whole.vtu_pieces
    bad = [name for _, name, ok in pieces["files"] if not ok]
    if bad:
        raise OSError(f"the field pieces {', '.join(bad)} could not be written")
    for staged, name, _ in pieces["files"]:
        st.adopt(Path(staged), name)
    st.write_text("result.pvtu", pvtu_text(pieces, element_for(res.mesh.cells.shape[1]).vtk_name))
    return ("result.pvtu",) + tuple(name for _, name, _ in pieces["files"])


def pvtu_text(pieces: dict, cell_type: str) -> str:
    """The XML of result.pvtu: the arrays of the pieces and their file names (VTK's parallel
    unstructured-grid format; ParaView opens it as one mesh)."""
    def arrays(kind: str) -> list[str]:
        return [f'      <PDataArray type="{t}" Name="{n}" NumberOfComponents="{c}"/>' for n, t, c in pieces[kind]]

    lines = ['<?xml version="1.0"?>',
             '<VTKFile type="PUnstructuredGrid" version="1.0" byte_order="LittleEndian" header_type="UInt64">',
             '  <PUnstructuredGrid GhostLevel="0">', '    <PPointData>', *arrays("point_data"), '    </PPointData>',
             '    <PCellData>', *arrays("cell_data"), '    </PCellData>',
             '    <PPoints>', '      <PDataArray type="Float64" NumberOfComponents="3"/>', '    </PPoints>',
             *[f'    <Piece Source="{name}"/>' for _, name, _ in pieces["files"]],
             f'  <!-- {len(pieces["files"])} pieces of {cell_type} cells, one per rank; shared nodes repeat in the '
             'pieces that use them, with the same node_id -->',
             '  </PUnstructuredGrid>', '</VTKFile>']
    return "\n".join(lines) + "\n"


def verify_results(out_dir: Path) -> list[str]:
    """Files of a results folder that do not match its case record (empty: one complete run).

    Every file the record lists must have its recorded SHA-256, be shown through the folder's
    links, and summary.json must carry the record's ``run_id``.
    """
    out_dir = Path(out_dir)
    bad = check_folder(out_dir)
    if bad:
        return bad

    def same_run(d: Path) -> bool:
        rec = json.loads((d / MARKER).read_text(encoding="utf-8"))
        doc = json.loads((d / "summary.json").read_text(encoding="utf-8")) if (d / "summary.json").is_file() else {}
        return "run_id" not in doc or doc.get("run_id") == rec.get("run_id")

    try:
        return [] if read_consistent(out_dir, same_run) else ["summary.json"]
    except (OSError, ValueError):
        return [MARKER]

