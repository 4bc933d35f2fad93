"""The command line: argument parsing and printing only.

``main(argv) -> int`` so tests call it directly. Exit codes: 0 success, 2 bad case or input,
3 model cannot be solved, 1 anything else.
"""
from __future__ import annotations

import argparse
import json
import logging
import math
import sys
import time
from pathlib import Path

from .errors import CaseError, ModelError, printable
from .parallel import launched_rank as _launched_rank
from .parallel import launched_ranks as _launched_ranks
from .regions import vector_text
from .version import __version__

MODELS = Path(__file__).resolve().parent / "models"  # demo parts and cases, shipped inside the package


class _Printer:
    """Progress lines on stderr with elapsed time."""

    def __init__(self, stream=None, quiet: bool = False):
        self.stream = stream or sys.stderr
        self.t0 = time.perf_counter()
        self.quiet = quiet

    def __call__(self, stage: str, message: str) -> None:
        if not self.quiet:
            print(f"[{time.perf_counter() - self.t0:7.2f} s] {stage:<9} {message}", file=self.stream, flush=True)


def _fmt(v: float) -> str:
    return f"{v:.5g}"


#: Exit codes (documented in docs/usage.md): 0 done; 1 internal error; 2 bad input; 3 the model cannot
#: be solved; 4 solved, results written, but a plausibility check FAILs; 5 solved, results written,
#: but the comparison with the reference disagrees or compared nothing (5 wins when both apply);
#: 6 verify: a benchmark outside its tolerance; 130 interrupted (Ctrl-C); 143 terminated (SIGTERM).
EXIT_OK, EXIT_INTERNAL, EXIT_INPUT, EXIT_UNSOLVABLE = 0, 1, 2, 3
EXIT_CHECK_FAILED, EXIT_DISAGREE, EXIT_VERIFY_OUTSIDE = 4, 5, 6


def text_width(stream) -> int:
    """Columns to wrap printed text to: the terminal's width, or 100 when not a terminal."""
    import shutil

    try:
        if stream.isatty():
            return max(40, shutil.get_terminal_size((100, 24)).columns)
    except (AttributeError, ValueError, OSError):
        pass
    return 100


def emit(stream, text: str, indent: int = 2, hang: int = 4) -> None:
    """Print ``text`` wrapped to the stream's width: the first line indented by ``indent`` spaces,
    the following ones by ``indent + hang`` (never cut: long words are kept whole)."""
    import textwrap

    width = text_width(stream)
    print(textwrap.fill(text, width=width, initial_indent=" " * indent, subsequent_indent=" " * (indent + hang),
                        break_long_words=False, break_on_hyphens=False), file=stream)


def exit_code_of(doc: dict | None, comparison: dict | None = None) -> int:
    """The exit code of a solved run from its summary.json document and comparison."""
    # A comparison that compared nothing (every reference point outside the part: another unit or
    # origin?) shows no agreement either: a script gating on the exit code must not pass it.
    if comparison is not None and str(comparison.get("verdict", "")).lower() in ("disagree", "no data"):
        return EXIT_DISAGREE
    if doc is not None and doc.get("checks_worst") == "fail":
        return EXIT_CHECK_FAILED
    return EXIT_OK


def print_table(doc: dict, out_dir: Path, stream=None, comparison: dict | None = None) -> None:
    stream = stream or sys.stdout
    u = doc["units"]
    L, S, F = u["length"], u["stress"], u["force"]
    rows = [
        ("nodes / elements / DOF", f"{doc['mesh']['nodes']:,} / {doc['mesh']['elements']:,} / {doc['mesh']['dofs']:,}"),
        ("max displacement", f"{_fmt(doc['max_displacement']['value'])} {L} at "
                             f"({', '.join(_fmt(c) for c in doc['max_displacement']['at'])}) {L}"),
        ("max von Mises (nodal avg.)", f"{_fmt(doc['max_von_mises']['value'])} {S} at "
                                       f"({', '.join(_fmt(c) for c in doc['max_von_mises']['at'])}) {L}"),
        ("applied force", f"{vector_text(doc['applied_force'], '.5g')} {F}"),
    ]
    for name, r in doc["reactions"].items():
        rows.append((f"reaction on {name}", f"{vector_text(r['force'], '.5g')} {F}"))
    rows.append(("equilibrium error", f"{doc['equilibrium_error']:.2e} (relative)"))
    gov = doc.get("governing_peak")
    if gov and gov.get("value") is not None:
        where = f" in {gov['load_case']}" if gov.get("load_case") else ""
        where += f" in material {gov['material']}" if gov.get("material") else ""
        basis = "away from supports and loads" if gov["basis"] == "away" else "overall peak"
        rows.append(("governing von Mises", f"{_fmt(gov['value'])} {S} at ({', '.join(_fmt(c) for c in gov['at'])}) "
                     f"{L}{where} ({basis})"))
        if gov.get("utilisation") is not None:
            rows.append(("utilisation of yield",
                         f"{100 * gov['utilisation']:.3g} % (margin {100 * gov['margin']:.3g} %)"))
    for name, p in doc["points"].items():
        side = (f" (body {p['body']}, {p['material']}{', on an interface' if p.get('on_interface') else ''})"
                if "body" in p else "")
        rows.append((f"point {name}: |u|, von Mises",
                     f"{_fmt(sum(c * c for c in p['displacement']) ** 0.5)} {L}, {_fmt(p['von_mises'])} {S}{side}"))
    if len(doc.get("bodies") or []) > 1:
        for b in doc["bodies"]:
            mass = f", mass {_fmt(b['mass'])}" if b.get("mass") is not None else ""
            rows.append((f"body {b['id']}", f"{b['material']}, volume {_fmt(b['volume'])} {L}^3{mass}"))
    rows += _load_case_rows(doc)
    w = max(len(r[0]) for r in rows)
    title = doc.get("title") or "results"
    print(f"\n{title}", file=stream)
    print("-" * max(len(title), 40), file=stream)
    for k, v in rows:
        emit(stream, f"{k:<{w}}  {v}", hang=w + 2)
    print_warnings(doc, stream)
    print(f"\nresults written to {out_dir}/", file=stream)
    files = list(doc["lines"].values())
    for e in doc.get("load_cases", {}).values():  # one CSV per line and load case
        files += [f for f in e["lines"].values() if f not in files]
    fields = doc.get("fields", "result.vtu")
    emit(stream, f"summary.json{', ' + fields if fields else ''}{''.join(', ' + f for f in files)}")
    if gov and gov.get("why"):
        print("\nwhich peak governs", file=stream)
        emit(stream, gov["why"])
    print_estimates(doc, stream)
    print_checks(doc, stream)
    if comparison is not None:
        print_comparison(comparison, stream)
    print("", file=stream)
    emit(stream, f"Caution: {doc['caution']}", indent=0, hang=0)


