"""Exact point location: a point is outside only when no cell holds it, and the distance reported
for an outside point is its distance to the part.

Expected values are by construction: points drawn inside the unit cube or inside chosen cells are
inside; the distance from a point to a box is the distance to its nearest face, edge or corner
(elementary geometry); the isoparametric map of a 10-node cell reproduces the coordinates, and
straight 10-node cells every quadratic field, exactly.
"""
from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest

from elastofe.geometry import gmsh_session, mesh_geometry
from elastofe.post.probe import Locator, closest_on_triangles, interpolate, locate

CORPUS = Path(__file__).resolve().parent / "corpus"
pytestmark = pytest.mark.gmsh  # meshes made or read through Gmsh


@pytest.fixture(scope="module")
def cubes():
    """The corpus cube (unit cube) as the corpus base case meshes it (4-node, size 0.5), finer, and 10-node."""
    return {(o, s): mesh_geometry(CORPUS / "cube.step", order=o, size=s) for o, s in ((1, 0.5), (1, 0.1), (2, 0.35))}


@pytest.mark.parametrize("key", [(1, 0.5), (1, 0.1), (2, 0.35)])
def test_random_points_in_the_cube_are_all_inside(cubes, key):
    """100,000 random points inside the unit cube: every one inside (the centroid search alone
    called 50 of them outside), and a linear field interpolates to its exact value there."""
    m = cubes[key]
    pts = np.random.default_rng(3).random((100_000, 3))
    loc = locate(m.points, m.cells, pts)
    assert np.count_nonzero(loc.outside) == 0
    f = m.points @ np.array([1.0, -2.0, 3.0]) + 0.5
    assert interpolate(m.cells, loc, f) == pytest.approx(pts @ np.array([1.0, -2.0, 3.0]) + 0.5, abs=1e-12)


def test_the_refused_point_is_inside(cubes):
    """(0.527, 0.4786, 0.5112) in the corpus base case's mesh: outside by the old centroid search."""
    loc = locate(cubes[(1, 0.5)].points, cubes[(1, 0.5)].cells, [[0.527, 0.4786, 0.5112]])
    assert loc.outside[0] == 0.0


def test_cli_point_runs(tmp_path, capfd):
    """The same point as a [[point]] of the corpus base case: the run succeeds (it exited 2)."""
    from elastofe.cli import main

    shutil.copy(CORPUS / "cube.step", tmp_path / "cube.step")
    text = (CORPUS / "base.toml").read_text().replace("at = [0.5, 0.5, 0.5]", "at = [0.527, 0.4786, 0.5112]")
    (tmp_path / "case.toml").write_text(text)
    assert main(["run", str(tmp_path / "case.toml"), "-q", "--out", str(tmp_path / "out")]) == 0, capfd.readouterr().err


@pytest.mark.parametrize("key", [(1, 0.5), (2, 0.35)])
def test_points_on_vertices_edges_and_faces(cubes, key):
    """Mesh nodes, midpoints of boundary edges, face centroids and random points on the cube's
    faces, edges and corners are all inside (on the boundary counts as inside)."""
    m = cubes[key]
    rng = np.random.default_rng(5)
    on_faces = rng.random((3000, 3))
    on_faces[np.arange(3000), rng.integers(0, 3, 3000)] = rng.integers(0, 2, 3000)
    on_edges = rng.integers(0, 2, (1000, 3)).astype(float)
    on_edges[np.arange(1000), rng.integers(0, 3, 1000)] = rng.random(1000)
    corners = np.array([[i, j, k] for i in (0, 1) for j in (0, 1) for k in (0, 1)], dtype=float)
    tri = m.points[m.faces[:, :3]]
    pts = np.vstack([m.points, tri.mean(axis=1), 0.5 * (tri[:, 0] + tri[:, 1]), on_faces, on_edges, corners])
    loc = locate(m.points, m.cells, pts)
    assert np.count_nonzero(loc.outside) == 0


@pytest.mark.parametrize("key", [(1, 0.5), (2, 0.35)])
def test_distance_to_the_part(cubes, key):
    """Outside points: the distance to the unit cube (nearest face, edge or corner)."""
    m = cubes[key]
    pts = np.array([[851.0, 0.5, 0.5], [0.5, -3.0, 0.2], [2.0, 2.0, 0.5], [-1.0, -1.0, -1.0],
                    [0.5, 0.5, 1.0 + 1e-3], [1 + 1e-9, 0.5, 0.5]])
    expected = [850.0, 3.0, np.sqrt(2.0), np.sqrt(3.0), 1e-3, 1e-9]
    loc = locate(m.points, m.cells, pts)
    assert loc.outside[:5] == pytest.approx(expected[:5], rel=1e-9)
    # 1e-9 outside is within round-off of the face (rtol 1e-6 of the cell): inside.
    assert loc.outside[5] == 0.0


