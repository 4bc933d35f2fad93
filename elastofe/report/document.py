"""The verification report: one self-contained HTML file built from a run's output folder.

Inputs are the files a run writes (``summary.json``, ``result.vtu``, the line CSVs, and when
present ``comparison.json`` with its plots and ``study.json`` with its plots); the report never
reaches into the solver. Every picture is embedded as a base64 PNG, the style sheet is inline and
nothing refers to the network, so the file reads the same offline and when mailed on.

Key numbers carry ``data-key`` (a dotted path into summary.json) and ``data-value`` (the full
value) attributes, so a test or a reviewer's script can match them against the summary.
"""
from __future__ import annotations

import base64
import datetime as _dt
import html
import json
import math
import platform
from pathlib import Path
from typing import Callable, Optional

from ..files import amended, current_dir, safe_name, write_text
from ..version import __version__
from ..plotting import STATUS_COLORS

CSS = """
:root { --ink:#1f2327; --mute:#5d646b; --rule:#d9dcd3; --paper:#ffffff; --band:#f3f4ee; --accent:#31688e; }
* { box-sizing: border-box; }
body { margin:0; background:#e9ebe4; color:var(--ink); font:15px/1.45 "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
main { max-width:1040px; margin:0 auto; background:var(--paper); padding:28px 40px 48px; }
header.top { border-bottom:4px solid var(--accent); padding-bottom:12px; margin-bottom:18px; }
header.top .kicker { text-transform:uppercase; letter-spacing:.12em; font-size:12px; color:var(--mute); }
h1 { font-size:26px; margin:4px 0 6px; }
h2 { font-size:19px; margin:34px 0 10px; padding:4px 0 4px 10px; border-left:6px solid var(--accent); background:var(--band); }
h3 { font-size:15px; margin:20px 0 6px; color:var(--accent); }
p.meta { color:var(--mute); margin:2px 0; font-size:13px; }
.caution { border:2px solid #d98c00; background:#fff7e6; padding:10px 14px; margin:14px 0; }
.caution b { color:#8a5800; }
table { border-collapse:collapse; margin:6px 0 12px; font-size:13.5px; }
th, td { border-bottom:1px solid var(--rule); padding:4px 10px 4px 0; text-align:left; vertical-align:top; }
th { color:var(--mute); font-weight:600; font-size:12.5px; }
td.wrap { font-size:12px; min-width:150px; }
td.num { text-align:right; font-variant-numeric:tabular-nums; white-space:nowrap; }
.badge { display:inline-block; padding:1px 9px; border-radius:9px; color:#fff; font-size:12px; font-weight:700; text-transform:uppercase; }
figure { margin:12px 0 18px; }
figure img { max-width:100%; border:1px solid var(--rule); }
.grid { display:flex; flex-wrap:wrap; gap:0 2%; }
.grid figure { width:48%; }
figcaption { font-size:12.5px; color:var(--mute); margin-top:4px; }
.summary-strip { display:flex; gap:12px; flex-wrap:wrap; margin:10px 0; }
.summary-strip div { background:var(--band); padding:8px 12px; min-width:180px; }
.summary-strip .k { font-size:11.5px; color:var(--mute); text-transform:uppercase; letter-spacing:.06em; }
.summary-strip .v { font-size:18px; font-weight:700; }
pre { background:var(--band); padding:10px; font-size:12px; overflow-x:auto; white-space:pre-wrap; }
code { font-size:12.5px; }
footer { margin-top:40px; font-size:12px; color:var(--mute); border-top:1px solid var(--rule); padding-top:8px; }
"""

CAUTIONS = [
    "This is a linear-elastic, small-displacement analysis: material yielding, contact, large rotations, "
    "buckling and dynamic effects are outside it.",
    "Results depend on the idealised supports, loads and mesh given to the tool. Stresses at the edges of "
    "idealised supports and loads and at sharp re-entrant corners depend on the mesh and do not converge.",
    "This report is no substitute for the judgement of a licensed engineer or for the governing codes and "
    "standards. Check every result that matters.",
]


DENSITY_UNITS = {'mm': 't/mm³', 'm': 'kg/m³', 'in': 'lbf·s²/in⁴'}


