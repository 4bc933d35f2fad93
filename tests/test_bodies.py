"""Parts of several bodies and materials, and point supports.

Verification against sources outside the project:
- bars of two materials in series and in parallel: the spring formulas (common practice;
  /work/shared/reference/benchmarks.md 5.3);
- a bimetal strip under a uniform temperature change: Timoshenko's curvature (S. Timoshenko,
  "Analysis of bi-metal thermostats", J. Opt. Soc. Am. 11 (1925) 233-255);
- a free part held 3-2-1 by point supports: statics (common practice);
- a steel bush in an aluminium ring under internal pressure: Lamé's compound cylinder
  (Timoshenko & Goodier, Theory of Elasticity, thick-walled cylinders).
"""
from __future__ import annotations

import json

import numpy as np
import pytest

from elastofe.bodies import assign_materials, body_table
from elastofe.case import load_case, parse_case
from elastofe.errors import CaseError
from elastofe.fem.assembly import assemble_stiffness, assemble_stiffness_coo, body_force, cell_volumes, thermal_load
from elastofe.handcalc import bimetal_curvature, compound_cylinder, thick_cylinder
from elastofe.mesh import body_nodes, from_arrays
from elastofe.verify.meshes import structured_block
from tests.conftest import write_case, write_step

STEEL = {"E": 210000.0, "nu": 0.3}
ALU = {"E": 70000.0, "nu": 0.33}


def _curved_block(order):
    p, c = structured_block(4, 3, 2, order)
    if order == 2:  # mid-side nodes off their edges: curved cells take the quadrature path
        p = p + 0.02 * np.sin(3.0 * p[:, [1, 2, 0]])
    return p, c


# ----------------------------------------------------------------------------- kernels
@pytest.mark.parametrize("order", [1, 2])
def test_per_cell_lame_equals_one_assembly_per_material(order):
    """K is linear in the element matrices: per-cell Lamé parameters must give the sum of the
    plain (reference, COO) assemblies of each material's cells (common practice)."""
    p, c = _curved_block(order)
    grp = np.random.default_rng(1).integers(0, 3, c.shape[0])
    lam, mu = np.array([1.0e5, 5.2e4, 1.3e3]), np.array([8.0e4, 2.6e4, 9.0e2])
    K = assemble_stiffness(p, c, lam[grp], mu[grp], block=7)
    K0 = sum(assemble_stiffness_coo(p, c[grp == g], lam[g], mu[g]) for g in range(3))
    assert abs(K - K0).max() <= 1e-12 * abs(K0).max()
    # One value per cell that happens to be one material: the scalar path to round-off.
    Ks = assemble_stiffness(p, c, np.full(c.shape[0], lam[0]), mu[0])
    assert abs(Ks - assemble_stiffness(p, c, lam[0], mu[0])).max() <= 1e-12 * abs(Ks).max()


def test_per_cell_lame_shape_is_checked():
    p, c = _curved_block(1)
    with pytest.raises(ValueError, match="one value per cell"):
        assemble_stiffness(p, c, np.ones(3), 1.0)


@pytest.mark.parametrize("order", [1, 2])
def test_per_cell_thermal_load_and_body_force(order):
    """Thermal load and body force with per-cell coefficients equal the sums over each material's
    cells (linearity, common practice)."""
    p, c = _curved_block(order)
    grp = np.random.default_rng(2).integers(0, 2, c.shape[0])
    T = 10.0 + p[:, 0] * 3.0
    coef = np.array([2.5, 0.7])
    f = thermal_load(p, c, T, coef[grp])
    f0 = sum(thermal_load(p, c[grp == g], T, coef[g]) for g in range(2))
    assert np.abs(f - f0).max() <= 1e-12 * np.abs(f0).max()
    b = np.array([[0.0, 0.0, -2.0], [1.0, 0.0, -0.5]])
    fb = body_force(p, c, b[grp])
    fb0 = sum(body_force(p, c[grp == g], b[g]) for g in range(2))
    assert np.abs(fb - fb0).max() <= 1e-12 * np.abs(fb0).max()
    # The resultant of a body force is its integral over the volume: sum_g b_g V_g (exact).
    V = cell_volumes(p, c)
    expected = sum(b[g] * V[grp == g].sum() for g in range(2))
    assert np.allclose(fb.reshape(-1, 3).sum(axis=0), expected, rtol=1e-12)


@pytest.mark.parametrize("formulation", ["displacement", "mixed"])
def test_both_formulations_take_per_cell_materials(formulation):
    """The mixed element's entry points (fem.mixed) with per-cell Lamé parameters and thermal
    coefficients equal one call per material's cells (linearity, common practice)."""
    from elastofe.fem.mixed import assemble_stiffness_for, element_nodal_stress_for

    p, c = _curved_block(2)
    grp = np.random.default_rng(4).integers(0, 2, c.shape[0])
    lam, mu, coef = np.array([1.2e5, 5.1e4]), np.array([8.1e4, 2.6e4]), np.array([2.5, 0.7])
    K = assemble_stiffness_for(p, c, lam[grp], mu[grp], formulation)
    K0 = sum(assemble_stiffness_for(p, c[grp == g], lam[g], mu[g], formulation) for g in range(2))
    assert abs(K - K0).max() <= 1e-12 * abs(K0).max()
    u = np.random.default_rng(5).normal(size=(p.shape[0], 3)) * 1e-3
    T = 10.0 + p[:, 0]
    s = element_nodal_stress_for(p, c, u, lam[grp], mu[grp], formulation, delta_t=T, coefficient=coef[grp])
    for g in range(2):
        sg = element_nodal_stress_for(p, c[grp == g], u, lam[g], mu[g], formulation, delta_t=T, coefficient=coef[g])
        assert np.allclose(s[grp == g], sg, rtol=1e-12, atol=1e-12 * np.abs(sg).max())


def test_nodes_split_at_body_interfaces():
    """Two blocks sharing a face: the shared nodes are split once per body, the others not."""
    p, c = structured_block(2, 1, 1, 1)  # x from 0 to 1, two cubes
    x = p[c[:, :4]].mean(axis=1)[:, 0]
    body = np.where(x < 0.5, 1, 2)
    bn = body_nodes(c, body, p.shape[0])
    shared = np.intersect1d(np.unique(c[body == 1]), np.unique(c[body == 2]))
    assert bn.count == p.shape[0] + shared.size and not bn.identity
    assert np.array_equal(bn.node[bn.cells], c)  # the split cells stand for the same nodes
    assert np.all(bn.body[bn.cells] == body[:, None])  # and each cell's split nodes are its own body's
    score = np.arange(bn.count, dtype=float)
    vals = np.column_stack([score, -score])
    out = bn.to_nodes(vals, score)
    assert out.shape == (p.shape[0], 2)
    last = {int(n): i for i, n in enumerate(bn.node)}  # the highest score of each node: its last split node
    assert all(out[n, 0] == i for n, i in last.items())
    one = body_nodes(c, np.ones(c.shape[0], dtype=np.int64), p.shape[0])
    assert one.identity and one.cells is c and one.count == p.shape[0]


