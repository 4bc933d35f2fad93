"""XDMF meshes (.xdmf/.xmf; arrays inline in the XML or in an HDF5 file beside it) are read as
.vtu files are: the same mesh of the cantilever bar written as .vtu and as XDMF solves to the same
numbers, the tip deflection agrees with Timoshenko beam theory, and a broken file stops the run
with one line on the case's key (exit 2)."""
from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest

import elastofe
from elastofe.cli import main
from elastofe.errors import CaseError
from elastofe.geometry import mesh_geometry
from elastofe.mesh import surface_catalogue
from tests.conftest import cantilever_text, write_case
from tests.test_cantilever import NU, E, P, timoshenko_tip_deflection

pytestmark = pytest.mark.gmsh  # the bar is meshed with Gmsh from its STEP file

SIZE = 5.0  # the coarser of test_cantilever's two sizes (within 2 % of Timoshenko there)


@pytest.fixture(scope="module")
def bar_files(parts, tmp_path_factory):
    """The bar meshed by elastofe (10-node tetrahedra) and written with meshio as .vtu, as XDMF with
    HDF5 data (bar.xdmf + bar.h5), as XDMF with the arrays inline (bar_inline.xmf), all with the
    boundary triangles and their surface ids, and as inline XDMF of the tetrahedra alone."""
    import meshio

    mesh = mesh_geometry(parts["bar"], order=2, size=SIZE)
    d = tmp_path_factory.mktemp("xdmf")
    full = meshio.Mesh(mesh.points, [("tetra10", mesh.cells), ("triangle6", mesh.faces)],
                       cell_data={"surface_id": [np.zeros(len(mesh.cells), np.int64), mesh.face_surface]})
    meshio.write(str(d / "bar.vtu"), full)
    meshio.write(str(d / "bar.xdmf"), full)  # meshio's default: HDF5 heavy data in bar.h5
    meshio.write(str(d / "bar_inline.xmf"), full, file_format="xdmf", data_format="XML")
    meshio.write(str(d / "bar_bare.xdmf"), meshio.Mesh(mesh.points, [("tetra10", mesh.cells)]),
                 data_format="XML")
    assert (d / "bar.h5").is_file()
    return {"dir": d, "mesh": mesh}


def run_bar(d, name):
    case = write_case(d / f"{name}.toml", cantilever_text(d / name, size=SIZE, E=E, nu=NU, force=(0, -P, 0)))
    return elastofe.run(case, out=d / f"out-{name}")


def test_cantilever_from_xdmf_equals_vtu_and_timoshenko(bar_files):
    d = bar_files["dir"]
    runs = {name: run_bar(d, name) for name in ("bar.vtu", "bar.xdmf", "bar_inline.xmf", "bar_bare.xdmf")}
    ref = runs["bar.vtu"]
    scale = np.abs(ref.u).max()
    for name, res in runs.items():
        assert res.mesh.cells.shape == bar_files["mesh"].cells.shape
        # The same mesh from either file: the same solution to round-off.
        assert np.allclose(res.u, ref.u, rtol=0, atol=1e-12 * scale), name
        # The tip deflection against P L^3 / (3 E I) + P L / (k G A) (Timoshenko & Gere; Cowper's k),
        # within the 2 % band of test_cantilever (the clamped root stiffens the bar slightly).
        uy = -res.points["tip"]["displacement"][1]
        assert abs(uy - timoshenko_tip_deflection()) / timoshenko_tip_deflection() < 0.02, name
    # Surface ids: from the file's triangles where it has them, else found from the faces'
    # features; the box has six plane faces of areas 100 (ends) and 1000 (sides) either way.
    for name in ("bar.xdmf", "bar_bare.xdmf"):
        areas = sorted(s.area for s in surface_catalogue(runs[name].mesh))
        assert np.allclose(areas, [100, 100, 1000, 1000, 1000, 1000], rtol=1e-9), name
    assert np.array_equal(runs["bar.xdmf"].mesh.face_surface, runs["bar.vtu"].mesh.face_surface)
    # The run's record hashes the .h5 beside the .xdmf: a changed mesh shows in summary.json.
    import hashlib
    import json

    doc = json.loads((d / "out-bar.xdmf" / "summary.json").read_text())
    heavy = doc["inputs"]["geometry_data_files"]
    assert [Path(h["path"]).name for h in heavy] == ["bar.h5"]
    assert heavy[0]["sha256"] == hashlib.sha256((d / "bar.h5").read_bytes()).hexdigest()
    inline = json.loads((d / "out-bar_inline.xmf" / "summary.json").read_text())
    assert "geometry_data_files" not in inline["inputs"]


