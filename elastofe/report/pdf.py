"""The report as PDF: the same HTML printed by a headless Chromium (``--print-to-pdf``).

Chromium is what the report's browser test already uses (CI installs Debian's ``chromium``), it lays
out the page exactly as a reader's browser does, and it needs no Python package. The executable is
``ELASTOFE_CHROMIUM`` when set, else the first of ``chromium``, ``chromium-browser``,
``google-chrome`` on the PATH. The print runs in its own temporary profile, with a timeout.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from pathlib import Path
from typing import Optional

from ..errors import CaseError
from ..files import atomic_path

#: Seconds a print may take (a long report with many pictures prints in a few seconds).
TIMEOUT = 180.0
NAMES = ("chromium", "chromium-browser", "google-chrome")


def find_browser() -> Optional[str]:
    """The headless browser used to print, or None."""
    env = os.environ.get("ELASTOFE_CHROMIUM")
    if env:
        return env if Path(env).is_file() or shutil.which(env) else None
    for n in NAMES:
        p = shutil.which(n)
        if p:
            return p
    return None


MISSING = ("needs a Chromium browser to print the report (chromium, chromium-browser or google-chrome on the PATH, "
           "or ELASTOFE_CHROMIUM naming one); install it, e.g. 'apt-get install chromium' on Debian; report.html "
           "is written without it")


def print_pdf(html: Path, target: Path) -> Path:
    """Print ``html`` to the PDF ``target`` (A4, the page's own print styles); returns ``target``.

    Raises
    ------
    CaseError
        Key ``--pdf``: no browser found, or the browser failed (its last message quoted).
    """
    exe = find_browser()
    if exe is None:
        raise CaseError("--pdf", None, MISSING)
    target = Path(target)
    with tempfile.TemporaryDirectory(prefix="elastofe-pdf-") as profile, atomic_path(target) as tmp:
        cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-dev-shm-usage",
               "--disable-extensions", f"--user-data-dir={profile}", "--no-pdf-header-footer",
               f"--print-to-pdf={tmp}", Path(html).resolve().as_uri()]
        try:
            cp = subprocess.run(cmd, capture_output=True, text=True, timeout=TIMEOUT,
                                env=dict(os.environ, HOME=profile))
        except (OSError, subprocess.TimeoutExpired) as err:
            raise CaseError("--pdf", str(target), f"the browser could not print the report ({err})") from None
        if not Path(tmp).is_file() or Path(tmp).stat().st_size < 1000 or not Path(tmp).read_bytes()[:5] == b"%PDF-":
            last = (cp.stderr.strip().splitlines() or ["no message"])[-1][:200]
            raise CaseError("--pdf", str(target), f"the browser wrote no PDF (exit {cp.returncode}: {last})")
    return target
