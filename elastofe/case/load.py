"""Reading and validating case files (TOML).

Every problem is reported as a :class:`~elastofe.errors.CaseError` that names the key path
(``load[2].region``; arrays of tables count from 1), the value and what would be valid.
"""
from __future__ import annotations

import difflib
import math
import sys
from pathlib import Path
from typing import Any

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from ..errors import CaseError
from ..files import CASE_FILE_MAX, read_input_bytes, safe_name, size_text
from ..units import SYSTEMS, UnitSystem, convert_quantity, length_unit_metres
from .collect import Collector
from .keys import check_keys as _check_keys
from .schema import (
    At,
    Beam,
    BeamSection,
    Box,
    BucklingSpec,
    Case,
    Combination,
    Cylinder,
    Edge,
    ElasticSupport,
    ForceLoad,
    Geometry,
    GravityLoad,
    Group,
    Line,
    LoadCase,
    Material,
    MeshSpec,
    ModesSpec,
    Plane,
    PressureLoad,
    Probe,
    Refinement,
    SolverSpec,
    SpreadLoad,
    Support,
    Surfaces,
    TemperatureLoad,
)

#: Mesh files read as given (never re-meshed): Gmsh .msh, VTK .vtu/.vtk and XDMF .xdmf/.xmf (meshio).
MESH_SUFFIXES = (".msh", ".vtu", ".vtk", ".xdmf", ".xmf")
#: XDMF: the XML file, with its arrays inline or in an HDF5 file beside it.
XDMF_SUFFIXES = (".xdmf", ".xmf")
GEOMETRY_SUFFIXES = (".step", ".stp", ".brep", ".iges", ".igs") + MESH_SUFFIXES
SOLVER_BACKENDS: tuple[str, ...] = ("auto", "pardiso", "cholmod", "scipy", "amg")
SOLVER_BACKENDS += ("petsc",)  # the distributed engine (elastofe.parallel), asked for by name only


def output_names(case: Case) -> dict[str, tuple[str, str]]:
    """Every file and VTU array name a run of ``case`` makes from user-given names:
    ``{name: (key path, what)}``. Raises :class:`CaseError` naming both inputs when two map to one name."""
    out: dict[str, tuple[str, str]] = {}

    folded: dict[str, str] = {}  # Windows and macOS file names ignore letter case: 'A.csv' is 'a.csv'

    def claim(name: str, key: str, value: str, what: str) -> None:
        same = folded.get(name.casefold(), name)
        if same in out and out[same][1] != what:
            shown = f"'{name}'" + ("" if same == name else f" (the same file as '{same}' where letter case is ignored)")
            raise CaseError(key, value, f"{what} would be written as {shown}, as {out[same][1]} ({out[same][0]}) "
                            "is: names must differ in letters (not only in their case), digits, '-', '_' or '.' "
                            "once combined; rename one")
        out[name] = (key, what)
        folded.setdefault(name.casefold(), name)

    cases = [(f"load[{lc.loads[0] + 1}].case", lc.name, "load case") for lc in case.load_cases]
    cases += [(f"combination[{i}].name", c.name, "combination") for i, c in enumerate(case.combinations, 1)]
    for ckey, cname, kind in cases:
        for arr in ("displacement", "von_mises", "stress", "principal", "temperature_change"):
            claim(f"{arr}-{safe_name(cname)}", ckey, cname, f"{kind} {cname!r}")
    for i, ln in enumerate(case.lines, 1):
        key = f"line[{i}].name"
        claim(f"line-{safe_name(ln.name)}.csv", key, ln.name, f"line {ln.name!r}")
        claim(f"line-{safe_name(ln.name)}-linearized.json", key, ln.name, f"line {ln.name!r}")
        for _, cname, kind in cases:
            claim(f"line-{safe_name(ln.name)}-{safe_name(cname)}.csv", key, ln.name,
                  f"line {ln.name!r} of {kind} {cname!r}")
    return out


def check_output_names(case: Case) -> None:
    """Refuse (:class:`CaseError`) a case whose lines or load cases would share a file or array name."""
    output_names(case)


def _table(doc: dict, key: str, where: str, required: bool = False) -> dict:
    path = f"{where}.{key}" if where else key
    if key not in doc:
        if required:
            raise CaseError(path, None, "required section is missing")
        return {}
    val = doc[key]
    if not isinstance(val, dict):
        raise CaseError(path, val, "must be a table (a [section] or { key = value })")
    return val


def _array_of_tables(doc: dict, key: str) -> list[dict]:
    val = doc.get(key, [])
    if isinstance(val, dict):
        val = [val]
    if not isinstance(val, list):
        raise CaseError(key, val, f"must be an array of tables written as [[{key}]]")
    for i, item in enumerate(val, 1):
        if not isinstance(item, dict):
            raise CaseError(f"{key}[{i}]", item, f"must be a table written as [[{key}]]")
    return val


#: Magnitudes beyond any physical range, per kind of quantity, in SI (number, pint unit). A value
#: beyond them is a slip of the keyboard or of the unit, and numbers near the float limit would
#: overflow in the solve (1e300 N gives infinite stresses): refused at load time with the key.
#: Generous on purpose (common practice: the largest engineering loads are some 1e9 N, the
#: stiffest solid, diamond, about 1.2e12 Pa, from memory); the plausibility checks of a run say
#: more about values inside these bounds.
LIMITS_SI = {
    "length": (1e6, "m"),                     # 1000 km: coordinates, sizes, tolerances
    "force": (1e15, "N"),
    "moment": (1e18, "N*m"),
    "stress": (1e15, "Pa"),                   # pressures, prescribed stresses
    "density": (1e6, "kg/m^3"),               # 44 times osmium's 22,590 kg/m^3
    "acceleration": (1e10, "m/s^2"),
    "temperature": (1e5, "delta_degC"),
    "expansion": (1e-2, "1/delta_degC"),      # rubber-like solids reach about 2e-4 per K
    "stiffness_per_area": (1e21, "N/m^3"),
    "stress_per_length": (1e18, "Pa/m"),
}
#: Young's modulus: 1 Pa (soft gels are some 10 Pa) to 1e13 Pa (ten times diamond's 1.2e12 Pa).
MODULUS_RANGE_SI = (1.0, 1e13)
#: Mass density: 1e-3 kg/m^3 (aerogels reach about 0.2) to 1e6 kg/m^3 (osmium 22,590).
DENSITY_RANGE_SI = (1e-3, 1e6)
#: Gravity in multiples of standard gravity (centrifuges reach some 1e6 g).
GRAVITY_MAX = 1e9
#: Factors of a load-case combination.
FACTOR_MAX = 1e6

_SI_LABEL = {"delta_degC": "K", "1/delta_degC": "1/K", "N*m": "N·m", "kg/m^3": "kg/m^3", "m/s^2": "m/s^2",
             "N/m^3": "N/m^3", "Pa/m": "Pa/m"}


def _fmt(x: float) -> str:
    return f"{x:.4g}"


