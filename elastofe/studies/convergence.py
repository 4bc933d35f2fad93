"""Mesh-convergence study: the same case on successively refined meshes, with Richardson
extrapolation and the Grid Convergence Index of every reported quantity.

Sources: P. J. Roache, J. Fluids Eng. 116 (1994) 405-413 (GCI, safety factor 1.25 for three or more
grids, asymptotic-range check); I. B. Celik et al., J. Fluids Eng. 130 (2008) 078001 (representative
size ``h = (V/N)^(1/3)``, observed order for non-constant refinement ratios); ASME V&V 20-2009. The
arithmetic is :func:`elastofe.studies.gci.grid_convergence`.

Each level is a full run through :func:`elastofe.pipeline.solve_case` with the case's global and
every local element size multiplied by the level's factor (``MeshSpec.scaled``). Levels run in
separate worker processes when more than one core is free and the predicted memory of the levels
running at once fits in the available memory (predicted from the first level's measured peak).
"""
from __future__ import annotations

import contextlib
import logging
import math
import multiprocessing
import os
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from pathlib import Path
from typing import NamedTuple, Optional

import numpy as np

from ..case.load import MESH_SUFFIXES
from ..case.schema import Case
from ..errors import CaseError
from ..files import sha256_file
from ..geometry import measure
from ..mesh import check_readable
from ..progress import Progress, quiet
from ..resources import current_memory_mb, meminfo_available, peak_memory_mb
from ..stages import mesh_guard
from .gci import (
    ASYMPTOTIC_TOL,
    ORDER_AGREE,
    SAFETY_FACTOR,
    SAFETY_FACTOR_UNVERIFIED,
    SINGULAR_ORDER,
    assess_levels,
)

log = logging.getLogger(__name__)


#: A quantity whose finest magnitude is below this fraction of its kind's scale is negligible:
#: no order or GCI is reported for it (they would measure round-off and mesh noise).
NEGLIGIBLE = 1e-3
#: Noise tolerance: a change between levels within this fraction of the quantity's own largest magnitude ...
NOISE_TOL = 1e-3
#: ... or within this fraction of the largest of its kind in the study (for components near zero) is no change.
#: Why 0.1 %: the values of a point or a peak move by a few hundredths of a percent between unstructured
#: meshes of the same part for reasons unrelated to convergence (where the point falls in its element, which
#: elements share a node), and no engineering decision rests on a 0.1 % difference; real discretisation
#: errors worth a verdict are larger. 1e-4 of the family: a stress component near zero is judged against the
#: part's largest stress, not against its own tiny value.
FAMILY_NOISE_TOL = 1e-4
#: A singular value grows on every step by more than this fraction of itself (and more than the noise). A
#: genuine singularity grows by several percent per step at the ratios used (h^-0.3 at r = 1.3: 8 %; ln(1/h)
#: under a pressure edge: about 1 %), so 0.5 % keeps slow drift and noise out (our own threshold).
GROWTH_TOL = 5e-3
#: A reaction equal to minus the applied resultant on every level within this fraction of the largest force
#: (moment) is fixed by statics. Equilibrium holds to the solver's accuracy: 1e-12 with a direct solver,
#: 3e-8 measured with the multigrid solver on the L bracket (reaction off by 3.4e-7 of the load).
STATICS_TOL = 1e-5
#: An effective refinement ratio whose logarithm differs from the nominal one's by more than this fraction
#: is reported (for nominal 1.5: outside 1.36-1.66; our own threshold).
RATIO_LOG_TOL = 0.25
#: Celik et al. (2008) recommend refinement ratios above 1.3: with smaller steps the differences between
#: levels are small against mesh noise.
MIN_RATIO = 1.3
#: Exponent of the peak memory's growth with the DOF count used to predict finer levels (a direct
#: sparse factorisation in 3D grows faster than linearly; 1.3 is our own conservative estimate from
#: the measured 100k -> 300k DOF figures in the project's solver notes).
MEMORY_EXPONENT = 1.3
#: Share of the available memory that levels running at once may take.
MEMORY_SHARE = 0.7

_THREAD_VARS = ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS")


#: Most levels and largest ratio a study takes (the finest mesh grows as ratio^(3 (levels - 1))).
MAX_LEVELS = 10
MAX_RATIO = 4.0


def level_factors(levels: int, ratio: float, case_mesh: str = "coarsest") -> list[float]:
    """Size factors of the levels, coarsest first.

    ``case_mesh="coarsest"``: the case's own sizes are level 1, each later level divides every
    size by ``ratio``; ``"finest"``: the case's sizes are the last level.
    """
    if case_mesh == "coarsest":
        return [ratio ** -i for i in range(levels)]
    return [ratio ** (levels - 1 - i) for i in range(levels)]


def available_memory_mb() -> float:
    """Memory the machine has available [MiB], or a large number where unknown."""
    avail = meminfo_available()
    return float("inf") if avail is None else avail / 2**20


def solve_level(case: Case, factor: float, index: int, keep_dir: Optional[str] = None) -> dict:
    """Solve ``case`` with every element size times ``factor``; return its tracked values.

    Runs in a worker process (it must be picklable and import-safe); returns plain data only:
    the summary document, the sampled lines, the mesh size measures, time and memory.
    """
    from ..fem.assembly import cell_volumes
    from ..output import summary, write_results
    from ..pipeline import solve_case
    from ..regions import region_nodes

    rss0 = current_memory_mb()
    t0 = time.perf_counter()
    lcase = case.with_mesh(case.mesh.scaled(factor))
    res = solve_case(lcase)
    doc = write_results(res, Path(keep_dir)) if keep_dir else summary(res, {})
    wall = time.perf_counter() - t0
    corners = res.mesh.cells[:, :4]
    volume = float(cell_volumes(res.mesh.points, corners).sum())
    iv = int(np.argmax(res.von_mises))
    where = [name for name, ids in res.region_ids.items() if iv in set(region_nodes(res.mesh, ids).tolist())]
    support_regions = {s.label for s in case.supports}
    peak = peak_memory_mb()
    return {
        "index": index, "factor": factor, "size": lcase.mesh.size,
        "refine": [{"region": r.region, "size": r.size} for r in lcase.mesh.refine],
        "nodes": res.mesh.nodes, "elements": int(res.mesh.cells.shape[0]), "dofs": res.dofs,
        "volume": volume, "wall_s": wall, "peak_mb": peak, "rss_start_mb": rss0, "pid": os.getpid(),
        "doc": doc,
        "lines": {n: {"s": ln.s, "stress": ln.stress, "von_mises": ln.von_mises} for n, ln in res.lines.items()},
        "max_von_mises_regions": where,
        "max_von_mises_at_support": sorted(set(where) & support_regions),
    }


