"""Files: safe names, hashes, JSON-ready values, atomic writes, results folders and input files.

A leaf module: it imports nothing of the package but :mod:`elastofe.errors`, so the case loader,
the outputs, the studies and the report all share it.

Results folders (:class:`StagedOutputs`): a run writes all its files into a fresh hidden folder
``.elastofe-runs/RUN`` of the results folder and then shows them all at once by switching one
symbolic link, ``.elastofe-current``, with a single ``rename``; the names in the results folder
(``summary.json``, ...) are links through it. At every instant the folder shows exactly one
complete run, whatever kills the writer and when. :class:`FolderLock` lets one writer at a time
into a folder. Readers that open several files of a run take the run's own folder once
(:func:`results_dir`, :func:`read_consistent`).

Input files (:func:`check_input_file`, :func:`read_input_bytes`): only regular files of a size
that can be read are opened; pipes, devices, folders, symbolic-link loops and over-long paths are
refused naming the key.
"""
from __future__ import annotations

import contextlib
import errno
import hashlib
import json
import math
import os
import re
import shutil
import signal
import stat
import tempfile
import threading
import time
import uuid
from pathlib import Path
from types import ModuleType
from typing import Any, Callable, Iterable, Iterator, Optional

import numpy as np

from .errors import CaseError

__all__ = ["safe_name", "sha256_file", "sha256_or_none", "sha256_text", "json_ready", "atomic_path",
           "write_text", "signals_held", "fsync_path", "fsync_tree", "tree_hashes", "StagedOutputs",
           "staged_outputs", "remove_stale_parts", "file_mode", "RECORD", "RUNS_DIR", "CURRENT", "LOCK_FILE",
           "own_link", "current_dir", "results_dir", "read_consistent", "check_folder", "amended", "FolderLock",
           "folder_lock", "pid_alive", "CASE_FILE_MAX", "os_problem", "size_text", "check_input_file",
           "read_input_bytes"]


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


# ----------------------------------------------------------------------------- results folders
#: The case record of a results folder (its run's files and their SHA-256, the case's identity).
RECORD = ".elastofe-case.json"
#: Hidden folder of a results folder holding each run's complete set of files.
RUNS_DIR = ".elastofe-runs"
#: Symbolic link naming the run a results folder shows: ``.elastofe-runs/RUN``.
CURRENT = ".elastofe-current"
#: The advisory lock file of a results folder (holds the writer's process id).
LOCK_FILE = ".elastofe-lock"
_TEMP_PREFIXES = (".elastofe-link-", ".elastofe-switch-")
#: Names of the run folders elastofe makes (the only ones it removes).
_RUN_NAME = re.compile(r"(adopted-)?[0-9a-f]{32}")


def own_link(path: Path | str) -> bool:
    """True when ``path`` is one of the links a results folder shows its run through
    (``NAME -> .elastofe-current/NAME``)."""
    path = Path(path)
    try:
        return os.readlink(path) == f"{CURRENT}/{path.name}"
    except OSError:
        return False


def current_dir(folder: Path | str) -> Optional[Path]:
    """The folder of the run that ``folder`` shows (None when it shows none: no run yet, or a
    folder written before runs had folders of their own)."""
    folder = Path(folder)
    try:
        rel = os.readlink(folder / CURRENT)
    except OSError:
        return None
    d = folder / rel
    return d if d.is_dir() else None


def results_dir(folder: Path | str) -> Path:
    """Where the files of ``folder``'s run are read from, all from one run: the run's own folder,
    or ``folder`` itself when it has none."""
    return current_dir(folder) or Path(folder)


def read_consistent(folder: Path | str, read: Callable[[Path], Any]) -> Any:
    """``read(results_dir(folder))``, read again when a new run replaced the one being read.

    A writer removes the previous run's folder right after switching to the new one, so a reader
    that began on the old run may find a file gone; it then reads the new run instead.
    """
    for _ in range(4):
        d = results_dir(folder)
        try:
            return read(d)
        except OSError:
            if results_dir(folder) == d:
                raise
    return read(results_dir(folder))


def fsync_tree(root: Path) -> None:
    """Flush every file and folder under ``root`` to disk (best effort)."""
    for dirpath, _, filenames in os.walk(root):
        for f in filenames:
            fsync_path(Path(dirpath) / f)
        fsync_path(dirpath)