class _Reader:
    """Converts raw TOML values with the case's unit system."""

    def __init__(self, units: UnitSystem):
        self.units = units
        self._limits: dict[str, float] = {}

    def unit_label(self, kind: str) -> str:
        """How the case writes a unit of ``kind`` ("MPa", "N*s^2/mm^4", ...)."""
        labels = self.units.labels
        if kind in labels:
            return labels[kind]
        if kind == "temperature":
            return "K"
        if kind == "expansion":
            return "1/K"
        if kind == "stiffness_per_area":
            return f"{labels['force']}/{labels['length']}^3"
        if kind == "stress_per_length":
            return f"{labels['stress']}/{labels['length']}"
        from ..units import target_unit

        return target_unit(kind, self.units)

    def si_in_case(self, value: float, unit: str, kind: str) -> float:
        """An SI quantity ``value unit`` in the case's unit of ``kind``."""
        return convert_quantity(f"{value!r} {unit}", kind, self.units, key=kind)

    def limit(self, kind: str) -> float:
        """The magnitude beyond any physical range for ``kind``, in the case's units."""
        if kind not in self._limits:
            v, unit = LIMITS_SI[kind]
            self._limits[kind] = self.si_in_case(v, unit, kind)
        return self._limits[kind]

    def check_range(self, out: float, value: Any, kind: str, key: str, lo_si: float | None = None,
                    hi_si: float | None = None) -> float:
        """Refuse ``out`` [case units] outside ``[lo_si, hi_si]`` (SI of ``kind``), saying the bounds."""
        si_unit = LIMITS_SI[kind][1]
        hi = self.si_in_case(hi_si, si_unit, kind) if hi_si is not None else self.limit(kind)
        si_hi = hi_si if hi_si is not None else LIMITS_SI[kind][0]
        label = self.unit_label(kind)
        si_label = _SI_LABEL.get(si_unit, si_unit)
        if lo_si is not None:
            lo = self.si_in_case(lo_si, si_unit, kind)
            if not (lo <= out <= hi):
                si = "" if si_label == label else f" ({_fmt(lo_si)} to {_fmt(si_hi)} {si_label})"
                raise CaseError(key, value, f"is beyond any physical range: it must lie between {_fmt(lo)} and "
                                f"{_fmt(hi)} {label}{si}; check the number and its unit (the case's unit is {label})")
        elif abs(out) > hi:
            si = "" if si_label == label else f" ({_fmt(si_hi)} {si_label})"
            raise CaseError(key, value, f"is beyond any physical range: its magnitude must not exceed {_fmt(hi)} "
                            f"{label}{si}; check the number and its unit (the case's unit is {label})")
        return out

    def number(self, value: Any, kind: str, key: str, *, positive=False, nonneg=False, limit=True) -> float:
        """``value`` in the case's unit of ``kind``; ``limit`` refuses magnitudes beyond
        :data:`LIMITS_SI` (callers with a narrower range of their own pass False and check it)."""
        out = convert_quantity(value, kind, self.units, key=key)
        if not math.isfinite(out):
            raise CaseError(key, value, "must be a finite number")
        if positive and out <= 0:
            raise CaseError(key, value, "must be greater than zero")
        if nonneg and out < 0:
            raise CaseError(key, value, "must be zero or greater")
        if limit and kind in LIMITS_SI:
            self.check_range(out, value, kind, key)
        return out

    def vector(self, value: Any, kind: str, key: str, *, nonzero=False) -> tuple[float, float, float]:
        if not isinstance(value, list) or len(value) != 3:
            raise CaseError(key, value, "must be a list of three numbers [x, y, z]")
        out = tuple(self.number(v, kind, f"{key}[{i}]") for i, v in enumerate(value))
        if nonzero and all(v == 0 for v in out):
            raise CaseError(key, value, "must not be the zero vector")
        return out  # type: ignore[return-value]


def _string(value: Any, key: str) -> str:
    if not isinstance(value, str):
        raise CaseError(key, value, "must be a string in quotes")
    return value


def _name(value: Any, key: str) -> str:
    s = _string(value, key)
    if not s.strip():
        raise CaseError(key, value, "must be a non-empty name")
    return s


def _integer(value: Any, key: str, lo: int | None = None, hi: int | None = None) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise CaseError(key, value, "must be a whole number")
    if (lo is not None and value < lo) or (hi is not None and value > hi):
        rng = f"from {lo} to {hi}" if hi is not None else f"at least {lo}"
        raise CaseError(key, value, f"must be {rng}")
    return value


SELECTOR_KINDS = ("plane", "cylinder", "at", "box", "surfaces", "group", "edge")


def _selector(name: str, raw: Any, rd: _Reader):
    key = f"regions.{name}"
    if not isinstance(raw, dict):
        raise CaseError(key, raw, f"must be a table with one selector: {', '.join(SELECTOR_KINDS)}")
    kinds = [k for k in raw if k in SELECTOR_KINDS]
    _check_keys(raw, SELECTOR_KINDS + ("several",), key)
    if "several" in raw and not isinstance(raw["several"], bool):
        raise CaseError(f"{key}.several", raw["several"], "must be true or false (true: the region may be "
                        "several separate surfaces, or cylinders with different axes)")
    if len(kinds) != 1:
        raise CaseError(key, raw, f"must have exactly one selector of {', '.join(SELECTOR_KINDS)}")
    kind = kinds[0]
    val = raw[kind]
    k = f"{key}.{kind}"
    if kind == "plane":
        if not isinstance(val, dict):
            raise CaseError(k, val, "must be { point = [x, y, z], normal = [nx, ny, nz] }")
        _check_keys(val, ("point", "normal", "tol"), k)
        for req in ("point", "normal"):
            if req not in val:
                raise CaseError(f"{k}.{req}", None, "is required")
        tol = rd.number(val["tol"], "length", f"{k}.tol", positive=True) if "tol" in val else None
        return Plane(rd.vector(val["point"], "length", f"{k}.point"),
                     rd.vector(val["normal"], "dimensionless", f"{k}.normal", nonzero=True), tol)
    if kind == "cylinder":
        if not isinstance(val, dict):
            raise CaseError(k, val, "must be { radius = r } with optional axis and point")
        _check_keys(val, ("radius", "axis", "point", "tol"), k)
        if "radius" not in val:
            raise CaseError(f"{k}.radius", None, "is required")
        return Cylinder(
            rd.number(val["radius"], "length", f"{k}.radius", positive=True),
            rd.vector(val["axis"], "dimensionless", f"{k}.axis", nonzero=True) if "axis" in val else None,
            rd.vector(val["point"], "length", f"{k}.point") if "point" in val else None,
            rd.number(val["tol"], "length", f"{k}.tol", positive=True) if "tol" in val else None)
    if kind == "at":
        if isinstance(val, dict):
            _check_keys(val, ("point", "tol"), k)
            if "point" not in val:
                raise CaseError(f"{k}.point", None, "is required")
            tol = rd.number(val["tol"], "length", f"{k}.tol", positive=True) if "tol" in val else None
            return At(rd.vector(val["point"], "length", f"{k}.point"), tol)
        return At(rd.vector(val, "length", k))
    if kind == "box":
        if not isinstance(val, dict):
            raise CaseError(k, val, "must be { min = [x, y, z], max = [x, y, z] }")
        _check_keys(val, ("min", "max"), k)
        for req in ("min", "max"):
            if req not in val:
                raise CaseError(f"{k}.{req}", None, "is required")
        lo = rd.vector(val["min"], "length", f"{k}.min")
        hi = rd.vector(val["max"], "length", f"{k}.max")
        if any(a > b for a, b in zip(lo, hi)):
            raise CaseError(f"{k}.max", val["max"], "must be at least min in every component")
        return Box(lo, hi)
    if kind == "edge":
        return _edge(val, k, rd)
    if kind == "surfaces":
        if isinstance(val, int) and not isinstance(val, bool):
            val = [val]
        if not isinstance(val, list) or not val:
            raise CaseError(k, val, "must be a non-empty list of surface ids, e.g. [3, 7]")
        ids = tuple(_integer(v, f"{k}[{i}]", lo=1) for i, v in enumerate(val))
        return Surfaces(tuple(dict.fromkeys(ids)))  # an id given twice is one surface (its area counts once)
    return Group(_name(val, k))


def _edge(val: Any, k: str, rd: _Reader) -> Edge:
    """``edge = { start = [..], end = [..] }`` or ``edge = { region = "name", plane = { point, normal } }``."""
    forms = ("{ start = [x, y, z], end = [x, y, z] } or "
             "{ region = \"name\", plane = { point = [x, y, z], normal = [nx, ny, nz] } }, optional tol")
    if not isinstance(val, dict):
        raise CaseError(k, val, f"must be {forms}")
    _check_keys(val, ("start", "end", "region", "plane", "tol"), k)
    tol = rd.number(val["tol"], "length", f"{k}.tol", positive=True) if "tol" in val else None
    if "start" in val or "end" in val:
        if "region" in val or "plane" in val or not ("start" in val and "end" in val):
            raise CaseError(k, val, f"must be {forms}")
        a = rd.vector(val["start"], "length", f"{k}.start")
        b = rd.vector(val["end"], "length", f"{k}.end")
        if a == b:
            raise CaseError(f"{k}.end", val["end"], "must differ from start")
        return Edge(start=a, end=b, tol=tol)
    if "region" not in val or "plane" not in val:
        raise CaseError(k, val, f"must be {forms}")
    pl = val["plane"]
    if not isinstance(pl, dict) or "point" not in pl or "normal" not in pl:
        raise CaseError(f"{k}.plane", pl, "must be { point = [x, y, z], normal = [nx, ny, nz] }")
    _check_keys(pl, ("point", "normal"), f"{k}.plane")
    return Edge(region=_name(val["region"], f"{k}.region"),
                point=rd.vector(pl["point"], "length", f"{k}.plane.point"),
                normal=rd.vector(pl["normal"], "dimensionless", f"{k}.plane.normal", nonzero=True), tol=tol)