def test_geometry_unit_scales_an_xdmf_mesh(bar_files):
    """geometry.unit = "cm" on a case in mm: every coordinate x 10 (1 cm = 10 mm exactly)."""
    path = bar_files["dir"] / "bar_inline.xmf"
    plain = mesh_geometry(path, length_unit="mm")
    cm = mesh_geometry(path, length_unit="mm", unit="cm")
    assert np.allclose(cm.points, 10.0 * plain.points, rtol=1e-15, atol=0)
    assert cm.source.scale == pytest.approx(10.0, rel=1e-15)


def test_surfaces_and_check_commands_take_an_xdmf_mesh(bar_files, capsys):
    d = bar_files["dir"]
    assert main(["surfaces", str(d / "bar.xdmf")]) == 0
    out = capsys.readouterr().out
    assert out.count("plane") >= 6
    case = write_case(d / "check.toml", cantilever_text(d / "bar_inline.xmf", size=SIZE))
    assert main(["check", str(case), "-q"]) == 0


def test_cell_data_names_bodies_and_surfaces(tmp_path):
    """gmsh:geometrical on the tetrahedra gives each cell its body, surface_id on the triangles the
    surfaces, as in a .vtu (two tetra blocks: XDMF's mixed topology)."""
    import meshio

    from tests.test_pieces import box

    P_, C = box([0, 0, 0], [1, 1, 1], n=(2, 2, 2))  # 48 cells
    meshio.write(str(tmp_path / "bare.xmf"), meshio.Mesh(P_, [("tetra", C)]), file_format="xdmf", data_format="XML")
    bare = mesh_geometry(tmp_path / "bare.xmf", order=1)  # its boundary, surfaces found from features
    tri, ids = bare.faces, bare.face_surface + 10  # the file's own numbers for the same surfaces
    m = meshio.Mesh(P_, [("tetra", C[:20]), ("tetra", C[20:]), ("triangle", tri)],
                    cell_data={"gmsh:geometrical": [np.full(20, 1), np.full(28, 2), ids]})
    for name, kw in (("b.xdmf", {}), ("b.xmf", {"data_format": "XML"})):
        meshio.write(str(tmp_path / name), m, file_format="xdmf", **kw)
        mesh = mesh_geometry(tmp_path / name, order=1)
        assert np.bincount(mesh.cell_body).tolist() == [0, 20, 28]
        assert sorted(set(mesh.face_surface.tolist())) == sorted(set(ids.tolist())), name


