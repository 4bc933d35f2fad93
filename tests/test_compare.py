"""Comparison with reference results (CSV points, VTU point data, scalars).

The reference here is the exact solution of a bar in uniaxial tension held on three mutually
perpendicular faces by sliding supports: u_x = sigma x / E, u_y = -nu sigma (y + 5) / E,
u_z = -nu sigma (z + 5) / E, sigma_xx = F / A everywhere (Hooke's law; Timoshenko & Goodier,
Theory of Elasticity, ch. 1). The field is linear, so 10-node and 4-node elements reproduce it to
round-off (the patch-test property, common practice), and every difference the comparison finds
must be round-off, or the deliberate changes each test makes.
"""
from __future__ import annotations

import json

import meshio
import numpy as np
import pytest
from PIL import Image

from elastofe import CaseError, load_case, solve_case
from elastofe.cli import main
from elastofe.studies.compare import OUTSIDE, SNAPPED, closest_on_triangles, compare, evaluate_at, write_comparison
from tests.conftest import write_case

E, NU, F, A = 200000.0, 0.3, 1000.0, 100.0
SIG = F / A  # 10 MPa


def exact(p: np.ndarray) -> dict[str, np.ndarray]:
    p = np.atleast_2d(p)
    u = np.column_stack([SIG * p[:, 0] / E, -NU * SIG * (p[:, 1] + 5) / E, -NU * SIG * (p[:, 2] + 5) / E])
    return {"ux": u[:, 0], "uy": u[:, 1], "uz": u[:, 2], "u": np.linalg.norm(u, axis=1),
            "sxx": np.full(len(p), SIG), "von_mises": np.full(len(p), SIG)}


CASE = """
title = "bar in uniaxial tension"
[geometry]
file = "{bar}"
[material]
E = 200000.0
nu = 0.3
[mesh]
size = 5.0
[regions]
root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
side = {{ plane = {{ point = [0, -5, 0], normal = [0, 1, 0] }} }}
bottom = {{ plane = {{ point = [0, 0, -5], normal = [0, 0, 1] }} }}
tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
[[support]]
region = "root"
fix = "x"
[[support]]
region = "side"
fix = "y"
[[support]]
region = "bottom"
fix = "z"
[[load]]
region = "tip"
force = [1000, 0, 0]
[[point]]
name = "tip"
at = [100, 0, 0]
[[line]]
name = "axis"
start = [0, 0, 0]
end = [100, 0, 0]
samples = 11
{extra}
"""


def points_csv(path, p, scale_vm=None, header=None):
    """Exact values at ``p`` in other units than the case's (um, kPa) to exercise conversion."""
    ex = exact(p)
    vm = ex["von_mises"] * (1.0 if scale_vm is None else scale_vm)
    rows = ["# exact uniaxial field (Hooke's law)",
            header or "name,x [mm],y [mm],z [mm],ux [um],uy [mm],sxx [MPa],von_mises [kPa]"]
    for i in range(len(p)):
        vals = [p[i, 0], p[i, 1], p[i, 2], ex["ux"][i] * 1000, ex["uy"][i], ex["sxx"][i], vm[i] * 1000]
        rows.append(f"p{i}," + ",".join(repr(float(v)) for v in vals))
    path.write_text("\n".join(rows) + "\n")
    return path


@pytest.fixture(scope="module")
def bar_case(parts, tmp_path_factory):
    d = tmp_path_factory.mktemp("cmp")
    rng = np.random.default_rng(7)
    inside = rng.uniform([0, -5, -5], [100, 5, 5], (40, 3))
    points_csv(d / "ref.csv", inside)
    path = write_case(d / "bar.toml", CASE.format(bar=parts["bar"], extra="""
        [reference]
        label = "exact solution"
        tolerance = "1%"
        [[reference.scalar]]
        quantity = "ux"
        point = "tip"
        value = "5 um"
        [[reference.scalar]]
        quantity = "reaction_x"
        support = "root"
        value = "-1 kN"
        tolerance = "0.01%"
        [[reference.scalar]]
        quantity = "max_von_mises"
        value = 10.0
        [[reference.scalar]]
        quantity = "uy"
        at = [50, 5, 0]
        value = -0.00015
        tolerance = "1e-9 mm"
        [[reference.points]]
        file = "ref.csv"
        """))
    case = load_case(path)
    return d, case, solve_case(case), inside