SUPPORT_FRAMES = {"global": "xyz", "normal": "n", "cylindrical": "rta"}


def _support(i: int, s: dict, rd: _Reader):
    """One [[support]] table: held components in a frame, or an elastic foundation."""
    k = f"support[{i}]"
    _check_keys(s, ("region", "fix", "value", "moment_about", "foundation", "at", "name", "tol"), k)
    if "at" in s:
        return _point_support(i, s, rd)
    for key in ("name", "tol"):
        if key in s:
            raise CaseError(f"{k}.{key}", s[key], "only applies to a point support (at = [x, y, z])")
    if "region" not in s:
        raise CaseError(f"{k}.region", None, "is required (or at = [x, y, z] for a point support)")
    region = _name(s["region"], f"{k}.region")
    about = rd.vector(s["moment_about"], "length", f"{k}.moment_about") if "moment_about" in s else None
    if "foundation" in s:
        for bad in ("fix", "value"):
            if bad in s:
                raise CaseError(f"{k}.{bad}", s[bad], "an elastic support (foundation) holds nothing; remove it")
        f = s["foundation"]
        kf = f"{k}.foundation"
        if not isinstance(f, dict):
            raise CaseError(kf, f, "must be { normal = k_n, tangential = k_t } (stiffness per unit area)")
        _check_keys(f, ("normal", "tangential"), kf)
        if "normal" not in f:
            raise CaseError(f"{kf}.normal", None, "is required (stiffness per unit area, e.g. \"50 N/mm^3\")")
        kn = rd.number(f["normal"], "stiffness_per_area", f"{kf}.normal", nonneg=True)
        kt = rd.number(f.get("tangential", 0.0), "stiffness_per_area", f"{kf}.tangential", nonneg=True)
        if kn == 0 and kt == 0:
            raise CaseError(kf, f, "at least one of normal and tangential must be greater than zero")
        return ElasticSupport(region, kn, kt, about)
    fix_raw = s.get("fix", "xyz")
    fix = _string(fix_raw, f"{k}.fix").lower()
    frames = [name for name, letters in SUPPORT_FRAMES.items() if fix and set(fix) <= set(letters)]
    if not fix or len(set(fix)) != len(fix) or not frames:
        raise CaseError(f"{k}.fix", fix_raw, "must name held components once each, all of one frame: any of "
                        "x, y, z (global); n (normal of a planar region: sliding, symmetry); or r, t, a "
                        "(radial, tangential, axial of a cylindrical region)")
    letters = SUPPORT_FRAMES[frames[0]]
    value = (0.0, 0.0, 0.0)
    if "value" in s:
        if frames[0] == "normal" and not isinstance(s["value"], list):
            value = (rd.number(s["value"], "length", f"{k}.value"), 0.0, 0.0)
        else:
            value = rd.vector(s["value"], "length", f"{k}.value")
        check_value_held(value, letters, fix, f"{k}.value", s["value"])
    return Support(region, "".join(c for c in letters if c in fix), value, about)


def check_value_held(value, letters: str, fix: str, key: str, raw) -> None:
    """Refuse a non-zero prescribed displacement of a component the support does not hold: it would
    be ignored, and the part would not move as the case says."""
    names = (letters + "--")[:3]
    free = [(names[c] if names[c] != "-" else f"component {c + 1}", v) for c, v in enumerate(value)
            if v != 0.0 and (names[c] == "-" or names[c] not in fix)]
    if free:
        what = ", ".join(f"{n} = {v:g}" for n, v in free)
        raise CaseError(key, raw, f"prescribes {what}, which fix = '{fix}' does not hold (a value is used only "
                        f"for held components, in the order {', '.join(c for c in names if c != '-')}"
                        f"{', -, -' if letters == 'n' else ''}); give 0 there, or add it to fix")


def _point_support(i: int, s: dict, rd: _Reader) -> Support:
    """A [[support]] with ``at = [x, y, z]``: the node at that point held in global components."""
    k = f"support[{i}]"
    for bad in ("region", "foundation", "moment_about"):
        if bad in s:
            why = {"region": "a point support holds the node at 'at', not a region: give one of region or at",
                   "foundation": "an elastic support needs a region, not a point",
                   "moment_about": "a point support's reaction is a force at its node; its moment needs no "
                                   "other point"}[bad]
            raise CaseError(f"{k}.{bad}", s[bad], why)
    at = rd.vector(s["at"], "length", f"{k}.at")
    fix_raw = s.get("fix", "xyz")
    fix = _string(fix_raw, f"{k}.fix").lower()
    if not fix or len(set(fix)) != len(fix) or not set(fix) <= set("xyz"):
        raise CaseError(f"{k}.fix", fix_raw, "must name held global components once each: any of x, y, z "
                        "(a point has no normal or axis, so n and r, t, a do not apply)")
    value = rd.vector(s["value"], "length", f"{k}.value") if "value" in s else (0.0, 0.0, 0.0)
    if "value" in s:
        check_value_held(value, "xyz", fix, f"{k}.value", s["value"])
    name = _name(s["name"], f"{k}.name") if "name" in s else f"point support {i}"
    tol = rd.number(s["tol"], "length", f"{k}.tol", positive=True) if "tol" in s else None
    return Support("", "".join(c for c in "xyz" if c in fix), value, None, at=at, name=name, tol=tol)


LOAD_KINDS = ("force", "pressure", "gravity", "temperature")
#: Keys each kind of load accepts besides its own and ``case``.
LOAD_EXTRA = {"force": ("region", "distribution", "at", "moment"), "moment": ("region", "at"),
              "pressure": ("region", "gradient", "origin", "clip"), "gravity": (), "temperature": ()}
DISTRIBUTIONS = ("uniform", "bearing")


def _load(i: int, ld: dict, rd: _Reader, base: Path):
    """One [[load]] table -> (load, the load case names it belongs to)."""
    k = f"load[{i}]"
    allowed = ("region", "force", "moment", "at", "distribution", "pressure", "gradient", "origin",
               "clip", "gravity", "temperature", "case")
    _check_keys(ld, allowed, k)
    present = [c for c in LOAD_KINDS if c in ld]
    if not present and "moment" in ld:
        present = ["moment"]
    if len(present) != 1:
        raise CaseError(k, ld, "must have exactly one of force (with optional moment and at), pressure, "
                        "gravity, temperature")
    kind = present[0]
    for key in ld:
        if key not in (kind, "case") + LOAD_EXTRA[kind]:
            raise CaseError(f"{k}.{key}", ld[key], f"does not apply to a {kind} load")
    cases = _case_tags(ld.get("case"), f"{k}.case")
    if kind == "gravity":
        g = gravity_vector(ld["gravity"], f"{k}.gravity", rd)
        for i, c in enumerate(g):
            if abs(c) > GRAVITY_MAX:
                raise CaseError(f"{k}.gravity[{i}]", ld["gravity"][i], f"is beyond any physical range: gravity is "
                                f"given in multiples of standard gravity and must not exceed {GRAVITY_MAX:.0e} g")
        return GravityLoad(g), cases
    if kind == "temperature":
        return _temperature(ld["temperature"], f"{k}.temperature", rd, base), cases
    if "region" not in ld:
        raise CaseError(f"{k}.region", None, f"is required for a {kind} load")
    region = _name(ld["region"], f"{k}.region")
    if kind == "pressure":
        grad = rd.vector(ld["gradient"], "stress_per_length", f"{k}.gradient") if "gradient" in ld else None
        for key in ("origin", "clip"):
            if key in ld and grad is None:
                raise CaseError(f"{k}.{key}", ld[key], "only applies with gradient (a linearly varying pressure)")
        origin = rd.vector(ld["origin"], "length", f"{k}.origin") if "origin" in ld else (0.0, 0.0, 0.0)
        clip = ld.get("clip", False)
        if not isinstance(clip, bool):
            raise CaseError(f"{k}.clip", clip, "must be true or false")
        return PressureLoad(region, rd.number(ld["pressure"], "stress", f"{k}.pressure"), grad, origin, clip), cases
    if "at" in ld or kind == "moment" or "moment" in ld:  # a force with a moment was read without it
        if "at" not in ld:
            raise CaseError(f"{k}.at", None, "a moment needs the point it acts at: at = [x, y, z]")
        if "distribution" in ld:
            raise CaseError(f"{k}.distribution", ld["distribution"], "does not apply to a force at a point "
                            "(it is spread over the region by nodal area)")
        force = rd.vector(ld["force"], "force", f"{k}.force") if "force" in ld else (0.0, 0.0, 0.0)
        moment = rd.vector(ld["moment"], "moment", f"{k}.moment") if "moment" in ld else (0.0, 0.0, 0.0)
        return SpreadLoad(region, rd.vector(ld["at"], "length", f"{k}.at"), force, moment), cases
    dist = _string(ld.get("distribution", "uniform"), f"{k}.distribution")
    if dist not in DISTRIBUTIONS:
        raise CaseError(f"{k}.distribution", dist, f"must be one of {', '.join(DISTRIBUTIONS)}")
    force = rd.vector(ld["force"], "force", f"{k}.force", nonzero=dist == "bearing")
    return ForceLoad(region, force, dist), cases