def _pool(workers: int) -> ProcessPoolExecutor:
    """Worker processes started fresh ("spawn"): a forked copy of a process that already ran Gmsh or
    a threaded solver can hang on a lock held by a thread that does not exist in the copy."""
    return ProcessPoolExecutor(max_workers=workers, initializer=_worker_init,
                               mp_context=multiprocessing.get_context("spawn"))


def _worker_init() -> None:
    logging.getLogger().setLevel(logging.WARNING)


@contextlib.contextmanager
def _single_threaded_children(active: bool):
    """Environment for worker processes: one BLAS/solver thread each, so that parallel levels do
    not oversubscribe the cores. Restored afterwards."""
    if not active:
        yield
        return
    saved = {k: os.environ.get(k) for k in _THREAD_VARS}
    try:
        for k in _THREAD_VARS:
            os.environ[k] = "1"
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


# ------------------------------------------------------------------------------- quantities
class Tracked(NamedTuple):
    """One scalar of a level's summary: its dotted name, kind, value, where it is and, for a quantity that
    statics fixes, the value statics demands on that level."""

    name: str
    kind: str
    value: float
    location: list | None = None
    statics: float | None = None
    role: str = ""


#: Keys of a summary (or of one load case's section) holding the peak von Mises stress away from supports and
#: loads, as ``{"value", "at"}`` or a number; whichever is present is tracked.
AWAY_KEYS = ("peak_away_from_supports_and_loads", "max_von_mises_away", "von_mises_away", "peak_away")


def _num(v) -> float:
    return float("nan") if v is None else float(v)


def _peak(name: str, entry) -> Tracked | None:
    """A peak given as ``{"value", "at"}`` (or a bare number); None where absent."""
    if entry is None:
        return None
    if isinstance(entry, dict):
        if "value" not in entry:
            return None
        return Tracked(name, "stress", _num(entry["value"]), entry.get("at"), None, "peak")
    return Tracked(name, "stress", _num(entry), None, None, "peak")


def _reaction_rows(prefix: str, reactions: dict, applied_force, applied_moment) -> list[Tracked]:
    out = []
    F = np.asarray(applied_force if applied_force is not None else np.full(3, np.nan), dtype=float)
    M = np.asarray(applied_moment if applied_moment is not None else np.full(3, np.nan), dtype=float)
    for name, r in reactions.items():
        for c, (fv, mv) in enumerate(zip(r["force"], r["moment"])):
            comp = "xyz"[c]
            # Statics: were this support the only one to carry the component, it would equal minus the
            # applied resultant; whether it does is checked over the levels in assess().
            out.append(Tracked(f"{prefix}reactions.{name}.force.{comp}", "force", float(fv), None,
                               -float(F[c]), "reaction"))
            out.append(Tracked(f"{prefix}reactions.{name}.moment.{comp}", "moment", float(mv), None,
                               -float(M[c]), "reaction"))
    return out


def _point_rows(prefix: str, points: dict, components: bool = True) -> list[Tracked]:
    out = []
    for name, p in points.items():
        at = p.get("at")
        out += [Tracked(f"{prefix}points.{name}.displacement.{c}", "displacement", float(v), at)
                for c, v in zip("xyz", p["displacement"])]
        out.append(Tracked(f"{prefix}points.{name}.von_mises", "stress", _num(p["von_mises"]), at))
        if components:
            out += [Tracked(f"{prefix}points.{name}.stress.{c}", "stress", _num(v), at)
                    for c, v in p["stress"].items()]
            out += [Tracked(f"{prefix}points.{name}.principal.{c}", "stress", _num(v), at)
                    for c, v in zip("123", p["principal"])]
    return out


