"""Element-level verification: the MacNeal & Harder (1985) solid patch on its published interior
nodes, and observed orders of convergence on a manufactured solution."""
import numpy as np
import pytest

from elastofe.fem.assembly import cell_volumes
from elastofe.mesh import boundary_faces
from elastofe.verify.element_cases import (
    convergence_study,
    manufactured_body_force,
    manufactured_grad,
    manufactured_u,
    solid_patch_test,
)
from elastofe.verify.meshes import PATCH_INTERIOR, solid_patch, structured_cube


@pytest.mark.parametrize("order", [1, 2])
def test_solid_patch_mesh_is_the_published_patch(order):
    pts, cells = solid_patch(order)
    # Interior nodes at the published coordinates (MacNeal & Harder, Finite Elem. Anal. Des. 1
    # (1985) 3-20, solid patch test), kept as nodes 8..15 of the mesh.
    assert np.array_equal(pts[8:16], PATCH_INTERIOR)
    assert PATCH_INTERIOR[0].tolist() == [0.249, 0.342, 0.192]
    assert PATCH_INTERIOR[6].tolist() == [0.788, 0.693, 0.644]
    # The tetrahedra fill the unit cube exactly, all with positive volume (a conforming split).
    vol = cell_volumes(pts, cells)
    assert vol.min() > 0
    assert vol.sum() == pytest.approx(1.0, rel=1e-13)
    # The only boundary is the cube's surface: 6 faces x 4 triangles, no interior gaps.
    bf = boundary_faces(cells)
    assert bf.shape[0] == 24
    on_cube = np.isclose(pts[bf[:, :3]], 0) | np.isclose(pts[bf[:, :3]], 1)
    assert on_cube.any(axis=2).all()
    # None of the published interior nodes is on the boundary.
    assert not np.isin(np.arange(8, 16), bf).any()


@pytest.mark.parametrize("order", [1, 2])
def test_solid_patch_stresses_to_round_off(order):
    # MacNeal & Harder (1985): E = 1e6, nu = 0.25, u = 1e-3 (2x + y + z)/2 ... imposed on the
    # boundary -> sx = sy = sz = 2000, txy = tyz = tzx = 400 everywhere, interior displacements exact.
    r = solid_patch_test(order)
    assert r["interior"] >= 8
    for k in ("sx", "sy", "sz"):
        assert r[k] == pytest.approx(2000.0, rel=1e-10)
    for k in ("txy", "tyz", "txz"):
        assert r[k] == pytest.approx(400.0, rel=1e-10)
    assert r["stress_error"] < 1e-10 * 2000
    assert r["u_error"] < 1e-14


def test_manufactured_field_is_consistent():
    # The gradient against central differences, and b = -div sigma against differences of the
    # stress built from that gradient (common practice).
    x = np.random.default_rng(3).random((7, 3))
    h = 1e-6
    fd = np.stack([(manufactured_u(x + h * e) - manufactured_u(x - h * e)) / (2 * h) for e in np.eye(3)], axis=2)
    assert np.allclose(manufactured_grad(x), fd, atol=1e-8)
    lam, mu = 0.8, 0.5

    def sigma(p):
        H = manufactured_grad(p)
        eps = 0.5 * (H + H.transpose(0, 2, 1))
        return 2 * mu * eps + lam * np.trace(eps, axis1=1, axis2=2)[:, None, None] * np.eye(3)

    h = 1e-5
    div = sum((sigma(x + h * e)[:, :, k] - sigma(x - h * e)[:, :, k]) / (2 * h) for k, e in enumerate(np.eye(3)))
    assert np.allclose(manufactured_body_force(x, lam, mu), -div, atol=1e-7)


@pytest.mark.parametrize("order,l2,energy", [(1, 2.0, 1.0), (2, 3.0, 2.0)])
def test_observed_order_of_convergence(order, l2, energy):
    # A priori estimates for conforming elements of degree p on a smooth solution: L2 error ~ h^(p+1),
    # energy-norm error ~ h^p (common practice); fitted over four refinements, within ±0.15.
    r = convergence_study(order)
    assert len(r["h"]) == 4
    assert np.all(np.diff(r["l2"]) < 0) and np.all(np.diff(r["energy"]) < 0)
    assert r["l2_order"] == pytest.approx(l2, abs=0.15)
    assert r["energy_order"] == pytest.approx(energy, abs=0.15)


def test_structured_cube_is_conforming():
    pts, cells = structured_cube(3, order=2, length=2.0)
    assert cell_volumes(pts, cells).sum() == pytest.approx(8.0, rel=1e-13)
    assert boundary_faces(cells).shape[0] == 6 * 9 * 2  # two triangles per boundary square
