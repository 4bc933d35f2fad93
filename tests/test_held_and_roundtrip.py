"""Held DOFs on meshes built in code (no Gmsh), and exact mesh round trips through VTU.

Independent values: a linear displacement field is reproduced exactly by 4- and 10-node
tetrahedra (the patch test; MacNeal & Harder, Finite Elem. Anal. Des. 1 (1985) 3-20), so holding
the boundary at that field must give it everywhere to round-off; a uniaxial bar under an end
force has u = F L / (E A) (common practice).
"""
from __future__ import annotations

import textwrap

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

import numpy as np
import pytest

from elastofe.case import parse_case
from elastofe.elimination import expand_solution, reduce_system
from elastofe.fem.assembly import assemble_stiffness
from elastofe.mesh import boundary_faces, from_arrays, read_mesh_file, write_vtu
from elastofe.pipeline import solve_case
from elastofe.verify.meshes import structured_block


def _lame(E, nu):
    return E * nu / ((1 + nu) * (1 - 2 * nu)), E / (2 * (1 + nu))


@pytest.mark.parametrize("order", [1, 2])
def test_boundary_held_at_a_linear_field_gives_it_everywhere(order):
    pts, cells = structured_block(3, 2, 2, order=order)
    pts = pts * np.array([2.0, 1.0, 1.5])
    lam, mu = _lame(1000.0, 0.3)
    K = assemble_stiffness(pts, cells, lam, mu)
    grad = np.array([[1e-3, 2e-4, -3e-4], [5e-4, -2e-3, 1e-4], [0.0, 3e-4, 1.5e-3]])
    exact = pts @ grad.T + np.array([0.01, -0.02, 0.005])
    bnodes = np.unique(boundary_faces(cells))
    dofs = (3 * bnodes[:, None] + np.arange(3)).ravel()
    red = reduce_system(K, np.zeros(K.shape[0]), dofs, exact.ravel()[dofs])
    assert red.K.shape[0] == K.shape[0] - dofs.size
    from elastofe import solve as solvers

    uf = solvers.solve(red.K, red.rhs[:, 0], backend="scipy").u
    u = expand_solution(red, uf)[:, 0]
    assert np.array_equal(u[dofs], exact.ravel()[dofs])   # held values kept exactly
    assert np.abs(u - exact.ravel()).max() <= 1e-12 * np.abs(exact).max()


def test_rotated_frame_elimination_holds_the_local_component_only():
    """A sliding hold (normal component zero in a rotated frame) leaves the tangential ones free."""
    import scipy.sparse as sp

    pts, cells = structured_block(2, 2, 2, order=1)
    lam, mu = _lame(1000.0, 0.3)
    K = assemble_stiffness(pts, cells, lam, mu)
    n = pts.shape[0]
    # Frame at every node: local axis 0 along (1, 1, 0)/sqrt 2.
    c = 1 / np.sqrt(2.0)
    R = np.array([[c, c, 0.0], [-c, c, 0.0], [0.0, 0.0, 1.0]])
    T = sp.block_diag([R] * n, format="csr")
    node = 0
    red = reduce_system(K, np.zeros(3 * n), np.array([3 * node]), np.array([0.25]), T)
    # Only one DOF held: the reduced system keeps the other 3n - 1.
    assert red.K.shape[0] == 3 * n - 1
    U = expand_solution(red, np.zeros(3 * n - 1))
    # Back in global components the held node moved 0.25 along (1, 1, 0)/sqrt 2.
    assert np.allclose(U[3 * node:3 * node + 3, 0], 0.25 * R[0], atol=1e-15)


def _bar_vtu(tmp_path, order):
    pts, cells = structured_block(8, 2, 2, order=order)
    pts = pts * np.array([10.0, 1.0, 1.0])   # 10 x 1 x 1 bar
    mesh = from_arrays(pts, cells)
    path = tmp_path / f"bar{order}.vtu"
    write_vtu(path, mesh, {}, {})
    return path, mesh


@pytest.mark.parametrize("order", [1, 2])
def test_vtu_round_trip_is_exact(tmp_path, order):
    """Write VTU, read it back: points and cells identical (as meshio tests its formats)."""
    import meshio

    path, mesh = _bar_vtu(tmp_path, order)
    back = read_mesh_file(path)
    assert np.array_equal(back.points, mesh.points)
    assert np.array_equal(back.cells, mesh.cells)
    # Field data round trip, bit for bit.
    rng = np.random.default_rng(7)
    u = rng.normal(size=(mesh.nodes, 3))
    write_vtu(tmp_path / "f.vtu", mesh, {"displacement": u}, {"quality": rng.random(mesh.cells.shape[0])})
    m = meshio.read(tmp_path / "f.vtu")
    assert np.array_equal(m.point_data["displacement"], u)


@pytest.mark.parametrize("order", [1, 2])
def test_bar_from_a_mesh_file_built_in_code(tmp_path, order):
    """A 10 x 1 x 1 bar read from VTU, held on x = 0 (sliding supports), pulled by F = 10 on x = 10:
    u = F L / (E A) (common practice), exact for this uniaxial stress state."""
    path, mesh = _bar_vtu(tmp_path, order)
    case = parse_case(tomllib.loads(textwrap.dedent(f"""
        [geometry]
        file = "{path}"
        [material]
        E = 1000.0
        nu = 0.25
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        side_y = {{ plane = {{ point = [0, 0, 0], normal = [0, 1, 0] }} }}
        side_z = {{ plane = {{ point = [0, 0, 0], normal = [0, 0, 1] }} }}
        tip = {{ plane = {{ point = [10, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        fix = "x"
        [[support]]
        region = "side_y"
        fix = "y"
        [[support]]
        region = "side_z"
        fix = "z"
        [[load]]
        region = "tip"
        force = [10, 0, 0]
        """)), base=tmp_path)
    res = solve_case(case)
    root = np.isclose(res.mesh.points[:, 0], 0.0)
    assert np.all(res.u[root, 0] == 0.0)                     # held exactly
    tip = np.isclose(res.mesh.points[:, 0], 10.0)
    assert res.u[tip, 0] == pytest.approx(10.0 * 10.0 / 1000.0, rel=1e-10)
    assert res.stress[:, 0] == pytest.approx(10.0, rel=1e-9)
    assert res.reactions["root"]["force"][0] == pytest.approx(-10.0, rel=1e-12)
