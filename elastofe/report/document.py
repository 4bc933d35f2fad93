"""The verification report: one self-contained HTML file (and optionally a PDF of it) built from a
run's output folder.

Inputs are the files a run writes (``summary.json``, ``result.vtu``, ``boundary.vtu``, the line
CSVs, the case record, and when present ``comparison.json`` with its plots and ``study.json`` with
its plots); the report never reaches into the solver. A study or comparison is shown only when it
belongs to this run (the case record's hashes, the comparison file's hash in the summary);
otherwise the report says it is stale and leaves it out. Every picture is embedded as a base64
PNG, the style sheet and the small 3D viewer are inline and nothing refers to the network, so the
file reads the same offline and when mailed on.

Key numbers carry ``data-key`` (a dotted path into summary.json) and ``data-value`` (the full
value) attributes, so a test or a reviewer's script can match them against the summary; a number
shown in other units carries ``data-factor`` (shown = value x factor), and a number shown as 0
because it is round-off carries ``data-noise`` (the tolerance it is below).
"""
from __future__ import annotations

import base64
import datetime as _dt
import json
import math
import platform
from pathlib import Path
from typing import Callable, Optional

from ..files import amended, current_dir, safe_name, write_text
from ..plotting import DIRECTION_COLORS, LOAD_COLOR, OVER_RANGE, STATUS_COLORS
from ..version import __version__
from . import verdicts as V
from .numbers import (
    DENSITY_CASE_UNITS,
    DENSITY_SHOWN,
    NOISE,
    coordinates,
    esc,
    fmt,
    is_noise,
    noise_note,
    percent,
    prose,
    qty,
    vec,
)

CSS = """
:root { --ink:#1f2327; --mute:#5d646b; --rule:#d9dcd3; --paper:#ffffff; --band:#f3f4ee; --accent:#31688e; }
* { box-sizing: border-box; }
body { margin:0; background:#e9ebe4; color:var(--ink);
  font:15px/1.45 "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
main { max-width:1040px; margin:0 auto; background:var(--paper); padding:28px 40px 48px; }
header.top { border-bottom:4px solid var(--accent); padding-bottom:12px; margin-bottom:14px; }
header.top .kicker { text-transform:uppercase; letter-spacing:.12em; font-size:12px; color:var(--mute); }
h1 { font-size:26px; margin:4px 0 6px; }
h2 { font-size:19px; margin:34px 0 10px; padding:4px 0 4px 10px; border-left:6px solid var(--accent);
  background:var(--band); break-after:avoid; }
h3 { font-size:15px; margin:20px 0 6px; color:var(--accent); break-after:avoid; }
p.meta, .meta { color:var(--mute); margin:2px 0; font-size:13px; }
.caution { border:2px solid #d98c00; background:#fff7e6; padding:8px 14px; margin:14px 0; font-size:13.5px; }
.caution b { color:#8a5800; }
.headline { display:flex; flex-wrap:wrap; gap:10px; margin:12px 0 6px; }
.headline div { background:var(--band); padding:8px 12px; flex:1 1 200px; }
.headline .k { font-size:11.5px; color:var(--mute); text-transform:uppercase; letter-spacing:.06em; }
.headline .v { font-size:19px; font-weight:700; }
.headline .s { font-size:12.5px; color:var(--mute); }
.flag { color:#8a1c1c; font-weight:700; }
table { border-collapse:collapse; margin:6px 0 12px; font-size:13.5px; width:100%; table-layout:auto; }
th, td { border-bottom:1px solid var(--rule); padding:4px 8px 4px 0; text-align:left; vertical-align:top;
         overflow-wrap:anywhere; word-break:normal; }
th { color:var(--mute); font-weight:600; font-size:12.5px; }
td.num { text-align:right; font-variant-numeric:tabular-nums; overflow-wrap:normal; }
table.kv td.num { text-align:left; }
td.nowrap, th.nowrap { white-space:nowrap; }
td.why { font-size:12.5px; }
table.kv th { width:38%; }
.badge { display:inline-block; padding:1px 8px; border-radius:9px; color:#fff; font-size:11.5px; font-weight:700;
         text-transform:uppercase; white-space:nowrap; }
figure { margin:12px 0 18px; break-inside:avoid; }
figure img { max-width:100%; border:1px solid var(--rule); }
.grid { display:flex; flex-wrap:wrap; gap:0 2%; }
.grid figure { width:49%; }
figcaption { font-size:12.5px; color:var(--mute); margin-top:4px; }
nav.toc { background:var(--band); padding:8px 14px; margin:12px 0; font-size:13.5px; }
nav.toc ol { margin:4px 0 0 18px; padding:0; columns:2; }
.key { display:inline-block; width:12px; height:12px; border-radius:2px; vertical-align:middle; margin:0 3px 0 8px; }
pre { background:var(--band); padding:10px; font-size:12px; overflow-x:auto; white-space:pre-wrap; }
code { font-size:12.5px; overflow-wrap:anywhere; }
ul.tight { margin:4px 0; padding-left:20px; }
footer { margin-top:40px; font-size:12px; color:var(--mute); border-top:1px solid var(--rule); padding-top:8px; }
#viewer canvas { width:100%; height:460px; border:1px solid var(--rule); background:#fff; cursor:grab; }
#viewer .controls { font-size:13px; margin:4px 0; }
@media print {
  body { background:#fff; font-size:12px; }
  main { max-width:none; padding:0; }
  #viewer { display:none; }
  a { color:inherit; text-decoration:none; }
  .grid figure { width:49%; }
}
@page { size:A4; margin:14mm 12mm; }
"""

#: What a linear-elastic second solve never checks (shown in the conclusion, always).
NOT_CHECKED = [
    "the idealisation itself: whether the supports, loads, material and geometry are the right ones for the "
    "part in service (the section “The model as applied” shows what was applied, for a person to judge)",
    "yielding beyond the first yield, fatigue, fracture, creep",
    "contact, large displacements and rotations, dynamic and impact effects",
    "joints (bolts, welds, bonds) and the requirements of any design code or standard",
]


def badge(status: str) -> str:
    color = STATUS_COLORS.get(status, {"agree": STATUS_COLORS["pass"], "disagree": STATUS_COLORS["fail"]}
                              .get(status, STATUS_COLORS["skip"]))
    text = {"skip": "cannot judge", "stale": "stale", "none": "not run"}.get(status, status)
    if status == "explained":
        color = "#4f7f2a"
    return f'<span class="badge" style="background:{color}">{esc(text)}</span>'


def tag(v, key: Optional[str], text: str, factor: float = 1.0, noise: Optional[float] = None, el: str = "span",
        cls: str = "") -> str:
    """``text`` in an element tagged with its summary key (when ``key`` and a number are given)."""
    attr = f' class="{cls}"' if cls else ""
    if key is not None and isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(float(v)):
        attr += f' data-key="{esc(key)}" data-value="{esc(repr(float(v)))}"'
        if factor != 1.0:
            attr += f' data-factor="{esc(repr(factor))}"'
        if noise is not None:
            attr += f' data-noise="{esc(repr(noise))}"'
    return f"<{el}{attr}>{text}</{el}>"


def num(v, key: Optional[str] = None, unit: str = "", figures: int = 4, ref=None, factor: float = 1.0) -> str:
    """A table cell with a number and its unit, tagged with its summary key when given."""
    # A count (int) stays an int, shown whole: only measured values are cut to significant figures.
    shown = v * factor if isinstance(v, (int, float)) and not isinstance(v, bool) and factor != 1.0 else v
    noise = NOISE * ref if ref is not None and is_noise(v, ref) else None
    text = qty(shown, unit, figures, ref=None if ref is None else ref * abs(factor))
    return tag(v, key, text, factor, noise, "td", "num")


def image(path: Path, alt: str, caption: str = "") -> str:
    """An embedded PNG figure (base64 data URI)."""
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    cap = f"<figcaption>{caption}</figcaption>" if caption else ""
    return f'<figure><img alt="{esc(alt)}" src="data:image/png;base64,{data}">{cap}</figure>'


def table(head: list[str], rows: list[str], cls: str = "") -> str:
    h = "".join(f"<th>{esc(c)}</th>" for c in head)
    c = f' class="{cls}"' if cls else ""
    thead = f"<thead><tr>{h}</tr></thead>" if any(head) else ""
    return f"<table{c}>{thead}<tbody>{''.join(rows)}</tbody></table>"


def _versions() -> dict:
    from importlib import metadata

    out = {"python": platform.python_version(), "elastofe": __version__}
    for pkg in ("numpy", "scipy", "gmsh", "meshio", "pyvista", "vtk", "matplotlib", "pint", "pypardiso"):
        try:
            out[pkg] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            out[pkg] = "not installed"
    out["platform"] = platform.platform()
    return out


def _load(path: Path) -> Optional[dict]:
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return doc if isinstance(doc, dict) else None


def _norm(v) -> float:
    try:
        return math.sqrt(sum(float(c) ** 2 for c in v))
    except (TypeError, ValueError):
        return float("nan")


def _units(s: dict) -> tuple[str, str, str, str]:
    u = s["units"]
    return u["length"], u["force"], u["stress"], u.get("moment", "")


def _load_ref(s: dict) -> float:
    """The size of the loading: the largest of the total applied force and any single load's force."""
    vals = ([_norm(s.get("applied_force") or [0, 0, 0])]
            + [_norm(ld.get("force") or [0, 0, 0]) for ld in s.get("loads", [])])
    return max([v for v in vals if math.isfinite(v)] or [0.0])