# ----------------------------------------------------------------------------- hand formulas
def test_compound_cylinder_of_one_material_is_one_cylinder():
    """Two cylinders of one material bonded at r = c are one thick cylinder (Lamé; Timoshenko &
    Goodier, thick-walled cylinders): same fields, interface pressure -sigma_r(c)."""
    one = thick_cylinder([10.0, 15.0, 25.0], 10.0, 25.0, 100.0, 5.0, E=200000.0, nu=0.3)
    two = compound_cylinder(10.0, 15.0, 25.0, 100.0, 5.0, E_inner=200000.0, nu_inner=0.3,
                            E_outer=200000.0, nu_outer=0.3)
    assert two.interface_pressure == pytest.approx(-one.sigma_r[1], rel=1e-12)
    assert np.allclose(np.r_[two.inner.sigma_theta, two.outer.sigma_theta[1]], one.sigma_theta, rtol=1e-12)
    assert np.allclose(np.r_[two.inner.u_r, two.outer.u_r[1]], one.u_r, rtol=1e-12)


def test_compound_cylinder_is_continuous_at_the_interface():
    """Steel in aluminium: radial stress and displacement continuous at r = c, hoop stress jumps
    (its definition); the stiffer inner cylinder carries the larger hoop stress there."""
    r = compound_cylinder(10.0, 15.0, 25.0, 100.0, E_inner=STEEL["E"], nu_inner=STEEL["nu"],
                          E_outer=ALU["E"], nu_outer=ALU["nu"])
    assert r.inner.u_r[1] == pytest.approx(r.outer.u_r[0], rel=1e-12)
    assert r.inner.sigma_r[1] == pytest.approx(-r.interface_pressure, rel=1e-12)
    assert r.outer.sigma_r[0] == pytest.approx(-r.interface_pressure, rel=1e-12)
    assert r.inner.sigma_r[0] == pytest.approx(-100.0, rel=1e-12)
    assert r.inner.sigma_theta[1] > 1.5 * r.outer.sigma_theta[0]


def test_bimetal_formula_for_equal_layers():
    """Equal thicknesses and moduli: kappa = 3 (alpha2 - alpha1) dT / (2 h) (Timoshenko 1925, the
    formula with m = n = 1)."""
    k = bimetal_curvature(1.5, 1.5, 2e5, 2e5, 12e-6, 19e-6, 100.0)
    assert k == pytest.approx(3 * 7e-6 * 100.0 / (2 * 3.0), rel=1e-12)
    assert bimetal_curvature(1.5, 1.5, 2e5, 2e5, 19e-6, 12e-6, 100.0) == pytest.approx(-k, rel=1e-12)


# ----------------------------------------------------------------------------- case files
def _doc(**over):
    doc = {"geometry": {"file": "part.step"}, "material": dict(E=200000.0, nu=0.3),
           "support": [{"region": "root"}], "regions": {"root": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}}}}
    doc.update(over)
    return doc


def test_material_entries_are_read():
    case = parse_case(_doc(material=[dict(name="steel", bodies=[1], density="7850 kg/m^3", **STEEL),
                                     dict(name="alu", at=[[5, 5, 5], [50, 0, 0]], yield_strength="120 MPa", **ALU),
                                     dict(name="pad", groups="pad", E="5 MPa", nu=0.45)]))
    assert [m.name for m in case.materials] == ["steel", "alu", "pad"]
    assert case.material is case.materials[0] and case.material.bodies == (1,)
    assert case.materials[1].at == ((5.0, 5.0, 5.0), (50.0, 0.0, 0.0)) and case.materials[1].yield_strength == 120.0
    assert case.materials[2].groups == ("pad",) and case.materials[2].key == "material[3]"
    one = parse_case(_doc())
    assert one.materials == (one.material,) and not one.material.selects


@pytest.mark.parametrize("material, key, words", [
    ([dict(bodies=[1], **STEEL), dict(name="b", bodies=[2], **ALU)], "material[1].name", "is required"),
    ([dict(name="a", bodies=[1], **STEEL), dict(name="a", bodies=[2], **ALU)], "material[2].name", "duplicates"),
    ([dict(name="a", **STEEL), dict(name="b", bodies=[2], **ALU)], "material[1].bodies", "is required"),
    ([dict(name="a", bodies=[1], at=[0, 0, 0], **STEEL), dict(name="b", bodies=[2], **ALU)], "material[1]",
     "not several"),
    ([dict(name="a", bodies=[1, 2], **STEEL), dict(name="b", bodies=[2], **ALU)], "material[2].bodies",
     "also claims"),
    ([dict(name="a", bodies=[0], **STEEL), dict(name="b", bodies=[2], **ALU)], "material[1].bodies[0]", "at least 1"),
    ([dict(name="a", bodies=[1], colour="red", **STEEL)], "material[1].colour", "unknown key"),
])
def test_material_entry_errors(material, key, words):
    with pytest.raises(CaseError) as e:
        parse_case(_doc(material=material))
    assert e.value.key == key and words in str(e.value)


def test_temperature_needs_every_expansion():
    with pytest.raises(CaseError) as e:
        parse_case(_doc(material=[dict(name="a", bodies=[1], expansion=1e-5, **STEEL),
                                  dict(name="b", bodies=[2], **ALU)], load=[{"temperature": 10.0}]))
    assert e.value.key == "material[2].expansion"


@pytest.mark.parametrize("support, key, words", [
    ({"at": [0, 0, 0], "fix": "n"}, "support[2].fix", "global components"),
    ({"at": [0, 0, 0], "region": "root"}, "support[2].region", "give one of region or at"),
    ({"region": "root", "name": "x"}, "support[2].name", "only applies to a point support"),
    ({"at": [0, 0], "fix": "x"}, "support[2].at", "three numbers"),
    ({"at": [0, 0, 0], "name": "root"}, "support[2].name", "region of another support"),
])
def test_point_support_errors(support, key, words):
    with pytest.raises(CaseError) as e:
        parse_case(_doc(support=[{"region": "root"}, support]))
    assert e.value.key == key and words in str(e.value)


def test_point_supports_are_named():
    case = parse_case(_doc(support=[{"region": "root", "fix": "x"}, {"at": [0, 0, 0], "fix": "yz", "name": "A"},
                                    {"at": [0, 1, 0], "fix": "z", "tol": 0.1}]))
    a, b = case.supports[1], case.supports[2]
    assert (a.label, a.fix, a.at) == ("A", "yz", (0.0, 0.0, 0.0))
    assert (b.label, b.tol) == ("point support 3", 0.1)
    dup = _doc(support=[{"at": [0, 0, 0], "name": "A"}, {"at": [1, 0, 0], "name": "A"}])
    with pytest.raises(CaseError, match="duplicates support"):
        parse_case(dup)