def gravity_vector(raw: Any, key: str, rd: _Reader) -> tuple[float, float, float]:
    """Gravity in multiples of standard gravity; a component written as an acceleration with its
    unit ("-9.81 m/s^2", "-386.1 in/s^2") is divided by standard gravity (9.80665 m/s^2, CGPM 1901)."""
    if not isinstance(raw, list) or len(raw) != 3:
        raise CaseError(key, raw, "must be a list of three numbers [x, y, z] (multiples of standard gravity)")
    out = []
    for i, v in enumerate(raw):
        try:
            out.append(rd.number(v, "dimensionless", f"{key}[{i}]"))
        except CaseError:
            if not isinstance(v, str):
                raise
            try:
                a = rd.number(v, "acceleration", f"{key}[{i}]")
            except CaseError:
                raise CaseError(f"{key}[{i}]", v, "expected a multiple of standard gravity such as -1, or an "
                                "acceleration such as \"-9.81 m/s^2\"") from None
            out.append(a / rd.units.gravity())
    return tuple(out)  # type: ignore[return-value]


def _temperature(raw: Any, k: str, rd: _Reader, base: Path) -> TemperatureLoad:
    if not isinstance(raw, dict):
        return TemperatureLoad(delta=rd.number(raw, "temperature", k))
    _check_keys(raw, ("formula", "file", "field", "reference"), k)
    if isinstance(raw.get("reference"), str):
        # The reference is a level on the scale of the formula's or file's numbers, which carry no
        # unit: "293.15 K" against a field in degrees Celsius, or "68 degF" (read as a 68 degF
        # difference, 37.8 K), would shift every temperature silently.
        raise CaseError(f"{k}.reference", raw["reference"],
                        "must be a plain number on the scale of the formula's (or file's) values, which carry "
                        "no unit: e.g. reference = 20 for a field in degrees Celsius")
    ref = rd.number(raw["reference"], "temperature", f"{k}.reference") if "reference" in raw else 0.0
    if ("formula" in raw) == ("file" in raw):
        raise CaseError(k, raw, "must have exactly one of formula (in x, y, z) or file (CSV or VTU point data)")
    if "formula" in raw:
        from ..formula import FormulaError, parse_formula

        text = _string(raw["formula"], f"{k}.formula")
        try:
            parse_formula(text)
        except FormulaError as err:
            raise CaseError(f"{k}.formula", text, str(err)) from None
        if "field" in raw:
            raise CaseError(f"{k}.field", raw["field"], "only applies with file")
        return TemperatureLoad(formula=text, reference=ref)
    path = Path(_string(raw["file"], f"{k}.file"))
    if not path.is_absolute():
        path = base / path
    if path.suffix.lower() not in (".csv", ".vtu", ".vtk"):
        raise CaseError(f"{k}.file", raw["file"], "must be a .csv (columns x, y, z and the value) or .vtu/.vtk file")
    field_name = _name(raw["field"], f"{k}.field") if "field" in raw else None
    return TemperatureLoad(file=path, field=field_name, reference=ref)


RESERVED_CASE_NAMES = ("envelope",)


def _case_tags(raw: Any, k: str) -> tuple[str, ...]:
    if raw is None:
        return ()
    names = raw if isinstance(raw, list) else [raw]
    if not names:
        raise CaseError(k, raw, "must name at least one load case")
    out = []
    for j, n in enumerate(names):
        name = _name(n, f"{k}[{j}]" if isinstance(raw, list) else k)
        if name in RESERVED_CASE_NAMES:
            raise CaseError(k, name, "is reserved; choose another load case name")
        if name not in out:
            out.append(name)
    return tuple(out)


def _load_cases(tags: list[tuple[str, ...]]) -> tuple[LoadCase, ...]:
    """Load cases from the ``case`` tags of the loads, in order of first mention."""
    if not any(tags):
        return ()
    for i, t in enumerate(tags, 1):
        if not t:
            raise CaseError(f"load[{i}].case", None, "is required once any load names a load case: "
                            "give the case (or a list of cases) this load belongs to")
    names: list[str] = []
    for t in tags:
        names += [n for n in t if n not in names]
    return tuple(LoadCase(n, tuple(i for i, t in enumerate(tags) if n in t)) for n in names)


def _combinations(doc: dict, rd: _Reader, load_cases: tuple[LoadCase, ...]) -> tuple[Combination, ...]:
    out: list[Combination] = []
    known = [lc.name for lc in load_cases]
    for i, c in enumerate(_array_of_tables(doc, "combination"), 1):
        k = f"combination[{i}]"
        _check_keys(c, ("name", "factors"), k)
        for req in ("name", "factors"):
            if req not in c:
                raise CaseError(f"{k}.{req}", None, "is required")
        name = _name(c["name"], f"{k}.name")
        if name in known or name in RESERVED_CASE_NAMES or name in [x.name for x in out]:
            raise CaseError(f"{k}.name", name, "must differ from every load case, other combination and 'envelope'")
        f = c["factors"]
        if not isinstance(f, dict) or not f:
            raise CaseError(f"{k}.factors", f,
                            "must be a table of load case name = factor, e.g. { lift = 1.35, wind = 1.5 }")
        if not known:
            raise CaseError(f"{k}", name, "combinations need named load cases: tag loads with case = \"name\"")
        factors = []
        for lc, val in f.items():
            if lc not in known:
                hint = difflib.get_close_matches(lc, known, n=1)
                extra = f"did you mean {hint[0]!r}? " if hint else ""
                raise CaseError(f"{k}.factors.{lc}", val, f"unknown load case; {extra}load cases: {', '.join(known)}")
            fac = rd.number(val, "dimensionless", f"{k}.factors.{lc}")
            if abs(fac) > FACTOR_MAX:
                raise CaseError(f"{k}.factors.{lc}", val, f"is beyond any sensible range: a load factor must not "
                                f"exceed {FACTOR_MAX:.0e} in magnitude")
            factors.append((lc, fac))
        out.append(Combination(name, tuple(factors)))
    return tuple(out)


MATERIAL_KEYS = ("name", "E", "nu", "density", "yield_strength", "expansion", "bodies", "at", "groups")
#: How a material names its bodies.
MATERIAL_SELECTORS = ("bodies", "at", "groups")