def esc(v) -> str:
    return html.escape(str(v), quote=True)


def fmt(v, digits: int = 5) -> str:
    """A number for people: ``digits`` significant figures; blanks for None/NaN."""
    if v is None:
        return "–"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, int):
        return f"{v:,}"
    try:
        x = float(v)
    except (TypeError, ValueError):
        return esc(v)
    if not math.isfinite(x):
        return "–"
    return f"{x:.{digits}g}"


def vec(v, digits: int = 5) -> str:
    return "(" + ", ".join(fmt(c, digits) for c in v) + ")" if v is not None else "–"


def num(v, key: Optional[str] = None, unit: str = "", digits: int = 5) -> str:
    """A table cell with a number, tagged with its summary key and full value when ``key`` is given."""
    attr = ""
    if key is not None and isinstance(v, (int, float)) and not isinstance(v, bool):
        attr = f' data-key="{esc(key)}" data-value="{esc(repr(float(v)))}"'
    u = f" {esc(unit)}" if unit else ""
    return f'<td class="num"{attr}>{fmt(v, digits)}{u}</td>'


def badge(status: str) -> str:
    color = STATUS_COLORS.get(status, {"agree": STATUS_COLORS["pass"], "disagree": STATUS_COLORS["fail"]}
                              .get(status, STATUS_COLORS["skip"]))
    return f'<span class="badge" style="background:{color}">{esc(status)}</span>'


def image(path: Path, alt: str, caption: str = "") -> str:
    """An embedded PNG figure (base64 data URI)."""
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    cap = f"<figcaption>{caption}</figcaption>" if caption else ""
    return f'<figure><img alt="{esc(alt)}" src="data:image/png;base64,{data}">{cap}</figure>'


def table(head: list[str], rows: list[str], cls: str = "") -> str:
    h = "".join(f"<th>{esc(c)}</th>" for c in head)
    c = f' class="{cls}"' if cls else ""
    return f"<table{c}><thead><tr>{h}</tr></thead><tbody>{''.join(rows)}</tbody></table>"


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
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None