HELD_WORDS = {"x": "x", "y": "y", "z": "z", "n": "normal to the surface", "r": "radial",
              "t": "tangential (about the axis)", "a": "axial"}


def geometry_unit_text(geo: dict, case_length: str) -> str:
    """What the geometry's numbers were read in and what they became, from summary.json's
    ``geometry``: "mm (stated in the file) → m, scale 0.001" (the scale is case length units per
    unit of the file's numbers)."""
    unit = geo.get("unit") or case_length
    origin = {"case": "geometry.unit of the case", "file": "stated in the file",
              "assumed": "stated nowhere: the case's length unit assumed"}.get(geo.get("unit_origin"), "")
    text = f"{unit} ({origin})" if origin else unit
    fu = geo.get("file_unit")
    if geo.get("unit_origin") == "case" and fu and fu != unit:
        text += f", the file states {fu}"
    return f"{text} → {geo.get('length_unit') or case_length}, scale {fmt(geo.get('scale', 1.0))}"


def held_text(sp: dict, force: str = "", length: str = "") -> str:
    """The held directions of a support (``sp``: summary.json ``supports`` entry); an elastic
    support's stiffness per area in ``force``/``length``³ of the case."""
    if sp.get("frame") == "elastic":
        unit = f"\u202f{force}/{length}³" if force and length else ""
        return (f"elastic: normal stiffness {fmt(sp.get('normal_stiffness'))}{unit}, tangential "
                f"{fmt(sp.get('tangential_stiffness'))}{unit} (per unit area)")
    fix = str(sp.get("fix") or "")
    words = [HELD_WORDS.get(c, c) for c in fix]
    keys = "".join(f"<span class='key' style='background:{DIRECTION_COLORS.get(c, '#666')}'></span>{esc(w)}"
                   for c, w in zip(fix, words))
    return keys or "–"


# ----------------------------------------------------------------------------- header and conclusion
def governing_text(s: dict, study: Optional[dict]) -> tuple[str, Optional[str]]:
    """The headline margin, and the singular flag of a study when it marks the governing peak singular."""
    _, _, S, _ = _units(s)
    flag = None
    if study is not None:
        found = V.study_quantity_of_governing(s, study)
        if found and found[1].get("singular"):
            flag = (f"the convergence study marks this peak singular ({esc(found[0])}: "
                    f"{esc(found[1].get('cause') or 'grows on every refinement')}); it is not a converged number")
    return S, flag


def sharp_edge_flag(s: dict) -> Optional[str]:
    """Why the governing peak is no converged number when the sharp_edge check finds it on or within one
    element of a re-entrant sharp edge (linear elasticity gives unbounded stress there), else None."""
    se = (s.get("checks") or {}).get("sharp_edge") or {}
    d = se.get("details") or {}
    if se.get("status") not in ("warn", "fail"):
        return None
    if d.get("governing_on_reentrant_edge"):
        where = "on"
    elif d.get("governing_next_to_reentrant_edge"):
        where = "within one element of"
    else:
        return None
    return (f"the governing peak lies {where} a re-entrant sharp edge, where the stress grows with refinement "
            "(check sharp_edge): it is not a converged number")


def section_header(s: dict, study: Optional[dict], generated: str, worst: str) -> str:
    L, F, S, _ = _units(s)
    g = s.get("governing_peak") or {}
    fy = g.get("yield_strength", (s.get("material") or {}).get("yield_strength"))
    _, flag = governing_text(s, study)
    flag = flag or sharp_edge_flag(s)
    basis = {"away": "away from supports and loads", "overall": "overall peak"}.get(g.get("basis"), "")
    if g.get("material") and g.get("by_material"):
        basis += f" in material <b>{esc(g['material'])}</b> (highest utilisation)"
    case = g.get("load_case")
    cells = []
    if g.get("value") is not None:
        where = f"{basis}" + (f"; load case or combination <b>{esc(case)}</b> governs" if case else "")
        cells.append(f"<div><div class='k'>governing von Mises</div><div class='v'>"
                     f"{tag(g['value'], 'governing_peak.value', qty(g['value'], S))}</div><div class='s'>{where}"
                     + (f"<br><span class='flag'>⚠ {flag}</span>" if flag else "") + "</div></div>")
    if g.get("utilisation") is not None:
        cells.append(f"<div><div class='k'>utilisation of yield</div><div class='v'>"
                     f"{tag(g['utilisation'], 'governing_peak.utilisation', percent(g['utilisation']), 100.0)}</div>"
                     f"<div class='s'>yield strength "
                     + (f"of {esc(g['material'])} {tag(fy, 'governing_peak.yield_strength', qty(fy, S))}"
                        if g.get("material") else tag(fy, 'material.yield_strength', qty(fy, S)))
                     + "; margin "
                     f"{tag(g.get('margin'), 'governing_peak.margin', percent(g.get('margin')), 100.0)} "
                     f"(yield / governing − 1)</div></div>")
    else:
        cells.append("<div><div class='k'>utilisation of yield</div><div class='v'>not judged</div>"
                     "<div class='s'>no yield strength in the case (material.yield_strength)</div></div>")
    md, md_key, md_case = largest_displacement(s)
    cells.append(f"<div><div class='k'>largest displacement</div><div class='v'>"
                 f"{tag(md['value'], md_key, qty(md['value'], L))}</div>"
                 f"<div class='s'>at {coordinates(md['at'], _size(s), L)}"
                 + (f"; load case or combination <b>{esc(md_case)}</b>" if md_case else "") + "</div></div>")
    cells.append(f"<div><div class='k'>plausibility checks</div><div class='v'>{badge(worst)}</div>"
                 f"<div class='s'>worst of {len(s.get('checks') or {})} checks</div></div>")
    return ("<header class='top'><div class='kicker'>elastofe · independent second solve · verification report</div>"
            f"<h1>{esc(s.get('title') or 'Untitled case')}</h1>"
            f"<p class='meta'>Case file <code>{esc(Path(str(s.get('case_file') or '–')).name)}</code> · run "
            f"{esc(s.get('run_at', '–'))} · report written {esc(generated)} · elastofe {esc(__version__)}</p>"
            f"<div class='headline'>{''.join(cells)}</div></header>")


def largest_displacement(s: dict) -> tuple[dict, str, Optional[str]]:
    """The largest displacement of the run, its summary key and the load case it occurs in.

    With load cases the top-level ``max_displacement`` is the first load case's; the largest of every
    load case and combination is the one a reader takes from a headline, so it is looked up there
    (the case is None for a run without load cases).
    """
    cases = {k: v for k, v in (s.get("load_cases") or {}).items()
             if (v.get("max_displacement") or {}).get("value") is not None}
    if not cases:
        return s["max_displacement"], "max_displacement.value", None
    name = max(cases, key=lambda k: float(cases[k]["max_displacement"]["value"]))
    return cases[name]["max_displacement"], f"load_cases.{name}.max_displacement.value", name


def first_case_label(s: dict) -> str:
    """`` (load case 'NAME')`` for rows that hold the first load case's values, '' without load cases."""
    return f" (load case '{esc(s['load_case'])}')" if s.get("load_cases") and s.get("load_case") else ""


def _size(s: dict) -> float:
    geo = s.get("geometry") or {}
    if geo.get("size"):
        return float(geo["size"])
    chk = ((s.get("checks") or {}).get("small_displacement") or {}).get("details") or {}
    return float(chk.get("part_size") or 100.0)


#: A governing peak's GCI above this share reads as a wide band in the conclusion (a warning):
#: common practice asks for a few per cent at most before a stress is relied on.
GCI_WIDE = 0.05


