"""The petsc backend on 1, 2 and 3 MPI ranks against the single-process direct solve.

The reference is elastofe's own direct solve (SuperLU/PARDISO) of the same mesh: a distributed
CG + GAMG solve to a relative residual of 1e-10 must reproduce its displacements, stresses,
reactions, probes and lines to about that tolerance times the condition number. Every mpiexec
call has a timeout and runs on loopback shared memory, one thread per rank, as root if need be.

These tests skip (with the reason) where petsc4py or mpiexec are missing; under CI (``CI`` set)
they fail instead, because ``.ci/run`` installs the engine with ``scripts/install-mpi.sh``.
"""
from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import elastofe
from tests.conftest import ROOT, cantilever_text, ring_case, write_case

pytestmark = pytest.mark.mpi

MPIEXEC = shutil.which("mpiexec")


def _have_petsc() -> bool:
    import importlib.util

    return all(importlib.util.find_spec(m) is not None for m in ("petsc4py", "mpi4py"))


def _missing() -> str | None:
    if MPIEXEC is None:
        return "mpiexec not found"
    if not _have_petsc():
        return "petsc4py/mpi4py not installed"
    return None


@pytest.fixture(scope="module", autouse=True)
def engine():
    why = _missing()
    if why:
        if os.environ.get("CI"):
            pytest.fail(f"{why}: CI must install the distributed engine (scripts/install-mpi.sh)")
        pytest.skip(f"{why}; install with scripts/install-mpi.sh")


def mpi_env() -> dict:
    """Environment of every rank: loopback only, one thread, allowed as root."""
    env = dict(os.environ)
    env.update({
        "PYTHONPATH": str(ROOT) + os.pathsep + env.get("PYTHONPATH", ""),
        "OMPI_ALLOW_RUN_AS_ROOT": "1", "OMPI_ALLOW_RUN_AS_ROOT_CONFIRM": "1",
        # Shared memory and self only: no network interface is used, none needs to exist.
        "OMPI_MCA_btl": "self,vader", "OMPI_MCA_pml": "ob1",
        "OMPI_MCA_btl_vader_single_copy_mechanism": "none",  # containers often forbid ptrace-based copies
        "OMPI_MCA_oob_tcp_if_include": "lo",
        # One machine: no remote shell is ever started, but Open MPI refuses to start when the
        # one it looks for (ssh) is not installed; `false` exists everywhere and is never called.
        "OMPI_MCA_plm_rsh_agent": "false",
        "OMPI_MCA_rmaps_base_oversubscribe": "1",  # 3 ranks on a 2-core machine
        "OMPI_MCA_mpi_yield_when_idle": "1",  # a waiting rank yields its core instead of spinning
        "OMPI_MCA_hwloc_base_binding_policy": "none",
        "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
    })
    return env


def run_ranks(n: int | None, args: list[str], timeout: float = 90.0) -> subprocess.CompletedProcess:
    """``mpiexec -n N python -m elastofe ARGS`` (plain ``python -m elastofe`` when ``n`` is None).

    The whole process group is killed on timeout, so that no rank outlives a failed test.
    """
    cmd = [sys.executable, "-m", "elastofe", *args]
    if n is not None:
        cmd = [MPIEXEC, "-n", str(n), *cmd]
    return run_group(cmd, timeout)


def run_group(cmd: list[str], timeout: float) -> subprocess.CompletedProcess:
    p = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=mpi_env(),
                         start_new_session=True, cwd=ROOT)
    try:
        out, err = p.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        os.killpg(p.pid, signal.SIGKILL)
        out, err = p.communicate()
        pytest.fail(f"{' '.join(cmd)} hung for more than {timeout} s\n{out}\n{err}")
    return subprocess.CompletedProcess(cmd, p.returncode, out, err)


def read_results(out: Path) -> dict:
    import meshio

    doc = json.loads((out / "summary.json").read_text())
    m = meshio.read(out / "result.vtu")
    return {"doc": doc, "points": m.points, "u": m.point_data["displacement"],
            "vm": m.point_data["von_mises"], "stress": m.point_data["stress"]}


BEAM = """
    [[beam]]
    name = "bar"
    held_end = [0, 0, 0]
    load_point = [100, 0, 0]
    sections = [{ at = 0, rectangle = { width = 10, depth = 10 } }, { at = 100, rectangle = { width = 10, depth = 10 } }]
    load = "tip"
    points = ["tip"]
    lines = ["mid"]
    """


