"""Geometry: the only place that touches the Gmsh session.

CAD files (STEP/BREP/IGES) are imported with Gmsh's OpenCASCADE kernel and meshed; Gmsh .msh
files are read through Gmsh (keeping surface entities and physical groups); VTU/VTK through meshio.
"""
from __future__ import annotations

import contextlib
import os
import logging
import threading
from pathlib import Path
from typing import Callable, Optional

import numpy as np

from ..errors import CaseError, ModelError
from ..fdcapture import captured_fds
from ..mesh import Mesh, check_readable, from_arrays, read_mesh_file
from ..resources import MeshDemand, cells_estimate

log = logging.getLogger(__name__)

#: Estimated tetrahedra above which the parallel 3D mesher is used.
LARGE_MESH_CELLS = 150_000

CAD_SUFFIXES = (".step", ".stp", ".brep", ".iges", ".igs")
_LOCK = threading.Lock()

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


def _import_cad(gmsh, path: Path) -> None:
    check_readable(path)
    kind = path.suffix[1:].upper()
    failure = None
    # OpenCASCADE prints its parser errors to fd 1/2 itself: capture them, quote the first.
    with captured_fds() as cap:
        try:
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
    if len(vols) > 1:
        gmsh.model.occ.fragment(vols[:1], vols[1:])
        gmsh.model.occ.synchronize()


def _extract(gmsh, order_hint: Optional[int], strict_orientation: bool = False) -> Mesh:
    tags, coords, _ = gmsh.model.mesh.getNodes()
    if tags.size == 0:
        raise ModelError("the mesh has no nodes")
    coords = coords.reshape(-1, 3)
    sorter = np.argsort(tags)
    stags = tags[sorter]

    def index(t):
        return sorter[np.searchsorted(stags, t)]

    cells = None
    for k in (10, 4):
        _, etags = gmsh.model.mesh.getElementsByType(_GMSH_TET[k])[:2]
        if len(etags):
            _, ntags = gmsh.model.mesh.getElementsByType(_GMSH_TET[k])
            cells = index(np.asarray(ntags, dtype=np.int64)).reshape(-1, k)
            if k == 10:
                cells = cells[:, GMSH_TO_VTK_TET10]
            break
    if cells is None:
        raise ModelError("the mesh has no tetrahedra (a surface-only mesh?)")
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
    tri = np.vstack(tri_v) if tri_v else None
    ids = np.concatenate(tri_id) if tri_id else None
    return from_arrays(coords, cells, tri, ids, groups, strict_orientation=strict_orientation)


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
                  before_mesh: Optional[Callable[[MeshDemand], None]] = None) -> Mesh:
    """Mesh a CAD file, or read a mesh file as given.

    Parameters
    ----------
    path : Path
        STEP/BREP/IGES (meshed here) or .msh/.vtu/.vtk (used as given).
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
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in (".vtu", ".vtk"):
        return read_mesh_file(path)
    with gmsh_session() as gmsh:
        gmsh.option.setNumber("General.NumThreads", threads)
        if suffix == ".msh":
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
        _import_cad(gmsh, path)
        h = float(size) if size is not None else _default_size(gmsh)
        if before_mesh is not None:
            before_mesh(mesh_demand(gmsh, h))
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
        return mesh


def measure(path: Path, size: Optional[float] = None) -> MeshDemand:
    """The :class:`~elastofe.resources.MeshDemand` of meshing a CAD file at ``size`` (default 1/20
    of the part), without meshing it: for checks made before a series of meshes (a study)."""
    path = Path(path)
    with gmsh_session() as gmsh:
        _import_cad(gmsh, path)
        h = size if size is not None else _default_size(gmsh)
        return mesh_demand(gmsh, float(h))


def surface_mesh_of(path: Path, size: Optional[float] = None,
                    before_mesh: Optional[Callable[[MeshDemand], None]] = None) -> Mesh:
    """A quick linear mesh for listing surfaces (outward normals), or the mesh file itself.

    ``before_mesh`` as for :func:`mesh_geometry` (the caller's memory guard)."""
    return mesh_geometry(Path(path), order=1, size=size, before_mesh=before_mesh)
