"""Parametric geometry builders for the benchmark catalogue.

Each builder writes the mesh of one benchmark's part into a folder and returns its path. Most use
Gmsh's OpenCASCADE kernel through :func:`elastofe.geometry.gmsh_session` and write a Gmsh ``.msh``
(so that slabs can be meshed in structured layers through their thickness, which a STEP file
cannot carry); the twisted beam is a structured mesh mapped exactly onto the twisted shape in code
and written as VTU. Every builder takes the element ``order`` (1 or 2) and a target element
``size`` [length] from the case's ``[mesh]`` table, plus its own geometric parameters from
``catalogue.toml``; lengths are in the case's unit system.
"""
from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path
from typing import Callable, Optional, Sequence

import numpy as np

from ..geometry import gmsh_session, mesh_demand
from ..stages import mesh_guard


def _size_field(gmsh, size: float, refine_at: Optional[Sequence[float]], refine_size: Optional[float],
                growth: float) -> None:
    """Global size, optionally graded down to ``refine_size`` at the point ``refine_at``."""
    gmsh.option.setNumber("Mesh.MeshSizeMax", size)
    gmsh.option.setNumber("Mesh.MeshSizeMin", 0.0)
    gmsh.option.setNumber("Mesh.MeshSizeFromCurvature", 0)
    gmsh.option.setNumber("Mesh.MeshSizeFromPoints", 0)
    if refine_at is None or refine_size is None:
        return
    x, y, z = (float(v) for v in refine_at)
    f = gmsh.model.mesh.field.add("MathEval")
    # Size grows linearly with distance from the point, at `growth` length per length.
    expr = (f"Min({size}, {refine_size} + {growth} * Sqrt((x - {x})^2 + (y - {y})^2 + (z - {z})^2))")
    gmsh.model.mesh.field.setString(f, "F", expr)
    gmsh.model.mesh.field.setAsBackgroundMesh(f)
    gmsh.option.setNumber("Mesh.MeshSizeExtendFromBoundary", 0)


def _finish(gmsh, path: Path, order: int, size: float, points: tuple = (), lines: tuple = (),
            zones: tuple = ()) -> Path:
    # The same memory guard as a run's before meshing (volume, boundary area, graded refinements;
    # ``zones``: (area, local size) of surfaces the size grows away from).
    mesh_guard(order)(replace(mesh_demand(gmsh, size, points=points), lines=lines, zones=zones))
    gmsh.model.mesh.generate(3)
    if order == 2:
        gmsh.model.mesh.setOrder(2)  # mid-side nodes on the exact curved geometry
    gmsh.option.setNumber("Mesh.SaveAll", 1)
    gmsh.option.setNumber("Mesh.MshFileVersion", 4.1)
    gmsh.write(str(path))
    return path


def _points(refine_at, refine_size, growth) -> tuple:
    return () if refine_at is None or refine_size is None else ((float(refine_size), float(growth)),)


def _extrude_layers(occ, surface: int, z0: float, heights: Sequence[float], layers: Sequence[int]) -> None:
    """Extrude a planar surface at z = z0 through stacked slabs of the given heights, each meshed
    in that many structured layers (the slabs share their interfaces, so nodes lie on them)."""
    top = surface
    for h, n in zip(heights, layers):
        out = occ.extrude([(2, top)], 0, 0, h, numElements=[int(n)], recombine=False)
        top = out[0][1]


def elliptic_slab(path: Path, order: int, size: float, *, inner: Sequence[float], outer: Sequence[float],
                  z0: float, heights: Sequence[float], layers: Sequence[int],
                  refine_at=None, refine_size=None, growth: float = 0.25) -> Path:
    """Quarter (x, y ≥ 0) of the region between the ellipses x²/a_i² + y²/b_i² = 1 (``inner``) and
    x²/a_o² + y²/b_o² = 1 (``outer``), as a slab from z0 through ``heights`` (NAFEMS LE1, LE10)."""
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        ai, bi = inner
        ao, bo = outer
        # OpenCASCADE needs the major radius along x; both ellipses here have it so.
        d_out = occ.addDisk(0, 0, z0, ao, bo)
        d_in = occ.addDisk(0, 0, z0, ai, bi)
        ring, _ = occ.cut([(2, d_out)], [(2, d_in)])
        quad = occ.addRectangle(0, 0, z0, 1.1 * ao, 1.1 * bo)
        q, _ = occ.intersect(ring, [(2, quad)])
        occ.synchronize()
        _extrude_layers(occ, q[0][1], z0, heights, layers)
        occ.synchronize()
        _size_field(gmsh, size, refine_at, refine_size, growth)
        return _finish(gmsh, path, order, size, _points(refine_at, refine_size, growth))


