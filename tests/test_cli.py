"""The command line through main([...]): success, bad input (exit 2), unsolvable models (exit 3)."""
import json

import pytest

import elastofe
from elastofe.cli import main


def test_public_api_names_resolve():
    for name in elastofe.__all__:
        assert getattr(elastofe, name) is not None


def test_run_writes_contract_files(cantilever_case, tmp_path, capsys):
    case = cantilever_case(size=5.0, order=1)
    out = tmp_path / "res"
    assert main(["run", str(case), "--out", str(out)]) == 0
    doc = json.loads((out / "summary.json").read_text())
    assert doc["mesh"]["order"] == 1
    assert (out / "result.vtu").is_file() and (out / doc["lines"]["mid"]).is_file()
    printed = capsys.readouterr()
    assert "max von Mises" in printed.out and "Caution" in printed.out
    assert "assembly" in printed.err  # progress on stderr
    assert not list(out.glob("*.part"))
    # The tip shear is (0, -100, 0) N exactly; round-off in the other components is shown as 0,
    # and the equilibrium error says what it is relative to (statics, common practice).
    assert "applied force               (0, -100, 0) N" in printed.out
    assert "reaction on root            (0, 100, 0) N" in printed.out
    assert "(relative)" in next(ln for ln in printed.out.splitlines() if "equilibrium error" in ln)


def test_default_output_folder_next_to_case(cantilever_case):
    case = cantilever_case(size=5.0, order=1)
    assert main(["run", str(case), "-q"]) == 0
    assert (case.parent / f"{case.stem}-results" / "summary.json").is_file()


@pytest.mark.parametrize("edit,key,fragment", [
    (("nu = 0.3", "nu = 0.7"), "material.nu", "between -1 and 0.5"),
    (("E = 200000.0", "E = \"200 N\""), "material.E", "wrong dimension"),
    (("order = 1", "ordr = 1"), "mesh.ordr", "did you mean 'order'"),
    (("region = \"tip\"", "region = \"tipp\""), "load[1].region", "unknown region"),
    (("size = 5.0", "size = -1"), "mesh.size", "greater than zero"),
])
def test_bad_case_exit_2_with_key_and_no_traceback(cantilever_case, tmp_path, capsys, edit, key, fragment):
    path = cantilever_case(size=5.0, order=1)
    path.write_text(path.read_text().replace(*edit))
    assert main(["run", str(path), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert key in err and fragment in err
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1


def test_region_matching_nothing_is_a_case_error(cantilever_case, tmp_path, capsys):
    path = cantilever_case(size=5.0, order=1)
    path.write_text(path.read_text().replace("point = [100, 0, 0], normal", "point = [120, 0, 0], normal"))
    assert main(["run", str(path), "--out", str(tmp_path / "o")]) == 2
    assert "regions.tip" in capsys.readouterr().err


def test_point_outside_part_is_a_case_error(cantilever_case, tmp_path, capsys):
    path = cantilever_case(size=5.0, order=1)
    path.write_text(path.read_text().replace("at = [100, 0, 0]", "at = [130, 0, 0]"))
    assert main(["run", str(path), "--out", str(tmp_path / "o")]) == 2
    assert "point[1].at" in capsys.readouterr().err


def test_not_restrained_exit_3_names_free_motions(cantilever_case, tmp_path, capsys):
    path = cantilever_case(size=5.0, order=1)
    path.write_text(path.read_text().replace('fix = "xyz"', 'fix = "y"'))
    assert main(["run", str(path), "--out", str(tmp_path / "o")]) == 3
    err = capsys.readouterr().err
    # Holding only u_y on the root face leaves x and z translations and the rotation about y free.
    assert "translation along x" in err and "translation along z" in err
    assert "rotation about y" in err and "translation along y" not in err
    assert not (tmp_path / "o" / "summary.json").exists()


def test_missing_case_file(tmp_path, capsys):
    assert main(["run", str(tmp_path / "nope.toml")]) == 2
    assert "file not found" in capsys.readouterr().err


def test_surfaces_lists_planes_and_cylinders(parts, capsys):
    assert main(["surfaces", str(parts["ring"])]) == 0
    out = capsys.readouterr().out
    assert "cylinder" in out and "radius 10" in out and "radius 20" in out
    assert out.count("plane") >= 4


def test_surfaces_listed_in_a_case_unit_system(parts, capsys):
    """--units takes the case's system name as well: in-lbf lists in inches (1 in = 25.4 mm
    exactly), so the ring's 10 mm hole has radius 10 / 25.4 = 0.3937 in."""
    assert main(["surfaces", str(parts["ring"]), "--units", "in-lbf"]) == 0
    out = capsys.readouterr().out
    assert "lengths in in, areas in in^2" in out and f"radius {10 / 25.4:.5g}" in out


@pytest.mark.gmsh
def test_demo_runs(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path / "demo")]) == 0
    doc = json.loads((tmp_path / "demo" / "summary.json").read_text())
    assert doc["equilibrium_error"] < 1e-8
    printed = capsys.readouterr().out
    assert "results written to" in printed
    # The demo's [[beam]] estimate is printed beside the FE value, and the FE deflection lies
    # between the constant-section bounds (common practice for a tapered cantilever).
    assert "beam-theory expectation" in printed and "inside the constant-section bounds" in printed