# ----------------------------------------------------------------------------- sections
def section_model(s: dict) -> str:
    u = s["units"]
    L, F, S = u["length"], u["force"], u["stress"]
    inp = s.get("inputs", {})
    geo = inp.get("geometry_file", {"path": s.get("geometry_file"), "sha256": None})
    mesh = s["mesh"]
    q = (s.get("checks") or {}).get("element_quality", {}).get("details", {})
    out = ["<h2 id='model'>1. The model</h2>", "<h3>Geometry and mesh</h3>"]
    rows = [f"<tr><th>geometry file</th><td><code>{esc(Path(str(geo.get('path'))).name)}</code></td></tr>",
            f"<tr><th>geometry sha256</th><td><code>{esc(geo.get('sha256') or '–')}</code></td></tr>",
            f"<tr><th>element type</th><td>{'10-node (TET10)' if mesh['order'] == 2 else '4-node (TET4)'} tetrahedra</td></tr>",
            f"<tr><th>nodes</th>{num(mesh['nodes'], 'mesh.nodes')}</tr>",
            f"<tr><th>elements</th>{num(mesh['elements'], 'mesh.elements')}</tr>",
            f"<tr><th>degrees of freedom</th>{num(mesh['dofs'], 'mesh.dofs')}</tr>",
            f"<tr><th>target element size</th>{num(mesh.get('size'), 'mesh.size', L)}</tr>",
            f"<tr><th>shape quality (mean ratio), worst</th>{num(mesh.get('min_quality'), 'mesh.min_quality')}</tr>"]
    if q:
        rows += [f"<tr><th>aspect ratio, worst / mean</th><td class='num'>{fmt(q.get('aspect_ratio_max'), 4)} / "
                 f"{fmt(q.get('aspect_ratio_mean'), 4)}</td></tr>",
                 f"<tr><th>Jacobian ratio, worst</th>{num(q.get('jacobian_ratio_min'), None, '', 4)}</tr>",
                 f"<tr><th>poor elements (aspect &gt; {fmt(q.get('aspect_limit'))} or Jacobian ratio &lt; "
                 f"{fmt(q.get('jacobian_limit'))})</th>{num(q.get('poor'), 'checks.element_quality.details.poor')}</tr>"]
    out.append(table(["", ""], rows))
    m = s.get("material", {})
    out.append("<h3>Material (isotropic, linear elastic)</h3>")
    mrows = [f"<tr><th>Young's modulus E</th>{num(m.get('E'), 'material.E', S)}</tr>",
             f"<tr><th>Poisson's ratio ν</th>{num(m.get('nu'), 'material.nu')}</tr>"]
    if m.get("density") is not None:
        mrows.append(f"<tr><th>density</th>{num(m.get('density'), 'material.density', DENSITY_UNITS.get(s.get('units', {}).get('length'), 'case units'))}</tr>")
    if m.get("yield_strength") is not None:
        mrows.append(f"<tr><th>yield strength</th>{num(m.get('yield_strength'), 'material.yield_strength', S)}</tr>")
    out.append(table(["", ""], mrows))
    out.append("<h3>Supports</h3>")
    srows = []
    for k, sp in enumerate(s.get("supports", [])):
        srows.append(f"<tr><td>{esc(sp['label'])}</td><td>{esc(sp['fix'])}</td>{num(sp['area'], f'supports.{k}.area', L + '²')}"
                     f"<td class='num'>{vec(sp['reaction'])} {esc(F)}</td></tr>")
    out.append(table(["support", "held components", "region area", "reaction force on the part"], srows))
    out.append("<h3>Loads</h3>")
    lrows = []
    for k, ld in enumerate(s.get("loads", [])):
        area = num(ld.get("area"), f"loads.{k}.area", L + "²") if ld.get("area") is not None else "<td>whole part</td>"
        lrows.append(f"<tr><td>{esc(ld['label'])}</td>{area}<td class='num'>{vec(ld['force'])} {esc(F)}</td></tr>")
    lrows.append(f"<tr><th>total applied</th><td></td><td class='num'>{vec(s['applied_force'])} {esc(F)}</td></tr>")
    out.append(table(["load", "region area", "total force"], lrows))
    return "\n".join(out)


def section_results(s: dict) -> str:
    u = s["units"]
    L, F, S = u["length"], u["force"], u["stress"]
    away = s.get("peak_away_from_supports_and_loads") or {}
    out = ["<h2 id='results'>2. Results</h2>", "<div class='summary-strip'>",
           f"<div><div class='k'>max displacement</div><div class='v' data-key='max_displacement.value' "
           f"data-value='{esc(repr(s['max_displacement']['value']))}'>{fmt(s['max_displacement']['value'])} {esc(L)}</div></div>",
           f"<div><div class='k'>max von Mises (nodal average)</div><div class='v' data-key='max_von_mises.value' "
           f"data-value='{esc(repr(s['max_von_mises']['value']))}'>{fmt(s['max_von_mises']['value'])} {esc(S)}</div></div>"]
    if away.get("value") is not None:
        out.append(f"<div><div class='k'>max von Mises away from supports and loads</div><div class='v' "
                   f"data-key='peak_away_from_supports_and_loads.value' data-value='{esc(repr(away['value']))}'>"
                   f"{fmt(away['value'])} {esc(S)}</div></div>")
    out.append(f"<div><div class='k'>equilibrium error</div><div class='v' data-key='equilibrium_error' "
               f"data-value='{esc(repr(s['equilibrium_error']))}'>{s['equilibrium_error']:.2e}</div></div></div>")
    rows = [f"<tr><th>max displacement</th>{num(s['max_displacement']['value'], 'max_displacement.value', L)}"
            f"<td>at {vec(s['max_displacement']['at'])}</td></tr>",
            f"<tr><th>max von Mises</th>{num(s['max_von_mises']['value'], 'max_von_mises.value', S)}"
            f"<td>at {vec(s['max_von_mises']['at'])}</td></tr>"]
    if away.get("value") is not None:
        rows.append(f"<tr><th>max von Mises more than two elements from every support and load</th>"
                    f"{num(away['value'], 'peak_away_from_supports_and_loads.value', S)}<td>at {vec(away['at'])}</td></tr>")
    for name, r in s.get("reactions", {}).items():
        rows.append(f"<tr><th>reaction on {esc(name)}</th><td class='num'>{vec(r['force'])} {esc(F)}</td>"
                    f"<td>moment about the origin {vec(r['moment'])} {esc(u.get('moment', ''))}</td></tr>")
    rows.append(f"<tr><th>strain energy</th>{num(s.get('strain_energy'), 'strain_energy', u.get('energy', ''))}<td></td></tr>")
    solver = s.get("solver", {})
    rows.append(f"<tr><th>linear solver</th><td>{esc(solver.get('backend', '–'))}</td>"
                f"<td>relative residual {fmt(solver.get('relative_residual'), 3)}</td></tr>")
    out.append(table(["quantity", "value", "where"], rows))
    if s.get("points"):
        out.append("<h3>Named points</h3>")
        prow = []
        for name, p in s["points"].items():
            umag = math.sqrt(sum(c * c for c in p["displacement"]))
            pr = p.get("principal") or [None] * 3
            prow.append(f"<tr><td>{esc(name)}</td><td class='num'>{vec(p['at'], 6)}</td>"
                        f"<td class='num'>{vec(p['displacement'], 4)}</td><td class='num'>{fmt(umag)}</td>"
                        f"{num(p['von_mises'], f'points.{name}.von_mises')}<td class='num'>{vec(pr, 4)}</td></tr>")
        out.append(table(["point", f"at [{L}]", f"displacement [{L}]", f"|u| [{L}]", f"von Mises [{S}]",
                          f"principal σ1, σ2, σ3 [{S}]"], prow))
    return "\n".join(out)


