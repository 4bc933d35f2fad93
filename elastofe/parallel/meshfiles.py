"""Meshes made elsewhere, one file per rank: each rank reads its own part, rank 0 meshes nothing.

``geometry.file`` names one file per rank with ``{rank}`` (from 0) or ``{part}`` (from 1, as
Gmsh numbers the files of a partitioned mesh written one file per part), e.g.
``geometry.file = "bracket_{part}.msh"`` run with ``mpiexec -n 8``: rank r reads
``bracket_<r+1>.msh``. The files may be

- the files of a Gmsh partitioned mesh (``gmsh -3 -part 8 -format msh4`` with
  ``Mesh.PartitionSplitMeshFiles = 1``, or the Python API's ``gmsh.model.mesh.partition``): node
  tags are the whole mesh's, surfaces and physical groups those of the unpartitioned model;
- .vtu/.vtk or XDMF (.xdmf/.xmf) files, each holding some of the tetrahedra, with a point array
  ``node_id`` (the node's number in the whole mesh, as elastofe's own result pieces carry it) or without one
  (nodes are then matched by their coordinates, which must then be written identically).

The ranks read in parallel and send their arrays to rank 0, which merges them (one mesh,
boundary and surfaces found as for a single file) for the stages that need the whole model:
regions, supports, loads and their checks, about 0.1 kB per node there, against the tens of kB
per node that meshing takes. The parts themselves become the partition: each rank keeps the
cells of its own file.
"""
from __future__ import annotations

from pathlib import Path

from ..case.load import MESH_SUFFIXES
from ..case.schema import Case
from ..errors import CaseError
from ..geometry import mesh_from_parts, mesh_part_arrays
from ..progress import Progress
from .mpi import abort_on_error, raise_collectively

#: Placeholders of a per-rank mesh file name: ``{rank}`` from 0, ``{part}`` from 1.
PLACEHOLDERS = ("{rank}", "{part}")
#: File types a per-rank mesh may have.
PART_SUFFIXES = MESH_SUFFIXES


def is_per_rank(case: Case) -> bool:
    """Whether the case's ``geometry.file`` names one mesh file per rank."""
    name = str(case.geometry.file)
    return any(p in name for p in PLACEHOLDERS)


def rank_file(case: Case, rank: int) -> Path:
    """The mesh file of ``rank`` (from 0)."""
    name = str(case.geometry.file).replace("{rank}", str(rank)).replace("{part}", str(rank + 1))
    return Path(name)


def check_per_rank(case: Case) -> None:
    """Refuse (:class:`CaseError`) a per-rank name that is not a mesh file, or outside a
    distributed run (a single-process run cannot read one file per rank)."""
    if not is_per_rank(case):
        return
    if case.geometry.file.suffix.lower() not in PART_SUFFIXES:
        raise CaseError("geometry.file", str(case.geometry.file), "names one file per rank ({rank} or {part}); "
                        f"such files must be meshes ({', '.join(PART_SUFFIXES)}): a CAD file is meshed on "
                        "one process")
    if case.solver.backend != "petsc":
        raise CaseError("geometry.file", str(case.geometry.file), "names one mesh file per rank ({rank} or "
                        "{part}), which only the distributed run reads: run it with --solver petsc (under "
                        "mpiexec with one rank per file)")


def read_rank_meshes(comm, case: Case) -> list | None:
    """Every rank reads its file (collective); the parts' arrays on rank 0, None elsewhere.

    Raises
    ------
    CaseError
        On every rank alike: a file missing or unreadable (the first rank's message), or more
        files than ranks (the file of rank ``size`` exists).
    """
    err, arrays = None, None
    path = rank_file(case, comm.rank)
    try:
        arrays = mesh_part_arrays(path)
    except CaseError as e:
        err = CaseError(e.key, e.value, f"{e.expected} (the file of rank {comm.rank} of {comm.size})")
    if comm.rank == 0 and err is None and rank_file(case, comm.size).exists():
        err = CaseError("geometry.file", str(case.geometry.file), f"{rank_file(case, comm.size).name} exists too: "
                        f"the mesh has more parts than the {comm.size} rank(s) started; run with one rank per file")
    raise_collectively(comm, err)
    with abort_on_error(comm):
        return comm.gather(arrays, root=0)


def merge_rank_meshes(case: Case, parts: list, progress: Progress):
    """Rank 0: the whole mesh from the parts read by the ranks: ``(Mesh, part (m,))``."""
    mesh, part = mesh_from_parts(parts, str(case.geometry.file), length_unit=case.units.length,
                                 unit=case.geometry.unit)
    progress("mesh", f"read {len(parts)} mesh file(s), one per rank: {mesh.nodes:,} nodes, "
             f"{mesh.cells.shape[0]:,} elements")
    return mesh, part


__all__ = ["PLACEHOLDERS", "is_per_rank", "rank_file", "check_per_rank", "read_rank_meshes", "merge_rank_meshes"]
