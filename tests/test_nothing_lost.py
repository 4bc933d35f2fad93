"""No result is ever lost or mixed up, and inputs are never modified.

A results folder shows one run through a symbolic link switched atomically (elastofe.files). The
interrupted-run tests start a real ``python -m elastofe run`` in a subprocess whose VTU writer is
slowed down (it writes half a file, signals that it is mid-write, then waits), kill it there with
SIGTERM, SIGINT or SIGKILL, and check that the results shown are byte-for-byte the previous ones.
The switch-over test kills a writer with SIGKILL before every file-system call of the final phase
in turn (and at random ones), and checks after each kill that the folder shows one complete,
self-consistent run (``output.verify_results``). The two-writer test starts two runs into one
folder at once: exactly one wins, the other is refused naming the folder and the winner's pid.
"""
from __future__ import annotations

import hashlib
import json
import os
import pickle
import shutil
import signal
import stat
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from elastofe.cli import main
from elastofe.files import LOCK_FILE, RUNS_DIR, FolderLock, current_dir
from elastofe.output import MARKER, read_results, verify_results

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

ROOT = Path(__file__).resolve().parent.parent
CORPUS = ROOT / "tests" / "corpus"


def _sha(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


def _snapshot(d: Path) -> dict[str, str]:
    """Every file the folder shows (hidden ones too, through its links) and its hash; the lock file
    a killed writer leaves aside (the next writer takes it over)."""
    return {p.name: _sha(p) for p in sorted(d.iterdir()) if p.is_file() and p.name != LOCK_FILE}


def _runs(d: Path) -> list[str]:
    """The run folders kept in a results folder."""
    return sorted(p.name for p in (d / RUNS_DIR).iterdir()) if (d / RUNS_DIR).is_dir() else []


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
        real(path, *args, **kw)                       # a complete file in the new run's folder,
        if os.environ.get("HALF"):
            data = Path(path).read_bytes()
            Path(path).write_bytes(data[: len(data) // 2])  # cut to half: the writer is mid-way
        Path(os.environ["FLAG"]).write_text(str(path))
        time.sleep(float(os.environ.get("DELAY", "120")))

    mesh.write_vtu = slow
    sys.argv = ["elastofe"] + sys.argv[1:]
    runpy.run_module("elastofe", run_name="__main__", alter_sys=True)
''')


def _start_slow_run(case: Path, out: Path, flag: Path, delay: float = 120.0, half: bool = True,
                    extra: tuple = ()) -> subprocess.Popen:
    env = dict(os.environ, FLAG=str(flag), DELAY=str(delay), HALF="1" if half else "",
               PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.Popen([sys.executable, "-c", SLOW_WRITER, "run", str(case), "-q", "--out", str(out), *extra],
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _wait_for(flag: Path, proc: subprocess.Popen, timeout: float = 120.0) -> None:
    t0 = time.monotonic()
    while not (flag.exists() and flag.read_text()):  # the writer may have created it but not yet written it
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
    shown = current_dir(out)
    assert MARKER in before and "summary.json" in before and verify_results(out) == []
    # The same case file, edited: the new run is allowed to replace the results, and would differ.
    case.write_text(case.read_text().replace("force = [0, -100, 0]", "force = [0, -250, 0]"))
    flag = tmp_path / "flag"
    proc = _start_slow_run(case, out, flag)
    _wait_for(flag, proc)
    part = Path(flag.read_text())
    # Killed while a partial file existed, in the new run's own folder (never shown).
    assert part.exists() and part.parent.parent == out / RUNS_DIR and part.parent != shown
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == code, err
    assert words in err and "earlier results were left as they were" in err and "Traceback" not in err
    assert _snapshot(out) == before  # byte-for-byte the previous results, nothing added
    assert _runs(out) == [shown.name] and not (out / LOCK_FILE).exists()
    assert verify_results(out) == []


def test_sigkill_mid_write_then_next_run_cleans_up(case, tmp_path):
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    before = _snapshot(out)
    flag = tmp_path / "flag"
    proc = _start_slow_run(case, out, flag)
    _wait_for(flag, proc)
    proc.kill()  # no handler can run: the new run's folder stays behind ...
    proc.communicate(timeout=60)
    assert len(_runs(out)) == 2, "a hard kill mid-write leaves its unfinished run folder"
    assert _snapshot(out) == before and verify_results(out) == []  # ... but the results shown are intact
    # The dead writer's lock is taken over at once (the kernel released its flock).
    assert _run(case, out)[0] == 0
    assert len(_runs(out)) == 1 and verify_results(out) == []


def test_exception_mid_write_keeps_previous_results(case, tmp_path, monkeypatch):
    """A full disk while the VTU is written: exit 2, earlier results intact, nothing left over."""
    import errno

    import elastofe.output as mesh  # write_results calls output.write_vtu

    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    before = _snapshot(out)
    runs = _runs(out)
    real = mesh.write_vtu

    def full(path, *a, **k):
        real(path, *a, **k)
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(mesh, "write_vtu", full)
    rc, err = _run(case, out)
    assert rc == 2
    assert err.strip() == (f"elastofe: error on the command line: --out = {str(out)!r}: "
                           "the results could not be written (No space left on device); "
                           "earlier results there were left as they were")
    assert _snapshot(out) == before and _runs(out) == runs


def test_other_case_needs_overwrite(case, tmp_path):
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    other = tmp_path / "other.toml"
    other.write_text(case.read_text().replace("force = [0, -100, 0]", "force = [0, 0, -100]"))
    before = _snapshot(out)
    rc, err = _run(other, out)
    assert rc == 2
    sha = json.loads((out / MARKER).read_text())["case_sha256"][:12]
    assert err.strip() == (f"elastofe: error on the command line: --out = {str(out)!r}: "
                           f"holds the results of another case ({case.resolve()}, sha256 {sha}...); "
                           "pass --overwrite to replace them, or choose another --out")
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
    assert not os.path.lexists(out / "line-diagonal.csv") and (out / "line-edge.csv").exists()
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


# ----------------------------------------------------------------------------- only its own files
def test_run_into_the_case_folder_deletes_only_its_own_files(tmp_path):
    """``--out`` the case's own folder with ``--overwrite``: the run's temperature input named
    ``line-*.csv`` and the user's other ``line-*.csv`` files survive every run (the issue's case
    of a run deleting them all), and so does everything else there."""
    shutil.copy(CORPUS / "cube.step", tmp_path / "cube.step")
    temps = "x,y,z,t\n0,0,0,10\n1,0,0,20\n0,1,0,10\n0,0,1,10\n1,1,1,20\n"
    (tmp_path / "line-temps.csv").write_text(temps)
    (tmp_path / "line-notes.csv").write_text("mine\n")
    (tmp_path / "notes.txt").write_text("mine too\n")
    case = tmp_path / "case.toml"
    case.write_text((CORPUS / "base.toml").read_text().replace("nu = 0.3", "nu = 0.3\nexpansion = 1.2e-5")
                    + '\n[[load]]\ntemperature = { file = "line-temps.csv" }\n')
    theirs = {p.name: _sha(p) for p in tmp_path.iterdir() if p.is_file()}
    for extra in ((), ("--overwrite",), ("--overwrite",)):
        rc, err = _run(case, tmp_path, *extra)
        assert rc == 0, err
        assert {n: _sha(tmp_path / n) for n in theirs} == theirs
        assert verify_results(tmp_path) == []
    # A line renamed: its old result goes, the user's look-alike stays.
    case.write_text(case.read_text().replace('name = "diagonal"', 'name = "edge"'))
    assert _run(case, tmp_path)[0] == 0
    assert not os.path.lexists(tmp_path / "line-diagonal.csv") and (tmp_path / "line-notes.csv").exists()


def test_plain_result_files_of_an_older_layout_are_adopted(case, tmp_path):
    """A folder written before run folders existed (plain files and a record): the next run takes
    them over without a moment of mixed files; files it did not write stay."""
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    legacy = tmp_path / "legacy"
    legacy.mkdir()
    for p in out.iterdir():
        if p.is_file():
            shutil.copyfile(p, legacy / p.name)  # plain copies, as the old writer left them
    (legacy / "readme.txt").write_text("the user's own\n")
    assert current_dir(legacy) is None and verify_results(legacy) == []
    before = _snapshot(legacy)
    case.write_text(case.read_text().replace('name = "diagonal"', 'name = "edge"'))
    assert _run(case, legacy)[0] == 0
    assert verify_results(legacy) == [] and current_dir(legacy) is not None
    assert (legacy / "readme.txt").read_text() == "the user's own\n"
    assert not os.path.lexists(legacy / "line-diagonal.csv")
    assert _snapshot(legacy)["summary.json"] != before["summary.json"]


# ----------------------------------------------------------------------------- comparison, report
REF_HEAD = "x [mm], y [mm], z [mm], von_mises [MPa]\n"


@pytest.fixture
def ref_case(case, tmp_path):
    """The corpus base with a reference of three points (values far from ours: it disagrees)."""
    (tmp_path / "ref.csv").write_text(REF_HEAD + "0.5, 0.5, 0.5, 100\n0.2, 0.5, 0.5, 120\n0.8, 0.5, 0.5, 80\n")
    case.write_text(case.read_text() + '\n[reference]\ntolerance = "5%"\n[[reference.points]]\nfile = "ref.csv"\n')
    return case


def test_full_disk_while_writing_the_comparison(ref_case, tmp_path, monkeypatch):
    """The comparison files belong to the run's set: a full disk while writing them leaves the
    previous run shown, with its own comparison, and no new file beside it."""
    import errno

    import elastofe.studies.compare as cmp

    out = tmp_path / "out"
    assert _run(ref_case, out)[0] in (0, 5)
    before = _snapshot(out)
    assert "comparison.csv" in before and "comparison.json" in before
    (tmp_path / "ref.csv").write_text(REF_HEAD + "0.5, 0.5, 0.5, 101\n")
    real = cmp.comparison_csv

    def full(*args, **kwargs):
        real(*args, **kwargs)
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(cmp, "comparison_csv", full)
    rc, err = _run(ref_case, out)
    assert rc == 2 and "No space left on device" in err and "earlier results there were left as they were" in err
    assert _snapshot(out) == before and len(_runs(out)) == 1 and verify_results(out) == []


def test_report_and_comparison_files_have_the_usual_mode(ref_case, tmp_path, monkeypatch):
    """Under a 022 umask every file of a run (results, comparison, report, pictures) is 0644."""
    monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")  # the pictures' renderer does not matter here
    old = os.umask(0o022)
    try:
        out = tmp_path / "out"
        rc, err = _run(ref_case, out, "--report")
        assert rc in (0, 5), err
    finally:
        os.umask(old)
    shown = [p for p in out.iterdir() if p.is_file()]
    names = {p.name for p in shown}
    assert {"report.html", "comparison.csv", "comparison.json", "summary.json", "result.vtu"} <= names
    assert any(n.startswith("picture-") for n in names)
    modes = {p.name: stat.S_IMODE(p.stat().st_mode) for p in shown}
    assert set(modes.values()) == {0o644}, modes
    assert verify_results(out) == []
    # The report written again on its own joins the same run (a new version of it, switched in).
    from elastofe.report import write_report

    rid = read_results(out)["run_id"]
    write_report(out)
    assert read_results(out)["run_id"] == rid and verify_results(out) == []


# ----------------------------------------------------------------------------- the lock
def test_second_writer_refused_naming_the_folder_and_pid(case, tmp_path):
    out = tmp_path / "out"
    with FolderLock(out):
        assert (out / LOCK_FILE).read_text().strip() == str(os.getpid())
        rc, err = _run(case, out)
    assert rc == 2
    assert err.strip() == (f"elastofe: error on the command line: --out = {str(out)!r}: "
                           f"is being written by another elastofe run (pid {os.getpid()}); "
                           "wait for it to finish, or choose another --out")
    assert not (out / "summary.json").exists()
    assert _run(case, out)[0] == 0  # released: the next writer gets in


def test_stale_lock_of_a_dead_process_is_taken_over(case, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    (out / LOCK_FILE).write_text(dead.stdout)
    assert _run(case, out)[0] == 0 and verify_results(out) == [] and not (out / LOCK_FILE).exists()


def test_failed_first_run_leaves_no_empty_folder(tmp_path):
    shutil.copy(CORPUS / "cube.step", tmp_path / "cube.step")
    case = tmp_path / "case.toml"
    case.write_text((CORPUS / "base.toml").read_text().replace("at = [0.5, 0.5, 0.5]", "at = [5, 5, 5]"))
    rc, err = _run(case, tmp_path / "out")
    assert rc == 2 and "point[1].at" in err and not (tmp_path / "out").exists()


def _two_writers(case_a: Path, case_b: Path, out: Path, tmp: Path, rounds: int) -> list[tuple[int, int]]:
    """Start two runs into ``out`` at the same moment, ``rounds`` times; return their exit codes."""
    codes = []
    for r in range(rounds):
        flags = [tmp / f"flag-{r}-a", tmp / f"flag-{r}-b"]
        procs = [_start_slow_run(c, out, f, delay=1.0, half=False, extra=("--overwrite",))
                 for c, f in zip((case_a, case_b), flags)]
        results = [p.communicate(timeout=300) for p in procs]
        rcs = [p.returncode for p in procs]
        codes.append(tuple(rcs))
        assert sorted(rcs) == [0, 2], (rcs, results)
        winner, loser = (0, 1) if rcs[0] == 0 else (1, 0)
        err = results[loser][1].strip()
        pid = procs[winner].pid
        assert err == (f"elastofe: error on the command line: --out = {str(out)!r}: "
                       f"is being written by another elastofe run (pid {pid}); "
                       "wait for it to finish, or choose another --out"), err
        assert verify_results(out) == []
        rec = json.loads((out / MARKER).read_text())
        assert rec["case_sha256"] == _sha((case_a, case_b)[winner])  # the winner's results, whole
        assert read_results(out)["run_id"] == rec["run_id"]
        assert len(_runs(out)) == 1 and not (out / LOCK_FILE).exists()
    return codes


def test_two_runs_into_one_folder(case, tmp_path, record_property):
    """Two runs of different cases into one folder at once (``--overwrite`` on both): exactly one
    writes, the other is refused at once with the winner's pid; results are never mixed."""
    other = tmp_path / "other.toml"
    other.write_text(case.read_text().replace("force = [0, -100, 0]", "force = [0, 0, -100]"))
    codes = _two_writers(case, other, tmp_path / "out", tmp_path, rounds=1)
    record_property("writer_rounds", len(codes))
    print(f"two writers: {len(codes)} rounds, exit codes {codes}")


@pytest.mark.slow
def test_two_runs_into_one_folder_many_rounds(case, tmp_path, record_property):
    other = tmp_path / "other.toml"
    other.write_text(case.read_text().replace("force = [0, -100, 0]", "force = [0, 0, -100]"))
    codes = _two_writers(case, other, tmp_path / "out", tmp_path, rounds=12)
    record_property("writer_rounds", len(codes))
    print(f"two writers: {len(codes)} rounds, exit codes {codes}")


# ----------------------------------------------------------------------------- kill during the switch-over
KILLED_WRITER = textwrap.dedent('''
    import os, pickle, shutil, signal, sys
    import elastofe.files as F
    from elastofe.output import write_results

    res = pickle.loads(open(sys.argv[1], "rb").read())
    out, n = sys.argv[2], int(sys.argv[3])
    count, active = [0], [False]

    def deadly(fn):
        def call(*a, **k):
            if active[0]:
                count[0] += 1
                if count[0] == n:  # SIGKILL just before the n-th file-system call of the final phase
                    os.kill(os.getpid(), signal.SIGKILL)
            return fn(*a, **k)
        return call

    for name in ("replace", "rename", "symlink", "unlink", "link", "chmod", "fsync", "rmdir", "mkdir", "open"):
        setattr(os, name, deadly(getattr(os, name)))
    shutil.rmtree = deadly(shutil.rmtree)
    commit = F.StagedOutputs.commit

    def watched(self, **kw):
        active[0] = True
        return commit(self, **kw)

    F.StagedOutputs.commit = watched
    write_results(res, out)
    print(count[0])
''')


def _kill_rounds(res_file: Path, out: Path, stride: int, extra: int, seed: int) -> dict:
    """SIGKILL writers during their final phase: before the n-th file-system call of it, for
    n = 1, 1 + stride, ... through the whole phase, then ``extra`` times at a random n. Check the
    folder after every kill: it shows one complete, self-consistent run, the previous or the new."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))

    def write(n: int) -> subprocess.CompletedProcess:
        return subprocess.run([sys.executable, "-c", KILLED_WRITER, str(res_file), str(out), str(n)],
                              capture_output=True, text=True, env=env, timeout=300)

    for _ in range(2):  # the run shown at the start; the second write is a steady-state one
        cp = write(10**9)
        assert cp.returncode == 0 and verify_results(out) == [], cp.stderr
    ops = int(cp.stdout.strip())  # file-system calls of the final phase
    rng = np.random.default_rng(seed)
    plan = list(range(1, ops + 1, stride)) + [int(v) for v in rng.integers(1, ops + 1, extra)]
    killed, shown = 0, set()
    for r, n in enumerate(plan):
        before = read_results(out)["run_id"]
        cp = write(n)
        if cp.returncode != 0:
            assert cp.returncode == -signal.SIGKILL, cp.stderr
            killed += 1
        assert verify_results(out) == [], (r, n, verify_results(out))
        now = read_results(out)["run_id"]
        assert now == json.loads((out / MARKER).read_text())["run_id"]
        assert cp.returncode != 0 or now != before
        shown.add(now)
    # The next writer that completes removes every dead writer's leftovers.
    cp = write(10**9)
    assert cp.returncode == 0 and verify_results(out) == [] and len(_runs(out)) == 1, cp.stderr
    assert not [p for p in out.iterdir() if p.name.startswith((".elastofe-link-", ".elastofe-switch-"))]
    return {"rounds": len(plan), "killed": killed, "final_phase_calls": ops, "runs_shown": len(shown)}


@pytest.fixture(scope="module")
def pickled_result(tmp_path_factory):
    from elastofe.case import load_case
    from elastofe.pipeline import solve_case

    d = tmp_path_factory.mktemp("killed")
    shutil.copy(CORPUS / "cube.step", d / "cube.step")
    (d / "case.toml").write_text((CORPUS / "base.toml").read_text())
    res = solve_case(load_case(d / "case.toml"))
    (d / "result.pickle").write_bytes(pickle.dumps(res))
    return d / "result.pickle"


def test_sigkill_during_the_switch_over(pickled_result, tmp_path, record_property):
    stats = _kill_rounds(pickled_result, tmp_path / "out", stride=11, extra=0, seed=1)
    record_property("kill_rounds", stats["killed"])
    print(f"switch-over kills: {stats}")
    assert stats["killed"] == stats["rounds"]


def _adoption_rounds(pickled_result: Path, case: Path, tmp_path: Path, stride: int) -> dict:
    """The first run into a folder of plain result files (the older layout), killed before the
    n-th file-system call of its final phase for n = 1, 1 + stride, ...; checked after each kill."""
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    plain = tmp_path / "plain"
    plain.mkdir()
    for p in out.iterdir():
        if p.is_file():
            shutil.copyfile(p, plain / p.name)
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    killed = 0
    for n in range(1, 400, stride):
        trial = tmp_path / f"plain-{n}"
        shutil.copytree(plain, trial)
        cp = subprocess.run([sys.executable, "-c", KILLED_WRITER, str(pickled_result), str(trial), str(n)],
                            capture_output=True, text=True, env=env, timeout=300)
        assert verify_results(trial) == [], (n, verify_results(trial))
        if cp.returncode == 0:
            return {"killed": killed, "final_phase_calls": int(cp.stdout.strip())}
        assert cp.returncode == -signal.SIGKILL, cp.stderr
        killed += 1
        shutil.rmtree(trial)
    raise AssertionError("the final phase never completed")


def test_sigkill_while_adopting_an_older_layout(pickled_result, case, tmp_path, record_property):
    stats = _adoption_rounds(pickled_result, case, tmp_path, stride=21)
    record_property("kill_rounds", stats["killed"])
    print(f"adoption kills: {stats}")


@pytest.mark.slow
def test_sigkill_while_adopting_an_older_layout_every_call(pickled_result, case, tmp_path, record_property):
    stats = _adoption_rounds(pickled_result, case, tmp_path, stride=1)
    record_property("kill_rounds", stats["killed"])
    print(f"adoption kills: {stats}")


@pytest.mark.slow
def test_sigkill_during_the_switch_over_every_call(pickled_result, tmp_path, record_property):
    stats = _kill_rounds(pickled_result, tmp_path / "out", stride=1, extra=60, seed=2)
    record_property("kill_rounds", stats["killed"])
    print(f"switch-over kills: {stats}")
    assert stats["killed"] >= stats["final_phase_calls"] - 8


LOOPING_WRITER = textwrap.dedent('''
    import pickle, sys
    from elastofe.output import write_results

    res = pickle.loads(open(sys.argv[1], "rb").read())
    for _ in range(int(sys.argv[3])):
        write_results(res, sys.argv[2])
''')


def test_readers_see_one_run_while_a_writer_switches(pickled_result, tmp_path, record_property):
    """While a writer replaces the run again and again, a reader taking the run's folder once
    (``files.read_consistent``) always reads a summary.json and a record of the same run."""
    from elastofe.files import read_consistent

    out = tmp_path / "out"
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    subprocess.run([sys.executable, "-c", LOOPING_WRITER, str(pickled_result), str(out), "1"], env=env, check=True)
    proc = subprocess.Popen([sys.executable, "-c", LOOPING_WRITER, str(pickled_result), str(out), "40"], env=env)

    def pair(d: Path) -> tuple[str, str]:
        return (json.loads((d / "summary.json").read_text())["run_id"],
                json.loads((d / MARKER).read_text())["run_id"])

    reads, ids = 0, set()
    try:
        while proc.poll() is None:
            a, b = read_consistent(out, pair)
            assert a == b
            ids.add(a)
            reads += 1
    finally:
        proc.wait(timeout=120)
    assert proc.returncode == 0 and verify_results(out) == []
    record_property("reader_reads", reads)
    print(f"readers: {reads} reads of {len(ids)} runs, never mixed")
    assert reads > 10 and len(ids) > 1


def test_file_system_without_symbolic_links(case, tmp_path, monkeypatch):
    """Where links cannot be made (FAT, some network shares) results are renamed into place as
    plain files, summary.json and the record last, and the folder still checks out."""
    import elastofe.files as F

    monkeypatch.setattr(F, "_links_work", lambda folder: False)
    out = tmp_path / "out"
    for _ in range(2):
        assert _run(case, out)[0] == 0
        assert verify_results(out) == [] and current_dir(out) is None
        assert not any(p.is_symlink() for p in out.iterdir()) and not (out / RUNS_DIR).exists()
    case.write_text(case.read_text().replace('name = "diagonal"', 'name = "edge"'))
    assert _run(case, out)[0] == 0
    assert not (out / "line-diagonal.csv").exists() and (out / "line-edge.csv").is_file()


@pytest.mark.gmsh
@pytest.mark.parametrize("where", ["compare", "write_comparison"])
def test_fault_in_the_comparison_keeps_the_solved_results(ref_case, tmp_path, monkeypatch, where):
    """A fault of ours after the solve (the comparison or its plots) must not lose the solve: the
    results are written without the comparison, summary.json names what failed, and the run ends
    as an internal error (exit 1) that says the results were written."""
    import elastofe.job as job

    def broken(*args, **kwargs):
        raise KeyError("a fault planted by the test")

    monkeypatch.setattr(job, where, broken)
    out = tmp_path / "out"
    rc, err = _run(ref_case, out)
    assert rc == 1, err
    assert "internal error" in err and "the solved results were written" in err
    doc = json.loads((out / "summary.json").read_text())
    assert [f["what"] for f in doc["failed_after_solve"]] == [
        "the comparison with the reference" if where == "compare" else "writing the comparison"]
    assert "comparison" not in doc and not list(out.glob("comparison*"))
    assert (out / "result.vtu").is_file() and verify_results(out) == []


@pytest.mark.gmsh
def test_fault_in_the_report_keeps_the_solved_results(case, tmp_path, monkeypatch):
    """A fault while writing the report leaves the run's results shown, without a report."""
    import elastofe.job as job

    def broken(*args, **kwargs):
        raise ValueError("a fault planted by the test")

    monkeypatch.setattr(job, "write_report", broken)
    out = tmp_path / "out"
    rc, err = _run(case, out, "--report")
    assert rc == 1 and "writing the report failed" in err, err
    doc = json.loads((out / "summary.json").read_text())
    assert "max_von_mises" in doc and not (out / "report.html").exists() and verify_results(out) == []


@pytest.mark.gmsh
def test_report_of_a_results_folder_rebuilds_without_solving(case, tmp_path, monkeypatch, capsys):
    """`elastofe report RESULTS` rebuilds the report of a run already written (no solve: the run's
    files keep their bytes) and joins it to the run; options that belong to a solve, and a folder
    without a run, are refused (exit 2)."""
    monkeypatch.setenv("ELASTOFE_RENDER", "matplotlib")  # the pictures' renderer does not matter here
    out = tmp_path / "out"
    assert _run(case, out)[0] == 0
    before = _snapshot(out)
    assert "report.html" not in before
    assert main(["report", str(out), "-q"]) == 0
    after = _snapshot(out)
    assert (out / "report.html").is_file() and verify_results(out) == []
    # summary.json, result.vtu, ... keep their bytes; only the record (it lists the report's files) changes.
    assert {k: v for k, v in after.items() if k in before and k != MARKER} == \
        {k: v for k, v in before.items() if k != MARKER}
    capsys.readouterr()
    assert main(["report", str(out), "--out", str(tmp_path / "x"), "-q"]) == 2
    assert "--out" in capsys.readouterr().err
    (tmp_path / "empty").mkdir()
    assert main(["report", str(tmp_path / "empty"), "-q"]) == 2
    assert "without a run's summary.json" in capsys.readouterr().err