def tracked_scalars(doc: dict) -> list[Tracked]:
    """Every scalar a summary reports that a study follows, as :class:`Tracked` rows.

    Kinds: displacement, stress, force, moment, energy. Names are dotted paths into summary.json. Reactions
    carry the value statics would give them (minus the applied resultant); peaks and points carry their
    location. Peaks away from supports and loads (any of ``AWAY_KEYS``), every load case and combination
    other than the one shown at the top level, and the envelope are included when the summary has them.
    """
    out: list[Tracked] = [
        Tracked("max_displacement", "displacement", _num(doc["max_displacement"]["value"]),
                doc["max_displacement"].get("at"), None, "peak"),
        Tracked("max_von_mises", "stress", _num(doc["max_von_mises"]["value"]), doc["max_von_mises"].get("at"),
                None, "peak"),
        Tracked("strain_energy", "energy", _num(doc["strain_energy"])),
    ]
    for key in AWAY_KEYS:
        row = _peak(key, doc.get(key))
        if row is not None:
            out.append(row)
    # A part of several materials: each material's governing peak (over every load case), the value
    # its yield check judges, which need not be the overall peak of the part.
    for mname, g in ((doc.get("governing_peak") or {}).get("by_material") or {}).items():
        row = _peak(f"governing_peak.by_material.{mname}", g)
        if row is not None:
            out.append(row)
    F = doc.get("applied_force")
    out += _point_rows("", doc.get("points", {}))
    for name, lin in doc.get("linearized", {}).items():
        if "von_mises" in lin:
            vm = lin["von_mises"]
            out.append(Tracked(f"linearized.{name}.von_mises.membrane", "stress", _num(vm["membrane"])))
            out.append(Tracked(f"linearized.{name}.von_mises.membrane_plus_bending.start", "stress",
                               _num(vm["membrane_plus_bending"]["start"])))
            out.append(Tracked(f"linearized.{name}.von_mises.membrane_plus_bending.end", "stress",
                               _num(vm["membrane_plus_bending"]["end"])))
    out += _reaction_rows("", doc.get("reactions", {}), F, doc.get("applied_moment"))
    if F is not None:
        out += [Tracked(f"applied_force.{c}", "force", float(v), None, None, "applied") for c, v in zip("xyz", F)]
    shown = doc.get("load_case")
    for cname, ce in (doc.get("load_cases") or {}).items():
        if cname == shown:
            continue  # its values are the top-level ones
        pre = f"load_cases.{cname}."
        out.append(Tracked(pre + "max_displacement", "displacement", _num(ce["max_displacement"]["value"]),
                           ce["max_displacement"].get("at"), None, "peak"))
        out.append(Tracked(pre + "max_von_mises", "stress", _num(ce["max_von_mises"]["value"]),
                           ce["max_von_mises"].get("at"), None, "peak"))
        if "strain_energy" in ce:
            out.append(Tracked(pre + "strain_energy", "energy", _num(ce["strain_energy"])))
        for key in AWAY_KEYS:
            row = _peak(pre + key, ce.get(key))
            if row is not None:
                out.append(row)
        out += _point_rows(pre, ce.get("points", {}), components=False)
        out += _reaction_rows(pre, ce.get("reactions", {}), ce.get("applied_force"), ce.get("applied_moment"))
    modes = [m for m in (doc.get("modes") or []) if not m.get("rigid_body")]
    if modes:
        out.append(Tracked("modes.first_elastic.frequency", "frequency", _num(modes[0]["frequency"])))
    buck = doc.get("buckling") or []
    if buck:
        out.append(Tracked("buckling.1.factor", "factor", _num(buck[0]["factor"])))
    env = doc.get("envelope") or {}
    if isinstance(env.get("max_von_mises"), dict):
        out.append(Tracked("envelope.max_von_mises", "stress", _num(env["max_von_mises"]["value"]),
                           env["max_von_mises"].get("at"), None, "peak"))
    for key in AWAY_KEYS:
        row = _peak(f"envelope.{key}", env.get(key))
        if row is not None:
            out.append(row)
    return out


def _scales(levels: list[dict]) -> dict[str, float]:
    """Largest magnitude of each kind over all levels and load cases (the family scale)."""
    sc = {"displacement": 0.0, "stress": 0.0, "force": 0.0, "moment": 0.0, "energy": 0.0, "frequency": 0.0,
          "factor": 0.0}
    for lv in levels:
        d = lv["doc"]
        for e in [d] + list((d.get("load_cases") or {}).values()):
            sc["displacement"] = max(sc["displacement"], _num(e["max_displacement"]["value"]))
            sc["stress"] = max(sc["stress"], _num(e["max_von_mises"]["value"]))
            if "strain_energy" in e:
                sc["energy"] = max(sc["energy"], abs(_num(e["strain_energy"])))
            if e.get("applied_force") is not None:
                sc["force"] = max(sc["force"], float(np.linalg.norm(e["applied_force"])))
            if e.get("applied_moment") is not None:
                sc["moment"] = max(sc["moment"], float(np.linalg.norm(e["applied_moment"])))
            for m in e.get("modes") or []:
                sc["frequency"] = max(sc["frequency"], abs(_num(m["frequency"])))
            for b in e.get("buckling") or []:
                sc["factor"] = max(sc["factor"], abs(_num(b["factor"])))
            for r in e.get("reactions", {}).values():
                sc["force"] = max(sc["force"], float(np.abs(r["force"]).max()))
                sc["moment"] = max(sc["moment"], float(np.abs(r["moment"]).max()))
    return {k: (v if math.isfinite(v) else 0.0) for k, v in sc.items()}


def formal_order(kind: str, element_order: int) -> float:
    """Formal order of convergence in the element size h of a quantity of ``kind`` for elements of
    polynomial degree ``element_order`` (1: 4-node, 2: 10-node tetrahedra).

    Point displacements converge like h^(k+1) and stresses like h^k (the interpolation error of the field
    and of its gradient, common practice); the strain energy like h^(2k) (the square of the energy-norm error,
    common practice); eigenvalues (natural frequencies, buckling factors) like the energy too, as Rayleigh
    quotients (Strang & Fix, An Analysis of the Finite Element Method, 1973, ch. 6; from memory);
    reactions are treated like the energy, being derivatives of it with respect to the
    supports' displacements (our own choice; where that is too optimistic, the observed order falls below
    the plausible band and the band widens). All assume a smooth solution: singular points lower them.
    """
    k = int(element_order)
    return {"displacement": k + 1.0, "stress": float(k), "energy": 2.0 * k, "force": 2.0 * k,
            "moment": 2.0 * k, "frequency": 2.0 * k, "factor": 2.0 * k}[kind]


def williams_exponent(angle_deg: float) -> float:
    """Williams' exponent λ of the symmetric (opening) stress field at the tip of a wedge of material angle
    ``angle_deg`` (degrees, 180 < angle <= 360) with both faces free: stress ~ r^(λ-1).

    Root in (0.5, 1) of ``sin(λ ω) + λ sin ω = 0`` (M. L. Williams, J. Appl. Mech. 19 (1952) 526-528); for
    a 270° re-entrant corner λ = 0.5445, for a crack (360°) λ = 0.5.
    """
    from scipy.optimize import brentq

    w = math.radians(angle_deg)
    if not 180.0 < angle_deg <= 360.0:
        raise ValueError(f"a re-entrant wedge has 180 < angle <= 360 degrees, got {angle_deg!r}")
    if angle_deg == 360.0:
        return 0.5
    return float(brentq(lambda lam: math.sin(lam * w) + lam * math.sin(w), 0.5 - 1e-12, 1.0 - 1e-9))


