"""Keeping an MPI job from hanging: every failure is either raised on all ranks alike or ends the job.

Two kinds of failure and how each is handled:

- an expected error (:class:`CaseError`, :class:`ModelError`) found on rank 0 while it prepares the
  model is broadcast, and every rank raises the same error (:func:`on_root`), so that the job ends
  with its message and exit code instead of the other ranks waiting for rank 0 for ever;
- anything else, on any rank, inside a collective stage (:func:`abort_on_error`) or escaping to the
  interpreter (:func:`install_abort_hook`), prints its traceback and calls ``MPI_Abort``, which
  ends every rank of the job at once.
"""
from __future__ import annotations

import sys
import traceback
from contextlib import contextmanager
from typing import Callable, TypeVar

from ..errors import CaseError, ElastofeError, ModelError, SolverError

T = TypeVar("T")


def _abort(comm, code: int = 1) -> None:
    err = sys.__stderr__ or sys.stderr
    print(f"elastofe: rank {comm.rank} of {comm.size} failed; ending all ranks (MPI_Abort)", file=err, flush=True)
    comm.Abort(code)


def install_abort_hook(comm) -> None:
    """Make an uncaught exception on any rank end the whole job (``MPI_Abort``) instead of a hang."""
    if comm.size == 1 or getattr(sys.excepthook, "_elastofe_abort", False):
        return
    def hook(kind, value, tb):
        traceback.print_exception(kind, value, tb, file=sys.__stderr__ or sys.stderr)
        _abort(comm)

    hook._elastofe_abort = True
    sys.excepthook = hook


@contextmanager
def abort_on_error(comm):
    """Run a collective block; an exception on any rank ends the job (``MPI_Abort``).

    With one rank the exception propagates as usual. Errors that every rank meets alike (a
    solve that does not converge) should be raised after the block, not inside it.
    """
    try:
        yield
    except BaseException:
        if comm.size > 1:
            traceback.print_exc(file=sys.__stderr__ or sys.stderr)
            _abort(comm)
        raise


def _describe(err: ElastofeError) -> tuple:
    """A picklable description of an expected error (CaseError takes three arguments)."""
    if isinstance(err, CaseError):
        return ("case", err.key, err.value, err.expected)
    kind = "solver" if isinstance(err, SolverError) else "model" if isinstance(err, ModelError) else "other"
    return (kind, str(err))


def _rebuild(desc: tuple) -> ElastofeError:
    if desc[0] == "case":
        return CaseError(*desc[1:])
    return {"solver": SolverError, "model": ModelError}.get(desc[0], ElastofeError)(desc[1])


def on_root(comm, fn: Callable[[], T]) -> T | None:
    """Run ``fn()`` on rank 0 only; raise its expected error on every rank alike.

    Returns ``fn()``'s value on rank 0 and None elsewhere. An unexpected exception on rank 0
    ends the job when there are several ranks.
    """
    value, desc = None, None
    if comm.rank == 0:
        try:
            value = fn()
        except ElastofeError as err:
            if comm.size == 1:
                raise
            desc = _describe(err)
        except BaseException:
            if comm.size == 1:
                raise
            traceback.print_exc(file=sys.__stderr__ or sys.stderr)
            _abort(comm)
    if comm.size > 1:
        desc = comm.bcast(desc, root=0)
    if desc is not None:
        raise _rebuild(desc)
    return value


def raise_collectively(comm, local_error: ElastofeError | None) -> None:
    """Raise on every rank when any rank met an expected error (the lowest such rank's message)."""
    desc = _describe(local_error) if local_error is not None else None
    if comm.size > 1:
        every = comm.allgather(desc)
        desc = next((d for d in every if d is not None), None)
    if desc is not None:
        raise _rebuild(desc)
