"""A JSON Schema of the case file, so that editors complete and check its keys.

The schema is built from the loader's own tables (selector kinds, load kinds and the keys each
takes, solver backends, unit systems, reference quantities) and the structure of
:mod:`elastofe.case.load`; :data:`SCHEMA_FILE` is the copy shipped with the package
(``tests/test_schema.py`` checks that it is current and that the loader and the schema accept the
same keys). It checks shape and keys; values (ranges, units, cross-references) are the loader's
job, which says more than a schema can.

Editors that read TOML with JSON Schema (for example Taplo and the extensions built on it) take
a first line ``#:schema ./case.schema.json`` (write the file with ``elastofe schema --out``).
"""
from __future__ import annotations

import json
from pathlib import Path

from ..units import SYSTEMS
from .load import DISTRIBUTIONS, GEOMETRY_SUFFIXES, SELECTOR_KINDS, SOLVER_BACKENDS
from .reference import GROUPS, POINT_QUANTITIES, SCALAR_QUANTITIES

__all__ = ["case_schema", "schema_text", "SCHEMA_FILE"]

#: The schema shipped with the package (regenerate: ``SCHEMA_FILE.write_text(schema_text())``).
SCHEMA_FILE = Path(__file__).with_name("case.schema.json")

QUANTITY = {"description": "a number in the case's units, or a string with its unit such as \"200 GPa\"",
            "type": ["number", "string"]}
NAME = {"type": "string", "minLength": 1}


def _q(text: str) -> dict:
    return dict(QUANTITY, description=f"{text}: a number in the case's units or a string with its unit")


def _vec(text: str) -> dict:
    return {"description": text, "type": "array", "items": QUANTITY, "minItems": 3, "maxItems": 3}


def _obj(props: dict, required: tuple = (), text: str = "") -> dict:
    out = {"type": "object", "properties": props, "additionalProperties": False}
    if required:
        out["required"] = list(required)
    if text:
        out["description"] = text
    return out


def _tables(item: dict, text: str) -> dict:
    """An array of tables ``[[x]]`` (a single table is taken as one item, as the loader does)."""
    return {"description": text, "anyOf": [{"type": "array", "items": item}, item]}


def _selectors() -> dict:
    plane = _obj({"point": _vec("a point of the plane [length]"), "normal": _vec("the plane's normal"),
                  "tol": _q("distance tolerance [length]")}, ("point", "normal"))
    cylinder = _obj({"radius": _q("radius [length]"), "axis": _vec("axis direction"),
                     "point": _vec("a point on the axis [length]"), "tol": _q("tolerance [length]")}, ("radius",))
    at = {"anyOf": [_vec("a point on the surface [length]"),
                    _obj({"point": _vec("a point on the surface [length]"), "tol": _q("tolerance [length]")},
                         ("point",))]}
    box = _obj({"min": _vec("lower corner [length]"), "max": _vec("upper corner [length]")}, ("min", "max"))
    surfaces = {"anyOf": [{"type": "integer", "minimum": 1},
                          {"type": "array", "items": {"type": "integer", "minimum": 1}, "minItems": 1}],
                "description": "surface ids as listed by `elastofe surfaces FILE`"}
    edge = _obj({"start": _vec("start of the edge [length]"), "end": _vec("end of the edge [length]"),
                 "region": NAME, "plane": _obj({"point": _vec("a point [length]"), "normal": _vec("normal")},
                                               ("point", "normal")),
                 "tol": _q("tolerance [length]")},
                text="nodes along a line: { start, end } or { region, plane }; supports only")
    kinds = {"plane": plane, "cylinder": cylinder, "at": at, "box": box, "surfaces": surfaces,
             "group": dict(NAME, description="a physical group of the mesh file"), "edge": edge}
    one_of = [{"required": [k]} for k in SELECTOR_KINDS]
    several = {"type": "boolean", "description": "the region may be several separate surfaces, or cylinders "
               "with different axes (refused otherwise, as a likely mistake)"}
    sel = _obj(dict(kinds, several=several), text="one selector: " + ", ".join(SELECTOR_KINDS))
    sel.update(minProperties=1, maxProperties=2, oneOf=one_of)
    return {"type": "object", "description": "named regions: name = { selector = ... }",
            "additionalProperties": sel}