def conclusion_rows(s: dict, study: Optional[dict], study_why: str, comparison: Optional[dict],
                    comparison_why: str) -> list[dict]:
    """The conclusion's rows: ``name``, ``status``, ``figure`` (HTML), ``meaning`` (HTML), ``anchor``."""
    L, F, S, _ = _units(s)
    checks = s.get("checks") or {}
    rows = []
    eq = checks.get("equilibrium") or {}
    # The check's value is the worst over the load cases; the top-level error is the first case's.
    eq_v, eq_k = ((eq["value"], "checks.equilibrium.value") if eq.get("value") is not None
                  else (s.get("equilibrium_error"), "equilibrium_error"))
    rows.append({"name": "equilibrium", "anchor": "results", "status": eq.get("status", "skip"),
                 "figure": f"reactions balance the loads to {tag(eq_v, eq_k, fmt(eq_v, 2))} (relative)",
                 "meaning": "the solve is consistent: the supports carry exactly the applied loads; it says nothing "
                            "about whether those are the right supports and loads"})
    if study is not None:
        qs = study.get("quantities") or {}
        found = V.study_quantity_of_governing(s, study)
        if found is None and not (s.get("governing_peak") or {}).get("by_material"):
            # On several materials the part's overall peak may lie in a material that does not govern.
            found = V.study_quantity_of_overall(s, study)
        sing = list(study.get("singular") or [])
        if found:
            name, q = found
            verdict = q.get("convergence") or q.get("status")
            gci = q.get("gci_fine")
            fig = (f"governing peak ({esc(name)}): {esc(verdict)}"
                   + (f", GCI {percent(gci)}" if gci is not None else "")
                   + f"; {len(study.get('levels') or [])} levels")
            st = "warn" if q.get("singular") or verdict in ("divergent", "growing") else "pass"
            if st == "pass" and gci is not None and gci > GCI_WIDE:
                # A band this wide leaves the number the conclusion rests on uncertain by as much.
                fig += (f"; the band is wide (GCI above {percent(GCI_WIDE)}): refine further before relying "
                        "on this peak")
                st = "warn"
            if q.get("status") not in (None, "assessed"):
                # The study could not judge the governing peak (fewer than three levels report it, or
                # the mesh did not refine): no pass on it.
                fig = (f"governing peak ({esc(name)}): cannot judge ({esc(q.get('advice') or verdict)}); "
                       f"{len(study.get('levels') or [])} levels")
                st = "warn"
        else:
            # No quantity of the study follows the governing peak: the discretisation error of the
            # number the conclusion rests on is not known.
            fig = (f"{len(qs)} quantities, {len(study.get('levels') or [])} levels; none follows the governing "
                   "peak: cannot judge its discretisation error")
            st = "skip"
        if sing:
            fig += f"; singular: {esc(', '.join(sing))}"
            st = "warn" if st == "pass" else st
        rows.append({"name": "mesh convergence", "anchor": "convergence", "status": st, "figure": fig,
                     "meaning": "how far the mesh is from the exact solution of this model (GCI: the band within "
                                "which the converged value lies, Roache); singular quantities do not converge"})
    else:
        rows.append({"name": "mesh convergence", "anchor": "convergence",
                     "status": "stale" if study_why.startswith("stale") else "none",
                     "figure": esc(study_why), "meaning": "not judged: run <code>elastofe study CASE</code> to "
                                                         "measure the discretisation error"})
    est = s.get("estimates") or {}
    if est:
        rs = [r for e in est.values() if isinstance(e, dict) for r in V.estimate_rows(e, L)]
        st = V.overall([r["status"] for r in rs]) if rs else "skip"
        n_ok = sum(r["status"] == "pass" for r in rs)
        n_ex = sum(r["status"] == "explained" for r in rs)
        lp = [r for r in rs if r["what"] == "deflection at the load point"]
        fig = (f"{n_ok} of {len(rs)} values within {V.ESTIMATE_AGREE:.0%}"
               + (f", {n_ex} outside but explained" if n_ex else ""))
        if lp and lp[0]["relative"] is not None:
            fig += f"; load-point deflection differs by {percent(lp[0]['relative'])}"
        rows.append({"name": "beam-theory estimate", "anchor": "estimates", "status": st, "figure": fig,
                     "meaning": "an independent hand calculation of the same load path agrees (or each difference "
                                "has a stated reason)"})
    else:
        rows.append({"name": "beam-theory estimate", "anchor": None, "status": "none",
                     "figure": "no [[beam]] in the case", "meaning": "not judged"})
    if comparison is not None:
        within = comparison.get("within_tolerance")
        compared = comparison.get("compared")
        rows.append({"name": "comparison with the reference", "anchor": "comparison",
                     "status": {"agree": "pass", "disagree": "fail"}.get(comparison.get("verdict"), "warn"),
                     "figure": (f"{tag(within, 'comparison.within_tolerance', fmt(within))} of "
                                f"{tag(compared, 'comparison.compared', fmt(compared))} values within tolerance"),
                     "meaning": f"against {esc(comparison.get('label') or 'the reference results')}"})
    else:
        rows.append({"name": "comparison with the reference", "anchor": None,
                     "status": "stale" if comparison_why.startswith("stale") else "none",
                     "figure": esc(comparison_why), "meaning": "not judged"})
    counts = {}
    for c in checks.values():
        counts[c.get("status")] = counts.get(c.get("status"), 0) + 1
    bad = [k.replace("_", " ") for k, c in checks.items() if c.get("status") in ("warn", "fail")]
    rows.append({"name": "plausibility checks", "anchor": "checks", "status": s.get("checks_worst") or "pass",
                 "figure": ", ".join(f"{n} {k if k != 'skip' else 'cannot judge'}" for k, n in sorted(counts.items()))
                           + (f"; look at: {esc(', '.join(bad))}" if bad else ""),
                 "meaning": "rules of thumb on the result (units, displacements, peaks, mesh quality)"})
    yc = checks.get("yield") or {}
    g = s.get("governing_peak") or {}
    _, flag = governing_text(s, study)
    flag = flag or sharp_edge_flag(s)
    if g.get("utilisation") is not None:
        fig = (f"governing von Mises {qty(g['value'], S)} is {percent(g['utilisation'])} of yield "
               f"(margin {percent(g.get('margin'))})" + (f" in '{esc(g['load_case'])}'" if g.get("load_case") else ""))
        if flag:
            fig += f"; <span class='flag'>{flag}</span>"
        if yc.get("status") in ("warn", "fail") and (g.get("utilisation") or 0.0) < 1.0 and yc.get("why"):
            # The governing figure is below yield, so it does not say why the check warns (a peak next to
            # a support, possibly in another load case, above yield): give the check's reason.
            fig += f"; {esc(yc['why'])}"
        rows.append({"name": "yield margin", "anchor": "results",
                     # A singular peak makes a pass a warning; a failed yield check stays failed (the row
                     # must agree with summary.json's checks and the exit code).
                     "status": yc.get("status", "pass") if not flag else V.worst([yc.get("status", "pass"), "warn"]),
                     "figure": fig, "meaning": prose(g.get("why", ""))})
    else:
        rows.append({"name": "yield margin", "anchor": "results", "status": "skip",
                     "figure": "no yield strength given", "meaning": "not judged"})
    return rows


def section_conclusion(rows: list[dict], s: dict, notes: list[str]) -> str:
    out = ["<h2 id='conclusion'>1. Conclusion</h2>"]
    trs = []
    for r in rows:
        name = f"<a href='#{r['anchor']}'>{esc(r['name'])}</a>" if r.get("anchor") else esc(r["name"])
        trs.append(f"<tr data-verdict='{esc(r['name'])}'><td class='nowrap'>{name}</td><td>{badge(r['status'])}</td>"
                   f"<td>{r['figure']}</td><td class='why'>{r['meaning']}</td></tr>")
    out.append(table(["verdict", "status", "figure", "what it means"], trs))
    warns = list(s.get("warnings") or [])
    for reg in (s.get("regions") or {}).values():
        warns += [w for w in reg.get("warnings") or [] if w not in warns]
    if warns:
        out.append("<h3>Warnings from the run</h3><ul class='tight'>" + "".join(f"<li>{esc(w)}</li>" for w in warns)
                   + "</ul>")
    extra = []
    if s.get("modes") is None:
        extra.append("natural frequencies (no [modes] section)")
    if s.get("buckling") is None:
        extra.append("buckling (no [buckling] section)")
    else:
        extra.append("buckling beyond the linear (bifurcation) estimate: imperfections and yielding lower it")
    out.append("<h3>Not checked</h3><ul class='tight'>" + "".join(f"<li>{n}</li>" for n in notes + extra + NOT_CHECKED)
               + "</ul>")
    return "\n".join(out)


