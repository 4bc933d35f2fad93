"""Supports in local frames (sliding on a plane or a cylinder, cylindrical-frame holds) and the
rigid-body check that must account for them."""
import numpy as np
import pytest

import elastofe
from elastofe.case import parse_case
from elastofe.geometry import mesh_geometry
from elastofe.mesh import from_arrays
from tests.conftest import write_step

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

E, NU = 200000.0, 0.3


def _rotation(axis, angle_deg):
    a = np.asarray(axis, float) / np.linalg.norm(axis)
    t = np.radians(angle_deg)
    K = np.array([[0, -a[2], a[1]], [a[2], 0, -a[0]], [-a[1], a[0], 0]])
    return np.eye(3) + np.sin(t) * K + (1 - np.cos(t)) * K @ K


Q = _rotation([1.0, 2.0, 3.0], 37.0)  # an arbitrary orientation, so no frame is a global axis


def _doc(regions, supports, loads, points=()):
    return {"geometry": {"file": "given.vtu"}, "material": {"E": E, "nu": NU},
            "regions": regions, "support": list(supports), "load": list(loads),
            "point": [{"name": f"p{i}", "at": list(map(float, p))} for i, p in enumerate(points)]}


@pytest.fixture(scope="module")
def half_and_full(tmp_path_factory):
    """A half bar meshed with Gmsh and the full bar made by mirroring that mesh in y = 0, so both
    models share the nodes of the half (the full model's solution restricted to the half is then
    exactly the half model's with u·n = 0 on the plane)."""
    d = tmp_path_factory.mktemp("sym")
    step = write_step(d / "half.step", lambda occ: occ.addBox(0, 0, 0, 60, 5, 8))
    half = mesh_geometry(step, order=2, size=3.0)
    p = half.points
    on = np.abs(p[:, 1]) < 1e-9
    idx = np.where(on, np.arange(p.shape[0]), p.shape[0] + np.cumsum(~on) - 1)
    mirrored = p[~on] * [1, -1, 1]
    full_pts = np.vstack([p, mirrored])
    full_cells = np.vstack([half.cells, idx[half.cells]])
    half_r = from_arrays(p @ Q.T, half.cells)
    full_r = from_arrays(full_pts @ Q.T, full_cells)
    return half_r, full_r, p.shape[0]


def test_symmetric_half_model_with_sliding_plane_equals_full_model(half_and_full):
    # Common practice: a model symmetric in geometry, supports and loads may be cut on its plane of
    # symmetry, holding the normal displacement there; the half gives the full model's field.
    half, full, nh = half_and_full
    nx, ny = Q @ [1.0, 0, 0], Q @ [0, 1.0, 0]
    regions = {"root": {"plane": {"point": [0, 0, 0], "normal": list(nx)}},
               "tip": {"plane": {"point": list(Q @ [60.0, 0, 0]), "normal": list(nx)}},
               "sym": {"plane": {"point": [0, 0, 0], "normal": list(ny)}}}
    F = Q @ [400.0, 0, -150.0]  # in the plane of symmetry
    tip = [{"region": "tip", "force": list(F)}]
    full_regions = {k: v for k, v in regions.items() if k != "sym"}  # the plane is inside the full bar
    full_case = parse_case(_doc(full_regions, [{"region": "root", "fix": "xyz"}], tip))
    half_case = parse_case(_doc(regions, [{"region": "root", "fix": "xyz"}, {"region": "sym", "fix": "n"}],
                                [{"region": "tip", "force": list(F / 2)}]))
    rf = elastofe.solve_case(full_case, mesh=full)
    rh = elastofe.solve_case(half_case, mesh=half)
    uf, uh = rf.u[:nh], rh.u
    scale = np.abs(uf).max()
    assert scale > 1e-3
    np.testing.assert_allclose(uh, uf, rtol=0, atol=1e-8 * scale)
    # The normal displacement on the plane is held exactly (elimination, not a penalty).
    on = np.abs((half.points) @ ny) < 1e-9
    assert np.abs(uh[on] @ ny).max() < 1e-13 * scale
    # The plane's reaction is normal to it, and the reactions balance the half load.
    R = rh.reactions["sym"]["force"]
    assert np.linalg.norm(R - (R @ ny) * ny) < 1e-8 * np.linalg.norm(F)
    assert rh.equilibrium_error < 1e-9


A, B, H, P_OUT = 10.0, 20.0, 5.0, 30.0