#: Warnings shown in the table; the rest are counted (all are in summary.json).
WARNINGS_SHOWN = 10


def print_warnings(doc: dict, stream=None) -> None:
    """The run's warnings about its inputs (summary.json `warnings`), so that one shown only among
    the progress lines (or not at all with -q) is not missed beside the results."""
    stream = stream or sys.stdout
    ws = [str(w) for w in doc.get("warnings") or []]
    if not ws:
        return
    print("\nwarnings", file=stream)
    for w in ws[:WARNINGS_SHOWN]:
        emit(stream, w)
    if len(ws) > WARNINGS_SHOWN:
        emit(stream, f"... and {len(ws) - WARNINGS_SHOWN} more (summary.json, warnings)")


def print_estimates(doc: dict, stream=None) -> None:
    """The beam-theory expectation of each [[beam]] beside the FE value (summary.json `estimates`)."""
    stream = stream or sys.stdout
    est = doc.get("estimates") or {}
    if not est:
        return
    L, S = doc["units"]["length"], doc["units"]["stress"]
    print("\nbeam-theory expectation against this run", file=stream)
    for name, e in est.items():
        d = e.get("load_point_deflection") or {}
        if d.get("estimate") is not None and d.get("fe") is not None:
            rel = d.get("relative_difference")
            rel = f" ({100 * rel:+.2f} %)" if rel is not None else ""
            lo, hi = d.get("stiff_bound"), d.get("soft_bound")
            if d.get("fe_within_bounds") is None or (
                    lo is not None and hi is not None and abs(hi - lo) <= 1e-9 * max(abs(lo), abs(hi))):
                # One section along the span: the bounds are the estimate itself, and "OUTSIDE" them
                # would flag every FE value, however close.
                bounds = "; one section along the span, so no bounds"
            else:
                inside = "inside" if d.get("fe_within_bounds") else "OUTSIDE"
                bounds = f"; {inside} the constant-section bounds [{_fmt(lo)}, {_fmt(hi)}] {L}"
            print(f"  {name}: load-point deflection estimate {_fmt(d['estimate'])} {L}, this run "
                  f"{_fmt(d['fe'])} {L}{rel}{bounds}", file=stream)
        for ln, v in (e.get("lines") or {}).items():
            if v.get("estimate_extremes") and v.get("fe_extremes"):
                lin, dev = v.get("fe_departure_from_linear"), v.get("fe_departure_from_estimate")
                dev = f"{100 * dev:.2f} % from the estimate" if dev is not None else "no estimate to compare (zero)"
                if lin is not None:
                    judged = f"departs {100 * lin:.2f} % from linear, {dev}"
                elif v.get("fe_slope") is None:
                    judged = f"along one fibre: departs {dev}"
                else:
                    judged = f"linearity: cannot judge (no stress on the line); {dev}"
                print(f"  {name}, line {ln}: M·y/I extremes {_fmt(v['estimate_extremes'][0])} / "
                      f"{_fmt(v['estimate_extremes'][1])} {S}, this run {_fmt(v['fe_extremes'][0])} / "
                      f"{_fmt(v['fe_extremes'][1])} {S}; {judged}", file=stream)


def _load_case_rows(doc: dict) -> list[tuple[str, str]]:
    """Table rows for named load cases and combinations (none for a single implicit case)."""
    if "load_cases" not in doc:
        return []
    u = doc["units"]
    rows = [("load case shown above", str(doc.get("load_case")))]
    for name, e in doc["load_cases"].items():
        rows.append((f"{e['kind']} {name}: max |u|, von Mises",
                     f"{_fmt(e['max_displacement']['value'])} {u['length']}, "
                     f"{_fmt(e['max_von_mises']['value'])} {u['stress']} (equilibrium {e['equilibrium_error']:.1e})"))
    env = doc["envelope"]["max_von_mises"]
    rows.append(("envelope of von Mises", f"{_fmt(env['value'])} {u['stress']} in {env['case']} at "
                 f"({', '.join(_fmt(c) for c in env['at'])}) {u['length']}"))
    return rows