def section_pictures(pics: dict, out_dir: Path) -> str:
    out = ["<h2 id='pictures'>3. Pictures</h2>",
           f"<p class='meta'>Drawn with {esc(pics.get('renderer', '?'))}. Colour map: viridis (perceptually "
           f"uniform). Displacements are drawn magnified {fmt(pics.get('scale'))} times; the grey outline is the "
           "undeformed part. The ring marks the peak of each picture.</p>"]
    for p in pics.get("pictures", []):
        f = out_dir / p["file"]
        if not f.is_file():
            continue
        vis = p.get("peak_visible")
        vtxt = ("the peak is in direct view (checked by a ray from the camera)" if vis else
                "the view could not be checked for the peak's visibility" if vis is None else
                "no direction gave a clear view of the peak; it may be hidden behind the part")
        cap = (f"{esc(p['file'])}: peak {fmt(p['peak_value'])} at {vec(p['peak'], 4)} (deformed position); "
               f"viewed from direction {vec(p['view_direction'], 2)}; {vtxt}.")
        out.append(image(f, p["file"], cap))
    return "\n".join(out)


def section_lines(s: dict, out_dir: Path, figures: dict) -> str:
    if not s.get("lines"):
        return ""
    out = ["<h2 id='lines'>4. Along the lines</h2>"]
    for name, fname in s["lines"].items():
        fig = figures.get(name)
        if fig is None:
            continue
        est = " The dashed line is the beam-theory estimate M·y/I with the local section." if fig["estimate"] else ""
        out.append(f"<h3>Line '{esc(name)}'</h3>")
        out.append(image(out_dir / fig["file"], f"line {name}", f"Samples from <code>{esc(fname)}</code>.{est}"))
        lin = (s.get("linearized") or {}).get(name)
        vm = lin.get("von_mises") if isinstance(lin, dict) else None
        if isinstance(vm, dict):
            def se(v):
                return (v.get("start"), v.get("end")) if isinstance(v, dict) else (v, v)

            S = s["units"]["stress"]
            rows = []
            for label, key in (("membrane", "membrane"), ("membrane + bending", "membrane_plus_bending"),
                               ("total (membrane + bending + peak)", "total")):
                a, b = se(vm.get(key))
                rows.append(f"<tr><td>{label}</td>{num(a)}{num(b)}</tr>")
            out.append("<p class='meta'>Stress linearization along the line (membrane, bending and peak parts, "
                       "as in ASME BPVC VIII-2 Part 5): von Mises of each part.</p>")
            out.append(table(["part", f"at the start [{S}]", f"at the end [{S}]"], rows))
    return "\n".join(out)


