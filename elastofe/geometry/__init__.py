"""Geometry: the only place that touches the Gmsh session.

CAD files (STEP/BREP/IGES) are imported with Gmsh's OpenCASCADE kernel and meshed; Gmsh .msh
files are read through Gmsh (keeping surface entities and physical groups); VTU/VTK through meshio.

Length units: a STEP or IGES file states its unit (read by :mod:`.fileunits`); OpenCASCADE converts
the file's numbers to ``Geometry.OCCTargetUnit``, which is set to the case's length unit on every
import (its setting is process-wide inside OpenCASCADE and outlives a Gmsh session, so it is
never left to a default). A ``geometry.unit`` of the case overrides the file's unit through
``Geometry.OCCScaling``. BREP and mesh files state no unit: their numbers are taken in
``geometry.unit`` or, without it, in the case's length unit. The mesh carries a
:class:`~elastofe.mesh.GeometrySource` record saying what was done, with warnings.
"""
from __future__ import annotations

import contextlib
import logging
import os
import threading
from dataclasses import replace
from pathlib import Path
from typing import Callable, Optional

import numpy as np

from ..case.load import MESH_SUFFIXES
from ..errors import CaseError, ModelError
from ..fdcapture import captured_fds
from ..mesh import GeometrySource, Mesh, check_readable, from_arrays, mesh_file_arrays, read_mesh_file
from ..resources import MeshDemand, cells_estimate
from ..units import length_unit_metres, length_unit_name
from .fileunits import file_length_unit

log = logging.getLogger(__name__)

#: Estimated tetrahedra above which the parallel 3D mesher is used.
LARGE_MESH_CELLS = 150_000

CAD_SUFFIXES = (".step", ".stp", ".brep", ".iges", ".igs")
_LOCK = threading.Lock()

#: OpenCASCADE's names of the length units a case may use (values of Geometry.OCCTargetUnit).
OCC_UNITS = {1e-3: "MM", 1.0: "M", 0.0254: "INCH", 1e-2: "CM", 0.3048: "FT", 1e-6: "UM", 1e3: "KM",
             2.54e-5: "MIL"}
#: Bounding-box diagonals [m] outside which a part's size looks implausible for a mechanical part
#: (common practice: a 0.5 mm part is a speck, a 20 m one a building; either usually means the
#: geometry's numbers are in another unit than assumed). A warning, never a refusal.
PLAUSIBLE_SIZE_M = (0.5e-3, 20.0)
#: Bounding-box diagonals [case length unit] a part may have at all, whatever the units: far outside
#: the plausible sizes (which only warn), at the bounds of what Gmsh's tolerances can mesh.
MESHABLE_SIZE = (1e-9, 1e12)
#: Case length units per file length unit accepted for geometry.unit (from a micrometre file in a
#: metre case to a kilometre file in a millimetre case, with a factor 10 to spare each way).
UNIT_RATIO = (1e-7, 1e7)

# gmsh element types: 4-node tet 4, 10-node tet 11, 3-node triangle 2, 6-node triangle 9.
_GMSH_TET = {4: 4, 10: 11}
_GMSH_TRI = {3: 2, 6: 9}
#: gmsh's TET10 numbering has edge nodes 8 = (2,3), 9 = (1,3); VTK's has 8 = (1,3), 9 = (2,3).
GMSH_TO_VTK_TET10 = np.array([0, 1, 2, 3, 4, 5, 6, 7, 9, 8])


@contextlib.contextmanager
def gmsh_session():
    """An initialised, quiet Gmsh session that is always finalised (one at a time per process)."""
    try:
        import gmsh
    except OSError as err:  # missing system libraries of the wheel
        raise ModelError(
            f"the gmsh library could not be loaded ({err}). On Debian/Ubuntu install its system "
            "libraries: sudo apt-get install -y libglu1-mesa libxrender1 libxcursor1 libxft2 "
            "libxinerama1 libgomp1") from None
    with _LOCK:
        saved = _python_signal_handlers()
        gmsh.initialize(readConfigFiles=False, interruptible=False)
        _restore_signal_handlers(saved)
        try:
            gmsh.option.setNumber("General.Terminal", 0)
            gmsh.option.setNumber("General.Verbosity", 1)
            # OpenCASCADE keeps the last target unit process-wide; without this a session after an
            # import in metres would write and read every CAD file in metres.
            gmsh.option.setString("Geometry.OCCTargetUnit", "MM")
            yield gmsh
        finally:
            gmsh.finalize()
            _restore_signal_handlers(saved)