def tree_hashes(root: Path, skip: tuple[str, ...] = ()) -> dict[str, str]:
    """``{relative path: sha256}`` of every regular file under ``root`` (``skip``: top-level names)."""
    out = {}
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames.sort()
        for f in sorted(filenames):
            p = Path(dirpath) / f
            rel = p.relative_to(root).as_posix()
            if rel in skip or not p.is_file():
                continue
            out[rel] = sha256_file(p)
    return out


def _links_work(folder: Path) -> bool:
    """Whether symbolic links can be made in ``folder`` (not on FAT or some network shares)."""
    probe = folder / f".elastofe-link-probe-{uuid.uuid4().hex[:12]}"
    try:
        os.symlink(CURRENT, probe)
    except (OSError, NotImplementedError):
        return False
    with contextlib.suppress(OSError):
        probe.unlink()
    return True


def _plain(path: Path) -> bool:
    """Something other than our own link exists at ``path`` (a file, folder or foreign link)."""
    return os.path.lexists(path) and not own_link(path)


def _link_tree(src: Path, dst: Path) -> None:
    """A copy of the folder ``src`` as ``dst`` made of hard links (copies where links fail)."""
    dst.mkdir(exist_ok=True)
    for entry in os.scandir(src):
        s, d = Path(entry.path), dst / entry.name
        if entry.is_symlink():
            os.symlink(os.readlink(s), d)
        elif entry.is_dir():
            _link_tree(s, d)
        else:
            try:
                os.link(s, d)
            except OSError:
                shutil.copy2(s, d)