def test_closest_point_on_a_triangle():
    tri = np.array([[[0.0, 0, 0], [2, 0, 0], [0, 2, 0]]])
    p = np.array([[0.5, 0.5, 3.0], [-1.0, -1.0, 0.0], [2.0, 2.0, 1.0]])
    cp = closest_on_triangles(p, np.repeat(tri[None], 3, axis=0)[:, 0][:, None])
    # Above the interior: the foot of the perpendicular; beyond a corner: the corner; beyond the
    # hypotenuse: its nearest point (1, 1, 0) (plane geometry).
    assert np.allclose(cp[:, 0], [[0.5, 0.5, 0], [0, 0, 0], [1, 1, 0]], atol=1e-15)


def test_exact_field_agrees_to_round_off(bar_case):
    d, case, res, inside = bar_case
    doc = compare(res)
    assert doc["verdict"] == "agree" and doc["points_outside"] == 0
    s = {x["quantity"]: x for x in doc["scalars"]}
    assert s["ux"]["ours"] == pytest.approx(SIG * 100 / E, rel=1e-9)             # sigma L / E
    assert s["reaction_x"]["ours"] == pytest.approx(-F, rel=1e-9)                 # statics
    assert s["max_von_mises"]["ours"] == pytest.approx(SIG, rel=1e-9)
    assert s["uy"]["ours"] == pytest.approx(-NU * SIG * 10 / E, rel=1e-9)         # point on the face y = 5
    q = doc["sets"][0]["quantities"]
    assert set(q) == {"ux", "uy", "sxx", "von_mises"}
    for name, e in q.items():
        assert e["compared"] == 40 and e["within"] == 40 and e["verdict"] == "agree"
        assert e["max_relative_difference"] < 1e-9, name
    # The CSV's um and kPa were converted: the reference scale of ux is the largest exact ux in mm.
    assert q["ux"]["reference_scale"] == pytest.approx(exact(inside)["ux"].max(), rel=1e-12)
    assert q["von_mises"]["reference_scale"] == pytest.approx(SIG, rel=1e-12)


def test_disagreement_is_measured(bar_case, tmp_path):
    d, case, res, inside = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    scale = np.where(np.arange(len(inside)) % 2 == 0, 1.1, 1.0)  # every other point 10 % high
    f = points_csv(tmp_path / "off.csv", inside, scale_vm=scale)
    rs = RefSet("points", f, {"*": Tolerance(0.05)}, key="reference.points[1]")
    doc = compare(replace(res, case=replace(case, reference=replace(case.reference, scalars=(), sets=(rs,)))))
    e = doc["sets"][0]["quantities"]["von_mises"]
    assert e["verdict"] == "disagree" and doc["verdict"] == "disagree"
    assert e["within"] == 20 and e["compared"] == 40
    # Reference scale 11 MPa (the largest reference value); worst difference 10 - 11 = -1 MPa.
    assert e["max_abs_difference"] == pytest.approx(1.0, rel=1e-9)
    assert e["max_relative_difference"] == pytest.approx(1.0 / 11.0, rel=1e-9)
    assert e["rms_difference"] == pytest.approx(np.sqrt(0.5), rel=1e-9)
    assert e["allowed_difference"] == pytest.approx(0.05 * 11.0, rel=1e-12)


