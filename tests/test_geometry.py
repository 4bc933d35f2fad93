"""Geometry and mesh input: STEP round trip, surface catalogue, .msh physical groups, VTU round trip."""
import numpy as np
import pytest

import elastofe
from elastofe.fem.assembly import cell_volumes, is_curved
from elastofe.geometry import gmsh_session, mesh_geometry
from elastofe.mesh import surface_catalogue
from tests.conftest import write_case

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh


def test_step_round_trip_box_catalogue(parts):
    # A 100 x 10 x 10 box exported by Gmsh as STEP and read back: six planes of known area.
    mesh = mesh_geometry(parts["bar"], order=2, size=5.0)
    cat = surface_catalogue(mesh)
    assert len(cat) == 6 and all(s.kind == "plane" for s in cat)
    assert sorted(round(s.area, 9) for s in cat) == [100.0] * 2 + [1000.0] * 4
    # Straight-sided box: every TET10 edge node at its edge midpoint (checks the node reordering).
    assert not is_curved(mesh.points, mesh.cells).any()
    assert cell_volumes(mesh.points, mesh.cells).sum() == pytest.approx(10000.0, rel=1e-12)
    for s in cat:  # outward normals
        c = np.asarray(s.centroid) - np.array([50.0, 0, 0])
        assert np.dot(c, s.normal) > 0


def test_curved_mid_side_nodes_on_cad_surface(parts):
    mesh = mesh_geometry(parts["ring"], order=2, size=3.0)
    cyl = {round(s.radius, 6): s for s in surface_catalogue(mesh) if s.kind == "cylinder"}
    assert set(cyl) == {10.0, 20.0}
    nodes = np.unique(mesh.surface_faces([cyl[10.0].id]))
    r = np.hypot(mesh.points[nodes, 0], mesh.points[nodes, 1])
    assert np.abs(r - 10.0).max() < 1e-9  # mid-side nodes lie on the cylinder, not on chords
    # Quarter annulus volume pi (b^2 - a^2) h / 4, approximated by curved TET10 (common practice).
    vol = cell_volumes(mesh.points, mesh.cells).sum()
    assert vol == pytest.approx(np.pi * (400 - 100) * 5 / 4, rel=1e-4)


def test_msh_physical_groups_are_regions(tmp_path):
    msh = tmp_path / "block.msh"
    with gmsh_session() as gmsh:
        gmsh.model.occ.addBox(0, 0, 0, 20, 4, 4)
        gmsh.model.occ.synchronize()
        for dim, tag in gmsh.model.getEntities(2):
            x = gmsh.model.occ.getCenterOfMass(dim, tag)[0]
            if abs(x) < 1e-9:
                gmsh.model.setPhysicalName(2, gmsh.model.addPhysicalGroup(2, [tag]), "fixed_end")
            elif abs(x - 20) < 1e-9:
                gmsh.model.setPhysicalName(2, gmsh.model.addPhysicalGroup(2, [tag]), "loaded_end")
        gmsh.model.addPhysicalGroup(3, [1])
        gmsh.option.setNumber("Mesh.MeshSizeMax", 2.0)
        gmsh.model.mesh.generate(3)
        gmsh.model.mesh.setOrder(2)
        gmsh.option.setNumber("Mesh.SaveAll", 1)
        gmsh.write(str(msh))
    case = write_case(tmp_path / "c.toml", f"""
        [geometry]
        file = "{msh.name}"
        [material]
        E = 1000.0
        nu = 0.25
        [[support]]
        region = "fixed_end"
        [[load]]
        region = "loaded_end"
        force = [16.0, 0, 0]
        [[point]]
        name = "end"
        at = [20, 2, 2]
        """)
    res = elastofe.run(case)
    # Axial bar: u = F L / (E A) = 16 * 20 / (1000 * 16) = 0.02 (common practice); the held end
    # restrains the Poisson contraction, so allow 2 %.
    assert res.points["end"]["displacement"][0] == pytest.approx(0.02, rel=0.02)


def test_vtu_round_trip_gives_same_solution(cantilever_case, tmp_path):
    import meshio

    path = cantilever_case(size=5.0, order=2)
    res = elastofe.run(path, out=tmp_path / "a")
    m = meshio.read(tmp_path / "a" / "result.vtu")
    assert m.cells[0].type == "tetra10"
    assert np.allclose(m.point_data["displacement"], res.u, rtol=0, atol=1e-14)
    # Solve again from the written mesh (surfaces found by feature angle): same tip deflection.
    case2 = tmp_path / "b.toml"
    case2.write_text(path.read_text().replace(str(path.parent / "x"), "").replace(
        f'file = "{res.case.geometry.file}"', f'file = "{tmp_path / "a" / "result.vtu"}"'))
    res2 = elastofe.run(case2)
    assert res2.points["tip"]["displacement"] == pytest.approx(res.points["tip"]["displacement"], rel=1e-9)