def _python_signal_handlers() -> dict:
    """Python's SIGINT/SIGTERM handlers (main thread only; empty elsewhere)."""
    import signal

    if threading.current_thread() is not threading.main_thread():
        return {}
    return {sig: signal.getsignal(sig) for sig in (signal.SIGINT, signal.SIGTERM)}


def _restore_signal_handlers(saved: dict) -> None:
    """Put Python's handlers back: Gmsh's initialisation installs C handlers that end the process
    on SIGTERM at once, so no cleanup (temporary result files) could run."""
    import signal

    for sig, handler in saved.items():
        if handler is not None:
            with contextlib.suppress(ValueError, OSError, TypeError):
                signal.signal(sig, handler)


def cad_import_units(path: Path, length_metres: float, unit: Optional[str]) -> tuple[str, float, GeometrySource]:
    """Gmsh's target unit and scaling for importing ``path``, and the record of what they do.

    Parameters
    ----------
    path : Path
        A STEP, IGES or BREP file.
    length_metres : float
        Metres per case length unit.
    unit : str or None
        ``geometry.unit`` of the case (overrides the file's own unit).
    """
    suffix = path.suffix.lower()
    case_name = length_unit_name(length_metres)
    warnings: list[str] = []
    fu = file_length_unit(path) if suffix in (".step", ".stp", ".iges", ".igs") else None
    if fu is not None and fu.note:
        warnings.append(f"{path.name}: {fu.note}")
    target = OCC_UNITS.get(next((k for k in OCC_UNITS if abs(k - length_metres) <= 1e-12 * k), -1.0))
    base = length_metres if target is not None else 1e-3  # metres per unit of what OpenCASCADE returns
    target = target or "MM"
    if suffix == ".brep" or fu is None:
        # No conversion: the numbers arrive as written (BREP has no unit; a STEP file whose
        # contexts assign no length unit is read as it stands, as measured with OpenCASCADE 7.8).
        occ_metres = base
    else:
        occ_metres = fu.metres
    if unit is not None:
        used, origin = length_unit_metres(unit), "case"
        if fu is not None and abs(fu.metres - used) > 1e-12 * used:
            warnings.append(f"geometry.unit = \"{unit}\" overrides the unit {path.name} states ({fu.name}): the "
                            f"part is read {fu.metres / used:.6g} times smaller than the file says")
    elif fu is not None:
        used, origin = fu.metres, "file"
    else:
        used, origin = length_metres, "assumed"
        what = "(BREP) states no length unit" if suffix == ".brep" else "states no length unit that could be read"
        warnings.append(f"{path.name} {what}: its numbers were taken in {case_name}, the case's length unit; "
                        "set geometry.unit if they are in another unit")
    ratio = used / length_metres
    if unit is not None and not (UNIT_RATIO[0] <= ratio <= UNIT_RATIO[1]):
        # OpenCASCADE's reader did not return from a STEP file scaled by 3e19 (read in parsecs).
        raise CaseError("geometry.unit", unit, f"is {ratio:.3g} {case_name} per unit: no part is drawn in such a "
                        f"unit (between {UNIT_RATIO[0]:g} and {UNIT_RATIO[1]:g} {case_name} are accepted); give the "
                        "length unit the file's numbers are in, such as \"mm\", \"in\" or \"m\"")
    # OpenCASCADE returns raw * occ_metres / base; the case wants raw * used / length_metres.
    occ_scale = (used / occ_metres) * (base / length_metres)
    src = GeometrySource(path.name, fu.name if fu else None, length_unit_name(used), origin, case_name,
                         used / length_metres, 0.0, tuple(warnings))
    return target, occ_scale, src


def _size_warnings(diag: float, length_metres: float, src: GeometrySource) -> tuple[str, ...]:
    """A warning when the part's bounding-box diagonal ``diag`` [case length] looks implausible."""
    metres = diag * length_metres
    lo, hi = PLAUSIBLE_SIZE_M
    if lo <= metres <= hi:
        return ()
    name = src.length_unit
    what = "small" if metres < lo else "large"
    bound = f"{lo / length_metres:.4g} to {hi / length_metres:.4g} {name}"
    how = ("set geometry.unit to the unit the file's numbers are in" if src.unit_origin != "file" else
           "if the file states the wrong unit, set geometry.unit to the unit its numbers are in")
    return (f"the part measures {diag:.4g} {name} across (bounding-box diagonal), implausibly {what} for a "
            f"mechanical part (expected {bound}); its numbers were read in {src.unit}: {how}",)


def _with_size(mesh: Mesh, src: GeometrySource, length_metres: float) -> Mesh:
    """``mesh`` with ``src`` completed by the part's size and its plausibility warning."""
    from dataclasses import replace

    diag = float(np.linalg.norm(mesh.points.max(axis=0) - mesh.points.min(axis=0))) if mesh.nodes else 0.0
    extra = tuple(w for w in _size_warnings(diag, length_metres, src) if w not in src.warnings)
    return mesh.with_source(replace(src, size=diag, warnings=src.warnings + extra))