def singularity_cause(alpha: float, kind: str) -> str:
    """What growth like ``h^-alpha`` of a ``kind`` of quantity is consistent with (in words).

    The exponent of a peak that grows at a singular point is the exponent of the field near it: stress
    ~ r^(λ-1) at a re-entrant corner or edge (Williams 1952: λ - 1 = -0.46 at 270°, -0.5 at a crack),
    ~ ln r where a pressure patch ends, ~ 1/r under a line load and ~ 1/r^2 under a point load (Boussinesq;
    common practice). Displacements and the energy stay finite at corners; they grow only under loads on
    lines (~ ln r) or points (~ 1/r). On coarse meshes a corner's peak often grows faster than its own rate
    (the peak node creeps towards the corner), so the faster classes name that possibility too.
    """
    if not math.isfinite(alpha):
        return "growth rate not measurable"
    if kind == "stress":
        if alpha < 0.15:
            return "slow, logarithm-like growth, as where a pressure patch ends (stress ~ ln r)"
        if alpha <= 0.7:
            return ("a re-entrant corner or edge, or the edge of a clamped face (stress ~ r^(λ-1); "
                    f"Williams: λ-1 = {williams_exponent(270.0) - 1:.2f} at a 270° corner, -0.5 at a crack)")
        coarse = ", or a corner or support edge on meshes still too coarse to show its own, slower rate"
        if alpha <= 1.4:
            return "a load or support on a line, a knife edge (stress ~ 1/r)" + coarse
        if alpha <= 2.6:
            return "a load on a point (stress ~ 1/r^2)" + coarse
        return ("growth faster than any elastic singularity: the peak may have moved to another feature "
                "between levels; check the model there")
    if alpha < 0.15:
        return "a load on a line (displacement ~ ln r)"
    if alpha <= 1.4:
        return "a load on a point (displacement ~ 1/r)"
    return "growth faster than a point load gives; check the model"


def _pct(x: float) -> str:
    return f"{100 * x:.3g} %"


def _where(location, length_unit: str = "") -> str:
    if location is None:
        return ""
    return " at (" + ", ".join(f"{float(c):.4g}" for c in location) + ")" + (f" {length_unit}" if length_unit else "")


