"""Temperature loads: thermal strain as equivalent nodal forces, subtracted in stress recovery
(stress = D (ε − α ΔT I))."""
import numpy as np
import pytest

import elastofe
from elastofe.case import parse_case
from tests.conftest import write_step

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

E, NU, ALPHA, DT = 200000.0, 0.3, 12e-6, 50.0


@pytest.fixture(scope="module")
def bar(tmp_path_factory):
    d = tmp_path_factory.mktemp("therm")
    return write_step(d / "bar.step", lambda occ: occ.addBox(0, 0, 0, 100, 10, 10))


def _doc(step, supports, temperature, size=5.0, order=2, extra_regions=None):
    regions = {"x0": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}},
               "y0": {"plane": {"point": [0, 0, 0], "normal": [0, 1, 0]}},
               "z0": {"plane": {"point": [0, 0, 0], "normal": [0, 0, 1]}}}
    regions.update(extra_regions or {})
    return {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU, "expansion": f"{ALPHA} 1/K"},
            "mesh": {"order": order, "size": size}, "regions": regions, "support": supports,
            "load": [{"temperature": temperature}],
            "point": [{"name": "end", "at": [100, 10, 10]}, {"name": "mid", "at": [50, 5, 5]}]}


SLIDING = [{"region": "x0", "fix": "n"}, {"region": "y0", "fix": "n"}, {"region": "z0", "fix": "n"}]


@pytest.mark.parametrize("order", [1, 2])
def test_free_bar_expands_alpha_dt_l_with_zero_stress(bar, order):
    # A body free to expand under a uniform temperature change strains α ΔT in every direction
    # and carries no stress (Timoshenko & Goodier, Theory of Elasticity, 3rd ed. 1970, thermal stress).
    res = elastofe.solve_case(parse_case(_doc(bar, SLIDING, DT, order=order)))
    u = res.points["end"]["displacement"]
    np.testing.assert_allclose(u, ALPHA * DT * np.array([100, 10, 10]), rtol=1e-9)
    assert np.abs(res.stress).max() < 1e-7 * E * ALPHA * DT
    assert np.abs(res.element_stress).max() < 1e-7 * E * ALPHA * DT
    # A thermal load is self-equilibrated: zero resultant, zero reactions.
    assert np.linalg.norm(res.loads[0].force) < 1e-9 * E * ALPHA * DT * 100
    assert all(np.linalg.norm(r["force"]) < 1e-6 for r in res.reactions.values())


def test_fully_held_block_has_stress_minus_e_alpha_dt_over_1_minus_2nu(tmp_path):
    # Every displacement held: ε = 0, so σ = −E α ΔT / (1 − 2ν) in every normal direction and no
    # shear (Timoshenko & Goodier, Theory of Elasticity, 3rd ed. 1970, thermal stress).
    step = write_step(tmp_path / "cube.step", lambda occ: occ.addBox(0, 0, 0, 10, 10, 10))
    doc = {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU, "expansion": ALPHA},
           "mesh": {"order": 2, "size": 5.0}, "regions": {"all": {"box": {"min": [-1, -1, -1], "max": [11, 11, 11]}}},
           "support": [{"region": "all", "fix": "xyz"}], "load": [{"temperature": "50 K"}],
           "point": [{"name": "c", "at": [5, 5, 5]}]}
    res = elastofe.solve_case(parse_case(doc))
    expected = -E * ALPHA * DT / (1 - 2 * NU)
    np.testing.assert_allclose(res.stress[:, :3], expected, rtol=1e-10)
    assert np.abs(res.stress[:, 3:]).max() < 1e-9 * abs(expected)
    assert res.points["c"]["stress"][0] == pytest.approx(expected, rel=1e-10)


def test_formula_csv_and_vtu_fields_give_the_same_temperatures(bar, tmp_path):
    # A linear field is reproduced exactly by linear interpolation of point data (common practice),
    # so the formula and the sampled data must give the same nodal temperatures and displacements.
    import meshio

    formula = "20 + 0.5*x - 0.3*y + 0.2*z"
    rf = elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"formula": formula}, order=1)))
    rng = np.random.default_rng(3)
    pts = np.vstack([np.array([[x, y, z] for x in (-1, 101) for y in (-1, 11) for z in (-1, 11)], float),
                     rng.uniform([-1, -1, -1], [101, 11, 11], size=(200, 3))])
    vals = 20 + 0.5 * pts[:, 0] - 0.3 * pts[:, 1] + 0.2 * pts[:, 2]
    csv = tmp_path / "t.csv"
    csv.write_text("x,y,z,dT\n" + "\n".join(",".join(repr(float(v)) for v in row)
                                            for row in np.column_stack([pts, vals])))
    rc = elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"file": str(csv)}, order=1)))
    np.testing.assert_allclose(rc.temperature, rf.temperature, rtol=1e-10, atol=1e-9)
    np.testing.assert_allclose(rc.u, rf.u, rtol=0, atol=1e-9 * np.abs(rf.u).max())
    # VTU point data on a coarse tetrahedral mesh of its own, with a reference temperature.
    vtu = tmp_path / "t.vtu"
    m = rf.mesh
    meshio.write(str(vtu), meshio.Mesh(m.points, [("tetra", m.cells[:, :4])],
                                       point_data={"T": rf.temperature + 15.0}))
    rv = elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"file": str(vtu), "field": "T", "reference": 15.0},
                                             order=1)))
    np.testing.assert_allclose(rv.temperature, rf.temperature, rtol=1e-10, atol=1e-9)
    # The formula itself is evaluated at the nodes.
    x = rf.mesh.points
    np.testing.assert_allclose(rf.temperature, 20 + 0.5 * x[:, 0] - 0.3 * x[:, 1] + 0.2 * x[:, 2], rtol=1e-12)