def _import_cad(gmsh, path: Path, target: str = "MM", occ_scale: float = 1.0) -> None:
    check_readable(path)
    kind = path.suffix[1:].upper()
    gmsh.option.setString("Geometry.OCCTargetUnit", target)
    gmsh.option.setNumber("Geometry.OCCScaling", float(occ_scale))
    failure = None
    # OpenCASCADE prints its parser errors to fd 1/2 itself: capture them, quote the first.
    with captured_fds() as cap:
        try:
            try:
                gmsh.model.occ.importShapes(str(path))
            except Exception as err:
                if "target unit" not in str(err):
                    raise
                # OpenCASCADE defines its unit parameter when its first reader of a kind starts (an
                # IGES file first in a process meets it undefined): read once to start it, then again.
                gmsh.option.setString("Geometry.OCCTargetUnit", "")
                gmsh.model.occ.importShapes(str(path))
                gmsh.clear()
                gmsh.option.setString("Geometry.OCCTargetUnit", target)
                gmsh.model.occ.importShapes(str(path))
            gmsh.model.occ.synchronize()
        except Exception as err:
            failure = str(err)
    if failure is not None:
        detail = cap.first_error() or failure
        raise CaseError("geometry.file", str(path),
                        f"cannot be read as {kind} geometry ({detail}); the file may be truncated or "
                        f"not {kind} at all: export the part again as a closed solid") from None
    vols = gmsh.model.getEntities(3)
    if not vols:
        raise CaseError("geometry.file", str(path),
                        "contains no solid volume (a truncated or surface-only file?); a closed solid is needed")
    box = np.asarray(gmsh.model.getBoundingBox(-1, -1), dtype=float)
    diag = float(np.linalg.norm(box[3:] - box[:3]))
    if not (MESHABLE_SIZE[0] <= diag <= MESHABLE_SIZE[1]):
        # Gmsh does not finish meshing parts this far from unit size (a STEP read in parsecs ran for
        # hours); the cause is a wrong length unit, which is named here before any meshing.
        raise CaseError("geometry.unit", f"{diag:.3g} across",
                        "the part read in this unit would measure that (bounding-box diagonal, in the case's "
                        f"length unit), beyond what can be meshed ({MESHABLE_SIZE[0]:g} to {MESHABLE_SIZE[1]:g}); "
                        "give the unit its numbers are in (geometry.unit in a case, --file-unit for surfaces)")
    if len(vols) > 1:
        join_bodies(gmsh, vols, path)


#: Relative volume mismatch after joining the solids beyond which they overlap (round-off of
#: OpenCASCADE's mass properties is some 1e-12 relative; a real overlap is a share of a solid).
OVERLAP_RTOL = 1e-7


def join_bodies(gmsh, vols: list, path: Path) -> None:
    """Make the solids of a CAD file conformal where they touch, refusing solids that overlap.

    OpenCASCADE's general fuse (``occ.fragment`` of every solid with every other) splits faces
    where solids touch, so that they share faces and the mesh shares nodes there: the bodies are
    bonded. Solids that overlap would share a volume, which two materials cannot fill at once: a
    piece of the result that comes from two input solids, or a total volume smaller than the sum
    of the solids', is refused with both solids named (file order, bounding box).
    """
    occ = gmsh.model.occ
    boxes = [occ.getBoundingBox(3, t) for _, t in vols]
    masses = [occ.getMass(3, t) for _, t in vols]
    _, out_map = occ.fragment(vols[:1], vols[1:])
    occ.synchronize()
    owner: dict[int, int] = {}
    pair = None
    for i, parts in enumerate(out_map):
        for dim, tag in parts:
            if dim == 3 and tag in owner and owner[tag] != i:
                pair = (owner[tag], i, occ.getMass(3, tag))
                break
            owner.setdefault(tag, i)
        if pair is not None:
            break
    if pair is None:
        total = sum(occ.getMass(3, t) for _, t in gmsh.model.getEntities(3))
        if total < (1.0 - OVERLAP_RTOL) * sum(masses):
            # Without a shared piece in the map: name the two solids whose boxes overlap most.
            best = max(((i, j) for i in range(len(vols)) for j in range(i + 1, len(vols))),
                       key=lambda ij: _box_overlap(boxes[ij[0]], boxes[ij[1]]))
            pair = (best[0], best[1], sum(masses) - total)
    if pair is not None:
        i, j, shared = pair

        def fmt(b):
            # OpenCASCADE widens boxes by its tolerance (1e-7): round to 1e-5 of the part's size.
            step = 10.0 ** np.floor(np.log10(max(np.ptp(np.array(boxes).reshape(-1, 3), axis=0).max(), 1e-300))) * 1e-5
            c = [round(v / step) * step + 0.0 for v in b]
            return ("[" + ", ".join(f"{v:.4g}" for v in c[:3]) + "] to [" + ", ".join(f"{v:.4g}" for v in c[3:]) + "]")

        raise CaseError("geometry.file", str(path),
                        f"has solids that overlap: solid {i + 1} (bounding box {fmt(boxes[i])}) and solid {j + 1} "
                        f"(bounding box {fmt(boxes[j])}) share a volume of {shared:.4g} (solids counted in file "
                        "order). Bodies may touch (they are then bonded) but not overlap: subtract one from the "
                        "other in the CAD model")


