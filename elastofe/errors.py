"""Typed errors of elastofe.

Library code raises these; the command line turns them into one-line messages and exit codes
(:class:`CaseError` -> 2, :class:`ModelError` -> 3).
"""
from __future__ import annotations

import re
import reprlib

__all__ = ["ElastofeError", "CaseError", "ModelError", "SolverError", "printable", "short_repr"]


class ElastofeError(Exception):
    """Base class of every error the package raises on purpose."""


#: Characters never printed raw: C0 and C1 controls (escape sequences that clear the screen or
#: set the window title start with one), DEL, and the bidirectional overrides that reorder text.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u200e\u200f\u202a-\u202e\u2066-\u2069]")


def printable(text: str, keep: str = "") -> str:
    """``text`` with control characters written as escapes (``\\x1b``, ``\\u202e``); characters in
    ``keep`` (for example a newline) stay as they are."""

    def esc(m: re.Match) -> str:
        c = m.group(0)
        if c in keep:
            return c
        return f"\\x{ord(c):02x}" if ord(c) < 0x100 else f"\\u{ord(c):04x}"

    return _CONTROL.sub(esc, text)


#: A message quotes at most this many characters of a value, key or explanation.
MAX_VALUE, MAX_KEY, MAX_EXPECTED = 120, 200, 1500
_REPR = reprlib.Repr()
_REPR.maxlevel, _REPR.maxstring, _REPR.maxother, _REPR.maxlong = 3, MAX_VALUE - 4, MAX_VALUE - 4, 40
_REPR.maxlist = _REPR.maxtuple = _REPR.maxdict = _REPR.maxset = 10


def short_repr(value: object, limit: int = MAX_VALUE) -> str:
    """A bounded ``repr``: nested containers cut at 3 levels, long lists as an excerpt with
    ``… and N more``, the whole at most ``limit`` characters."""
    if isinstance(value, (list, tuple)) and len(value) > 3:
        opening, closing = ("[", "]") if isinstance(value, list) else ("(", ")")
        parts: list[str] = []
        for v in value:
            r = _safe_repr(v)
            if sum(len(p) + 2 for p in parts) + len(r) > limit - 30 and parts:
                break
            parts.append(r)
        rest = len(value) - len(parts)
        shown = opening + ", ".join(parts) + (f", … and {rest:,} more" if rest else "") + closing
    else:
        shown = _safe_repr(value)
    return shown if len(shown) <= limit else shown[:limit - 3] + "..."


def _safe_repr(value: object) -> str:
    try:
        return _REPR.repr(value)
    except (ValueError, RecursionError):  # an integer of thousands of digits, a deep structure
        return f"<{type(value).__name__}>"


def _cap(text: str, limit: int) -> str:
    text = printable(str(text))
    if len(text) <= limit:
        return text
    return f"{text[:limit - 40]}… ({len(text) - limit + 40:,} more characters)"


class CaseError(ElastofeError):
    """A case file or input that cannot be used as given.

    Parameters
    ----------
    key : str
        Dotted key path in the case file, for example ``"material.E"`` or ``"load[2].region"``.
    value : object
        The offending value (shown as a short ``repr``: long lists as an excerpt).
    expected : str
        What would be valid.

    The message never quotes more than a few hundred characters, and control characters in it
    (from names in the case file) are escaped.
    """

    def __init__(self, key: str, value: object, expected: str):
        self.key = key
        self.value = value
        self.expected = expected
        k, e = _cap(key, MAX_KEY), _cap(expected, MAX_EXPECTED)
        if value is None:  # a missing key: there is no value to show
            super().__init__(f"{k}: {e}")
            return
        super().__init__(f"{k} = {short_repr(value)}: {e}")


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
