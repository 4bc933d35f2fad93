"""Force and moment at a point passed to a region, spread by nodal area; pin bearing on a hole; linearly
varying pressure; every load's resultant and the equilibrium check over them all."""
import numpy as np
import pytest

import elastofe
from elastofe.bc import bearing_load, region_cylinder, spread_load
from elastofe.case import parse_case
from elastofe.fem.surface import face_areas
from tests.conftest import write_step

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

E, NU = 200000.0, 0.3


def test_spread_load_reproduces_force_and_moment_about_its_point(parts):
    # Exact by construction (the spread load's defining property): the nodal forces' resultant is F
    # and their moment about the point is M, for a point well off the part.
    from elastofe.geometry import mesh_geometry

    mesh = mesh_geometry(parts["bar"], order=2, size=4.0)
    tip = mesh.faces[np.all(np.abs(mesh.points[mesh.faces][..., 0] - 100) < 1e-9, axis=1)]
    at = np.array([180.0, 35.0, -20.0])
    F = np.array([120.0, -800.0, 45.0])
    M = np.array([3000.0, -1500.0, 25000.0])
    f = spread_load(mesh.points, tip, at, F, M).reshape(-1, 3)
    np.testing.assert_allclose(f.sum(axis=0), F, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(np.cross(mesh.points - at, f).sum(axis=0), M, rtol=1e-12, atol=1e-8)
    # Only the region's nodes are loaded.
    loaded = np.flatnonzero(np.abs(f).sum(axis=1) > 0)
    assert np.all(np.isin(loaded, np.unique(tip)))


def test_cantilever_end_moment_spread_from_a_point_matches_beam_theory(cantilever_case, tmp_path):
    # Tip deflection of a cantilever under an end moment: M L^2 / (2 E I) (Euler-Bernoulli beam
    # theory, e.g. Roark's Formulas for Stress and Strain, cantilever with end couple). The moment
    # acts at a point 30 mm beyond the tip and is spread over the tip face by nodal area.
    M, L, b, h = 50000.0, 100.0, 10.0, 10.0
    I = b * h ** 3 / 12
    path = cantilever_case(size=2.5, order=2)
    text = path.read_text().replace('force = [0, -100, 0]', f'at = [130, 0, 0]\nmoment = [0, 0, {M}]')
    path.write_text(text)
    res = elastofe.solve_case(elastofe.load_case(path))
    uy = res.points["tip"]["displacement"][1]
    expected = M * L ** 2 / (2 * E * I)
    # The clamped root restrains the Poisson contraction locally (common practice): a few tenths
    # of a percent at L/h = 10, so the band is 1 %.
    assert uy == pytest.approx(expected, rel=0.01)
    ld = res.loads[0]
    assert "at (130, 0, 0) mm on" in ld.label     # the point's coordinates carry the case's unit
    np.testing.assert_allclose(ld.force, 0.0, atol=1e-9 * M / L)
    np.testing.assert_allclose(ld.info["moment_about_at"], [0, 0, M], rtol=1e-12, atol=1e-8)
    # The root reacts with the opposite moment; equilibrium covers moments too.
    assert res.reactions["root"]["moment"][2] == pytest.approx(-M, rel=1e-9)
    assert res.equilibrium_error < 1e-9 and res.moment_equilibrium_error < 1e-9


@pytest.fixture(scope="module")
def lug(tmp_path_factory):
    """A plate 60 x 40 x 5 with a hole of radius 6 centred at (20, 20)."""
    d = tmp_path_factory.mktemp("lug")

    def build(occ):
        plate = occ.addBox(0, 0, 0, 60, 40, 5)
        hole = occ.addCylinder(20, 20, -1, 0, 0, 7, 6)
        occ.cut([(3, plate)], [(3, hole)])
    return write_step(d / "lug.step", build)


def _lug_doc(step, load, order=2, size=3.0):
    return {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU},
            "mesh": {"order": order, "size": size, "refine": [{"region": "hole", "size": 1.5}]},
            "regions": {"hole": {"cylinder": {"radius": 6.0}},
                        "end": {"plane": {"point": [60, 0, 0], "normal": [1, 0, 0]}}},
            "support": [{"region": "end", "fix": "xyz", "moment_about": [60, 20, 2.5]}], "load": [load]}


