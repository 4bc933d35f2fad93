"""Collecting the mistakes of a case file so that all of them are reported at once.

The loader's parse functions raise :class:`CaseError` as before; :class:`Collector` runs each
independent part of the file (a section, one region, one support, one load, ...) in its own
:meth:`Collector.section` and keeps what they raise. :meth:`Collector.check` then raises the one
error as it was, or a :class:`CaseErrors` with all of them (at most :data:`MAX_ERRORS`). A part
that depends on another part that failed is skipped by the loader, so that one mistake is not
reported again as the errors it causes.
"""
from __future__ import annotations

import contextlib
from typing import Callable, Iterable, Iterator

from ..errors import CaseError, CaseErrors

__all__ = ["MAX_ERRORS", "Collector"]

#: Errors listed at most; the rest are counted ("... and N more").
MAX_ERRORS = 20


class Collector:
    """Errors of the independent parts of one case file, in the order found."""

    def __init__(self, cap: int = MAX_ERRORS):
        self.cap = cap
        self.errors: list[CaseError] = []
        self.more = 0

    @property
    def count(self) -> int:
        return len(self.errors) + self.more

    @contextlib.contextmanager
    def section(self) -> Iterator[None]:
        """Run one part of the file; a :class:`CaseError` it raises is kept, not raised."""
        try:
            yield
        except CaseErrors as err:
            for e in err.errors:
                self._add(e)
            self.more += err.more
        except CaseError as err:
            self._add(err)

    def _add(self, err: CaseError) -> None:
        if len(self.errors) < self.cap:
            self.errors.append(err)
        else:
            self.more += 1

    def items(self, get: Callable[[], Iterable], parse: Callable) -> list:
        """``[parse(i, item) for i, item in enumerate(get(), 1)]`` with each item in its own section
        (and ``get`` itself in one); the items that failed are left out."""
        out: list = []
        with self.section():
            for i, item in enumerate(get(), 1):
                with self.section():
                    out.append(parse(i, item))
        return out

    def check(self) -> None:
        """Raise what was kept: the error itself when there is one, :class:`CaseErrors` for several."""
        if len(self.errors) == 1 and not self.more:
            raise self.errors[0]
        if self.errors:
            raise CaseErrors(self.errors, self.more)