def _box_overlap(a, b) -> float:
    """Volume of the intersection of two boxes ``(xmin, ymin, zmin, xmax, ymax, zmax)``."""
    d = [max(0.0, min(a[3 + k], b[3 + k]) - max(a[k], b[k])) for k in range(3)]
    return d[0] * d[1] * d[2]


def _extract(gmsh, order_hint: Optional[int], strict_orientation: bool = False) -> Mesh:
    tags, coords, _ = gmsh.model.mesh.getNodes()
    if tags.size == 0:
        raise ModelError("the mesh has no nodes")
    coords = coords.reshape(-1, 3)
    sorter = np.argsort(tags)
    stags = tags[sorter]

    def index(t):
        return sorter[np.searchsorted(stags, t)]

    names = {t: gmsh.model.mesh.getElementProperties(t)[0] for t in gmsh.model.mesh.getElementTypes(3)}
    counts = {t: len(gmsh.model.mesh.getElementsByType(t)[0]) for t in names}
    counts = {t: c for t, c in counts.items() if c}
    listing = ", ".join(f"{c:,} {names[t]}" for t, c in counts.items())
    if any(t not in _GMSH_TET.values() for t in counts):
        raise ModelError(f"the mesh holds volume elements elastofe cannot use ({listing}); only 4- and 10-node "
                         "tetrahedra are solved (no element is dropped silently)")
    if len(counts) > 1:
        raise ModelError(f"the mesh mixes 4- and 10-node tetrahedra ({listing}), which is not a conforming mesh "
                         "(the 4-node elements have no mid-side nodes); write it with one element order")
    if not counts:
        raise ModelError("the mesh has no tetrahedra (a surface-only mesh?)")
    etype = next(iter(counts))
    k = 4 if etype == _GMSH_TET[4] else 10
    parts, bodies = [], []
    for _, vtag in gmsh.model.getEntities(3):  # per body (few), to know each cell's body
        _, ntags = gmsh.model.mesh.getElementsByType(etype, vtag)
        if len(ntags):
            parts.append(index(np.asarray(ntags, dtype=np.int64)).reshape(-1, k))
            bodies.append(np.full(parts[-1].shape[0], vtag, dtype=np.int64))
    if sum(p.shape[0] for p in parts) != counts[etype]:  # elements on no volume entity
        _, ntags = gmsh.model.mesh.getElementsByType(etype)
        parts, bodies = [index(np.asarray(ntags, dtype=np.int64)).reshape(-1, k)], []
    cells = np.vstack(parts)
    if k == 10:
        cells = cells[:, GMSH_TO_VTK_TET10]
    cell_body = np.concatenate(bodies) if bodies else None
    tri_v, tri_id = [], []
    for dim, tag in gmsh.model.getEntities(2):
        for etype, _, ntags in zip(*gmsh.model.mesh.getElements(dim, tag)):
            if etype in (2, 9):
                nn = 3 if etype == 2 else 6
                t = index(np.asarray(ntags, dtype=np.int64)).reshape(-1, nn)[:, :3]
                tri_v.append(t)
                tri_id.append(np.full(t.shape[0], tag, dtype=np.int64))
    groups = {}
    for dim, ptag in gmsh.model.getPhysicalGroups(2):
        name = gmsh.model.getPhysicalName(dim, ptag) or f"group{ptag}"
        groups[name] = tuple(int(t) for t in gmsh.model.getEntitiesForPhysicalGroup(dim, ptag))
    body_groups = {}
    for dim, ptag in gmsh.model.getPhysicalGroups(3):
        name = gmsh.model.getPhysicalName(dim, ptag) or f"group{ptag}"
        body_groups[name] = tuple(int(t) for t in gmsh.model.getEntitiesForPhysicalGroup(dim, ptag))
    tri = np.vstack(tri_v) if tri_v else None
    ids = np.concatenate(tri_id) if tri_id else None
    mesh = from_arrays(coords, cells, tri, ids, groups, strict_orientation=strict_orientation,
                       cell_body=cell_body)
    return replace(mesh, body_groups=body_groups) if body_groups else mesh