def cantilever(bar, size: float) -> str:
    """conftest's cantilever with a yield strength (for the yield check) and a [[beam]] estimate."""
    return cantilever_text(bar, size=size, material="yield_strength = 250.0", line_samples=11, extra=BEAM)


# The thick ring of conftest.ring_case with its top face shortened by 0.001 (a prescribed u_z), so
# that held values other than zero pass through the distributed elimination too.
CYLINDER_POINTS = """
    [[point]]
    name = "bore"
    at = [7.0710678, 7.0710678, 2.5]
    """


@pytest.fixture(scope="module")
def cases(parts, tmp_path_factory):
    d = tmp_path_factory.mktemp("mpi")
    out = {"cantilever": write_case(d / "cantilever.toml", cantilever(parts["bar"], 5.0)),
           "cylinder": ring_case(d / "cylinder.toml", parts["ring"], E=200000.0, nu=0.3, pressure=10.0,
                                  size=3.0, top_value=-0.001, extra=CYLINDER_POINTS)}
    for size in (6.0, 4.0, 3.0):
        out[f"cantilever-{size}"] = write_case(d / f"cantilever-{size}.toml", cantilever(parts["bar"], size))
    return out


@pytest.fixture(scope="module")
def direct(cases):
    """The single-process direct solve of each case (the reference), in this process."""
    out = {}
    for name in ("cantilever", "cylinder"):
        res = elastofe.run(cases[name], out=cases[name].parent / f"{name}-direct")
        assert res.backend != "petsc"
        out[name] = read_results(cases[name].parent / f"{name}-direct")
    return out


def solve_on(cases, name: str, n: int | None) -> dict:
    out = cases[name].parent / f"{name}-petsc-{n}"
    p = run_ranks(n, ["run", str(cases[name]), "--solver", "petsc", "--out", str(out), "-q"])
    assert p.returncode == 0, p.stdout + p.stderr
    return read_results(out)


def _flat(d, prefix: str = "") -> dict:
    """{"a.b.c": value} of a nested dict."""
    out = {}
    for k, v in d.items():
        if isinstance(v, dict):
            out.update(_flat(v, f"{prefix}{k}."))
        else:
            out[prefix + k] = v
    return out


def assert_same_answers(got: dict, ref: dict, ranks: int) -> None:
    # Tolerances: CG stops at a relative residual of 1e-10; with these meshes' condition numbers
    # (~1e5) the displacement error is below 1e-5 relative, observed ~1e-11. A wrong partition,
    # a lost interface row or a mis-numbered node shows as O(1) differences.
    assert np.array_equal(got["points"], ref["points"]), "the mesh differs from the reference run's"
    umax = np.abs(ref["u"]).max()
    assert np.abs(got["u"] - ref["u"]).max() <= 1e-7 * umax
    smax = np.abs(ref["stress"]).max()
    assert np.abs(got["stress"] - ref["stress"]).max() <= 1e-6 * smax
    g, r = got["doc"], ref["doc"]
    assert g["solver"]["backend"] == "petsc" and g["solver"]["ranks"] == ranks
    assert g["solver"]["relative_residual"] < 1e-9
    assert g["strain_energy"] == pytest.approx(r["strain_energy"], rel=1e-8)
    assert g["equilibrium_error"] < 1e-8
    for region, rr in r["reactions"].items():
        scale = max(np.abs(rr["force"]).max(), 1e-12)
        assert np.allclose(g["reactions"][region]["force"], rr["force"], rtol=0, atol=1e-7 * scale)
    for name, pr in r["points"].items():
        assert np.allclose(g["points"][name]["displacement"], pr["displacement"], rtol=0, atol=1e-7 * umax)
        assert g["points"][name]["von_mises"] == pytest.approx(pr["von_mises"], rel=1e-6)
    assert g["mesh"] == r["mesh"]
    # The same sections as a serial run (the post-processing is the same function), values to the
    # solver's tolerance: timings, memory and the solver block aside.
    volatile = {"timings", "peak_memory_mb", "memory_estimate_mb", "solver", "run_at", "run_id"}
    assert set(g) - volatile == set(r) - volatile
    for name, lr in r["linearized"].items():
        fg, fr = _flat(g["linearized"][name]), _flat(lr)
        assert set(fg) == set(fr)
        scale = max([abs(v) for v in fr.values() if isinstance(v, float)] + [1e-12])
        for key, v in fr.items():
            if isinstance(v, float):
                assert fg[key] == pytest.approx(v, rel=0, abs=1e-6 * scale), (name, key)
    assert set(g.get("estimates", {})) == set(r.get("estimates", {}))
    for name, er in r.get("estimates", {}).items():
        fg, fr = _flat(g["estimates"][name]), _flat(er)
        assert set(fg) == set(fr)
        for key, v in fr.items():
            if isinstance(v, float) and "relative" not in key:
                assert fg[key] == pytest.approx(v, rel=1e-5, abs=1e-9), (name, key)
    assert {k: c["status"] for k, c in g["checks"].items()} == {k: c["status"] for k, c in r["checks"].items()}


