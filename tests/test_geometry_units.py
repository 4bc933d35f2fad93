"""The length unit of the geometry file: read from STEP/IGES text, converted to the case's unit,
overridable by ``geometry.unit``, reported with the scale used, and an implausible part size warned.

Inch and metre STEP files are made here from a Gmsh-written millimetre file by replacing its unit
entity (ISO 10303-41 conversion-based unit INCH = 25.4 mm, SI unit METRE), as CAD systems write
them; OpenCASCADE's own reading of the same files is checked against ours.
"""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from elastofe.case import load_case, parse_case
from elastofe.errors import CaseError, ModelError
from elastofe.geometry import cad_import_units, gmsh_session, mesh_geometry
from elastofe.geometry.fileunits import file_length_unit, iges_length_unit, step_length_unit
from tests.conftest import write_case, write_step

MM_UNIT = re.compile(r"#(\d+) = \( LENGTH_UNIT\(\) NAMED_UNIT\(\*\) SI_UNIT\(\.MILLI\.,\.METRE\.\) \);")
INCH_UNIT = ("#{n} = ( CONVERSION_BASED_UNIT('INCH',#9001) LENGTH_UNIT() NAMED_UNIT(#9002) );\n"
             "#9001 = LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#9003);\n"
             "#9002 = DIMENSIONAL_EXPONENTS(1.,0.,0.,0.,0.,0.,0.);\n"
             "#9003 = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.) );")


def box_step(path: Path, dims, unit: str = "mm") -> Path:
    """A STEP file of the box [0, dims] whose numbers are ``dims`` in ``unit`` ("mm", "in", "m")."""
    write_step(path, lambda occ: occ.addBox(0, 0, 0, *dims))
    text = path.read_text()
    assert len(MM_UNIT.findall(text)) == 1
    if unit == "in":
        text = MM_UNIT.sub(lambda m: INCH_UNIT.format(n=m.group(1)), text)
    elif unit == "m":
        text = MM_UNIT.sub(lambda m: f"#{m.group(1)} = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT($,.METRE.) );", text)
    path.write_text(text)
    return path


def bbox(mesh):
    return np.concatenate([mesh.points.min(axis=0), mesh.points.max(axis=0)])


# ----------------------------------------------------------------------------- reading the unit
@pytest.mark.parametrize("text, name, metres", [
    ("#5 = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.) );", "mm", 1e-3),
    ("#5=(LENGTH_UNIT()NAMED_UNIT(*)SI_UNIT($,.METRE.));", "m", 1.0),
    ("#5 = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.CENTI.,.METRE.) );", "cm", 1e-2),
    # Conversion-based inch through a length measure of 25.4 mm (ISO 10303-41), complex form of the measure.
    ("#7 = ( CONVERSION_BASED_UNIT('INCH',#8) LENGTH_UNIT() NAMED_UNIT(#9) );\n"
     "#8 = ( LENGTH_MEASURE_WITH_UNIT() MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#10) );\n"
     "#10 = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.) );\n"
     "#11 = ( GEOMETRIC_REPRESENTATION_CONTEXT(3) GLOBAL_UNIT_ASSIGNED_CONTEXT((#7,#12)) "
     "REPRESENTATION_CONTEXT('','') );", "in", 0.0254),
    # A foot given as 0.3048 m, and a conversion-based unit known only by its name.
    ("#7 = ( CONVERSION_BASED_UNIT('FOOT',#8) LENGTH_UNIT() NAMED_UNIT(#9) );\n"
     "#8 = LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(0.3048),#10);\n"
     "#10 = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT($,.METRE.) );", "ft", 0.3048),
    ("#7 = ( CONVERSION_BASED_UNIT('INCH',#8) LENGTH_UNIT() NAMED_UNIT(#9) );", "in", 0.0254),
])
def test_step_unit_entities(text, name, metres):
    u = step_length_unit("ISO-10303-21;\nDATA;\n" + text + "\nENDSEC;\n")
    assert u is not None and u.name == name and u.metres == pytest.approx(metres, rel=1e-12)


