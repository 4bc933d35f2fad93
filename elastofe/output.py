"""Writing a run's results: summary.json, result.vtu and one CSV per line, each atomically.

Every file is written under a temporary name in the target folder and renamed into place, so an
interrupted run never leaves a half-written file; summary.json is written last.
"""
from __future__ import annotations

import contextlib
import datetime
import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np

from . import __version__
from .pipeline import Result, peak_memory_mb
from .post.recovery import COMPONENTS

CAUTION = ("Linear-elastic, small-displacement analysis. Results depend on the idealised supports, "
           "loads and mesh; they are no substitute for the judgement of a licensed engineer or for "
           "the governing codes and standards.")


@contextlib.contextmanager
def atomic_path(target: Path):
    """Yield a temporary path in ``target``'s folder; rename it onto ``target`` on success."""
    target = Path(target)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text(target: Path, text: str) -> None:
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")


def _clean(obj):
    """JSON-ready copy: arrays to lists, NaN/inf to None."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _clean(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    return obj


def summary(res: Result, line_files: dict[str, str], case_files: dict | None = None) -> dict:
    """The summary.json document of a run (see README for the keys)."""
    case, mesh = res.case, res.mesh
    lab = case.units.labels
    umag = np.linalg.norm(res.u, axis=1)
    iu = int(np.argmax(umag))
    iv = int(np.argmax(res.von_mises))
    doc = {
        "title": case.title,
        "caution": CAUTION,
        "units": {"length": lab["length"], "force": lab["force"], "stress": lab["stress"],
                  "moment": lab["moment"], "energy": lab["energy"]},
        "case_file": str(case.source) if case.source else None,
        "geometry_file": str(case.geometry.file),
        "mesh": {"nodes": mesh.nodes, "elements": int(mesh.cells.shape[0]), "order": mesh.order,
                 "dofs": 3 * mesh.nodes, "size": case.mesh.size,
                 "min_quality": float(res.quality.min())},
        "material": {"E": case.material.E, "nu": case.material.nu, "density": case.material.density},
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
        "points": {name: {"at": p["at"], "displacement": p["displacement"], "von_mises": p["von_mises"],
                          "stress": dict(zip(COMPONENTS, p["stress"])), "principal": p["principal"]}
                   for name, p in res.points.items()},
        "lines": line_files,
        "linearized": linearized_summary(res, line_files),
        "timings": {k: round(v, 4) for k, v in res.timings.items()},
        "peak_memory_mb": round(peak_memory_mb(), 1),
        "elastofe_version": __version__,
    }
    doc.update(summary_extras(res))
    if case.material.expansion is not None:
        doc["material"]["expansion"] = case.material.expansion
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
    return _clean(doc)


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
        "applied_force": cr.applied_force,
        "applied_moment": cr.applied_moment,
        "reactions": _reactions(cr.reactions),
        "equilibrium_error": cr.equilibrium_error,
        "moment_equilibrium_error": cr.moment_equilibrium_error,
        "strain_energy": cr.strain_energy,
        "points": {name: {"at": p["at"], "displacement": p["displacement"], "von_mises": p["von_mises"],
                          "stress": dict(zip(COMPONENTS, p["stress"])), "principal": p["principal"]}
                   for name, p in cr.points.items()},
        "lines": line_files,
    }


def _sha256(path) -> str | None:
    import hashlib

    try:
        h = hashlib.sha256()
        with open(path, "rb") as f:
            for chunk in iter(lambda: f.read(1 << 20), b""):
                h.update(chunk)
        return h.hexdigest()
    except OSError:
        return None


def summary_extras(res: Result) -> dict:
    """Keys added for checks and reports: ``checks``, ``supports`` (region area, reaction),
    ``inputs`` (files and their sha256), ``peak_away_from_supports_and_loads``."""
    from .fem.surface import face_areas
    from .post import checks

    case, mesh = res.case, res.mesh
    supports = []
    for i, s in enumerate(case.supports, 1):
        faces = mesh.surface_faces(res.region_ids[s.region])
        supports.append({"label": f"support[{i}] on {s.region}", "region": s.region, "fix": s.fix,
                         "value": s.value, "area": float(face_areas(mesh.points, faces).sum()),
                         "reaction": res.reactions[s.region]["force"]})
    inputs = {}
    if case.source is not None:
        inputs["case_file"] = {"path": str(case.source), "sha256": _sha256(case.source)}
    inputs["geometry_file"] = {"path": str(case.geometry.file), "sha256": _sha256(case.geometry.file)}
    if case.reference is not None:
        for rs in case.reference.sets:
            inputs[rs.key] = {"path": str(rs.file), "sha256": _sha256(rs.file)}
    found = checks.run_checks(res)
    m = case.material
    return {
        "run_at": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC"),
        "material": {"E": m.E, "nu": m.nu, "density": m.density, "yield_strength": m.yield_strength},
        "checks": checks.as_dict(found),
        "checks_worst": checks.worst(found),
        "supports": supports,
        "inputs": inputs,
        "peak_away_from_supports_and_loads": checks.peak_away_from_regions(res),
    }


def linearized_file(line_name: str) -> str:
    """Name of a line's companion file with its stress linearization."""
    return f"line-{safe_name(line_name)}-linearized.json"


