"""Typed errors of elastofe.

Library code raises these; the command line turns them into one-line messages and exit codes
(:class:`CaseError` -> 2, :class:`ModelError` -> 3).
"""
from __future__ import annotations


class ElastofeError(Exception):
    """Base class of every error the package raises on purpose."""


class CaseError(ElastofeError):
    """A case file or input that cannot be used as given.

    Parameters
    ----------
    key : str
        Dotted key path in the case file, for example ``"material.E"`` or ``"load[2].region"``.
    value : object
        The offending value (shown with ``repr``).
    expected : str
        What would be valid.
    """

    def __init__(self, key: str, value: object, expected: str):
        self.key = key
        self.value = value
        self.expected = expected
        if value is None:  # a missing key: there is no value to show
            super().__init__(f"{key}: {expected}")
            return
        shown = repr(value)
        if len(shown) > 120:
            shown = shown[:117] + "..."
        super().__init__(f"{key} = {shown}: {expected}")


class ModelError(ElastofeError):
    """A model that is well-formed but cannot be solved (for example not restrained)."""


class SolverError(ModelError):
    """A linear solve that failed, did not converge or met a singular/indefinite system."""


class CaseErrors(CaseError):
    """Several independent mistakes in one case file, each a :class:`CaseError` (in ``errors``).

    ``key``, ``value`` and ``expected`` are the first error's, so code that handles one
    :class:`CaseError` still works; ``more`` counts errors found beyond the cap and not listed.
    ``str()`` gives one line per error.
    """

    def __init__(self, errors: list, more: int = 0):
        first = errors[0]
        super().__init__(first.key, first.value, first.expected)
        self.errors = list(errors)
        self.more = more
        lines = [str(e) for e in self.errors]
        if more:
            lines.append(f"... and {more} more")
        self.args = ("\n".join(lines),)