def case_path_of(arg: str) -> Path:
    """The CASE argument as a path; a missing file, a folder, a pipe or device, a loop of links, a
    path too long or a file too large for a case file is a command-line mistake (checked with
    ``os.stat`` before anything opens it)."""
    from .files import CASE_FILE_MAX, check_input_file, size_text

    check_input_file(arg, "CASE", max_bytes=CASE_FILE_MAX, limit_reason=f"a case file is at most "
                     f"{size_text(CASE_FILE_MAX)}", not_found="file not found; give the path of a case file (TOML)")
    return Path(arg)


def cmd_run(args) -> int:
    from .case import load_case
    from .job import default_out, run_case, with_solver

    case_path = case_path_of(args.case)
    case = with_solver(load_case(case_path), args.solver)
    out = Path(args.out) if args.out else default_out(case_path)
    if getattr(args, "require_reference", False) and case.reference is None:
        raise CaseError("reference", None, "the case has no [reference] section: add one naming the other "
                                           "solver's results (see docs/comparing.md)")
    if case.solver.backend == "petsc" or _launched_ranks() > 1:
        from .parallel.cli import check_distributed

        check_distributed(case, out, _check_writable)  # rank 0 checks `out` for every rank
    else:
        _check_writable(out)
    pdf = bool(getattr(args, "pdf", False))
    if pdf:
        from .report.pdf import MISSING, find_browser

        if find_browser() is None:  # refused before any solving
            raise CaseError("--pdf", None, MISSING)
    printer = _Printer(quiet=args.quiet or _launched_rank() > 0)
    outcome = run_case(case, out, overwrite=bool(getattr(args, "overwrite", False)), progress=printer,
                       report=bool(getattr(args, "report", False)) or pdf, pdf=pdf,
                       write_on_this_rank=_launched_rank() == 0)
    if outcome.result is None:  # a rank > 0 under mpiexec: rank 0 writes and prints
        return 0
    code = exit_code_of(outcome.summary, outcome.comparison)
    if not args.quiet:
        print_table(outcome.summary, out, comparison=outcome.comparison)
        if outcome.report is not None:
            print(f"\nreport: {outcome.report}" + (f" and {outcome.report.with_suffix('.pdf')}" if pdf else ""))
    if code == EXIT_DISAGREE and str(outcome.comparison.get("verdict", "")).lower() == "no data":
        print(f"elastofe: the comparison with the reference compared nothing: every reference value lies outside "
              f"the part (results written to {out}); exit {code}", file=sys.stderr)
    elif code == EXIT_DISAGREE:
        print(f"elastofe: the comparison with the reference disagrees (results written to {out}); exit {code}",
              file=sys.stderr)
    elif code == EXIT_CHECK_FAILED:
        failed = [k for k, c in (outcome.summary.get("checks") or {}).items() if c.get("status") == "fail"]
        print(f"elastofe: solved, but plausibility check(s) FAIL: {', '.join(failed)} (results written to {out}); "
              f"exit {code}", file=sys.stderr)
    return code


def print_checks(doc: dict, stream=None) -> None:
    """The plausibility checks as a short table: status, name, the first part of the reason."""
    stream = stream or sys.stdout
    checks = doc.get("checks") or {}
    if not checks:
        return
    print("\nplausibility checks", file=stream)
    w = max(len(k) for k in checks)
    for name, c in checks.items():
        emit(stream, f"{c['status'].upper():<4}  {name:<{w}}  {c['why']}", hang=w + 8)


def print_comparison(comp: dict, stream=None) -> None:
    """A short account of the comparison with the reference results."""
    stream = stream or sys.stdout
    print("", file=stream)
    emit(stream, f"comparison with the reference ({comp.get('label') or 'unlabelled'}): {comp['verdict'].upper()}, "
         f"{comp['within_tolerance']} of {comp['compared']} values within tolerance"
         + (f", {comp['points_outside']} point(s) outside the part (not compared)" if comp["points_outside"] else ""),
         indent=0)
    for s in comp["scalars"]:
        rel = "" if s["relative_difference"] is None else f" ({100 * s['relative_difference']:+.3g} %)"
        emit(stream, f"{s['verdict']:<8}  {s['name']}: reference {_fmt(s['reference'])}, this run "
             f"{_fmt(s['ours']) if s['ours'] is not None else '-'}{' ' + s['unit'] if s['unit'] else ''}{rel}, "
             f"tolerance {s['tolerance']}",
             hang=10)
    for st in comp["sets"]:
        for q, e in st["quantities"].items():
            mr = e["max_relative_difference"]
            mad = e["max_abs_difference"]
            emit(stream, f"{e['verdict']:<8}  {Path(st['file']).name} {q}: {e['within']}/{e['compared']} within "
                 f"{e['tolerance']}, max |diff| {_fmt(mad) if mad is not None else '-'} {e['unit']}"
                 + (f" ({100 * mr:.3g} % of the largest reference value)" if mr is not None else ""), hang=10)
        for w in st.get("warnings") or []:
            emit(stream, f"WARNING: {w}", hang=10)
    files = ", ".join(["comparison.json", "comparison.csv"] + comp.get("plots", []))
    emit(stream, f"files: {files}")


