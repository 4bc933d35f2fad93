"""Progress reporting: a callback ``progress(stage, message)`` that library code calls and the
command line prints. Library code never prints; :func:`quiet` sends messages to the log."""
from __future__ import annotations

import logging
from typing import Callable

log = logging.getLogger(__name__)

#: A progress callback: (stage name, message) -> None.
Progress = Callable[[str, str], None]


def quiet(stage: str, message: str) -> None:
    """The default progress callback: log at INFO level, print nothing."""
    log.info("%s: %s", stage, message)
