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


def run_ranks(n: int | None, args: list[str], timeout: float = 90.0, env: dict | None = None
              ) -> subprocess.CompletedProcess:
    """``mpiexec -n N python -m elastofe ARGS`` (plain ``python -m elastofe`` when ``n`` is None).

    The whole process group is killed on timeout, so that no rank outlives a failed test.
    """
    cmd = [sys.executable, "-m", "elastofe", *args]
    if n is not None:
        cmd = [MPIEXEC, "-n", str(n), *cmd]
    return run_group(cmd, timeout, env)


def run_group(cmd: list[str], timeout: float, env: dict | None = None) -> subprocess.CompletedProcess:
    p = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                         env={**mpi_env(), **(env or {})}, start_new_session=True, cwd=ROOT)
    try:
        out, err = p.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        os.killpg(p.pid, signal.SIGKILL)
        out, err = p.communicate()
        pytest.fail(f"{' '.join(cmd)} hung for more than {timeout} s\n{out}\n{err}")
    return subprocess.CompletedProcess(cmd, p.returncode, out, err)


def read_fields(out: Path) -> tuple[np.ndarray, dict, np.ndarray]:
    """(points (n, 3), {name: (n, ...)} point data, cell quality (m,)) of result.vtu, or of the
    pieces of result.pvtu put back in the mesh's node order through their ``node_id`` array."""
    import xml.etree.ElementTree as ET

    import meshio

    if (out / "result.vtu").is_file():
        m = meshio.read(out / "result.vtu")
        return m.points, dict(m.point_data), m.cell_data["quality"][0]
    pieces = [meshio.read(out / p.get("Source")) for p in ET.parse(out / "result.pvtu").getroot().iter("Piece")]
    n = 1 + max(int(m.point_data["node_id"].max()) for m in pieces)
    points = np.full((n, 3), np.nan)
    data: dict = {}
    for m in pieces:
        ids = m.point_data["node_id"]
        # A node shared by two pieces must carry the same values in both.
        seen = ~np.isnan(points[ids, 0])
        assert np.array_equal(points[ids[seen]], m.points[seen])
        points[ids] = m.points
        for k, v in m.point_data.items():
            a = data.setdefault(k, np.full((n,) + v.shape[1:], np.nan))
            if seen.any():
                assert np.allclose(a[ids[seen]], v[seen], rtol=0, atol=0), k
            a[ids] = v
    assert not np.isnan(points).any(), "a node of the mesh is in no piece"
    quality = np.concatenate([m.cell_data["quality"][0] for m in pieces])
    return points, data, quality


def read_results(out: Path) -> dict:
    doc = json.loads((out / "summary.json").read_text())
    points, data, quality = read_fields(out)
    lines = {p.name: np.genfromtxt(p, delimiter=",", names=True) for p in out.glob("line-*.csv")}
    return {"doc": doc, "points": points, "data": data, "u": data["displacement"], "vm": data["von_mises"],
            "stress": data["stress"], "quality": quality, "lines": lines, "out": out}


