"""Meshes made elsewhere, one file per rank: read in parallel, no meshing on rank 0."""
from __future__ import annotations

from ..case.schema import Case

#: Placeholders of a per-rank mesh file name: ``{rank}`` from 0, ``{part}`` from 1 (as Gmsh
#: numbers the files of a split partitioned mesh).
PLACEHOLDERS = ("{rank}", "{part}")


def is_per_rank(case: Case) -> bool:
    """Whether the case's ``geometry.file`` names one mesh file per rank."""
    name = str(case.geometry.file)
    return any(p in name for p in PLACEHOLDERS)


def read_rank_meshes(comm, case: Case, progress):
    raise NotImplementedError