def section_estimates(s: dict) -> str:
    est = s.get("estimates")
    if not isinstance(est, dict) or not est:
        return ""
    u = s["units"]
    out = ["<h2 id='estimates'>5. Beam-theory estimates</h2>"]
    for bname, e in est.items():
        if not isinstance(e, dict):
            continue
        out.append(f"<h3>Beam '{esc(bname)}'</h3>")
        if e.get("sources"):
            out.append(f"<p class='meta'>{esc(e['sources'])}</p>")
        rows = []
        d = e.get("load_point_deflection") or {}
        if isinstance(d, dict) and d.get("estimate") is not None:
            rows.append(f"<tr><td>deflection at the load point</td>{num(d.get('estimate'))}{num(d.get('fe'))}"
                        f"<td class='num'>{fmt(None if d.get('relative_difference') is None else 100 * d['relative_difference'], 3)} %</td></tr>")
        for pname, p in (e.get("points") or {}).items():
            for kind in ("deflection", "bending_stress"):
                v = p.get(kind) if isinstance(p, dict) else None
                if isinstance(v, dict):
                    rel = v.get("relative_difference")
                    rows.append(f"<tr><td>{kind.replace('_', ' ')} at point {esc(pname)}</td>{num(v.get('estimate'))}"
                                f"{num(v.get('fe'))}<td class='num'>{fmt(None if rel is None else 100 * rel, 3)} %</td></tr>")
        for lname, ln in (e.get("lines") or {}).items():
            if isinstance(ln, dict) and ln.get("estimate_extremes"):
                ee, ff = ln["estimate_extremes"], ln.get("fe_extremes") or [None, None]
                rows.append(f"<tr><td>extreme-fibre bending stress on line {esc(lname)}</td>"
                            f"<td class='num'>{vec(ee, 4)}</td><td class='num'>{vec(ff, 4)}</td>"
                            f"<td class='num'>departs from linear by {fmt(100 * (ln.get('fe_departure_from_linear') or 0), 3)} %</td></tr>")
        out.append(table(["quantity", "estimate", "this run", "difference"], rows))
        for n in e.get("notes") or []:
            out.append(f"<p class='meta'>Note: {esc(n)}</p>")
    out.append(f"<p class='meta'>Lengths in {esc(u['length'])}, stresses in {esc(u['stress'])}.</p>")
    return "\n".join(out)


def section_study(study: dict, out_dir: Path, make_plot: Callable) -> str:
    out = ["<h2 id='convergence'>6. Mesh convergence</h2>"]
    if study.get("method"):
        out.append(f"<p class='meta'>{esc(study['method'])}</p>")
    lrows = [f"<tr><td>{lv.get('level')}</td>{num(lv.get('size'))}{num(lv.get('nodes'))}{num(lv.get('elements'))}"
             f"{num(lv.get('dofs'))}{num(lv.get('h'))}{num(lv.get('wall_s'), None, 's', 3)}</tr>"
             for lv in study.get("levels", [])]
    out.append(table(["level", "size", "nodes", "elements", "DOF", "h", "time"], lrows))
    qrows = []
    for name, q in (study.get("quantities") or {}).items():
        vals = " → ".join(fmt(v, 5) for v in q.get("values", []))
        gci = q.get("gci_fine")
        qrows.append(f"<tr><td>{esc(name)}</td><td>{esc(q.get('unit', ''))}</td><td class='num'>{vals}</td>"
                     f"{num(q.get('observed_order'), None, '', 3)}{num(q.get('extrapolated'))}"
                     f"<td class='num'>{fmt(None if gci is None else 100 * gci, 3)} %</td>"
                     f"<td>{esc(q.get('convergence') or q.get('status', ''))}{' — singular' if q.get('singular') else ''}</td>"
                     f"<td>{esc(q.get('advice', ''))}</td></tr>")
    out.append(table(["quantity", "unit", "values, coarse → fine", "observed order", "extrapolated", "GCI (finest)",
                      "convergence", "advice"], qrows))
    plots = study.get("plots") or {}
    shown = 0
    for name, q in (study.get("quantities") or {}).items():
        if q.get("status") != "assessed" or shown >= 8:
            continue
        f = out_dir / plots[name] if name in plots else None
        if f is None or not f.is_file():
            f = make_plot(name, q, study)
        if f is not None and Path(f).is_file():
            out.append(image(Path(f), f"convergence of {name}", f"Convergence of {esc(name)}."))
            shown += 1
    return "\n".join(out)