BEAM = """
    [[beam]]
    name = "bar"
    held_end = [0, 0, 0]
    load_point = [100, 0, 0]
    sections = [{ at = 0, rectangle = { width = 10, depth = 10 } },
                { at = 100, rectangle = { width = 10, depth = 10 } }]
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


# Every feature of a serial case at once, on the quarter ring (r 10..20, z 0..5): three named load
# cases and a combination; a radial hold on the bore (rotated nodal frames) meeting a sliding
# (normal) support on y = 0; an elastic foundation under the bottom face; a pressure, a coupling
# load (force and moment at a point off the part) and a temperature field given by a formula;
# a point, a line, and a yield strength for the yield check.
EVERY = """
    title = "every feature"
    [geometry]
    file = "{ring}"
    [material]
    E = 200000.0
    nu = 0.3
    expansion = "12e-6 1/K"
    yield_strength = 250.0
    [mesh]
    order = 2
    size = 2.5
    [regions]
    bore = {{ cylinder = {{ radius = 10.0 }} }}
    outer = {{ cylinder = {{ radius = 20.0 }} }}
    sym_y = {{ plane = {{ point = [0, 0, 0], normal = [0, 1, 0] }} }}
    bottom = {{ plane = {{ point = [0, 0, 0], normal = [0, 0, 1] }} }}
    top = {{ plane = {{ point = [0, 0, 5], normal = [0, 0, 1] }} }}
    [[support]]
    region = "bore"
    fix = "r"
    [[support]]
    region = "sym_y"
    fix = "n"
    [[support]]
    region = "bottom"
    foundation = {{ normal = "2000 N/mm^3", tangential = "200 N/mm^3" }}
    [[load]]
    region = "outer"
    pressure = 10.0
    case = "press"
    [[load]]
    region = "top"
    at = [12, 12, 8]
    force = [100, 0, -500]
    moment = [1000, 0, 0]
    case = "couple"
    [[load]]
    temperature = {{ formula = "20 + 2*x - y" }}
    case = "heat"
    [[combination]]
    name = "all"
    factors = {{ press = 1.2, couple = 1.0, heat = 0.8 }}
    [[point]]
    name = "mid"
    at = [10.6066, 10.6066, 2.5]
    [[line]]
    name = "radial"
    start = [10, 0.5, 2.5]
    end = [20, 0.5, 2.5]
    samples = 11
    """


@pytest.fixture(scope="module")
def cases(parts, tmp_path_factory):
    d = tmp_path_factory.mktemp("mpi")
    out = {"cantilever": write_case(d / "cantilever.toml", cantilever(parts["bar"], 5.0)),
           "cylinder": ring_case(d / "cylinder.toml", parts["ring"], E=200000.0, nu=0.3, pressure=10.0,
                                  size=3.0, top_value=-0.001, extra=CYLINDER_POINTS),
           "every": write_case(d / "every.toml", EVERY.format(ring=parts["ring"]))}
    for size in (6.0, 4.0, 3.0):
        out[f"cantilever-{size}"] = write_case(d / f"cantilever-{size}.toml", cantilever(parts["bar"], size))
    return out


@pytest.fixture(scope="module")
def direct(cases):
    """The single-process direct solve of each case (the reference), in this process."""
    out = {}
    for name in ("cantilever", "cylinder", "every"):
        res = elastofe.run(cases[name], out=cases[name].parent / f"{name}-direct")
        assert res.backend != "petsc"
        out[name] = read_results(cases[name].parent / f"{name}-direct")
    return out


def solve_on(cases, name: str, n: int | None, env: dict | None = None, tag: str = "") -> dict:
    out = cases[name].parent / f"{name}-petsc-{n}{tag}"
    p = run_ranks(n, ["run", str(cases[name]), "--solver", "petsc", "--out", str(out), "-q"], env=env)
    assert p.returncode == 0, p.stdout + p.stderr
    return read_results(out)


#: Sections of summary.json that describe the run, not the model's answers.
VOLATILE = {"timings", "peak_memory_mb", "memory_estimate_mb", "solver", "run_at", "run_id", "fields"}


def _numbers(x) -> list[float]:
    if isinstance(x, dict):
        return [v for y in x.values() for v in _numbers(y)]
    if isinstance(x, list):
        return [v for y in x for v in _numbers(y)]
    return [abs(x)] if isinstance(x, float) else []


def _kind_scales(doc: dict) -> dict[str, float]:
    """The model's scale of stresses and of displacements: the largest over its load cases."""
    cases = list((doc.get("load_cases") or {}).values()) or [doc]
    return {"stress": max(c["max_von_mises"]["value"] for c in cases),
            "displacement": max(c["max_displacement"]["value"] for c in cases)}


#: Words of a summary.json key path that say what kind of quantity a number is.
STRESS_WORDS = ("stress", "von_mises", "principal", "membrane", "bending", "peak")
DISPLACEMENT_WORDS = ("displacement", "deflection")