def test_step_without_unit_and_with_two_units():
    assert step_length_unit("ISO-10303-21;\nDATA;\n#1 = CARTESIAN_POINT('',(0.,0.,0.));\nENDSEC;\n") is None
    two = ("#1 = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.) );\n"
           "#2 = ( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT($,.METRE.) );\n"
           "#3 = ( GEOMETRIC_REPRESENTATION_CONTEXT(3) GLOBAL_UNIT_ASSIGNED_CONTEXT((#1)) "
           "REPRESENTATION_CONTEXT('','') );\n"
           "#4 = ( GEOMETRIC_REPRESENTATION_CONTEXT(3) GLOBAL_UNIT_ASSIGNED_CONTEXT((#2)) "
           "REPRESENTATION_CONTEXT('','') );\n")
    u = step_length_unit(two)
    assert u.name == "mm" and "several length units (mm, m)" in u.note


def _iges_global(params: str) -> str:
    """An IGES start and global section holding ``params`` (columns 1-72, 'G' in 73)."""
    lines = ["".ljust(72) + "S0000001"]
    for i in range(0, len(params), 72):
        lines.append(params[i:i + 72].ljust(72) + f"G{i // 72 + 1:07d}")
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("flag, name, metres", [("1", "2HIN", 0.0254), ("2", "2HMM", 1e-3), ("6", "1HM", 1.0),
                                                 ("3", "4HINCH", 0.0254), ("10", "2HCM", 1e-2), ("4", "2HFT", 0.3048)])
def test_iges_unit_flag(flag, name, metres):
    """IGES 5.3 global parameter 14 (unit flag) and 15 (unit name); 3 means 'named in 15'."""
    params = (f"1H,,1H;,4Hpart,9Hpart.iges,3Hsys,3Hsys,32,308,15,308,15,4Hpart,1.,{flag},{name},1,0.01,"
              "15H20260101.000000,1E-07,10.,4Hroot,,11,0,15H20260101.000000;")
    u = iges_length_unit(_iges_global(params))
    assert u is not None and u.metres == pytest.approx(metres, rel=1e-12)
    # Default delimiters written as empty parameters, as OpenCASCADE writes them.
    u2 = iges_length_unit(_iges_global(",," + params[8:]))
    assert u2.metres == pytest.approx(metres, rel=1e-12)


@pytest.mark.gmsh
def test_opencascade_reads_our_files_as_we_do(tmp_path):
    """The inch and metre files made here mean to OpenCASCADE what our reader says: imported into
    a millimetre model, the 10 x 1 x 1 box is 254 mm (inch) and 10,000 mm (metre) long."""
    for unit, length in (("in", 254.0), ("m", 10000.0), ("mm", 10.0)):
        p = box_step(tmp_path / f"bar-{unit}.step", (10, 1, 1), unit)
        assert file_length_unit(p).name == unit
        target, occ_scale, src = cad_import_units(p, 1e-3, None)
        with gmsh_session() as gmsh:
            gmsh.option.setString("Geometry.OCCTargetUnit", target)
            gmsh.option.setNumber("Geometry.OCCScaling", occ_scale)
            gmsh.model.occ.importShapes(str(p))
            gmsh.model.occ.synchronize()
            assert gmsh.model.getBoundingBox(-1, -1)[3] == pytest.approx(length, rel=1e-6)  # grown by a tolerance
        assert src.scale == pytest.approx(length / 10.0, rel=1e-12)


@pytest.mark.gmsh
def test_iges_inch_file(tmp_path):
    """An IGES file whose unit flag says inch (1, "IN"): OpenCASCADE and our reader agree."""
    with gmsh_session() as gmsh:
        gmsh.model.occ.addBox(0, 0, 0, 10, 1, 1)
        gmsh.model.occ.synchronize()
        gmsh.write(str(tmp_path / "mm.igs"))
    text = (tmp_path / "mm.igs").read_text()
    assert ",2,2HMM," in text
    (tmp_path / "in.igs").write_text(text.replace(",2,2HMM,", ",1,2HIN,"))
    assert file_length_unit(tmp_path / "in.igs").name == "in"
    target, occ_scale, src = cad_import_units(tmp_path / "in.igs", 0.0254, None)
    assert (target, occ_scale, src.scale) == ("INCH", 1.0, 1.0)
    with gmsh_session() as gmsh:
        gmsh.option.setString("Geometry.OCCTargetUnit", "MM")
        from elastofe.geometry import _import_cad

        with pytest.raises(CaseError, match="no solid volume"):  # IGES from OpenCASCADE holds faces only
            _import_cad(gmsh, tmp_path / "in.igs", "MM", 1.0)
        assert gmsh.model.getBoundingBox(-1, -1)[3] == pytest.approx(254.0, rel=1e-6)  # box grown by the 1e-7 tolerance


