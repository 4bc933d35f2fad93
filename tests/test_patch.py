"""Patch test: a linear displacement field imposed on the boundary of an irregular mesh is
reproduced exactly in the interior, with constant stress (common practice in FE verification;
the field and material are those of the MacNeal & Harder 1985 solid patch)."""
import numpy as np
import pytest

from elastofe.fem.assembly import assemble_stiffness, stress_at
from elastofe.geometry import mesh_geometry
from elastofe.solve import solve


def linear_field(X):
    # MacNeal & Harder (1985), Finite Elem. Anal. Des. 1, 3-20: u = 1e-3 (2x + y + z)/2, ...
    x, y, z = X.T
    return 1e-3 * np.stack([(2 * x + y + z) / 2, (x + 2 * y + z) / 2, (x + y + 2 * z) / 2], axis=1)


@pytest.mark.parametrize("order", [1, 2])
def test_patch_linear_field_reproduced(parts, order):
    mesh = mesh_geometry(parts["cube"], order=order, size=0.35)
    E, nu = 1.0e6, 0.25
    lam, mu = E * nu / ((1 + nu) * (1 - 2 * nu)), E / (2 * (1 + nu))
    K = assemble_stiffness(mesh.points, mesh.cells, lam, mu)
    bnd = np.unique(mesh.faces)
    held = (3 * bnd[:, None] + np.arange(3)).ravel()
    exact = linear_field(mesh.points).ravel()
    free = np.ones(K.shape[0], bool)
    free[held] = False
    assert free.sum() > 0
    u = exact.copy()
    u[free] = 0
    rhs = -(K[free][:, held] @ exact[held])
    u[free] = solve(K[free][:, free].tocsr(), rhs).u
    assert np.abs(u - exact).max() < 1e-12
    s = stress_at(mesh.points, mesh.cells, u.reshape(-1, 3), np.array([[0.2, 0.3, 0.1]]), lam, mu)
    # Published patch stresses: sx = sy = sz = 2000, txy = tyz = tzx = 400 (MacNeal & Harder 1985).
    assert np.allclose(s[..., :3], 2000.0, rtol=1e-9)
    assert np.allclose(s[..., 3:], 400.0, rtol=1e-9)