def assert_same_document(g, r, path: str = "", scale: float = 0.0, kinds: dict | None = None,
                         rel: float = 1e-6, skip: frozenset = frozenset()) -> None:
    """Every key and value of summary.json ``r`` in ``g``: texts equal (but the equilibrium
    check's, which quotes the round-off level), lists of the same length, numbers to ``rel`` of
    themselves or of their scale: a stress or a displacement to ``rel`` of the model's largest
    (the solver's error is relative to the whole field, not to a small component at one
    point), anything else to ``rel`` of the largest number of the dict that holds it (a reaction
    moment of 1e-9 next to moments of 1e4); equilibrium errors (round-off) both below 1e-9."""
    kinds = kinds if kinds is not None else _kind_scales(r)
    if isinstance(r, dict):
        assert isinstance(g, dict) and set(g) == set(r), (path, set(g) ^ set(r))
        s = max(_numbers(r) + [1e-300])
        for k in r:
            if path == "" and (k in VOLATILE or k in skip) or (path, k) == (".checks.equilibrium", "why"):
                continue
            assert_same_document(g[k], r[k], f"{path}.{k}", s, kinds, rel)
    elif isinstance(r, list):
        assert isinstance(g, list) and len(g) == len(r), path
        for i, (a, b) in enumerate(zip(g, r)):
            assert_same_document(a, b, f"{path}[{i}]", scale, kinds, rel)
    elif isinstance(r, float):
        assert isinstance(g, (float, int)), (path, g, r)
        if path.endswith("equilibrium_error") or path == ".checks.equilibrium.value":
            assert abs(g) <= 1e-9 and abs(r) <= 1e-9, (path, g, r)
            return
        words = path.lower().split(".")
        if any(w in seg for seg in words for w in STRESS_WORDS):
            scale = kinds["stress"]
        elif any(w in seg for seg in words for w in DISPLACEMENT_WORDS):
            scale = kinds["displacement"]
        assert abs(g - r) <= rel * max(abs(r), scale), (path, g, r)
    else:
        assert g == r, (path, g, r)


def assert_residual_meets_the_rule(solver: dict) -> None:
    # The stopping rule stated in README ("Running on many processes") and in summary.json:
    # |b - A u|_2 <= max(rtol |b|_2, eps (|A|_inf |u|_2 + |b|_2)), checked on the reported numbers.
    assert solver["rtol"] <= 1e-10
    for res, floor, met in zip(solver["relative_residual_per_case"], solver["round_off_floor_per_case"],
                               solver["bound_met_per_case"]):
        assert res <= max(solver["rtol"], floor)
        assert met == ("relative" if res <= solver["rtol"] else "round-off")
        # The floor is round-off, not a licence: far below any accuracy a result is read to.
        assert floor < 1e-8
    assert solver["relative_residual"] == max(solver["relative_residual_per_case"])


