"""The JSON Schema of the case file: shipped and current, accepts every valid case we have, refuses
misspelt keys, and accepts exactly the keys the loader accepts (read from the loader's own
'valid keys here' message for every kind of table)."""
from __future__ import annotations

import copy
import json
import re
import sys
from pathlib import Path

import pytest

from elastofe.case import parse_case
from elastofe.case.json_schema import SCHEMA_FILE, case_schema, schema_text
from elastofe.errors import CaseError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

jsonschema = pytest.importorskip("jsonschema")

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "tests" / "corpus"
VALID_CASES = sorted([*(ROOT / "elastofe" / "models").rglob("*.toml"),
                      *(ROOT / "elastofe" / "verify" / "cases").glob("*.toml"), CORPUS / "base.toml"])


def validator():
    return jsonschema.Draft7Validator(case_schema())


def test_shipped_schema_is_current_and_valid():
    fix = "python -c 'from elastofe.case.json_schema import *; SCHEMA_FILE.write_text(schema_text())'"
    assert SCHEMA_FILE.read_text(encoding="utf-8") == schema_text(), f"regenerate: {fix}"
    jsonschema.Draft7Validator.check_schema(json.loads(SCHEMA_FILE.read_text(encoding="utf-8")))


@pytest.mark.parametrize("path", VALID_CASES, ids=lambda p: p.name)
def test_every_valid_case_passes(path):
    doc = tomllib.loads(path.read_text(encoding="utf-8"))
    errors = [f"{'/'.join(map(str, e.path))}: {e.message}" for e in validator().iter_errors(doc)]
    assert not errors, errors


def _corpus_unknown_keys():
    expected = tomllib.loads((CORPUS / "expected.toml").read_text(encoding="utf-8"))
    return sorted(n for n, e in expected.items() if any("unknown key" in f for f in e["fragments"]))


@pytest.mark.parametrize("name", _corpus_unknown_keys())
def test_misspelt_keys_of_the_corpus_are_refused(name):
    doc = tomllib.loads((CORPUS / f"{name}.toml").read_text(encoding="utf-8"))
    assert not validator().is_valid(doc)


#: A case that uses every kind of table the loader reads (values need only pass the loader).
RICH = {
    "title": "all tables", "units": "mm-N",
    "geometry": {"file": "part.step", "unit": "mm"},
    "material": {"E": 200000.0, "nu": 0.3, "density": "7850 kg/m^3", "yield_strength": 300.0, "expansion": 1.2e-5},
    "mesh": {"order": 2, "size": 2.0, "refine": [{"region": "hole", "size": 0.5}]},
    "regions": {
        "root": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0], "tol": 0.01}, "several": False},
        "hole": {"cylinder": {"radius": 5.0, "axis": [0, 0, 1], "point": [0, 0, 0], "tol": 0.01}},
        "spot": {"at": {"point": [1, 1, 1], "tol": 0.1}},
        "inside": {"box": {"min": [0, 0, 0], "max": [1, 1, 1]}},
        "ids": {"surfaces": [1, 2]},
        "grp": {"group": "load-face"},
        "line1": {"edge": {"start": [0, 0, 0], "end": [0, 0, 1], "tol": 0.01}},
        "line2": {"edge": {"region": "root", "plane": {"point": [0, 0, 0], "normal": [0, 1, 0]}}},
    },
    "support": [{"region": "root", "fix": "xyz", "value": [0, 0, 0], "moment_about": [0, 0, 0]},
                {"region": "inside", "foundation": {"normal": 10.0, "tangential": 1.0}}],
    "load": [{"region": "hole", "force": [0, -10, 0], "distribution": "bearing", "case": "a"},
             {"region": "spot", "force": [0, 1, 0], "moment": [0, 0, 1], "at": [1, 1, 1], "case": "a"},
             {"region": "ids", "pressure": 1.0, "gradient": [0, 0.1, 0], "origin": [0, 0, 0], "clip": True,
              "case": "b"},
             {"gravity": [0, -1, 0], "case": "b"},
             {"temperature": {"formula": "x", "reference": 0.0}, "case": "b"}],
    "combination": [{"name": "ab", "factors": {"a": 1.0, "b": 1.5}}],
    "point": [{"name": "p", "at": [1, 1, 1]}],
    "line": [{"name": "l", "start": [0, 0, 0], "end": [1, 0, 0], "samples": 11}],
    "solver": {"backend": "auto", "tol": 1e-8, "maxiter": 100},
    "modes": {"count": 3, "above": "100 Hz"},
    "buckling": {"count": 2, "load_case": "a", "above": 2.0},
    "beam": [{"name": "b", "held_end": [0, 0, 0], "load_point": [10, 0, 0], "force": [0, -1, 0],
              "depth_direction": [0, 1, 0], "points": ["p"], "lines": ["l"],
              "sections": [{"at": 0, "rectangle": {"width": 1, "depth": 2}},
                           {"at": 10, "rectangle": {"width": 1, "depth": 2}}]}],
    "reference": {"label": "x", "tolerance": "5%", "snap": 0.1,
                  "scalar": [{"quantity": "ux", "value": 1.0, "tolerance": "1%", "point": "p", "name": "s"}],
                  "points": [{"file": "pts.csv", "tolerance": {"ux": "1%"}, "snap": 0.1, "label": "x"}],
                  "field": [{"file": "f.vtu", "tolerance": "1%", "snap": 0.1, "label": "x",
                             "arrays": {"ux": "U"}, "units": {"length": "mm"}}]},
}

