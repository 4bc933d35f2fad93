"""Values of the nodes that ranks share: sums sent to each node's owner, values sent back.

A rank's cells use its owned nodes and some *ghost* nodes owned by other ranks (on the
partition's interfaces). Two exchanges move node values across that interface:

- :meth:`Halo.reduce`: each rank's sums at its ghost nodes go to their owners and are added
  there (element sums of nodal averaging, counts, mean sizes);
- :meth:`Halo.spread`: the owners' values go to every rank that has the node as a ghost
  (displacements and averaged stresses for interpolation in each rank's own cells).

Only interface nodes travel; every array is ``(nodes, ...)`` in the rank's local numbering
(:class:`elastofe.parallel.partition.Piece`), owned rows ``piece.owned``.
"""
from __future__ import annotations

import numpy as np


class Halo:
    """The ghost nodes of one rank and who owns them; built once (collective), used many times.

    Parameters
    ----------
    comm : mpi4py communicator.
    nodes : (l,) sorted global numbers of the rank's local nodes.
    first : local index of its first owned node; ``nown`` owned nodes follow.
    starts : (P + 1,) owned node range of every rank.
    """

    def __init__(self, comm, nodes: np.ndarray, first: int, nown: int, starts: np.ndarray):
        self.comm = comm
        self.first, self.nown, self.nlocal = first, nown, nodes.size
        loc = np.arange(nodes.size)
        ghost = np.concatenate([loc[:first], loc[first + nown:]])
        owner = np.searchsorted(starts, nodes[ghost], side="right") - 1
        o = np.argsort(owner, kind="stable")
        self.ghost, owner = ghost[o], owner[o]
        self.cuts = np.searchsorted(owner, np.arange(comm.size + 1))
        asks = [nodes[self.ghost[self.cuts[p]:self.cuts[p + 1]]] for p in range(comm.size)]
        got = comm.alltoall(asks) if comm.size > 1 else asks
        start = int(starts[comm.rank])
        #: owned indices (from 0) that each rank holds as ghosts, in the order it asked
        self.wanted = [np.asarray(g, dtype=np.int64) - start for g in got]

    def spread(self, owned: np.ndarray) -> np.ndarray:
        """Local values ``(l, ...)`` from the owned values ``(nown, ...)`` of every rank."""
        out = np.empty((self.nlocal,) + owned.shape[1:], dtype=owned.dtype)
        out[self.first:self.first + self.nown] = owned
        if self.comm.size > 1:
            got = self.comm.alltoall([owned[w] for w in self.wanted])
            for p in range(self.comm.size):
                out[self.ghost[self.cuts[p]:self.cuts[p + 1]]] = got[p]
        return out

    def reduce(self, local: np.ndarray) -> np.ndarray:
        """Owned sums ``(nown, ...)`` of the local values ``(l, ...)`` of every rank."""
        out = np.array(local[self.first:self.first + self.nown], copy=True)
        if self.comm.size > 1:
            got = self.comm.alltoall([local[self.ghost[self.cuts[p]:self.cuts[p + 1]]]
                                      for p in range(self.comm.size)])
            for p in range(self.comm.size):
                np.add.at(out, self.wanted[p], got[p])
        return out