def _surface_mesh(gmsh) -> Mesh:
    """A catalogue-only mesh of the current 2D mesh (no cells; faces as triangles)."""
    tags, coords, _ = gmsh.model.mesh.getNodes()
    coords = coords.reshape(-1, 3)
    sorter = np.argsort(tags)
    faces, ids = [], []
    for dim, tag in gmsh.model.getEntities(2):
        for etype, _, ntags in zip(*gmsh.model.mesh.getElements(dim, tag)):
            if etype == 2:
                t = sorter[np.searchsorted(tags[sorter], np.asarray(ntags, dtype=np.int64))].reshape(-1, 3)
                faces.append(t)
                ids.append(np.full(t.shape[0], tag, dtype=np.int64))
    return Mesh(coords, np.zeros((0, 4), dtype=np.int64), np.vstack(faces), np.concatenate(ids), {})


def _default_size(gmsh) -> float:
    return _diagonal(gmsh) / 20.0


def _diagonal(gmsh) -> float:
    x0, y0, z0, x1, y1, z1 = gmsh.model.getBoundingBox(-1, -1)
    return float(np.linalg.norm([x1 - x0, y1 - y0, z1 - z0]))


def mesh_demand(gmsh, size: float, zones: tuple = (), points: tuple = ()) -> MeshDemand:
    """What meshing the current Gmsh model at ``size`` will make (volume and boundary area from the
    OpenCASCADE shapes); ``zones`` ((surface tags, local size), ...), ``points`` ((size, growth), ...)."""
    occ = gmsh.model.occ
    volume = sum(occ.getMass(3, tag) for _, tag in gmsh.model.getEntities(3))
    area = sum(occ.getMass(2, tag) for _, tag in gmsh.model.getEntities(2))
    za = tuple((float(sum(occ.getMass(2, int(t)) for t in ids)), float(hs)) for ids, hs in zones)
    return MeshDemand(float(volume), float(area), float(size), za, tuple(points), diagonal=_diagonal(gmsh))