def _load() -> dict:
    reference = {"type": "number", "description": "reference temperature, a plain number on the scale of the "
                 "formula's or file's values (they carry no unit)"}
    temperature = {"anyOf": [QUANTITY, _obj({"formula": {"type": "string", "description": "in x, y, z"},
                                             "file": {"type": "string", "description": ".csv, .vtu or .vtk"},
                                             "field": NAME, "reference": reference})]}
    props = {
        "region": NAME,
        "force": _vec("total force [force]"),
        "moment": _vec("moment about `at` [moment]"),
        "at": _vec("point the force and moment act at, coupled to the region [length]"),
        "distribution": {"enum": list(DISTRIBUTIONS)},
        "pressure": _q("pressure, positive pushing into the part [stress]"),
        "gradient": _vec("pressure gradient [stress/length]"),
        "origin": _vec("where the pressure equals `pressure` [length]"),
        "clip": {"type": "boolean", "description": "no suction where the varying pressure turns negative"},
        "gravity": _vec("acceleration in multiples of standard gravity, or with its unit (\"-9.81 m/s^2\")"),
        "temperature": temperature,
        "case": {"anyOf": [NAME, {"type": "array", "items": NAME, "minItems": 1}],
                 "description": "the load case(s) this load belongs to"},
    }
    return _obj(props, text="one of force (with optional moment and at), moment, pressure, gravity, temperature")


def _beam() -> dict:
    section = _obj({"at": _q("distance of the station from the held end [length]"),
                    "rectangle": _obj({"width": _q("[length]"), "depth": _q("[length]")}, ("width", "depth")),
                    "circle": _obj({"diameter": _q("[length]"), "bore": _q("[length]")}, ("diameter",)),
                    "polygon": {"type": "array", "minItems": 3,
                                "items": {"type": "array", "items": QUANTITY, "minItems": 2, "maxItems": 2}}},
                   ("at",))
    return _obj({"name": NAME, "held_end": _vec("[length]"), "load_point": _vec("[length]"),
                 "sections": {"type": "array", "items": section, "minItems": 2},
                 "force": _vec("[force]"), "load": {"type": ["string", "integer"]},
                 "depth_direction": _vec("direction of the section's depth"),
                 "points": {"type": "array", "items": NAME}, "lines": {"type": "array", "items": NAME}},
                ("name", "held_end", "load_point", "sections"),
                "an idealised beam whose estimates are reported next to the FE values")


def _reference() -> dict:
    tol_text = "\"5%\", \"0.01 mm\" or \"2% or 0.01 mm\""
    tolerance = {"type": "string", "description": tol_text}
    tol_table = {"anyOf": [tolerance, _obj({q: tolerance for q in (*POINT_QUANTITIES, *GROUPS, "*")})]}
    scalar = _obj({"quantity": {"enum": list(SCALAR_QUANTITIES)}, "value": QUANTITY, "tolerance": tolerance,
                   "point": NAME, "at": _vec("[length]"), "support": NAME, "name": {"type": "string"},
                   "mode": {"type": "integer", "minimum": 1,
                            "description": "frequency or buckling_factor: which mode"}},
                  ("quantity", "value"))
    points = _obj({"file": {"type": "string", "description": "CSV with headers such as x [mm], von_mises [MPa]"},
                   "tolerance": tol_table, "snap": _q("[length]"), "label": {"type": "string"}}, ("file",))
    field = _obj({"file": {"type": "string", "description": ".vtu or .vtk with point data"},
                  "tolerance": tol_table, "snap": _q("[length]"), "label": {"type": "string"},
                  "arrays": _obj({q: {"type": "string"} for q in (*POINT_QUANTITIES, *GROUPS)}),
                  "units": _obj({"length": {"type": "string"}, "stress": {"type": "string"}})}, ("file", "arrays"))
    return _obj({"label": {"type": "string"}, "tolerance": tolerance, "snap": _q("[length]"),
                 "scalar": _tables(scalar, "[[reference.scalar]]"), "points": _tables(points, "[[reference.points]]"),
                 "field": _tables(field, "[[reference.field]]")},
                text="results of another solver to compare with")


def _support() -> dict:
    """A support on a region (held components, or an elastic foundation), or at a point (``at``)."""
    out = _obj({"region": NAME,
                "fix": {"type": "string", "description": "x, y, z; n; or r, t, a (x, y, z at a point)"},
                "value": {"anyOf": [_vec("prescribed displacement [length]"), QUANTITY]},
                "moment_about": _vec("[length]"),
                "foundation": _obj({"normal": _q("[force/length^3]"), "tangential": _q("[force/length^3]")},
                                   ("normal",)),
                "at": _vec("a point support: the point whose node is held [length]"),
                "name": NAME, "tol": _q("how far a point support's node may lie from its point [length]")})
    out["anyOf"] = [{"required": ["region"]}, {"required": ["at"]}]
    return out