@pytest.mark.parametrize("ranks", [1, 2, 3])
@pytest.mark.parametrize("name", ["cantilever", "cylinder"])
def test_ranks_reproduce_the_direct_solve(cases, direct, name, ranks):
    assert_same_answers(solve_on(cases, name, ranks), direct[name], ranks)


def test_single_process_without_mpiexec(cases, direct):
    got = solve_on(cases, "cantilever", None)
    assert_same_answers(got, direct["cantilever"], 1)
    # The lines come out as the direct solve's (same samples, same values to the tolerance).
    a = np.genfromtxt(cases["cantilever"].parent / "cantilever-petsc-None" / "line-mid.csv", delimiter=",", names=True)
    b = np.genfromtxt(cases["cantilever"].parent / "cantilever-direct" / "line-mid.csv", delimiter=",", names=True)
    assert np.allclose(a["sxx"], b["sxx"], rtol=0, atol=1e-6 * np.abs(b["sxx"]).max())


def test_gamg_iterations_stay_flat_under_refinement(cases):
    # Multigrid-preconditioned CG needs a number of iterations that does not grow with the mesh
    # for elliptic problems (common practice; Trottenberg, Oosterlee & Schüller, Multigrid, 2001,
    # from memory). Measured here: 37 to 47 from 2.5k to 62k DOF at rtol 1e-10; the bound allows
    # for the partition but not for growth like the ~h^-1 of unpreconditioned CG.
    # One mpiexec job solves the three meshes through the library (one start-up instead of three).
    paths = [str(cases[n]) for n in ("cantilever-6.0", "cantilever-4.0", "cantilever-3.0")]
    script = (
        "import json, sys, dataclasses\n"
        "import elastofe\n"
        "for path in sys.argv[1:]:\n"
        "    case = elastofe.load_case(path)\n"
        "    case = dataclasses.replace(case, solver=dataclasses.replace(case.solver, backend='petsc'))\n"
        "    res = elastofe.solve_case(case)\n"
        "    if res is not None:\n"
        "        print(json.dumps([res.dofs, res.solver_info['iterations'], res.solver_info['ranks']]))\n")
    p = run_group([MPIEXEC, "-n", "2", sys.executable, "-c", script, *paths], timeout=120)
    assert p.returncode == 0, p.stderr
    rows = [json.loads(line) for line in p.stdout.splitlines() if line.startswith("[")]
    dofs, its, ranks = zip(*rows)
    assert ranks == (2, 2, 2)
    assert dofs[2] > 4 * dofs[0]
    assert max(its) <= 60, (dofs, its)
    assert its[2] <= its[0] + 10, (dofs, its)


@pytest.mark.parametrize("old, new, key", [
    # found by every rank as it reads the case file
    ('region = "root"', 'region = "nowhere"', "support[1].region"),
    # found by rank 0 alone once it has meshed the part (no surface lies in the plane x = 50):
    # its verdict must reach the other ranks, which would otherwise wait for their share
    ("point = [0, 0, 0], normal", "point = [50, 0, 0], normal", "regions.root"),
])
def test_case_error_ends_every_rank_with_exit_2(cases, tmp_path, old, new, key):
    bad = tmp_path / "bad.toml"
    text = cases["cantilever"].read_text()
    assert old in text
    bad.write_text(text.replace(old, new))
    p = run_ranks(2, ["run", str(bad), "--solver", "petsc", "--out", str(tmp_path / "o"), "-q"], timeout=60)
    assert p.returncode == 2, p.stdout + p.stderr
    assert p.stderr.count(key) == 1, p.stderr  # printed by rank 0 only
    assert not (tmp_path / "o").exists()


def test_serial_backend_refused_under_mpiexec(cases, tmp_path):
    p = run_ranks(2, ["run", str(cases["cantilever"]), "--solver", "scipy", "--out", str(tmp_path / "o"), "-q"],
                  timeout=60)
    assert p.returncode == 2
    assert "--solver petsc" in p.stderr