def mesh_geometry(path: Path, order: int = 2, size: Optional[float] = None,
                  refine: Optional[Callable[[Mesh], list[tuple[list[int], float]]]] = None,
                  threads: int = 1,
                  before_mesh: Optional[Callable[[MeshDemand], None]] = None, *,
                  length_unit: str = "mm", unit: Optional[str] = None) -> Mesh:
    """Mesh a CAD file, or read a mesh file as given, in the case's length unit.

    Parameters
    ----------
    path : Path
        STEP/BREP/IGES (meshed here) or .msh/.vtu/.vtk/.xdmf/.xmf (used as given).
    order : int
        1 for 4-node, 2 for 10-node tetrahedra (mid-side nodes placed on the CAD surfaces).
    size : float, optional
        Target element size [length]; default 1/20 of the bounding-box diagonal (a size larger
        than the diagonal meshes as the diagonal would).
    refine : callable, optional
        Given a surface-only mesh of the part, returns ``[(surface ids, local size), ...]``.
    threads : int
        Threads Gmsh may use.
    before_mesh : callable, optional
        Called with a :class:`~elastofe.resources.MeshDemand` (volume, boundary area, size) after
        the CAD import and before any meshing, and again with the refined zones before the volume
        mesh, so a caller can refuse a mesh too large for the machine (it raises).
    length_unit : str
        The case's length unit (``case.units.length``: "mm", "m", "inch"); the mesh is in it.
    unit : str, optional
        ``geometry.unit`` of the case: the unit the file's numbers are in, overriding the unit a
        STEP/IGES file states; for BREP and mesh files (which state none) it replaces the default,
        the case's length unit.

    Returns
    -------
    Mesh
        With ``source`` (:class:`~elastofe.mesh.GeometrySource`): the file's unit, the scale
        applied and warnings (an implausible part size, no unit in the file).
    """
    path = Path(path)
    suffix = path.suffix.lower()
    L = length_unit_metres(length_unit, key="units")
    if suffix in MESH_SUFFIXES:
        used = length_unit_metres(unit) if unit is not None else L
        src = GeometrySource(path.name, None, length_unit_name(used), "case" if unit is not None else "assumed",
                             length_unit_name(L), used / L)
        mesh = _read_mesh(path, threads)
        return _with_size(mesh.scaled(used / L) if used != L else mesh, src, L)
    target, occ_scale, src = cad_import_units(path, L, unit)
    with gmsh_session() as gmsh:
        gmsh.option.setNumber("General.NumThreads", threads)
        _import_cad(gmsh, path, target, occ_scale)
        x0, y0, z0, x1, y1, z1 = gmsh.model.getBoundingBox(-1, -1)
        size_warnings = _size_warnings(float(np.linalg.norm([x1 - x0, y1 - y0, z1 - z0])), L, src)
        h = float(size) if size is not None else _default_size(gmsh)
        if before_mesh is not None:
            try:
                before_mesh(mesh_demand(gmsh, h))
            except ModelError as err:
                if not size_warnings:
                    raise
                # A refusal for size (memory) is often a unit mistake: say so in the same line.
                raise ModelError(f"{err} (note: {size_warnings[0]})") from None
        h = min(h, max(_diagonal(gmsh), 1e-300))  # larger sizes mesh as the diagonal does
        demand = mesh_demand(gmsh, h)
        if cells_estimate(demand) > LARGE_MESH_CELLS:
            # Large meshes: Gmsh's parallel HXT algorithm on every core (4x faster than the default
            # Delaunay at 1M DOF, solvers.md). Small meshes keep the default, so their node layout
            # (and every test built on it) does not depend on the number of cores.
            gmsh.option.setNumber("Mesh.Algorithm3D", 10)
            gmsh.option.setNumber("General.NumThreads", max(threads, os.cpu_count() or 1))
        gmsh.option.setNumber("Mesh.MeshSizeMax", h)
        gmsh.option.setNumber("Mesh.MeshSizeMin", 0.0)
        gmsh.option.setNumber("Mesh.MeshSizeFromCurvature", 0)
        gmsh.option.setNumber("Mesh.MeshSizeExtendFromBoundary", 1)
        gmsh.option.setNumber("Mesh.MeshSizeFromPoints", 0)
        if refine is not None:
            gmsh.model.mesh.generate(2)
            local = refine(_surface_mesh(gmsh))
            gmsh.model.mesh.clear()
            if local and before_mesh is not None:
                # The local sizes count too: refuse before Gmsh spends minutes on them.
                before_mesh(mesh_demand(gmsh, h, zones=tuple((ids, hs) for ids, hs in local)))
            if local:
                fields = []
                for ids, hs in local:
                    d = gmsh.model.mesh.field.add("Distance")
                    gmsh.model.mesh.field.setNumbers(d, "SurfacesList", list(ids))
                    gmsh.model.mesh.field.setNumber(d, "Sampling", 40)
                    t = gmsh.model.mesh.field.add("Threshold")
                    gmsh.model.mesh.field.setNumber(t, "InField", d)
                    gmsh.model.mesh.field.setNumber(t, "SizeMin", hs)
                    gmsh.model.mesh.field.setNumber(t, "SizeMax", h)
                    gmsh.model.mesh.field.setNumber(t, "DistMin", 0.5 * hs)
                    gmsh.model.mesh.field.setNumber(t, "DistMax", 0.5 * hs + 4.0 * max(h - hs, 0.0))
                    fields.append(t)
                mn = gmsh.model.mesh.field.add("Min")
                gmsh.model.mesh.field.setNumbers(mn, "FieldsList", fields)
                gmsh.model.mesh.field.setAsBackgroundMesh(mn)
                gmsh.option.setNumber("Mesh.MeshSizeExtendFromBoundary", 0)
        try:
            gmsh.model.mesh.generate(3)
            if order == 2:
                gmsh.model.mesh.setOrder(2)
        except Exception as err:
            raise ModelError(f"Gmsh could not mesh {path.name} ({err}); try another mesh.size") from None
        mesh = _extract(gmsh, order)
        log.debug("meshed %s: %d nodes, %d cells", path.name, mesh.nodes, mesh.cells.shape[0])
        return _with_size(mesh, src, L)


def measure(path: Path, size: Optional[float] = None, *, length_unit: str = "mm",
            unit: Optional[str] = None) -> MeshDemand:
    """The :class:`~elastofe.resources.MeshDemand` of meshing a CAD file at ``size`` (default 1/20
    of the part), without meshing it: for checks made before a series of meshes (a study).
    ``length_unit`` and ``unit`` as for :func:`mesh_geometry`."""
    path = Path(path)
    L = length_unit_metres(length_unit, key="units")
    target, occ_scale, _ = cad_import_units(path, L, unit)
    with gmsh_session() as gmsh:
        _import_cad(gmsh, path, target, occ_scale)
        h = size if size is not None else _default_size(gmsh)
        return mesh_demand(gmsh, float(h))