def test_pin_bearing_resultant_is_exact_and_unloaded_half_is_free(lug):
    # Common practice for pin-loaded lugs: radial pressure as the cosine of the angle from the
    # load direction over the loaded half of the hole, zero on the other half.
    F = np.array([-900.0, 400.0, 0.0])
    case = parse_case(_lug_doc(lug, {"region": "hole", "force": list(F), "distribution": "bearing"}))
    res = elastofe.solve_case(case)
    ld = res.loads[0]
    np.testing.assert_allclose(ld.force, F, rtol=0, atol=1e-10 * np.linalg.norm(F))
    assert res.equilibrium_error < 1e-9
    np.testing.assert_allclose(-res.reactions["end"]["force"], F, rtol=0, atol=1e-9 * np.linalg.norm(F))
    # Reaction moment about the support face's centre: the load acts at the hole centre (20, 20):
    # (hole - point) x F about z (statics, common practice).
    Mz = np.cross(np.array([20.0, 20.0, 2.5]) - [60, 20, 2.5], F)[2]
    assert res.reactions["end"]["moment_about"][2] == pytest.approx(-Mz, rel=1e-6)

    mesh = res.mesh
    ids = res.region_ids["hole"]
    faces = mesh.surface_faces(ids)
    a, p0, r = region_cylinder(mesh, ids, "hole", res.catalogue)
    assert r == pytest.approx(6.0, rel=1e-9)
    f, pressure, p0_peak = bearing_load(mesh.points, faces, a, p0, F)
    d = F / np.linalg.norm(F)
    # Pressure: zero wherever the radial direction faces away from the load, positive on the loaded half.
    theta = np.linspace(0, 2 * np.pi, 721)
    e1 = np.cross(a, d)
    ring = p0 + r * (np.cos(theta)[:, None] * d + np.sin(theta)[:, None] * e1) + 1.3 * a
    p = pressure(ring)
    facing = np.cos(theta)
    assert np.all(p[facing <= 0] == 0.0)
    assert np.all(p[facing > 1e-6] > 0)
    # Nodal forces vanish on nodes all of whose faces lie on the unloaded half.
    X = mesh.points[faces]
    c = np.einsum("fkd,d->fk", X - p0, d)
    away = np.unique(faces[np.all(c < 0, axis=1)])
    near = np.unique(faces[np.any(c >= 0, axis=1)])
    only_away = np.setdiff1d(away, near)
    assert only_away.size > 10
    assert np.abs(f.reshape(-1, 3)[only_away]).max() == 0.0
    # Peak pressure of the cosine distribution: ∫ p0 cos²θ r dθ t over ±90° = F gives
    # p0 = 2 F / (π r t) (common practice); the mesh's faceting moves it slightly.
    t = face_areas(mesh.points, faces).sum() / (2 * np.pi * r)
    assert p0_peak == pytest.approx(2 * np.linalg.norm(F) / (np.pi * r * t), rel=5e-3)
    # Radial tractions pass through the axis: no moment about it.
    Ma = (np.cross(mesh.points - p0, f.reshape(-1, 3)).sum(axis=0)) @ a
    assert abs(Ma) < 1e-10 * np.linalg.norm(F) * r


def test_pin_loaded_net_section_peak_governs(lug):
    """The peak of a pin-loaded lug lies at the edge of the net section, about 90° from the load,
    where the bearing pressure is zero: a stress concentration of the part, so it governs (it was
    set aside as "next to the load region" because the whole hole was the region). The ligament
    beside the hole carries half the force: membrane stress F / (2 · 14 · 5) (statics, common
    practice; measured +1.7 %, 3 % allowed)."""
    F = 2000.0
    doc = _lug_doc(lug, {"region": "hole", "force": [-F, 0.0, 0.0], "distribution": "bearing"})
    doc["line"] = [{"name": "ligament", "start": [20, 26, 2.5], "end": [20, 40, 2.5], "samples": 29}]
    res = elastofe.solve_case(parse_case(doc))
    assert res.linearized["ligament"][0].membrane[0] == pytest.approx(F / (2 * 14 * 5), rel=0.03)
    g = res.governing
    assert g["basis"] == "overall" and g["value"] == pytest.approx(float(res.von_mises.max()), rel=1e-12)
    r = np.asarray(g["at"])[:2] - [20.0, 20.0]
    angle = np.degrees(np.arccos(-r[0] / np.linalg.norm(r)))   # from the load direction, -x
    assert np.linalg.norm(r) == pytest.approx(6.0, rel=0.02) and 60.0 < angle < 120.0


def test_bearing_force_along_the_axis_is_rejected(lug):
    case = parse_case(_lug_doc(lug, {"region": "hole", "force": [0, 100, 50], "distribution": "bearing"},
                               order=1, size=5.0))
    with pytest.raises(elastofe.CaseError) as err:
        elastofe.solve_case(case)
    assert err.value.key == "load[1].force" and "perpendicular" in str(err.value)


def test_hydrostatic_pressure_resultant(tmp_path):
    # Linearly varying pressure on the inside of a tank wall of depth 10 (a 20 x 10 face at x = 0):
    # p = rho g (10 - z) for a liquid surface at z = 10; resultant rho g b h^2 / 2 acting at h / 3
    # above the base (hydrostatics, common practice).
    step = write_step(tmp_path / "wall.step", lambda occ: occ.addBox(0, 0, 0, 2, 20, 10))
    gamma = 1e-5  # rho g [MPa/mm]
    doc = {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU}, "mesh": {"order": 2, "size": 2.5},
           "regions": {"wet": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}},
                       "base": {"plane": {"point": [0, 0, 0], "normal": [0, 0, 1]}}},
           "support": [{"region": "base", "fix": "xyz"}],
           "load": [{"region": "wet", "pressure": 0.0, "gradient": [0, 0, -gamma], "origin": [0, 0, 12],
                     "clip": True}]}
    # Liquid surface at z = 12, above the wall's top: no clipping on the wall itself.
    res = elastofe.solve_case(parse_case(doc))
    b, h, top = 20.0, 10.0, 12.0
    Fx = gamma * b * (top * h - h ** 2 / 2)
    ld = res.loads[0]
    assert ld.force[0] == pytest.approx(Fx, rel=1e-10)
    assert abs(ld.force[1]) < 1e-12 and abs(ld.force[2]) < 1e-12
    # Moment about y through the origin: ∫ p z dA = gamma b (top h^2/2 - h^3/3), pushing +x at height z.
    My = gamma * b * (top * h ** 2 / 2 - h ** 3 / 3)
    assert ld.moment[1] == pytest.approx(My, rel=1e-10)
    assert res.equilibrium_error < 1e-9
    # With the surface at z = 6 the pressure is clipped above it.
    doc["load"][0]["origin"] = [0, 0, 6]
    res = elastofe.solve_case(parse_case(doc))
    assert res.loads[0].force[0] == pytest.approx(gamma * b * 6 ** 2 / 2, rel=1e-3)