def cmd_compare(args) -> int:
    args.require_reference = True
    return cmd_run(args)


def cmd_report(args) -> int:
    folder = Path(args.case)
    if folder.is_dir():
        return _report_of_folder(folder, args)
    args.report = True
    return cmd_run(args)


def _report_of_folder(folder: Path, args) -> int:
    """``elastofe report RESULTS``: rebuild the report of a run already written (for example after a
    convergence study beside it), without solving again; the folder keeps its run, the report joins
    it as a new version (one atomic switch)."""
    from .files import current_dir
    from .report import write_report

    if args.out or args.solver or args.overwrite:
        given = next(o for o, v in (("--out", args.out), ("--solver", args.solver), ("--overwrite", args.overwrite))
                     if v)
        raise CaseError(given, str(folder), "applies to a case file; a results folder's report is rebuilt from "
                        "the run written there (give the case file to solve again)")
    shown = current_dir(folder) or folder
    if not (shown / "summary.json").is_file():
        raise CaseError("CASE", str(folder), "is a folder without a run's summary.json: give a case file (TOML), or "
                        "the results folder of a run (elastofe run CASE writes one)")
    printer = _Printer(quiet=args.quiet)
    path = write_report(folder, printer, pdf=bool(args.pdf))
    if not args.quiet:
        print(f"report: {path}")
    # The run's own verdicts, as when it was written (4: a check fails, 5: the comparison disagrees).
    doc = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    return exit_code_of(doc, doc.get("comparison"))


def _check_writable(out: Path) -> None:
    """Refuse (exit 2) an output folder that cannot be created or written, before any solving.

    The test is a real one (a temporary file or folder made and removed) because permission
    bits say nothing for root or on read-only file systems.
    """
    import os
    import tempfile

    from .files import os_problem

    out = Path(out).absolute()
    long = [part for part in out.parts if len(part.encode("utf-8", "surrogateescape")) > 255]
    if long or len(str(out).encode("utf-8", "surrogateescape")) > 4000:
        raise CaseError("--out", str(out), "the path is too long for the file system (at most 255 bytes per "
                        "name): choose a shorter --out")
    probe = out
    while not os.path.lexists(probe) and probe != probe.parent:
        probe = probe.parent
    if probe.is_symlink() and not probe.exists():
        raise CaseError("--out", str(out), f"cannot be created: {probe} is a broken symbolic link or a loop of "
                        "them; choose another folder with --out")
    if not probe.is_dir():
        raise CaseError("--out", str(out), f"cannot be created: {probe} is a file, not a folder; "
                        "choose another folder with --out")
    try:
        if probe == out:
            fd, tmp = tempfile.mkstemp(prefix=".elastofe-write-test.", dir=out)
            os.close(fd)
            os.unlink(tmp)
        else:
            os.rmdir(tempfile.mkdtemp(prefix=".elastofe-write-test.", dir=probe))
    except OSError as err:
        raise CaseError("--out", str(out), f"the output folder cannot be written ({os_problem(err)} in "
                        f"{probe}); choose another folder with --out") from None


def cmd_check(args) -> int:
    """Validate a case and its geometry without solving; print what each region matched."""
    from .job import check_case

    case_path = case_path_of(args.case)
    printer = _Printer(quiet=args.quiet or args.json)
    doc = check_case(case_path, printer, solver=args.solver)
    if args.json:
        print(json.dumps(doc, indent=2))
        return EXIT_OK
    print_check(doc)
    return EXIT_OK


def print_check(doc: dict, stream=None) -> None:
    """The findings of :func:`elastofe.job.check_case` as text."""
    stream = stream or sys.stdout
    u = doc["units"]
    L, F = u["length"], u["force"]
    title = doc.get("title") or Path(doc.get("case_file") or "case").name
    print(f"\n{title}", file=stream)
    print("-" * max(len(title), 40), file=stream)
    geo = doc.get("geometry") or {}
    for w in geo.get("warnings") or []:
        emit(stream, f"WARNING: {w}", indent=0)
    m = doc["mesh"]
    emit(stream, f"mesh: {m['nodes']:,} nodes, {m['elements']:,} elements of order {m['order']}, {m['dofs']:,} DOF",
         indent=0)
    print(f"\nregions and what they matched (lengths in {L}, areas in {L}^2)", file=stream)
    users = doc.get("region_users") or {}
    for name, entry in doc["regions"].items():
        used = ("used by " + ", ".join(users[name])) if users.get(name) else \
            "not used by a support, load or refinement"
        surfaces = entry.get("surfaces") or []
        if "nodes" in entry:
            what = f"an edge of {entry['nodes']} nodes"
        else:
            what = f"{len(surfaces)} surface{'s' if len(surfaces) != 1 else ''}, area {entry['area']:.5g}"
            if len(entry.get("patches") or []) > 1:
                what += f" in {len(entry['patches'])} separate patches"
        emit(stream, f"{name}: {what}; {used}", indent=2)
        for s in surfaces:
            # A physical group of a mesh file lists its surfaces without a fitted normal or axis.
            if s["kind"] == "plane" and "normal" in s:
                extra = f"normal {vector_text(s['normal'], '.3g')}"
            elif s["kind"] == "cylinder" and "axis" in s:
                extra = (f"axis {vector_text(s['axis'], '.3g')} through {vector_text(s['axis_point'])}, "
                         f"radius {s['radius']:.5g}")
            else:
                extra = ""
            emit(stream, f"surface {s['id']}: {s['kind']}, area {s['area']:.5g}, centroid {vector_text(s['centroid'])}"
                 + (f", {extra}" if extra else ""), indent=6)
    for w in doc.get("warnings") or []:
        emit(stream, f"WARNING: {w}", indent=0)
    if doc["loads"]:
        print("\nloads (resultant force)", file=stream)
        for ld in doc["loads"]:
            area = f" over {ld['area']:.5g} {L}^2" if ld.get("area") else ""
            emit(stream, f"{ld['label']}: {vector_text(ld['force'], '.5g')} {F}{area}")
    if doc.get("load_cases"):
        emit(stream, f"load cases: {', '.join(doc['load_cases'])}", indent=0)
    sol = doc["solve"]
    print("", file=stream)
    emit(stream, f"supports hold {doc['held_dofs']:,} DOF and restrain every rigid-body motion; the solve would "
         f"use {sol['backend']} (estimated peak memory {sol['memory_estimate_mb']:.0f} MiB)", indent=0)
    emit(stream, "the case is ready: nothing was solved (run it with `elastofe run CASE`)", indent=0)