def test_failure_on_one_rank_aborts_the_job():
    # Rank 1 fails inside a collective stage while rank 0 waits for it: without the abort the
    # job would hang until the timeout.
    script = (
        "from elastofe.solve.petsc import import_petsc\n"
        "from elastofe.parallel.mpi import abort_on_error, install_abort_hook\n"
        "PETSc, MPI = import_petsc()\n"
        "comm = MPI.COMM_WORLD\n"
        "install_abort_hook(comm)\n"
        "with abort_on_error(comm):\n"
        "    if comm.rank == 1:\n"
        "        raise RuntimeError('injected failure on rank 1')\n"
        "    comm.recv(source=1)\n")
    p = run_group([MPIEXEC, "-n", "2", sys.executable, "-c", script], timeout=30)
    assert p.returncode != 0
    assert "injected failure on rank 1" in p.stderr
    assert "ending all ranks" in p.stderr


def test_uncaught_exception_aborts_the_job():
    script = (
        "from elastofe.solve.petsc import import_petsc\n"
        "from elastofe.parallel.mpi import install_abort_hook\n"
        "PETSc, MPI = import_petsc()\n"
        "comm = MPI.COMM_WORLD\n"
        "install_abort_hook(comm)\n"
        "if comm.rank == 0:\n"
        "    raise ValueError('uncaught on rank 0')\n"
        "comm.barrier()\n")
    p = run_group([MPIEXEC, "-n", "2", sys.executable, "-c", script], timeout=30)
    assert p.returncode != 0 and "uncaught on rank 0" in p.stderr


def test_serial_interface_backend_matches_superlu():
    # solve.solve(K, f, backend="petsc") behind the one solver interface, in its own process so
    # that this test process never initialises MPI.
    script = (
        "import numpy as np, scipy.sparse as sp\n"
        "from elastofe import solve as S\n"
        "from elastofe.fem.assembly import assemble_stiffness\n"
        "g = np.linspace(0, 1, 4)\n"
        "X = np.array(np.meshgrid(g, g, g, indexing='ij')).reshape(3, -1).T\n"
        "X[:, 1:] += np.random.default_rng(0).uniform(-0.05, 0.05, size=(X.shape[0], 2))\n"
        "from scipy.spatial import Delaunay\n"
        "T = Delaunay(X).simplices\n"
        "v = np.einsum('eij,eij->e', np.cross(X[T[:,1]]-X[T[:,0]], X[T[:,2]]-X[T[:,0]])[:,None,:], (X[T[:,3]]-X[T[:,0]])[:,None,:])\n"
        "T[v < 0] = T[v < 0][:, [1, 0, 2, 3]]\n"
        "K = assemble_stiffness(X, T, 1.0e5, 7.0e4)\n"
        "free = np.repeat(X[:, 0] > 1e-9, 3)\n"
        "Kf = K[free][:, free].tocsr()\n"
        "f = np.random.default_rng(1).normal(size=Kf.shape[0])\n"
        "a = S.solve(Kf, f, backend='scipy').u\n"
        "s = S.solve(Kf, f, backend='petsc')\n"
        "print(s.backend, np.abs(s.u - a).max() / np.abs(a).max())\n")
    p = run_group([sys.executable, "-c", script], timeout=60)
    assert p.returncode == 0, p.stderr
    backend, err = p.stdout.split()
    assert backend == "petsc" and float(err) < 1e-7


def test_temperature_load_on_two_ranks_matches_the_direct_solve(cases, tmp_path):
    # A thermal load adds equivalent nodal forces and a thermal strain in the recovery; both must
    # pass through the distributed path as through the single-process one.
    text = cases["cantilever"].read_text().replace("nu = 0.3", 'nu = 0.3\nexpansion = "12e-6 1/K"')
    text += "\n[[load]]\ntemperature = 40\n"
    case = write_case(tmp_path / "thermal.toml", text)
    elastofe.run(case, out=tmp_path / "direct")
    ref = read_results(tmp_path / "direct")
    p = run_ranks(2, ["run", str(case), "--solver", "petsc", "--out", str(tmp_path / "petsc"), "-q"])
    assert p.returncode == 0, p.stdout + p.stderr
    assert_same_answers(read_results(tmp_path / "petsc"), ref, 2)


def test_named_load_cases_refused_with_the_key(cases, tmp_path):
    text = cases["cantilever"].read_text().replace('force = [0, -100, 0]', 'force = [0, -100, 0]\ncase = "up"')
    case = write_case(tmp_path / "cases.toml", text)
    p = run_ranks(None, ["run", str(case), "--solver", "petsc", "--out", str(tmp_path / "o"), "-q"], timeout=60)
    assert p.returncode == 2, p.stdout + p.stderr
    assert "load_case" in p.stderr and "petsc backend" in p.stderr
