"""Command-line options: -v/-q anywhere, --solver choices, command-line mistakes named as such, and
`elastofe check` (validate and mesh without solving, report what each region matched)."""
from __future__ import annotations

import json

import pytest

from elastofe.case.load import SOLVER_BACKENDS
from elastofe.cli import build_parser, main


@pytest.mark.parametrize("argv, verbose, quiet", [
    (["run", "c.toml"], False, False),
    (["-v", "run", "c.toml"], True, False),
    (["run", "c.toml", "-v"], True, False),
    (["-q", "run", "c.toml"], False, True),
    (["run", "-q", "c.toml"], False, True),
    (["-v", "run", "c.toml", "-q"], True, True),
    (["-q", "study", "c.toml", "--levels", "3"], False, True),
    (["demo", "-q"], False, True),
    (["-v", "surfaces", "part.step"], True, False),
])
def test_global_options_anywhere(argv, verbose, quiet):
    args = build_parser().parse_args(argv)
    assert args.verbose is verbose and args.quiet is quiet


def _subparsers():
    import argparse

    p = build_parser()
    action = next(a for a in p._actions if isinstance(a, argparse._SubParsersAction))
    return action.choices


def test_every_solver_option_lists_every_backend():
    found = 0
    for name, sub in _subparsers().items():
        for a in sub._actions:
            if "--solver" in a.option_strings:
                found += 1
                assert tuple(a.choices) == SOLVER_BACKENDS, name
    assert found >= 4  # run, check, compare, report


def test_unknown_solver_is_refused_by_the_parser(capsys):
    assert main(["run", "c.toml", "--solver", "fastest"]) == 2
    assert "invalid choice" in capsys.readouterr().err


def test_missing_case_file_is_a_command_line_error(tmp_path, capsys):
    assert main(["run", str(tmp_path / "nope.toml")]) == 2
    err = capsys.readouterr().err
    assert "error on the command line" in err and "CASE" in err and "error in the case" not in err
    assert main(["check", str(tmp_path)]) == 2
    assert "is a folder" in capsys.readouterr().err


@pytest.mark.gmsh
def test_out_that_is_a_file_is_a_command_line_error(cantilever_case, tmp_path, capsys):
    path = cantilever_case(size=10.0, order=1)
    f = tmp_path / "a-file"
    f.write_text("x")
    assert main(["run", str(path), "--out", str(f)]) == 2
    err = capsys.readouterr().err
    assert "error on the command line: --out" in err


@pytest.mark.gmsh
def test_bad_case_value_is_still_an_error_in_the_case(cantilever_case, tmp_path, capsys):
    path = cantilever_case(size=10.0, order=1)
    path.write_text(path.read_text().replace("nu = 0.3", "nu = 0.7"))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "error in the case: material.nu" in err


@pytest.mark.gmsh
def test_check_reports_region_matches_without_solving(cantilever_case, tmp_path, capsys):
    path = cantilever_case(size=5.0, order=1)
    assert main(["-q", "check", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    # The bar of conftest spans x 0..100, y and z -5..5: its end faces are 10 x 10 = 100 mm^2
    # with centroids on the x axis and outward normals -x (root) and +x (tip) (fixture geometry).
    for name, x, nx in (("root", 0.0, -1.0), ("tip", 100.0, 1.0)):
        (s,) = doc["regions"][name]["surfaces"]
        assert s["kind"] == "plane"
        assert s["area"] == pytest.approx(100.0, rel=1e-9)
        assert s["centroid"] == pytest.approx([x, 0.0, 0.0], abs=1e-9)
        assert s["normal"] == pytest.approx([nx, 0.0, 0.0], abs=1e-9)
    assert doc["region_users"] == {"root": ["support[1]"], "tip": ["load[1]"]}
    assert doc["loads"][0]["force"] == pytest.approx([0.0, -100.0, 0.0], abs=1e-9)
    assert doc["mesh"]["dofs"] == 3 * doc["mesh"]["nodes"] and doc["held_dofs"] > 0
    assert not any(tmp_path.glob("*-results")), "check must not write results"
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "root: 1 surface, area 100; used by support[1]" in out
    assert "normal (-1, 0, 0)" in out and "nothing was solved" in out


@pytest.mark.gmsh
def test_check_refuses_a_region_that_matches_nothing(cantilever_case, capsys):
    path = cantilever_case(size=10.0, order=1)
    path.write_text(path.read_text().replace("point = [100, 0, 0], normal = [1, 0, 0]",
                                             "point = [120, 0, 0], normal = [1, 0, 0]"))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "error in the case: regions.tip" in err
    # The bar's end faces lie at x = 0 and x = 100 (fixture geometry); the coordinates carry the unit.
    flat = " ".join(err.split())
    assert "through [120.0, 0.0, 0.0] mm with normal" in flat and "(100, 0, 0) mm" in flat


def test_check_lists_a_mesh_file_group_and_an_unused_region(capsys):
    """A physical group of a .msh file lists its surfaces without a fitted normal (the region is the
    group, not a plane selector): the listing shows area and centroid and no traceback; a region
    nothing uses says so once."""
    import io

    from elastofe.cli import print_check

    doc = {"units": {"length": "in", "force": "lbf"}, "title": "group", "geometry": {},
           "mesh": {"nodes": 10, "elements": 1, "order": 2, "dofs": 30},
           "regions": {"s1": {"kind": "group", "area": 0.31, "patches": [[1]], "surfaces": [
               {"id": 1, "kind": "plane", "area": 0.31, "centroid": [0.0, 0.19685039, 0.3937]}]}},
           "region_users": {}, "warnings": [], "loads": [], "held_dofs": 3,
           "solve": {"backend": "scipy", "memory_estimate_mb": 1.0}}
    out = io.StringIO()
    print_check(doc, out)
    text = out.getvalue()
    assert "s1: 1 surface, area 0.31; not used by a support, load or refinement" in text
    assert "used by not used" not in text
    assert "surface 1: plane, area 0.31, centroid (0, 0.1969, 0.3937)\n" in text


def test_prismatic_beam_estimate_is_not_called_outside_its_bounds():
    """A constant section gives equal stiff and soft bounds; a run 0.53 % off the estimate (the
    in-lbf cantilever of the unit probe) was printed as OUTSIDE them."""
    import io

    from elastofe.cli import print_estimates

    d = {"estimate": -0.079343, "fe": -0.078919, "relative_difference": -0.078919 / -0.079343 - 1,
         "stiff_bound": -0.079343, "soft_bound": -0.079343, "fe_within_bounds": False}
    doc = {"units": {"length": "in", "stress": "psi"}, "estimates": {"arm": {"load_point_deflection": d}}}
    out = io.StringIO()
    print_estimates(doc, out)
    assert "OUTSIDE" not in out.getvalue() and "one section along the span" in out.getvalue()
    assert "(-0.53 %)" in out.getvalue()      # (0.078919 - 0.079343) / 0.079343