#: Table paths to probe; each gets an unknown key in turn.
PROBES = [(), ("geometry",), ("material",), ("mesh",), ("mesh", "refine", 0), ("regions", "root"),
          ("regions", "root", "plane"), ("regions", "hole", "cylinder"), ("regions", "spot", "at"),
          ("regions", "inside", "box"), ("regions", "line1", "edge"), ("regions", "line2", "edge", "plane"),
          ("support", 0), ("support", 1, "foundation"), ("load", 0), ("load", 4, "temperature"),
          ("combination", 0), ("point", 0), ("line", 0), ("solver",), ("modes",), ("buckling",), ("beam", 0),
          ("beam", 0, "sections", 0),
          ("beam", 0, "sections", 0, "rectangle"), ("reference",), ("reference", "scalar", 0),
          ("reference", "points", 0), ("reference", "points", 0, "tolerance"), ("reference", "field", 0),
          ("reference", "field", 0, "arrays"), ("reference", "field", 0, "units")]


def _object_node(node: dict) -> dict:
    """The object variant of a schema node (through anyOf)."""
    if "properties" in node:
        return node
    for alt in node.get("anyOf", []):
        if "properties" in alt:
            return alt
    raise AssertionError(f"no object schema in {node}")


def _child(node: dict, key) -> dict:
    if isinstance(key, int):
        node = next(a for a in node.get("anyOf", [node]) if a.get("type") == "array")
        return node["items"]
    obj = node if "additionalProperties" in node and isinstance(node["additionalProperties"], dict) \
        and "properties" not in node else _object_node(node)
    if key in obj.get("properties", {}):
        return obj["properties"][key]
    return obj["additionalProperties"]


def test_rich_case_is_valid_for_loader_and_schema(tmp_path):
    (tmp_path / "pts.csv").write_text("x [mm],y [mm],z [mm],ux [mm]\n1,1,1,0\n")
    (tmp_path / "f.vtu").write_text("")
    parse_case(copy.deepcopy(RICH), base=tmp_path)
    assert validator().is_valid(RICH)


@pytest.mark.parametrize("where", PROBES, ids=lambda p: ".".join(map(str, p)) or "top")
def test_schema_accepts_exactly_the_keys_the_loader_accepts(where, tmp_path):
    (tmp_path / "pts.csv").write_text("x [mm],y [mm],z [mm],ux [mm]\n1,1,1,0\n")
    (tmp_path / "f.vtu").write_text("")
    doc = copy.deepcopy(RICH)
    table = doc
    for k in where:
        table = table[k]
    table["zz_not_a_key"] = 1
    with pytest.raises(CaseError) as info:
        parse_case(doc, base=tmp_path)
    m = re.search(r"valid keys here: (.*)\)$", info.value.expected)
    assert m, info.value
    loader_keys = {k.strip() for k in m.group(1).split(",")}
    node = case_schema()
    for k in where:
        node = _child(node, k)
    schema_keys = set(_object_node(node)["properties"])
    assert schema_keys == loader_keys
    assert not validator().is_valid(doc), "the schema must refuse the unknown key too"


def test_schema_command_prints_and_writes_the_shipped_schema(tmp_path, capsys):
    from elastofe.cli import main

    assert main(["schema"]) == 0
    assert json.loads(capsys.readouterr().out) == case_schema()
    assert main(["schema", "--out", str(tmp_path / "case.schema.json"), "-q"]) == 0
    assert json.loads((tmp_path / "case.schema.json").read_text()) == case_schema()
    assert main(["schema", "--out", str(tmp_path)]) == 2
    assert "error on the command line: --out" in capsys.readouterr().err
