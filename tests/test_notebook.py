"""The Python API for notebooks: RunResult views, read_results, probes, tables, pyvista grids, and
units in every output (line and comparison CSV headers, VTU array metadata)."""
from __future__ import annotations

import json
import textwrap

import meshio
import numpy as np
import pytest

import elastofe
from elastofe.output import read_units_field

pytestmark = pytest.mark.gmsh

CASE = """
    title = "bar for the notebook views"
    [geometry]
    file = "{bar}"
    [material]
    E = 200000.0
    nu = 0.3
    [mesh]
    order = 2
    size = 5.0
    [regions]
    root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
    tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
    [[support]]
    region = "root"
    fix = "xyz"
    [[load]]
    region = "tip"
    force = [0, -100, 0]
    [[line]]
    name = "mid"
    start = [50, -5, 0]
    end = [50, 5, 0]
    samples = 21
    """


@pytest.fixture(scope="module")
def bar_run(parts, tmp_path_factory):
    d = tmp_path_factory.mktemp("nb")
    case = d / "bar.toml"
    case.write_text(textwrap.dedent(CASE.format(bar=parts["bar"])))
    res = elastofe.run(case, out=d / "out")
    return d, case, res


def test_run_gives_a_result_with_views_and_a_short_repr(bar_run):
    _, _, res = bar_run
    assert isinstance(res, elastofe.RunResult) and isinstance(res, elastofe.Result)
    text = repr(res)
    # The issue measured 99,605 characters; one line now: title, DOF, peaks, verdicts.
    assert len(text) < 300 and "\n" not in text
    assert "bar for the notebook views" in text and f"{res.dofs:,} DOF" in text
    assert f"{float(res.von_mises.max()):.4g} MPa" in text
    counts = res.verdicts()
    assert sum(counts.values()) == len(res.checks) > 0
    for status, n in counts.items():
        assert f"{n} {status}" in text
    html = res._repr_html_()
    assert html.startswith("<div>") and "DOF" in html and len(html) < 20_000
    assert res.comparison is None and res.out is not None


def test_tables_have_unit_labelled_columns_and_the_line_values(bar_run):
    pytest.importorskip("pandas")
    _, _, res = bar_run
    df = res.tables["mid"]
    assert list(df.columns) == ["s [mm]", "x [mm]", "y [mm]", "z [mm]", "ux [mm]", "uy [mm]", "uz [mm]",
                                "sxx [MPa]", "syy [MPa]", "szz [MPa]", "sxy [MPa]", "syz [MPa]", "sxz [MPa]",
                                "von_mises [MPa]"]
    line = res.lines["mid"]
    assert df.shape == (21, 14)
    np.testing.assert_array_equal(df["von_mises [MPa]"].to_numpy(), line.von_mises)
    np.testing.assert_array_equal(df[["ux [mm]", "uy [mm]", "uz [mm]"]].to_numpy(), line.u)
    # s runs from 0 to the line's length, 10 mm (the bar's depth).
    assert df["s [mm]"].iloc[-1] == pytest.approx(10.0, rel=1e-12)


