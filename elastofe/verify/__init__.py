"""The verification catalogue: published benchmarks run through the same pipeline as a user's case.

The catalogue is data: ``catalogue.toml`` lists each benchmark with its source, the case file it
solves (``cases/*.toml``, the project's own case format), the geometry builder and its parameters
(:mod:`elastofe.verify.builders`), and for each checked quantity its target, tolerance and why.
Element-level benchmarks that no case file can express (the patch test, convergence orders) are
solved in code (:mod:`elastofe.verify.element_cases`) and listed the same way.

:func:`run_catalogue` returns a :class:`Report`; :func:`write_report` writes it as JSON and HTML.
"""
from __future__ import annotations

import math
import shutil
import sys
import tempfile
import time
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Optional

import numpy as np

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from ..errors import CaseError
from ..progress import Progress

HERE = Path(__file__).resolve().parent
CATALOGUE = HERE / "catalogue.toml"
CASES = HERE / "cases"

_BENCH_KEYS = ("id", "title", "set", "source", "case", "code", "params", "geometry", "overrides", "note", "check")
_CHECK_KEYS = ("quantity", "point", "value", "scale", "target", "unit", "tolerance", "absolute", "kind",
               "why", "source", "from_memory")
VERDICTS = ("pass", "FAIL", "locks", "no locking")


@dataclass(frozen=True)
class Check:
    """One checked quantity of a benchmark.

    ``value`` names what is read: ``displacement.x|y|z`` or ``stress.xx|yy|zz|xy|yz|xz`` or
    ``von_mises`` at the named ``point`` (pipeline cases), or a key of the code case's result.
    ``tolerance`` is relative to |target| unless ``absolute``; ``kind = "indicator"`` marks a
    locking indicator whose departure is reported but does not fail the run.
    """

    quantity: str
    value: str
    target: float
    tolerance: float
    why: str
    point: Optional[str] = None
    scale: float = 1.0
    unit: str = ""
    absolute: bool = False
    kind: str = "check"
    source: Optional[str] = None
    from_memory: bool = False
    target_text: str = ""


@dataclass(frozen=True)
class Benchmark:
    """A catalogue entry (see the module docstring)."""

    id: str
    title: str
    set: str
    source: str
    checks: tuple[Check, ...]
    case: Optional[str] = None
    code: Optional[str] = None
    params: dict = field(default_factory=dict)
    geometry: dict = field(default_factory=dict)
    overrides: dict = field(default_factory=dict)
    note: str = ""


@dataclass
class Row:
    """One line of the verification table."""

    benchmark: str
    title: str
    quantity: str
    target: float
    result: float
    error: float
    tolerance: float
    absolute: bool
    verdict: str
    source: str
    unit: str = ""
    kind: str = "check"
    why: str = ""
    note: str = ""
    seconds: float = 0.0
    mesh: str = ""
    target_basis: str = ""


@dataclass
class Report:
    """All rows of a verification run and how long it took."""

    rows: list[Row]
    full: bool
    seconds: float
    version: str
    environment: dict

    @property
    def failed(self) -> list[Row]:
        return [r for r in self.rows if r.verdict == "FAIL"]

    @property
    def ok(self) -> bool:
        return not self.failed


def _target(raw, key: str) -> tuple[float, str]:
    from .targets import FORMULAS

    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        return float(raw), ""
    if isinstance(raw, dict) and raw.get("formula") in FORMULAS:
        args = {k: v for k, v in raw.items() if k != "formula"}
        text = raw["formula"] + "(" + ", ".join(f"{k}={v}" for k, v in args.items()) + ")"
        return float(FORMULAS[raw["formula"]](**args)), text
    raise CaseError(key, raw, f"must be a number or {{ formula = one of {', '.join(FORMULAS)}, ... }}")