# ----------------------------------------------------------------------------- runs on STEP files
def _run(tmp_path, name, text, write=False):
    from elastofe.pipeline import solve_case

    case = load_case(write_case(tmp_path / f"{name}.toml", text))
    res = solve_case(case)
    doc = None
    if write:
        from elastofe.output import write_results

        doc = write_results(res, tmp_path / f"{name}-out")
    return res, doc


def _holds_321(x0, x1, y1, z=0.0):
    """Point supports holding a box statically determinately: (x0, 0, z) in x, y, z; (x1, 0, z) in y,
    z; (x0, y1, z) in z (common practice: 3-2-1)."""
    return f"""
        [[support]]
        at = [{x0}, 0, {z}]
        fix = "xyz"
        name = "P1"
        [[support]]
        at = [{x1}, 0, {z}]
        fix = "yz"
        name = "P2"
        [[support]]
        at = [{x0}, {y1}, {z}]
        fix = "z"
        name = "P3"
        """


def _mat(name, m, sel, extra=""):
    return f"""
        [[material]]
        name = "{name}"
        E = {m['E']}
        nu = {m['nu']}
        {sel}
        {extra}
        """


@pytest.fixture(scope="module")
def bars(tmp_path_factory):
    d = tmp_path_factory.mktemp("bars")
    return {
        "series": write_step(d / "series.step", lambda occ: (occ.addBox(0, 0, 0, 40, 10, 10),
                                                             occ.addBox(40, 0, 0, 60, 10, 10))),
        "three": write_step(d / "three.step", lambda occ: (occ.addBox(0, 0, 0, 30, 10, 10),
                                                           occ.addBox(30, 0, 0, 30, 10, 10),
                                                           occ.addBox(60, 0, 0, 40, 10, 10))),
        "parallel": write_step(d / "parallel.step", lambda occ: (occ.addBox(0, 0, 0, 100, 10, 10),
                                                                 occ.addBox(0, 10, 0, 100, 10, 10))),
    }


def _series_case(step, mats, size=5.0, order=2):
    """Bars along x from 0 to 100 (10 x 10), x held on the root face, a 3-2-1 hold of the rest by
    point supports (the section contracts freely), 10 kN along x on the tip face."""
    return f"""
        [geometry]
        file = "{step}"
        {mats}
        [mesh]
        order = {order}
        size = {size}
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        fix = "x"
        [[support]]
        at = [0, 0, 0]
        fix = "yz"
        [[support]]
        at = [0, 10, 0]
        fix = "z"
        [[load]]
        region = "tip"
        force = [10000, 0, 0]
        [[point]]
        name = "on the interface"
        at = [40, 5, 5]
        [[line]]
        name = "axis"
        start = [0, 5, 5]
        end = [100, 5, 5]
        samples = 11
        """


def _tip_u(res):
    tip = np.isclose(res.mesh.points[:, 0], 100.0)
    return float(res.u[tip, 0].mean())


@pytest.mark.gmsh
def test_bars_in_series_match_the_spring_formula(bars, tmp_path):
    """u = F/A (L1/E1 + L2/E2) (springs in series, common practice). With nu = 0 the sections do
    not contract, the exact field (uniform stress in each bar) lies in the element space:
    round-off. Steel against aluminium contract by nu sigma / E = 1.4e-4 and 4.7e-4: the bonded
    interface makes them contract alike near it, a local 3D effect that stiffens the bar
    slightly (measured -0.17 % at this mesh); 0.5 % allowed."""
    F, A = 10000.0, 100.0
    same = _mat("steel", {"E": 210000.0, "nu": 0.0}, "bodies = [1]") + \
        _mat("soft", {"E": 70000.0, "nu": 0.0}, "at = [[70, 5, 5]]")
    res, _ = _run(tmp_path, "same-nu", _series_case(bars["series"], same, size=10.0, order=1))
    assert _tip_u(res) == pytest.approx(F / A * (40 / 210000 + 60 / 70000), rel=1e-9)
    mats = _mat("steel", STEEL, "bodies = [1]", "yield_strength = 300.0") + \
        _mat("alu", ALU, "at = [[70, 5, 5]]", "yield_strength = 100.0")
    res, doc = _run(tmp_path, "series", _series_case(bars["series"], mats), write=True)
    assert _tip_u(res) == pytest.approx(F / A * (40 / STEEL["E"] + 60 / ALU["E"]), rel=5e-3)
    # Stress 100 MPa in both bars away from the interface; the reactions balance the load.
    assert res.reactions["root"]["force"][0] == pytest.approx(-F, rel=1e-9)
    ln = res.lines["axis"]
    assert np.allclose(ln.stress[[1, 8], 0], 100.0, rtol=1e-3)
    assert ln.body.tolist() == [1] * 5 + [2] * 6 and ln.on_interface.tolist() == [False] * 4 + [True] + [False] * 6
    pt = doc["points"]["on the interface"]
    assert pt["on_interface"] and pt["body"] in (1, 2) and pt["material"] == ("steel", "alu")[pt["body"] - 1]
    assert [(b["id"], b["material"]) for b in doc["bodies"]] == [(1, "steel"), (2, "alu")]
    assert [b["volume"] for b in doc["bodies"]] == pytest.approx([4000.0, 6000.0], rel=1e-9)
    assert [(m["name"], m["bodies"]) for m in doc["materials"]] == [("steel", [1]), ("alu", [2])]
    # Yield per material: aluminium's 100 MPa is exceeded where steel's 300 MPa is not.
    g = doc["governing_peak"]
    assert g["material"] == "alu" and set(g["by_material"]) == {"steel", "alu"}
    assert g["by_material"]["steel"]["utilisation"] == pytest.approx(g["by_material"]["steel"]["value"] / 300.0)
    assert doc["checks"]["yield"]["status"] == "fail" and "'alu'" in doc["checks"]["yield"]["why"]
    # Without aluminium's yield strength the steel passes, but the part is only partly judged: no
    # pass for the whole part (the aluminium at 100 MPa could be beyond any strength it has).
    part = _mat("steel", STEEL, "bodies = [1]", "yield_strength = 300.0") + _mat("alu", ALU, "at = [[70, 5, 5]]")
    _, doc2 = _run(tmp_path, "series-partly", _series_case(bars["series"], part), write=True)
    y = doc2["checks"]["yield"]
    assert y["status"] == "warn" and y["why"].startswith("only partly judged: 'alu' has no yield_strength")
    assert y["details"]["not_judged"] == ["alu"]
    # The line CSV says which body each sample reports.
    head, *rows = (tmp_path / "series-out" / "line-axis.csv").read_text().splitlines()
    assert head.endswith(",von_mises [MPa],body,interface") and rows[4].endswith(",1,1") and rows[5].endswith(",2,0")


@pytest.mark.gmsh
def test_three_bodies_in_series(bars, tmp_path):
    """Three materials end to end: u = F/A sum L_i/E_i (common practice); nu = 0, so the exact
    field is in the element space (round-off)."""
    E = (210000.0, 70000.0, 110000.0)
    mats = "".join(_mat(n, {"E": e, "nu": 0.0}, f"bodies = [{i}]") for i, (n, e) in
                   enumerate(zip(("steel", "alu", "bronze"), E), 1))
    res, _ = _run(tmp_path, "three", _series_case(bars["three"], mats, size=10.0, order=1))
    assert _tip_u(res) == pytest.approx(100.0 * (30 / E[0] + 30 / E[1] + 40 / E[2]), rel=1e-9)