def cmd_surfaces(args) -> int:
    from .geometry import surface_mesh_of
    from .mesh import surface_catalogue

    path = Path(args.file)
    from .case.load import GEOMETRY_SUFFIXES

    if path.suffix.lower() not in GEOMETRY_SUFFIXES:
        raise CaseError("FILE", str(path), f"must end in one of {', '.join(GEOMETRY_SUFFIXES)}")
    from .bodies import body_table
    from .mesh import check_readable, mesh_pieces
    from .units import length_unit_metres, length_unit_name

    if args.size is not None and not (math.isfinite(args.size) and args.size > 0):
        raise CaseError("--size", args.size, "must be a finite element size greater than zero (default: 1/20 of "
                        "the part's bounding-box diagonal)")
    _check_geometry_arg(path, check_readable)
    from .units import SYSTEMS

    # The case's unit system by name ("in-lbf", as in the case file) lists in its length unit.
    unit = SYSTEMS[args.units].labels["length"] if args.units in SYSTEMS else args.units
    L = length_unit_name(length_unit_metres(unit, key="--units"))
    if args.file_unit is not None:
        length_unit_metres(args.file_unit, key="--file-unit")
    try:
        mesh = surface_mesh_of(path, size=args.size, length_unit=L, unit=args.file_unit,
                               before_mesh=_listing_guard(args.size))
    except CaseError as err:
        if err.key != "geometry.unit":
            raise
        raise CaseError("--file-unit", args.file_unit, err.expected) from None
    source = getattr(mesh, "source", None)
    if source is not None:
        emit(sys.stdout, source.describe(), indent=0)
        for w in source.warnings:
            emit(sys.stdout, f"WARNING: {w}", indent=0)
    cat = surface_catalogue(mesh)
    print(f"{len(cat)} boundary surfaces of {path.name} (lengths in {L}, areas in {L}^2)")
    print(f"{'id':>4}  {'kind':<8}  {'area':>11}  {'centroid':<32}  normal / axis, radius")
    for s in cat:
        cen = "(" + ", ".join(f"{c:.4g}" for c in s.centroid) + ")"
        if s.kind == "plane":
            extra = f"normal {vector_text(s.normal, '.3g')}"
        elif s.kind == "cylinder":
            extra = (f"axis {vector_text(s.axis, '.3g')} through ("
                     + ", ".join(f"{c:.4g}" for c in s.axis_point) + f"), radius {s.radius:.5g}")
        else:
            extra = ""
        print(f"{s.id:>4}  {s.kind:<8}  {s.area:>11.5g}  {cen:<32}  {extra}")
    if mesh.groups:
        print("physical groups: " + ", ".join(f"{k} {list(v)}" for k, v in mesh.groups.items()))
    _, bodies = body_table(mesh)
    print(f"\n{len(bodies)} bod{'y' if len(bodies) == 1 else 'ies'} (solids of the file; [[material]] bodies = [ids]; "
          f"volumes of the listing mesh, in {L}^3)")
    print(f"{'id':>4}  {'volume':>11}  {'centroid':<32}  bounding box")
    fmt = lambda v: "(" + ", ".join(f"{c:.4g}" for c in v) + ")"  # noqa: E731
    for b in bodies:
        print(f"{b.id:>4}  {b.volume:>11.5g}  {fmt(b.centroid):<32}  {fmt(b.bbox_min)} to {fmt(b.bbox_max)}")
    if getattr(mesh, "body_groups", None):
        print("volume physical groups: " + ", ".join(f"{k} {list(v)}" for k, v in mesh.body_groups.items()))
    _, pieces = mesh_pieces(mesh.points, mesh.cells, getattr(mesh, "cell_body", None))
    print(f"\n{len(pieces)} piece{'' if len(pieces) == 1 else 's'} (bodies joined through shared faces: bonded; "
          "each piece needs supports of its own)")
    for p in pieces:
        emit(sys.stdout, p.describe(L) + (f"; {p.contact_words(L)}" if p.touching else ""))
    return 0