def assess(values_coarse_to_fine: np.ndarray, h_coarse_to_fine: np.ndarray, *, kind: str, scale: float,
           ratio: float | None = None, element_order: int = 2, statics: np.ndarray | None = None,
           role: str = "", location=None, locations: list | None = None, unit: str = "",
           length_unit: str = "") -> dict:
    """Verdict, order, Richardson value and GCI band of one quantity (values ordered coarse to fine).

    Parameters
    ----------
    values_coarse_to_fine : ndarray, shape (n,)
        The quantity per level (unit of its kind); NaN where a level does not report it.
    h_coarse_to_fine : ndarray, shape (n,)
        Representative element size per level ``[L]``.
    kind : {"displacement", "stress", "force", "moment", "energy"}
    scale : float
        Largest magnitude of this kind in the study (the family scale, unit of the kind).
    ratio : float, optional
        Nominal refinement ratio (informative only; the assessment uses the sizes ``h``).
    element_order : int
        Polynomial degree of the elements (1 or 2), for the formal order.
    statics : ndarray, shape (n,), optional
        The value statics demands on each level (reactions: minus the applied resultant).
    role : str
        ``"reaction"``, ``"applied"``, ``"peak"`` or ``""``.
    location : sequence of 3 floats, optional
        Where the quantity is (the finest level's), named in a singular verdict.
    locations : list, optional
        Where it is on each level (coarse to fine; None entries allowed), to tell a peak that moved.
    unit : str
        Unit label for the texts.
    length_unit : str
        Length unit label for the location in the texts.

    Returns
    -------
    dict
        ``values``, ``h``, ``status`` and, when assessed, ``convergence`` (the verdict), ``singular``, the
        orders, ``band``, ``gci_fine``, ``extrapolated``, ``asymptotic`` and its reason, ``advice``; see
        docs/convergence.md.
    """
    v = np.asarray(values_coarse_to_fine, dtype=float)
    h = np.asarray(h_coarse_to_fine, dtype=float)
    out: dict = {"values": v, "h": h}
    notes: list[str] = []
    # Use the finest levels that all report the quantity (a peak away from the supports may not exist on a
    # coarse mesh), when there are at least three of them.
    fin = np.isfinite(v)
    first = v.size
    while first > 0 and fin[first - 1]:
        first -= 1
    if v.size - first < 3:
        out.update(status="missing", advice="not available on three or more of the finest levels")
        return out
    if first > 0:
        notes.append(f"assessed on levels {first + 1}-{v.size} (not available on the coarser ones)")
    vv, hv = v[first:], h[first:]
    out["levels_used"] = [first + 1, v.size]
    finest = float(vv[-1])
    if abs(finest) < NEGLIGIBLE * scale and np.abs(vv).max() < 10 * NEGLIGIBLE * scale:
        out.update(status="negligible", advice=f"below {NEGLIGIBLE:g} of the largest {kind} of the study; "
                   "not assessed")
        return out
    if not np.all(np.diff(hv) < 0):
        out.update(status="not refined", advice="the representative size did not fall from level to level")
        return out
    own = float(np.abs(vv).max())
    noise = max(NOISE_TOL * own, FAMILY_NOISE_TOL * scale)
    out.update(status="assessed", noise_tolerance=noise, location=location,
               changes=np.diff(vv), refinement_ratios=list(hv[::-1][1:] / hv[::-1][:-1]))
    if role == "applied":
        statics = np.full(vv.size, finest)
    if statics is not None:
        ref = np.asarray(statics, dtype=float)[first:]
        dev = float(np.max(np.abs(vv - ref))) if np.all(np.isfinite(ref)) else math.inf
        lim = STATICS_TOL * max(scale, own)
        if dev <= lim:
            what = "the loads" if role == "applied" else "statics"
            spread = float(vv.max() - vv.min())
            out.update(convergence=f"fixed by {what}", singular=False, statics_value=float(ref[-1]),
                       statics_departure=dev, asymptotic=None, in_asymptotic_range=None,
                       band=None, gci_fine=None, extrapolated=None, observed_order=None,
                       advice=(f"fixed by {what}: equal on every level within {spread:.3g}{' ' + unit if unit else ''} "
                               f"(largest departure from "
                               f"{'the finest level' if role == 'applied' else 'minus the applied resultant'}"
                               f" {dev / max(scale, own):.1g} of the largest {kind}); not extrapolated"))
            return out
        if role == "reaction" and math.isfinite(dev):
            notes.append("shared with other supports: not fixed by statics alone")
    pf = formal_order(kind, element_order)
    nlev = vv.size
    a = assess_levels(vv[::-1], hv[::-1], noise=noise, formal_order=pf, growth_tol=GROWTH_TOL,
                      may_be_singular=kind in ("stress", "displacement", "energy") and role not in
                      ("reaction", "applied"), min_ratio=MIN_RATIO,
                      level_numbers=[first + nlev - i for i in range(nlev)])
    trip = [{"levels": [first + nlev - t.levels[2], first + nlev - t.levels[1], first + nlev - t.levels[0]],
             "pattern": t.pattern, "order": t.order, "ratios": list(t.ratios)} for t in a.triplets]
    band = None
    if math.isfinite(a.half_width):
        band = [finest - a.half_width, finest + a.half_width]
    notes += list(a.notes)
    out.update(
        convergence="growing" if a.singular else a.verdict, singular=a.singular,
        observed_order=a.observed_order, orders_all=[t.order for t in a.triplets], triplets=trip,
        formal_order=pf, order_band=[a.order_low, a.order_high], order_plausible=a.order_plausible,
        order_used=a.order_used, safety_factor=a.safety_factor, extrapolated=a.extrapolated,
        extrapolated_observed_order=a.extrapolated_observed, gci_fine=a.gci_fine, half_width=a.half_width,
        band=band, approx_rel_error=abs(a.changes[0] / finest) if finest != 0.0 else None,
        asymptotic=a.asymptotic, in_asymptotic_range=a.asymptotic, asymptotic_reason=a.asymptotic_reason,
        roache_ratios=list(a.roache_ratios), asymptotic_ratio=a.roache_ratios[0] if a.roache_ratios else None,
        growth_exponent=a.growth_exponent,
        growing=bool(np.all(np.diff(np.abs(vv)) > noise)),
    )
    step = abs(a.changes[0])
    rel = step / abs(finest) if finest != 0.0 else math.inf
    u = f" {unit}" if unit else ""
    if a.singular:
        cause = singularity_cause(a.growth_exponent, kind)
        last3 = [x for x in (locations or [])[-3:] if x is not None]
        if len(last3) >= 2 and location is not None:
            span = max(float(np.max(np.abs(np.asarray(x, dtype=float) - np.asarray(location, dtype=float))))
                       for x in last3)
            if span > 1e-9 * (1.0 + float(np.max(np.abs(location)))):
                cause = ("a singular point there; the peak moved between the finest levels, so the rate does not "
                         "tell which kind")
                out["moved"] = True
        out["cause"] = cause
        # A negative exponent: the steps shrink, but too slowly (observed order at most 0.5) to show a
        # limit; "h^--0.43" said nothing.
        rate = (f"like h^-{a.growth_exponent:.2g}" if not a.growth_exponent < 0 else
                f"by steps that shrink only at order {-a.growth_exponent:.2g}, too slowly to show a limit")
        out["advice"] = (f"grows on every level ({_pct(rel)} on the finest step){_where(location, length_unit)}, "
                         f"{rate}: consistent with {cause}. Not a converged number: read "
                         f"{'stress' if kind == 'stress' else 'the result'} a little away from that point "
                         "or linearize across the section")
    elif a.verdict == "converged":
        out["advice"] = (f"converged: the finest step changed it by {step:.3g}{u} ({_pct(rel)}), within the noise "
                         f"tolerance {noise:.3g}{u}; band +-{a.half_width:.3g}{u} (two-level GCI with the formal "
                         f"order {pf:g} and Fs = {a.safety_factor:g})")
    elif a.verdict == "not settled":
        out["advice"] = (f"not settled: the finest step changed it by {_pct(rel)} after a change within the noise "
                         f"tolerance; the band (two-level GCI, formal order, Fs = {a.safety_factor:g}) is "
                         "indicative; refine further")
    elif a.verdict == "divergent":
        out["advice"] = (f"the finest step ({_pct(rel)}) is larger than the one before: not converging at these "
                         "sizes; refine further or check the model")
    elif band is None:
        out["advice"] = f"{a.verdict} with no usable order; refine further"
    else:
        asym = ("in the asymptotic range" if a.asymptotic else
                "asymptotic range not shown (three levels)" if a.asymptotic is None else
                f"not asymptotic ({a.asymptotic_reason})")
        out["advice"] = (f"{a.verdict}, observed order {a.observed_order:.3g} (formal {pf:g}), GCI "
                         f"{_pct(a.gci_fine)} with order {a.order_used:.3g} and Fs = {a.safety_factor:g}; {asym}")
    if notes:
        out["notes"] = notes
        out["advice"] += "; " + "; ".join(notes)
    return out


