"""Files: safe names, hashes, JSON-ready values and atomic, staged writes (one home for each).

A leaf module: it imports nothing of the package but :mod:`elastofe.errors`, so the case loader,
the outputs, the studies and the report all share it.

Staged writes: every file of a set is written completely under a temporary name in the target
folder (``.NAME.XXXX.part``); :meth:`StagedOutputs.commit` renames them all into place, in the
order staged, with SIGINT/SIGTERM held back for those few renames. An interrupted write leaves the
previous files intact and no partial file; ``.part`` files left by a killed process are removed
by :func:`remove_stale_parts`.
"""
from __future__ import annotations

import contextlib
import hashlib
import math
import os
import signal
import tempfile
import threading
from pathlib import Path
from typing import Any, Iterator, Optional

import numpy as np

__all__ = ["safe_name", "sha256_file", "sha256_or_none", "sha256_text", "json_ready", "atomic_path",
           "write_text", "signals_held", "fsync_path", "StagedOutputs", "staged_outputs",
           "remove_stale_parts", "file_mode"]


def safe_name(name: str) -> str:
    """``name`` with every character other than letters, digits, ``-``, ``_`` and ``.`` as ``_``.

    Used for file names and VTU array names made from user-given names (lines, load cases).
    Two different names can map to the same safe name; callers that make several files check
    for that (see :func:`elastofe.case.load.validate`).
    """
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in name)


def sha256_file(path: Path | str) -> str:
    """Hex SHA-256 of a file's bytes (raises OSError when it cannot be read)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def sha256_or_none(path: Path | str | None) -> Optional[str]:
    """:func:`sha256_file`, or None when there is no such readable file."""
    if path is None:
        return None
    try:
        return sha256_file(path)
    except OSError:
        return None


def sha256_text(text: str) -> str:
    """Hex SHA-256 of a string's UTF-8 bytes."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def json_ready(obj: Any) -> Any:
    """A JSON-ready copy: arrays and tuples to lists, numpy scalars to Python, NaN/inf to None."""
    if isinstance(obj, dict):
        return {str(k): json_ready(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_ready(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return json_ready(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def file_mode() -> int:
    """The mode a new file gets under this process's umask (0o666 & ~umask)."""
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


@contextlib.contextmanager
def atomic_path(target: Path | str) -> Iterator[Path]:
    """Yield a temporary path in ``target``'s folder; rename it onto ``target`` on success.

    The file gets the usual mode of a new file (not the 0600 of a temporary file).
    """
    target = Path(target)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        with contextlib.suppress(OSError):
            os.chmod(tmp, file_mode())
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text(target: Path | str, text: str) -> None:
    """Write ``text`` (UTF-8) to ``target`` atomically."""
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")


@contextlib.contextmanager
def signals_held() -> Iterator[None]:
    """Hold back SIGINT and SIGTERM (delivered on exit) while a few renames complete."""
    can = hasattr(signal, "pthread_sigmask") and threading.current_thread() is threading.main_thread()
    if not can:
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT, signal.SIGTERM})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def fsync_path(path: Path | str) -> None:
    """Flush a file's or a folder's data to disk (best effort; not every platform can)."""
    with contextlib.suppress(OSError, AttributeError):
        fd = os.open(path, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


class StagedOutputs:
    """Files written under temporary names in one folder and renamed into place together.

    Use through :func:`staged_outputs`: ``st.path(name)`` gives the temporary path to write
    ``name`` to, ``st.write_text(name, text)`` writes text; :meth:`commit` renames them all in the
    order they were staged (stage summary.json last). Files not committed are deleted.
    """

    def __init__(self, out_dir: Path | str):
        self.out_dir = Path(out_dir)
        self.staged: list[tuple[Path, Path]] = []
        self._mode = file_mode()

    def path(self, name: str) -> Path:
        target = self.out_dir / name
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=self.out_dir)
        os.close(fd)
        self.staged.append((Path(tmp), target))
        return Path(tmp)

    def adopt(self, tmp: Path, name: str) -> None:
        """Stage a file another process wrote under a temporary name in this folder (a rank of a
        distributed run writing its piece of the fields)."""
        self.staged.append((Path(tmp), self.out_dir / name))

    def write_text(self, name: str, text: str) -> None:
        tmp = self.path(name)
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())

    def commit(self, remove: tuple[str, ...] = ()) -> None:
        """Rename every staged file onto its name; delete the names in ``remove`` first."""
        for tmp, _ in self.staged:
            with contextlib.suppress(OSError):
                os.chmod(tmp, self._mode)
            fsync_path(tmp)
        with signals_held():
            for name in remove:
                with contextlib.suppress(FileNotFoundError):
                    (self.out_dir / name).unlink()
            for tmp, target in self.staged:
                os.replace(tmp, target)
            self.staged = []
        fsync_path(self.out_dir)

    def discard(self) -> None:
        for tmp, _ in self.staged:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(tmp)
        self.staged = []


@contextlib.contextmanager
def staged_outputs(out_dir: Path | str) -> Iterator[StagedOutputs]:
    """A :class:`StagedOutputs` for ``out_dir``; whatever is not committed is deleted on exit."""
    st = StagedOutputs(out_dir)
    try:
        yield st
    finally:
        st.discard()


def remove_stale_parts(out_dir: Path | str, keep: tuple = ()) -> list[str]:
    """Delete ``.NAME.XXXX.part`` files a killed run left in ``out_dir`` (but the names in ``keep``,
    written by this run); return their names."""
    gone = []
    for p in Path(out_dir).glob(".*.part"):
        if p.is_file() and p.name not in keep:
            with contextlib.suppress(OSError):
                p.unlink()
                gone.append(p.name)
    return gone