# ----------------------------------------------------------------------------- meshing in units
@pytest.mark.gmsh
@pytest.mark.parametrize("file_unit, case_unit, geometry_unit, length, scale", [
    ("in", "inch", None, 10.0, 1.0),        # a 10 in bar in an in-lbf case is 10 long
    ("in", "mm", None, 254.0, 25.4),        # ... and 254 in a mm-N case
    ("m", "m", None, 10.0, 1.0),            # a metre file in an m-N case
    ("m", "mm", None, 10000.0, 1000.0),
    ("mm", "m", None, 0.01, 1e-3),
    ("in", "mm", "mm", 10.0, 1.0),          # geometry.unit overrides what the file states
    ("mm", "inch", "in", 10.0, 1.0),
])
def test_mesh_in_case_units(tmp_path, file_unit, case_unit, geometry_unit, length, scale):
    p = box_step(tmp_path / "bar.step", (10, 1, 1), file_unit)
    m = mesh_geometry(p, order=1, size=length / 4, length_unit=case_unit, unit=geometry_unit)
    assert bbox(m) == pytest.approx([0, 0, 0, length, length / 10, length / 10], rel=1e-12, abs=1e-12 * length)
    assert m.source.scale == pytest.approx(scale, rel=1e-12)
    assert m.source.file_unit == file_unit
    assert m.source.unit_origin == ("case" if geometry_unit else "file")
    overridden = geometry_unit is not None and geometry_unit != file_unit
    assert any("overrides the unit" in w for w in m.source.warnings) == overridden


@pytest.mark.gmsh
def test_ten_inch_bar_in_inch_pound_case(tmp_path):
    """A 10 x 1 x 1 in bar from an inch STEP in an in-lbf case, 1000 lbf along it, three symmetry
    planes (no lateral restraint): uniaxial stress F/A = 1000 psi and end displacement
    F L / (E A) = 1000 * 10 / (3e7 * 1) = 3.333e-4 in (common practice: axial member, e.g. any
    mechanics-of-materials text). 4-node cells reproduce a uniform stress exactly (patch test).
    Before the unit was read the bar came out 254 long and its stress 645 times too low."""
    from elastofe.pipeline import solve_case

    p = box_step(tmp_path / "bar.step", (10, 1, 1), "in")
    case_path = write_case(tmp_path / "bar.toml", f"""
        units = "in-lbf"
        [geometry]
        file = "{p}"
        [material]
        E = "30e6 psi"
        nu = 0.3
        [mesh]
        order = 1
        size = 0.5
        [regions]
        x0 = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        y0 = {{ plane = {{ point = [0, 0, 0], normal = [0, 1, 0] }} }}
        z0 = {{ plane = {{ point = [0, 0, 0], normal = [0, 0, 1] }} }}
        tip = {{ plane = {{ point = [10, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "x0"
        fix = "n"
        [[support]]
        region = "y0"
        fix = "n"
        [[support]]
        region = "z0"
        fix = "n"
        [[load]]
        region = "tip"
        force = ["1000 lbf", 0, 0]
        """)
    case = load_case(case_path)
    mesh = mesh_geometry(case.geometry.file, order=1, size=0.5, length_unit=case.units.length,
                         unit=case.geometry.unit)
    res = solve_case(case, mesh=mesh)
    assert bbox(res.mesh)[3] == pytest.approx(10.0, rel=1e-12)
    assert res.stress[:, 0] == pytest.approx(np.full(res.mesh.nodes, 1000.0), rel=1e-8)
    tip = np.abs(res.mesh.points[:, 0] - 10.0) < 1e-9
    assert res.u[tip, 0] == pytest.approx(np.full(tip.sum(), 1000.0 * 10 / 30e6), rel=1e-8)


