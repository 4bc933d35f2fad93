"""Every mistake of a case file reported at once (up to a cap), one line each, without one mistake
reported again as the errors it causes."""
from __future__ import annotations

import textwrap

import pytest

from elastofe.case import parse_case
from elastofe.case.collect import MAX_ERRORS
from elastofe.cli import main
from elastofe.errors import CaseError, CaseErrors

if __import__("sys").version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

GOOD = """
title = "t"
[geometry]
file = "part.step"
[material]
E = 200000.0
nu = 0.3
[regions]
a = { plane = { point = [0, 0, 0], normal = [1, 0, 0] } }
b = { cylinder = { radius = 5 } }
[[support]]
region = "a"
fix = "xyz"
[[load]]
region = "b"
force = [0, -1, 0]
"""

MANY = """
title = 3
[geometry]
file = "part.stp"
[material]
E = "200 N"
nu = 0.3
[mesh]
size = -1
[regions]
a = { plane = { point = [0, 0], normal = [1, 0, 0] } }
b = { cylinder = { radius = 5, colour = "red" } }
[[support]]
region = "a"
fix = "q"
[[load]]
region = "b"
force = [0, -1]
[[point]]
name = "p"
at = [0, 0, "1 kg"]
[solver]
backend = "fastest"
"""


def parse(text: str):
    return parse_case(tomllib.loads(textwrap.dedent(text)))


def test_good_case_parses():
    assert parse(GOOD).title == "t"


def test_every_independent_mistake_is_reported_in_file_order():
    with pytest.raises(CaseErrors) as info:
        parse(MANY)
    keys = [e.key for e in info.value.errors]
    assert keys == ["title", "material.E", "mesh.size", "regions.a.plane.point", "regions.b.cylinder.colour",
                    "support[1].fix", "load[1].force", "point[1].at[2]", "solver.backend"]
    assert info.value.key == "title" and info.value.more == 0  # the first error's key, as a CaseError
    assert len(str(info.value).splitlines()) == 9


def test_command_line_prints_one_line_per_mistake(tmp_path, capsys):
    case = tmp_path / "many.toml"
    case.write_text(textwrap.dedent(MANY))
    assert main(["check", str(case)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 9 and all(ln.startswith("elastofe: error in the case: ") for ln in err)
    assert "material.E = '200 N'" in err[1] and "solver.backend = 'fastest'" in err[-1]


def test_at_most_the_cap_is_listed_and_the_rest_counted(tmp_path, capsys):
    n = MAX_ERRORS + 7
    text = GOOD + "".join(f'\n[[point]]\nname = "p{i}"\nat = [0, 0]\n' for i in range(n))
    with pytest.raises(CaseErrors) as info:
        parse(text)
    assert len(info.value.errors) == MAX_ERRORS and info.value.more == 7
    assert [e.key for e in info.value.errors[:2]] == ["point[1].at", "point[2].at"]
    case = tmp_path / "points.toml"
    case.write_text(textwrap.dedent(text))
    assert main(["run", str(case), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == MAX_ERRORS + 1 and err[-1] == "elastofe: ... and 7 more error(s) in the case, not listed"


def test_a_single_mistake_is_a_plain_case_error():
    with pytest.raises(CaseError) as info:
        parse(GOOD.replace("nu = 0.3", "nu = 0.6"))
    assert type(info.value) is CaseError and info.value.key == "material.nu"


@pytest.mark.parametrize("edit, key", [
    # A load that fails is not reported again as "case is required" of the load-case check.
    (("force = [0, -1, 0]", 'force = [0, -1]\ncase = "lift"\n[[load]]\ngravity = [0, -1, 0]\ncase = "lift"'),
     "load[1].force"),
    # A wrong unit system is one error: the other values are read on in the default system.
    (('title = "t"', 'title = "t"\nunits = "furlong-stone"'), "units"),
    # A material that fails is not judged again for volumetric locking with the mesh order.
    (("nu = 0.3", 'nu = "0.495 m"\n[mesh]\norder = 1'), "material.nu"),
])
def test_one_mistake_is_not_reported_again_through_what_it_causes(edit, key):
    with pytest.raises(CaseError) as info:
        parse(GOOD.replace(*edit))
    assert type(info.value) is CaseError and info.value.key == key


@pytest.mark.parametrize("support, key, fragment", [
    # The x of 0.1 was silently ignored: the region did not move as the case said.
    ({"region": "a", "fix": "z", "value": [0.1, 0, 0]}, "support[1].value", "prescribes x = 0.1"),
    ({"region": "a", "fix": "n", "value": [0.1, 0.2, 0]}, "support[1].value", "prescribes component 2 = 0.2"),
    ({"region": "a", "fix": "rt", "value": [0, 0, -0.5]}, "support[1].value", "prescribes a = -0.5"),
    ({"at": [0, 0, 0], "fix": "x", "value": [0, 0, 1]}, "support[1].value", "prescribes z = 1"),
])
def test_value_of_a_component_not_held_is_refused(support, key, fragment):
    doc = tomllib.loads(GOOD)
    doc["support"] = [support]
    with pytest.raises(CaseError) as err:
        parse_case(doc)
    assert err.value.key == key and fragment in str(err.value) and "does not hold" in str(err.value)


def test_values_of_held_components_are_kept():
    doc = tomllib.loads(GOOD)
    doc["support"] = [{"region": "a", "fix": "yz", "value": [0, 0.25, -0.5]},
                      {"region": "a", "fix": "n", "value": 0.1}]
    case = parse_case(doc)
    assert case.supports[0].value == (0.0, 0.25, -0.5) and case.supports[1].value == (0.1, 0.0, 0.0)


def test_moment_with_a_force_needs_its_point():
    # force + moment without `at` was read as the force alone: the moment was dropped without a word.
    doc = tomllib.loads(GOOD)
    doc["load"] = [{"region": "b", "force": [0, -1, 0], "moment": [0, 0, 1000]}]
    with pytest.raises(CaseError) as err:
        parse_case(doc)
    assert err.value.key == "load[1].at" and "a moment needs the point it acts at" in str(err.value)