@pytest.mark.gmsh
def test_run_prints_bodies_and_sides(bars, tmp_path, capfd):
    """The command line's table names each body's material and the side a point reports."""
    mats = "".join(_mat(n, {"E": e, "nu": 0.0}, f"bodies = [{i}]") for i, (n, e) in
                   enumerate(zip(("steel", "alu", "bronze"), (210000.0, 70000.0, 110000.0)), 1))
    case = write_case(tmp_path / "cli.toml", _series_case(bars["three"], mats, size=10.0, order=1))
    rc, out = _cli(["run", str(case), "--out", str(tmp_path / "cli-out")], capfd)
    assert rc == 0, out.err
    assert "body 3" in out.out and "bronze, volume 4000 mm^3" in out.out
    assert "(body 2, alu)" in out.out  # the point at x = 40 lies inside body 2 (30..60)


def _parallel_case(step, mats, delta=0.05):
    return f"""
        [geometry]
        file = "{step}"
        {mats}
        [mesh]
        order = 2
        size = 5
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        fix = "x"
        [[support]]
        region = "tip"
        fix = "x"
        value = [{delta}, 0, 0]
        [[support]]
        at = [0, 0, 0]
        fix = "yz"
        [[support]]
        at = [0, 20, 0]
        fix = "z"
        [[point]]
        name = "bar 1"
        at = [50, 5, 5]
        [[point]]
        name = "bar 2"
        at = [50, 15, 5]
        """


@pytest.mark.gmsh
def test_bars_in_parallel_share_the_load_by_stiffness(bars, tmp_path):
    """Ends joined rigidly (both tips moved by the same delta): F_i / F = E_i A_i / sum E_j A_j
    (springs in parallel, common practice), each bar's force its axial stress at mid-length times
    its area (nodal reactions cannot tell the bars apart on the nodes they share). Equal Poisson's
    ratios: both contract by nu delta / L, the exact field is in the element space (round-off).
    Steel 0.3 against aluminium 0.33: the bond along the length makes the sections contract
    alike, measured -0.006 % on steel's share here; 0.2 % allowed."""
    share = STEEL["E"] / (STEEL["E"] + ALU["E"])
    same = _mat("steel", STEEL, "bodies = [1]") + _mat("soft", {"E": 70000.0, "nu": 0.3}, "bodies = [2]")
    res, _ = _run(tmp_path, "par-same", _parallel_case(bars["parallel"], same))
    F = res.reactions["tip"]["force"][0]  # the pull the tip support exerts
    assert F == pytest.approx(0.05 / 100 * 100 * (STEEL["E"] + ALU["E"]), rel=1e-9)
    assert res.points["bar 1"]["stress"][0] * 100 / F == pytest.approx(share, rel=1e-9)
    # Nearly incompressible (nu = 0.49: the mixed element runs) and still exact: the uniform strain
    # state is in its space too (its patch test).
    soft = _mat("stiff", {"E": 2100.0, "nu": 0.49}, "bodies = [1]") + \
        _mat("soft", {"E": 700.0, "nu": 0.49}, "bodies = [2]")
    res, doc = _run(tmp_path, "par-mixed", _parallel_case(bars["parallel"], soft), write=True)
    assert doc["mesh"]["formulation"] == "mixed"
    F = res.reactions["tip"]["force"][0]
    assert F == pytest.approx(0.05 / 100 * 100 * (2100.0 + 700.0), rel=1e-9)
    assert res.points["bar 1"]["stress"][0] * 100 / F == pytest.approx(share, rel=1e-9)
    mats = _mat("steel", STEEL, "bodies = [1]") + _mat("alu", ALU, "bodies = [2]")
    res, _ = _run(tmp_path, "par", _parallel_case(bars["parallel"], mats))
    F = res.reactions["tip"]["force"][0]
    f1, f2 = (res.points[f"bar {i}"]["stress"][0] * 100 for i in (1, 2))
    assert f1 / F == pytest.approx(share, rel=2e-3)
    assert f2 / F == pytest.approx(1 - share, rel=2e-3)


# ----------------------------------------------------------------------------- thermal, 3-2-1
@pytest.fixture(scope="module")
def strip(tmp_path_factory):
    """A bimetal strip 60 long (x), 3 wide (y), layers 1.5 thick: layer 1 z 0..1.5, layer 2 above."""
    d = tmp_path_factory.mktemp("strip")
    return write_step(d / "strip.step", lambda occ: (occ.addBox(0, 0, 0, 60, 3, 1.5),
                                                     occ.addBox(0, 0, 1.5, 60, 3, 1.5)))


@pytest.mark.gmsh
def test_bimetal_strip_curvature_and_free_reactions(strip, tmp_path):
    """Uniform temperature rise of a free bimetal strip held 3-2-1 by point supports.

    Curvature against Timoshenko's formula (J. Opt. Soc. Am. 11 (1925) 233-255), fitted as
    2 c2 of u_z = c0 + c1 x + c2 x^2 along the strip's middle line between x = 15 and 45 (away from
    the free ends, where the layers' shear stresses concentrate). The strip is as wide as it is
    thick, so beam theory applies (a wide one bends as a plate); measured -0.004 % here, 1 %
    allowed (for other meshes of this size). The thermal load is self-balanced: the three supports
    carry nothing (round-off, against the thermal forces of one layer, E1 alpha1 dT A1)."""
    layer1 = dict(E=200000.0, nu=0.3)
    layer2 = dict(E=100000.0, nu=0.3)
    text = f"""
        [geometry]
        file = "{strip}"
        {_mat("invar-like", layer1, "at = [[30, 1.5, 0.75]]", "expansion = 2e-6")}
        {_mat("brass-like", layer2, "at = [[30, 1.5, 2.25]]", "expansion = 19e-6")}
        [mesh]
        order = 2
        size = 1.0
        {_holds_321(0, 60, 3)}
        [[load]]
        temperature = 100.0
        [[line]]
        name = "middle"
        start = [15, 1.5, 1.5]
        end = [45, 1.5, 1.5]
        samples = 31
        """
    res, doc = _run(tmp_path, "strip", text, write=True)
    ln = res.lines["middle"]
    c2 = np.polyfit(ln.xyz[:, 0], ln.u[:, 2], 2)[0]
    kappa = bimetal_curvature(1.5, 1.5, layer1["E"], layer2["E"], 2e-6, 19e-6, 100.0)
    # Layer 2 (on top) expands more: the strip arches up in the middle, u_z = -kappa x^2 / 2 + ...
    assert -2 * c2 == pytest.approx(kappa, rel=0.01)
    scale = layer1["E"] * 2e-6 * 100.0 * 3 * 1.5
    for name in ("P1", "P2", "P3"):
        assert np.abs(res.reactions[name]["force"]).max() < 1e-9 * scale
    # summary.json names each point support's node.
    sup = {s["name"]: s for s in doc["supports"]}
    assert sup["P2"]["node_at"] == pytest.approx([60.0, 0.0, 0.0]) and sup["P2"]["distance"] == 0.0