# ----------------------------------------------------------------------------- model as applied
def section_model(s: dict, pics: dict, out_dir: Path) -> str:
    L, F, S, M = _units(s)
    size = _size(s)
    out = ["<h2 id='model'>2. The model as applied</h2>"]
    by_file = {p["file"]: p for p in pics.get("pictures", [])}
    mp = by_file.get("picture-model.png")
    if mp and (out_dir / mp["file"]).is_file():
        sup = ", ".join(f"'{esc(x['region'])}' {x['symbols']} symbols at {x['points']} points"
                        for x in mp.get("supports", []))
        lds = ", ".join(f"{esc(x['label'])}: {x['arrows']} arrow(s)"
                        + (f", {x['moments']} moment arrow(s)" if x['moments'] else "")
                        + (" (drawn at the shortest length)" if x.get("shortened") else "")
                        for x in mp.get("loads", []))
        keys = "".join(f"<span class='key' style='background:{c}'></span>{esc(HELD_WORDS.get(k, k))}"
                       for k, c in DIRECTION_COLORS.items() if k != "elastic")
        cap = (f"Supports and loads as the run applied them, seen from two opposite corners. Each held direction is a "
               f"stalk ending in a round foot, coloured by direction:{keys}. Load arrows (<span class='key' "
               f"style='background:{LOAD_COLOR}'></span>) are scaled to their force, the largest at "
               f"{fmt(22)} % of the part size; pressure and pin bearing are drawn as arrows spread over their surface, "
               f"scaled to the local pressure. Drawn: supports {sup or 'none'}; loads {lds or 'none'}.")
        if not pics.get("surface_ids", True):
            cap += " This folder has no boundary.vtu (an older run): supports and loads could not be placed."
        out.append(image(out_dir / mp["file"], mp["file"], cap))
    # supports
    out.append("<h3>Supports</h3>")
    ref = _load_ref(s)
    srows = []
    for k, sp in enumerate(s.get("supports", [])):
        where = (esc(sp['region']) if sp.get("region") is not None else
                 f"{esc(sp.get('name'))}: node at {coordinates(sp.get('node_at'), size, L)}")
        srows.append(f"<tr><td>{where}</td><td>{held_text(sp, F, L)}</td>"
                     f"{num(sp['area'], f'supports.{k}.area', L + '²')}"
                     f"<td class='num'>{vec(sp.get('reaction'), F, ref=ref)}</td></tr>")
    out.append(table(["region", "held directions", "area", "reaction force on the part"], srows))
    # loads
    out.append("<h3>Loads: the resultant each applies</h3>")
    lrows = []
    for k, ld in enumerate(s.get("loads", [])):
        area = num(ld.get("area"), f"loads.{k}.area", L + "²") if ld.get("area") is not None else "<td>whole part</td>"
        what = esc(ld.get("kind", ""))
        if ld.get("kind") == "pressure" and ld.get("pressure") is not None:
            what += f" {qty(ld['pressure'], S)}" + (" varying" if ld.get("gradient") is not None else "")
        if ld.get("kind") == "spread":
            what = (f"force and moment at {coordinates(ld.get('at'), size, L)} passed to the region, spread by nodal "
                    "area; moment about that point "
                    f"{vec(ld.get('moment_about_at'), M, ref=_norm(ld.get('moment_about_at') or [0]) or None)}")
        if ld.get("kind") == "temperature":
            what += f" {fmt(ld.get('min_change'))} to {fmt(ld.get('max_change'))} K"
        lrows.append(f"<tr><td>{esc(ld['label'])}</td><td>{what}</td>{area}"
                     f"<td class='num'>{vec(ld.get('force'), F, ref=ref)}</td>"
                     f"<td class='num'>{vec(ld.get('moment'), M, ref=ref * size)}</td></tr>")
    # With load cases the top-level total is the first case's: give each load case's and combination's own.
    totals = ([(f"total applied in '{esc(k)}'", c) for k, c in s["load_cases"].items() if c.get("applied_force")]
              if s.get("load_cases") else []) or [("total applied", s)]
    for label, c in totals:
        lrows.append(f"<tr><th>{label}</th><td></td><td></td>"
                     f"<td class='num'>{vec(c.get('applied_force'), F, ref=ref)}</td>"
                     f"<td class='num'>{vec(c.get('applied_moment'), M, ref=ref * size)}</td></tr>")
    out.append(table(["load", "kind", "area", "force", "moment about the origin"], lrows))
    out.append(f"<p class='meta'>{noise_note(ref, F)} Moments: components below {fmt(NOISE, 1)} of the load times the "
               f"part size are shown as 0.</p>")
    # regions
    out.append("<h3>Regions: what each matched</h3>")
    rrows = []
    for name, reg in (s.get("regions") or {}).items():
        if "nodes" in reg and not reg.get("surfaces"):
            rrows.append(f"<tr><td>{esc(name)}</td><td>{esc(reg.get('kind'))}</td>"
                         f"<td>{fmt(reg['nodes'])} nodes on the edge</td>"
                         "<td></td><td></td></tr>")
            continue
        for j, sf in enumerate(reg.get("surfaces") or []):
            geo = (f"normal {vec(sf['normal'], figures=3, ref=1.0)}" if sf.get("normal") is not None else
                   f"axis {vec(sf.get('axis'), figures=3, ref=1.0)} "
                   f"through {coordinates(sf.get('axis_point'), size, L)}, "
                   f"radius {qty(sf.get('radius'), L)}" if sf.get("axis") is not None else "")
            rrows.append(f"<tr><td>{esc(name) if j == 0 else ''}</td><td>{esc(reg.get('kind')) if j == 0 else ''}</td>"
                         f"<td>surface {sf['id']}: {esc(sf['kind'])}, "
                         f"centroid {coordinates(sf.get('centroid'), size, L)}"
                         f"{'; ' + geo if geo else ''}</td>"
                         f"{num(sf.get('area'), f'regions.{name}.surfaces.{j}.area', L + '²')}"
                         f"<td>{esc('; '.join(reg.get('warnings') or [])) if j == 0 else ''}</td></tr>")
    out.append(table(["region", "selector", "surface matched", "area", "warnings"], rrows))
    # geometry, mesh, material
    out.append("<h3>Geometry and mesh</h3>")
    geo = s.get("geometry") or {}
    inp = s.get("inputs", {})
    gfile = inp.get("geometry_file", {"path": s.get("geometry_file"), "sha256": None})
    mesh = s["mesh"]
    q = (s.get("checks") or {}).get("element_quality", {}).get("details", {})
    rows = [f"<tr><th>geometry file</th><td><code>{esc(Path(str(gfile.get('path'))).name)}</code></td></tr>",
            f"<tr><th>its length unit, scale applied</th><td>{esc(geometry_unit_text(geo, L))}</td></tr>",
            f"<tr><th>part size (bounding-box diagonal)</th><td>{qty(size, L)}</td></tr>",
            f"<tr><th>pieces (bodies joined through faces)</th><td>{len(geo.get('pieces') or [])}</td></tr>",
            f"<tr><th>element type</th><td>{'10-node' if mesh['order'] == 2 else '4-node'} tetrahedra</td></tr>",
            f"<tr><th>nodes</th>{num(mesh['nodes'], 'mesh.nodes')}</tr>",
            f"<tr><th>elements</th>{num(mesh['elements'], 'mesh.elements')}</tr>",
            f"<tr><th>degrees of freedom</th>{num(mesh['dofs'], 'mesh.dofs')}</tr>",
            f"<tr><th>target element size</th>{num(mesh.get('size'), 'mesh.size', L)}</tr>",
            "<tr><th>shape quality (mean ratio), worst</th>"
            f"{num(mesh.get('min_quality'), 'mesh.min_quality', figures=3)}</tr>"]
    if q:
        rows += [f"<tr><th>aspect ratio, worst / mean</th><td class='num'>{fmt(q.get('aspect_ratio_max'), 3)} / "
                 f"{fmt(q.get('aspect_ratio_mean'), 3)}</td></tr>",
                 f"<tr><th>poor elements (aspect &gt; {fmt(q.get('aspect_limit'))} or Jacobian ratio &lt; "
                 f"{fmt(q.get('jacobian_limit'))})</th>"
                 f"{num(q.get('poor'), 'checks.element_quality.details.poor')}</tr>"]
    out.append(table(["", ""], rows, "kv"))
    mesh_pic = by_file.get("picture-mesh.png")
    if mesh_pic and (out_dir / mesh_pic["file"]).is_file():
        lo, hi = mesh_pic.get("clim") or (None, None)
        out.append(image(out_dir / mesh_pic["file"], mesh_pic["file"],
                         "The mesh: element edges on the surface, coloured by the local element size "
                         f"({qty(lo, L)} to {qty(hi, L)}); refined zones show as dense, dark patches."))
    if len(s.get("materials") or []) > 1 or len(s.get("bodies") or []) > 1:
        out.append(section_bodies(s, pics, out_dir))
        return "\n".join(out)
    m = s.get("material", {})
    out.append("<h3>Material (isotropic, linear elastic)</h3>")
    mrows = [f"<tr><th>Young's modulus E</th>{num(m.get('E'), 'material.E', S)}</tr>",
             f"<tr><th>Poisson's ratio ν</th>{num(m.get('nu'), 'material.nu', figures=3)}</tr>"]
    if m.get("density") is not None:
        f, unit = DENSITY_SHOWN.get(L, (1.0, DENSITY_CASE_UNITS.get(L, "case units")))
        mrows.append(f"<tr><th>density</th>{num(m.get('density'), 'material.density', unit, factor=f)}</tr>")
    if m.get("yield_strength") is not None:
        mrows.append(f"<tr><th>yield strength</th>{num(m.get('yield_strength'), 'material.yield_strength', S)}</tr>")
    if m.get("expansion") is not None:
        mrows.append("<tr><th>thermal expansion</th>"
                     f"{num(m.get('expansion'), 'material.expansion', '1/K', figures=3)}</tr>")
    out.append(table(["", ""], mrows, "kv"))
    return "\n".join(out)


MASS_CASE_UNITS = {"mm": "t", "m": "kg", "in": "lbf·s²/in"}


def section_bodies(s: dict, pics: dict, out_dir: Path) -> str:
    """The materials and bodies of a part of several (summary.json ``materials`` and ``bodies``), each
    body with its colour in the picture of the bodies."""
    L, F, S, M = _units(s)
    size = _size(s)
    f, dunit = DENSITY_SHOWN.get(L, (1.0, DENSITY_CASE_UNITS.get(L, "case units")))
    out = ["<h3>Materials (isotropic, linear elastic)</h3>"]
    rows = []
    for k, m in enumerate(s.get("materials") or []):
        rows.append(f"<tr><td>{esc(m['name'])}</td>{num(m['E'], f'materials.{k}.E', S)}"
                    f"{num(m['nu'], f'materials.{k}.nu', figures=3)}"
                    + (num(m['density'], f'materials.{k}.density', dunit, factor=f) if m.get("density") is not None
                       else "<td>–</td>")
                    + (num(m['yield_strength'], f'materials.{k}.yield_strength', S)
                       if m.get("yield_strength") is not None else "<td>–</td>")
                    + (num(m['expansion'], f'materials.{k}.expansion', '1/K', figures=3)
                       if m.get("expansion") is not None else "<td>–</td>")
                    + f"<td>{esc(', '.join(str(b) for b in m.get('bodies', [])))}</td></tr>")
    out.append(table(["material", "E", "ν", "density", "yield strength", "thermal expansion", "bodies"], rows))
    colors = {}
    for p in pics.get("pictures", []):
        for b, e in (p.get("bodies") or {}).items():
            colors[str(b)] = e["color"]
    out.append("<h3>Bodies</h3><p class='meta'>Bodies that touch share nodes (bonded). Stresses are averaged "
               "within each body, so they keep their jump where two materials meet; a point on an interface "
               "reports the body of the element that holds it.</p>")
    rows = []
    for k, b in enumerate(s.get("bodies") or []):
        key = (f"<span class='key' style='background:{esc(colors[str(b['id'])])}'></span>"
               if str(b["id"]) in colors else "")
        mass = (num(b["mass"], f"bodies.{k}.mass", MASS_CASE_UNITS.get(L, "")) if b.get("mass") is not None
                else "<td>–</td>")
        rows.append(f"<tr><td>{key}{esc(b['id'])}</td><td>{esc(b['material'])}</td>"
                    f"{num(b['volume'], f'bodies.{k}.volume', L + '³')}{mass}"
                    f"<td>{coordinates(b['centroid'], size, L)}</td></tr>")
    out.append(table(["body", "material", "volume", "mass", "centroid"], rows))
    return "\n".join(out)


