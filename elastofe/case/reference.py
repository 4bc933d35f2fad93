"""The ``[reference]`` section of a case file: results from another solver to compare with.

Reference results come in open formats only: scalars written in the case file, a CSV of points
(``x [mm], y [mm], z [mm], von_mises [MPa], ...``) or a VTU/VTK file with point data. This module
validates the section into frozen dataclasses (values converted to the case's unit system where
they are in the case file; files are read later by :mod:`elastofe.studies.compare`).

```toml
[reference]
label = "primary model, exported 2026-11-30"   # where the numbers come from (shown in every output)
tolerance = "5%"                                # default acceptance tolerance
snap = 0.5                                      # how far outside the part a point may lie [length]

[[reference.scalar]]
quantity = "max_von_mises"                      # see SCALAR_QUANTITIES
value = "91 MPa"
tolerance = "3%"                                # "3%", "0.5 MPa" or "3% or 0.5 MPa"

[[reference.scalar]]
quantity = "uy"
point = "tip"                                   # a [[point]] name, or at = [x, y, z]
value = -0.22

[[reference.scalar]]
quantity = "reaction_y"
support = "root"                                # a [[support]] region
value = "2000 N"

[[reference.points]]
file = "their-points.csv"                       # header: x [mm], y [mm], z [mm], von_mises [MPa], ...
tolerance = { von_mises = "5%", displacement = "2%" }

[[reference.field]]
file = "their-result.vtu"
arrays = { displacement = "U", von_mises = "vm" }   # our quantity = their point-data array
units = { length = "m", stress = "Pa" }              # the file's units (default: the case's)
```
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Optional

from ..errors import CaseError
from ..files import check_input_file
from ..units import UnitSystem, convert_quantity
from .keys import check_keys as _check_keys

#: Quantities that can be evaluated at any point, with their kind of unit.
POINT_QUANTITIES = {
    "ux": "length", "uy": "length", "uz": "length", "u": "length",
    "sxx": "stress", "syy": "stress", "szz": "stress", "sxy": "stress", "syz": "stress", "sxz": "stress",
    "von_mises": "stress", "s1": "stress", "s2": "stress", "s3": "stress",
}
#: Scalars of the whole model.
GLOBAL_QUANTITIES = {"max_displacement": "length", "max_von_mises": "stress"}
#: Reaction force components of a support (the force the support exerts on the part).
REACTION_QUANTITIES = {"reaction_x": "force", "reaction_y": "force", "reaction_z": "force", "reaction": "force"}
#: Eigenvalues: a natural frequency [Hz] or a buckling load factor, of the mode number ``mode``.
EIGEN_QUANTITIES = {"frequency": "frequency", "buckling_factor": "dimensionless"}
SCALAR_QUANTITIES = {**GLOBAL_QUANTITIES, **POINT_QUANTITIES, **REACTION_QUANTITIES, **EIGEN_QUANTITIES}
#: Group names usable in tolerance tables and (for VTU files) as multi-component arrays.
GROUPS = {
    "displacement": ("ux", "uy", "uz", "u"),
    "stress": ("sxx", "syy", "szz", "sxy", "syz", "sxz"),
    "principal": ("s1", "s2", "s3"),
}


@dataclass(frozen=True)
class Tolerance:
    """Acceptance tolerance: ``relative`` (a fraction of a reference scale) and/or ``absolute``
    [the quantity's case unit]; the allowed difference is the larger of the two."""

    relative: Optional[float] = None
    absolute: Optional[float] = None

    def allowed(self, scale: float) -> float:
        """Allowed |difference| for a reference magnitude ``scale``."""
        r = self.relative * abs(scale) if self.relative is not None else 0.0
        return max(r, self.absolute if self.absolute is not None else 0.0)

    def text(self, unit: str) -> str:
        parts = []
        if self.relative is not None:
            parts.append(f"{100 * self.relative:g}%")
        if self.absolute is not None:
            parts.append(f"{self.absolute:g} {unit}")
        return " or ".join(parts)


@dataclass(frozen=True)
class RefScalar:
    """One reference number: ``quantity`` in :data:`SCALAR_QUANTITIES`, its ``value`` [case unit],
    where it applies (``point`` name, ``at`` coordinates or ``support`` region) and its tolerance."""

    quantity: str
    value: float
    tolerance: Tolerance
    point: Optional[str] = None
    at: Optional[tuple[float, float, float]] = None
    support: Optional[str] = None
    name: str = ""
    key: str = ""
    #: Mode number (from 1) of a frequency or buckling factor.
    mode: Optional[int] = None


@dataclass(frozen=True)
class RefSet:
    """A file of reference point values: ``kind`` "points" (CSV) or "field" (VTU/VTK).

    ``tolerance`` maps a quantity, a group name of :data:`GROUPS` or ``"*"`` (every other) to a
    :class:`Tolerance`; ``arrays`` (field files) maps our quantity or group to the file's array
    name; ``units`` the file's ``length``/``stress`` units as pint expressions (None: the case's).
    """

    kind: str
    file: Path
    tolerance: dict
    snap: Optional[float] = None
    label: str = ""
    arrays: dict = field(default_factory=dict)
    units: dict = field(default_factory=dict)
    key: str = ""

    def tolerance_for(self, quantity: str) -> Optional[Tolerance]:
        if quantity in self.tolerance:
            return self.tolerance[quantity]
        for g, members in GROUPS.items():
            if quantity in members and g in self.tolerance:
                return self.tolerance[g]
        return self.tolerance.get("*")


@dataclass(frozen=True)
class ReferenceSpec:
    """The whole ``[reference]`` section."""

    label: str = ""
    scalars: tuple[RefScalar, ...] = ()
    sets: tuple[RefSet, ...] = ()
    snap: Optional[float] = None


def parse_tolerance(raw: Any, kind: str, units: UnitSystem, key: str) -> Tolerance:
    """``"5%"``, ``"0.01 mm"`` or ``"2% or 0.01 mm"`` -> :class:`Tolerance` (absolute part in ``units``)."""
    expected = ("a tolerance written as a string: a percentage such as \"5%\", a value with its unit such "
                "as \"0.01 mm\", or both as \"2% or 0.01 mm\"")
    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        raise CaseError(key, raw, f"a plain number is ambiguous here (a share or an amount?); {expected}")
    if not isinstance(raw, str) or not raw.strip():
        raise CaseError(key, raw, expected)
    rel = ab = None
    for part in raw.split(" or "):
        part = part.strip()
        if part.endswith("%"):
            try:
                rel = float(part[:-1]) / 100.0
            except ValueError:
                raise CaseError(key, raw, expected) from None
            if not rel >= 0:
                raise CaseError(key, raw, "a percentage must be zero or greater")
        else:
            try:
                float(part)
            except ValueError:
                pass
            else:
                raise CaseError(key, raw, f"a plain number is ambiguous here; {expected}")
            ab = convert_quantity(part, kind, units, key=key)
            if ab < 0:
                raise CaseError(key, raw, "must be zero or greater")
    return Tolerance(rel, ab)


def _tolerance_table(raw: Any, default: Optional[Tolerance], units: UnitSystem, key: str) -> dict:
    out = {}
    if raw is None:
        if default is not None:
            out["*"] = default
        return out
    if isinstance(raw, str):
        # One tolerance for every quantity of a set that mixes lengths and stresses can only be
        # relative; absolute ones need their unit's kind, so they are given per quantity.
        if not raw.strip().endswith("%") or " or " in raw:
            raise CaseError(key, raw, "one tolerance for every quantity must be a percentage such as \"5%\"; "
                                      "give absolute ones per quantity: "
                                      "{ von_mises = \"2 MPa\", displacement = \"0.01 mm\" }")
        out["*"] = parse_tolerance(raw, "dimensionless", units, key)
        return out
    if not isinstance(raw, dict):
        raise CaseError(key, raw, "must be a tolerance string (\"5%\") or a table { quantity = \"5%\", ... }")
    valid = tuple(POINT_QUANTITIES) + tuple(GROUPS) + ("*",)
    _check_keys(raw, valid, key)
    for q, v in raw.items():
        kind = POINT_QUANTITIES.get(q) or ("length" if q == "displacement" else "stress")
        out[q] = parse_tolerance(v, kind, units, f"{key}.{q}")
    if "*" not in out and default is not None:
        out["*"] = default
    return out


def parse_reference(raw: Any, rd, base: Path) -> ReferenceSpec:
    """Validate the ``[reference]`` table (``rd`` is the case loader's unit reader)."""
    units: UnitSystem = rd.units
    if not isinstance(raw, dict):
        raise CaseError("reference", raw, "must be a table written as [reference]")
    _check_keys(raw, ("label", "tolerance", "snap", "scalar", "points", "field"), "reference")
    label = raw.get("label", "")
    if not isinstance(label, str):
        raise CaseError("reference.label", label, "must be a string in quotes")
    snap = rd.number(raw["snap"], "length", "reference.snap", nonneg=True) if "snap" in raw else None
    default_raw = raw.get("tolerance")
    default = None
    if default_raw is not None:
        if not (isinstance(default_raw, str) and default_raw.strip().endswith("%") and " or " not in default_raw):
            raise CaseError("reference.tolerance", default_raw,
                            "the section's default tolerance must be a percentage such as \"5%\" "
                            "(give absolute tolerances per item)")
        default = parse_tolerance(default_raw, "dimensionless", units, "reference.tolerance")

    def items(name: str) -> list[dict]:
        val = raw.get(name, [])
        if isinstance(val, dict):
            val = [val]
        if not isinstance(val, list) or not all(isinstance(v, dict) for v in val):
            raise CaseError(f"reference.{name}", val, f"must be tables written as [[reference.{name}]]")
        return val

    scalars = []
    for i, s in enumerate(items("scalar"), 1):
        k = f"reference.scalar[{i}]"
        _check_keys(s, ("quantity", "value", "tolerance", "point", "at", "support", "name", "mode"), k)
        for req in ("quantity", "value"):
            if req not in s:
                raise CaseError(f"{k}.{req}", None, "is required")
        q = s["quantity"]
        if not isinstance(q, str) or q not in SCALAR_QUANTITIES:
            raise CaseError(f"{k}.quantity", q, f"must be one of {', '.join(SCALAR_QUANTITIES)}")
        kind = SCALAR_QUANTITIES[q]
        value = rd.number(s["value"], kind, f"{k}.value")
        if "tolerance" in s:
            tol = parse_tolerance(s["tolerance"], kind, units, f"{k}.tolerance")
        elif default is not None:
            tol = default
        else:
            raise CaseError(f"{k}.tolerance", None, "is required (or give [reference] tolerance = \"5%\")")
        point = at = support = mode = None
        if q in EIGEN_QUANTITIES:
            m = s.get("mode", 1)
            if isinstance(m, bool) or not isinstance(m, int) or m < 1:
                raise CaseError(f"{k}.mode", m, "must be a mode number from 1 (the list numbering of summary.json)")
            mode = m
        elif "mode" in s:
            raise CaseError(f"{k}.mode", s["mode"], f"does not apply to {q} (only to frequency and buckling_factor)")
        if q in POINT_QUANTITIES:
            if ("point" in s) == ("at" in s):
                raise CaseError(k, s, f"a point quantity ({q}) needs exactly one of point = \"name\" or at = [x, y, z]")
            if "point" in s:
                point = s["point"]
                if not isinstance(point, str):
                    raise CaseError(f"{k}.point", point, "must be the name of a [[point]]")
            else:
                at = rd.vector(s["at"], "length", f"{k}.at")
        elif q in REACTION_QUANTITIES:
            if "support" not in s or not isinstance(s["support"], str):
                raise CaseError(f"{k}.support", s.get("support"), f"{q} needs support = \"region of a [[support]]\"")
            support = s["support"]
        for extra in ("point", "at", "support"):
            if extra in s and {"point": point, "at": at, "support": support}[extra] is None:
                raise CaseError(f"{k}.{extra}", s[extra], f"does not apply to {q}")
        name = s.get("name", "")
        if not isinstance(name, str):
            raise CaseError(f"{k}.name", name, "must be a string in quotes")
        scalars.append(RefScalar(q, value, tol, point, at, support, name, k, mode))

    sets = []
    for kind_name, suffixes in (("points", (".csv",)), ("field", (".vtu", ".vtk"))):
        for i, s in enumerate(items(kind_name), 1):
            k = f"reference.{kind_name}[{i}]"
            allowed = ("file", "tolerance", "snap", "label") + (("arrays", "units") if kind_name == "field" else ())
            _check_keys(s, allowed, k)
            if "file" not in s or not isinstance(s["file"], str):
                raise CaseError(f"{k}.file", s.get("file"), f"is required: a {'/'.join(suffixes)} file")
            f = Path(s["file"]).expanduser()
            if not f.is_absolute():
                f = base / f
            if f.suffix.lower() not in suffixes:
                raise CaseError(f"{k}.file", s["file"], f"must end in {' or '.join(suffixes)}")
            # A regular file (never a pipe or device); its size is checked when it is read.
            check_input_file(f, f"{k}.file", not_found=f"file not found (looked for {f})")
            tols = _tolerance_table(s.get("tolerance"), default, units, f"{k}.tolerance")
            if not tols:
                raise CaseError(f"{k}.tolerance", None, "is required (or give [reference] tolerance = \"5%\")")
            sn = rd.number(s["snap"], "length", f"{k}.snap", nonneg=True) if "snap" in s else None
            lab = s.get("label", "")
            if not isinstance(lab, str):
                raise CaseError(f"{k}.label", lab, "must be a string in quotes")
            arrays, funits = {}, {}
            if kind_name == "field":
                ar = s.get("arrays")
                if not isinstance(ar, dict) or not ar:
                    raise CaseError(f"{k}.arrays", ar, "is required: { our quantity = \"their array name\" }, "
                                                       "e.g. { displacement = \"U\", von_mises = \"vm\" }")
                _check_keys(ar, tuple(POINT_QUANTITIES) + tuple(GROUPS), f"{k}.arrays")
                for q, v in ar.items():
                    if not isinstance(v, str) or not v:
                        raise CaseError(f"{k}.arrays.{q}", v, "must be the name of a point-data array in the file")
                arrays = dict(ar)
                un = s.get("units", {})
                if not isinstance(un, dict):
                    raise CaseError(f"{k}.units", un, "must be a table { length = \"m\", stress = \"Pa\" }")
                _check_keys(un, ("length", "stress"), f"{k}.units")
                for uk, uv in un.items():
                    want = units.length if uk == "length" else units.stress
                    try:
                        convert_quantity(f"1 {uv}", uk, units, key=f"{k}.units.{uk}")
                    except CaseError:
                        raise CaseError(f"{k}.units.{uk}", uv, f"must be a {uk} unit such as \"{want}\"") from None
                    funits[uk] = uv
            sets.append(RefSet(kind_name, f, tols, sn, lab, arrays, funits, k))
    if not scalars and not sets:
        raise CaseError("reference", raw, "needs at least one [[reference.scalar]], [[reference.points]] "
                                          "or [[reference.field]]")
    return ReferenceSpec(label, tuple(scalars), tuple(sets), snap)


def validate_reference(case) -> None:
    """Cross-references: scalar point names and support regions must exist in the case."""
    ref = case.reference
    if ref is None:
        return
    pnames = [p.name for p in case.points]
    sregions = [s.label for s in case.supports]
    for s in ref.scalars:
        if s.point is not None and s.point not in pnames:
            raise CaseError(f"{s.key}.point", s.point,
                            f"no [[point]] of that name; defined: {', '.join(pnames) or 'none'}")
        if s.quantity == "frequency" and (case.modes is None or s.mode > case.modes.count):
            raise CaseError(f"{s.key}.mode", s.mode, "needs a [modes] section computing at least that many modes")
        if s.quantity == "buckling_factor" and (case.buckling is None or s.mode > case.buckling.count):
            raise CaseError(f"{s.key}.mode", s.mode, "needs a [buckling] section computing at least that many factors")
        if s.support is not None and s.support not in sregions:
            raise CaseError(f"{s.key}.support", s.support,
                            f"no [[support]] on that region; supports are on: {', '.join(sregions)}")