def test_temperature_needs_expansion_and_a_safe_formula(bar):
    doc = _doc(bar, SLIDING, DT)
    del doc["material"]["expansion"]
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(doc)
    assert err.value.key == "material.expansion"
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(_doc(bar, SLIDING, {"formula": "__import__('os').getcwd()"}))
    assert err.value.key == "load[1].temperature.formula"


@pytest.mark.parametrize("ref", ["293.15 K", "68 degF", "20 delta_degC"])
def test_a_reference_temperature_with_a_unit_is_refused(bar, ref):
    """The field's numbers carry no unit, so a unit on the reference cannot be honoured: "293.15 K"
    against a field of 20 (degrees Celsius) gave a change of -273 K and about 1.6 GPa of thermal
    stress with exit 0. A plain number on the field's scale is the only form."""
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(_doc(bar, SLIDING, {"formula": "20", "reference": ref}))
    assert err.value.key == "load[1].temperature.reference"
    assert "plain number" in str(err.value)
    case = parse_case(_doc(bar, SLIDING, {"formula": "20", "reference": 15}))
    assert case.loads[0].reference == pytest.approx(15.0, rel=0, abs=0)


def test_csv_coordinates_in_another_unit(bar, tmp_path):
    """A temperature CSV written in metres for a mm case: with units in its header (x [m]) the
    coordinates are converted and the linear field is reproduced exactly at the nodes (linear
    interpolation of a linear field, common practice); without them its points span 1/1000 of
    the part and the run warns (before, every node silently took the value of the nearest corner)."""
    pts = np.array([[x, y, z] for x in (-1, 101) for y in (-1, 11) for z in (-1, 11)], float)
    pts = np.vstack([pts, np.random.default_rng(5).uniform([-1, -1, -1], [101, 11, 11], size=(100, 3))])
    vals = 20 + 0.5 * pts[:, 0]
    rows = "\n".join(f"{p[0] / 1000:.17g},{p[1] / 1000:.17g},{p[2] / 1000:.17g},{v:.17g}" for p, v in zip(pts, vals))
    (tmp_path / "m.csv").write_text("x [m],y [m],z [m],T\n" + rows)
    (tmp_path / "bare.csv").write_text("x,y,z,T\n" + rows)
    res = elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"file": str(tmp_path / "m.csv"), "reference": 20},
                                              size=10.0, order=1)))
    np.testing.assert_allclose(res.temperature, 0.5 * res.mesh.points[:, 0], rtol=1e-10, atol=1e-9)
    assert not any("another unit" in w for w in res.warnings)
    res = elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"file": str(tmp_path / "bare.csv"), "reference": 20},
                                              size=10.0, order=1)))
    assert any("another unit" in w and "bare.csv" in w for w in res.warnings)
    with pytest.raises(elastofe.CaseError, match="must be a temperature scale"):
        (tmp_path / "bad.csv").write_text("x [m],y [m],z [m],T [MPa]\n" + rows)
        elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"file": str(tmp_path / "bad.csv")}, size=10.0, order=1)))


def test_csv_temperatures_in_fahrenheit(bar, tmp_path):
    """A temperature column that names its scale: 68 + 0.9 x degF against a reference of 68 degF
    is a change of 0.9 x degF = 0.5 x K (5/9 K per degF, by definition of the scales), the same
    field as 20 + 0.5 x degC against 20; unlabelled, the numbers are taken as kelvin differences."""
    pts = np.array([[x, y, z] for x in (-1, 101) for y in (-1, 11) for z in (-1, 11)], float)
    pts = np.vstack([pts, np.random.default_rng(6).uniform([-1, -1, -1], [101, 11, 11], size=(60, 3))])
    rows = "\n".join(f"{p[0]:.17g},{p[1]:.17g},{p[2]:.17g},{68 + 0.9 * p[0]:.17g}" for p in pts)
    (tmp_path / "f.csv").write_text("x,y,z,T [degF]\n" + rows)
    res = elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"file": str(tmp_path / "f.csv"), "reference": 68},
                                              size=10.0, order=1)))
    np.testing.assert_allclose(res.temperature, 0.5 * res.mesh.points[:, 0], rtol=1e-10, atol=1e-9)
    (tmp_path / "k.csv").write_text("x,y,z,T [K]\n" + rows)
    res = elastofe.solve_case(parse_case(_doc(bar, SLIDING, {"file": str(tmp_path / "k.csv"), "reference": 68},
                                              size=10.0, order=1)))
    np.testing.assert_allclose(res.temperature, 0.9 * res.mesh.points[:, 0], rtol=1e-10, atol=1e-9)