def assert_same_answers(got: dict, ref: dict, ranks: int, skip: frozenset = frozenset()) -> None:
    # Tolerances: CG stops at a relative residual of 1e-10 (or at the round-off floor, a few
    # 1e-10 here); with these meshes' condition numbers (~1e5) the displacement error is below
    # 1e-5 relative, observed ~1e-11. A wrong partition, a lost interface row or a mis-numbered
    # node shows as O(1) differences.
    assert np.array_equal(got["points"], ref["points"]), "the mesh differs from the reference run's"
    umax = np.abs(ref["u"]).max()
    assert np.abs(got["u"] - ref["u"]).max() <= 1e-7 * umax
    smax = np.abs(ref["stress"]).max()
    assert np.abs(got["stress"] - ref["stress"]).max() <= 1e-6 * smax
    # Every node array of result.vtu (the pieces' node_id aside), to the solver's tolerance.
    assert set(got["data"]) - {"node_id"} == set(ref["data"])
    for key, v in ref["data"].items():
        scale = max(np.abs(v).max(), 1e-300)
        if key == "envelope_governing":  # which case governs a node: ties may fall either way
            assert np.mean(got["data"][key] == v) > 0.99, key
            continue
        assert np.abs(got["data"][key] - v).max() <= 1e-6 * scale, key
    assert np.allclose(np.sort(got["quality"]), np.sort(ref["quality"]), rtol=1e-12)
    g, r = got["doc"], ref["doc"]
    assert g["solver"]["backend"] == "petsc" and g["solver"]["ranks"] == ranks
    assert_residual_meets_the_rule(g["solver"])
    # The same sections and values as a serial run: every section, checks and estimates included.
    assert_same_document(g, r, skip=skip)
    assert g["fields"] in ("result.vtu", "result.pvtu") and r["fields"] == "result.vtu"
    # The line CSVs: the same files, the same samples, values to the tolerance.
    assert set(got["lines"]) == set(ref["lines"])
    for name, b in ref["lines"].items():
        a = got["lines"][name]
        for col in b.dtype.names:
            scale = max(np.nanmax(np.abs(b[col])), 1e-300)
            assert np.allclose(a[col], b[col], rtol=0, atol=1e-6 * scale, equal_nan=True), (name, col)


@pytest.mark.parametrize("ranks", [1, 2, 3])
@pytest.mark.parametrize("name", ["cantilever", "cylinder", "every"])
def test_ranks_reproduce_the_direct_solve(cases, direct, name, ranks):
    assert_same_answers(solve_on(cases, name, ranks), direct[name], ranks)


def test_every_feature_in_pieces_on_two_ranks(cases, direct):
    # Above the gather limit each rank writes its own piece of the fields (result.pvtu); forced
    # here on a small mesh. The pieces, put together by node_id, are the serial result.vtu.
    got = solve_on(cases, "every", 2, env={"ELASTOFE_GATHER_NODES": "0"}, tag="-pieces")
    assert (got["out"] / "result.pvtu").is_file() and not (got["out"] / "result.vtu").exists()
    assert sorted(p.name for p in got["out"].glob("result-*.vtu")) == ["result-0000.vtu", "result-0001.vtu"]
    assert got["doc"]["fields"] == "result.pvtu"
    assert_same_answers(got, direct["every"], 2)
    # Writing the same case again with the fields gathered leaves no piece behind.
    p = run_ranks(2, ["run", str(cases["every"]), "--solver", "petsc", "--out", str(got["out"]), "-q"])
    assert p.returncode == 0, p.stderr
    assert (got["out"] / "result.vtu").is_file() and not list(got["out"].glob("result*.pvtu"))
    assert not list(got["out"].glob("result-*.vtu")) and not list(got["out"].glob(".*.part"))


def test_single_process_without_mpiexec(cases, direct):
    got = solve_on(cases, "cantilever", None)
    assert_same_answers(got, direct["cantilever"], 1)
    # The lines come out as the direct solve's (same samples, same values to the tolerance).
    from elastofe.report.plots import read_line_csv  # headers carry units: "sxx [MPa]"

    a = read_line_csv(cases["cantilever"].parent / "cantilever-petsc-None" / "line-mid.csv")
    b = read_line_csv(cases["cantilever"].parent / "cantilever-direct" / "line-mid.csv")
    assert np.allclose(a["sxx"], b["sxx"], rtol=0, atol=1e-6 * np.abs(b["sxx"]).max())


def test_multigrid_iterations_stay_flat_under_refinement(cases):
    # Multigrid-preconditioned CG needs a number of iterations that does not grow with the mesh
    # for elliptic problems (common practice; Trottenberg, Oosterlee & Schüller, Multigrid, 2001,
    # from memory). Measured here with the two-level preconditioner: 49, 42, 38 at 2.5k, 6k and
    # 13k DOF (28 to 31 from 62k to 1.4M in benchmarks/RESULTS-mpi.md); the bound allows for the
    # partition but not for growth like the ~h^-1 of unpreconditioned CG.
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