def _worst(e: dict) -> str:
    w = e.get("worst")
    if not w:
        return "–"
    return f"{vec(w['at'], 4)}: {fmt(w['reference'])} → {fmt(w['ours'])}"


def section_comparison(c: dict, out_dir: Path, length_unit: str = "") -> str:
    out = ["<h2 id='comparison'>7. Comparison with the reference results</h2>",
           f"<p>Reference: <b>{esc(c.get('label') or 'unlabelled')}</b>. Overall verdict {badge(c['verdict'])}: "
           f"<span data-key='comparison.within_tolerance' data-value='{c['within_tolerance']}'>{c['within_tolerance']}</span> of "
           f"<span data-key='comparison.compared' data-value='{c['compared']}'>{c['compared']}</span> compared values within "
           f"tolerance; {c['points_outside']} reference point(s) lie outside the part and were not compared.</p>",
           f"<p class='meta'>Tolerance rule: {esc(c.get('rule', ''))}. Points outside our mesh by at most "
           f"{fmt(c.get('snap_distance'), 3)} {esc(length_unit)} were moved to the nearest point of our surface.</p>"]
    if c.get("scalars"):
        rows = []
        for s in c["scalars"]:
            rel = s.get("relative_difference")
            rows.append(f"<tr><td>{esc(s['name'])}</td><td>{esc(s['unit'])}</td>{num(s['reference'])}{num(s['ours'])}"
                        f"{num(s['difference'], None, '', 4)}<td class='num'>{fmt(None if rel is None else 100 * rel, 3)} %</td>"
                        f"<td>{esc(s['tolerance'])}</td><td>{badge(s['verdict'])}</td></tr>")
        out.append("<h3>Scalars</h3>")
        out.append(table(["quantity", "unit", "reference", "this run", "difference", "relative", "tolerance", "verdict"], rows))
    for st in c.get("sets", []):
        out.append(f"<h3>{esc(Path(st['file']).name)} ({'points CSV' if st['kind'] == 'points' else 'VTU/VTK point data'})</h3>")
        meta = f"sha256 <code>{esc(st['sha256'])}</code>; {st['points']} points"
        if st.get("label"):
            meta = esc(st["label"]) + "; " + meta
        out.append(f"<p class='meta'>{meta}</p>")
        if st.get("notes"):
            out.append(f"<p class='meta'>Notes in the file: {esc(' '.join(st['notes']))}</p>")
        rows = []
        for q, e in st["quantities"].items():
            mr = e.get("max_relative_difference")
            rr = e.get("rms_relative_difference")
            rows.append(f"<tr><td>{esc(q)}</td><td>{esc(e['unit'])}</td>"
                        f"<td class='num'>{e['compared']} / {e['snapped']} / {e['outside']}</td>"
                        f"{num(e['max_abs_difference'], None, '', 4)}{num(e['rms_difference'], None, '', 4)}"
                        f"<td class='num'>{fmt(None if mr is None else 100 * mr, 3)} % / {fmt(None if rr is None else 100 * rr, 3)} %</td>"
                        f"<td>{esc(e['tolerance'])} (±{fmt(e['allowed_difference'], 3)})</td>"
                        f"<td class='num'>{e['within']}/{e['compared']}</td><td>{badge(e['verdict'])}</td>"
                        f"<td class='wrap'>{_worst(e)}</td></tr>")
        out.append(table(["quantity", "unit", "compared / snapped / outside", "max |diff|", "RMS diff",
                          "max / RMS of scale", "tolerance", "within", "verdict",
                          "largest difference at: reference → this run"], rows))
        if st.get("outside"):
            items = "; ".join(f"#{o['index']} at {vec(o['at'], 4)} ({fmt(o['distance'], 3)} outside)" for o in st["outside"][:20])
            more = f" and {len(st['outside']) - 20} more" if len(st["outside"]) > 20 else ""
            out.append(f"<p class='meta'>Outside the part, not compared: {items}{more}.</p>")
        if st.get("snapped"):
            items = "; ".join(f"#{o['index']} moved {fmt(o['distance'], 3)}" for o in st["snapped"][:20])
            more = f" and {len(st['snapped']) - 20} more" if len(st["snapped"]) > 20 else ""
            out.append(f"<p class='meta'>Snapped onto our surface: {items}{more}.</p>")
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
    out = ["<h2 id='checks'>8. Plausibility checks</h2>",
           "<p class='meta'>Rules of thumb run on every result; a warning asks for a look, a failure says the "
           "result should not be used as it stands.</p>"]
    rows = [f"<tr><td>{esc(name.replace('_', ' '))}</td><td data-check='{esc(name)}'>{badge(c['status'])}</td>"
            f"<td>{esc(c['why'])}</td></tr>" for name, c in checks.items()]
    out.append(table(["check", "status", "why"], rows))
    return "\n".join(out)