def _material() -> dict:
    points = {"type": "array", "items": QUANTITY, "minItems": 3, "maxItems": 3}
    return _obj({"name": NAME, "E": _q("Young's modulus [stress]"),
                 "nu": {"type": "number", "description": "Poisson's ratio"},
                 "density": _q("[mass/length^3]"), "yield_strength": _q("[stress]"),
                 "expansion": _q("thermal expansion coefficient [1/K]"),
                 "bodies": {"anyOf": [{"type": "array", "items": {"type": "integer", "minimum": 1}, "minItems": 1},
                                      {"type": "integer", "minimum": 1}],
                            "description": "body ids as 'elastofe surfaces' lists them"},
                 "at": {"anyOf": [{"type": "array", "items": points, "minItems": 1}, points],
                        "description": "a point inside each body [length]"},
                 "groups": {"anyOf": [{"type": "array", "items": NAME, "minItems": 1}, NAME],
                            "description": "volume physical groups of a .msh file"}}, ("E", "nu"))


def case_schema() -> dict:
    """The JSON Schema (draft-07) of a case file, as a dict."""
    suffixes = "|".join(s.lstrip(".") for s in GEOMETRY_SUFFIXES)
    props = {
        "title": {"type": "string"},
        "units": {"enum": list(SYSTEMS), "description": "the consistent unit system of plain numbers"},
        "geometry": _obj({"file": {"type": "string", "pattern": rf"(?i)\.({suffixes})$"},
                          "unit": {"type": "string", "description": "the file's length unit when it states none"}},
                         ("file",)),
        "material": _tables(_material(), "[material] (one material) or [[material]] (one per material, each "
                            "naming its bodies by bodies, at or groups)"),
        "mesh": _obj({"order": {"enum": [1, 2]}, "size": _q("element size [length]"),
                      "refine": {"type": "array", "items": _obj({"region": NAME, "size": _q("[length]")},
                                                                ("region", "size"))}}),
        "regions": _selectors(),
        "support": _tables(_support(), "[[support]]"),
        "load": _tables(_load(), "[[load]]"),
        "combination": _tables(_obj({"name": NAME, "factors": {"type": "object", "additionalProperties": QUANTITY,
                                                               "minProperties": 1}}, ("name", "factors")),
                               "[[combination]]: factored sums of load cases"),
        "point": _tables(_obj({"name": NAME, "at": _vec("[length]")}, ("name", "at")), "[[point]]"),
        "line": _tables(_obj({"name": NAME, "start": _vec("[length]"), "end": _vec("[length]"),
                              "samples": {"type": "integer", "minimum": 2}}, ("name", "start", "end")), "[[line]]"),
        "solver": _obj({"backend": {"enum": list(SOLVER_BACKENDS)}, "tol": {"type": "number", "exclusiveMinimum": 0},
                        "maxiter": {"type": "integer", "minimum": 1}}),
        "beam": _tables(_beam(), "[[beam]]"),
        "modes": _obj({"count": {"type": "integer", "minimum": 1, "description": "modes to compute"},
                       "above": _q("the excitation the first elastic mode must stay above [Hz or rpm]")},
                      text="natural frequencies and mode shapes"),
        "buckling": _obj({"count": {"type": "integer", "minimum": 1, "description": "buckling factors to compute"},
                          "load_case": NAME, "above": {"type": ["number", "string"],
                                                        "description": "the factor the first one must exceed"}},
                         text="linear buckling load factors of the case's loads"),
        "reference": _reference(),
    }
    return {"$schema": "http://json-schema.org/draft-07/schema#", "$id": "elastofe-case.schema.json",
            "title": "elastofe case file", "description": "A case for elastofe (TOML). Keys and shapes only: "
            "`elastofe check CASE.toml` checks values, units and the geometry.",
            "type": "object", "properties": props, "required": ["geometry", "material"],
            "additionalProperties": False}


def schema_text() -> str:
    """The schema as the JSON text shipped in :data:`SCHEMA_FILE`."""
    return json.dumps(case_schema(), indent=1) + "\n"