def load_catalogue(path: Optional[Path] = None) -> list[Benchmark]:
    """Read and check the catalogue (default: the package's ``catalogue.toml``); raises
    :class:`CaseError` naming the key of any problem."""
    from ..case.keys import check_keys as _check_keys
    from .builders import BUILDERS
    from .element_cases import CODE_CASES

    doc = tomllib.loads(Path(path if path is not None else CATALOGUE).read_text(encoding="utf-8"))
    _check_keys(doc, ("benchmark",), "")
    out, seen = [], set()
    for i, b in enumerate(doc.get("benchmark", []), 1):
        k = f"benchmark[{i}]"
        _check_keys(b, _BENCH_KEYS, k)
        for req in ("id", "title", "set", "source", "check"):
            if req not in b:
                raise CaseError(f"{k}.{req}", None, "is required")
        if b["id"] in seen:
            raise CaseError(f"{k}.id", b["id"], "duplicates another benchmark id")
        seen.add(b["id"])
        if b["set"] not in ("quick", "full"):
            raise CaseError(f"{k}.set", b["set"], "must be 'quick' (run by default) or 'full' (with --full)")
        if ("case" in b) == ("code" in b):
            raise CaseError(k, b["id"], "needs exactly one of case (a case file) or code (a code benchmark)")
        if "code" in b and b["code"] not in CODE_CASES:
            raise CaseError(f"{k}.code", b["code"], f"must be one of {', '.join(CODE_CASES)}")
        if "case" in b:
            if not (CASES / b["case"]).is_file():
                raise CaseError(f"{k}.case", b["case"], f"no such file in {CASES}")
            g = b.get("geometry", {})
            if g.get("builder") not in BUILDERS:
                raise CaseError(f"{k}.geometry.builder", g.get("builder"), f"must be one of {', '.join(BUILDERS)}")
        checks = []
        for j, c in enumerate(b["check"], 1):
            kc = f"{k}.check[{j}]"
            _check_keys(c, _CHECK_KEYS, kc)
            for req in ("quantity", "value", "target", "tolerance", "why"):
                if req not in c:
                    raise CaseError(f"{kc}.{req}", None, "is required")
            modal = str(c.get("value", "")).startswith(MODAL_VALUES)
            if "case" in b and "point" not in c and not modal:
                raise CaseError(f"{kc}.point", None, "is required for a case-file benchmark")
            tgt, text = _target(c["target"], f"{kc}.target")
            checks.append(Check(c["quantity"], c["value"], tgt, float(c["tolerance"]), c["why"],
                                c.get("point"), float(c.get("scale", 1.0)), c.get("unit", ""),
                                bool(c.get("absolute", False)), c.get("kind", "check"), c.get("source"),
                                bool(c.get("from_memory", False)), text))
        out.append(Benchmark(b["id"], b["title"], b["set"], b["source"], tuple(checks), b.get("case"),
                             b.get("code"), dict(b.get("params", {})), dict(b.get("geometry", {})),
                             dict(b.get("overrides", {})), b.get("note", "")))
    return out


#: Checked values read from the modes or buckling factors (no [[point]] needed).
MODAL_VALUES = ("frequency.", "frequency_along.", "frequency_twist.", "buckling.")


def _most_twisting(res, k: int) -> int:
    """Index of the elastic mode whose shape lies closest to a rotation about the axis through the
    part's centroid along coordinate ``k``: the largest share of the shape u along the rotation field
    t = e_k x r over the nodes, (sum u . t)^2 / (sum |u|^2 sum |t|^2) (near 1 for a twist of a round
    shaft whose angle grows along it; 0 for bending and stretching, which are odd in the section)."""
    p = res.mesh.points
    e = np.eye(3)[k]
    t = np.cross(e, p - p.mean(axis=0))                      # (n, 3) rotation field about the axis
    S = np.asarray(res.modes.shapes)                          # (modes, n, 3)
    share = np.einsum("mni,ni->m", S, t) ** 2 / np.maximum(np.einsum("mni,mni->m", S, S) * np.einsum("ni,ni->", t, t),
                                                          1e-300)
    elastic = [i for i, lab in enumerate(res.modes.rigid) if lab is None]
    return max(elastic, key=lambda i: share[i])


def _read(res, point: str, value: str) -> float:
    from ..post.recovery import COMPONENTS

    kind, _, comp = value.partition(".")
    if kind == "frequency":  # frequency.N: the N-th elastic natural frequency [Hz]
        elastic = [f for f, lab in zip(res.modes.frequencies, res.modes.rigid) if lab is None]
        return float(elastic[int(comp) - 1])
    if kind == "frequency_along":  # frequency_along.x|y|z: the elastic mode of most effective mass along it
        k = "xyz".index(comp)
        elastic = [(m[k], f) for f, m, lab in zip(res.modes.frequencies, res.modes.effective_mass, res.modes.rigid)
                   if lab is None]
        return float(max(elastic)[1])
    if kind == "frequency_twist":  # frequency_twist.x|y|z: the elastic mode most like a twist about that axis
        return float(res.modes.frequencies[_most_twisting(res, "xyz".index(comp))])
    if kind == "buckling":  # buckling.N: the N-th buckling load factor
        return float(res.buckling.factors[int(comp) - 1])
    p = res.points[point]
    if kind == "displacement":
        return float(p["displacement"]["xyz".index(comp)])
    if kind == "stress":
        return float(p["stress"][COMPONENTS.index(comp)])
    if kind == "von_mises":
        return float(p["von_mises"])
    raise CaseError("check.value", value, "must be displacement.x|y|z, stress.xx|yy|zz|xy|yz|xz or von_mises")