# ------------------------------------------------------------------------------- the study
def _predict_peaks(first: dict, factors: list[float]) -> list[float]:
    base = first["rss_start_mb"]
    own = max(first["peak_mb"] - base, 1.0)
    return [base + own * (first["factor"] / f) ** (3 * MEMORY_EXPONENT) for f in factors]


def _choose_jobs(requested: int | None, pending: list[float], cores: int,
                 load: float = 0.0) -> tuple[int, str]:
    avail = available_memory_mb()
    budget = MEMORY_SHARE * avail
    if requested is not None and requested <= 1:
        return 1, "one process (as requested)"
    # Other work already on the cores (the load average before the study began) leaves fewer free:
    # measured here, two parallel levels gained nothing (0.99x) at a load average of 9 on 2 cores.
    free = max(1, cores - int(load))
    cap = free if requested is None else min(requested, cores)
    cap = min(cap, len(pending))
    if cap <= 1:
        return 1, (f"one process ({cores} core{'s' if cores != 1 else ''}, load average {load:.1f} before the "
                   f"study: {free} free; or one level left)")
    biggest = sorted(pending, reverse=True)
    jobs = cap
    while jobs > 1 and sum(biggest[:jobs]) > budget:
        jobs -= 1
    if jobs == 1:
        return 1, (f"one process: the two largest levels would need about {sum(biggest[:2]):.0f} MiB at once, "
                   f"more than {MEMORY_SHARE:.0%} of the {avail:.0f} MiB available")
    return jobs, (f"{jobs} processes: the {jobs} largest remaining levels need about {sum(biggest[:jobs]):.0f} MiB "
                  f"at once (predicted), within {MEMORY_SHARE:.0%} of the {avail:.0f} MiB available")


def run_study(case: Case, levels: int = 3, ratio: float = 1.5, *, case_mesh: str = "coarsest",
              jobs: Optional[int] = None, progress: Progress = quiet,
              keep_dir: Optional[Path] = None) -> dict:
    """Solve ``case`` on ``levels`` meshes and assess every tracked quantity.

    Parameters
    ----------
    case : Case
        A case whose geometry is meshed here (a CAD file; a given mesh cannot be refined).
    levels : int
        Number of meshes, >= 3.
    ratio : float
        Refinement ratio between successive levels, > 1 (every size divided by it), e.g. 1.5.
    case_mesh : {"coarsest", "finest"}
        Whether the case's own sizes are the coarsest or the finest level.
    jobs : int, optional
        Worker processes; default: as many as cores and memory allow.
    progress : callable
        ``progress(stage, message)`` per level.
    keep_dir : Path, optional
        Write each level's full results to ``keep_dir/level-N``.

    Returns
    -------
    dict
        The study document (JSON-ready after :func:`elastofe.files.json_ready`): ``levels``,
        ``quantities`` (name -> assessment), ``lines`` (profiles), ``execution``.
    """
    if levels < 3:
        raise CaseError("--levels", levels, "a convergence study needs at least 3 levels")
    if levels > MAX_LEVELS:
        raise CaseError("--levels", levels, f"at most {MAX_LEVELS}: every level divides the element size by the "
                        f"ratio, so {MAX_LEVELS} levels at ratio 1.5 already mesh the finest level with about "
                        f"{1.5 ** (3 * (MAX_LEVELS - 1)):,.0f} times the elements of the coarsest")
    if case.solver.backend == "petsc":  # each level's whole mesh is measured in its worker process
        raise CaseError("--solver", "petsc", "a convergence study solves each level in one process; choose a "
                        "single-process backend (auto, pardiso, cholmod, scipy, amg)")
    if not (1.0 < ratio <= MAX_RATIO and math.isfinite(ratio)):
        raise CaseError("--ratio", ratio, f"must be a number greater than 1 and at most {MAX_RATIO:g} "
                        "(for example 1.5 or 2)")
    if case_mesh not in ("coarsest", "finest"):
        raise CaseError("--case-mesh", case_mesh, "must be 'coarsest' or 'finest'")
    if case.geometry.file.suffix.lower() in MESH_SUFFIXES:
        raise CaseError("geometry.file", str(case.geometry.file),
                        "a convergence study re-meshes the part; give a STEP/BREP/IGES geometry, not a mesh file")
    if case.mesh.size is None:
        raise CaseError("mesh.size", None, "a convergence study needs a global element size to scale; set mesh.size")
    factors = level_factors(levels, ratio, case_mesh)
    # The finest level must fit before any level runs (each level's own guard comes later).
    check_readable(case.geometry.file)
    finest = case.with_mesh(case.mesh.scaled(min(factors)))
    # The size is in the case's length unit: measured in another (mm by default) an in-lbf case's
    # finest level was 25.4^3 times too many elements and the study was refused for memory.
    mesh_guard(finest.mesh.order, finest.solver.backend)(measure(finest.geometry.file, finest.mesh.size,
                                                                 length_unit=case.units.length,
                                                                 unit=case.geometry.unit))
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    load0 = os.getloadavg()[0] if hasattr(os, "getloadavg") else 0.0
    t_start = time.perf_counter()
    results: dict[int, dict] = {}

    def kd(i):
        return None if keep_dir is None else str(Path(keep_dir) / f"level-{i + 1}")

    def report(r):
        progress("study", f"level {r['index'] + 1}/{levels} done: size {r['size']:.4g}, {r['dofs']:,} DOF, "
                 f"{r['wall_s']:.1f} s, peak {r['peak_mb']:.0f} MiB")

    in_process = jobs is not None and jobs <= 1
    progress("study", f"{levels} levels, sizes x {', '.join(f'{f:.4g}' for f in factors)} "
             f"(ratio {ratio:g}); level 1 first to measure its memory ...")
    execution: dict = {"cores": cores, "available_memory_mb": available_memory_mb(), "load_average": load0}
    if in_process:
        for i, f in enumerate(factors):
            progress("study", f"level {i + 1}/{levels}: solving (size {case.mesh.size * f:.4g}) ...")
            results[i] = solve_level(case, f, i, kd(i))
            report(results[i])
        execution.update(jobs=1, reason="one process (as requested)", mode="in-process")
    else:
        with _single_threaded_children(True), _pool(1) as ex:
            results[0] = ex.submit(solve_level, case, factors[0], 0, kd(0)).result()
        report(results[0])
        predicted = _predict_peaks(results[0], factors)
        pending = list(range(1, levels))
        n, why = _choose_jobs(jobs, [predicted[i] for i in pending], cores, load0)
        progress("study", f"levels 2-{levels}: {why}")
        execution.update(jobs=n, reason=why, mode="worker processes", predicted_peak_mb=predicted)
        with _single_threaded_children(n > 1), _pool(n) as ex:
            # Largest first, so that the smaller levels fill the other workers meanwhile.
            futs = {ex.submit(solve_level, case, factors[i], i, kd(i)): i for i in sorted(pending, reverse=True)}
            for fut in as_completed(futs):
                r = fut.result()
                results[r["index"]] = r
                report(r)
    wall = time.perf_counter() - t_start
    lv = [results[i] for i in range(levels)]
    execution.update(wall_s=wall, sum_of_level_s=sum(r["wall_s"] for r in lv),
                     measured_peak_mb=[r["peak_mb"] for r in lv])
    execution["speedup"] = execution["sum_of_level_s"] / wall if wall > 0 else None
    study = assemble_study(case, lv, ratio, factors, execution)
    for w in study["warnings"]:
        if progress is quiet:
            log.warning("study: %s", w)
        else:
            progress("study", f"WARNING: {w}")
    return study


