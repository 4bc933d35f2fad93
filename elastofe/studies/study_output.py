"""Writing a convergence study: study.json, study.csv and one plot per assessed quantity.

The files are written as one set and shown together (see :func:`write_study`).
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from ..files import json_ready, safe_name, sha256_text, staged_outputs
from ..notice import CAUTION

CSV_HEADER = ("quantity,kind,unit,status,convergence,observed_order,extrapolated,finest,gci_fine_percent,"
              "band_low,band_high,asymptotic_ratio,in_asymptotic_range,singular,order_used,safety_factor,"
              "formal_order,noise_tolerance,growth_exponent,location,values_coarse_to_fine,advice")


def _num(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, (int, float, np.floating)):
        return repr(float(v)) if math.isfinite(float(v)) else ""
    return str(v)


def _quote(s: str) -> str:
    return '"' + s.replace('"', '""') + '"'


def study_csv(study: dict) -> str:
    """One row per tracked quantity, then one per line sample (von Mises)."""
    rows = [CSV_HEADER]
    for name, q in study["quantities"].items():
        vals = ";".join(_num(v) for v in q["values"])
        band = q.get("band") or [None, None]
        gci = q.get("gci_fine")
        rows.append(",".join([
            name, q["kind"], q["unit"], q["status"], q.get("convergence", "") or "",
            _num(q.get("observed_order")), _num(q.get("extrapolated")), _num(q["values"][-1]),
            _num(None if gci is None else 100 * gci), _num(band[0]), _num(band[1]),
            _num(q.get("asymptotic_ratio")), _num(q.get("in_asymptotic_range")), _num(q.get("singular")),
            _num(q.get("order_used")), _num(q.get("safety_factor")), _num(q.get("formal_order")),
            _num(q.get("noise_tolerance")), _num(q.get("growth_exponent")),
            _quote(" ".join(_num(c) for c in q["location"]) if q.get("location") is not None else ""),
            _quote(vals), _quote(q.get("advice", ""))]))
    unit = study["units"]["stress"]
    for lname, p in study["lines"].items():
        vm = np.asarray(p["von_mises"], dtype=float)
        for j, s in enumerate(p["s"]):
            gci = p["gci_fine"][j]
            rows.append(",".join([
                f"lines.{lname}.von_mises[s={float(s):.6g}]", "stress", unit,
                "assessed" if p["convergence"][j] else "not assessed", p["convergence"][j] or "",
                _num(p["observed_order"][j]), _num(p["extrapolated"][j]), _num(vm[-1, j]),
                _num(None if not math.isfinite(gci) else 100 * gci), "", "", "", "", "", "", "", "", "", "", '""',
                _quote(";".join(_num(v) for v in vm[:, j])), '""']))
    return "\n".join(rows) + "\n"


def plot_name(prefix: str, name: str, suffix: str = ".png") -> str:
    """A plot's file name made from a quantity name, shortened (with a hash, so names stay distinct)
    where the whole would be too long for a file system (255 bytes)."""
    safe = safe_name(name)
    if len((prefix + safe + suffix).encode("utf-8")) <= 200:
        return prefix + safe + suffix
    return f"{prefix}{safe.encode('utf-8')[:120].decode('utf-8', 'ignore')}-{sha256_text(name)[:12]}{suffix}"


def write_study(study: dict, out_dir: Path, plots: bool = True) -> dict:
    """Write plots (``plots/``), study.csv and study.json into ``out_dir`` as one set; return the document.

    The files are written into a fresh run folder and shown in ``out_dir`` by one atomic switch
    (:class:`elastofe.files.StagedOutputs`); the caller holds the folder's lock.
    """
    out_dir = Path(out_dir)
    doc = dict(study)
    doc["caution"] = CAUTION + (" A convergence study measures the discretisation error of this model only, "
                                "not the error of its idealisation (supports, loads, material).")
    files = {}
    with staged_outputs(out_dir, "--out") as st:
        if plots:
            from .plots import line_plot, quantity_plot

            for name, q in study["quantities"].items():
                if q["status"] != "assessed" or str(q.get("convergence", "")).startswith("fixed by"):
                    continue
                fname = "plots/" + plot_name("conv-", name)
                quantity_plot(name, q, study, st.path(fname))
                files[name] = fname
            for lname, p in study["lines"].items():
                fname = "plots/" + plot_name("line-", lname, "-von_mises.png")
                line_plot(lname, p, study, st.path(fname))
                files[f"lines.{lname}"] = fname
        doc["plots"] = files
        st.write_text("study.csv", study_csv(study))
        clean = json_ready(doc)
        st.write_text("study.json", json.dumps(clean, indent=2) + "\n")
        # Earlier study files of the same names are replaced; nothing else in the folder is touched.
        st.commit(record={"kind": "convergence study", "case_file": study.get("case_file")}, replace=st.names())
    return clean


def _g(v, fmt: str = ".6g") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return format(float(v), fmt)


def study_text(doc: dict) -> list[str]:
    """The study's summary as terminal lines (not wrapped): levels with their effective refinement ratios,
    warnings, one line per assessed quantity (verdict, finest value, band, orders, Fs) and the singular
    quantities with their locations. ``doc`` is the study document (as written to study.json)."""
    L = (doc.get("units") or {}).get("length", "")
    out = [f"mesh-convergence study: {doc.get('title') or ''}",
           f"  level  factor  size [{L}]        DOF   h [{L}]   ratio     time"]
    for lv in doc["levels"]:
        rr = lv.get("ratio_from_previous")
        out.append(f"  {lv['level']:>5}  {lv['factor']:>6.3g}  {lv['size']:>9.4g}  {lv['dofs']:>9,}  "
                   f"{lv['h']:>7.3g}  {_g(rr, '.3g'):>6}  {lv['wall_s']:>6.1f} s")
    ref = doc.get("refinement") or {}
    if ref:
        out.append(f"  nominal ratio {ref.get('nominal')}, effective "
                   + ", ".join(_g(x, ".3g") for x in ref.get("effective", [])))
    for w in doc.get("warnings") or []:
        out.append(f"  WARNING: {w}")
    out.append("")
    out.append("  each quantity [unit]: verdict; finest value, band of the converged value (GCI), order observed /"
               " used, safety factor Fs")
    for name, q in doc["quantities"].items():
        if q["status"] in ("missing", "not refined"):
            # Not judged: say so, rather than leave out a quantity the reader may look for.
            unit = q.get("unit") or ""
            out.append(f"  {name}" + (f" [{unit}]" if unit else "") + f": cannot judge ({q['status']}: "
                       f"{q.get('advice') or 'too few levels'})")
            continue
        if q["status"] != "assessed":
            continue
        unit = q.get("unit") or ""
        u = f" {unit}" if unit else ""
        band = q.get("band")
        btxt = f"{_g(band[0])} .. {_g(band[1])}{u}" if band and None not in band else "no band"
        verdict = "SINGULAR" if q.get("singular") else str(q.get("convergence", ""))
        if q.get("asymptotic") is False and not q.get("singular") and verdict in ("monotonic", "oscillatory"):
            verdict += ", not asymptotic"
        elif q.get("asymptotic") is True:
            verdict += ", asymptotic"
        out.append(f"  {name}" + (f" [{unit}]" if unit else "") + f": {verdict}")
        details = f"finest {_g(q['values'][-1])}{u}, {btxt}"
        if q.get("order_used") is not None or q.get("observed_order") is not None:
            details += f", order {_g(q.get('observed_order'), '.2f')} / {_g(q.get('order_used'), '.2g')}"
        if q.get("safety_factor") is not None:
            details += f", Fs {_g(q.get('safety_factor'), '.3g')}"
        out.append(f"      {details}")
    if doc.get("singular"):
        out.append("")
        out.append("  singular (grow under refinement; read stress a little away, or linearize across the section):")
        for name in doc["singular"]:
            q = doc["quantities"][name]
            loc = q.get("location")
            where = f" at ({', '.join(_g(c, '.4g') for c in loc)}) {L}".rstrip() if loc is not None else ""
            out.append(f"    {name}{where}: {q.get('cause') or q.get('advice', '')}")
    return out