# ----------------------------------------------------------------------------- results
def section_results(s: dict, study: Optional[dict]) -> str:
    L, F, S, M = _units(s)
    size = _size(s)
    g = s.get("governing_peak") or {}
    out = ["<h2 id='results'>3. Results</h2>"]
    md, md_key, md_case = largest_displacement(s)
    first = first_case_label(s)
    rows = [f"<tr><th>largest displacement{' (all load cases)' if md_case else ''}</th>{num(md['value'], md_key, L)}"
            f"<td>at {coordinates(md['at'], size, L)}"
            + (f"; load case or combination '{esc(md_case)}'" if md_case else "") + "</td></tr>"]
    vecu = md.get("vector")
    if vecu:
        k = max(range(3), key=lambda i: abs(vecu[i]))
        # The load that moved it: that of the load case (or combination) the largest displacement is in.
        Fa = ((s.get("load_cases") or {}).get(md_case) or s).get("applied_force") or [0, 0, 0]
        sense = ""
        if abs(Fa[k]) > 0:
            sense = "with the applied load" if Fa[k] * vecu[k] > 0 else "against the applied load's component"
        rows.append(f"<tr><th>its direction</th><td class='num'>{vec(vecu, L)}</td><td>mostly along "
                    f"{'+' if vecu[k] > 0 else '−'}{'xyz'[k]}{(', ' + sense) if sense else ''}</td></tr>")
    sflag = ""
    if study is not None:
        q = (study.get("quantities") or {}).get("max_von_mises")
        if q and q.get("singular"):
            sflag = " <span class='flag'>⚠ singular in the convergence study: not a converged number</span>"
    ov = g.get("overall") or {"value": s["max_von_mises"]["value"], "at": s["max_von_mises"]["at"]}
    # On several materials the governing peak's overall and away values are its material's, not the part's.
    in_mat = f" in material '{esc(g['material'])}'" if g.get("material") and g.get("by_material") else ""
    rows.append(f"<tr><th>overall von Mises peak{' (all load cases)' if s.get('load_cases') else ''}{in_mat}</th>"
                f"{num(ov['value'], 'governing_peak.overall.value' if g else 'max_von_mises.value', S)}"
                f"<td>at {coordinates(ov['at'], size, L)}"
                + (f"; next to '{esc(ov['next_to'])}'" if ov.get("next_to") else "") + f"{sflag}</td></tr>")
    aw = g.get("away") or s.get("peak_away_from_supports_and_loads") or {}
    if aw.get("value") is not None:
        away_key = "governing_peak.away.value" if g.get("away") else "peak_away_from_supports_and_loads.value"
        rows.append(f"<tr><th>von Mises peak more than two elements from every support and load{in_mat}</th>"
                    f"{num(aw['value'], away_key, S)}"
                    f"<td>at {coordinates(aw.get('at'), size, L)}</td></tr>")
    if g:
        _, flag = governing_text(s, study)
        rows.append(f"<tr><th>governing peak</th>{num(g.get('value'), 'governing_peak.value', S)}"
                    f"<td>{prose(g.get('why', ''))}"
                    + (f" <span class='flag'>⚠ {flag}</span>" if flag else "") + "</td></tr>")
        for mname, m in (g.get("by_material") or {}).items():
            if mname == g.get("material") or m.get("value") is None:
                continue
            ukey = f"governing_peak.by_material.{mname}.utilisation"
            ut = (f"{tag(m.get('utilisation'), ukey, percent(m.get('utilisation')), 100.0)} of its yield strength "
                  f"{qty(m.get('yield_strength'), S)}; " if m.get("utilisation") is not None else "")
            rows.append(f"<tr><th>peak that governs in material '{esc(mname)}'</th>"
                        f"{num(m['value'], f'governing_peak.by_material.{mname}.value', S)}"
                        f"<td>{ut}{prose(m.get('why', ''))}</td></tr>")
    ref = _load_ref(s)
    for name, r in s.get("reactions", {}).items():
        rows.append(f"<tr><th>reaction on '{esc(name)}'{first}</th><td class='num'>{vec(r['force'], F, ref=ref)}</td>"
                    f"<td>moment about the origin {vec(r['moment'], M, ref=ref * size)}</td></tr>")
    rows.append(f"<tr><th>strain energy{first}</th>"
                f"{num(s.get('strain_energy'), 'strain_energy', s['units'].get('energy', ''))}<td></td></tr>")
    rows.append("<tr><th>equilibrium error (relative)</th>"
                f"{num(s.get('equilibrium_error'), 'equilibrium_error', figures=2)}"
                f"<td>moment: {fmt(s.get('moment_equilibrium_error'), 2)}</td></tr>")
    solver = s.get("solver", {})
    rows.append(f"<tr><th>linear solver</th><td>{esc(solver.get('backend', '–'))}</td>"
                f"<td>relative residual {fmt(solver.get('relative_residual'), 2)}</td></tr>")
    out.append(table(["quantity", "value", "where, and what it means"], rows))
    out.append(f"<p class='meta'>{noise_note(ref, F)}</p>")
    if s.get("load_cases"):
        out.append("<h3>Load cases and combinations</h3>")
        crow = []
        for cname, ce in s["load_cases"].items():
            pa = ce.get("peak_away_from_supports_and_loads") or {}
            crow.append(f"<tr><td>{esc(cname)}{' (governs)' if cname == g.get('load_case') else ''}</td>"
                        f"<td>{esc(ce.get('kind', ''))}</td>"
                        f"{num(ce['max_displacement']['value'], f'load_cases.{cname}.max_displacement.value', L)}"
                        f"{num(ce['max_von_mises']['value'], f'load_cases.{cname}.max_von_mises.value', S)}"
                        f"{num(pa.get('value'), f'load_cases.{cname}.peak_away_from_supports_and_loads.value', S)}"
                        "</tr>")
        out.append(table(["load case", "kind", "largest displacement", "von Mises peak",
                          "peak away from supports and loads"], crow))
    if s.get("points"):
        out.append(f"<h3>Named points{first_case_label(s)}</h3>")
        prow = []
        for name, p in s["points"].items():
            umag = _norm(p["displacement"])
            pr = p.get("principal") or [None] * 3
            prow.append(f"<tr><td>{esc(name)}</td><td class='num'>{coordinates(p['at'], size)}</td>"
                        f"<td class='num'>{vec(p['displacement'])}</td><td class='num'>{fmt(umag)}</td>"
                        f"{num(p['von_mises'], f'points.{name}.von_mises')}<td class='num'>{vec(pr)}</td></tr>")
        out.append(table(["point", f"at [{L}]", f"displacement [{L}]", f"|u| [{L}]", f"von Mises [{S}]",
                          f"principal σ1, σ2, σ3 [{S}]"], prow))
    bearing = [(k, ld) for k, ld in enumerate(s.get("loads", [])) if ld.get("kind") == "bearing"]
    if bearing:
        out.append("<h3 id='bearing'>Pin bearing</h3>")
        brow = []
        for k, ld in bearing:
            r = ld.get("radius")
            length = (ld.get("area") or 0) / (2 * math.pi * r) if r else None
            brow.append(f"<tr><td>{esc(ld['label'])}</td>{num(_norm(ld.get('force') or [0, 0, 0]), None, F)}"
                        f"<td class='num'>{qty(2 * r if r else None, L)}</td><td class='num'>{qty(length, L)}</td>"
                        f"{num(ld.get('nominal_bearing_stress'), f'loads.{k}.nominal_bearing_stress', S)}"
                        f"{num(ld.get('peak_pressure'), f'loads.{k}.peak_pressure', S)}</tr>")
        out.append(table(["load", "force", "hole diameter", "bearing length", "nominal bearing stress F/(d·L)",
                          "peak contact pressure"], brow))
        out.append("<p class='meta'>The pressure follows the cosine of the angle from the load direction over the "
                   "loaded half of the hole; its peak is 4/π times the nominal bearing stress for a uniform bearing "
                   "length (common practice).</p>")
    return "\n".join(out)