def test_case_built_in_code(parts):
    # The Python API mirrors the case file: build a Case from the dataclasses and solve it.
    from elastofe.case import Case, ForceLoad, Geometry, Material, MeshSpec, Plane, Probe, Support, validate

    case = Case(geometry=Geometry(parts["bar"]), material=Material(E=200000.0, nu=0.3),
                mesh=MeshSpec(order=1, size=5.0),
                regions={"root": Plane((0, 0, 0), (1, 0, 0)), "tip": Plane((100, 0, 0), (1, 0, 0))},
                supports=(Support("root"),), loads=(ForceLoad("tip", (1000.0, 0, 0)),),
                points=(Probe("tip", (100, 0, 0)),))
    validate(case)
    res = elastofe.solve_case(case)
    # Axial bar: u = F L / (E A) = 1000 * 100 / (2e5 * 100) = 0.005 (common practice); 2 % band for
    # the clamped root's restrained Poisson contraction and the coarse TET4 mesh.
    assert res.points["tip"]["displacement"][0] == pytest.approx(0.005, rel=0.02)
    assert res.u.shape == (res.mesh.nodes, 3) and res.stress.shape == (res.mesh.nodes, 6)


@pytest.mark.parametrize("command", ["run", "check", "study"])
def test_geometry_given_as_the_case_says_so(parts, capsys, command):
    assert main([command, str(parts["bar"]), "-q"]) == 2
    err = capsys.readouterr().err
    assert "is a geometry or mesh file, not a case file" in err and "[geometry] file" in err
    assert len(err.strip().splitlines()) == 1


def test_unquoted_path_with_spaces_gets_a_hint(parts, tmp_path, capsys):
    folder = tmp_path / "my part"
    folder.mkdir()
    step = folder / "bar.step"
    step.write_bytes(parts["bar"].read_bytes())
    assert main(["surfaces", *str(step).split(" ")]) == 2
    err = capsys.readouterr().err
    assert "unrecognized arguments: part/bar.step; a path with spaces must be in quotes" in err
    assert main(["surfaces", str(step), "--bogus"]) == 2
    assert "quotes" not in capsys.readouterr().err


def test_surfaces_with_an_absurd_file_unit_names_the_option(parts, capsys):
    assert main(["surfaces", str(parts["bar"]), "--file-unit", "parsec"]) == 2
    err = capsys.readouterr().err
    assert "error on the command line: --file-unit = 'parsec'" in err and "no part is drawn in such a unit" in err