def _check_geometry_arg(path: Path, check_readable) -> None:
    """The FILE of ``surfaces``: a readable regular file (the message names FILE, not a case key)."""
    try:
        check_readable(path)
    except CaseError as err:
        raise CaseError("FILE", str(path), err.expected) from None


def _listing_guard(size):
    """The memory guard of ``surfaces``: meshing alone must fit (there is no solve)."""
    from .resources import GiB, available_memory, cells_estimate, mesh_memory

    def guard(demand) -> None:
        if demand.diagonal > 0 and not demand.size <= 100.0 * demand.diagonal:
            raise CaseError("--size", demand.size, f"is more than 100 times the part's size (its bounding-box "
                            f"diagonal is {demand.diagonal:.4g}); give an element size smaller than the part")
        cells = cells_estimate(demand)
        need = mesh_memory(cells, 4)
        avail, source = available_memory()
        if avail is not None and need > avail:
            what = "--size" if size is not None else "the default size (1/20 of the part)"
            raise CaseError("--size", size if size is not None else demand.size,
                            f"would mesh the part into about {cells:.3g} elements, about {need / GiB:.3g} GiB of "
                            f"memory, but only {avail / GiB:.1f} GiB is available ({source}); {what} is too small "
                            f"for this part (volume {demand.volume:.4g}, boundary area {demand.area:.4g}): give a "
                            "larger --size")

    return guard


def cmd_demo(args) -> int:
    case = MODELS / "lever" / "lever.toml"
    out = Path(args.out) if args.out else Path.cwd() / "lever-results"
    ns = argparse.Namespace(case=str(case), out=str(out), solver=None, quiet=args.quiet,
                            overwrite=getattr(args, "overwrite", False),
                            report=not getattr(args, "no_report", False), pdf=getattr(args, "pdf", False))
    return cmd_run(ns)


def cmd_verify(args) -> int:
    """Run the benchmark catalogue; exit 6 when any quantity misses its tolerance."""
    from .files import folder_lock, staged_outputs
    from .verify import run_catalogue, write_report
    from .verify.report import CAUTION, format_table

    out = Path(args.out) if args.out else Path.cwd() / "verify-results"
    _check_writable(out)
    printer = _Printer(quiet=args.quiet)
    # One writer per folder; the cases, verify.json and verify.html shown together at the end.
    with folder_lock(out, "--out"), staged_outputs(out, "--out") as st:
        report = run_catalogue(full=args.full, out=st.dir, progress=printer, only=args.only)
        write_report(report, st.dir)
        st.commit(record={"kind": "verification", "verified": report.ok}, replace=st.names())
    paths = {"json": out / "verify.json", "html": out / "verify.html"}
    print(format_table(report))
    print(f"\ntable written to {paths['json']} and {paths['html']}; the case files and geometry "
          f"that were solved are in {out / 'cases'}/")
    print(f"\nCaution: {CAUTION}")
    if not report.ok:
        print(f"elastofe: a benchmark is outside its tolerance (see {paths['html']}); exit {EXIT_VERIFY_OUTSIDE}",
              file=sys.stderr)
    return EXIT_OK if report.ok else EXIT_VERIFY_OUTSIDE


def _global_options(parser: argparse.ArgumentParser, default) -> None:
    """-v and -q, taken before or after the subcommand. Subcommands give them ``SUPPRESS`` as
    default so that a subcommand's parser does not reset what the main parser already read."""
    parser.add_argument("-v", "--verbose", action="store_true", default=default, help="show debug messages")
    parser.add_argument("-q", "--quiet", action="store_true", default=default, help="no progress lines or tables")


def _solver_option(parser: argparse.ArgumentParser) -> None:
    from .case.load import SOLVER_BACKENDS

    parser.add_argument("--solver", choices=SOLVER_BACKENDS, metavar="SOLVER",
                        help=f"linear solver backend, one of {', '.join(SOLVER_BACKENDS)} (default: the case's "
                             "[solver] backend, else auto; petsc: CG + GAMG, also on many processes under mpiexec)")


class UsageError(Exception):
    """A command line that argparse refuses (unknown option, invalid choice, missing argument)."""


class Parser(argparse.ArgumentParser):
    """argparse with its complaints raised (one line in :func:`main`) instead of printed and exited."""

    def error(self, message: str):
        prefix = "argument "
        raise UsageError(message[len(prefix):] if message.startswith(prefix) else message)