@pytest.mark.gmsh
def test_one_metre_cube_in_metre_newton_case(tmp_path):
    """A 1 m cube saved in metres is 1 m in an m-N case (volume 1 m^3), not 1000."""
    p = box_step(tmp_path / "cube.step", (1, 1, 1), "m")
    m = mesh_geometry(p, order=1, size=0.5, length_unit="m")
    assert bbox(m) == pytest.approx([0, 0, 0, 1, 1, 1], abs=1e-12)
    X = m.points[m.cells]
    vol = np.abs(np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0])).sum() / 6
    assert vol == pytest.approx(1.0, rel=1e-12)
    assert m.source.describe() == "cube.step read in m (stated in the file); part size 1.732 m (bounding-box diagonal)"
    assert m.source.warnings == ()


@pytest.mark.gmsh
def test_brep_states_no_unit(tmp_path):
    """BREP has no unit: the case's length unit is assumed and said so; geometry.unit sets it."""
    with gmsh_session() as gmsh:
        gmsh.model.occ.addBox(0, 0, 0, 10, 1, 1)
        gmsh.model.occ.synchronize()
        gmsh.write(str(tmp_path / "bar.brep"))
    m = mesh_geometry(tmp_path / "bar.brep", order=1, length_unit="inch")
    assert bbox(m)[3] == pytest.approx(10.0) and m.source.unit_origin == "assumed"
    assert any("states no length unit" in w for w in m.source.warnings)
    m2 = mesh_geometry(tmp_path / "bar.brep", order=1, length_unit="inch", unit="mm")
    assert bbox(m2)[3] == pytest.approx(10.0 / 25.4, rel=1e-12) and m2.source.warnings == ()


def test_mesh_file_scaled_by_geometry_unit(tmp_path):
    """Mesh files state no unit: their numbers are the case's unless geometry.unit says otherwise."""
    import meshio

    P = np.array([[0.0, 0, 0], [100, 0, 0], [0, 100, 0], [0, 0, 100]])
    meshio.write(str(tmp_path / "t.vtu"), meshio.Mesh(P, [("tetra", np.array([[0, 1, 2, 3]]))]))
    m = mesh_geometry(tmp_path / "t.vtu", length_unit="m")
    assert bbox(m)[3] == 100.0 and m.source.unit_origin == "assumed" and m.source.scale == 1.0
    m2 = mesh_geometry(tmp_path / "t.vtu", length_unit="m", unit="mm")
    assert bbox(m2)[3] == pytest.approx(0.1, rel=1e-12) and m2.source.scale == pytest.approx(1e-3)


# ----------------------------------------------------------------------------- plausibility
@pytest.mark.gmsh
@pytest.mark.parametrize("dims, unit, case_unit, word", [
    ((0.01, 0.005, 0.002), "mm", "mm", "small"),     # a 0.01 mm bracket
    ((40, 10, 5), "m", "mm", "large"),               # a 40 m bracket
    ((40000, 10000, 5000), "mm", "m", "large"),
    ((100, 50, 20), "mm", "mm", None),               # a 100 mm bracket: nothing to say
])
def test_implausible_size_is_warned(tmp_path, dims, unit, case_unit, word):
    p = box_step(tmp_path / "bracket.step", dims, unit)
    m = mesh_geometry(p, order=1, size=max(dims) / 2 * {"mm": 1, "m": 1000}[unit] /
                      {"mm": 1, "m": 1000}[case_unit], length_unit=case_unit)
    found = [w for w in m.source.warnings if "implausibly" in w]
    if word is None:
        assert found == []
    else:
        assert len(found) == 1 and f"implausibly {word}" in found[0] and "geometry.unit" in found[0]


@pytest.mark.gmsh
def test_memory_refusal_names_the_size(tmp_path):
    """A refusal before meshing (too many cells) says the part's size looked implausible."""
    p = box_step(tmp_path / "big.step", (40, 10, 5), "m")

    def refuse(demand):  # a resources.MeshDemand (volume, area, size)
        raise ModelError("the run would need about 21,910 GiB")

    with pytest.raises(ModelError, match=r"21,910 GiB \(note: the part measures 4\.1\d*e\+04 mm across"):
        mesh_geometry(p, order=1, size=1.0, before_mesh=refuse, length_unit="mm")