def section_pictures(pics: dict, s: dict, out_dir: Path) -> str:
    L, F, S, _ = _units(s)
    out = ["<h2 id='pictures'>4. Pictures</h2>",
           f"<p class='meta'>Drawn with {esc(pics.get('renderer', '?'))}, parallel projection. Colour map: viridis "
           f"(perceptually uniform). Displacements are drawn magnified <b>{fmt(pics.get('scale'))} times</b>"
           + (f" (field {esc(pics.get('deformed_by'))})"
              if pics.get("deformed_by") not in (None, "displacement") else "")
           + "; the dark outline is the undeformed part. A black ring on a white halo marks each peak, its tag gives "
             "the value. The triad in the lower left gives the axes (x, y, z in the colours of section 2).</p>"]
    views = pics.get("views") or {}
    vtext = "; ".join(f"{esc(k)} from {vec(v['direction'], figures=2, ref=1.0)}" for k, v in views.items())
    out.append(f"<p class='meta'>Views (from the part toward the viewer): {vtext}.</p>")
    grid = []
    for p in pics.get("pictures", []):
        if p["kind"] != "field" or str(p.get("field")).startswith(("mode-", "buckling-")):
            continue
        f = out_dir / p["file"]
        if not f.is_file():
            continue
        # The field's unit on every value a caption gives (utilisation is in per cent of yield).
        # Fields of load cases are named FIELD-CASE (von_mises-envelope, displacement-down).
        field = str(p.get("field"))
        unit = next((u for k, u in (("von_mises", S), ("displacement", L), ("utilisation", "%"))
                     if field == k or field.startswith(k + "-")), "")
        marks = "; ".join(f"{esc(m['name'])} {qty(m['value'], unit)} at {coordinates(m['at'], _size(s), L)}"
                          + ("" if all(m.get("visible") or [True]) else " (hidden from this view)")
                          for m in p.get("marks", []))
        cap = f"{esc(p['title'])}. "
        if p.get("bodies"):
            cap += "; ".join(f"<span class='key' style='background:{esc(e['color'])}'></span>body {esc(b)}"
                             + (f" ({esc(e['material'])})" if e.get("material") else "")
                             for b, e in p["bodies"].items()) + ". "
        if p.get("over_range"):
            several = (field.startswith("von_mises")
                       and len((s.get("governing_peak") or {}).get("by_material") or {}) > 1)
            stop = "highest governing peak of the materials" if several else "governing peak"
            cap += (f"The colour scale stops at the {stop} ({qty(p['clim'][1], unit)}); values above it, "
                    f"which lie next to supports or loads (the idealisation's artefact), are drawn in "
                    f"<span class='key' style='background:{OVER_RANGE}'></span>red "
                    f"({percent(p.get('over_range_area', 0))} of the surface). ")
        cap += f"Marked: {marks}." if marks else ""
        fig = image(f, p["file"], cap)
        if p["file"].startswith("picture-von-mises-capped-"):
            grid.append(fig)
        else:
            if grid:
                out.append("<div class='grid'>" + "".join(grid) + "</div>")
                grid = []
            out.append(fig)
    if grid:
        out.append("<div class='grid'>" + "".join(grid) + "</div>")
    return "\n".join(out)


# ----------------------------------------------------------------------------- modes and buckling
def section_eigen(s: dict, pics: dict, out_dir: Path) -> str:
    """Natural frequencies (effective masses) and buckling factors, with pictures of the first shapes."""
    modes, buck = s.get("modes"), s.get("buckling")
    if modes is None and buck is None:
        return ""
    out = ["<h2 id='eigen'>Natural frequencies and buckling</h2>"]
    if modes is not None:
        info = s.get("modes_info") or {}
        rows = []
        for i, m in enumerate(modes):
            em, cum = m.get("effective_mass") or [0, 0, 0], m.get("cumulative_effective_mass") or [0, 0, 0]
            # Shares below 1e-9 of the mass are the eigen solver's round-off, not a participation.
            em, cum = ([0.0 if v is not None and abs(v) < 1e-9 else v for v in vals] for vals in (em, cum))
            what = esc(m["rigid_body"]) if m.get("rigid_body") else "elastic"
            rows.append("<tr><td>" + str(m["number"]) + "</td>" + num(m["frequency"], f"modes.{i}.frequency", "Hz")
                        + "".join(f"<td class='num'>{percent(v)}</td>" for v in em)
                        + "".join(f"<td class='num'>{percent(v)}</td>" for v in cum) + f"<td>{what}</td></tr>")
        out.append(f"<p>The lowest natural modes of the part on its supports ({esc(info.get('method', ''))}). "
                   "Effective mass: the share of the mass that can move along x, y, z that each mode carries, and the "
                   "running sums; modes whose sums approach 100 % capture the response to a base excitation in that "
                   "direction. Rigid-body modes of a free part come out at 0 Hz.</p>")
        out.append(table(["mode", "frequency", "eff. mass x", "y", "z", "sum x", "y", "z", "kind"], rows))
    if buck is not None:
        info = s.get("buckling_info") or {}
        rows = ["<tr><td>" + str(b["number"]) + "</td>" + num(b["factor"], f"buckling.{i}.factor", "") + "</tr>"
                for i, b in enumerate(buck)]
        lc = info.get("load_case")
        out.append("<p>Linear buckling load factors of "
                   f"{('load case ' + esc(repr(lc))) if lc else 'the case’s loads'}: "
                   "the loads times the factor buckle the part. " + esc(info.get("caution", "")).capitalize() + ".</p>")
        if info.get("note"):
            out.append(f"<p class='meta'>{esc(info['note'])}</p>")
        out.append(table(["shape", "load factor"], rows))
    grid = []
    for p in pics.get("pictures", []):
        if not str(p.get("field")).startswith(("mode-", "buckling-")):
            continue
        f = out_dir / p["file"]
        if f.is_file():
            grid.append(image(f, p["file"], esc(p["title"]) + ". Shape drawn with its largest displacement at "
                              "8 % of the part size; colour: relative displacement; dark outline: the part at rest."))
    if grid:
        out.append("<div class='grid'>" + "".join(grid) + "</div>")
    return "\n".join(out)


# ----------------------------------------------------------------------------- lines
def _beam_axis_for(s: dict, line: str):
    for e in (s.get("estimates") or {}).values():
        if isinstance(e, dict) and line in (e.get("lines") or {}):
            return (e.get("axis") or {}).get("ex")
    return None


def section_lines(s: dict, out_dir: Path, figures: dict) -> str:
    if not s.get("lines"):
        return ""
    L, F, S, _ = _units(s)
    out = ["<h2 id='lines'>5. Along the lines</h2>"]
    for name, fname in s["lines"].items():
        fig = figures.get(name)
        if fig is None:
            continue
        fr = fig.get("frame")
        out.append(f"<h3>Line '{esc(name)}'</h3>")
        est = " The dashed line is the beam-theory estimate M·y/I with the local section." if fig["estimate"] else ""
        frame_txt = ""
        if fr is not None:
            frame_txt = (" Section frame: the cutting plane contains the line "
                         f"(t = {vec(fr['t'], figures=3, ref=1.0)}); "
                         f"its normal n = {vec(fr['n'], figures=3, ref=1.0)} "
                         + ("is the beam's axis" if fr.get("from_beam") else
                            "is the direction across the line with the largest normal stress")
                         + "; σn is the normal stress on that plane, τ the shear in it along the line.")
        out.append(image(out_dir / fig["file"], f"line {name}",
                         f"Samples from <code>{esc(fname)}</code>.{est}{frame_txt}"))
        lin = (s.get("linearized") or {}).get(name)
        if isinstance(lin, dict) and isinstance(lin.get("von_mises"), dict) and fr is not None:
            from .plots import in_frame

            vm = lin["von_mises"]

            def se(v):
                return (v.get("start"), v.get("end")) if isinstance(v, dict) else (v, v)

            mem = in_frame(lin.get("membrane") or {}, fr)
            bs = in_frame((lin.get("bending") or {}).get("start") or {}, fr)
            be = in_frame((lin.get("bending") or {}).get("end") or {}, fr)
            ref = max(abs(mem["normal"]), abs(bs["normal"]), abs(mem["shear"]), 1e-300)
            rows = [f"<tr><td>membrane (mean)</td><td class='num'>{qty(mem['normal'], S, ref=ref, tol=1e-6)}</td>"
                    f"<td class='num'>{qty(mem['shear'], S, ref=ref, tol=1e-6)}</td>"
                    f"{num(vm.get('membrane'), f'linearized.{name}.von_mises.membrane', S)}<td></td></tr>",
                    "<tr><td>bending (linear part), at the start / end</td>"
                    f"<td class='num'>{qty(bs['normal'], S, ref=ref, tol=1e-6)} / "
                    f"{qty(be['normal'], S, ref=ref, tol=1e-6)}</td>"
                    f"<td class='num'>{qty(bs['shear'], S, ref=ref, tol=1e-6)} / "
                    f"{qty(be['shear'], S, ref=ref, tol=1e-6)}</td><td></td><td></td></tr>"]
            a, b = se(vm.get("membrane_plus_bending"))
            rows.append(f"<tr><td>membrane + bending</td><td class='num'>{qty(mem['normal'] + bs['normal'], S)} / "
                        f"{qty(mem['normal'] + be['normal'], S)}</td><td></td>"
                        f"{num(a, f'linearized.{name}.von_mises.membrane_plus_bending.start', S)}"
                        f"{num(b, f'linearized.{name}.von_mises.membrane_plus_bending.end', S)}</tr>")
            a, b = se(vm.get("total"))
            rows.append("<tr><td>total (membrane + bending + peak)</td><td></td><td></td>"
                        f"{num(a, None, S)}{num(b, None, S)}</tr>")
            out.append(table(["part", "σn on the cutting plane", "τ in the plane, along the line",
                              "von Mises at the start", "von Mises at the end"], rows))
            if lin.get("note"):
                out.append(f"<p class='meta flag'>{esc(lin['note'])}</p>")
            out.append(f"<p class='meta'>Stress linearization across the line over {qty(lin.get('thickness'), L)} "
                       "(membrane, bending and peak parts, as in ASME BPVC VIII-2 Part 5); σn and τ are the linearized "
                       "tensors turned into the section frame. Values below 10⁻⁶ of the largest are shown as 0.</p>")
    return "\n".join(out)