def _material(m: dict, k: str, rd: _Reader, several: bool) -> Material:
    """One ``[material]`` table or ``[[material]]`` entry (key path ``k``)."""
    _check_keys(m, MATERIAL_KEYS, k)
    for req in ("E", "nu") + (("name",) if several else ()):
        if req not in m:
            why = "is required" if req != "name" else \
                "is required when the part has several materials (it names the material in the results)"
            raise CaseError(f"{k}.{req}", None, why)
    E = rd.number(m["E"], "stress", f"{k}.E", positive=True, limit=False)
    rd.check_range(E, m["E"], "stress", f"{k}.E", *MODULUS_RANGE_SI)
    nu = rd.number(m["nu"], "dimensionless", f"{k}.nu")
    if not -1.0 < nu < 0.5:
        raise CaseError(f"{k}.nu", m["nu"], "must lie strictly between -1 and 0.5 (steel 0.3, "
                        "aluminium 0.33, rubber-like solids up to 0.49 with mesh.order = 2)")
    density = rd.number(m["density"], "density", f"{k}.density", positive=True, limit=False) \
        if "density" in m else None
    if density is not None:
        rd.check_range(density, m["density"], "density", f"{k}.density", *DENSITY_RANGE_SI)
    fy = rd.number(m["yield_strength"], "stress", f"{k}.yield_strength", positive=True) \
        if "yield_strength" in m else None
    alpha = rd.number(m["expansion"], "expansion", f"{k}.expansion") if "expansion" in m else None
    name = _name(m["name"], f"{k}.name") if "name" in m else "material"
    chosen = [s for s in MATERIAL_SELECTORS if s in m]
    if len(chosen) > 1:
        raise CaseError(k, {s: m[s] for s in chosen}, "give one of bodies = [ids], at = [[x, y, z], ...] or "
                        "groups = [\"name\", ...] to say which bodies the material is for, not several")
    if several and not chosen:
        raise CaseError(f"{k}.bodies", None, "is required when the part has several materials: give "
                        "bodies = [ids] (as 'elastofe surfaces' lists them), at = [[x, y, z], ...] (a point "
                        "inside each body) or groups = [\"name\", ...] (volume physical groups of a mesh file)")
    bodies: tuple = ()
    at: tuple = ()
    groups: tuple = ()
    if "bodies" in m:
        v = m["bodies"]
        if isinstance(v, int) and not isinstance(v, bool):
            v = [v]
        if not isinstance(v, list) or not v:
            raise CaseError(f"{k}.bodies", v, "must be a non-empty list of body ids, e.g. [1, 3], as "
                            "'elastofe surfaces' lists them")
        bodies = tuple(_integer(b, f"{k}.bodies[{j}]", lo=1) for j, b in enumerate(v))
    if "at" in m:
        v = m["at"]
        if isinstance(v, list) and len(v) == 3 and not any(isinstance(c, list) for c in v):
            v = [v]  # one point written as [x, y, z]
        if not isinstance(v, list) or not v:
            raise CaseError(f"{k}.at", v, "must be a list of points inside the bodies, [[x, y, z], ...]")
        at = tuple(rd.vector(p, "length", f"{k}.at[{j}]") for j, p in enumerate(v))
    if "groups" in m:
        v = m["groups"]
        if isinstance(v, str):
            v = [v]
        if not isinstance(v, list) or not v:
            raise CaseError(f"{k}.groups", v, "must be a list of volume physical group names of the mesh "
                            "file, e.g. [\"bush\"]")
        groups = tuple(_name(g, f"{k}.groups[{j}]") for j, g in enumerate(v))
    return Material(E, nu, density, fy, alpha, name=name, bodies=bodies, at=at, groups=groups, key=k)


def _materials(doc: dict, rd: _Reader) -> list[Material]:
    """``[material]`` (one material) or ``[[material]]`` (one or more, each naming its bodies)."""
    if "material" not in doc:
        raise CaseError("material", None, "required section is missing")
    raw = doc["material"]
    if isinstance(raw, dict):
        return [_material(raw, "material", rd, several=False)]
    if not isinstance(raw, list) or not raw:
        raise CaseError("material", raw, "must be a table [material], or tables [[material]] each with a name "
                        "and the bodies it applies to")
    for i, item in enumerate(raw, 1):
        if not isinstance(item, dict):
            raise CaseError(f"material[{i}]", item, "must be a table written as [[material]]")
    several = len(raw) > 1
    out = [_material(m, f"material[{i}]", rd, several) for i, m in enumerate(raw, 1)]
    seen: dict[str, int] = {}
    for i, m in enumerate(out, 1):
        if m.name in seen:
            raise CaseError(f"material[{i}].name", m.name, f"duplicates material[{seen[m.name]}]; names must be unique")
        seen[m.name] = i
    claimed: dict[int, int] = {}
    for i, m in enumerate(out, 1):
        for b in m.bodies:
            if b in claimed and claimed[b] != i:
                raise CaseError(f"material[{i}].bodies", list(m.bodies), f"claims body {b}, which "
                                f"material[{claimed[b]}] ({out[claimed[b] - 1].name!r}) also claims; every body "
                                "gets exactly one material")
            claimed[b] = i
    return out


def parse_case(doc: dict, base: Path | None = None, source: Path | None = None) -> Case:
    """Validate a parsed TOML document and build a :class:`Case`.

    Parameters
    ----------
    doc : dict
        The TOML document as parsed.
    base : Path, optional
        Folder that relative paths refer to (the case file's folder).
    source : Path, optional
        The case file, recorded in the case.
    """
    if not isinstance(doc, dict):
        raise CaseError("(case)", doc, "must be a TOML table")
    check_depth(doc)
    top: tuple[str, ...] = ("title", "units", "geometry", "material", "mesh", "regions", "support", "load",
                            "point", "line", "solver", "combination", "beam", "modes", "buckling")
    top += ("reference",)
    _check_keys(doc, top, "")
    # Every independent part is read in a section of its own so that all mistakes are reported at
    # once (case.collect); a part that needs one that failed is skipped, not reported again.
    col = Collector()
    title = ""
    with col.section():
        title = _string(doc.get("title", ""), "title")
    units = SYSTEMS["mm-N"]  # read on in the default system when `units` is wrong
    with col.section():
        units_name = doc.get("units", "mm-N")
        if not isinstance(units_name, str) or units_name not in SYSTEMS:
            raise CaseError("units", units_name, f"must be one of {', '.join(repr(s) for s in SYSTEMS)}")
        units = SYSTEMS[units_name]
    rd = _Reader(units)
    base = Path(base) if base is not None else Path.cwd()

    geometry = None
    with col.section():
        g = _table(doc, "geometry", "", required=True)
        _check_keys(g, ("file", "unit"), "geometry")
        if "file" not in g:
            raise CaseError("geometry.file", None, "is required: a STEP/BREP/IGES or .msh/.vtu/.vtk/.xdmf file")
        gfile = Path(_string(g["file"], "geometry.file"))
        if not gfile.is_absolute():
            gfile = (base / gfile)
        if gfile.suffix.lower() not in GEOMETRY_SUFFIXES:
            raise CaseError("geometry.file", g["file"], f"must end in one of {', '.join(GEOMETRY_SUFFIXES)}")
        gunit = None
        if "unit" in g:
            length_unit_metres(g["unit"], key="geometry.unit")  # a length unit, or CaseError
            gunit = g["unit"].strip()
        geometry = Geometry(gfile, gunit)

    materials: list[Material] = []
    material = None
    with col.section():
        materials = _materials(doc, rd)
        material = materials[0]

    mesh_spec = None
    with col.section():
        ms = _table(doc, "mesh", "")
        _check_keys(ms, ("order", "size", "refine"), "mesh")
        order = _integer(ms.get("order", 2), "mesh.order", 1, 2)
        for mat in materials:
            check_locking(mat.nu, 4 if order == 1 else 10, f"{mat.key}.nu")
        size = rd.number(ms["size"], "length", "mesh.size", positive=True) if "size" in ms else None
        refine_raw = ms.get("refine", [])
        if not isinstance(refine_raw, list):
            raise CaseError("mesh.refine", refine_raw, "must be a list of { region = \"name\", size = s }")
        refine = []
        for i, r in enumerate(refine_raw, 1):
            k = f"mesh.refine[{i}]"
            if not isinstance(r, dict):
                raise CaseError(k, r, "must be { region = \"name\", size = s }")
            _check_keys(r, ("region", "size"), k)
            if "region" not in r or "size" not in r:
                raise CaseError(k, r, "needs both region and size")
            refine.append(Refinement(_name(r["region"], f"{k}.region"),
                                     rd.number(r["size"], "length", f"{k}.size", positive=True)))
        mesh_spec = MeshSpec(order, size, tuple(refine))

    regions: dict = {}
    regions_raw: dict = {}
    with col.section():
        regions_raw = _table(doc, "regions", "")
    for name, raw in regions_raw.items():
        with col.section():
            regions[name] = _selector(name, raw, rd)
    several = frozenset(name for name, raw in regions_raw.items()
                        if isinstance(raw, dict) and raw.get("several") is True)

    supports = col.items(lambda: _array_of_tables(doc, "support"), lambda i, sp: _support(i, sp, rd))
    before = col.count
    parsed = col.items(lambda: _array_of_tables(doc, "load"), lambda i, ld: _load(i, ld, rd, base))
    loads = [load for load, _ in parsed]
    load_cases: tuple = ()
    combinations: tuple = ()
    if col.count == before:  # load cases are read from every load's tags: only when all loads were read
        with col.section():
            load_cases = _load_cases([cases for _, cases in parsed])
            combinations = _combinations(doc, rd, load_cases)

    def point(i: int, p: dict) -> Probe:
        k = f"point[{i}]"
        _check_keys(p, ("name", "at"), k)
        for req in ("name", "at"):
            if req not in p:
                raise CaseError(f"{k}.{req}", None, "is required")
        return Probe(_name(p["name"], f"{k}.name"), rd.vector(p["at"], "length", f"{k}.at"))

    points = col.items(lambda: _array_of_tables(doc, "point"), point)

    def line(i: int, ln: dict) -> Line:
        k = f"line[{i}]"
        _check_keys(ln, ("name", "start", "end", "samples"), k)
        for req in ("name", "start", "end"):
            if req not in ln:
                raise CaseError(f"{k}.{req}", None, "is required")
        start = rd.vector(ln["start"], "length", f"{k}.start")
        end = rd.vector(ln["end"], "length", f"{k}.end")
        if start == end:
            raise CaseError(f"{k}.end", ln["end"], "must differ from start")
        return Line(_name(ln["name"], f"{k}.name"), start, end,
                    _integer(ln.get("samples", 41), f"{k}.samples", 2, 100000))

    lines = col.items(lambda: _array_of_tables(doc, "line"), line)

    solver = SolverSpec()
    with col.section():
        sv = _table(doc, "solver", "")
        _check_keys(sv, ("backend", "tol", "maxiter"), "solver")
        backend = _string(sv.get("backend", "auto"), "solver.backend")
        if backend not in SOLVER_BACKENDS:
            raise CaseError("solver.backend", backend, f"must be one of {', '.join(SOLVER_BACKENDS)}")
        tol = rd.number(sv.get("tol", SolverSpec.tol), "dimensionless", "solver.tol", positive=True)
        maxiter = _integer(sv.get("maxiter", SolverSpec.maxiter), "solver.maxiter", 1)
        solver = SolverSpec(backend, tol, maxiter)

    beams = col.items(lambda: _array_of_tables(doc, "beam"), lambda i, b: _beam(b, f"beam[{i}]", rd))
    modes = buckling = None
    with col.section():
        modes = _modes(doc, rd)
    with col.section():
        buckling = _buckling(doc, rd)
    reference = None
    if "reference" in doc:
        from .reference import parse_reference, validate_reference

        with col.section():
            reference = parse_reference(doc["reference"], rd, base)
    col.check()  # every mistake so far, at once; the cross-checks below need a complete case

    case = Case(geometry=geometry, material=material, title=title, units=units,
                mesh=mesh_spec, regions=regions, several_regions=several,
                supports=tuple(supports), loads=tuple(loads), points=tuple(points),
                lines=tuple(lines), solver=solver, source=source,
                load_cases=load_cases, combinations=combinations, beams=tuple(beams),
                modes=modes, buckling=buckling, more_materials=tuple(materials[1:]))
    if reference is not None:
        from dataclasses import replace

        case = replace(case, reference=reference)
        validate_reference(case)
    validate(case)
    return case