@pytest.fixture(scope="module")
def block(tmp_path_factory):
    """A 20 x 10 x 10 block of two bodies, x < 10 and x > 10."""
    d = tmp_path_factory.mktemp("block")
    return write_step(d / "block.step", lambda occ: (occ.addBox(0, 0, 0, 10, 10, 10), occ.addBox(10, 0, 0, 10, 10, 10)))


def _block_case(step, load):
    return f"""
        units = "mm-N"
        [geometry]
        file = "{step}"
        {_mat("steel", STEEL, "bodies = [1]", 'density = "7850 kg/m^3"')}
        {_mat("alu", ALU, "bodies = [2]", 'density = "2700 kg/m^3"')}
        [mesh]
        order = 1
        size = 5
        [regions]
        left = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        right = {{ plane = {{ point = [20, 0, 0], normal = [1, 0, 0] }} }}
        {_holds_321(0, 20, 10)}
        {load}
        """


@pytest.mark.gmsh
def test_held_321_self_balanced_load_leaves_no_reactions(block, tmp_path):
    """Equal pressures on opposite faces balance: a statically determinate 3-2-1 hold then carries
    nothing (statics, common practice): reactions at round-off against p A = 1000 N."""
    load = """
        [[load]]
        region = "left"
        pressure = 10.0
        [[load]]
        region = "right"
        pressure = 10.0
        """
    res, _ = _run(tmp_path, "balanced", _block_case(block, load))
    for name in ("P1", "P2", "P3"):
        assert np.abs(res.reactions[name]["force"]).max() < 1e-9 * 1000.0


@pytest.mark.gmsh
def test_held_321_under_gravity_carries_the_weight(block, tmp_path):
    """Gravity on a block of steel (7850 kg/m^3) and aluminium (2700 kg/m^3) halves: the reactions
    sum to the weight sum rho_i V_i g, and the vertical ones follow from moments about the support
    lines (statics, common practice): P2 carries W x_g / 20, P3 carries W y_g / 10."""
    res, doc = _run(tmp_path, "gravity", _block_case(block, "[[load]]\n        gravity = [0, 0, -1]"), write=True)
    g = 9806.65  # mm/s^2
    rho = np.array([7850.0, 2700.0]) * 1e-12  # t/mm^3 in mm-N
    W = float((rho * 1000.0).sum() * g)
    R = {n: res.reactions[n]["force"] for n in ("P1", "P2", "P3")}
    assert sum(r[2] for r in R.values()) == pytest.approx(W, rel=1e-9)
    assert all(abs(r[i]) < 1e-9 * W for r in R.values() for i in (0, 1))
    xg = float((rho * np.array([5.0, 15.0])).sum() / rho.sum())
    assert R["P2"][2] == pytest.approx(W * xg / 20.0, rel=1e-9)
    assert R["P3"][2] == pytest.approx(W * 5.0 / 10.0, rel=1e-9)
    assert [b["mass"] for b in doc["bodies"]] == pytest.approx(list(rho * 1000.0), rel=1e-9)


# ----------------------------------------------------------------------------- compound cylinder
@pytest.fixture(scope="module")
def bush(tmp_path_factory):
    """A quarter of a steel bush (r 10..15) bonded in an aluminium ring (r 15..25), 5 long in z."""
    d = tmp_path_factory.mktemp("bush")

    def build(occ):
        for r0, r1 in ((10, 15), (15, 25)):
            ring, _ = occ.cut([(3, occ.addCylinder(0, 0, 0, 0, 0, 5, r1))],
                              [(3, occ.addCylinder(0, 0, 0, 0, 0, 5, r0))])
            occ.intersect(ring, [(3, occ.addBox(0, 0, 0, 30, 30, 5))])
    return write_step(d / "bush.step", build)


@pytest.mark.gmsh
def test_bush_in_ring_against_lame_compound_cylinder(bush, tmp_path):
    """Steel bush in an aluminium ring, internal pressure 100 MPa, plane strain (u_z held on both
    ends), symmetry planes: Lamé's solution of each cylinder with continuous radial displacement
    at r = 15 (Timoshenko & Goodier, thick-walled cylinders; elastofe.handcalc.compound_cylinder).
    The hoop stress jumps at the interface (117.8 MPa in the steel, 34.5 MPa in the aluminium);
    averaged within each body the nodes there keep both sides: measured -0.04 % and -0.01 % of
    Lamé's at this mesh, 0.5 % allowed (averaging the two bodies together would be 35 % and 120 %
    off). Radial displacement of the bore: measured -0.005 %, 0.2 % allowed."""
    text = f"""
        [geometry]
        file = "{bush}"
        {_mat("steel", STEEL, "at = [[8.8, 8.8, 2.5]]", "yield_strength = 355.0")}
        {_mat("aluminium", ALU, "at = [[14, 14, 2.5]]", "yield_strength = 200.0")}
        [mesh]
        order = 2
        size = 1.5
        [regions]
        sym_x = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        sym_y = {{ plane = {{ point = [0, 0, 0], normal = [0, 1, 0] }} }}
        ends = {{ box = {{ min = [-1, -1, -1], max = [26, 26, 0] }} }}
        top = {{ plane = {{ point = [0, 0, 5], normal = [0, 0, 1] }} }}
        bore = {{ cylinder = {{ radius = 10.0 }} }}
        [[support]]
        region = "sym_x"
        fix = "x"
        [[support]]
        region = "sym_y"
        fix = "y"
        [[support]]
        region = "ends"
        fix = "z"
        [[support]]
        region = "top"
        fix = "z"
        [[load]]
        region = "bore"
        pressure = 100.0
        [[line]]
        name = "radial"
        start = [7.0710678118654755, 7.0710678118654755, 2.5]
        end = [17.67766952966369, 17.67766952966369, 2.5]
        samples = 31
        """
    res, doc = _run(tmp_path, "bush", text, write=True)
    lame = compound_cylinder(10.0, 15.0, 25.0, 100.0, E_inner=STEEL["E"], nu_inner=STEEL["nu"],
                             E_outer=ALU["E"], nu_outer=ALU["nu"])
    pts = res.mesh.points
    r = np.hypot(pts[:, 0], pts[:, 1])
    bore = np.isclose(r, 10.0, atol=1e-6)
    ur = (res.u[bore, 0] * pts[bore, 0] + res.u[bore, 1] * pts[bore, 1]) / 10.0
    assert ur.mean() == pytest.approx(lame.inner.u_r[0], rel=2e-3)
    # Hoop stress at the interface nodes, from each body's side (split nodes).
    bn = res.body_nodes
    q = bn.node
    on = np.isclose(r[q], 15.0, atol=1e-6) & (pts[q, 2] > 1.0) & (pts[q, 2] < 4.0)
    x, y = pts[q, 0] / r[q], pts[q, 1] / r[q]
    s = res.body_stress
    hoop = s[:, 0] * y ** 2 + s[:, 1] * x ** 2 - 2 * s[:, 3] * x * y
    steel = on & (bn.body == res.materials.bodies[0].id)
    alu = on & (bn.body == res.materials.bodies[1].id)
    assert steel.sum() > 5 and alu.sum() == steel.sum()
    assert hoop[steel].mean() == pytest.approx(lame.inner.sigma_theta[1], rel=5e-3)
    assert hoop[alu].mean() == pytest.approx(lame.outer.sigma_theta[0], rel=5e-3)
    mixed = 0.5 * (lame.inner.sigma_theta[1] + lame.outer.sigma_theta[0])
    assert abs(mixed / lame.outer.sigma_theta[0] - 1) > 0.2 and abs(mixed / lame.inner.sigma_theta[1] - 1) > 0.2
    # The radial line reports the bush up to the interface and the ring after it.
    ln = res.lines["radial"]
    rr = np.hypot(ln.xyz[:, 0], ln.xyz[:, 1])
    assert set(ln.body[rr < 14.9].tolist()) == {res.materials.bodies[0].id}
    assert set(ln.body[rr > 15.1].tolist()) == {res.materials.bodies[1].id}
    # result.vtu: broken at the interface, body and material per cell.
    import meshio

    m = meshio.read(tmp_path / "bush-out" / "result.vtu")
    assert m.points.shape[0] == bn.count > res.mesh.nodes
    assert sorted(np.unique(m.cell_data["material"][0])) == [1, 2]
    assert np.array_equal(m.cell_data["body"][0], res.mesh.cell_body)
    assert np.allclose(m.point_data["stress"], s)
    assert doc["governing_peak"]["by_material"]["steel"]["utilisation"] == pytest.approx(
        doc["governing_peak"]["by_material"]["steel"]["value"] / 355.0)