def build_parser() -> argparse.ArgumentParser:
    p = Parser(prog="elastofe", description="Independent second solver for 3D linear-elastic parts.")
    p.add_argument("--version", action="version", version=f"elastofe {__version__}")
    _global_options(p, False)
    common = argparse.ArgumentParser(add_help=False)
    _global_options(common, argparse.SUPPRESS)
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND", parser_class=Parser)
    r = sub.add_parser("run", parents=[common], help="solve a case file and write its results")
    r.add_argument("case", help="case file (TOML)")
    r.add_argument("--out", help="results folder (default: next to the case, CASE-results)")
    _solver_option(r)
    r.add_argument("--overwrite", action="store_true",
                   help="replace results of a different case (or with no case record) in the results folder")
    r.add_argument("--report", action="store_true", help="also write the verification report (report.html)")
    r.add_argument("--pdf", action="store_true", help="also write the report as PDF (report.pdf; needs Chromium)")
    r.set_defaults(func=cmd_run)
    ck = sub.add_parser("check", parents=[common],
                        help="validate a case and its geometry without solving: mesh it, show what each region matched")
    ck.add_argument("case", help="case file (TOML)")
    _solver_option(ck)
    ck.add_argument("--json", action="store_true", help="print the findings as JSON instead of a table")
    ck.set_defaults(func=cmd_check)
    s = sub.add_parser("surfaces", parents=[common], help="list the boundary surfaces of a geometry or mesh file")
    s.add_argument("file")
    s.add_argument("--size", type=float, help="element size of the listing mesh (default: 1/20 of the part)")
    s.add_argument("--units", default="mm",
                   help="length unit to list in (default mm; e.g. m, in, or a case's units such as in-lbf)")
    s.add_argument("--file-unit", help="the file's length unit, when it states none or a wrong one")
    s.set_defaults(func=cmd_surfaces)
    d = sub.add_parser("demo", parents=[common], help="run the built-in demo (a tapered lever bracket)")
    d.add_argument("--out", help="results folder (default: ./lever-results)")
    d.add_argument("--overwrite", action="store_true", help="replace results of a different case there")
    d.add_argument("--no-report", action="store_true", help="skip the verification report")
    d.add_argument("--pdf", action="store_true", help="also write the report as PDF (report.pdf; needs Chromium)")
    d.set_defaults(func=cmd_demo)
    for name, func, text in (("compare", cmd_compare, "solve a case and compare it with its [reference] results"),
                             ("report", cmd_report, "solve a case and write its verification report (report.html), "
                                                    "or rebuild the report of a results folder")):
        c = sub.add_parser(name, parents=[common], help=text)
        c.add_argument("case", help="case file (TOML)" if name == "compare" else
                       "case file (TOML), or a results folder whose report is rebuilt without solving")
        c.add_argument("--out", help="results folder (default: next to the case, CASE-results)")
        _solver_option(c)
        c.add_argument("--overwrite", action="store_true",
                       help="replace results of a different case (or with no case record) in the results folder")
        if name == "compare":
            c.add_argument("--report", action="store_true", help="also write the verification report")
        c.add_argument("--pdf", action="store_true", help="also write the report as PDF (report.pdf; needs Chromium)")
        c.set_defaults(func=func)
    v = sub.add_parser("verify", parents=[common],
                       help="run the published benchmarks and show that this installation reproduces them")
    v.add_argument("--full", action="store_true", help="run every benchmark (default: the quick set, under 2 minutes)")
    v.add_argument("--out", help="folder for verify.json, verify.html and the solved cases (default: ./verify-results)")
    v.add_argument("--only", nargs="+", metavar="ID", help="run only these benchmark ids")
    v.set_defaults(func=cmd_verify)
    sc = sub.add_parser("schema", parents=[common],
                        help="print the JSON Schema of the case file (for editors that complete and check keys)")
    sc.add_argument("--out", help="write it to this file instead (e.g. case.schema.json next to your cases)")
    sc.set_defaults(func=cmd_schema)
    _add_study_parser(sub, common)
    return p


def cmd_schema(args) -> int:
    """Print or write the case file's JSON Schema (the copy shipped with the package)."""
    from .case.json_schema import SCHEMA_FILE
    from .files import write_text

    text = SCHEMA_FILE.read_text(encoding="utf-8")
    if not args.out:
        sys.stdout.write(text)
        return EXIT_OK
    out = Path(args.out)
    if out.is_dir():
        raise CaseError("--out", str(out), "is a folder; give a file name such as case.schema.json")
    try:
        write_text(out, text)
    except OSError as err:
        raise CaseError("--out", str(out), f"cannot be written ({err.strerror or err})") from None
    if not args.quiet:
        print(f"schema written to {out}; start a case file with the line  #:schema {out.name}  "
              "for editors that read JSON Schema for TOML", file=sys.stderr)
    return EXIT_OK


def cmd_study(args) -> int:
    from .case import load_case
    from .studies.convergence import run_study
    from .studies.study_output import write_study

    case_path = case_path_of(args.case)
    case = load_case(case_path)
    from .files import folder_lock

    out = Path(args.out) if args.out else case_path.resolve().parent / f"{case_path.stem}-study"
    _check_writable(out)
    printer = _Printer(quiet=args.quiet)
    with folder_lock(out, "--out"):  # one study per folder at a time
        study = run_study(case, levels=args.levels, ratio=args.ratio, case_mesh=args.case_mesh, jobs=args.jobs,
                          progress=printer, keep_dir=out if args.keep_levels else None)
        printer("write", "study.json, study.csv and plots ...")
        doc = write_study(study, out, plots=not args.no_plots)
    if not args.quiet:
        print_study(doc, out)
    return 0