#: Most modes or buckling factors one run computes (each is a VTU array of the mesh's size).
MAX_EIGEN_COUNT = 100


def check_eigen_sections(case: Case) -> None:
    """[modes] needs a density; [buckling] needs loads and a known load case or combination."""
    for mat in case.materials:
        if case.modes is not None and mat.density is None:
            raise CaseError(f"{mat.key}.density", None, "is required by [modes] (the mass matrix): give it with "
                            "its unit, e.g. density = \"7850 kg/m^3\"")
    if case.buckling is None:
        return
    if not case.loads:
        raise CaseError("buckling", None, "needs loads: the buckling factors scale a load case's loads; add a "
                        "[[load]] (or remove [buckling])")
    name = case.buckling.load_case
    known = [lc.name for lc in case.load_cases] + [c.name for c in case.combinations]
    if name is not None and name not in known:
        raise CaseError("buckling.load_case", name, f"is not a load case or combination of this case; known: "
                        f"{', '.join(repr(k) for k in known) or 'none (the case names no load cases: leave it out)'}")


def _modes(doc: dict, rd: _Reader) -> ModesSpec | None:
    if "modes" not in doc:
        return None
    m = _table(doc, "modes", "")
    _check_keys(m, ("count", "above"), "modes")
    count = _integer(m.get("count", ModesSpec.count), "modes.count", 1, MAX_EIGEN_COUNT)
    above = rd.number(m["above"], "frequency", "modes.above", positive=True, limit=False) if "above" in m else None
    if above is not None and above > 1e9:
        raise CaseError("modes.above", m["above"], "is beyond any physical range (at most 1e9 Hz)")
    return ModesSpec(count, above)


def _buckling(doc: dict, rd: _Reader) -> BucklingSpec | None:
    if "buckling" not in doc:
        return None
    b = _table(doc, "buckling", "")
    _check_keys(b, ("count", "load_case", "above"), "buckling")
    count = _integer(b.get("count", BucklingSpec.count), "buckling.count", 1, MAX_EIGEN_COUNT)
    lc = _name(b["load_case"], "buckling.load_case") if "load_case" in b else None
    above = (rd.number(b["above"], "dimensionless", "buckling.above", positive=True, limit=False)
             if "above" in b else None)
    if above is not None and above > 1e6:
        raise CaseError("buckling.above", b["above"], "is beyond any sensible range (at most 1e6)")
    return BucklingSpec(count, lc, above)


#: Poisson's ratio from which 4-node tetrahedra are refused: they lock volumetrically (the
#: constant-strain element cannot deform at nearly constant volume), so displacements and stresses
#: come out far too small. With nu = 0.49 the ratio lambda/mu is 49 (common practice: linear
#: tetrahedra are not used for nearly incompressible solids; 10-node ones fare much better).
LOCKING_NU = 0.49


def check_locking(nu: float, nodes: int, key: str = "material.nu", shown=None) -> None:
    """Raise :class:`CaseError` for a Poisson's ratio near 0.5 with 4-node elements."""
    if nodes == 4 and nu >= LOCKING_NU:
        raise CaseError(key, nu if shown is None else shown,
                        f"a Poisson's ratio of {LOCKING_NU} or more with 4-node tetrahedra "
                        "(mesh.order = 1 or a 4-node mesh file) locks volumetrically and gives "
                        "displacements and stresses far too small; use mesh.order = 2 (10-node "
                        f"tetrahedra) or a ratio below {LOCKING_NU}")


def validate(case: Case) -> None:
    """Checks that need the whole case: names unique, references resolve."""

    named: tuple[tuple[str, tuple[Probe | Line, ...]], ...] = (("point", case.points), ("line", case.lines))
    for kind, items in named:
        seen: dict[str, int] = {}
        for i, it in enumerate(items, 1):
            if it.name in seen:
                raise CaseError(f"{kind}[{i}].name", it.name,
                                f"duplicates {kind}[{seen[it.name]}]; names must be unique")
            seen[it.name] = i
    check_file_names(case)
    check_output_names(case)
    check_eigen_sections(case)
    for name, sel in case.regions.items():
        if isinstance(sel, Edge) and sel.region is not None:
            if sel.region not in case.regions and not _may_be_group(case, sel.region):
                raise CaseError(f"regions.{name}.edge.region", sel.region,
                                f"unknown region; regions defined: {', '.join(case.regions)}")
            if isinstance(case.regions.get(sel.region), Edge):
                raise CaseError(f"regions.{name}.edge.region", sel.region, "must be a surface region, not another edge")
    # A natural-frequency run without loads may leave the part free: its rigid-body motions are
    # then modes at 0 Hz (free-free modes), and there is no static solve.
    if not case.supports and not (case.modes is not None and not case.loads and case.buckling is None):
        raise CaseError("support", None, "at least one [[support]] is required to hold the part (only a "
                        "[modes] run without loads may leave it free)")
    names = [lc.name for lc in case.load_cases]
    for i, lc in enumerate(case.load_cases, 1):
        if names.index(lc.name) != i - 1:
            raise CaseError("load_cases", lc.name, "load case names must be unique")
        bad = [j for j in lc.loads if not 0 <= j < len(case.loads)]
        if bad:
            raise CaseError(f"load case {lc.name!r}", list(lc.loads), f"refers to loads {bad} that do not exist "
                            f"(there are {len(case.loads)}, counted from 0)")
    for i, comb in enumerate(case.combinations, 1):
        if comb.name in names:
            raise CaseError(f"combination[{i}].name", comb.name, "must differ from every load case")
        for lc_name, _ in comb.factors:
            if lc_name not in names:
                raise CaseError(f"combination[{i}].factors.{lc_name}", lc_name, f"unknown load case; load cases: "
                                f"{', '.join(names) or 'none'}")
    for i, ld in enumerate(case.loads, 1):
        for mat in case.materials:
            if type(ld).__name__ == "TemperatureLoad" and mat.expansion is None:
                raise CaseError(f"{mat.key}.expansion", None, f"is required by the temperature load load[{i}] "
                                "(coefficient of thermal expansion, e.g. \"12e-6 1/K\")")
    _validate_point_supports(case)
    refs: list[tuple[str, str]] = []
    refs += [(f"support[{i}].region", s.region) for i, s in enumerate(case.supports, 1) if s.at is None]
    refs += [(f"load[{i}].region", ld.region) for i, ld in enumerate(case.loads, 1) if hasattr(ld, "region")]
    refs += [(f"mesh.refine[{i}].region", r.region) for i, r in enumerate(case.mesh.refine, 1)]
    for key, name in refs:
        if isinstance(case.regions.get(name), Edge) and not key.startswith("support"):
            raise CaseError(key, name, "is an edge region (nodes along a line); only [[support]] may use it. "
                            "Give a surface region here")
        if name not in case.regions and not _may_be_group(case, name):
            valid = ", ".join(repr(n) for n in case.regions) or "none are defined"
            hint = difflib.get_close_matches(name, list(case.regions), n=1)
            extra = f"did you mean {hint[0]!r}? " if hint else ""
            raise CaseError(key, name, f"unknown region; {extra}regions defined under [regions]: {valid}"
                            " (or a physical group of a .msh file)")
    for i, s in enumerate(case.supports, 1):
        if isinstance(s, ElasticSupport) and isinstance(case.regions.get(s.region), Edge):
            raise CaseError(f"support[{i}].region", s.region, "is an edge region (nodes along a line); an elastic "
                            "support needs a surface region")
    _validate_beams(case)


