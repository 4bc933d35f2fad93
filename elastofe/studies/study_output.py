"""Writing a convergence study: study.json, study.csv and one plot per assessed quantity.

Files are written atomically (temporary name, then renamed), study.json last.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from ..files import atomic_path, json_ready, safe_name, write_text
from ..notice import CAUTION

CSV_HEADER = ("quantity,kind,unit,status,convergence,observed_order,extrapolated,finest,gci_fine_percent,"
              "band_low,band_high,asymptotic_ratio,in_asymptotic_range,singular,values_coarse_to_fine,advice")


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
                _num(None if not math.isfinite(gci) else 100 * gci), "", "", "", "", "",
                _quote(";".join(_num(v) for v in vm[:, j])), '""']))
    return "\n".join(rows) + "\n"


def write_study(study: dict, out_dir: Path, plots: bool = True) -> dict:
    """Write plots (``plots/``), study.csv and study.json (last) into ``out_dir``; return the document."""
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    doc = dict(study)
    doc["caution"] = CAUTION + (" A convergence study measures the discretisation error of this model only, "
                                "not the error of its idealisation (supports, loads, material).")
    files = {}
    if plots:
        from .plots import line_plot, quantity_plot

        pdir = out_dir / "plots"
        pdir.mkdir(exist_ok=True)
        for name, q in study["quantities"].items():
            if q["status"] != "assessed":
                continue
            fname = f"plots/conv-{safe_name(name)}.png"
            with atomic_path(out_dir / fname) as tmp:
                quantity_plot(name, q, study, tmp)
            files[name] = fname
        for lname, p in study["lines"].items():
            fname = f"plots/line-{safe_name(lname)}-von_mises.png"
            with atomic_path(out_dir / fname) as tmp:
                line_plot(lname, p, study, tmp)
            files[f"lines.{lname}"] = fname
    doc["plots"] = files
    write_text(out_dir / "study.csv", study_csv(study))
    clean = json_ready(doc)
    write_text(out_dir / "study.json", json.dumps(clean, indent=2) + "\n")
    return clean
