"""Checking the keys of a case-file table (shared by the case, reference and catalogue loaders)."""
from __future__ import annotations

import difflib

from ..errors import CaseError

__all__ = ["check_keys"]


def check_keys(table: dict, allowed: tuple[str, ...], where: str) -> None:
    """Raise :class:`CaseError` for the first key of ``table`` not in ``allowed``.

    The message names the key path (``where.key``), suggests the closest valid key and lists the
    valid keys.
    """
    for key in table:
        if key not in allowed:
            hint = difflib.get_close_matches(str(key), allowed, n=1, cutoff=0.6)
            path = f"{where}.{key}" if where else str(key)
            msg = f"unknown key; did you mean {hint[0]!r}?" if hint else "unknown key"
            raise CaseError(path, table[key], f"{msg} (valid keys here: {', '.join(allowed)})")