def check_fails(tmp_path, capsys, geometry, fragment):
    """`elastofe check` on the cantilever case naming ``geometry``: exit 2, one line, key and words."""
    case = write_case(tmp_path / "c.toml", cantilever_text(geometry, size=SIZE))
    assert main(["check", str(case), "-q"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1, err
    assert "geometry.file" in err and fragment in err, err
    with pytest.raises(CaseError):
        mesh_geometry(geometry)


def test_truncated_xdmf_is_one_line_case_error(bar_files, tmp_path, capsys):
    text = (bar_files["dir"] / "bar_inline.xmf").read_bytes()
    cut = tmp_path / "cut.xmf"
    cut.write_bytes(text[: len(text) // 2])
    check_fails(tmp_path, capsys, cut, "cannot be read as an XDMF mesh")


def test_xdmf_without_its_h5_is_one_line_case_error(bar_files, tmp_path, capsys):
    lone = tmp_path / "bar.xdmf"
    shutil.copy(bar_files["dir"] / "bar.xdmf", lone)
    check_fails(tmp_path, capsys, lone, "'bar.h5', which is missing")


def test_truncated_h5_is_one_line_case_error(bar_files, tmp_path, capsys):
    shutil.copy(bar_files["dir"] / "bar.xdmf", tmp_path / "bar.xdmf")
    h5 = (bar_files["dir"] / "bar.h5").read_bytes()
    (tmp_path / "bar.h5").write_bytes(h5[: len(h5) // 2])
    check_fails(tmp_path, capsys, tmp_path / "bar.xdmf", "'bar.h5', which cannot be read")


def test_xml_not_xdmf_is_one_line_case_error(tmp_path, capsys):
    other = tmp_path / "other.xdmf"
    other.write_text('<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid"></VTKFile>\n')
    check_fails(tmp_path, capsys, other, "is not an XDMF file")


# ----------------------------------------------------------------------------- the reader alone
def xdmf_text(points, topology, attributes="", topo_attrs='TopologyType="Tetrahedron" NodesPerElement="4"'):
    """An XDMF 3 file with inline (XML) arrays: ``topology`` as numbers, ``points`` (p, 3)."""
    pts = " ".join(f"{v:.17g}" for v in np.asarray(points, float).ravel())
    top = " ".join(str(int(v)) for v in np.asarray(topology).ravel())
    return f"""<?xml version="1.0"?>
<Xdmf Version="3.0"><Domain><Grid Name="g">
<Geometry GeometryType="XYZ"><DataItem DataType="Float" Dimensions="{len(points)} 3" Format="XML" Precision="8">
{pts}</DataItem></Geometry>
<Topology {topo_attrs}><DataItem DataType="Int" Dimensions="{np.asarray(topology).size}" Format="XML" Precision="8">
{top}</DataItem></Topology>{attributes}
</Grid></Domain></Xdmf>
"""


UNIT_TET = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])


def test_mixed_stream_is_split_into_blocks():
    """Type numbers of XDMF's mixed topology (XdmfTopologyType): 6 tetrahedron, 38 10-node
    tetrahedron, 36 6-node triangle, 2 polyline (followed by its node count)."""
    from elastofe.xdmf import mixed_blocks

    tets = np.arange(4 * 100).reshape(100, 4)
    stream = np.concatenate([np.column_stack([np.full(100, 6), tets]).ravel(),
                             [2, 2, 7, 8, 2, 2, 9, 10],
                             np.column_stack([np.full(3, 36), np.arange(18).reshape(3, 6)]).ravel(),
                             [6, 1, 2, 3, 4]])
    blocks = mixed_blocks(stream.astype(np.int64), "m.xdmf")
    assert [(n, c.shape) for n, c in blocks] == [("tetra", (100, 4)), ("line", (2, 2)), ("triangle6", (3, 6)),
                                                 ("tetra", (1, 4))]
    assert np.array_equal(blocks[0][1], tets) and blocks[1][1].tolist() == [[7, 8], [9, 10]]
    with pytest.raises(CaseError, match="ends inside a cell"):
        mixed_blocks(stream[:-2].astype(np.int64), "m.xdmf")
    with pytest.raises(CaseError, match="type number 99"):
        mixed_blocks(np.array([99, 1, 2, 3], np.int64), "m.xdmf")


def test_inline_xdmf_needs_no_h5py(tmp_path, monkeypatch):
    """Arrays inline in the XML are read without h5py; HDF5 data without it names the package."""
    import sys

    import meshio

    meshio.write(str(tmp_path / "h.xdmf"), meshio.Mesh(UNIT_TET, [("tetra", np.array([[0, 1, 2, 3]]))]))
    (tmp_path / "t.xmf").write_text(xdmf_text(UNIT_TET, [0, 1, 2, 3]))
    monkeypatch.setitem(sys.modules, "h5py", None)  # import h5py now raises ImportError
    m = mesh_geometry(tmp_path / "t.xmf", order=1)
    # The unit tetrahedron's volume 1/6 (common practice) from the cell read.
    X = m.points[m.cells[0]]
    assert abs(np.linalg.det(X[1:] - X[0])) / 6 == pytest.approx(1 / 6, rel=1e-15)
    with pytest.raises(CaseError, match=r"needs the h5py package \(pip install h5py\)"):
        mesh_geometry(tmp_path / "h.xdmf", order=1)


@pytest.mark.parametrize("text, fragment", [
    # Well-formed XML whose coordinates are cut short: counted against Dimensions.
    (xdmf_text(UNIT_TET, [0, 1, 2, 3]).replace("0 0 1</DataItem>", "0</DataItem>"), "holds 10 numbers"),
    (xdmf_text(UNIT_TET, [0, 1, 2, 7]), "node numbers outside 0 to 3"),
    (xdmf_text(UNIT_TET, [0, 1, 2, 3]).replace('Format="XML" Precision="8">\n0', 'Format="Binary" Precision="8">\n0',
                                                 1), "Binary form"),
    (xdmf_text(UNIT_TET, [0, 1, 2, 3]).replace('<Grid Name="g">', '<Grid Name="g" GridType="Collection">'),
     "more than one grid"),
    (xdmf_text(np.random.default_rng(1).random((20, 3)), np.arange(20), topo_attrs='TopologyType="Tetrahedron_20"'),
     "cannot use (1 tetra20)"),
    (xdmf_text(UNIT_TET, [0, 1, 2, 3], topo_attrs='TopologyType="Hexahedron"'), "not a whole number of Hexahedron"),
])
def test_damaged_or_unsupported_xdmf_is_refused(tmp_path, text, fragment):
    (tmp_path / "t.xdmf").write_text(text)
    with pytest.raises(CaseError) as e:
        mesh_geometry(tmp_path / "t.xdmf", order=1)
    assert str(e.value).startswith("geometry.file") and fragment in str(e.value) and "\n" not in str(e.value)
