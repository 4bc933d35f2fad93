"""Capture what native libraries write straight to file descriptors 1 and 2.

OpenCASCADE's STEP reader and meshio print their complaints to stdout/stderr themselves, below
Python's ``sys.stdout``; a bad input would then show several unrelated lines instead of the one
message the command line promises. :func:`captured_fds` redirects both descriptors into a
temporary file for the duration of a call and hands the text back, so the caller can quote the
useful line in its own error.
"""
from __future__ import annotations

import contextlib
import os
import sys
import tempfile


class Captured:
    """Text written to fds 1 and 2 while the context was active (``text``, filled on exit)."""

    text: str = ""

    def first_error(self) -> str:
        """The first line that looks like an error message, cleaned of colour codes, or ''."""
        import re

        for line in self.text.splitlines():
            clean = re.sub(r"\x1b\[[0-9;]*m", "", line).strip(" *\t")
            if clean and re.search(r"err|fail|incorrect|unexpected|illegal|couldn", clean, re.I):
                return clean
        return ""


@contextlib.contextmanager
def captured_fds():
    """Redirect fds 1 and 2 to a temporary file; yields a :class:`Captured` filled on exit."""
    cap = Captured()
    for s in (sys.stdout, sys.stderr):
        with contextlib.suppress(Exception):
            s.flush()
    try:
        saved = [os.dup(1), os.dup(2)]
    except OSError:  # no usable descriptors (embedded use): capture nothing
        yield cap
        return
    import io

    py_out = io.StringIO()
    with tempfile.TemporaryFile(mode="w+b") as tmp:
        try:
            os.dup2(tmp.fileno(), 1)
            os.dup2(tmp.fileno(), 2)
            # Python-level prints too (sys.stdout need not write to fd 1, e.g. under a test runner).
            with contextlib.redirect_stdout(py_out), contextlib.redirect_stderr(py_out):
                yield cap
        finally:
            for s in (sys.stdout, sys.stderr):
                with contextlib.suppress(Exception):
                    s.flush()
            os.dup2(saved[0], 1)
            os.dup2(saved[1], 2)
            for fd in saved:
                os.close(fd)
            tmp.seek(0)
            cap.text = py_out.getvalue() + tmp.read(1 << 20).decode("utf-8", "replace")