def print_study(doc: dict, out_dir: Path, stream=None) -> None:
    from .studies.study_output import study_text

    stream = stream or sys.stdout
    print("", file=stream)
    for line in study_text(doc):
        body = line.lstrip(" ")
        emit(stream, body, indent=len(line) - len(body), hang=4)
    files = "study.json, study.csv" + (", plots/" if doc.get("plots") else "")
    print(f"\nstudy written to {out_dir}/ ({files})", file=stream)
    print("", file=stream)
    emit(stream, f"Caution: {doc['caution']}", indent=0, hang=0)


def _add_study_parser(sub, common) -> None:
    st = sub.add_parser("study", parents=[common],
                        help="mesh-convergence study: solve on refined meshes, Richardson value and GCI")
    st.add_argument("case", help="case file (TOML)")
    st.add_argument("--levels", type=int, default=3, help="number of meshes, at least 3 (default 3)")
    st.add_argument("--ratio", type=float, default=1.5,
                    help="refinement ratio: every element size is divided by it per level (default 1.5)")
    st.add_argument("--case-mesh", choices=("coarsest", "finest"), default="coarsest",
                    help="whether the case's own sizes are the coarsest (default) or the finest level")
    st.add_argument("--jobs", type=int, help="worker processes (default: as many as cores and memory allow)")
    st.add_argument("--out", help="study folder (default: next to the case, CASE-study)")
    st.add_argument("--keep-levels", action="store_true", help="also write each level's results (level-N/)")
    st.add_argument("--no-plots", action="store_true", help="skip the convergence plots")
    st.set_defaults(func=cmd_study)


def _split_path(args: list) -> bool:
    """Whether two or more neighbouring arguments joined by spaces name an existing file or folder
    (a path with spaces given without quotes)."""
    args = [str(a) for a in args]
    for i in range(len(args)):
        for j in range(i + 2, min(len(args), i + 8) + 1):
            try:
                if Path(" ".join(args[i:j])).exists():
                    return True
            except (OSError, ValueError):
                pass
    return False


def main(argv=None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as e:  # --help and --version exit 0
        return int(e.code or 0)
    except UsageError as err:
        hint = ""
        if str(err).startswith("unrecognized arguments") and _split_path(sys.argv[1:] if argv is None else argv):
            hint = "; a path with spaces must be in quotes"
        print(f"elastofe: error on the command line: {err}{hint} (elastofe --help, or elastofe COMMAND --help, "
              "lists the options)", file=sys.stderr)
        return EXIT_INPUT
    if _launched_rank() > 0:
        # Under mpiexec rank 0 speaks for the job: the others' messages would repeat it N times.
        # Failures that end the job (MPI_Abort) still print on sys.__stderr__ from every rank.
        import os

        sys.stdout = sys.stderr = open(os.devnull, "w")
    # Titles, names and file names come from the user's files: print their control characters
    # (terminal escape sequences) as escapes, never raw.
    streams = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = EscapedStream(sys.stdout), EscapedStream(sys.stderr)
    logging.basicConfig(level=logging.DEBUG if args.verbose else logging.WARNING,
                        format="%(levelname)s: %(message)s")
    previous = _install_sigterm()
    try:
        return args.func(args)
    except Terminated:
        print("elastofe: terminated (SIGTERM); earlier results were left as they were", file=sys.stderr)
        return 143
    except CaseError as err:
        # Several mistakes of a case file (CaseErrors) are listed at once, one line each.
        for e in getattr(err, "errors", None) or [err]:
            where = "on the command line" if is_command_line_key(e.key) else "in the case"
            print(f"elastofe: error {where}: {e}", file=sys.stderr)
        if getattr(err, "more", 0):
            print(f"elastofe: ... and {err.more} more error(s) in the case, not listed", file=sys.stderr)
        return 2
    except ModelError as err:
        print(f"elastofe: the model cannot be solved: {err}", file=sys.stderr)
        return 3
    except KeyboardInterrupt:
        print("elastofe: interrupted; earlier results were left as they were", file=sys.stderr)
        return 130
    except Exception as err:  # last resort: one line, no traceback unless --verbose
        if args.verbose:
            raise
        print(f"elastofe: internal error: {type(err).__name__}: {str(err)[:500]} (run with -v for details)",
              file=sys.stderr)
        return 1
    finally:
        _restore_sigterm(previous)
        sys.stdout, sys.stderr = streams


class EscapedStream:
    """A text stream that writes control characters (other than newline and tab) as escapes."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text: str) -> int:
        self._stream.write(printable(text, keep="\n\t"))
        return len(text)

    def __getattr__(self, name):
        return getattr(self._stream, name)


def is_command_line_key(key: str) -> bool:
    """Whether a :class:`CaseError` is about the command line: its key is an option (``--out``) or
    an argument placeholder (``CASE``, ``FILE``), not a key of the case file."""
    key = str(key)
    return key.startswith("-") or (key.isupper() and key.isalpha())


class Terminated(BaseException):
    """Raised in the main thread on SIGTERM, so that cleanup (``finally``, temporary files) runs."""


def _on_sigterm(signum, frame):
    raise Terminated()


def _install_sigterm():
    """Turn SIGTERM into :class:`Terminated` while a command runs (main thread only)."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return None
    return signal.signal(signal.SIGTERM, _on_sigterm)


def _restore_sigterm(previous) -> None:
    import signal

    if previous is not None:
        signal.signal(signal.SIGTERM, previous)


def run_main() -> None:
    sys.exit(main())