def test_halo_sums_shared_nodes_at_their_owner_and_spreads_them_back():
    # Three ranks, each with its piece of one mesh: summing 1 from every rank at each of its
    # nodes gives, at the owner, the number of ranks that share the node (counted here from the
    # pieces directly); spreading the owners' values gives every rank each of its nodes' value.
    script = (
        "import numpy as np\n"
        "from scipy.spatial import Delaunay\n"
        "from elastofe.bc import Held\n"
        "from elastofe.solve.petsc import import_petsc\n"
        "from elastofe.parallel.halo import Halo\n"
        "from elastofe.parallel.partition import coordinate_bisection, make_piece, number_nodes\n"
        "PETSc, MPI = import_petsc()\n"
        "comm = MPI.COMM_WORLD\n"
        "g = np.linspace(0, 1, 6)\n"
        "X = np.array(np.meshgrid(g, g, g, indexing='ij')).reshape(3, -1).T\n"
        "T = Delaunay(X + np.random.default_rng(3).uniform(-0.02, 0.02, X.shape)).simplices\n"
        "part = coordinate_bisection(X[T].mean(axis=1), comm.size)\n"
        "num = number_nodes(T, part, comm.size, X.shape[0])\n"
        "held = Held(np.zeros(0, np.int64), np.zeros(0), np.zeros(0, np.int64))\n"
        "pieces = [make_piece(r, X, T, num, np.zeros(3 * X.shape[0]), held) for r in range(comm.size)]\n"
        "pc = pieces[comm.rank]\n"
        "halo = Halo(comm, pc.nodes, pc.first, pc.nown, num.starts)\n"
        "share = np.zeros(X.shape[0])\n"
        "for q in pieces:\n"
        "    np.add.at(share, q.nodes, 1.0)\n"
        "want = np.repeat(share[pc.start:pc.stop, None], 2, 1)\n"
        "ok1 = np.array_equal(halo.reduce(np.ones((pc.nodes.size, 2))), want)\n"
        "ok2 = np.array_equal(halo.spread(10.0 * pc.old[pc.owned]), 10.0 * pc.old)\n"
        "shared = int((share > 1).sum())\n"
        "rows = comm.gather((comm.rank, ok1, ok2, shared), root=0)\n"
        "if comm.rank == 0:\n"
        "    print('\\n'.join(' '.join(str(v) for v in r) for r in rows), flush=True)\n")
    p = run_group([MPIEXEC, "-n", "3", sys.executable, "-c", script], timeout=60)
    assert p.returncode == 0, p.stderr
    rows = sorted(r for r in (line.split() for line in p.stdout.splitlines()) if len(r) == 4 and r[0].isdigit())
    assert [r[1:3] for r in rows] == [["True", "True"]] * 3
    assert int(rows[0][3]) > 0  # the pieces do share nodes


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
        "v = np.einsum('eij,eij->e', np.cross(X[T[:,1]]-X[T[:,0]], X[T[:,2]]-X[T[:,0]])[:,None,:], "
        "(X[T[:,3]]-X[T[:,0]])[:,None,:])\n"
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


@pytest.fixture(scope="module")
def split_mesh(tmp_path_factory):
    """The cantilever meshed once by Gmsh: the whole mesh in one file, and partitioned in two
    parts written one file per part (Gmsh's ``Mesh.PartitionSplitMeshFiles``)."""
    from elastofe.geometry import gmsh_session

    d = tmp_path_factory.mktemp("split")
    with gmsh_session() as gmsh:
        gmsh.model.add("bar")
        gmsh.model.occ.addBox(0, -5, -5, 100, 10, 10)
        gmsh.model.occ.synchronize()
        gmsh.model.addPhysicalGroup(3, [1], 1)
        gmsh.option.setNumber("Mesh.MeshSizeMax", 5.0)
        gmsh.model.mesh.generate(3)
        gmsh.model.mesh.setOrder(2)
        gmsh.write(str(d / "whole.msh"))
        gmsh.option.setNumber("Mesh.PartitionSplitMeshFiles", 1)
        gmsh.model.mesh.partition(2)
        gmsh.write(str(d / "part.msh"))
    assert sorted(p.name for p in d.glob("part_*.msh")) == ["part_1.msh", "part_2.msh"]
    return d