def prepare_case(b: Benchmark, folder: Path):
    """Build the benchmark's geometry into ``folder``, copy its case file there and load it
    (with the catalogue's overrides applied). Returns the :class:`~elastofe.case.schema.Case`."""
    from ..case import load_case
    from .builders import BUILDERS

    folder.mkdir(parents=True, exist_ok=True)
    src = CASES / b.case
    dst = folder / src.name
    shutil.copyfile(src, dst)
    case = load_case(dst)
    ov = dict(b.overrides)
    mesh = case.mesh
    if "order" in ov or "size" in ov:
        size = ov.get("size", mesh.size)
        mesh = replace(mesh, order=int(ov.get("order", mesh.order)), size=None if size is None else float(size))
    material = replace(case.material, nu=float(ov["nu"])) if "nu" in ov else case.material
    case = replace(case, mesh=mesh, material=material)
    params = {k: v for k, v in b.geometry.items() if k != "builder"}
    BUILDERS[b.geometry["builder"]](case.geometry.file, case.mesh.order, case.mesh.size, **params)
    return case


def _verdict(c: Check, result: float) -> tuple[float, str]:
    err = result - c.target if c.absolute or c.target == 0 else (result - c.target) / abs(c.target)
    within = math.isfinite(err) and abs(err) <= c.tolerance
    if c.kind == "indicator":
        return err, "no locking" if within else "locks"
    return err, "pass" if within else "FAIL"


def run_benchmark(b: Benchmark, folder: Path, progress: Progress) -> list[Row]:
    """Solve one benchmark and compare each of its quantities with its target."""
    from ..pipeline import solve_case
    from .element_cases import CODE_CASES

    t0 = time.perf_counter()
    if b.code is not None:
        values = CODE_CASES[b.code](**b.params)
        mesh_text = "built in code"
        read = lambda c: float(values[c.value])  # noqa: E731
    else:
        case = prepare_case(b, folder)
        # Locking indicators solve nearly incompressible cases on 4-node meshes on purpose.
        res = solve_case(case, lambda s, m: progress(b.id, f"{s}: {m}"), allow_locking=True)
        mesh_text = (f"TET{4 if res.mesh.cells.shape[1] == 4 else 10}, {res.mesh.nodes:,} nodes, "
                     f"{res.mesh.cells.shape[0]:,} elements")
        read = lambda c: _read(res, c.point, c.value)  # noqa: E731
    dt = time.perf_counter() - t0
    rows = []
    for c in b.checks:
        r = read(c) * c.scale
        err, verdict = _verdict(c, r)
        note = b.note
        if c.kind == "indicator":
            what = ("the pressure part of the stress oscillates (locking)" if c.value.startswith("stress")
                    else "volumetric locking")
            note = (f"locking indicator ({c.quantity}): departs {err:+.2%} from the target; "
                    + (what if verdict == "locks" else "within the bound") + ". " + note).strip()
        rows.append(Row(b.id, b.title, c.quantity, c.target, r, err, c.tolerance, c.absolute or c.target == 0,
                        verdict, c.source or b.source + (" (from memory)" if c.from_memory else ""), c.unit,
                        c.kind, c.why, note, dt, mesh_text, c.target_text))
    return rows


def run_catalogue(full: bool = False, out: Optional[Path] = None, progress: Optional[Progress] = None,
                  only: Optional[list[str]] = None, catalogue: Optional[Path] = None) -> Report:
    """Run the quick set (or every benchmark with ``full``), returning a :class:`Report`.

    ``out``: folder in which each benchmark's case file and built geometry are kept
    (``out/cases/ID/``); a temporary folder otherwise. ``only``: benchmark ids to run.
    """
    from ..version import __version__

    progress = progress or (lambda s, m: None)
    every = load_catalogue(catalogue)
    benches = [b for b in every if full or b.set == "quick"]
    if only:
        unknown = sorted(set(only) - {b.id for b in every})
        if unknown:
            raise CaseError("--only", unknown, f"unknown benchmark id(s); known: {', '.join(b.id for b in every)}")
        benches = [b for b in every if b.id in only]
    t0 = time.perf_counter()
    rows: list[Row] = []
    with tempfile.TemporaryDirectory(prefix="elastofe-verify-") as tmp:
        base = Path(out) / "cases" if out is not None else Path(tmp)
        for k, b in enumerate(benches, 1):
            progress("verify", f"[{k}/{len(benches)}] {b.id}: {b.title} ...")
            new = run_benchmark(b, base / b.id, progress)
            rows += new
            verdicts = ", ".join(r.verdict for r in new)
            progress("verify", f"[{k}/{len(benches)}] {b.id}: {verdicts} ({new[0].seconds:.1f} s)")
    return Report(rows, full, time.perf_counter() - t0, __version__, _environment())


def _environment() -> dict:
    import platform

    import scipy

    from .. import solve as solvers

    env = {"python": platform.python_version(), "numpy": np.__version__, "scipy": scipy.__version__,
           "platform": platform.platform(), "machine": platform.machine()}
    try:
        import gmsh

        env["gmsh"] = gmsh.__version__
    except Exception:  # pragma: no cover - reported as missing
        env["gmsh"] = "not loadable"
    env["solver"] = solvers.choose_backend("auto", 10)
    return env


from .report import format_table, write_report  # noqa: E402

__all__ = ["Benchmark", "Check", "Row", "Report", "load_catalogue", "run_catalogue", "run_benchmark",
           "prepare_case", "format_table", "write_report"]