def linearized_summary(res: Result, line_files: dict[str, str] | None = None) -> dict:
    """``{line: {"file", "s_start", "s_end", ..., membrane/bending/peak}}`` for summary.json."""
    from .post.linearize import as_dict

    out = {}
    for name, (lin, info) in res.linearized.items():
        entry = dict(info)
        if line_files is not None and name in line_files:
            entry["file"] = linearized_file(name)
        if lin is not None:
            entry.update(as_dict(lin))
        out[name] = entry
    return out


LINE_HEADER = "s,x,y,z,ux,uy,uz,sxx,syy,szz,sxy,syz,sxz,von_mises"


def line_csv(line) -> str:
    """CSV text of one sampled line (NaN samples outside the part written as empty fields)."""
    data = np.column_stack([line.s, line.xyz, line.u, line.stress, line.von_mises])
    rows = [LINE_HEADER]
    for row in data:
        rows.append(",".join("" if not math.isfinite(v) else repr(float(v)) for v in row))
    return "\n".join(rows) + "\n"


def safe_name(name: str) -> str:
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in name)


def write_results(res: Result, out_dir: Path, extra: dict | None = None) -> dict:
    """Write result.vtu, the line CSVs and summary.json (last) into ``out_dir``; return the summary.

    ``extra`` keys (for example ``comparison``) are added to the summary.
    """
    from .mesh import write_vtu

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    line_files = {}
    case_files: dict[str, dict[str, str]] = {}
    if res.load_cases:
        # One CSV per line and load case (or combination); the top level lists the first case's.
        for cname, cr in res.load_cases.items():
            case_files[cname] = {}
            for name, line in cr.lines.items():
                fname = f"line-{safe_name(name)}-{safe_name(cname)}.csv"
                write_text(out_dir / fname, line_csv(line))
                case_files[cname][name] = fname
        line_files = dict(case_files[res.load_case])
    else:
        for name, line in res.lines.items():
            fname = f"line-{safe_name(name)}.csv"
            write_text(out_dir / fname, line_csv(line))
            line_files[name] = fname
    for name, entry in linearized_summary(res, line_files).items():
        companion = {"line": name, "line_file": line_files[name], "units": {
            "length": res.case.units.labels["length"], "stress": res.case.units.labels["stress"]},
            "method": "membrane (mean), bending (linear part) and peak (the rest) of each stress component "
                      "along the line, ASME BPVC VIII-2 Part 5 stress linearization", "caution": CAUTION}
        companion.update({k: v for k, v in entry.items() if k != "file"})
        write_text(out_dir / linearized_file(name), json.dumps(_clean(companion), indent=2) + "\n")
    point_data = {"displacement": res.u, "von_mises": res.von_mises, "stress": res.stress,
                  "principal": res.principal}
    for i, c in enumerate(COMPONENTS):
        point_data[f"stress_{c}"] = res.stress[:, i]
    if res.temperature is not None:
        point_data["temperature_change"] = res.temperature
    for cname, cr in res.load_cases.items():
        sfx = f"-{safe_name(cname)}"
        point_data["displacement" + sfx] = cr.u
        point_data["von_mises" + sfx] = cr.von_mises
        point_data["stress" + sfx] = cr.stress
        point_data["principal" + sfx] = cr.principal
        if cr.temperature is not None:
            point_data["temperature_change" + sfx] = cr.temperature
    if res.envelope is not None:
        point_data["von_mises-envelope"] = res.envelope["von_mises"]
        point_data["envelope_governing"] = res.envelope["governing"].astype(np.int32)
    with atomic_path(out_dir / "result.vtu") as tmp:
        write_vtu(tmp, res.mesh, point_data, {"quality": res.quality})
    doc = summary(res, line_files, case_files)
    if extra:
        doc.update(_clean(extra))
    write_text(out_dir / "summary.json", json.dumps(doc, indent=2) + "\n")
    return doc