def test_probe_at_nodes_returns_the_nodal_values_and_nan_outside(bar_run):
    _, _, res = bar_run
    rng = np.random.default_rng(3)
    nodes = rng.choice(res.mesh.nodes, 25, replace=False)
    p = res.probe(res.mesh.points[nodes])
    # Shape functions are nodal (N_a(x_b) = delta_ab), so at a node the interpolated field is the
    # nodal value to rounding.
    np.testing.assert_allclose(p.u, res.u[nodes], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(p.stress, res.stress[nodes], rtol=1e-8, atol=1e-8)
    assert np.all(p.outside <= 1e-9)
    # (200, 0, 0) is 100 mm beyond the bar's end face x = 100 (geometry of the fixture).
    far = res.probe([200.0, 0.0, 0.0])
    assert np.isnan(far.von_mises[0]) and far.outside[0] == pytest.approx(100.0, rel=1e-6)
    with pytest.raises(elastofe.CaseError):
        res.probe([[1.0, 2.0]])


def test_probe_agrees_with_the_line_samples(bar_run):
    _, _, res = bar_run
    line = res.lines["mid"]
    p = res.probe(line.xyz)
    np.testing.assert_allclose(p.von_mises, line.von_mises, rtol=1e-12)
    np.testing.assert_allclose(p.u, line.u, rtol=1e-12)


def test_to_pyvista_matches_result_vtu(bar_run):
    pv = pytest.importorskip("pyvista")
    d, _, res = bar_run
    grid = res.to_pyvista()
    disk = pv.read(str(d / "out" / "result.vtu"))
    assert grid.n_points == res.mesh.nodes == disk.n_points and grid.n_cells == res.mesh.cells.shape[0]
    assert set(grid.point_data) == set(disk.point_data)
    for name in disk.point_data:
        np.testing.assert_array_equal(grid.point_data[name], disk.point_data[name])
    for g in (grid, disk):
        stress = g.GetPointData().GetArray("stress")
        assert [stress.GetComponentName(i) for i in range(6)] == ["xx", "yy", "zz", "xy", "yz", "xz"]
        units = read_units_field({"units_json": np.asarray(g.field_data["units_json"])})
        assert units["units"]["displacement"] == "mm" and units["units"]["von_mises"] == "MPa"


def test_result_vtu_stays_readable_by_meshio_with_its_units(bar_run):
    d, _, res = bar_run
    m = meshio.read(d / "out" / "result.vtu")
    np.testing.assert_array_equal(m.point_data["von_mises"], res.von_mises)
    doc = read_units_field(m.field_data)
    assert doc["unit_system"] == {"length": "mm", "force": "N", "stress": "MPa"}
    assert doc["units"]["stress_xy"] == "MPa" and doc["units"]["quality"] == "1"
    assert doc["components"]["principal"] == ["1", "2", "3"]


def test_read_results_gives_the_same_views_back(bar_run):
    pytest.importorskip("pandas")
    d, _, res = bar_run
    back = elastofe.read_results(d / "out")
    assert isinstance(back, elastofe.ResultsFolder) and back.changed == []
    assert back.summary == json.loads((d / "out" / "summary.json").read_text())
    assert back.units["stress"] == "MPa"
    line, again = res.lines["mid"], back.lines["mid"]
    np.testing.assert_allclose(again.von_mises, line.von_mises, rtol=1e-15)
    np.testing.assert_allclose(again.xyz, line.xyz, rtol=1e-15)
    pts = np.array([[50.0, 0.0, 0.0], [20.0, 1.0, -2.0], [99.0, 4.0, 4.0]])
    a, b = res.probe(pts), back.probe(pts)
    np.testing.assert_allclose(b.von_mises, a.von_mises, rtol=1e-12)
    np.testing.assert_allclose(b.u, a.u, rtol=1e-12)
    text = repr(back)
    assert len(text) < 400 and "bar for the notebook views" in text
    assert back._repr_html_().startswith("<div>")
    assert list(back.tables["mid"].columns) == list(res.tables["mid"].columns)
    with pytest.raises(elastofe.CaseError, match="summary.json"):
        elastofe.read_results(d)


def test_read_results_reports_files_changed_since_the_run(bar_run, tmp_path):
    import shutil

    d, _, _ = bar_run
    copy = tmp_path / "copy"
    shutil.copytree(d / "out", copy)
    f = copy / "line-mid.csv"
    f.write_text(f.read_text().replace("50.0", "51.0", 1))
    back = elastofe.read_results(copy)
    assert back.changed == ["line-mid.csv"] and "CHANGED" in repr(back)


def test_line_csv_headers_carry_units_and_feed_back_as_a_reference(bar_run, tmp_path):
    """A run's own line CSV, given as the [reference] of the same case, agrees exactly (the same
    mesh and solve give the same numbers), so the headers are read as the inputs' form."""
    d, case, _ = bar_run
    header = (d / "out" / "line-mid.csv").read_text().splitlines()[0]
    assert header.startswith("s [mm],x [mm],y [mm],z [mm],ux [mm]") and header.endswith("von_mises [MPa]")
    ref = tmp_path / "bar-ref.toml"
    ref.write_text(case.read_text() + textwrap.dedent(f"""
        [reference]
        label = "this case's own earlier run"
        tolerance = "0.0001%"
        [[reference.points]]
        file = "{d / 'out' / 'line-mid.csv'}"
        """))
    res = elastofe.run(ref, out=tmp_path / "out")
    comp = res.comparison
    assert comp["verdict"] == "agree"
    # 21 samples x 10 quantities (ux, uy, uz, six stresses, von Mises), none outside the part.
    assert comp["compared"] == comp["within_tolerance"] == 210
    for q, e in comp["sets"][0]["quantities"].items():
        assert e["max_abs_difference"] == pytest.approx(0.0, abs=1e-12), q
    rows = (tmp_path / "out" / "comparison.csv").read_text().splitlines()
    assert rows[0].split(",")[3:6] == ["x [mm]", "y [mm]", "z [mm]"]
    assert "distance_outside [mm]" in rows[0].split(",")
    back = elastofe.read_results(tmp_path / "out")
    assert back.comparison["verdict"] == "agree"


def test_wrong_names_say_what_is_valid(bar_run, tmp_path):
    d, _, res = bar_run
    back = elastofe.read_results(d / "out")
    for r in (res, back):
        with pytest.raises(elastofe.CaseError, match="no named load cases: leave load_case out"):
            r.probe([[50.0, 0.0, 0.0]], load_case="lift")
    with pytest.raises(elastofe.CaseError, match="does not exist"):
        elastofe.read_results(tmp_path / "nowhere")
    with pytest.raises(elastofe.CaseError, match="is not a folder"):
        elastofe.read_results(d / "bar.toml")
    pytest.importorskip("pandas")
    with pytest.raises(KeyError, match="the run's lines: 'mid'"):
        back.tables["mdi"]
