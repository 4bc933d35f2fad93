"""No result is ever lost or mixed up, and inputs are never modified.

The interrupted-run tests start a real ``python -m elastofe run`` in a subprocess whose VTU writer
is slowed down (it writes half a file, signals that it is mid-write, then waits), kill it there with
SIGTERM, SIGINT or SIGKILL, and check that the previous results are byte-for-byte intact and no
partial file remains.
"""
from __future__ import annotations

import hashlib
import json
import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from elastofe.cli import main
from elastofe.output import MARKER, verify_results

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

ROOT = Path(__file__).resolve().parent.parent
CORPUS = ROOT / "tests" / "corpus"


def _sha(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


def _snapshot(d: Path) -> dict[str, str]:
    """Every file in a folder (hidden ones too) and its hash."""
    return {p.name: _sha(p) for p in sorted(d.iterdir()) if p.is_file()}


@pytest.fixture
def case(tmp_path):
    shutil.copy(CORPUS / "cube.step", tmp_path / "cube.step")
    p = tmp_path / "case.toml"
    p.write_text((CORPUS / "base.toml").read_text())
    return p


def _run(case, out, *extra) -> tuple[int, str]:
    import io
    from contextlib import redirect_stderr

    buf = io.StringIO()
    with redirect_stderr(buf):
        rc = main(["run", str(case), "-q", "--out", str(out), *extra])
    return rc, buf.getvalue()


SLOW_WRITER = textwrap.dedent('''
    import os, runpy, sys, time
    from pathlib import Path
    import elastofe.output as mesh  # write_results calls output.write_vtu

    real = mesh.write_vtu

    def slow(path, *args, **kw):
        real(path, *args, **kw)                       # a complete file under the temporary name,
        data = Path(path).read_bytes()
        Path(path).write_bytes(data[: len(data) // 2])  # cut to half: the writer is mid-way
        Path(os.environ["FLAG"]).write_text(str(path))
        time.sleep(120)

    mesh.write_vtu = slow
    sys.argv = ["elastofe"] + sys.argv[1:]
    runpy.run_module("elastofe", run_name="__main__", alter_sys=True)
''')


def _start_slow_run(case: Path, out: Path, flag: Path) -> subprocess.Popen:
    env = dict(os.environ, FLAG=str(flag), PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.Popen([sys.executable, "-c", SLOW_WRITER, "run", str(case), "-q", "--out", str(out)],
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _wait_for(flag: Path, proc: subprocess.Popen, timeout: float = 120.0) -> None:
    t0 = time.monotonic()
    while not flag.exists():
        if proc.poll() is not None:
            raise AssertionError(f"the run ended before writing: {proc.communicate()}")
        if time.monotonic() - t0 > timeout:
            proc.kill()
            raise AssertionError("the run never reached the writer")
        time.sleep(0.05)


@pytest.mark.parametrize("sig, code, words", [(signal.SIGTERM, 143, "terminated (SIGTERM)"),
                                              (signal.SIGINT, 130, "interrupted")])
def test_signal_mid_write_keeps_previous_results(case, tmp_path, sig, code, words):
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    before = _snapshot(out)
    assert MARKER in before and "summary.json" in before and verify_results(out) == []
    # The same case file, edited: the new run is allowed to replace the results, and would differ.
    case.write_text(case.read_text().replace("force = [0, -100, 0]", "force = [0, -250, 0]"))
    flag = tmp_path / "flag"
    proc = _start_slow_run(case, out, flag)
    _wait_for(flag, proc)
    part = Path(flag.read_text())
    assert part.exists() and part.name.endswith(".part")  # killed while a partial file existed
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == code, err
    assert words in err and "earlier results were left as they were" in err and "Traceback" not in err
    assert _snapshot(out) == before  # byte-for-byte the previous results, nothing added
    assert not list(out.glob("*.part")) and not list(out.glob(".*.part"))
    assert verify_results(out) == []


def test_sigkill_mid_write_then_next_run_cleans_up(case, tmp_path):
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    before = _snapshot(out)
    flag = tmp_path / "flag"
    proc = _start_slow_run(case, out, flag)
    _wait_for(flag, proc)
    proc.kill()  # no handler can run: the partial file stays behind ...
    proc.communicate(timeout=60)
    left = {p.name for p in out.glob(".*.part")}
    assert left, "a hard kill mid-write leaves its temporary file"
    now = _snapshot(out)
    assert {k: v for k, v in now.items() if k not in left} == before  # ... but the results are intact
    assert verify_results(out) == []
    assert _run(case, out)[0] == 0  # the next run removes it
    assert not list(out.glob(".*.part")) and verify_results(out) == []


def test_exception_mid_write_keeps_previous_results(case, tmp_path, monkeypatch):
    """A full disk while the VTU is written: exit 2, earlier results intact, no partial file."""
    import errno

    import elastofe.output as mesh  # write_results calls output.write_vtu

    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    before = _snapshot(out)
    real = mesh.write_vtu

    def full(path, *a, **k):
        real(path, *a, **k)
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(mesh, "write_vtu", full)
    rc, err = _run(case, out)
    assert rc == 2
    assert err.strip() == (f"elastofe: error on the command line: --out = {str(out)!r}: the results could not be written "
                           "(No space left on device); earlier results there were left as they were")
    assert _snapshot(out) == before and not list(out.glob(".*.part"))


def test_other_case_needs_overwrite(case, tmp_path):
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    other = tmp_path / "other.toml"
    other.write_text(case.read_text().replace("force = [0, -100, 0]", "force = [0, 0, -100]"))
    before = _snapshot(out)
    rc, err = _run(other, out)
    assert rc == 2
    sha = json.loads((out / MARKER).read_text())["case_sha256"][:12]
    assert err.strip() == (f"elastofe: error on the command line: --out = {str(out)!r}: holds the results of another case "
                           f"({case.resolve()}, sha256 {sha}...); pass --overwrite to replace them, or choose another --out")
    assert _snapshot(out) == before
    assert _run(other, out, "--overwrite")[0] == 0
    rec = json.loads((out / MARKER).read_text())
    assert rec["case_file"] == str(other.resolve()) and rec["case_sha256"] == _sha(other)
    # A copy of a case (same bytes, other path) is the same case: no flag needed.
    copy = tmp_path / "copy.toml"
    copy.write_bytes(other.read_bytes())
    assert _run(copy, out)[0] == 0


def test_results_without_record_need_overwrite(case, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "summary.json").write_text("{}")
    rc, err = _run(case, out)
    assert rc == 2 and "holds results (summary.json) with no record of their case" in err
    assert _run(case, out, "--overwrite")[0] == 0 and verify_results(out) == []


def test_stale_line_files_removed(case, tmp_path):
    """A line dropped from the case must not leave its old CSV looking like a current result."""
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    assert (out / "line-diagonal.csv").exists()
    case.write_text(case.read_text().replace('name = "diagonal"', 'name = "edge"'))
    assert _run(case, out)[0] == 0
    assert not (out / "line-diagonal.csv").exists() and (out / "line-edge.csv").exists()
    assert verify_results(out) == []


@pytest.mark.parametrize("geometry", ["cube.step", "cube4.msh"])
def test_inputs_never_modified(tmp_path, geometry):
    """Case and geometry files have the same bytes and modification time after a run."""
    shutil.copy(CORPUS / geometry, tmp_path / geometry)
    case = tmp_path / "case.toml"
    case.write_text((CORPUS / "base.toml").read_text().replace('file = "cube.step"', f'file = "{geometry}"'))
    files = [case, tmp_path / geometry]
    before = [(_sha(p), p.stat().st_mtime_ns) for p in files]
    # Results next to the inputs (the default folder) and a second run over them.
    assert main(["run", str(case), "-q"]) == 0
    assert main(["run", str(case), "-q"]) == 0
    assert [(_sha(p), p.stat().st_mtime_ns) for p in files] == before
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([case.name, geometry, "case-results"])