def box(path: Path, order: int, size: float, *, extent: Sequence[float], origin=(0.0, 0.0, 0.0)) -> Path:
    """A rectangular block ``extent`` = (lx, ly, lz) from ``origin``, meshed unstructured."""
    with gmsh_session() as gmsh:
        gmsh.model.occ.addBox(*origin, *extent)
        gmsh.model.occ.synchronize()
        _size_field(gmsh, size, None, None, 0.0)
        return _finish(gmsh, path, order, size)


def curved_beam(path: Path, order: int, size: float, *, r_in: float, r_out: float, thickness: float,
                angle_deg: float = 90.0) -> Path:
    """An arc of a ring about the z axis from θ = 0 (the face in y = 0) to ``angle_deg``, radii
    ``r_in``..``r_out``, z from 0 to ``thickness``, meshed unstructured."""
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        ang = math.radians(angle_deg)
        o = occ.addCylinder(0, 0, 0, 0, 0, thickness, r_out, angle=ang)
        i = occ.addCylinder(0, 0, 0, 0, 0, thickness, r_in, angle=ang)
        occ.cut([(3, o)], [(3, i)])
        occ.synchronize()
        _size_field(gmsh, size, None, None, 0.0)
        return _finish(gmsh, path, order, size)


def quarter_ring(path: Path, order: int, size: float, *, a: float, b: float, heights: Sequence[float],
                 layers: Sequence[int]) -> Path:
    """Quarter (x, y ≥ 0) of a thick-walled tube, radii a..b, z from 0 through ``heights``."""
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        ring, _ = occ.cut([(2, occ.addDisk(0, 0, 0, b, b))], [(2, occ.addDisk(0, 0, 0, a, a))])
        q, _ = occ.intersect(ring, [(2, occ.addRectangle(0, 0, 0, 1.1 * b, 1.1 * b))])
        occ.synchronize()
        _extrude_layers(occ, q[0][1], 0.0, heights, layers)
        occ.synchronize()
        _size_field(gmsh, size, None, None, 0.0)
        return _finish(gmsh, path, order, size)


def spherical_shell(path: Path, order: int, size: float, *, a: float, b: float,
                    bore_size: float | None = None, growth: float = 0.25) -> Path:
    """One octant (x, y, z ≥ 0) of a hollow sphere, radii a..b, meshed unstructured; with
    ``bore_size`` the size grows linearly from it at r = a, at ``growth`` length per length."""
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        shell, _ = occ.cut([(3, occ.addSphere(0, 0, 0, b))], [(3, occ.addSphere(0, 0, 0, a))])
        occ.intersect(shell, [(3, occ.addBox(0, 0, 0, 1.1 * b, 1.1 * b, 1.1 * b))])
        occ.synchronize()
        _size_field(gmsh, size, None, None, 0.0)
        if bore_size is not None:
            f = gmsh.model.mesh.field.add("MathEval")
            gmsh.model.mesh.field.setString(
                f, "F", f"Min({size}, {bore_size} + {growth} * Max(0, Sqrt(x^2 + y^2 + z^2) - {a}))")
            gmsh.model.mesh.field.setAsBackgroundMesh(f)
            gmsh.option.setNumber("Mesh.MeshSizeExtendFromBoundary", 0)
        bore = ((math.pi * a * a / 2.0, float(bore_size)),) if bore_size is not None else ()  # octant of 4 pi a^2
        return _finish(gmsh, path, order, size, zones=bore)


def polygon_slab(path: Path, order: int, size: float, *, vertices: Sequence[Sequence[float]],
                 heights: Sequence[float], layers: Sequence[int], z0: float = 0.0,
                 refine_at=None, refine_size=None, growth: float = 0.25) -> Path:
    """A planar polygon (xy ``vertices``, in order) as a slab from z0 through ``heights`` (Cook's
    membrane)."""
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        pts = [occ.addPoint(x, y, z0) for x, y in vertices]
        lines = [occ.addLine(pts[k], pts[(k + 1) % len(pts)]) for k in range(len(pts))]
        s = occ.addPlaneSurface([occ.addCurveLoop(lines)])
        occ.synchronize()
        _extrude_layers(occ, s, z0, heights, layers)
        occ.synchronize()
        _size_field(gmsh, size, refine_at, refine_size, growth)
        return _finish(gmsh, path, order, size, _points(refine_at, refine_size, growth))


