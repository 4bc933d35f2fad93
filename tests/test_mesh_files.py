"""Mesh files with several cell blocks: every tetrahedron is used, and what cannot be used is
refused by name and count, never dropped (VTU and VTK through meshio, MSH through Gmsh, XDMF with
HDF5 or inline arrays through elastofe.xdmf)."""
from __future__ import annotations

import numpy as np
import pytest

from elastofe.errors import CaseError
from elastofe.geometry import mesh_geometry
from elastofe.mesh import volume_cells
from tests.test_pieces import box

FORMATS = [("vtu", "vtu"), ("vtk", "vtk"), ("msh", "gmsh22"), ("xdmf", "xdmf"), ("xmf", "xdmf-xml")]
pytestmark = pytest.mark.gmsh  # meshes made or read through Gmsh


def write(path, points, blocks, fmt):
    """Write ``blocks`` [(type, cells)] with meshio; Gmsh files get one volume entity per block."""
    import meshio

    cell_data = {}
    if fmt == "gmsh22":
        cell_data = {"gmsh:physical": [np.full(len(c), i + 1) for i, (_, c) in enumerate(blocks)],
                     "gmsh:geometrical": [np.full(len(c), i + 1) for i, (_, c) in enumerate(blocks)]}
    kw = {"binary": False} if fmt == "gmsh22" else {"data_format": "XML"} if fmt == "xdmf-xml" else {}
    meshio.write(str(path), meshio.Mesh(points, blocks, cell_data=cell_data), file_format=fmt.split("-")[0], **kw)
    return path


@pytest.mark.parametrize("suffix, fmt", FORMATS)
def test_two_tetra_blocks_are_both_used(tmp_path, suffix, fmt):
    P, C = box([0, 0, 0], [1, 1, 1], n=(4, 4, 2))  # 192 cells
    path = write(tmp_path / f"two.{suffix}", P, [("tetra", C[:100]), ("tetra", C[100:])], fmt)
    m = mesh_geometry(path, order=1)
    assert m.cells.shape == (192, 4)
    # The cube's volume (1) from the cells read: none lost.
    X = m.points[m.cells]
    vol = np.abs(np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0])).sum() / 6
    assert vol == pytest.approx(1.0, rel=1e-12)
    if fmt == "gmsh22":  # each block is a volume entity of the file: the cells' bodies
        assert np.bincount(m.cell_body).tolist() == [0, 100, 92]


@pytest.mark.parametrize("suffix, fmt", FORMATS)
def test_mixed_orders_are_refused(tmp_path, suffix, fmt):
    P, C = box([0, 0, 0], [1, 1, 1])
    # A second, separate 10-node tetrahedron (edge nodes at the midpoints).
    T = np.array([[3.0, 0, 0], [4, 0, 0], [3, 1, 0], [3, 0, 1]])
    edges = [(0, 1), (1, 2), (0, 2), (0, 3), (1, 3), (2, 3)]
    T10 = np.vstack([T] + [(T[a] + T[b]) / 2 for a, b in edges])
    pts = np.vstack([P, T10])
    t10 = (np.arange(10) + P.shape[0])[None]
    path = write(tmp_path / f"mixed.{suffix}", pts, [("tetra", C), ("tetra10", t10)], fmt)
    with pytest.raises(CaseError) as e:
        mesh_geometry(path)
    msg = str(e.value)
    assert msg.startswith("geometry.file")
    assert "mixes 4- and 10-node tetrahedra" in msg
    counts = ("48 tetra, 1 tetra10" if fmt != "gmsh22" else "48 Tetrahedron 4, 1 Tetrahedron 10")
    assert counts in msg


@pytest.mark.parametrize("suffix, fmt", FORMATS)
def test_hexahedron_is_refused(tmp_path, suffix, fmt):
    P, C = box([0, 0, 0], [1, 1, 1])
    H = np.array([[3.0, 0, 0], [4, 0, 0], [4, 1, 0], [3, 1, 0], [3, 0, 1], [4, 0, 1], [4, 1, 1], [3, 1, 1]])
    path = write(tmp_path / f"hex.{suffix}", np.vstack([P, H]),
                 [("tetra", C), ("hexahedron", (np.arange(8) + P.shape[0])[None])], fmt)
    with pytest.raises(CaseError) as e:
        mesh_geometry(path)
    msg = str(e.value)
    assert "cannot use" in msg and ("1 hexahedron" in msg or "1 Hexahedron 8" in msg)
    assert "48 tetra" in msg or "48 Tetrahedron 4" in msg


def test_volume_cells_merges_and_names():
    a, b = np.arange(8).reshape(2, 4), np.arange(8, 20).reshape(3, 4)
    cells, block = volume_cells([("tetra", a), ("triangle", np.zeros((5, 3), int)), ("tetra", b)], "f.vtu")
    assert cells.tolist() == np.vstack([a, b]).tolist() and block.tolist() == [0, 0, 2, 2, 2]
    with pytest.raises(CaseError, match=r"\(2 tetra, 1 wedge, 4 pyramid\)"):
        volume_cells([("tetra", a), ("wedge", np.zeros((1, 6), int)), ("pyramid", np.zeros((4, 5), int))], "f.vtu")
    with pytest.raises(CaseError, match="no tetra or tetra10 cells"):
        volume_cells([("triangle", np.zeros((5, 3), int))], "f.vtu")


def test_triangle_blocks_label_surfaces_from_every_block(tmp_path):
    """Boundary triangles with surface ids in two blocks: both blocks' ids are used."""
    import meshio

    P = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    tets = np.array([[0, 1, 2, 3]])
    tris_a, tris_b = np.array([[0, 2, 1], [0, 1, 3]]), np.array([[0, 3, 2], [1, 2, 3]])
    m = meshio.Mesh(P, [("tetra", tets), ("triangle", tris_a), ("triangle", tris_b)],
                    cell_data={"surface_id": [np.zeros(1, int), np.array([1, 2]), np.array([3, 4])]})
    meshio.write(str(tmp_path / "t.vtu"), m)
    mesh = mesh_geometry(tmp_path / "t.vtu")
    assert sorted(mesh.face_surface.tolist()) == [1, 2, 3, 4]


def test_two_blocks_solve_like_one(tmp_path):
    """The same cube in one block and in two: the same solution (nothing dropped)."""
    import elastofe
    from tests.conftest import write_case

    P, C = box([0, 0, 0], [10, 10, 10], n=(3, 3, 3))
    write(tmp_path / "one.vtu", P, [("tetra", C)], "vtu")
    write(tmp_path / "two.vtu", P, [("tetra", C[:81]), ("tetra", C[81:])], "vtu")
    u = []
    for name in ("one", "two"):
        case = write_case(tmp_path / f"{name}.toml", f"""
            [geometry]
            file = "{name}.vtu"
            [material]
            E = 1000.0
            nu = 0.25
            [regions]
            root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
            tip = {{ plane = {{ point = [10, 0, 0], normal = [1, 0, 0] }} }}
            [[support]]
            region = "root"
            [[load]]
            region = "tip"
            force = [0, -5, 0]
            """)
        res = elastofe.run(case)
        assert res.mesh.cells.shape[0] == 162
        u.append(res.u)
    assert np.allclose(u[0], u[1], rtol=0, atol=1e-12 * np.abs(u[0]).max())