def section_trace(s: dict, generated: str, versions: dict) -> str:
    out = ["<h2 id='trace'>9. Traceability</h2>"]
    rows = [f"<tr><th>report written</th><td>{esc(generated)}</td></tr>",
            f"<tr><th>run finished</th><td>{esc(s.get('run_at', '–'))}</td></tr>"]
    for k, v in (s.get("inputs") or {}).items():
        rows.append(f"<tr><th>{esc(k)}</th><td><code>{esc(v.get('path'))}</code><br>sha256 <code>{esc(v.get('sha256'))}</code></td></tr>")
    t = s.get("timings") or {}
    if t:
        rows.append("<tr><th>time per stage</th><td>" + ", ".join(f"{esc(k)} {fmt(v, 3)} s" for k, v in t.items()) + "</td></tr>")
    rows.append(f"<tr><th>peak memory</th><td>{fmt(s.get('peak_memory_mb'))} MiB</td></tr>")
    out.append(table(["", ""], rows))
    out.append("<h3>Software</h3>")
    out.append(table(["package", "version"], [f"<tr><td>{esc(k)}</td><td>{esc(v)}</td></tr>" for k, v in versions.items()]))
    case_file = s.get("case_file")
    if case_file and Path(case_file).is_file():
        out.append("<h3>Case file as solved</h3>")
        out.append(f"<pre>{esc(Path(case_file).read_text(encoding='utf-8', errors='replace'))}</pre>")
    return "\n".join(out)


def find_study(out_dir: Path, summary: dict) -> tuple[Optional[dict], Path]:
    """The convergence study of the same case: ``study.json`` in the output folder, else in the
    study command's default folder next to the case (``CASE-study``). A study of another case
    file is not used."""
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
def _number_sections(text: str) -> str:
    """Renumber the ``<h2>`` headings 1, 2, ... in order (optional sections may be absent)."""
    import itertools
    import re

    counter = itertools.count(1)
    return re.sub(r"(<h2 id='[^']+'>)\d+\. ", lambda m: f"{m.group(1)}{next(counter)}. ", text)


def write_report(out_dir: Path, progress: Optional[Callable[[str, str], None]] = None,
                 target: Optional[Path] = None, *, folder: Optional[Path] = None) -> Path:
    """Build ``report.html`` from the run's output folder ``out_dir``; returns its path.

    Renders the pictures (``picture-*.png``) and line plots (``report-line-*.png``) into the
    folder first. ``folder``: the results folder the report will be shown in, when ``out_dir`` is
    a run's staged folder (a study.json there is looked for as in ``out_dir``).

    Raises
    ------
    FileNotFoundError
        When ``out_dir`` holds no summary.json (run the case first).
    """
    out_dir = Path(out_dir)
    if target is None and current_dir(out_dir) is not None:
        # A results folder showing a run: the report joins that run as a new version of it,
        # shown by one atomic switch (never written beside the run's files piecemeal).
        with amended(out_dir) as st:
            _write_report(st.dir, progress, None, out_dir)
        return out_dir / "report.html"
    return _write_report(out_dir, progress, target, Path(folder) if folder is not None else out_dir)