def lame_held_bore(r):
    """Thick cylinder, bore held radially (u(a) = 0), external pressure p, plane strain.

    General axisymmetric solution u = C1 r + C2 / r (Timoshenko & Goodier, Theory of Elasticity,
    3rd ed. 1970, the thick-walled cylinder), with the constants from u(a) = 0 and σ_r(b) = −p.
    """
    lam = E * NU / ((1 + NU) * (1 - 2 * NU))
    mu = E / (2 * (1 + NU))
    C1 = -P_OUT / (2 * (lam + mu) + 2 * mu * A ** 2 / B ** 2)
    C2 = -C1 * A ** 2
    u = C1 * r + C2 / r
    hoop = 2 * (lam + mu) * C1 + 2 * mu * C2 / r ** 2
    return u, hoop


@pytest.fixture(scope="module")
def tilted_ring(tmp_path_factory):
    """A quarter of a thick ring whose axis is tilted in space (Q applied to the z axis)."""
    d = tmp_path_factory.mktemp("tring")
    ax = list(Q @ [0, 0, 1.0])

    def build(occ):
        outer = occ.addCylinder(0, 0, 0, 0, 0, H, B)
        inner = occ.addCylinder(0, 0, 0, 0, 0, H, A)
        quad = occ.addBox(0, 0, 0, 30, 30, H)
        ann, _ = occ.cut([(3, outer)], [(3, inner)])
        out, _ = occ.intersect(ann, [(3, quad)])
        axis = np.array([1.0, 2.0, 3.0]) / np.linalg.norm([1.0, 2.0, 3.0])
        occ.rotate(out, 0, 0, 0, *axis, np.radians(37.0))
    step = write_step(d / "tring.step", build)
    return step, ax


def test_thick_cylinder_held_radially_on_its_bore_matches_lame(tilted_ring, tmp_path):
    step, ax = tilted_ring
    nx, ny, nz = (Q @ e for e in np.eye(3))
    doc = {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU},
           "mesh": {"order": 2, "size": 2.5},
           "regions": {"bore": {"cylinder": {"radius": A}}, "outer": {"cylinder": {"radius": B}},
                       "sx": {"plane": {"point": [0, 0, 0], "normal": list(nx)}},
                       "sy": {"plane": {"point": [0, 0, 0], "normal": list(ny)}},
                       "ends": {"plane": {"point": [0, 0, 0], "normal": list(nz)}},
                       "top": {"plane": {"point": list(H * nz), "normal": list(nz)}}},
           # Bore sliding on its cylinder (radial held); symmetry and plane-strain ends sliding on
           # planes: every hold is oblique to the global axes.
           "support": [{"region": "bore", "fix": "r"}, {"region": "sx", "fix": "n"},
                       {"region": "sy", "fix": "n"}, {"region": "ends", "fix": "n"},
                       {"region": "top", "fix": "n", "moment_about": list(H / 2 * nz)}],
           "load": [{"region": "outer", "pressure": P_OUT}],
           "point": [{"name": "mid", "at": list(Q @ [15 / np.sqrt(2), 15 / np.sqrt(2), H / 2])},
                     {"name": "out", "at": list(Q @ [B / np.sqrt(2), B / np.sqrt(2), H / 2])}]}
    res = elastofe.solve_case(parse_case(doc))
    for name, r in (("mid", 15.0), ("out", B)):
        u = Q.T @ res.points[name]["displacement"]
        ur = (u[0] + u[1]) / np.sqrt(2)
        assert ur == pytest.approx(lame_held_bore(r)[0], rel=5e-3)
        assert abs(u[2]) < 1e-3 * abs(ur)  # plane strain held by the sliding ends
    s = res.points["mid"]["stress"]
    S = Q.T @ np.array([[s[0], s[3], s[5]], [s[3], s[1], s[4]], [s[5], s[4], s[2]]]) @ Q
    hoop = 0.5 * (S[0, 0] + S[1, 1]) - S[0, 1]
    assert hoop == pytest.approx(lame_held_bore(15.0)[1], rel=1e-2)
    # Bore nodes do not move radially (exact elimination).
    bore = np.flatnonzero(np.abs(np.linalg.norm(np.cross(res.mesh.points, Q @ [0, 0, 1.0]), axis=1) - A) < 1e-6)
    rad = np.cross(Q @ [0, 0, 1.0], np.cross(res.mesh.points[bore], Q @ [0, 0, 1.0])) / A
    assert np.abs(np.einsum("ij,ij->i", res.u[bore], rad)).max() < 1e-12
    assert res.equilibrium_error < 1e-9
    assert "moment_about" in res.reactions["top"]