# ----------------------------------------------------------------------------- refusals, listings
def _cli(args, capfd):
    from elastofe.cli import main

    rc = main(args)
    return rc, capfd.readouterr()


def _two_material_case(tmp_path, step, mats, name="case"):
    return write_case(tmp_path / f"{name}.toml", f"""
        [geometry]
        file = "{step}"
        {mats}
        [mesh]
        order = 1
        size = 5
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        """)


@pytest.mark.gmsh
def test_overlapping_solids_are_refused_naming_both(tmp_path, capfd):
    step = write_step(tmp_path / "overlap.step", lambda occ: (occ.addBox(0, 0, 0, 10, 10, 10),
                                                            occ.addBox(30, 0, 0, 10, 10, 10),
                                                            occ.addBox(5, 0, 0, 10, 10, 10)))
    case = _two_material_case(tmp_path, step, _mat("steel", STEEL, ""))
    rc, out = _cli(["run", str(case), "-q", "--out", str(tmp_path / "o")], capfd)
    assert rc == 2 and "geometry.file" in out.err
    assert "solid 1 (bounding box [0, 0, 0] to [10, 10, 10])" in out.err
    assert "solid 3 (bounding box [5, 0, 0] to [15, 10, 10])" in out.err and "share a volume of 500" in out.err
    # A solid wholly inside another overlaps it too.
    inside = write_step(tmp_path / "inside.step", lambda occ: (occ.addBox(0, 0, 0, 10, 10, 10),
                                                             occ.addBox(2, 2, 2, 3, 3, 3)))
    rc, out = _cli(["surfaces", str(inside)], capfd)
    assert rc == 2 and "solid 1" in out.err and "solid 2" in out.err and "share a volume of 27" in out.err


@pytest.mark.gmsh
def test_body_without_material_or_with_two_is_refused(block, tmp_path, capfd):
    rc, out = _cli(["run", str(_two_material_case(tmp_path, block, _mat("steel", STEEL, "bodies = [1]")
                                                  + _mat("alu", ALU, "at = [[5, 5, 5]]"), "twice")),
                    "-q", "--out", str(tmp_path / "o1")], capfd)
    assert rc == 2 and "material[2].at[0]" in out.err and "already gives it 'steel'" in out.err
    single = _mat("steel", STEEL, "bodies = [1]")
    rc, out = _cli(["run", str(_two_material_case(tmp_path, block, single, "none")), "-q", "--out",
                    str(tmp_path / "o2")], capfd)
    assert rc == 2 and "error in the case: material" in out.err
    assert "1 of the part's 2 bodies has no material: body 2" in out.err
    assert "bounding box [10, 0, 0] to [20, 10, 10]" in out.err
    rc, out = _cli(["run", str(_two_material_case(tmp_path, block, _mat("steel", STEEL, "bodies = [1]")
                                                  + _mat("alu", ALU, "bodies = [7]"), "seven")),
                    "-q", "--out", str(tmp_path / "o3")], capfd)
    assert rc == 2 and "material[2].bodies[0]" in out.err and "its bodies are 1, 2" in out.err


@pytest.mark.gmsh
def test_bodies_from_mesh_file_physical_groups(tmp_path, capfd):
    """A .msh of two bodies with volume physical groups: materials by group; the series bars
    formula again (nu = 0: round-off, common practice)."""
    from elastofe.geometry import gmsh_session

    msh = tmp_path / "two.msh"
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        occ.addBox(0, 0, 0, 40, 10, 10)
        occ.addBox(40, 0, 0, 60, 10, 10)
        occ.fragment([(3, 1)], [(3, 2)])
        occ.synchronize()
        gmsh.model.addPhysicalGroup(3, [1], name="hard")
        gmsh.model.addPhysicalGroup(3, [2], name="soft")
        gmsh.option.setNumber("Mesh.SaveAll", 1)
        gmsh.option.setNumber("Mesh.MeshSizeMax", 10.0)
        gmsh.model.mesh.generate(3)
        gmsh.write(str(msh))
    rc, out = _cli(["surfaces", str(msh)], capfd)
    assert rc == 0 and "volume physical groups: hard [1], soft [2]" in out.out
    assert "2 bodies" in out.out and "1 piece " in out.out
    mats = _mat("hard", {"E": 210000.0, "nu": 0.0}, 'groups = ["hard"]') + \
        _mat("soft", {"E": 70000.0, "nu": 0.0}, 'groups = ["soft"]')
    res, _ = _run(tmp_path, "msh", _series_case(msh, mats, order=1))
    assert _tip_u(res) == pytest.approx(100.0 * (40 / 210000 + 60 / 70000), rel=1e-9)
    bad = _mat("hard", STEEL, 'groups = ["hard"]') + _mat("soft", ALU, 'groups = ["sfot"]')
    with pytest.raises(CaseError) as e:
        _run(tmp_path, "msh-bad", _series_case(msh, bad))
    assert e.value.key == "material[2].groups[0]" and "'hard', 'soft'" in str(e.value)