def test_a_mesh_file_per_rank_is_read_without_meshing(cases, split_mesh, tmp_path):
    # Each rank reads its own file of a Gmsh partitioned mesh; rank 0 meshes nothing and the
    # parts are the partition. The answers are those of a direct solve of the same mesh read
    # from one file (the file names aside).
    text = cases["cantilever"].read_text()
    bar = text.split('file = "')[1].split('"')[0]
    whole = write_case(tmp_path / "whole.toml", text.replace(bar, str(split_mesh / "whole.msh")))
    per_rank = write_case(tmp_path / "per-rank.toml", text.replace(bar, str(split_mesh / "part_{part}.msh")))
    elastofe.run(whole, out=tmp_path / "direct")
    p = run_ranks(2, ["run", str(per_rank), "--solver", "petsc", "--out", str(tmp_path / "petsc")])
    assert p.returncode == 0, p.stdout + p.stderr
    assert "read 2 mesh file(s), one per rank" in p.stderr and "meshing" not in p.stderr + p.stdout
    got, ref = read_results(tmp_path / "petsc"), read_results(tmp_path / "direct")
    assert got["doc"]["geometry_file"].endswith("part_{part}.msh")
    # Surface ids are labels the mesh files number on their own: regions compared by what they matched.
    assert_same_answers(got, ref, 2, skip=frozenset({"case_file", "geometry_file", "geometry", "inputs", "regions"}))
    for name, reg in ref["doc"]["regions"].items():
        g = got["doc"]["regions"][name]
        assert g["area"] == pytest.approx(reg["area"], rel=1e-9)
        assert sorted(s["kind"] for s in g["surfaces"]) == sorted(s["kind"] for s in reg["surfaces"])
    assert_same_document(got["doc"]["geometry"]["pieces"], ref["doc"]["geometry"]["pieces"],
                         kinds=_kind_scales(ref["doc"]))
    # One rank for two files: refused with the key, before any solve.
    p = run_ranks(1, ["run", str(per_rank), "--solver", "petsc", "--out", str(tmp_path / "o"), "-q"], timeout=60)
    assert p.returncode == 2 and "geometry.file" in p.stderr and "more parts" in p.stderr, p.stderr
    # Without the distributed engine the per-rank names are refused too.
    p = run_ranks(None, ["run", str(per_rank), "--out", str(tmp_path / "o"), "-q"], timeout=60)
    assert p.returncode == 2 and "--solver petsc" in p.stderr, p.stderr


def test_what_cannot_run_distributed_is_refused_with_the_key(cases, tmp_path):
    # The [reference] comparison needs every node's field in one process: refused when the case
    # is read (exit 2, nothing written), on every rank, before any meshing.
    ref = tmp_path / "ref.csv"
    ref.write_text("x,y,z,von_mises\n50,0,0,1.0\n")
    text = cases["cantilever"].read_text() + ('\n[reference]\nlabel = "other"\ntolerance = "5%"\n'
                                              f'[[reference.points]]\nfile = "{ref}"\n')
    case = write_case(tmp_path / "with-reference.toml", text)
    p = run_ranks(2, ["run", str(case), "--solver", "petsc", "--out", str(tmp_path / "o"), "-q"], timeout=60)
    assert p.returncode == 2, p.stdout + p.stderr
    assert p.stderr.count("reference") >= 1 and "petsc backend" in p.stderr and "meshing" not in p.stdout
    assert not (tmp_path / "o").exists()