#: A point within this many finest global element sizes of a singular peak shares its verdict.
NEAR_PEAK = 2.0


def _flag_points_near(case: Case, quantities: dict, peak: np.ndarray, size: float) -> None:
    """Flag the stresses of named points that lie at a singular peak (e.g. on a re-entrant edge).

    The stress interpolated at such a point may even look settled between levels, because the nodal
    average there depends on how the elements happen to fan around the edge; its neighbourhood
    is what grows, so the point shares the peak's verdict.
    """
    L = case.units.labels["length"]
    for p in case.points:
        dist = float(np.linalg.norm(np.asarray(p.at) - peak))
        if dist > NEAR_PEAK * size:
            continue
        for n, q in quantities.items():
            own = n.startswith(f"points.{p.name}.") or (n.startswith("load_cases.") and f".points.{p.name}." in n)
            if own and q["kind"] == "stress" and q["status"] == "assessed" and not q.get("singular"):
                q["singular"] = True
                q["near_singular_peak"] = dist
                # A singular quantity has no limit, so no band of a converged value (section 3 of
                # docs/convergence.md): the point's own band moves to own_band, its figures stay in
                # the advice.
                q["own_band"], q["own_extrapolated"] = q.get("band"), q.get("extrapolated")
                q["band"] = q["extrapolated"] = q["half_width"] = q["gci_fine"] = None
                q["cause"] = f"{dist:.3g} {L} from the growing peak of von Mises stress"
                q["advice"] = (f"lies {dist:.3g} {L} from the growing (singular) peak of von Mises stress, within "
                               f"{NEAR_PEAK:g} element sizes: do not read this as a converged number; read stress "
                               f"a little away from that point or linearize across the section (its own values: "
                               f"{q.get('advice', '')})")


def refinement_check(h: np.ndarray, nominal: float) -> dict:
    """Effective refinement ratios of the meshes actually made, against the nominal ratio.

    Parameters
    ----------
    h : ndarray, shape (n,)
        Representative size per level, coarse to fine ``[L]`` (``(V/N)^(1/3)``, Celik et al. 2008 eq. 1).
    nominal : float
        The ratio the sizes were divided by.

    Returns
    -------
    dict
        ``nominal``, ``effective`` (``h_k / h_(k+1)``, shape (n - 1,)), ``far_from_nominal`` (per step) and
        ``warning`` (text, or None).
    """
    r = h[:-1] / h[1:]
    with np.errstate(divide="ignore", invalid="ignore"):
        far = np.abs(np.log(r) / math.log(nominal) - 1.0) > RATIO_LOG_TOL
    small = r < MIN_RATIO
    msgs = []
    if far.any():
        msgs.append(f"the meshes made refine by {', '.join(f'{x:.3g}' for x in r)} from level to level "
                    f"(h = (V/N)^(1/3)), not the nominal {nominal:g}: the mesher did not scale every size "
                    "(minimum sizes, curvature or feature sizing); the assessment uses the effective ratios")
    if small.any():
        msgs.append(f"step(s) {', '.join(f'{k + 1}-{k + 2}' for k in np.flatnonzero(small))} refine by less than "
                    f"{MIN_RATIO:g} (Celik et al. 2008 recommend more): the changes between those levels are "
                    "small against mesh noise; use a larger --ratio")
    return {"nominal": nominal, "effective": r, "far_from_nominal": far, "below_minimum": small,
            "warning": "; ".join(msgs) or None}


def study_identity(case: Case) -> dict:
    """``case_sha256`` and ``geometry_sha256`` of the files a study was made from (None where a file
    is missing or the case was built in code), so a report can tell a study of other inputs (stale)."""
    src = Path(case.source) if getattr(case, "source", None) else None
    gfile = getattr(getattr(case, "geometry", None), "file", None)
    geo = Path(gfile) if gfile else None
    return {"case_sha256": sha256_file(src) if src is not None and src.is_file() else None,
            "geometry_sha256": sha256_file(geo) if geo is not None and geo.is_file() else None}