def holed_plate(path: Path, order: int, size: float, *, half_length: float, half_width: float,
                radius: float, heights: Sequence[float], layers: Sequence[int], hole_size: float,
                growth: float = 0.25) -> Path:
    """Quarter (x, y ≥ 0) of a plate 2·half_length × 2·half_width with a central hole of
    ``radius``, z from 0 through ``heights``; sizes graded from ``hole_size`` at the hole."""
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        rect = occ.addRectangle(0, 0, 0, half_length, half_width)
        q, _ = occ.cut([(2, rect)], [(2, occ.addDisk(0, 0, 0, radius, radius))])
        occ.synchronize()
        _extrude_layers(occ, q[0][1], 0.0, heights, layers)
        occ.synchronize()
        gmsh.option.setNumber("Mesh.MeshSizeMax", size)
        gmsh.option.setNumber("Mesh.MeshSizeMin", 0.0)
        gmsh.option.setNumber("Mesh.MeshSizeFromCurvature", 0)
        gmsh.option.setNumber("Mesh.MeshSizeFromPoints", 0)
        f = gmsh.model.mesh.field.add("MathEval")
        gmsh.model.mesh.field.setString(
            f, "F", f"Min({size}, {hole_size} + {growth} * Max(0, Sqrt(x^2 + y^2) - {radius}))")
        gmsh.model.mesh.field.setAsBackgroundMesh(f)
        gmsh.option.setNumber("Mesh.MeshSizeExtendFromBoundary", 0)
        # The size grows away from the hole's edge, as about an edge of the plate's thickness.
        return _finish(gmsh, path, order, size, lines=((float(sum(heights)), hole_size, growth),))


def twisted_beam(path: Path, order: int, size: float, *, length: float, width: float, thickness: float,
                 twist_deg: float, divisions: Sequence[int]) -> Path:
    """A straight beam whose rectangular section (``width`` along y, ``thickness`` along z at the
    root) turns linearly about the x axis by ``twist_deg`` from x = 0 to x = ``length``.

    Built as a structured mesh of the straight beam (``divisions`` = (nx, ny, nz) cells, each cut
    into six tetrahedra) whose nodes, the mid-side ones included, are then mapped exactly onto the
    twisted shape by y' = y cos θ(x) − z sin θ(x), z' = y sin θ(x) + z cos θ(x). Written as VTU;
    ``size`` is not used (the divisions set the mesh).
    """
    import meshio

    from ..resources import CELLS_PER_H3, MeshDemand
    from .meshes import structured_block

    nx, ny, nz = (int(v) for v in divisions)
    # Six tetrahedra per cell of the block: guarded as a mesh of that many elements would be.
    mesh_guard(order)(MeshDemand(6.0 * nx * ny * nz / CELLS_PER_H3, 0.0, 1.0))
    pts, cells = structured_block(nx, ny, nz, order)
    x = pts[:, 0] * length
    y = (pts[:, 1] - 0.5) * width
    z = (pts[:, 2] - 0.5) * thickness
    th = math.radians(twist_deg) * x / length
    P = np.stack([x, y * np.cos(th) - z * np.sin(th), y * np.sin(th) + z * np.cos(th)], axis=1)
    ctype = "tetra10" if order == 2 else "tetra"
    meshio.write(str(path), meshio.Mesh(P, [(ctype, cells)]), file_format="vtu")
    return path


def revolved_profile(path: Path, order: int, size: float, *, profile: Sequence[Sequence[float]],
                     arcs: Sequence[int] = (), angle_deg: float = 90.0,
                     refine_at=None, refine_size=None, growth: float = 0.25) -> Path:
    """A solid of revolution about the z axis: the closed (r, z) polygon ``profile`` in the plane
    y = 0, turned from the x axis towards y by ``angle_deg`` (NAFEMS LE11).

    ``arcs`` lists the segments (i from point i to point i + 1, cyclically) that are circular arcs
    about the origin instead of straight lines (both ends must lie at the same distance from it).
    """
    with gmsh_session() as gmsh:
        occ = gmsh.model.occ
        pts = [occ.addPoint(r, 0.0, z) for r, z in profile]
        centre = occ.addPoint(0.0, 0.0, 0.0)
        n = len(pts)
        curves = [occ.addCircleArc(pts[i], centre, pts[(i + 1) % n]) if i in arcs
                  else occ.addLine(pts[i], pts[(i + 1) % n]) for i in range(n)]
        s = occ.addPlaneSurface([occ.addCurveLoop(curves)])
        occ.revolve([(2, s)], 0, 0, 0, 0, 0, 1, math.radians(angle_deg))
        occ.remove([(0, centre)])
        occ.synchronize()
        _size_field(gmsh, size, refine_at, refine_size, growth)
        return _finish(gmsh, path, order, size, _points(refine_at, refine_size, growth))


def shaft(path: Path, order: int, size: float, *, radius: float, length: float) -> Path:
    """A round shaft of ``radius`` along x from the origin to ``length``."""
    with gmsh_session() as gmsh:
        gmsh.model.occ.addCylinder(0.0, 0.0, 0.0, length, 0.0, 0.0, radius)
        gmsh.model.occ.synchronize()
        _size_field(gmsh, size, None, None, 0.0)
        return _finish(gmsh, path, order, size)


#: The builders the catalogue may name.
BUILDERS: dict[str, Callable[..., Path]] = {
    "shaft": shaft,
    "elliptic_slab": elliptic_slab,
    "box": box,
    "curved_beam": curved_beam,
    "quarter_ring": quarter_ring,
    "spherical_shell": spherical_shell,
    "polygon_slab": polygon_slab,
    "holed_plate": holed_plate,
    "twisted_beam": twisted_beam,
    "revolved_profile": revolved_profile,
}