def _read_mesh(path: Path, threads: int = 1) -> Mesh:
    """A .vtu/.vtk/.xdmf/.xmf (meshio) or .msh (Gmsh) mesh file as given, in the file's own numbers."""
    if path.suffix.lower() != ".msh":
        return read_mesh_file(path)
    with gmsh_session() as gmsh:
        gmsh.option.setNumber("General.NumThreads", threads)
        check_readable(path)
        failure = None
        with captured_fds() as cap:
            try:
                gmsh.open(str(path))
            except Exception as err:
                failure = str(err)
        if failure is not None:
            detail = cap.first_error() or failure
            raise CaseError("geometry.file", str(path), f"cannot be read as a Gmsh mesh ({detail}); "
                            "the file may be truncated: write the mesh again") from None
        try:
            return _extract(gmsh, None, strict_orientation=True)
        except ModelError as err:  # a mesh file is input: its defects are the case's
            raise CaseError("geometry.file", str(path), f"{err}; a volume mesh of 4- or 10-node "
                            "tetrahedra with positive volumes is needed") from None


def mesh_part_arrays(path: Path) -> dict:
    """One file of a mesh split into parts (one file per rank), as raw arrays.

    ``.msh``: a file of a Gmsh partitioned mesh written one file per part
    (``Mesh.PartitionSplitMeshFiles``): node tags are those of the whole mesh; triangles and
    tetrahedra lie on partition entities, whose *parent* is the surface or volume of the whole
    model (used as surface id and body, as a single file would give them). ``.vtu``/``.vtk``/XDMF: a
    point array ``node_id`` (the node's number in the whole mesh, as elastofe's own result pieces
    carry it) when there is one, else nodes are matched by their coordinates; triangles with
    ``surface_id``, ``gmsh:geometrical`` or ``gmsh:physical`` label surfaces.

    Returns
    -------
    {"ids": (p,) int64 or None, "points": (p, 3), "cells": (c, 4|10) indices into points (VTK
    order), "tri": (t, 3) indices into points, "tri_ids": (t,), "groups": {name: surface ids},
    "cell_body": (c,) or None}
    """
    path = Path(path)
    check_readable(path)
    if path.suffix.lower() != ".msh":
        return mesh_file_arrays(path)
    with gmsh_session() as gmsh:
        failure = None
        with captured_fds() as cap:
            try:
                gmsh.open(str(path))
            except Exception as err:
                failure = str(err)
        if failure is not None:
            detail = cap.first_error() or failure
            raise CaseError("geometry.file", str(path), f"cannot be read as a Gmsh mesh ({detail}); "
                            "the file may be truncated: write the mesh again") from None
        tags, coords, _ = gmsh.model.mesh.getNodes()
        tags = np.asarray(tags, dtype=np.int64)
        sorter = np.argsort(tags)
        stags = tags[sorter]

        def index(t):
            return sorter[np.searchsorted(stags, np.asarray(t, dtype=np.int64))]

        def parent(dim, tag):
            pd, pt = gmsh.model.getParent(dim, tag)
            return int(pt) if pd == dim and pt > 0 else int(tag)

        cells, bodies = [], []
        for _, vtag in gmsh.model.getEntities(3):
            for etype, _, ntags in zip(*gmsh.model.mesh.getElements(3, vtag)):
                if etype not in _GMSH_TET.values():
                    name = gmsh.model.mesh.getElementProperties(etype)[0]
                    raise CaseError("geometry.file", str(path), f"holds volume elements elastofe cannot use "
                                    f"({name}); only 4- and 10-node tetrahedra are solved")
                k = 4 if etype == _GMSH_TET[4] else 10
                c = index(ntags).reshape(-1, k)
                cells.append(c[:, GMSH_TO_VTK_TET10] if k == 10 else c)
                bodies.append(np.full(c.shape[0], parent(3, vtag), dtype=np.int64))
        tri, tri_ids = [], []
        for _, stag in gmsh.model.getEntities(2):
            for etype, _, ntags in zip(*gmsh.model.mesh.getElements(2, stag)):
                if etype in _GMSH_TRI.values():
                    t = index(ntags).reshape(-1, 3 if etype == _GMSH_TRI[3] else 6)[:, :3]
                    tri.append(t)
                    tri_ids.append(np.full(t.shape[0], parent(2, stag), dtype=np.int64))
        groups = {}
        for dim, ptag in gmsh.model.getPhysicalGroups(2):
            name = gmsh.model.getPhysicalName(dim, ptag) or f"group{ptag}"
            groups[name] = tuple(sorted({parent(2, t) for t in gmsh.model.getEntitiesForPhysicalGroup(dim, ptag)}))
        if not cells:
            raise CaseError("geometry.file", str(path), "holds no tetrahedra (each rank's file must hold its "
                            "part of the volume mesh)")
        if len({c.shape[1] for c in cells}) > 1:
            raise CaseError("geometry.file", str(path), "mixes 4- and 10-node tetrahedra")
        return {"ids": tags, "points": coords.reshape(-1, 3), "cells": np.vstack(cells),
                "tri": np.vstack(tri) if tri else np.zeros((0, 3), np.int64),
                "tri_ids": np.concatenate(tri_ids) if tri_ids else np.zeros(0, np.int64),
                "groups": groups, "cell_body": np.concatenate(bodies)}