def assemble_study(case: Case, lv: list[dict], ratio: float, factors: list[float], execution: dict) -> dict:
    """The study document from the per-level results (coarsest first)."""
    h = np.array([(r["volume"] / r["elements"]) ** (1.0 / 3.0) for r in lv])
    dofs = [r["dofs"] for r in lv]
    scales = _scales(lv)
    element_order = int(lv[-1]["doc"]["mesh"].get("order", case.mesh.order))
    per_level = [{t.name: t for t in tracked_scalars(r["doc"])} for r in lv]
    names = list(per_level[-1])
    lab = case.units.labels
    unit_of = {"displacement": lab["length"], "stress": lab["stress"], "force": lab["force"],
               "moment": lab["moment"], "energy": lab["energy"], "frequency": "Hz", "factor": "(load factor)"}
    quantities = {}
    for name in names:
        last = per_level[-1][name]
        rows = [pl.get(name) for pl in per_level]
        vals = np.array([np.nan if t is None else t.value for t in rows])
        statics = None
        if last.role == "reaction":
            statics = np.array([np.nan if t is None or t.statics is None else t.statics for t in rows])
        locs = [None if t is None else t.location for t in rows]
        q = assess(vals, h, kind=last.kind, scale=scales[last.kind], ratio=ratio, element_order=element_order,
                   statics=statics, role=last.role, location=last.location, locations=locs,
                   unit=unit_of[last.kind], length_unit=lab["length"])
        q.update(kind=last.kind, unit=unit_of[last.kind], dofs=dofs)
        if last.location is not None:
            q["locations"] = locs
        quantities[name] = q
    mx = quantities.get("max_von_mises")
    if mx is not None:
        at_support = lv[-1]["max_von_mises_at_support"]
        mx["on_regions"] = lv[-1]["max_von_mises_regions"]
        if at_support:
            mx["advice"] = (mx.get("advice", "") + f"; the peak lies on the support region(s) "
                            f"{', '.join(at_support)}: an idealised support edge makes stress there "
                            "mesh-dependent").lstrip("; ")
    if mx is not None and mx.get("singular"):
        _flag_points_near(case, quantities, np.asarray(mx["location"], dtype=float), lv[-1]["size"])
    lines = {}
    for name in lv[-1]["lines"]:
        s = np.asarray(lv[-1]["lines"][name]["s"])
        vm = np.array([np.asarray(r["lines"][name]["von_mises"]) for r in lv])  # (levels, k)
        prof: dict = {"s": s, "von_mises": vm, "extrapolated": np.full(s.size, np.nan),
                "gci_fine": np.full(s.size, np.nan), "observed_order": np.full(s.size, np.nan),
                "convergence": [None] * s.size}
        for j in range(s.size):
            a = assess(vm[:, j], h, kind="stress", scale=scales["stress"], ratio=ratio, element_order=element_order)
            if a["status"] == "assessed":
                prof["extrapolated"][j] = a["extrapolated"]
                prof["gci_fine"][j] = a["gci_fine"]
                prof["observed_order"][j] = a["observed_order"]
                prof["convergence"][j] = a["convergence"]
        lines[name] = prof
    singular = [n_ for n_, q in quantities.items() if q.get("singular")]
    refinement = refinement_check(h, ratio)
    warnings = [refinement["warning"]] if refinement["warning"] else []
    eq = [r["doc"].get("equilibrium_error") for r in lv]
    eqm = [r["doc"].get("moment_equilibrium_error") for r in lv]
    worst_eq = max((abs(e) for e in eq + eqm if e is not None), default=0.0)
    if worst_eq > STATICS_TOL:
        warnings.append(f"equilibrium error up to {worst_eq:.2g} on some level: reactions do not balance the "
                        "loads to the solver's accuracy; check the solver's tolerance")
    return {
        "title": case.title,
        "case_file": str(case.source) if case.source else None,
        **study_identity(case),
        "units": {k: lab[k] for k in ("length", "force", "stress", "moment", "energy")},
        "ratio": ratio,
        "refinement": refinement,
        "warnings": warnings,
        "element_order": element_order,
        "formal_orders": {k: formal_order(k, element_order) for k in unit_of},
        "safety_factor": SAFETY_FACTOR,
        "safety_factor_unverified": SAFETY_FACTOR_UNVERIFIED,
        "tolerances": {"noise": NOISE_TOL, "noise_family": FAMILY_NOISE_TOL, "growth": GROWTH_TOL,
                       "statics": STATICS_TOL, "negligible": NEGLIGIBLE, "order_agree": ORDER_AGREE,
                       "asymptotic": ASYMPTOTIC_TOL, "singular_order": SINGULAR_ORDER},
        "asymptotic_tolerance": ASYMPTOTIC_TOL,
        "scales": scales,
        "levels": [{"level": i + 1, "factor": r["factor"], "size": r["size"], "refine": r["refine"],
                    "nodes": r["nodes"], "elements": r["elements"], "dofs": r["dofs"], "volume": r["volume"],
                    "h": float(h[i]), "ratio_from_previous": None if i == 0 else float(h[i - 1] / h[i]),
                    "wall_s": r["wall_s"], "peak_mb": r["peak_mb"]} for i, r in enumerate(lv)],
        "statics": {"equilibrium_error": eq, "moment_equilibrium_error": eqm},
        "quantities": quantities,
        "lines": lines,
        "singular": singular,
        "execution": execution,
        "method": ("Per quantity: changes within the noise tolerance (0.1 % of its own size, 0.01 % of the largest "
                   "of its kind) count as none; reactions equal to minus the applied load on every level are fixed "
                   "by statics; a value growing on every step by over 0.5 % with no convergent rate is singular; "
                   "otherwise the observed order of every consecutive triplet (Celik et al., J. Fluids Eng. 130, "
                   "2008, with the effective ratios h = (V/N)^(1/3)), the GCI band with the order capped at the "
                   "formal order and Fs = 1.25 where the order is verified, 3 where not (Roache, Verification and "
                   "Validation in Computational Science and Engineering, 1998; ASME V&V 20-2009); asymptotic "
                   "only with four or more levels whose triplets agree. See docs/convergence.md."),
    }
