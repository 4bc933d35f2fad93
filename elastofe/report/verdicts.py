"""The report's judgements, from an output folder's documents only: whether a study or a comparison
belongs to this run (staleness), the verdict of each beam estimate, and the conclusion's rows.

Each function takes the plain documents (summary.json, the case record, study.json, comparison.json)
and returns plain dicts; the HTML is written by :mod:`.document`.
"""
from __future__ import annotations

import math
from pathlib import Path
from typing import Optional

from ..files import sha256_file

#: A beam-theory estimate agrees when the FE value is within this share of it (common practice: beam
#: theory on a solid part is good to a few percent away from supports, loads and section changes).
ESTIMATE_AGREE = 0.10
#: Saint-Venant's principle (common practice): beam theory holds about one section depth or more
#: from a support or a load; nearer, local deformation that the estimate ignores dominates.
SAINT_VENANT_DEPTHS = 1.0


def identity(summary: dict, record: Optional[dict]) -> dict:
    """The hashes of the case file and geometry this run was made from: the case record's, else the
    summary's inputs."""
    rec = record or {}
    inputs = summary.get("inputs") or {}
    return {"case_sha256": rec.get("case_sha256") or (inputs.get("case_file") or {}).get("sha256"),
            "geometry_sha256": rec.get("geometry_sha256") or (inputs.get("geometry_file") or {}).get("sha256"),
            "run_id": rec.get("run_id") or summary.get("run_id")}


def study_state(study: dict, ident: dict) -> tuple[bool, str]:
    """Whether a study was made from the same case file contents and geometry as this run, and why not."""
    cs, gs = study.get("case_sha256"), study.get("geometry_sha256")
    if not cs or not gs:
        return False, ("the study records no hashes of its case file and geometry (made by an earlier version), "
                       "so it cannot be shown to belong to this run")
    if not ident.get("case_sha256") or not ident.get("geometry_sha256"):
        return False, "this run records no hashes of its case file and geometry"
    if cs != ident["case_sha256"]:
        return False, (f"it was made from other case file contents (sha256 {cs[:12]}… against this run's "
                       f"{ident['case_sha256'][:12]}…): the case was edited since")
    if gs != ident["geometry_sha256"]:
        return False, (f"it was made from another geometry (sha256 {gs[:12]}… against this run's "
                       f"{ident['geometry_sha256'][:12]}…)")
    return True, "made from the same case file contents and geometry as this run"


def comparison_state(summary: dict, out_dir: Path) -> tuple[Optional[bool], str]:
    """Whether comparison.json in the folder was written by this run. None when there is none."""
    f = Path(out_dir) / "comparison.json"
    if not f.is_file():
        return None, "no comparison.json in the folder"
    entry = summary.get("comparison")
    if not isinstance(entry, dict):
        return False, ("this run made no comparison (its case has no [reference]); "
                       "comparison.json is from an earlier run")
    want = entry.get("sha256")
    if not want:
        return False, "this run's summary records no hash of comparison.json, so it cannot be tied to this run"
    if sha256_file(f) != want:
        return False, "comparison.json is not the file this run wrote (another run replaced or edited it)"
    return True, "written by this run"


def study_quantity_of_governing(summary: dict, study: dict) -> Optional[tuple[str, dict]]:
    """The study's quantity that follows the governing peak (by its basis and load case), if tracked."""
    gov = summary.get("governing_peak") or {}
    qs = study.get("quantities") or {}
    base = "peak_away_from_supports_and_loads" if gov.get("basis") == "away" else "max_von_mises"
    case = gov.get("load_case")
    names = [base] if case is None or case == summary.get("load_case") else [f"load_cases.{case}.{base}"]
    if gov.get("material") and gov.get("by_material"):
        # Several materials: the governing peak is its material's (by utilisation), which the study
        # tracks on its own; the part's overall or away peak may lie in another material.
        names = [f"governing_peak.by_material.{gov['material']}"]
    if case is not None:
        names.append(f"envelope.{base}")
    for n in names:
        if n in qs:
            return n, qs[n]
    return None


def study_quantity_of_overall(summary: dict, study: dict) -> Optional[tuple[str, dict]]:
    q = (study.get("quantities") or {}).get("max_von_mises")
    return ("max_von_mises", q) if q else None


# ----------------------------------------------------------------------------- beam estimates
def _depth_at(e: dict, station: float) -> Optional[float]:
    """A section depth near ``station``: from a line across the section, else twice a point's fibre."""
    ds = []
    for ln in (e.get("lines") or {}).values():
        if isinstance(ln, dict) and ln.get("extremes_at_y"):
            y = ln["extremes_at_y"]
            ds.append(abs(float(y[1]) - float(y[0])))
    for p in (e.get("points") or {}).values():
        if isinstance(p, dict) and p.get("fibre") is not None:
            ds.append(2 * abs(float(p["fibre"])))
    return max(ds) if ds else None