def test_points_outside_are_snapped_or_reported(bar_case):
    _, case, res, _ = bar_case
    p = np.array([[50.0, 5.2, 0.0], [30.0, 0.0, -5.3], [50.0, 0.0, 40.0], [20.0, 1.0, 1.0]])
    ev = evaluate_at(res, p, snap=0.5)
    assert ev.status.tolist() == [SNAPPED, SNAPPED, OUTSIDE, 0]
    # Distances to the flat faces y = 5, z = -5 and z = 5 (plane geometry).
    assert ev.distance[:3] == pytest.approx([0.2, 0.3, 35.0], rel=1e-9)
    assert ev.used[0] == pytest.approx([50.0, 5.0, 0.0], abs=1e-9)
    # The snapped points take the field on the surface: u_y at y = 5, not at y = 5.2.
    assert ev.values["uy"][0] == pytest.approx(exact(np.array([[50.0, 5.0, 0.0]]))["uy"][0], rel=1e-9)
    assert np.isnan(ev.values["von_mises"][2])
    assert ev.values["ux"][3] == pytest.approx(exact(p[3:])["ux"][0], rel=1e-9)


def test_outside_points_reported_in_the_document(bar_case, tmp_path):
    d, case, res, inside = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    p = np.vstack([inside[:5], [[50.0, 5.2, 0.0], [50.0, 0.0, 40.0]]])
    f = points_csv(tmp_path / "some-out.csv", p)
    rs = RefSet("points", f, {"*": Tolerance(0.01)}, snap=0.5, key="reference.points[1]")
    doc = compare(replace(res, case=replace(case, reference=replace(case.reference, scalars=(), sets=(rs,)))))
    st = doc["sets"][0]
    assert [o["index"] for o in st["outside"]] == [6] and st["outside"][0]["distance"] == pytest.approx(35.0)
    assert [o["index"] for o in st["snapped"]] == [5]
    assert st["quantities"]["sxx"]["compared"] == 6 and st["quantities"]["sxx"]["outside"] == 1
    rows = [r for r in st["rows"] if r["index"] == 6]
    assert rows and all(r["location"] == "outside" and r["difference"] is None for r in rows)
    assert doc["points_outside"] == 1


def test_vtu_point_data_mapped_by_location(bar_case, tmp_path):
    """Their mesh: a coarse structured grid of the bar in metres and pascals (another numbering)."""
    _, case, res, _ = bar_case
    from dataclasses import replace

    from elastofe.case.load import _Reader
    from elastofe.case.reference import parse_reference

    x, y, z = np.meshgrid(np.linspace(0, 100, 6), np.linspace(-5, 5, 3), np.linspace(-5, 5, 3), indexing="ij")
    pts = np.column_stack([x.ravel(), y.ravel(), z.ravel()])
    ex = exact(pts)
    U = np.column_stack([ex["ux"], ex["uy"], ex["uz"]]) / 1000.0          # m
    S = np.zeros((len(pts), 6))
    S[:, 0] = SIG * 1e6                                                    # Pa
    cells = np.array([[0, 1, 3, 9]])  # cells are not used by the mapping; one keeps meshio happy
    meshio.write(str(tmp_path / "their.vtu"), meshio.Mesh(pts / 1000.0, [("tetra", cells)],
                 point_data={"U": U, "S": S, "vm": np.full(len(pts), SIG * 1e6)}))
    ref = parse_reference({"label": "their mesh", "field": [{
        "file": "their.vtu", "arrays": {"displacement": "U", "stress": "S", "von_mises": "vm"},
        "units": {"length": "m", "stress": "Pa"}, "tolerance": {"displacement": "0.1%", "stress": "0.1%",
                                                                "von_mises": "0.1 MPa"}}]},
        _Reader(case.units), tmp_path)
    doc = compare(replace(res, case=replace(case, reference=ref)))
    st = doc["sets"][0]
    assert st["kind"] == "field" and st["points"] == len(pts) and doc["points_outside"] == 0
    assert doc["verdict"] == "agree"
    for q in ("ux", "uy", "uz", "u", "sxx", "von_mises"):
        assert st["quantities"][q]["within"] == len(pts), q
    assert st["quantities"]["ux"]["max_abs_difference"] < 1e-12
    assert st["quantities"]["von_mises"]["allowed_difference"] == pytest.approx(0.1)
    with pytest.raises(CaseError, match="no such point-data array"):
        bad = parse_reference({"field": [{"file": "their.vtu", "arrays": {"von_mises": "SEQV"},
                                          "tolerance": "1%"}]}, _Reader(case.units), tmp_path)
        compare(replace(res, case=replace(case, reference=bad)))