def section_estimates(s: dict) -> str:
    est = s.get("estimates")
    if not isinstance(est, dict) or not est:
        return ""
    L, F, S, _ = _units(s)
    out = ["<h2 id='estimates'>6. Beam-theory estimates</h2>"]
    for bname, e in est.items():
        if not isinstance(e, dict):
            continue
        out.append(f"<h3>Beam '{esc(bname)}'</h3>")
        if e.get("sources"):
            out.append(f"<p class='meta'>{esc(e['sources'])}</p>")
        rows = []
        for r in V.estimate_rows(e, L):
            unit = L if r["kind"] == "length" else S
            if isinstance(r["estimate"], list):
                ev, fv = vec(r["estimate"], unit), vec(r["fe"], unit)
            else:
                ev, fv = qty(r["estimate"], unit), qty(r["fe"], unit)
            extra = ""
            if r.get("bounds") and None not in r["bounds"]:
                extra = f" Bounds {qty(min(r['bounds']), unit)} to {qty(max(r['bounds']), unit)}."
            if r.get("fe_source"):
                extra += f" FE value: {esc(r['fe_source'])}."
            if (r.get("kind") == "length" and isinstance(r["estimate"], (int, float))
                    and isinstance(r["fe"], (int, float))):
                extra += (" Same sense as the estimate." if r["estimate"] * r["fe"] > 0 else
                          " <b>Opposite sense to the estimate.</b>")
            rows.append(f"<tr><td>{esc(r['what'])}</td><td class='num'>{ev}</td><td class='num'>{fv}</td>"
                        f"<td class='num'>{percent(r['relative']) if r['relative'] is not None else '–'}</td>"
                        f"<td>{badge(r['status'])}</td><td class='why'>{esc(r['why'])}{extra}</td></tr>")
        out.append(table(["quantity", "estimate", "this run", "this run / estimate − 1", "verdict", "why"], rows))
        for n in e.get("notes") or []:
            out.append(f"<p class='meta'>Note: {esc(n)}</p>")
    out.append(f"<p class='meta'>A value agrees within {V.ESTIMATE_AGREE:.0%} (common practice for beam theory on a "
               "solid part); outside it the verdict says why (inside the bounds of a tapered span; within about one "
               "section depth of the held end or the load, where Saint-Venant's principle says beam theory does not "
               "hold) or, with no reason found, asks for a look.</p>")
    return "\n".join(out)


# ----------------------------------------------------------------------------- study, comparison
def section_study(study: Optional[dict], why: str, out_dir: Path, make_plot: Callable) -> str:
    out = ["<h2 id='convergence'>7. Mesh convergence</h2>"]
    if study is None:
        out.append(f"<p>{badge('stale' if why.startswith('stale') else 'none')} {esc(why)}</p>")
        return "\n".join(out)
    if study.get("method"):
        out.append(f"<p class='meta'>{esc(study['method'])}</p>")
    for w in study.get("warnings") or []:
        out.append(f"<p class='meta flag'>{prose(w)}</p>")
    lrows = [f"<tr><td>{lv.get('level')}</td>{num(lv.get('size'))}{num(lv.get('nodes'))}{num(lv.get('elements'))}"
             f"{num(lv.get('dofs'))}{num(lv.get('h'))}<td class='num'>{fmt(lv.get('ratio_from_previous'), 3)}</td>"
             f"{num(lv.get('wall_s'), None, 's', 3)}</tr>" for lv in study.get("levels", [])]
    out.append(table(["level", "size", "nodes", "elements", "DOF", "h", "ratio", "time"], lrows))
    qrows = []
    for name, q in (study.get("quantities") or {}).items():
        if q.get("status") != "assessed":
            continue
        vals = " → ".join(fmt(v, 5) for v in q.get("values", []))
        band = q.get("band")
        btxt = f"{fmt(band[0], 5)} to {fmt(band[1], 5)}" if band and None not in band else "–"
        verdict = q.get("convergence") or q.get("status", "")
        sing = " <span class='flag'>singular</span>" if q.get("singular") else ""
        qrows.append(f"<tr><td><b>{esc(name)}</b> [{esc(q.get('unit', ''))}]<br>"
                     f"<span class='meta'>{prose(q.get('advice', ''))}</span></td>"
                     f"<td class='num'>{vals}</td><td class='num'>{btxt}</td><td>{esc(verdict)}{sing}</td></tr>")
    out.append(table(["quantity and advice", "values, coarse → fine", "band (finest ± GCI)", "verdict"], qrows))
    plots = study.get("plots") or {}
    shown = []
    for name, q in (study.get("quantities") or {}).items():
        if q.get("status") != "assessed" or len(shown) >= 6 or str(q.get("convergence", "")).startswith("fixed by"):
            continue
        f = out_dir / plots[name] if name in plots else None
        if f is None or not f.is_file():
            f = make_plot(name, q, study)
        if f is not None and Path(f).is_file():
            shown.append(image(Path(f), f"convergence of {name}", f"Convergence of {esc(name)}."))
    if shown:
        out.append("<div class='grid'>" + "".join(shown) + "</div>")
    return "\n".join(out)


def _worst(e: dict, length_unit: str = "") -> str:
    w = e.get("worst")
    if not w:
        return "–"
    at = vec(w["at"], length_unit) if length_unit else vec(w["at"])
    return f"{at}: {qty(w['reference'], e.get('unit', ''))} → {qty(w['ours'], e.get('unit', ''))}"


def section_comparison(c: Optional[dict], why: str, out_dir: Path, length_unit: str = "") -> str:
    out = ["<h2 id='comparison'>8. Comparison with the reference results</h2>"]
    if c is None:
        out.append(f"<p>{badge('stale' if why.startswith('stale') else 'none')} {esc(why)}</p>")
        return "\n".join(out)
    out += [f"<p>Reference: <b>{esc(c.get('label') or 'unlabelled')}</b>. Overall verdict {badge(c['verdict'])}: "
            f"{c['within_tolerance']} of {c['compared']} compared values within tolerance; {c['points_outside']} "
            f"reference point(s) lie outside the part and were not compared.</p>",
            f"<p class='meta'>Tolerance rule: {esc(c.get('rule', ''))}. Points outside our mesh by at most "
            f"{fmt(c.get('snap_distance'), 3)} {esc(length_unit)} were moved to the nearest point of our surface.</p>"]
    if c.get("scalars"):
        rows = []
        for sc in c["scalars"]:
            rows.append(f"<tr><td>{esc(sc['name'])}</td><td class='num'>{qty(sc['reference'], sc['unit'])}</td>"
                        f"<td class='num'>{qty(sc['ours'], sc['unit'])}</td>"
                        f"<td class='num'>{percent(sc.get('relative_difference'))}</td>"
                        f"<td>{esc(sc['tolerance'])}</td><td>{badge(sc['verdict'])}</td></tr>")
        out.append("<h3>Scalars</h3>")
        out.append(table(["quantity", "reference", "this run", "relative difference", "tolerance", "verdict"], rows))
    for st in c.get("sets", []):
        out.append(f"<h3>{esc(Path(st['file']).name)} "
                   f"({'points CSV' if st['kind'] == 'points' else 'VTU/VTK point data'})</h3>")
        meta = f"sha256 <code>{esc(st['sha256'])}</code>; {st['points']} points"
        if st.get("label"):
            meta = esc(st["label"]) + "; " + meta
        out.append(f"<p class='meta'>{meta}</p>")
        if st.get("notes"):
            out.append(f"<p class='meta'>Notes in the file: {esc(' '.join(st['notes']))}</p>")
        for w in st.get("warnings") or []:
            out.append(f"<p class='meta'><b>Warning:</b> {esc(w)}</p>")
        rows = []
        for q, e in st["quantities"].items():
            rows.append(f"<tr><td>{esc(q)} [{esc(e['unit'])}]</td>"
                        f"<td class='num'>{e['compared']} / {e['snapped']} / {e['outside']}</td>"
                        f"<td class='num'>{qty(e['max_abs_difference'], e['unit'])}</td>"
                        f"<td class='num'>{percent(e.get('max_relative_difference'))} / "
                        f"{percent(e.get('rms_relative_difference'))}</td>"
                        f"<td>{esc(e['tolerance'])} (±{qty(e['allowed_difference'], e['unit'], 3)})</td>"
                        f"<td class='num'>{e['within']} / {e['compared']}</td><td>{badge(e['verdict'])}</td>"
                        f"<td class='why'>{_worst(e, length_unit)}</td></tr>")
        out.append(table(["quantity", "compared / snapped / outside", "largest |difference|", "largest / RMS, of scale",
                          "tolerance", "within", "verdict", "largest difference at: reference → this run"], rows))
        if st.get("outside"):
            items = "; ".join(f"#{o['index']} at {vec(o['at'])} ({fmt(o['distance'], 3)} outside)"
                              for o in st["outside"][:20])
            more = f" and {len(st['outside']) - 20} more" if len(st["outside"]) > 20 else ""
            out.append(f"<p class='meta'>Outside the part, not compared: {items}{more}.</p>")
    wide = [f for f in c.get("plots", []) if not f.startswith("comparison-scatter-")]
    small = [f for f in c.get("plots", []) if f.startswith("comparison-scatter-")]
    for fname in wide:
        if (out_dir / fname).is_file():
            out.append(image(out_dir / fname, fname, esc(fname)))
    if small:
        out.append("<div class='grid'>" + "".join(image(out_dir / f, f, esc(f)) for f in small
                                                   if (out_dir / f).is_file()) + "</div>")
    return "\n".join(out)


def section_checks(s: dict) -> str:
    checks = s.get("checks") or {}
    out = ["<h2 id='checks'>9. Plausibility checks</h2>",
           "<p class='meta'>Rules of thumb run on every result; a warning asks for a look, a failure says the "
           "result should not be used as it stands, and “cannot judge” says the check had too little to go on.</p>"]
    rows = [f"<tr><td class='nowrap'>{esc(name.replace('_', ' '))}</td>"
            f"<td data-check='{esc(name)}'>{badge(c['status'])}</td>"
            f"<td class='why'>{prose(c['why'])}</td></tr>" for name, c in checks.items()]
    out.append(table(["check", "status", "why"], rows))
    return "\n".join(out)