@pytest.mark.gmsh
def test_target_unit_does_not_leak_into_later_sessions(tmp_path):
    """OpenCASCADE keeps its target unit process-wide: after a metre import, a STEP written in a
    new session must still be in millimetres with the same numbers."""
    mesh_geometry(box_step(tmp_path / "m.step", (1, 1, 1), "m"), order=1, size=0.5, length_unit="m")
    p = write_step(tmp_path / "after.step", lambda occ: occ.addBox(0, 0, 0, 2, 1, 1))
    assert file_length_unit(p).name == "mm" and "(2.,0.,0.)" in p.read_text().replace(" ", "")


# ----------------------------------------------------------------------------- the case key
def test_geometry_unit_key():
    doc = {"units": "in-lbf", "geometry": {"file": "bar.step", "unit": "mm"}, "material": {"E": 3e7, "nu": 0.3},
           "regions": {"a": {"surfaces": [1]}}, "support": [{"region": "a"}]}
    assert parse_case(doc).geometry.unit == "mm"
    assert parse_case({**doc, "geometry": {"file": "bar.step"}}).geometry.unit is None
    for bad in ("N", 25.4, "9**9**9", ""):
        with pytest.raises(CaseError, match="geometry.unit"):
            parse_case({**doc, "geometry": {"file": "bar.step", "unit": bad}})


@pytest.mark.gmsh
def test_cli_inch_file_in_inch_case(tmp_path):
    import elastofe

    p = box_step(tmp_path / "bar.step", (10, 1, 1), "in")
    case = write_case(tmp_path / "c.toml", f"""
        units = "in-lbf"
        [geometry]
        file = "{p}"
        [material]
        E = "30e6 psi"
        nu = 0.3
        [mesh]
        order = 1
        size = 0.5
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        """)
    res = elastofe.run(case)
    assert res.mesh.points[:, 0].max() == pytest.approx(10.0)


@pytest.mark.gmsh
def test_step_whose_context_assigns_no_length_unit(tmp_path):
    """A STEP file whose representation context lists no length unit (its mm entity left unused):
    OpenCASCADE takes the numbers as written (measured), so elastofe takes them in the case's
    unit and says so."""
    p = box_step(tmp_path / "bar.step", (10, 1, 1), "mm")
    text = p.read_text()
    n = MM_UNIT.search(text).group(1)
    stripped = re.sub(r"GLOBAL_UNIT_ASSIGNED_CONTEXT\s*\(\s*\(#" + n + ",", "GLOBAL_UNIT_ASSIGNED_CONTEXT((", text)
    assert stripped != text
    p.write_text(stripped)
    assert file_length_unit(p) is None
    for case_unit in ("m", "inch"):
        m = mesh_geometry(p, order=1, size=5.0, length_unit=case_unit)
        assert bbox(m)[3] == pytest.approx(10.0, rel=1e-12)
        assert m.source.unit_origin == "assumed" and any("states no length unit" in w for w in m.source.warnings)
    m = mesh_geometry(p, order=1, size=5.0, length_unit="m", unit="mm")
    assert bbox(m)[3] == pytest.approx(0.01, rel=1e-12)


@pytest.mark.gmsh
@pytest.mark.parametrize("unit, case_unit", [("parsec", "mm"), ("nm", "m"), ("light_year", "inch")])
def test_absurd_geometry_unit_is_refused_before_reading(tmp_path, unit, case_unit):
    """OpenCASCADE's reader did not return (hours) from a STEP file read in parsecs (1 pc = 3.09e19 mm,
    pint's definition); such a unit is refused, naming it, before the file is read."""
    import time

    p = box_step(tmp_path / "bar.step", (10, 1, 1), "mm")
    t = time.perf_counter()
    with pytest.raises(CaseError) as err:
        mesh_geometry(p, order=1, size=1.0, length_unit=case_unit, unit=unit)
    assert err.value.key == "geometry.unit" and err.value.value == unit
    assert "no part is drawn in such a unit" in str(err.value)
    assert time.perf_counter() - t < 30