def test_written_files_and_plots(bar_case, tmp_path):
    d, case, res, inside = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    axis = np.column_stack([np.linspace(0, 100, 9), np.zeros(9), np.zeros(9)])
    f = points_csv(tmp_path / "axis.csv", np.vstack([axis, inside[:4]]))
    rs = RefSet("points", f, {"*": Tolerance(0.01)}, key="reference.points[1]")
    r2 = replace(res, case=replace(case, reference=replace(case.reference, sets=(rs,))))
    doc = write_comparison(r2, compare(r2), tmp_path / "out")
    assert doc["sets"][0]["lines"]["axis"]["s"] == pytest.approx(np.linspace(0, 100, 9).tolist())
    assert "comparison-line-axis.png" in doc["plots"]
    assert any(p.startswith("comparison-scatter-") for p in doc["plots"]) and "comparison-scalars.png" in doc["plots"]
    for p in doc["plots"]:
        with Image.open(tmp_path / "out" / p) as im:
            im.load()
            assert im.size[0] > 300 and im.size[1] > 200
    rows = (tmp_path / "out" / "comparison.csv").read_text().splitlines()
    # one row per scalar plus one per point and quantity (13 points x 4 quantities)
    assert len(rows) == 1 + len(doc["scalars"]) + 13 * 4
    back = json.loads((tmp_path / "out" / "comparison.json").read_text())
    assert back["verdict"] == "agree" and back["compared"] == len(doc["scalars"]) + 13 * 4
    assert "rows" not in back["sets"][0] and back["sets"][0]["rows_in"] == "comparison.csv"
    assert back["sets"][0]["snapped_count"] == 0


@pytest.mark.parametrize("extra, key, words", [
    ('[reference]\n[[reference.scalar]]\nquantity = "max_von_mises"\nvalue = 10\ntolerance = 0.05',
     "reference.scalar[1].tolerance", "plain number"),
    ('[reference]\n[[reference.scalar]]\nquantity = "max_stress"\nvalue = 10\ntolerance = "5%"',
     "reference.scalar[1].quantity", "must be one of"),
    ('[reference]\n[[reference.scalar]]\nquantity = "ux"\npoint = "nowhere"\nvalue = 1\ntolerance = "5%"',
     "reference.scalar[1].point", "no [[point]]"),
    ('[reference]\n[[reference.scalar]]\nquantity = "reaction_x"\nsupport = "tip"\nvalue = 1\ntolerance = "5%"',
     "reference.scalar[1].support", "no [[support]]"),
    ('[reference]\n[[reference.points]]\nfile = "missing.csv"\ntolerance = "5%"',
     "reference.points[1].file", "file not found"),
    ('[reference]\n[[reference.points]]\nfile = "ref.csv"', "reference.points[1].tolerance", "required"),
    ('[reference]\ntolerance = "5%"\nspeling = 1', "reference.speling", "unknown key"),
])
def test_bad_reference_sections(parts, tmp_path, extra, key, words):
    (tmp_path / "ref.csv").write_text("x [mm],y [mm],z [mm],ux [mm]\n1,0,0,0\n")
    path = write_case(tmp_path / "c.toml", CASE.format(bar=parts["bar"], extra=extra))
    with pytest.raises(CaseError) as err:
        load_case(path)
    assert err.value.key == key and words in str(err.value)