def _validate_point_supports(case: Case) -> None:
    """Point support names are unique and differ from the regions other supports hold (reactions are
    reported under them)."""
    regions = {s.region for s in case.supports if s.at is None}
    seen: dict[str, int] = {}
    for i, s in enumerate(case.supports, 1):
        if s.at is None:
            continue
        if s.label in seen:
            raise CaseError(f"support[{i}].name", s.label, f"duplicates support[{seen[s.label]}]; point supports "
                            "need names of their own (reactions are reported under them)")
        if s.label in regions:
            raise CaseError(f"support[{i}].name", s.label, "is the region of another support; give the point "
                            "support a name of its own (reactions are reported under it)")
        seen[s.label] = i


SECTION_KINDS = ("rectangle", "circle", "polygon")


def _beam_section(raw: Any, k: str, rd: _Reader) -> BeamSection:
    if not isinstance(raw, dict):
        raise CaseError(k, raw, "must be { at = x, rectangle = { width = b, depth = h } } "
                        "(or circle = { diameter = d }, or polygon = [[y, z], ...])")
    _check_keys(raw, ("at",) + SECTION_KINDS, k)
    if "at" not in raw:
        raise CaseError(f"{k}.at", None, "is required: the station's distance from the held end along the axis")
    at = rd.number(raw["at"], "length", f"{k}.at", nonneg=True)
    kinds = [c for c in SECTION_KINDS if c in raw]
    if len(kinds) != 1:
        raise CaseError(k, raw, f"must have exactly one of {', '.join(SECTION_KINDS)}")
    kind = kinds[0]
    v, kk = raw[kind], f"{k}.{kind}"
    dims: tuple  # (width, depth), (diameter, bore) or the polygon's vertices, as BeamSection.dims
    if kind == "rectangle":
        if not isinstance(v, dict):
            raise CaseError(kk, v, "must be { width = b, depth = h }")
        _check_keys(v, ("width", "depth"), kk)
        for req in ("width", "depth"):
            if req not in v:
                raise CaseError(f"{kk}.{req}", None, "is required")
        dims = (rd.number(v["width"], "length", f"{kk}.width", positive=True),
                rd.number(v["depth"], "length", f"{kk}.depth", positive=True))
    elif kind == "circle":
        if not isinstance(v, dict):
            raise CaseError(kk, v, "must be { diameter = d } with an optional bore = d_in")
        _check_keys(v, ("diameter", "bore"), kk)
        if "diameter" not in v:
            raise CaseError(f"{kk}.diameter", None, "is required")
        d = rd.number(v["diameter"], "length", f"{kk}.diameter", positive=True)
        di = rd.number(v["bore"], "length", f"{kk}.bore", nonneg=True) if "bore" in v else 0.0
        if di >= d:
            raise CaseError(f"{kk}.bore", v.get("bore"), "must be smaller than the diameter")
        dims = (d, di)
    else:
        if not isinstance(v, list) or len(v) < 3:
            raise CaseError(kk, v, "must be a list of three or more vertices [[y, z], ...] "
                            "(y along the depth direction, from the beam axis)")
        verts = []
        for j, pt in enumerate(v):
            if not isinstance(pt, list) or len(pt) != 2:
                raise CaseError(f"{kk}[{j}]", pt, "must be a vertex [y, z]")
            verts.append((rd.number(pt[0], "length", f"{kk}[{j}][0]"), rd.number(pt[1], "length", f"{kk}[{j}][1]")))
        from ..handcalc.sections import polygon

        try:
            polygon(verts)
        except ValueError as err:
            raise CaseError(kk, v, f"is not a usable polygon ({err})") from None
        dims = tuple(verts)
    return BeamSection(at, kind, dims)


def _beam(raw: dict, k: str, rd: _Reader) -> Beam:
    _check_keys(raw, ("name", "held_end", "load_point", "sections", "force", "load", "depth_direction",
                      "points", "lines"), k)
    for req in ("name", "held_end", "load_point", "sections"):
        if req not in raw:
            raise CaseError(f"{k}.{req}", None, "is required")
    held = rd.vector(raw["held_end"], "length", f"{k}.held_end")
    tip = rd.vector(raw["load_point"], "length", f"{k}.load_point")
    axis = [b - a for a, b in zip(held, tip)]
    length = math.sqrt(sum(c * c for c in axis))
    if length == 0.0:
        raise CaseError(f"{k}.load_point", raw["load_point"], "must differ from held_end")
    secs_raw = raw["sections"]
    if not isinstance(secs_raw, list) or len(secs_raw) < 2:
        raise CaseError(f"{k}.sections", secs_raw,
                        "must list two or more stations [{ at = x, rectangle = {...} }, ...]")
    secs = tuple(_beam_section(r, f"{k}.sections[{j}]", rd) for j, r in enumerate(secs_raw, 1))
    for j in range(1, len(secs)):
        if secs[j].at <= secs[j - 1].at:
            raise CaseError(f"{k}.sections[{j + 1}].at", secs[j].at, "stations must increase along the axis")
        if secs[j].kind != secs[0].kind:
            raise CaseError(f"{k}.sections[{j + 1}]", secs[j].kind,
                            f"every station needs the same kind of section as the first ({secs[0].kind})")
        if secs[j].kind == "polygon" and len(secs[j].dims) != len(secs[0].dims):
            raise CaseError(f"{k}.sections[{j + 1}].polygon", len(secs[j].dims),
                            f"needs as many vertices as the first station ({len(secs[0].dims)}), "
                            "so that the section can be interpolated between stations")
    tol = 1e-9 * max(length, 1.0)
    if secs[0].at > tol or secs[-1].at < length - tol:
        raise CaseError(f"{k}.sections", [s.at for s in secs],
                        f"stations must reach from 0 (the held end) to at least {length:.6g} (the load point)")
    force = load = None
    if ("force" in raw) == ("load" in raw):
        raise CaseError(k, sorted(raw), "give exactly one of force = [Fx, Fy, Fz] or load = \"region of a [[load]]\"")
    if "force" in raw:
        force = rd.vector(raw["force"], "force", f"{k}.force", nonzero=True)
    else:
        load = raw["load"]
        if isinstance(load, bool) or not isinstance(load, (str, int)):
            raise CaseError(f"{k}.load", load, "must be the region name of a force [[load]] or its number (from 1)")
    depth = rd.vector(raw["depth_direction"], "dimensionless", f"{k}.depth_direction", nonzero=True) \
        if "depth_direction" in raw else None
    names = {}
    for key in ("points", "lines"):
        v = raw.get(key, [])
        if isinstance(v, str):
            v = [v]
        if not isinstance(v, list):
            raise CaseError(f"{k}.{key}", v, f"must be a list of names of [[{key[:-1]}]] entries")
        names[key] = tuple(_name(n, f"{k}.{key}[{j}]") for j, n in enumerate(v, 1))
    return Beam(_name(raw["name"], f"{k}.name"), held, tip, secs, force, load, depth,
                names["points"], names["lines"])