def test_cylindrical_frame_hold_leaves_rotation_about_the_axis_free(tilted_ring):
    step, ax = tilted_ring
    doc = {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU}, "mesh": {"order": 1, "size": 5.0},
           "regions": {"bore": {"cylinder": {"radius": A}}},
           "support": [{"region": "bore", "fix": "r"}], "load": []}
    with pytest.raises(elastofe.ModelError) as err:
        elastofe.solve_case(parse_case(doc))
    msg = str(err.value)
    # A quarter bore held radially still lets the part turn about, and slide along, the hole axis.
    assert "rotation about an axis along" in msg and "translation along" in msg
    doc["support"] = [{"region": "bore", "fix": "rta"}]
    assert elastofe.solve_case(parse_case(doc)).equilibrium_error < 1e-9


def test_fix_n_on_a_curved_region_is_a_case_error(tilted_ring):
    step, _ = tilted_ring
    doc = {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU}, "mesh": {"order": 1, "size": 5.0},
           "regions": {"bore": {"cylinder": {"radius": A}}},
           "support": [{"region": "bore", "fix": "n"}], "load": []}
    with pytest.raises(elastofe.CaseError) as err:
        elastofe.solve_case(parse_case(doc))
    assert err.value.key == "support[1].fix" and "planar" in str(err.value)


def test_mixed_frames_in_one_support_are_rejected():
    doc = {"geometry": {"file": "x.vtu"}, "material": {"E": E, "nu": NU}, "regions": {"a": {"surfaces": [1]}},
           "support": [{"region": "a", "fix": "xr"}]}
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(doc)
    assert err.value.key == "support[1].fix"


def test_prescribed_radial_displacement_of_the_bore_matches_lame(tilted_ring):
    # A bore pushed out radially by delta (an interference fit), outer surface free, plane strain:
    # u = C1 r + C2 / r with u(a) = delta and σ_r(b) = 0 (Timoshenko & Goodier, Theory of
    # Elasticity, 3rd ed. 1970, thick-walled cylinder).
    step, _ = tilted_ring
    delta = 0.01
    lam = E * NU / ((1 + NU) * (1 - 2 * NU))
    mu = E / (2 * (1 + NU))
    C1 = delta / (A + (lam + mu) * B ** 2 / (mu * A))
    C2 = (lam + mu) * C1 * B ** 2 / mu
    nx, ny, nz = (Q @ e for e in np.eye(3))
    doc = {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU}, "mesh": {"order": 2, "size": 2.5},
           "regions": {"bore": {"cylinder": {"radius": A}},
                       "sx": {"plane": {"point": [0, 0, 0], "normal": list(nx)}},
                       "sy": {"plane": {"point": [0, 0, 0], "normal": list(ny)}},
                       "ends": {"plane": {"point": [0, 0, 0], "normal": list(nz)}},
                       "top": {"plane": {"point": list(H * nz), "normal": list(nz)}}},
           "support": [{"region": "bore", "fix": "r", "value": [delta, 0, 0]}, {"region": "sx", "fix": "n"},
                       {"region": "sy", "fix": "n"}, {"region": "ends", "fix": "n"},
                       {"region": "top", "fix": "n", "value": 0.0}],
           "load": [],
           "point": [{"name": "out", "at": list(Q @ [B / np.sqrt(2), B / np.sqrt(2), H / 2])}]}
    res = elastofe.solve_case(parse_case(doc))
    u = Q.T @ res.points["out"]["displacement"]
    assert (u[0] + u[1]) / np.sqrt(2) == pytest.approx(C1 * B + C2 / B, rel=5e-3)
    # The contact pressure at the bore, p = −σ_r(a) = −(2 (λ + μ) C1 − 2 μ C2 / a²), pushes the part
    # away from the axis; on a quarter bore its resultant is p a h along each in-plane axis
    # (projected area, common practice).
    p = -(2 * (lam + mu) * C1 - 2 * mu * C2 / A ** 2)
    R = Q.T @ res.reactions["bore"]["force"]
    assert p > 0
    assert R[0] == pytest.approx(p * A * H, rel=1e-2) and R[1] == pytest.approx(p * A * H, rel=1e-2)
    assert res.equilibrium_error < 1e-9
