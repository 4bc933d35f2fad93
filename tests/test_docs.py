"""The documentation stays true: the quick start's case validates and meshes, its TOML excerpt is a
valid case, the generated key reference covers every key of the schema, the notebooks parse.
(.ci/run builds the pages with --strict and executes the notebooks.)"""
from __future__ import annotations

import ast
import importlib.util
import json
import re
import sys
from pathlib import Path

import pytest

from elastofe.case import load_case, parse_case

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

DOCS = Path(__file__).resolve().parents[1] / "docs"
QUICK = DOCS / "quickstart"


def test_quickstart_excerpt_is_a_valid_case():
    text = (DOCS / "quickstart.md").read_text(encoding="utf-8")
    (block,) = re.findall(r"```toml\n(.*?)```", text, re.S)
    case = parse_case(tomllib.loads(block), base=QUICK)
    full = load_case(QUICK / "bracket.toml")
    m, f = case.material, full.material
    assert (m.E, m.nu, m.yield_strength) == (f.E, f.nu, f.yield_strength)
    assert case.loads == full.loads and case.supports == full.supports


@pytest.mark.gmsh
def test_quickstart_case_checks(tmp_path):
    from elastofe.job import check_case

    doc = check_case(QUICK / "bracket.toml")
    # The part of make_bracket.py: two bolt holes of radius 4.5 mm through the 6 mm base plate
    # (bore area 2 pi r t = 169.6 mm^2 each), one load hole of radius 5 mm through the 6 mm upright.
    bolts = doc["regions"]["bolts"]["surfaces"]
    assert len(bolts) == 2 and all(s["radius"] == pytest.approx(4.5, rel=1e-3) for s in bolts)
    assert sum(s["area"] for s in bolts) == pytest.approx(2 * 2 * 3.141592653589793 * 4.5 * 6, rel=2e-3)
    (pin,) = doc["regions"]["pin"]["surfaces"]
    assert pin["axis"] == pytest.approx([0, 1, 0], abs=1e-6) and pin["radius"] == pytest.approx(5.0, rel=1e-3)
    assert doc["loads"][0]["force"] == pytest.approx([0, 0, 3000], abs=1e-6)


def _hooks():
    pytest.importorskip("mkdocs")
    spec = importlib.util.spec_from_file_location("docs_hooks", DOCS / "hooks.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_key_reference_lists_every_key_of_the_schema():
    from elastofe.case.json_schema import case_schema

    text = _hooks().case_keys_markdown()
    keys: set[str] = set()

    def walk(node):
        if isinstance(node, dict):
            keys.update(node.get("properties", {}))
            for v in node.values():
                walk(v)
        elif isinstance(node, list):
            for v in node:
                walk(v)

    walk(case_schema())
    missing = [k for k in keys if f"| `{k}` |" not in text]
    assert not missing, missing
    for section in ("[geometry]", "[[support]]", "[[load]]", "[[reference.points]]", "[regions.NAME]",
                    "[[beam.sections]]"):
        assert f"`{section}`" in text, section


@pytest.mark.parametrize("path", sorted((DOCS / "examples").glob("*.ipynb")), ids=lambda p: p.stem)
def test_notebooks_parse(path):
    nb = json.loads(path.read_text(encoding="utf-8"))
    code = [c for c in nb["cells"] if c["cell_type"] == "code"]
    assert code and all(not c.get("outputs") for c in code), "notebooks are stored without outputs"
    for c in code:
        ast.parse("".join(c["source"]))