def test_closest_point_on_triangles():
    """Projection inside the triangle, onto an edge, onto a vertex (elementary geometry)."""
    tri = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]])
    p = np.array([[0.2, 0.2, 5.0], [0.5, -1.0, 0.0], [-1.0, -1.0, 1.0], [1.0, 1.0, 0.0]])
    cp = closest_on_triangles(p, np.broadcast_to(tri, (4, 3, 3)))
    assert cp == pytest.approx(np.array([[0.2, 0.2, 0], [0.5, 0, 0], [0, 0, 0], [0.5, 0.5, 0]]))


@pytest.fixture(scope="module")
def cylinder():
    """A cylinder of radius 10 and length 20 along z, curved 10-node cells (mid-side nodes on the arc)."""
    return mesh_geometry(_cylinder_step(), order=2, size=3.0)


def _cylinder_step():
    import tempfile

    path = Path(tempfile.mkdtemp()) / "cyl.step"
    with gmsh_session() as gmsh:
        gmsh.model.occ.addCylinder(0, 0, 0, 0, 0, 20, 10)
        gmsh.model.occ.synchronize()
        gmsh.write(str(path))
    return path


def test_curved_cells_locate_and_interpolate_exactly(cylinder):
    """Points in the cylinder up to 0.01 from its surface, many of them between the straight
    chord faces and the arc (the chord sags by about R (1 - cos(h / 2R)) = 0.11 here): all
    inside; interpolating the coordinates returns the point itself (isoparametric map inverted
    by Newton iterations), to 1e-9 of the radius."""
    m = cylinder
    rng = np.random.default_rng(11)
    n = 20_000
    r = 10.0 * np.sqrt(rng.random(n))
    r[: n // 2] = 9.99 - 0.1 * rng.random(n // 2)  # the band between chords and arc
    t = 2 * np.pi * rng.random(n)
    pts = np.stack([r * np.cos(t), r * np.sin(t), 20.0 * rng.random(n)], axis=1)
    loc = locate(m.points, m.cells, pts)
    assert np.count_nonzero(loc.outside) == 0
    assert interpolate(m.cells, loc, m.points) == pytest.approx(pts, abs=1e-9 * 10.0)
    # Outside the arc by 1: the distance is 1 within the chord's sag.
    out = locate(m.points, m.cells, [[11.0, 0.0, 10.0], [0.0, -11.0, 5.0]])
    assert out.outside == pytest.approx([1.0, 1.0], abs=0.12)


def test_quadratic_field_exact_on_straight_tet10(cubes):
    """A quadratic field is reproduced exactly by straight 10-node cells at any located point."""
    m = cubes[(2, 0.35)]
    f = lambda x: x[:, 0] ** 2 + 2 * x[:, 1] * x[:, 2] - 3 * x[:, 2] + 1  # noqa: E731
    pts = np.random.default_rng(2).random((5000, 3))
    loc = locate(m.points, m.cells, pts)
    assert interpolate(m.cells, loc, f(m.points)) == pytest.approx(f(pts), abs=1e-12)


@pytest.mark.gmsh
def test_points_in_every_cell_of_a_graded_curved_part():
    """The lever demo part (10-node, curved, graded sizes): a random point inside each of many
    cells (drawn in reference coordinates) is found, and the coordinates interpolate back."""
    lever = Path(__file__).resolve().parents[1] / "elastofe" / "models" / "lever" / "lever.step"
    m = mesh_geometry(lever, order=2)
    rng = np.random.default_rng(8)
    cells = rng.integers(0, m.cells.shape[0], 50_000)
    lam = rng.dirichlet(np.ones(4), cells.size)
    from elastofe.fem.elements import Tet10

    x = np.einsum("pk,pkd->pd", Tet10.shape(lam[:, 1:]), m.points[m.cells[cells]])
    loc = Locator(m.points, m.cells).locate(x)
    assert np.count_nonzero(loc.outside) == 0
    size = np.linalg.norm(m.points.max(axis=0) - m.points.min(axis=0))
    assert interpolate(m.cells, loc, m.points) == pytest.approx(x, abs=1e-9 * size)