def mesh_from_parts(parts: list[dict], pattern: str, *, length_unit: str = "mm",
                    unit: Optional[str] = None) -> tuple[Mesh, np.ndarray]:
    """The whole mesh from the arrays of its parts (:func:`mesh_part_arrays`, in rank order).

    Nodes are matched across parts by their number in the whole mesh (or, without one, by
    their coordinates); the boundary and its surface ids follow from the whole mesh, as for a
    single file. Returns ``(mesh with its GeometrySource, part (m,) the part of each cell)``.

    Raises
    ------
    CaseError
        (``geometry.file``) when the parts do not make one mesh (different element orders,
        nodes numbered on some parts only, inverted cells).
    """
    if len({p["cells"].shape[1] for p in parts}) > 1:
        raise CaseError("geometry.file", pattern, "its parts mix 4- and 10-node tetrahedra")
    with_ids = [p["ids"] is not None for p in parts]
    if any(with_ids) and not all(with_ids):
        raise CaseError("geometry.file", pattern, "some parts number their nodes (node tags or a node_id array) "
                        "and some do not: write every part the same way")
    if all(with_ids):
        keys = np.concatenate([p["ids"] for p in parts])
        uniq, inverse = np.unique(keys, return_inverse=True)
        points = np.zeros((uniq.size, 3))
        points[inverse] = np.concatenate([p["points"] for p in parts])
    else:
        allp = np.concatenate([p["points"] for p in parts])
        points, inverse = np.unique(allp, axis=0, return_inverse=True)
        inverse = inverse.ravel()
    offs = np.cumsum([0] + [p["points"].shape[0] for p in parts])
    cells = np.vstack([inverse[offs[i] + p["cells"]] for i, p in enumerate(parts)])
    tri = np.vstack([inverse[offs[i] + p["tri"]] for i, p in enumerate(parts)]) if sum(
        len(p["tri"]) for p in parts) else None
    tri_ids = np.concatenate([p["tri_ids"] for p in parts]) if tri is not None else None
    part = np.concatenate([np.full(p["cells"].shape[0], i, dtype=np.int64) for i, p in enumerate(parts)])
    bodies = [p["cell_body"] for p in parts]
    body = np.concatenate(bodies) if all(b is not None for b in bodies) else None
    groups: dict = {}
    for p in parts:
        for name, ids in p["groups"].items():
            groups[name] = tuple(sorted(set(groups.get(name, ())) | set(ids)))
    if tri is not None and tri_ids is not None:  # a face on two parts' lists once
        key = np.sort(tri, axis=1)
        _, first = np.unique(key, axis=0, return_index=True)
        tri, tri_ids = tri[np.sort(first)], tri_ids[np.sort(first)]
    try:
        mesh = from_arrays(points, cells, tri, tri_ids, groups, strict_orientation=True, cell_body=body)
    except ModelError as err:
        raise CaseError("geometry.file", pattern, f"{err}; the parts must make one volume mesh of 4- or "
                        "10-node tetrahedra with positive volumes") from None
    if mesh.cells.shape[0] != cells.shape[0]:  # pragma: no cover - from_arrays keeps every cell
        raise CaseError("geometry.file", pattern, "cells were lost in merging the parts")
    L = length_unit_metres(length_unit, key="units")
    used = length_unit_metres(unit) if unit is not None else L
    src = GeometrySource(Path(pattern).name, None, length_unit_name(used), "case" if unit is not None else "assumed",
                         length_unit_name(L), used / L)
    return _with_size(mesh.scaled(used / L) if used != L else mesh, src, L), part


def surface_mesh_of(path: Path, size: Optional[float] = None, *, length_unit: str = "mm",
                    unit: Optional[str] = None, before_mesh: Optional[Callable[[MeshDemand], None]] = None) -> Mesh:
    """A quick linear mesh for listing surfaces (outward normals), or the mesh file itself
    (``length_unit``, ``unit`` and ``before_mesh``, the caller's memory guard, as for
    :func:`mesh_geometry`)."""
    return mesh_geometry(Path(path), order=1, size=size, length_unit=length_unit, unit=unit,
                         before_mesh=before_mesh)