def section_trace(s: dict, generated: str, versions: dict, study_why: str, comparison_why: str) -> str:
    out = ["<h2 id='trace'>10. Traceability</h2>"]
    rows = [f"<tr><th>report written</th><td>{esc(generated)}</td></tr>",
            f"<tr><th>run finished</th><td>{esc(s.get('run_at', '–'))} "
            f"(run id <code>{esc(s.get('run_id', '–'))}</code>)</td></tr>",
            f"<tr><th>convergence study</th><td>{esc(study_why)}</td></tr>",
            f"<tr><th>comparison</th><td>{esc(comparison_why)}</td></tr>"]
    for k, v in (s.get("inputs") or {}).items():
        rows.append(f"<tr><th>{esc(k)}</th><td><code>{esc(v.get('path'))}</code><br>"
                    f"sha256 <code>{esc(v.get('sha256'))}</code></td></tr>")
    t = s.get("timings") or {}
    if t:
        rows.append("<tr><th>time per stage</th><td>" + ", ".join(f"{esc(k)} {fmt(v, 2)}\u202fs" for k, v in t.items())
                    + "</td></tr>")
    rows.append(f"<tr><th>peak memory</th><td>{fmt(s.get('peak_memory_mb'), 3)}\u202fMiB</td></tr>")
    out.append(table(["", ""], rows, "kv"))
    out.append("<h3>Software</h3>")
    out.append(table(["package", "version"],
                     [f"<tr><td>{esc(k)}</td><td>{esc(v)}</td></tr>" for k, v in versions.items()]))
    case_file = s.get("case_file")
    if case_file and Path(case_file).is_file():
        out.append("<h3>Case file as solved</h3>")
        out.append(f"<pre>{esc(Path(case_file).read_text(encoding='utf-8', errors='replace'))}</pre>")
    return "\n".join(out)


def find_study(out_dir: Path, summary: dict) -> tuple[Optional[dict], Path]:
    """The convergence study of the same case file: ``study.json`` in the output folder, else in the
    study command's default folder next to the case (``CASE-study``). A study of another case file is
    not used (whether it is stale is judged by :func:`verdicts.study_state`)."""
    places = [out_dir]
    case_file = summary.get("case_file")
    if case_file:
        places.append(Path(case_file).parent / f"{Path(case_file).stem}-study")
    for d in places:
        doc = _load(d / "study.json")
        if doc is None:
            continue
        other = doc.get("case_file")
        if other and case_file and Path(other).resolve() != Path(case_file).resolve():
            continue
        return doc, d
    return None, out_dir


# ----------------------------------------------------------------------------- assembly
SECTIONS = [("conclusion", "Conclusion"), ("model", "The model as applied"), ("results", "Results"),
            ("pictures", "Pictures"), ("viewer", "3D view"), ("lines", "Along the lines"),
            ("estimates", "Beam-theory estimates"), ("convergence", "Mesh convergence"),
            ("comparison", "Comparison with the reference results"), ("checks", "Plausibility checks"),
            ("trace", "Traceability")]


def _number_sections(text: str) -> tuple[str, list[tuple[str, str]]]:
    """Renumber the ``<h2>`` headings 1, 2, ... in order; returns the text and the contents."""
    import itertools
    import re

    counter = itertools.count(1)
    toc = []

    def repl(m):
        k = next(counter)
        toc.append((m.group(2), f"{k}. {m.group(3)}"))
        return f"{m.group(1)}{k}. {m.group(3)}</h2>"

    text = re.sub(r"(<h2 id='([^']+)'>)\d+\. (.*?)</h2>", repl, text)
    return text, toc


def write_report(out_dir: Path, progress: Optional[Callable[[str, str], None]] = None,
                 target: Optional[Path] = None, pdf: bool = False, viewer: bool = True, *,
                 folder: Optional[Path] = None) -> Path:
    """Build ``report.html`` (and ``report.pdf`` with ``pdf``) from the output folder ``out_dir``;
    returns the HTML's path.

    Renders the pictures (``picture-*.png``) and line plots (``report-line-*.png``) into the folder
    first, and records what each picture drew in ``pictures.json``. ``folder``: the results folder
    the report will be shown in, when ``out_dir`` is a run's staged folder (a study.json there is
    looked for as in ``out_dir``). Given a results folder that shows a run, the report joins that
    run as a new version of it, shown by one atomic switch (:func:`elastofe.files.amended`).

    Raises
    ------
    FileNotFoundError
        When ``out_dir`` holds no summary.json (run the case first).
    CaseError
        With ``pdf``, when no headless browser is there to print it (key ``--pdf``).
    """
    out_dir = Path(out_dir)
    if target is None and current_dir(out_dir) is not None:
        with amended(out_dir) as st:
            _write_report(st.dir, progress, None, pdf, viewer, out_dir)
        return out_dir / "report.html"
    return _write_report(out_dir, progress, target, pdf, viewer, Path(folder) if folder is not None else out_dir)


def _write_report(out_dir: Path, progress: Optional[Callable[[str, str], None]], target: Optional[Path],
                  pdf: bool, viewer: bool, folder: Path) -> Path:
    from .plots import convergence_plot, line_plot, read_line_csv, section_frame
    from .render import render_pictures

    def say(msg: str) -> None:
        if progress is not None:
            progress("report", msg)

    s = _load(out_dir / "summary.json")
    if s is None:
        raise FileNotFoundError(f"{out_dir / 'summary.json'} is missing or unreadable; run the case first")
    record = _load(out_dir / ".elastofe-case.json")
    ident = V.identity(s, record)
    comparison = None
    fresh, comparison_why = V.comparison_state(s, out_dir)
    if fresh:
        comparison = _load(out_dir / "comparison.json")
    elif fresh is False:
        comparison_why = "stale, left out: " + comparison_why
        say(comparison_why)
    else:
        comparison_why = "no reference results in the case ([reference]); not compared"
    study, study_dir = find_study(folder, s)
    if study is not None:
        ok, why = V.study_state(study, ident)
        if ok:
            study_why = f"study.json in {study_dir}: {why}"
            say("convergence study found: adding it")
        else:
            study_why = f"stale, left out: study.json in {study_dir}: {why}"
            say(study_why)
            study = None
    else:
        study_why = "no convergence study found (study.json in the results folder or CASE-study next to the case)"
    say("rendering pictures ...")
    pics = render_pictures(out_dir)
    say(f"pictures drawn with {pics['renderer'].split(' (')[0]}")
    write_text(out_dir / "pictures.json", json.dumps(pics, indent=2) + "\n")
    figures = {}
    for name, fname in (s.get("lines") or {}).items():
        f = out_dir / fname
        if f.is_file():
            cols = read_line_csv(f)
            prefer = _beam_axis_for(s, name)
            fr = section_frame(cols, prefer)
            drawn = line_plot(name, cols, s, out_dir / f"report-line-{safe_name(name)}.png", fr)
            figures[name] = dict(drawn, frame=dict(fr, from_beam=prefer is not None))

    def make_conv(name, q, st):
        return out_dir / convergence_plot(name, q, st, out_dir / f"report-conv-{safe_name(name)}.png")

    generated = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")
    worst = s.get("checks_worst") or "pass"
    notes = []
    if study is None:
        notes.append("the discretisation error (no current convergence study)")
    if comparison is None:
        notes.append("agreement with the primary tool's results (no current comparison)")
    mats = s.get("materials") or [s.get("material") or {}]
    if all(m.get("yield_strength") is None for m in mats):
        notes.append("the margin against yield (no yield strength given)")
    if not s.get("estimates"):
        notes.append("an independent hand calculation (no [[beam]] estimate in the case)")
    rows = conclusion_rows(s, study, study_why, comparison, comparison_why)
    body = [section_conclusion(rows, s, notes),
            "<div class='caution'><b>Caution.</b> " + esc(s.get("caution") or "") + "</div>",
            section_model(s, pics, out_dir), section_results(s, study), section_pictures(pics, s, out_dir)]
    if viewer:
        from .viewer import section_viewer

        body.append(section_viewer(out_dir, s))
    eigen = section_eigen(s, pics, out_dir)
    if eigen:
        body.append(eigen)
    body += [section_lines(s, out_dir, figures), section_estimates(s),
             section_study(study, study_why, study_dir if study is not None else out_dir, make_conv),
             section_comparison(comparison, comparison_why, out_dir, s["units"]["length"]),
             section_checks(s), section_trace(s, generated, _versions(), study_why, comparison_why)]
    text, toc = _number_sections("\n".join(p for p in body if p))
    nav = "<nav class='toc'><b>Contents</b><ol>" + "".join(f"<li><a href='#{i}'>{esc(t.split('. ', 1)[1])}</a></li>"
                                                         for i, t in toc) + "</ol></nav>"
    parts = [
        "<!DOCTYPE html>", "<html lang='en'><head><meta charset='utf-8'>",
        f"<title>Verification report: {esc(s.get('title') or 'elastofe run')}</title>",
        "<meta name='viewport' content='width=device-width, initial-scale=1'>",
        f"<style>{CSS}</style></head><body><main>",
        section_header(s, study, generated, worst), nav, text,
        f"<footer>Written by elastofe {esc(__version__)} from the files of {esc(out_dir.name)}.</footer>"
        "</main></body></html>"]
    target = Path(target) if target is not None else out_dir / "report.html"
    write_text(target, "\n".join(parts) + "\n")
    say(f"report written to {target}")
    if pdf:
        from .pdf import print_pdf

        pdf_path = print_pdf(target, target.with_suffix(".pdf"))
        say(f"PDF written to {pdf_path}")
    return target
