"""Strong scaling of the petsc backend on this machine, and a weak-scaling study on paper.

    python benchmarks/mpi_scaling.py [--sizes 3.0,1.6,1.1] [--ranks 1,2] [--out FILE.json]

Part 1 (measured): a 100 x 10 x 10 cantilever of 10-node tetrahedra at each element size, solved
with ``--solver petsc`` under ``mpiexec -n P`` for each P, and once with the single-process direct
solver as the reference. Prints per-stage seconds, GAMG iterations, peak memory per rank, and the
speed-up of P ranks over one.

Part 2 (extrapolated): from the measured per-rank costs (memory and seconds per owned DOF of a
rank > 0, seconds per DOF of rank 0's serial stages, iterations against size) the time and memory
per rank of a weak-scaling series up to 1e8 DOF, for a stated DOF per rank and an assumed network
latency. Nothing of part 2 is measured at that size: it is arithmetic on part 1's figures, and
the assumptions are printed with it.

A worker mode (``--worker CASE``) is what mpiexec runs; it prints one JSON line on rank 0.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

CASE = """
title = "scaling cantilever"
[geometry]
file = "{step}"
[material]
E = 200000.0
nu = 0.3
[mesh]
order = 2
size = {size}
[regions]
root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
[[support]]
region = "root"
[[load]]
region = "tip"
force = [0, -100, 0]
[solver]
backend = "{backend}"
"""


def mpi_env() -> dict:
    env = dict(os.environ)
    env.update({"PYTHONPATH": str(ROOT), "OMPI_ALLOW_RUN_AS_ROOT": "1", "OMPI_ALLOW_RUN_AS_ROOT_CONFIRM": "1",
                "OMPI_MCA_btl": "self,vader", "OMPI_MCA_pml": "ob1", "OMPI_MCA_btl_vader_single_copy_mechanism": "none",
                "OMPI_MCA_rmaps_base_oversubscribe": "1", "OMPI_MCA_plm_rsh_agent": "false", "OMPI_MCA_mpi_yield_when_idle": "1",
                "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"})
    return env


def worker(case_path: str) -> None:
    """Run under mpiexec: solve, and on rank 0 print stage timings, iterations and memory."""
    import elastofe
    from elastofe.resources import peak_memory_mb

    t = time.perf_counter()
    res = elastofe.solve_case(elastofe.load_case(case_path))
    wall = time.perf_counter() - t
    if res is None:
        return
    print(json.dumps({"dofs": res.dofs, "elements": int(res.mesh.cells.shape[0]), "timings": res.timings,
                      "wall": wall, "solver": res.solver_info, "backend": res.backend,
                      "peak_mb": peak_memory_mb()}), flush=True)


def launch(case: Path, ranks: int | None) -> dict:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--worker", str(case)]
    if ranks is not None:
        cmd = [shutil.which("mpiexec"), "-n", str(ranks), *cmd]
    p = subprocess.run(cmd, capture_output=True, text=True, env=mpi_env(), timeout=3600)
    if p.returncode != 0:
        raise RuntimeError(p.stderr[-3000:])
    return json.loads([ln for ln in p.stdout.splitlines() if ln.startswith("{")][-1])


def fit_line(x: list[float], y: list[float]) -> tuple[float, float]:
    """Least-squares a + b x."""
    n = len(x)
    mx, my = sum(x) / n, sum(y) / n
    sxx = sum((xi - mx) ** 2 for xi in x)
    b = sum((xi - mx) * (yi - my) for xi, yi in zip(x, y)) / sxx if sxx > 0 else 0.0
    return my - b * mx, b


def weak_scaling(rows: list[dict], dof_per_rank: float, latency_s: float, bandwidth_Bps: float) -> list[dict]:
    """Per-rank time and memory of a weak-scaling series, from the measured per-rank costs.

    The model (each term from part 1's measurements on one rank and on two):
    - memory of a rank > 0 = base + (bytes per owned DOF) x DOF per rank (fit over sizes, 2 ranks);
    - assembly and GAMG setup: seconds per owned DOF (one rank, the largest size);
    - one CG iteration: seconds per owned DOF, plus 3 global reductions (two CG dot products and
      the norm) and ~2 neighbour exchanges per multigrid level, each costing the latency; the
      exchanged halo of a compact part of D DOF is ~6 D^(2/3) values;
    - iterations: the measured count, grown with log(DOF) at the fitted slope (flat if none);
    - rank 0 alone: meshing, partitioning, recovery and output scale with the whole model,
      at the measured seconds and bytes per DOF.
    """
    one = [r for r in rows if r["ranks"] == 1]
    two = [r for r in rows if r["ranks"] == 2]
    big = max(one, key=lambda r: r["dofs"])
    d = big["dofs"]
    t_asm = big["timings"]["assembly"] / d
    t_setup = big["solver"]["setup_seconds"] / d
    t_it = big["solver"]["iteration_seconds"] / big["solver"]["iterations"] / d
    # rank-0 serial stages, seconds per DOF of the whole model
    t_root = (big["timings"]["mesh"] + big["timings"]["loads"] + big["timings"].get("partition", 0.0)
              + big["timings"]["recovery"] + big["timings"]["post"]) / d
    # memory of rank > 0 against its owned DOF (two ranks: each owns ~half)
    xs = [r["dofs"] / 2 for r in two]
    ys = [r["solver"]["peak_memory_mb_per_rank"][1] for r in two]
    base_mb, mb_per_dof = fit_line(xs, ys)
    # rank 0 holds the mesh and the result fields in addition: its excess over a rank > 0
    root_extra = [(r["solver"]["peak_memory_mb_per_rank"][0] - r["solver"]["peak_memory_mb_per_rank"][1]) / r["dofs"]
                  for r in two]
    root_mb_per_dof = max(root_extra)
    its_x = [math.log(r["dofs"]) for r in one]
    its_y = [r["solver"]["iterations"] for r in one]
    its0, its_slope = fit_line(its_x, its_y)
    its_slope = max(its_slope, 0.0)
    out = []
    for total in (1e6, 3e6, 1e7, 3e7, 1e8):
        P = max(1, round(total / dof_per_rank))
        D = total / P
        its = its0 + its_slope * math.log(total)
        levels = max(2, math.ceil(math.log(total / 1000) / math.log(30)))  # ~30x coarsening per level
        halo_values = 6 * D ** (2 / 3)
        comm_per_it = (3 * math.ceil(math.log2(max(P, 2))) + 2 * levels) * latency_s \
            + 2 * levels * halo_values * 8 / bandwidth_Bps
        t_solve = D * (t_setup + its * t_it) + its * comm_per_it
        out.append({"dofs": total, "ranks": P, "dof_per_rank": D, "iterations": its,
                    "assembly_s": D * t_asm, "solve_s": t_solve, "comm_share": its * comm_per_it / t_solve,
                    "rank0_serial_s": total * t_root,
                    "mem_rank_mb": base_mb + mb_per_dof * D,
                    "mem_rank0_mb": base_mb + mb_per_dof * D + root_mb_per_dof * total})
    return out, {"assembly_s_per_dof": t_asm, "setup_s_per_dof": t_setup, "iteration_s_per_dof": t_it,
                 "rank0_s_per_dof": t_root, "base_mb": base_mb, "mb_per_owned_dof": mb_per_dof,
                 "rank0_extra_mb_per_dof": root_mb_per_dof, "iterations_at_log_dof": [its0, its_slope]}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--worker")
    ap.add_argument("--sizes", default="3.0,1.6,1.15", help="element sizes of the cantilever (mm)")
    ap.add_argument("--ranks", default="1,2")
    ap.add_argument("--dof-per-rank", type=float, default=1e6)
    ap.add_argument("--latency", type=float, default=5e-6, help="assumed network latency per message (s)")
    ap.add_argument("--bandwidth", type=float, default=5e9, help="assumed network bandwidth (bytes/s)")
    ap.add_argument("--out", help="write the measured rows as JSON")
    a = ap.parse_args()
    if a.worker:
        worker(a.worker)
        return
    from tests.conftest import write_step

    d = Path(tempfile.mkdtemp(prefix="elastofe-mpi-bench-"))
    step = write_step(d / "bar.step", lambda occ: occ.addBox(0, -5, -5, 100, 10, 10))
    ranks = [int(r) for r in a.ranks.split(",")]
    rows = []
    print(f"load average at start: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    print(f"{'size':>5} {'DOF':>9} {'run':>8} {'mesh':>6} {'asm':>6} {'setup':>6} {'iter':>6} {'its':>4} "
          f"{'solve':>6} {'total':>7} {'speed-up':>8}  peak MiB per rank")
    for size in [float(s) for s in a.sizes.split(",")]:
        direct = d / f"direct-{size}.toml"
        direct.write_text(CASE.format(step=step, size=size, backend="auto"))
        ref = launch(direct, None)
        print(f"{size:>5} {ref['dofs']:>9,} {ref['backend']:>8} {ref['timings']['mesh']:>6.2f} "
              f"{ref['timings']['assembly']:>6.2f} {'':>6} {'':>6} {'':>4} {ref['timings']['solve']:>6.2f} "
              f"{ref['wall']:>7.2f} {'':>8}  {ref['peak_mb']:.0f}", flush=True)
        case = d / f"petsc-{size}.toml"
        case.write_text(CASE.format(step=step, size=size, backend="petsc"))
        base = None
        for P in ranks:
            r = launch(case, P)
            r["ranks"], r["size"], r["direct_solve_s"] = P, size, ref["timings"]["solve"]
            rows.append(r)
            s = r["solver"]
            t_solve = r["timings"]["assembly"] + r["timings"]["solve"]
            base = base or t_solve
            print(f"{size:>5} {r['dofs']:>9,} {'petsc/' + str(P):>8} {r['timings']['mesh']:>6.2f} "
                  f"{r['timings']['assembly']:>6.2f} {s['setup_seconds']:>6.2f} {s['iteration_seconds']:>6.2f} "
                  f"{s['iterations']:>4} {r['timings']['solve']:>6.2f} {r['wall']:>7.2f} {base / t_solve:>8.2f}  "
                  f"{', '.join(f'{m:.0f}' for m in s['peak_memory_mb_per_rank'])}", flush=True)
    print(f"load average at end: {os.getloadavg()[0]:.2f}")
    print("speed-up: (assembly + solve) of one rank over P ranks, same mesh")
    if a.out:
        Path(a.out).write_text(json.dumps(rows, indent=1))

    if 1 in ranks and 2 in ranks:
        series, k = weak_scaling(rows, a.dof_per_rank, a.latency, a.bandwidth)
        print(f"\nWeak scaling on paper: {a.dof_per_rank:.3g} DOF per rank, latency {a.latency * 1e6:.0f} us, "
              f"bandwidth {a.bandwidth / 1e9:.0f} GB/s (assumed), per-rank costs measured above:")
        print("  " + ", ".join(f"{key} {v:.3g}" if not isinstance(v, list) else f"{key} {v[0]:.3g} + {v[1]:.3g} ln N"
                               for key, v in k.items()))
        print(f"{'DOF':>8} {'ranks':>6} {'its':>5} {'assembly s':>10} {'solve s':>8} {'comm %':>7} "
              f"{'rank-0 serial s':>15} {'MiB/rank':>9} {'MiB rank 0':>10}")
        for w in series:
            print(f"{w['dofs']:>8.0e} {w['ranks']:>6} {w['iterations']:>5.0f} {w['assembly_s']:>10.1f} "
                  f"{w['solve_s']:>8.1f} {100 * w['comm_share']:>6.1f}% {w['rank0_serial_s']:>15.0f} "
                  f"{w['mem_rank_mb']:>9.0f} {w['mem_rank0_mb']:>10.0f}")


if __name__ == "__main__":
    main()