@pytest.mark.gmsh
def test_surfaces_lists_bodies(bars, capfd):
    rc, out = _cli(["surfaces", str(bars["three"]), "--size", "10"], capfd)
    assert rc == 0
    lines = out.out.splitlines()
    i = next(j for j, ln in enumerate(lines) if ln.startswith("3 bodies"))
    rows = [ln.split() for ln in lines[i + 2:i + 5]]
    assert [r[0] for r in rows] == ["1", "2", "3"]
    assert [float(r[1]) for r in rows] == pytest.approx([3000.0, 3000.0, 4000.0], rel=1e-9)
    assert "(15, 5, 5)" in lines[i + 2] and "(60, 0, 0) to (100, 10, 10)" in lines[i + 4]
    assert "1 piece " in out.out


def test_material_map_on_a_mesh_built_in_code():
    """Bodies from cell_body; materials by id and by point; per-cell Lamé parameters and masses."""
    p, c = structured_block(2, 1, 1, 1)
    x = p[c[:, :4]].mean(axis=1)[:, 0]
    mesh = from_arrays(p, c, cell_body=np.where(x < 0.5, 4, 9))
    case = parse_case(_doc(material=[dict(name="a", bodies=[9], density=2e-9, **STEEL),
                                     dict(name="b", at=[[0.25, 0.25, 0.25]], density=3e-9, **ALU)]))
    mm = assign_materials(case, mesh)
    assert [b.id for b in mm.bodies] == [4, 9] and mm.body_material.tolist() == [1, 0]
    lam, mu = mm.lame()
    assert np.allclose(mu, np.where(x < 0.5, ALU["E"] / 2.66, STEEL["E"] / 2.6))
    assert mm.masses() == pytest.approx([3e-9 * 0.5, 2e-9 * 0.5], rel=1e-12)
    _, bodies = body_table(mesh)
    assert bodies[1].centroid == pytest.approx((0.75, 0.5, 0.5)) and bodies[1].bbox_min == (0.5, 0.0, 0.0)


@pytest.mark.gmsh
@pytest.mark.parametrize("renderer", ["matplotlib", pytest.param("pyvista", marks=pytest.mark.slow)])
def test_report_shows_materials_and_bodies(bars, tmp_path, monkeypatch, renderer):
    """The report of a part of several materials: a table of materials and of bodies whose numbers
    are summary.json's, and a picture of the bodies in colour (both renderers)."""
    from elastofe.report.document import write_report
    from tests.test_report import Collect, resolve

    if renderer == "matplotlib":
        monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")
    mats = _mat("steel", STEEL, "bodies = [1, 3]", 'density = "7850 kg/m^3"') + \
        _mat("alu", ALU, "bodies = [2]", 'yield_strength = "150 MPa"')
    _, doc = _run(tmp_path, "report", _series_case(bars["three"], mats, size=10.0, order=1), write=True)
    out = tmp_path / "report-out"
    html = write_report(out).read_text(encoding="utf-8")
    c = Collect()
    c.feed(html)
    keyed = {k: float(v) for k, v, _ in c.keyed if v is not None}
    for key in ("materials.0.E", "materials.1.yield_strength", "bodies.0.volume", "bodies.2.mass", "bodies.1.volume"):
        assert keyed[key] == pytest.approx(resolve(doc, key), rel=1e-12)
    assert "bodies.1.mass" not in keyed  # aluminium has no density here
    pics = json.loads((out / "pictures.json").read_text())
    bodies = [p for p in pics["pictures"] if p.get("bodies")]
    assert len(bodies) == 1 and sorted(bodies[0]["bodies"]) == ["1", "2", "3"]
    assert (out / "picture-bodies.png").stat().st_size > 5000 and "picture-bodies.png" in html


@pytest.mark.gmsh
def test_two_material_rod_axial_frequency(tmp_path):
    """A rod of steel (x 0..100) and aluminium (x 100..200), 10 x 10, clamped at x = 0: each body's
    density enters the mass matrix. Its first axial frequency solves the 1D wave equation with
    displacement and force continuous at the joint, tan(w L1/c1) tan(w L2/c2) = sqrt(E1 rho1 / (E2
    rho2)), c = sqrt(E / rho) (common practice). The axial mode is the one with most effective mass
    along x (the tenth here, after the bending and torsion modes); lateral inertia of a 20:1 rod,
    the joint's 3D effect and the mesh: measured +0.21 % (8543 Hz against 8525 Hz), 0.5 %
    allowed."""
    from scipy.optimize import brentq

    step = write_step(tmp_path / "rod.step", lambda occ: (occ.addBox(0, -5, -5, 100, 10, 10),
                                                          occ.addBox(100, -5, -5, 100, 10, 10)))
    text = f"""
        [geometry]
        file = "{step}"
        {_mat("steel", STEEL, "bodies = [1]", 'density = "7850 kg/m^3"')}
        {_mat("alu", ALU, "bodies = [2]", 'density = "2700 kg/m^3"')}
        [mesh]
        size = 5.0
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        [modes]
        count = 12
        """
    _, doc = _run(tmp_path, "rod", text, write=True)
    rho1, rho2 = 7850e-12, 2700e-12  # t/mm^3
    c1, c2 = np.sqrt(STEEL["E"] / rho1), np.sqrt(ALU["E"] / rho2)  # mm/s
    z = np.sqrt(STEEL["E"] * rho1 / (ALU["E"] * rho2))

    def g(w):
        return np.tan(w * 100 / c1) * np.tan(w * 100 / c2) - z

    w_hi = 0.5 * np.pi * min(c1, c2) / 100 * (1 - 1e-9)  # below the first pole of either tangent
    f_axial = brentq(g, 1e-6 * w_hi, w_hi) / (2 * np.pi)
    axial = max(doc["modes"], key=lambda m: m["effective_mass"][0])
    assert axial["effective_mass"][0] > 0.5
    assert axial["frequency"] == pytest.approx(f_axial, rel=5e-3)


def _two_material_cantilever(step, beam_extra=""):
    """Steel (x 0..100) and aluminium (x 100..200) bodies, 10 x 10, clamped at x = 0: an axial load
    case "push" first, then a transverse one "bend" whose force the [[beam]] takes."""
    return f"""
        [geometry]
        file = "{step}"
        {_mat("steel", STEEL, "bodies = [1]")}
        {_mat("alu", ALU, "bodies = [2]")}
        [mesh]
        size = 5.0
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip = {{ plane = {{ point = [200, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        [[load]]
        region = "tip"
        force = [-1000, 0, 0]
        case = "push"
        [[load]]
        region = "tip"
        force = [0, -100, 0]
        case = "bend"
        [[point]]
        name = "in-alu"
        at = [150, 5, 0]
        [[line]]
        name = "top fibre"
        start = [0, 5, 0]
        end = [200, 5, 0]
        samples = 21
        [[line]]
        name = "through"
        start = [120, -5, 0]
        end = [120, 5, 0]
        samples = 11
        [[beam]]
        name = "rod"
        held_end = [0, 0, 0]
        load_point = [200, 0, 0]
        sections = [{{ at = 0, rectangle = {{ width = 10, depth = 10 }} }},
                    {{ at = 200, rectangle = {{ width = 10, depth = 10 }} }}]
        load = 2
        points = ["in-alu"]
        lines = ["top fibre"]
        {beam_extra}
        """