def test_points_outside_do_not_widen_the_tolerance(bar_case, tmp_path):
    """An outside point's large value must not set the scale of a percentage: before this was fixed
    a 1000 MPa point 35 mm off the part made 5 % of it (50 MPa) the allowed difference, and a
    reference 20 % away from the exact 10 MPa (Hooke's law) was judged to agree."""
    d, case, res, inside = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    p = np.vstack([inside[:5], [[50.0, 0.0, 40.0]]])
    f = tmp_path / "far.csv"
    rows = ["x [mm],y [mm],z [mm],von_mises [MPa]"]
    rows += [f"{x:.17g},{y:.17g},{z:.17g},12.0" for x, y, z in p[:5]]  # exact 10 MPa: 2 MPa off
    rows.append("50.0,0.0,40.0,1000.0")  # 35 mm outside the part: not compared
    f.write_text("\n".join(rows) + "\n")
    rs = RefSet("points", f, {"*": Tolerance(0.05)}, snap=0.5, key="reference.points[1]")
    doc = compare(replace(res, case=replace(case, reference=replace(case.reference, scalars=(), sets=(rs,)))))
    e = doc["sets"][0]["quantities"]["von_mises"]
    assert e["compared"] == 5 and e["outside"] == 1
    assert e["reference_scale"] == pytest.approx(12.0, rel=1e-12)
    assert e["allowed_difference"] == pytest.approx(0.6, rel=1e-12)
    assert e["max_abs_difference"] == pytest.approx(2.0, rel=1e-9)
    assert e["verdict"] == "disagree" and doc["verdict"] == "disagree"


def test_row_with_more_values_than_the_header_is_refused(bar_case, tmp_path):
    _, case, res, _ = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    f = tmp_path / "ragged.csv"
    # A decimal comma splits 10,5 into two values: which column each belongs to is unknown.
    f.write_text("x [mm],y [mm],z [mm],von_mises [MPa]\n50,0,0,10\n60,0,0,10,5\n")
    rs = RefSet("points", f, {"*": Tolerance(0.05)}, key="reference.points[1]")
    with pytest.raises(CaseError, match="row 3 has 5 values but the header names 4 columns") as err:
        compare(replace(res, case=replace(case, reference=replace(case.reference, scalars=(), sets=(rs,)))))
    assert err.value.key == "reference.points[1].file"


@pytest.mark.parametrize("header, words", [
    ("x [mm],y [mm],z,ux [mm]", "unit in brackets"),
    ("x [mm],y [mm],z [mm],stress_xx [MPa]", "unknown quantity"),
    ("x [mm],y [mm],z [mm],ux [MPa]", "is not a length unit"),
    ("x [mm],y [mm],ux [mm]", "needs columns x, y and z"),
])
def test_bad_csv_headers(bar_case, tmp_path, header, words):
    _, case, res, _ = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    f = tmp_path / "bad.csv"
    f.write_text(header + "\n" + ",".join(["1"] * len(header.split(","))) + "\n")
    rs = RefSet("points", f, {"*": Tolerance(0.01)}, key="reference.points[1]")
    with pytest.raises(CaseError, match=words) as err:
        compare(replace(res, case=replace(case, reference=replace(case.reference, scalars=(), sets=(rs,)))))
    assert err.value.key.startswith("reference.points[1]")