def _write_report(out_dir: Path, progress: Optional[Callable[[str, str], None]],
                  target: Optional[Path], folder: Path) -> Path:
    from .plots import convergence_plot, line_plot, read_line_csv
    from .render import render_pictures

    def say(msg: str) -> None:
        if progress is not None:
            progress("report", msg)

    s = _load(out_dir / "summary.json")
    if s is None:
        raise FileNotFoundError(f"{out_dir / 'summary.json'} is missing or unreadable; run the case first")
    comparison = _load(out_dir / "comparison.json")
    study, study_dir = find_study(folder, s)
    say("rendering pictures ...")
    pics = render_pictures(out_dir / "result.vtu", out_dir, {
        "labels": s["units"], "peak_von_mises": s["max_von_mises"]["at"],
        "peak_displacement": s["max_displacement"]["at"]})
    say(f"pictures drawn with {pics['renderer'].split(' (')[0]}")
    write_text(out_dir / "pictures.json", json.dumps(pics, indent=2) + "\n")
    figures = {}
    for name, fname in (s.get("lines") or {}).items():
        f = out_dir / fname
        if f.is_file():
            figures[name] = line_plot(name, read_line_csv(f), s, out_dir / f"report-line-{fname[5:-4]}.png")

    def make_conv(name, q, st):
        safe = safe_name(name)
        return out_dir / convergence_plot(name, q, st, out_dir / f"report-conv-{safe}.png")

    generated = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")
    checks = s.get("checks") or {}
    worst = s.get("checks_worst") or "pass"
    nav = ["model", "results", "pictures"] + (["lines"] if figures else []) + \
        (["estimates"] if s.get("estimates") else []) + (["convergence"] if study else []) + \
        (["comparison"] if comparison else []) + ["checks", "trace"]
    parts = [
        "<!DOCTYPE html>", "<html lang='en'><head><meta charset='utf-8'>",
        f"<title>Verification report: {esc(s.get('title') or 'elastofe run')}</title>",
        "<meta name='viewport' content='width=device-width, initial-scale=1'>",
        f"<style>{CSS}</style></head><body><main>",
        "<header class='top'><div class='kicker'>elastofe · independent second solve · verification report</div>",
        f"<h1>{esc(s.get('title') or 'Untitled case')}</h1>",
        f"<p class='meta'>Case file <code>{esc(Path(str(s.get('case_file') or '–')).name)}</code> · "
        f"written {esc(generated)} · elastofe {esc(__version__)}</p>",
        f"<p class='meta'>Plausibility checks, worst {badge(worst)}: "
        + " · ".join(f"{esc(k.replace('_', ' '))}&nbsp;{badge(v['status'])}" for k, v in checks.items()) + "</p>",
    ]
    if comparison:
        parts.append(f"<p class='meta'>Comparison with the reference: {badge(comparison['verdict'])}</p>")
    parts.append("<p class='meta'>Contents: " + " · ".join(f"<a href='#{n}'>{n}</a>" for n in nav) + "</p></header>")
    parts.append("<div class='caution'><b>Cautions.</b><ul>" + "".join(f"<li>{esc(c)}</li>" for c in CAUTIONS)
                 + f"</ul><div>{esc(s.get('caution', ''))}</div></div>")
    parts.append(section_model(s))
    parts.append(section_results(s))
    parts.append(section_pictures(pics, out_dir))
    parts.append(section_lines(s, out_dir, figures))
    parts.append(section_estimates(s))
    if study:
        say("convergence study found: adding it")
        parts.append(section_study(study, study_dir, make_conv))
    if comparison:
        parts.append(section_comparison(comparison, out_dir, s["units"]["length"]))
    parts.append(section_checks(s))
    parts.append(section_trace(s, generated, _versions()))
    parts.append(f"<footer>Written by elastofe {esc(__version__)}. {esc(CAUTIONS[2])}</footer></main></body></html>")
    target = Path(target) if target is not None else out_dir / "report.html"
    write_text(target, _number_sections("\n".join(p for p in parts if p) + "\n"))
    say(f"report written to {target}")
    return target