class StagedOutputs:
    """The files of one run, written into a fresh hidden folder and shown all at once.

    A results folder ``F`` shows one run: ``F/NAME`` is a symbolic link ``.elastofe-current/NAME``,
    and ``F/.elastofe-current`` a link to the run's own folder ``.elastofe-runs/RUN``. A new run's
    files are written completely into ``.elastofe-runs/NEW`` (:meth:`path`, :meth:`write_text`);
    :meth:`commit` flushes them to disk, adds the links of names that are new, and switches
    ``.elastofe-current`` to the new folder with one ``rename`` (atomic on POSIX file systems);
    only then are links of names the new run lacks and the previous run's folder removed. So at
    every instant, killed or not, the folder shows one complete run: the old one or the new one.
    Readers that open several files take the run's folder once (:func:`results_dir`).

    Use through :func:`staged_outputs`, holding the folder's :class:`FolderLock`.
    """

    def __init__(self, folder: Path | str, key: str = "--out"):
        self.folder = Path(folder)
        self.key = key
        self.run_id = uuid.uuid4().hex
        runs = self.folder / RUNS_DIR
        if runs.is_symlink() or (runs.exists() and not runs.is_dir()):
            # Never follow it: the previous runs' folders in it are removed after each switch.
            raise CaseError(key, str(self.folder), f"holds {RUNS_DIR}, which is not a folder of elastofe's; "
                            f"remove it, or choose another {key}")
        runs.mkdir(parents=True, exist_ok=True)
        self.dir = runs / self.run_id
        self.dir.mkdir()
        self.committed = False
        self._mode = file_mode()

    def path(self, name: str) -> Path:
        """Where to write the result file ``name`` (a relative path; folders are made)."""
        p = self.dir / name
        p.parent.mkdir(parents=True, exist_ok=True)
        if p.is_file():  # a hard link shared with the shown run (see amended): write a new file
            p.unlink()
        return p

    def adopt(self, tmp: Path, name: str) -> None:
        """Take into this run a file another process wrote completely under a temporary name in
        the results folder (a rank of a distributed run writing its piece of the fields): it is
        moved into the run's folder as ``name`` (one rename, same file system)."""
        os.replace(tmp, self.path(name))

    def write_text(self, name: str, text: str) -> None:
        with open(self.path(name), "w", encoding="utf-8") as fh:
            fh.write(text)

    def names(self) -> list[str]:
        """Top-level names written so far."""
        return sorted(p.name for p in self.dir.iterdir())

    def commit(self, *, record: Optional[dict] = None, replace: Iterable[str] = (),
               protect: Iterable[str] = ()) -> dict[str, str]:
        """Show this run in the folder; return ``{file: sha256}`` of its files.

        Parameters
        ----------
        record : dict, optional
            Written as the run's record :data:`RECORD` (last), with ``files`` added.
        replace : names
            Plain files or folders in the results folder that may be replaced or removed (the
            results of an earlier run written without run folders, or anything with ``--overwrite``).
        protect : names
            Names never touched (the case's input files in that folder).

        Raises
        ------
        CaseError
            When the run would replace a protected name, or a file that is not a result.
        """
        folder, protect_set = self.folder, set(protect)
        files = tree_hashes(self.dir, skip=(RECORD,))
        if record is not None:
            with open(self.dir / RECORD, "w", encoding="utf-8") as fh:
                fh.write(json.dumps(dict(record, files=files), indent=2) + "\n")
        names = self.names()
        replace_set = set(replace) - protect_set
        for n in names:
            if n in protect_set:
                raise CaseError(self.key, str(folder), f"writing the results there would replace the input file "
                                f"{n}; inputs are never overwritten: choose another {self.key}")
            if _plain(folder / n) and n not in replace_set:
                raise CaseError(self.key, str(folder), f"holds {n}, which is not a result of this case; "
                                f"pass --overwrite to replace it, or choose another {self.key}")
        for root, _, fnames in os.walk(self.dir):
            for f in fnames:
                with contextlib.suppress(OSError):
                    os.chmod(Path(root) / f, self._mode)
        fsync_tree(self.dir)
        fsync_path(self.dir.parent)
        with signals_held():
            if not _links_work(folder):
                self._commit_plain(names, replace_set)
                return files
            legacy = sorted(n for n in replace_set if _plain(folder / n))
            if legacy:
                self._adopt(legacy)
            for n in names:
                self._link(n)
            self._switch(self.dir)
            self.committed = True
            fsync_path(folder)
            self._tidy(set(names))
        return files

    def _commit_plain(self, names: list[str], replace_set: set[str]) -> None:
        """Where the file system has no symbolic links (FAT, some network shares): the files are
        renamed into the folder one by one, summary.json and the record last. A run interrupted
        during these renames can leave files of two runs; ``check_folder`` then names them."""
        order = sorted(names, key=lambda n: (n == RECORD, n == "summary.json"))
        for n in order:
            target = self.folder / n
            src = self.dir / n
            if src.is_dir():
                if target.is_dir() and not target.is_symlink():
                    shutil.rmtree(target)
                os.rename(src, target)
            else:
                os.replace(src, target)
        for n in sorted(replace_set - set(names)):
            p = self.folder / n
            with contextlib.suppress(OSError):
                shutil.rmtree(p) if p.is_dir() and not p.is_symlink() else p.unlink()
        self.committed = True
        fsync_path(self.folder)
        shutil.rmtree(self.dir.parent, ignore_errors=True)

    def discard(self) -> None:
        if not self.committed:
            shutil.rmtree(self.dir, ignore_errors=True)

    # -- steps of the switch-over
    def _switch(self, run_dir: Path) -> None:
        """Point ``.elastofe-current`` at ``run_dir`` with one rename."""
        tmp = self.folder / f"{_TEMP_PREFIXES[1]}{uuid.uuid4().hex[:12]}"
        os.symlink(f"{RUNS_DIR}/{run_dir.name}", tmp)
        os.replace(tmp, self.folder / CURRENT)

    def _link(self, name: str) -> None:
        p = self.folder / name
        if own_link(p):
            return
        tmp = self.folder / f"{_TEMP_PREFIXES[0]}{uuid.uuid4().hex[:12]}"
        os.symlink(f"{CURRENT}/{name}", tmp)
        os.replace(tmp, p)

    def _adopt(self, legacy: list[str]) -> None:
        """Move plain result files under run folders without changing what the folder shows.

        A run folder is made of hard links to the shown run's files and to the plain ones; the
        folder is switched to it (nothing visible changes), then each plain file is replaced by
        the link to its identical copy.
        """
        cur = current_dir(self.folder)
        adopted = self.folder / RUNS_DIR / f"adopted-{uuid.uuid4().hex}"
        if cur is not None:
            _link_tree(cur, adopted)
        else:
            adopted.mkdir()
        for n in legacy:
            src, dst = self.folder / n, adopted / n
            if os.path.lexists(dst):
                if dst.is_dir() and not dst.is_symlink():
                    shutil.rmtree(dst)
                else:
                    dst.unlink()
            if src.is_symlink():
                os.symlink(os.readlink(src), dst)
            elif src.is_dir():
                os.rename(src, dst)  # a folder cannot be replaced by a link in one step
            else:
                try:
                    os.link(src, dst)
                except OSError:
                    shutil.copy2(src, dst)
        fsync_tree(adopted)
        self._switch(adopted)
        for n in legacy:
            self._link(n)

    def _tidy(self, names: set[str]) -> None:
        """Remove links of names the shown run lacks, earlier run folders and temporary links."""
        for entry in os.scandir(self.folder):
            p = Path(entry.path)
            if (entry.name not in names and own_link(p)) or \
                    (entry.name.startswith(_TEMP_PREFIXES) and entry.is_symlink()):
                with contextlib.suppress(OSError):
                    p.unlink()
        for entry in os.scandir(self.folder / RUNS_DIR):
            if entry.name != self.dir.name and _RUN_NAME.fullmatch(entry.name) and not entry.is_symlink():
                shutil.rmtree(entry.path, ignore_errors=True)
        remove_stale_parts(self.folder)