@pytest.mark.gmsh
def test_beam_estimate_takes_its_load_case_and_each_span_material(tmp_path, recwarn):
    """The [[beam]] takes the force of load 2 (case "bend"): it is compared with that load case, not
    the first ("push", whose transverse deflection is ~0), and its unit-load integral takes steel on
    [0, 100] and aluminium on [100, 200]: P / (3 I) [(a^3 - (a - 100)^3) / E1 + 100^3 / E2]
    (cantilever of two spans, unit-load method, common practice). The FE deflection includes shear
    and the joint: measured -0.44 % from the estimate with shear; 2 % allowed."""
    step = write_step(tmp_path / "rod.step", lambda occ: (occ.addBox(0, -5, -5, 100, 10, 10),
                                                          occ.addBox(100, -5, -5, 100, 10, 10)))
    res, doc = _run(tmp_path, "rod", _two_material_cantilever(step), write=True)
    e = doc["estimates"]["rod"]
    assert e["load_case"] == "bend"
    spans = e["materials_along_axis"]
    assert [s["material"] for s in spans] == ["steel", "alu"]
    assert spans[0]["to"] == pytest.approx(100.0, abs=1e-6)
    P, I, a = 100.0, 10.0 ** 4 / 12, 200.0
    bending = P / (3 * I) * ((a ** 3 - 100.0 ** 3) / STEEL["E"] + 100.0 ** 3 / ALU["E"])
    d = e["load_point_deflection"]
    assert -d["bending"] == pytest.approx(bending, rel=1e-9)
    assert d["fe_within_bounds"] is True   # between all-steel and all-aluminium
    assert d["fe"] == pytest.approx(d["estimate"], rel=0.02)
    pt = e["points"]["in-alu"]["deflection"]
    assert pt["fe"] == pytest.approx(float(res.load_cases["bend"].points["in-alu"]["displacement"][1]), rel=1e-12)
    assert pt["fe"] == pytest.approx(pt["estimate"], rel=0.02)
    # a line along one fibre has no through-depth fit (and raises no polyfit warning)
    ln = e["lines"]["top fibre"]
    assert ln["fe_slope"] is None and ln["fe_departure_from_linear"] is None
    assert not [w for w in recwarn if "Polyfit" in str(w.message)]


@pytest.mark.gmsh
def test_beam_estimate_names_a_composite_section(tmp_path):
    """Two layers bonded along the axis (steel below y = 0, aluminium above) make a composite
    section: the estimate says so and keeps one material rather than taking a span's."""
    step = write_step(tmp_path / "layers.step", lambda occ: (occ.addBox(0, -5, -5, 200, 5, 10),
                                                             occ.addBox(0, 0, -5, 200, 5, 10)))
    res, doc = _run(tmp_path, "layers", _two_material_cantilever(step), write=True)
    e = doc["estimates"]["rod"]
    assert e["materials_along_axis"] == []
    assert any("composite section" in n for n in e["notes"])
    # one section, one material taken: the bounds are the estimate itself, nothing to be inside
    assert e["load_point_deflection"]["fe_within_bounds"] is None
    # Bending stress of the composite section by the transformed section (common practice; Timoshenko
    # & Gere, Mechanics of Materials, composite beams): n = E2 / E1, neutral axis at y = -1.25,
    # I_t = 451.39 mm^4 (steel width 10, aluminium 10 n); M = 100 N x 80 mm at x = 120. Quadratic
    # elements carry the linear stress of each layer: measured within 0.1 %; 2 % allowed.
    n = ALU["E"] / STEEL["E"]
    yb = (50 * -2.5 + 50 * n * 2.5) / (50 + 50 * n)
    It = 10 * 5 ** 3 / 12 * (1 + n) + 50 * (-2.5 - yb) ** 2 + 50 * n * (2.5 - yb) ** 2
    M = 100.0 * 80.0
    ln = res.load_cases["bend"].lines["through"]
    assert ln.stress[0, 0] == pytest.approx(-M * (5 + yb) / It, rel=0.02)      # steel, y = -5
    assert ln.stress[-1, 0] == pytest.approx(n * M * (5 - yb) / It, rel=0.02)  # aluminium, y = +5
    # the line crosses the bond: its linearization says the split assumes one material
    lin = doc["linearized"]["through"]
    assert lin["materials"] == ["steel", "alu"] and "one material" in lin["note"]


@pytest.mark.gmsh
def test_bodies_meshed_apart_are_named_not_bonded(tmp_path, capfd):
    """Two bars side by side in a .msh file meshed body by body (no shared nodes on their common
    face, 100 x 10 = 1000 mm^2 from the construction), both held at the root: they solve as two
    separate bars, and the run says they are not bonded, with the area they lie against each other."""
    import gmsh

    gmsh.initialize()
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        a = gmsh.model.occ.addBox(0, 0, 0, 100, 10, 10)
        b = gmsh.model.occ.addBox(0, 10, 0, 100, 10, 10)
        gmsh.model.occ.synchronize()
        gmsh.model.addPhysicalGroup(3, [a], name="lower")
        gmsh.model.addPhysicalGroup(3, [b], name="upper")
        gmsh.option.setNumber("Mesh.MeshSizeMax", 5.0)
        gmsh.model.mesh.generate(3)
        gmsh.write(str(tmp_path / "apart.msh"))
    finally:
        gmsh.finalize()
    text = f"""
        [geometry]
        file = "{tmp_path / 'apart.msh'}"
        [material]
        E = 210000.0
        nu = 0.3
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }}, several = true }}
        top = {{ plane = {{ point = [0, 20, 0], normal = [0, 1, 0] }} }}
        [[support]]
        region = "root"
        [[load]]
        region = "top"
        force = [0, -100, 0]
        """
    res, _ = _run(tmp_path, "apart", text)
    hit = [w for w in res.warnings if "not joined" in w]
    assert len(hit) == 1 and "pieces 1 and 2" in hit[0]
    area = float(hit[0].split(" over ")[1].split(" ")[0])
    assert area == pytest.approx(1000.0, rel=1e-6)


def test_case_schema_takes_materials_and_point_supports():
    """The shipped JSON Schema accepts [[material]] entries and point supports as the loader does,
    and refuses what the loader refuses by key."""
    from tests.test_schema import validator

    doc = _doc(material=[dict(name="steel", bodies=[1], **STEEL), dict(name="alu", at=[[1, 2, 3]], **ALU),
                         dict(name="pad", groups=["pad"], E=5.0, nu=0.45)],
               support=[{"region": "root", "fix": "x"}, {"at": [0, 0, 0], "fix": "yz", "name": "A", "tol": 0.1}])
    parse_case(doc)
    assert validator().is_valid(doc)
    doc["material"][0]["colour"] = "red"
    assert not validator().is_valid(doc)