def test_cli_compare(bar_case, parts, tmp_path, capsys):
    d, *_ = bar_case
    out = tmp_path / "out"
    assert main(["compare", str(d / "bar.toml"), "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "comparison with the reference (exact solution): AGREE" in text
    doc = json.loads((out / "summary.json").read_text())
    assert doc["comparison"]["verdict"] == "agree" and doc["comparison"]["file"] == "comparison.json"
    assert (out / "comparison.csv").is_file()
    plain = write_case(tmp_path / "plain.toml", CASE.format(bar=parts["bar"], extra=""))
    assert main(["compare", str(plain), "--out", str(tmp_path / "o2")]) == 2
    assert "no [reference] section" in capsys.readouterr().err


def test_cli_disagreement_writes_results_and_exits_5(bar_case, tmp_path, capsys):
    """A comparison that disagrees still writes the results, and ends with exit code 5 (README)."""
    d, *_ = bar_case
    text = (d / "bar.toml").read_text().replace('value = "5 um"', 'value = "6 um"')   # 20 % off
    case = write_case(tmp_path / "off.toml", text.replace('"ref.csv"', f'"{d / "ref.csv"}"'))
    out = tmp_path / "out"
    assert main(["compare", str(case), "--out", str(out), "-q"]) == 5
    doc = json.loads((out / "summary.json").read_text())
    assert doc["comparison"]["verdict"] == "disagree"
    assert "comparison with the reference disagrees" in capsys.readouterr().err


def test_two_files_on_one_line_with_different_quantities(bar_case, tmp_path):
    """One file gives displacements along the line, another stresses (in other units): the line's
    plot shows each file's own quantities instead of failing on the one a file lacks."""
    d, case, res, inside = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    axis = np.column_stack([np.linspace(0, 100, 9), np.zeros(9), np.zeros(9)])
    ex = exact(axis)
    (tmp_path / "u.csv").write_text("x [mm],y [mm],z [mm],ux [um]\n" + "".join(
        f"{p[0]:.17g},{p[1]:.17g},{p[2]:.17g},{v * 1000:.17g}\n" for p, v in zip(axis, ex["ux"])))
    (tmp_path / "s.csv").write_text("x [m],y [m],z [m],sxx [kPa]\n" + "".join(
        f"{p[0] / 1000:.17g},{p[1] / 1000:.17g},{p[2] / 1000:.17g},{v * 1000:.17g}\n" for p, v in zip(axis, ex["sxx"])))
    sets = tuple(RefSet("points", tmp_path / n, {"*": Tolerance(0.01)}, key=f"reference.points[{i}]")
                 for i, n in enumerate(("u.csv", "s.csv"), 1))
    r2 = replace(res, case=replace(case, reference=replace(case.reference, scalars=(), sets=sets)))
    doc = write_comparison(r2, compare(r2), tmp_path / "out")
    assert "comparison-line-axis.png" in doc["plots"]
    assert set(doc["sets"][0]["lines"]["axis"]["reference"]) == {"ux"}
    assert set(doc["sets"][1]["lines"]["axis"]["reference"]) == {"sxx"}
    # exact field of the bar (Hooke's law): agreement to round-off after the um and kPa conversion
    assert doc["sets"][0]["quantities"]["ux"]["max_relative_difference"] < 1e-9
    assert doc["sets"][1]["quantities"]["sxx"]["max_relative_difference"] < 1e-9


def test_field_in_another_length_unit_is_named(bar_case, tmp_path):
    """Their mesh of the bar in metres, the case in mm: without units the points span 1/1000 of the
    part (0.1 m diagonal read as 0.1 mm) and the set says so; with units = { length = "m" } the
    spans agree and there is no warning. (The bar is 100 x 10 x 10 mm, diagonal sqrt(10200) mm.)"""
    _, case, res, _ = bar_case
    from dataclasses import replace

    from elastofe.case.load import _Reader
    from elastofe.case.reference import parse_reference

    x, y, z = np.meshgrid(np.linspace(0, 100, 6), np.linspace(-5, 5, 3), np.linspace(-5, 5, 3), indexing="ij")
    pts = np.column_stack([x.ravel(), y.ravel(), z.ravel()])
    meshio.write(str(tmp_path / "their.vtu"), meshio.Mesh(pts / 1000.0, [("tetra", np.array([[0, 1, 3, 9]]))],
                 point_data={"vm": np.full(len(pts), SIG * 1e6)}))
    for units, warned in (({}, True), ({"units": {"length": "m", "stress": "Pa"}}, False)):
        ref = parse_reference({"field": [dict({"file": "their.vtu", "arrays": {"von_mises": "vm"},
                                               "tolerance": "1%"}, **units)]}, _Reader(case.units), tmp_path)
        st = compare(replace(res, case=replace(case, reference=ref)))["sets"][0]
        assert bool(st["warnings"]) is warned
        if warned:
            assert "another unit" in st["warnings"][0]
            assert f"{np.sqrt(10200.0) / 1000:.4g} mm" in st["warnings"][0]


def test_line_column_naming_no_line_is_refused(bar_case, tmp_path):
    _, case, res, _ = bar_case
    from dataclasses import replace

    from elastofe.case.reference import RefSet, Tolerance

    f = tmp_path / "lines.csv"
    f.write_text("x [mm],y [mm],z [mm],sxx [MPa],line\n10,0,0,10,axis\n20,0,0,10,axsi\n30,1,1,10,\n")
    rs = RefSet("points", f, {"*": Tolerance(0.05)}, key="reference.points[1]")
    with pytest.raises(CaseError, match="row 3, column 'line': no \\[\\[line\\]\\] of the case has that name "
                                        "\\(lines: 'axis'\\)") as err:
        compare(replace(res, case=replace(case, reference=replace(case.reference, scalars=(), sets=(rs,)))))
    assert err.value.key == "reference.points[1].file" and err.value.value == "axsi"


def test_cli_comparison_of_nothing_exits_5(parts, tmp_path, capsys):
    """Every reference point 35 mm and more off the part (as from an export in another unit): the
    verdict is 'no data', and the exit code is not the 0 of agreement."""
    (tmp_path / "far.csv").write_text("x [mm],y [mm],z [mm],sxx [MPa]\n50,0,40,10\n50,0,-60,10\n")
    case = write_case(tmp_path / "far.toml", CASE.format(bar=parts["bar"], extra="""
        [reference]
        tolerance = "1%"
        [[reference.points]]
        file = "far.csv"
        """))
    out = tmp_path / "out"
    assert main(["compare", str(case), "--out", str(out), "-q"]) == 5
    doc = json.loads((out / "summary.json").read_text())
    assert doc["comparison"]["verdict"] == "no data"
    assert "compared nothing: every reference value lies outside the part" in capsys.readouterr().err


def test_field_nodes_near_but_off_a_line_are_not_drawn_on_it(bar_case, tmp_path):
    """Nodes of another mesh lie on a [[line]] only to round-off: a node 0.05 mm (5e-4 of the part's
    size) off the bar's axis is not drawn on it, though a CSV point typed that close would be."""
    _, case, res, _ = bar_case
    from dataclasses import replace

    from elastofe.case.load import _Reader
    from elastofe.case.reference import parse_reference

    xs = np.linspace(0, 100, 6)
    on = np.column_stack([xs, np.zeros(6), np.zeros(6)])
    off = np.column_stack([xs[1:-1] + 10, np.full(4, 0.05), np.zeros(4)])
    pts = np.vstack([on, off])
    meshio.write(str(tmp_path / "their.vtu"), meshio.Mesh(pts, [("tetra", np.array([[0, 1, 6, 7]]))],
                 point_data={"vm": np.full(len(pts), SIG)}))
    ref = parse_reference({"field": [{"file": "their.vtu", "arrays": {"von_mises": "vm"}, "tolerance": "1%"}]},
                          _Reader(case.units), tmp_path)
    st = compare(replace(res, case=replace(case, reference=ref)))["sets"][0]
    assert st["lines"]["axis"]["index"] == list(range(6))
    csv = points_csv(tmp_path / "near.csv", pts)
    ref = parse_reference({"points": [{"file": csv.name, "tolerance": "1%"}]}, _Reader(case.units), tmp_path)
    st = compare(replace(res, case=replace(case, reference=ref)))["sets"][0]
    assert sorted(st["lines"]["axis"]["index"]) == list(range(10))