@contextlib.contextmanager
def staged_outputs(folder: Path | str, key: str = "--out") -> Iterator[StagedOutputs]:
    """A :class:`StagedOutputs` for ``folder``; a set not committed is deleted on exit."""
    st = StagedOutputs(folder, key)
    try:
        yield st
    finally:
        st.discard()


@contextlib.contextmanager
def amended(folder: Path | str, key: str = "--out") -> Iterator[StagedOutputs]:
    """A new version of the run ``folder`` shows, to add files to it (a report) with the same
    guarantees as a run: it starts as hard links to the shown run's files, and is shown by one
    atomic switch on leaving the block; the folder's lock is held throughout."""
    folder = Path(folder)
    with folder_lock(folder, key):
        cur = current_dir(folder)
        with staged_outputs(folder, key) as st:
            record = None
            if cur is not None:
                _link_tree(cur, st.dir)
                with contextlib.suppress(OSError, ValueError):
                    record = json.loads((cur / RECORD).read_text(encoding="utf-8"))
                with contextlib.suppress(OSError):
                    (st.dir / RECORD).unlink()
            yield st
            keep = {k: v for k, v in record.items() if k != "files"} if isinstance(record, dict) else None
            st.commit(record=keep)


def check_folder(folder: Path | str) -> list[str]:
    """Files of a results folder that do not match its record (empty: one complete run).

    Checks the shown run's files against the SHA-256 in its record, and that every name the
    record lists is shown through the folder's link or, while a folder of the older layout is
    being taken over, as a plain file with the same bytes.
    """
    folder = Path(folder)

    def check(d: Path) -> list[str]:
        try:
            rec = json.loads((d / RECORD).read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise
        except (OSError, ValueError):
            return [RECORD]
        if not isinstance(rec, dict):
            return [RECORD]
        files = rec.get("files") or {}
        bad = []
        for name, sha in files.items():
            p = d / name
            if not p.is_file() or sha256_file(p) != sha:
                bad.append(name)
                continue
            top = name.split("/")[0]
            if d != folder and not own_link(folder / top):
                # Shown as a plain file (a folder being taken over from the older layout): it
                # must hold the very same bytes.
                q = folder / name
                if not q.is_file() or (not os.path.samefile(p, q) and sha256_file(q) != sha):
                    bad.append(name)
        if d != folder and not own_link(folder / RECORD) and not (folder / RECORD).is_file():
            bad.append(RECORD)
        return bad

    try:
        return read_consistent(folder, check)
    except FileNotFoundError:
        return [RECORD]


# ----------------------------------------------------------------------------- the lock
def pid_alive(pid: int) -> bool:
    """Whether a process of that id exists on this machine."""
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    except OSError:
        return False
    return True


def _read_pid(path: Path) -> Optional[int]:
    try:
        text = path.read_text(encoding="ascii", errors="replace").strip()
    except OSError:
        return None
    return int(text) if text.isdigit() else None


class FolderLock:
    """The advisory lock of a results folder: one writer at a time.

    The lock file ``FOLDER/.elastofe-lock`` holds the writer's process id. Where ``fcntl.flock``
    exists the lock is the file's ``flock`` (released by the kernel when the holder dies, so a
    dead writer's lock is taken over at once); elsewhere the file is created exclusively and a
    lock whose process no longer exists is taken over. The folder is created when missing (and
    removed again on release when it was made here and is still empty).

    Raises :class:`CaseError` on ``key`` naming the folder and the other writer's process id.
    """

    def __init__(self, folder: Path | str, key: str = "--out"):
        self.folder = Path(folder)
        self.key = key
        self.path = self.folder / LOCK_FILE
        self._fd: Optional[int] = None
        self._created = False

    def _busy(self, pid: Optional[int]) -> CaseError:
        who = f"pid {pid}" if pid else "process id not yet written"
        return CaseError(self.key, str(self.folder), f"is being written by another elastofe run ({who}); wait "
                         f"for it to finish, or choose another {self.key}")

    def acquire(self) -> FolderLock:
        try:
            if not self.folder.is_dir():
                self.folder.mkdir(parents=True)
                self._created = True
        except FileExistsError:
            pass
        except OSError as err:
            raise CaseError(self.key, str(self.folder), f"cannot be created ({os_problem(err)}); choose "
                            f"another {self.key}") from None
        fcntl: Optional[ModuleType]
        try:
            import fcntl
        except ImportError:  # pragma: no cover - platforms without flock
            fcntl = None
        try:
            if fcntl is not None:
                self._flock(fcntl)
            else:  # pragma: no cover
                self._exclusive()
        except OSError as err:
            raise CaseError(self.key, str(self.folder), f"cannot be locked for writing ({os_problem(err)}); "
                            f"choose another {self.key}") from None
        return self

    def _flock(self, fcntl) -> None:
        flags = os.O_RDWR | os.O_CREAT | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_NOFOLLOW", 0)
        for _ in range(100):
            fd = os.open(self.path, flags, 0o644)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError as err:
                os.close(fd)
                if err.errno in (errno.EAGAIN, errno.EACCES, errno.EWOULDBLOCK):
                    pid = None
                    for _ in range(20):  # the holder writes its id right after locking
                        pid = _read_pid(self.path)
                        if pid:
                            break
                        time.sleep(0.01)
                    raise self._busy(pid) from None
                if err.errno in (errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOSYS):
                    self._exclusive()  # a file system without flock
                    return
                raise
            # The holder before us may have removed the file it locked: lock the one at the path.
            try:
                same = os.path.samestat(os.fstat(fd), os.stat(self.path))
            except OSError:
                same = False
            if not same:
                os.close(fd)
                continue
            os.ftruncate(fd, 0)
            os.write(fd, f"{os.getpid()}\n".encode("ascii"))
            self._fd = fd
            return
        raise OSError(errno.EAGAIN, "the lock file keeps changing")

    def _exclusive(self) -> None:
        """Lock by exclusive creation (no flock): a lock of a process that is gone is taken over."""
        for _ in range(100):
            try:
                fd = os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                pid = _read_pid(self.path)
                if pid and pid_alive(pid) and pid != os.getpid():
                    raise self._busy(pid) from None
                if pid is None:
                    time.sleep(0.02)
                    if _read_pid(self.path) is None and self.path.exists():
                        with contextlib.suppress(OSError):
                            self.path.unlink()
                    continue
                # A stale lock: take it over by renaming ours onto it, then make sure it stayed ours.
                tmp = self.folder / f".elastofe-lock.{os.getpid()}"
                tmp.write_text(f"{os.getpid()}\n", encoding="ascii")
                os.replace(tmp, self.path)
                time.sleep(0.05)
                if _read_pid(self.path) == os.getpid():
                    self._fd = -1
                    return
                continue
            os.write(fd, f"{os.getpid()}\n".encode("ascii"))
            os.close(fd)
            self._fd = -1
            return
        raise OSError(errno.EAGAIN, "the lock file keeps changing")

    def release(self) -> None:
        if self._fd is None:
            return
        with contextlib.suppress(OSError):
            self.path.unlink()  # before unlocking: a waiter that opened this file will see it is gone
        if self._fd >= 0:
            os.close(self._fd)
        self._fd = None
        if self._created:
            with contextlib.suppress(OSError):
                self.folder.rmdir()  # only when empty: a failed first run leaves no empty folder

    def __enter__(self) -> FolderLock:
        return self.acquire()

    def __exit__(self, *exc) -> None:
        self.release()


def folder_lock(folder: Path | str, key: str = "--out") -> FolderLock:
    """The :class:`FolderLock` of ``folder`` (use as ``with folder_lock(out): ...``)."""
    return FolderLock(folder, key)


# ----------------------------------------------------------------------------- input files
#: A case file larger than this is refused before reading [bytes].
CASE_FILE_MAX = 10 * 1024 * 1024
_KINDS = ((stat.S_ISFIFO, "a named pipe (FIFO)"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))


def os_problem(err: OSError) -> str:
    """A short account of an operating-system error on a path, for messages."""
    if err.errno == errno.ENAMETOOLONG:
        return "the path is too long for the file system: at most 255 bytes per name"
    if err.errno == errno.ELOOP:
        return "a loop of symbolic links"
    return err.strerror or str(err)


def size_text(n: float) -> str:
    """Bytes as a short text (``12.3 MB``)."""
    for unit, scale in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= scale:
            return f"{n / scale:.3g} {unit}"
    return f"{int(n)} bytes"


def check_input_file(path: Path | str, key: str, *, max_bytes: Optional[float] = None,
                     limit_reason: str = "", not_found: str = "file not found") -> os.stat_result:
    """Refuse (:class:`CaseError` on ``key``) anything but a readable regular file of a size
    that can be read; return its ``os.stat`` result.

    Checked with ``os.stat`` before anything opens the path, so a named pipe (which would block
    the reader for ever), a device such as ``/dev/zero`` (endless data) or a folder is named and
    refused, as are paths too long for the file system and loops of symbolic links.
    """
    shown = str(path)
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise CaseError(key, shown, not_found) from None
    except (OSError, ValueError) as err:  # ValueError: a NUL byte in the path
        why = os_problem(err) if isinstance(err, OSError) else "the path holds a NUL character"
        raise CaseError(key, shown, f"cannot be read ({why})") from None
    if stat.S_ISDIR(st.st_mode):
        raise CaseError(key, shown, "is a folder; give the file itself")
    for test, kind in _KINDS:
        if test(st.st_mode):
            raise CaseError(key, shown, f"is {kind}, not a regular file; elastofe reads regular files only")
    if not stat.S_ISREG(st.st_mode):
        raise CaseError(key, shown, "is not a regular file; elastofe reads regular files only")
    if max_bytes is not None and st.st_size > max_bytes:
        raise CaseError(key, shown, f"is {size_text(st.st_size)}, more than the {size_text(max_bytes)} that can be "
                        f"read here{' (' + limit_reason + ')' if limit_reason else ''}")
    if not os.access(path, os.R_OK):
        raise CaseError(key, shown, "cannot be read (no read permission)")
    return st


def read_input_bytes(path: Path | str, key: str, *, max_bytes: Optional[float], limit_reason: str = "",
                     not_found: str = "file not found") -> bytes:
    """The bytes of an input file, after :func:`check_input_file`; never more than ``max_bytes``
    (None: no limit).

    Opened without blocking and checked again on the open file, so a path swapped for a pipe
    or a device after the check is refused too.
    """
    check_input_file(path, key, max_bytes=max_bytes, limit_reason=limit_reason, not_found=not_found)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0)
    try:
        fd = os.open(path, flags)
    except OSError as err:
        raise CaseError(key, str(path), f"cannot be read ({os_problem(err)})") from None
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            raise CaseError(key, str(path), "is not a regular file; elastofe reads regular files only")
        with os.fdopen(fd, "rb", closefd=False) as fh:
            data = fh.read() if max_bytes is None else fh.read(int(max_bytes) + 1)
    except OSError as err:
        raise CaseError(key, str(path), f"cannot be read ({os_problem(err)})") from None
    finally:
        os.close(fd)
    if max_bytes is not None and len(data) > max_bytes:
        raise CaseError(key, str(path), f"is more than the {size_text(max_bytes)} that can be read here"
                        f"{' (' + limit_reason + ')' if limit_reason else ''}")
    return data


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