def beam_force(case: Case, i: int) -> tuple[float, float, float]:
    """The force of ``case.beams[i]`` (given, or taken from its named force load) [force]."""
    b = case.beams[i]
    k = f"beam[{i + 1}]"
    if b.force is not None:
        return b.force
    forces = [(j, ld) for j, ld in enumerate(case.loads, 1) if isinstance(ld, ForceLoad)]
    if isinstance(b.load, int):
        hit = [ld for j, ld in forces if j == b.load]
    else:
        hit = [ld for _, ld in forces if ld.region == b.load]
    valid = ", ".join(f"{ld.region!r} (load[{j}])" for j, ld in forces) or "none"
    if len(hit) != 1:
        raise CaseError(f"{k}.load", b.load, f"must name exactly one force [[load]] by its region or number; "
                        f"force loads: {valid}")
    return hit[0].force


def _validate_beams(case: Case) -> None:
    pts = {p.name: p for p in case.points}
    lns = {ln.name: ln for ln in case.lines}
    seen: dict[str, int] = {}
    for i, b in enumerate(case.beams):
        k = f"beam[{i + 1}]"
        if b.name in seen:
            raise CaseError(f"{k}.name", b.name, f"duplicates beam[{seen[b.name]}]; names must be unique")
        seen[b.name] = i + 1
        F = beam_force(case, i)
        held = [float(c) for c in b.held_end]
        ax = [t - h for h, t in zip(held, b.load_point)]
        n = math.sqrt(sum(c * c for c in ax))
        ex = [c / n for c in ax]
        d = b.depth_direction if b.depth_direction is not None else F
        dot = sum(p * q for p, q in zip(d, ex))
        across = [p - dot * q for p, q in zip(d, ex)]
        if math.sqrt(sum(c * c for c in across)) <= 1e-9 * math.sqrt(sum(c * c for c in d)):
            key = (f"{k}.depth_direction" if b.depth_direction is not None
                   else (f"{k}.force" if b.force else f"{k}.load"))
            raise CaseError(key, list(d), "lies along the beam axis; a bending estimate needs a direction across it")
        last = b.sections[-1].at
        for kind, names, table in (("point", b.points, pts), ("line", b.lines, lns)):
            for j, nm in enumerate(names, 1):
                if nm not in table:
                    raise CaseError(f"{k}.{kind}s[{j}]", nm, f"names no [[{kind}]]; defined: "
                                    f"{', '.join(repr(x) for x in table) or 'none'}")
                ends = [pts[nm].at] if kind == "point" else [lns[nm].start, lns[nm].end]
                for e in ends:
                    x = sum((p - h) * q for p, h, q in zip(e, held, ex))
                    if x < -1e-9 * n or x > last + 1e-9 * n:
                        raise CaseError(f"{k}.{kind}s[{j}]", nm, f"lies at station {x:.6g} along the beam axis, "
                                        f"outside the described sections (0 to {last:.6g})")


def _may_be_group(case: Case, name: str) -> bool:
    """A name not under [regions] may still be a physical group of a mesh file (checked at meshing)."""
    return case.geometry.file.suffix.lower() in MESH_SUFFIXES


def load_case(path: str | Path) -> Case:
    """Read and validate a case file.

    Raises
    ------
    CaseError
        For a missing or unreadable file, TOML syntax errors and every invalid value.
    """
    path = Path(path)
    if path.suffix.lower() in GEOMETRY_SUFFIXES:  # the part itself given where its case belongs
        raise CaseError("(case file)", str(path), "is a geometry or mesh file, not a case file: write a case file "
                        "(TOML) that names it under [geometry] file = ... (docs/quickstart.md); `elastofe "
                        "surfaces FILE` lists its surfaces")
    text = read_input_bytes(path, "(case file)", max_bytes=CASE_FILE_MAX,
                            limit_reason=f"a case file is at most {size_text(CASE_FILE_MAX)}")
    doc = parse_toml(text, str(path))
    # The geometry file is checked when it is needed (pipeline.build_mesh): a case may be loaded
    # before its mesh file is made (the verification set builds some meshes on demand).
    return parse_case(doc, base=path.resolve().parent, source=path.resolve())


#: How deeply arrays and tables may nest in a case file (the format itself needs 6).
MAX_DEPTH = 32
#: Longest file name most file systems take [bytes].
NAME_MAX = 255


def parse_toml(raw: bytes, shown: str) -> dict:
    """The TOML document of a case file's bytes (a UTF-8 byte-order mark at the start is allowed).

    Raises :class:`CaseError` on ``(case file)`` for text that is not UTF-8, TOML syntax errors and
    nesting deeper than :data:`MAX_DEPTH`.
    """
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise CaseError("(case file)", shown, "is not UTF-8 text") from None
    if text.startswith("\ufeff"):  # a byte-order mark some editors write
        text = text[1:]
    depth = _bracket_depth(text)
    if depth > MAX_DEPTH:
        raise CaseError("(case file)", shown, f"nests arrays or tables {depth} levels deep; at most {MAX_DEPTH} are "
                        "allowed (a case file needs no more than 6)")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise CaseError("(case file)", shown, f"is not valid TOML: {err}") from None
    except ValueError as err:  # an integer of more digits than Python converts
        raise CaseError("(case file)", shown, f"holds a number that cannot be read ({str(err)[:90]})") from None
    except RecursionError:
        raise CaseError("(case file)", shown, f"nests arrays or tables too deeply; at most {MAX_DEPTH} levels "
                        "are allowed") from None
    check_depth(doc)
    return doc


def _bracket_depth(text: str) -> int:
    """Deepest nesting of ``[`` and ``{`` outside strings and comments (an upper bound is enough)."""
    depth = best = 0
    quote = ""
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if quote:
            if c == "\\" and quote in ('"', '"""'):
                i += 2
                continue
            if text.startswith(quote, i):
                i += len(quote)
                quote = ""
                continue
        elif c == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        elif c in "\"'":
            quote = c * 3 if text.startswith(c * 3, i) else c
            i += len(quote)
            continue
        elif c in "[{":
            depth += 1
            best = max(best, depth)
        elif c in "]}":
            depth = max(depth - 1, 0)
        i += 1
    return best


def check_depth(doc: Any, limit: int = MAX_DEPTH) -> None:
    """Raise :class:`CaseError` when lists and tables nest deeper than ``limit`` (checked without
    recursion, so a document built in code cannot exhaust the stack either)."""
    stack = [(doc, 1, "")]
    while stack:
        obj, d, key = stack.pop()
        if isinstance(obj, (dict, list)):
            if d > limit:
                raise CaseError(key or "(case)", None, f"nests arrays or tables more than {limit} levels deep")
            items = obj.items() if isinstance(obj, dict) else enumerate(obj)
            for k, v in items:
                if isinstance(v, (dict, list)):
                    stack.append((v, d + 1, f"{key}.{k}" if key and isinstance(k, str) else
                                  (f"{key}[{k}]" if key else str(k))))


def check_file_names(case: Case) -> None:
    """Refuse line and load case names whose result files would have names too long for the file
    system (checked before meshing, so such a name never costs a solve)."""
    suffixes = [safe_name(n) for n in [lc.name for lc in case.load_cases] + [c.name for c in case.combinations]]
    longest_case = max((len(x.encode("utf-8")) + 1 for x in suffixes), default=0)
    names = [(f"load[{lc.loads[0] + 1}].case" if lc.loads else "load case", lc.name) for lc in case.load_cases]
    names += [(f"combination[{k}].name", c.name) for k, c in enumerate(case.combinations, 1)]
    for key, name in names:
        if 12 + 1 + len(safe_name(name).encode("utf-8")) + 4 + 1 > NAME_MAX:
            raise CaseError(key, name, f"is too long for the names of its result files; shorten it to at most "
                                       f"{NAME_MAX - 20} characters")
    for i, ln in enumerate(case.lines, 1):
        n = len(safe_name(ln.name).encode("utf-8"))
        # report-line-NAME-CASE.png, line-NAME-linearized.json, comparison-line-NAME.png
        need = max(12 + n + longest_case + 4, 5 + n + 16, 16 + n + 4)
        if need > NAME_MAX:
            room = NAME_MAX - (need - n)
            raise CaseError(f"line[{i}].name", ln.name, f"is too long for the names of its result files "
                            f"({need} bytes, at most {NAME_MAX}); shorten it to at most {max(room, 1)} characters")