def estimate_rows(e: dict, length_unit: str = "") -> list[dict]:
    """One row per compared value of a ``[[beam]]`` estimate: ``what``, ``estimate``, ``fe``,
    ``relative`` (FE/estimate - 1), ``status`` (pass: agrees; explained: outside, with the reason;
    warn: outside and not explained; skip: cannot judge) and ``why`` (the explanation)."""
    u = f" {length_unit}" if length_unit else ""
    rows = []
    axis = e.get("axis") or {}
    a = axis.get("length_to_load")
    depth = _depth_at(e, 0.0)
    notes = e.get("notes") or []
    other_loads = any("other loads" in n for n in notes)

    def judge(rel, station, kind, bounds=None, fe=None):
        if rel is None or not math.isfinite(rel):
            return "skip", "cannot judge: no FE value or the estimate is zero"
        if abs(rel) <= ESTIMATE_AGREE:
            return "pass", f"within {ESTIMATE_AGREE:.0%} of beam theory"
        if bounds is not None and fe is not None and min(bounds) <= fe <= max(bounds):
            return "explained", ("outside the estimate but inside its bounds (the sections at the ends of the span "
                            "taken as constant): the taper makes the single estimate uncertain")
        if station is not None and depth is not None:
            near_end = station <= SAINT_VENANT_DEPTHS * depth
            near_load = a is not None and abs(a - station) <= SAINT_VENANT_DEPTHS * depth
            if near_end or near_load:
                where = "held end" if near_end else "load point"
                dist = station if near_end else abs(a - station)
                extra = (" A deflection this close to the held end is small and dominated by the local strain at "
                         "the support, which beam theory leaves out." if kind == "deflection" else "")
                return "explained", (f"outside {ESTIMATE_AGREE:.0%}, explained: the station is {dist:.3g}{u} from the "
                                f"{where}, within about one section depth ({depth:.3g}{u}), where beam theory does not "
                                f"hold (Saint-Venant's principle).{extra}")
        why = f"differs by {abs(rel):.1%} with no explanation found: check the supports, loads and the beam's input"
        if other_loads:
            why += " (other loads of the case are not in the estimate)"
        return "warn", why

    d = e.get("load_point_deflection") or {}
    if isinstance(d, dict) and d.get("estimate") is not None:
        rel = _rel(d.get("fe"), d.get("estimate"))
        bounds = (d.get("stiff_bound"), d.get("soft_bound")) if d.get("stiff_bound") is not None else None
        st, why = judge(rel, d.get("station"), "deflection", bounds, d.get("fe"))
        rows.append({"what": "deflection at the load point", "kind": "length", "estimate": d.get("estimate"),
                     "fe": d.get("fe"), "relative": rel, "status": st, "why": why,
                     "bounds": bounds, "fe_source": d.get("fe_source")})
    for pname, p in (e.get("points") or {}).items():
        if not isinstance(p, dict):
            continue
        for kind, label, unit in (("deflection", "deflection", "length"),
                                  ("bending_stress", "bending stress", "stress")):
            v = p.get(kind)
            if isinstance(v, dict) and v.get("estimate") is not None:
                rel = _rel(v.get("fe"), v.get("estimate"))
                st, why = judge(rel, p.get("station"), kind)
                rows.append({"what": f"{label} at point '{pname}' (station {p.get('station', 0):.4g}{u})", "kind": unit,
                             "estimate": v.get("estimate"), "fe": v.get("fe"), "relative": rel, "status": st,
                             "why": why})
    for lname, ln in (e.get("lines") or {}).items():
        if isinstance(ln, dict) and ln.get("estimate_extremes"):
            ee, ff = ln["estimate_extremes"], ln.get("fe_extremes") or [None, None]
            rel = ln.get("fe_departure_from_estimate")
            st, why = judge(rel, ln.get("station"), "stress")
            rows.append({"what": f"extreme-fibre bending stress on line '{lname}' "
                                 f"(station {ln.get('station', 0):.4g}{u})",
                         "kind": "stress", "estimate": ee, "fe": ff, "relative": rel, "status": st, "why": why,
                         "linear": ln.get("fe_departure_from_linear")})
    return rows


def _rel(fe, est) -> Optional[float]:
    try:
        fe, est = float(fe), float(est)
    except (TypeError, ValueError):
        return None
    if est == 0 or not math.isfinite(fe) or not math.isfinite(est):
        return None
    return fe / est - 1.0


def worst(statuses: list[str]) -> str:
    order = ["fail", "warn", "skip", "explained", "pass"]
    for s in order:
        if s in statuses:
            return s
    return "skip"


def overall(statuses: list[str]) -> str:
    """The worst status, where an explained difference counts as agreement."""
    w = worst(statuses)
    return "pass" if w == "explained" else w
