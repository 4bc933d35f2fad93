"""Strong scaling and memory of the petsc backend on this machine, and a weak-scaling study on paper.

    python benchmarks/mpi_scaling.py [--sizes 1.6,0.8,0.55] [--ranks 1,2] [--out FILE.json]

Part 1 (measured): a 100 x 10 x 10 cantilever of 10-node tetrahedra at each element size, run as
``elastofe run`` does (results written), once as a single-process run with the automatic solver
choice's solver for one load case past 50k DOF, ``amg`` (the reference: what the same case file
costs on one process) and with ``--solver petsc``
under ``mpiexec -n P`` for each P. Prints per-stage seconds, iterations, each rank's peak memory,
rank 0's peak per stage, and rank 0's peak over the single-process run's and over one rank's.

Part 2 (extrapolated): from the measured per-rank costs (memory per owned DOF, seconds per owned
DOF, iterations against size) and rank 0's own stages (meshing, model, partition, kept part) the
time and memory per rank of a weak-scaling series up to 1e8 DOF, for a stated DOF per rank and
an assumed network latency. Nothing of part 2 is measured at that size: it is arithmetic on part
1's figures, and the assumptions are printed with it.

A worker mode (``--worker CASE OUT``) is what mpiexec runs; it prints one JSON line on rank 0.
Peak memory is each process's VmHWM (``/proc/self/status``); rank 0's per stage is read and reset
at each progress message (``/proc/self/clear_refs``, as ``benchmarks/memory.py`` does).
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
yield_strength = 250.0
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
[[point]]
name = "tip"
at = [100, 0, 0]
[[line]]
name = "mid"
start = [50, -5, 0]
end = [50, 5, 0]
samples = 21
[solver]
backend = "{backend}"
"""


def mpi_env() -> dict:
    env = dict(os.environ)
    env.update({"PYTHONPATH": str(ROOT), "OMPI_ALLOW_RUN_AS_ROOT": "1", "OMPI_ALLOW_RUN_AS_ROOT_CONFIRM": "1",
                "OMPI_MCA_btl": "self,vader", "OMPI_MCA_pml": "ob1", "OMPI_MCA_btl_vader_single_copy_mechanism": "none",
                "OMPI_MCA_rmaps_base_oversubscribe": "1", "OMPI_MCA_plm_rsh_agent": "false",
                "OMPI_MCA_mpi_yield_when_idle": "1",
                "OMPI_MCA_hwloc_base_binding_policy": "none",
                "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"})
    return env


def worker(case_path: str, out: str) -> None:
    """Run under mpiexec (or alone): a whole run with output; on rank 0 print timings and memory."""
    from elastofe.parallel import limit_threads_under_mpi

    limit_threads_under_mpi()
    sys.path.insert(0, str(ROOT / "benchmarks"))
    from memory import StagePeaks

    import elastofe
    from elastofe.job import run_case

    peaks = StagePeaks()
    stages: list[tuple[str, float]] = []

    def progress(stage: str, msg: str) -> None:
        peaks.mark(stage)
        stages.append((stage, round(peaks.peaks[stage], 1)))

    t = time.perf_counter()
    outcome = run_case(elastofe.load_case(case_path), out, overwrite=True, progress=progress)
    wall = time.perf_counter() - t
    res = outcome.result
    if res is None:
        return
    peaks.mark("write")
    print(json.dumps({"dofs": res.dofs, "elements": int(res.whole.elements if res.whole else res.mesh.cells.shape[0]),
                      "timings": res.timings, "wall": wall, "solver": res.solver_info, "backend": res.backend,
                      "peak_mb": peaks.process_peak, "stage_peaks_mb": peaks.peaks,
                      "fields": outcome.summary.get("fields")}), flush=True)


def launch(case: Path, ranks: int | None, out: Path) -> dict:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--worker", str(case), str(out)]
    if ranks is not None:
        cmd = [shutil.which("mpiexec"), "-n", str(ranks), *cmd]
    p = subprocess.run(cmd, capture_output=True, text=True, env=mpi_env(), timeout=7200)
    if p.returncode != 0:
        raise RuntimeError(p.stderr[-3000:])
    shutil.rmtree(out, ignore_errors=True)
    return json.loads([ln for ln in p.stdout.splitlines() if ln.startswith("{")][-1])


def fit_line(x: list[float], y: list[float]) -> tuple[float, float]:
    """Least-squares a + b x."""
    n = len(x)
    mx, my = sum(x) / n, sum(y) / n
    sxx = sum((xi - mx) ** 2 for xi in x)
    b = sum((xi - mx) * (yi - my) for xi, yi in zip(x, y)) / sxx if sxx > 0 else 0.0
    return my - b * mx, b


def weak_scaling(rows: list[dict], dof_per_rank: float, latency_s: float, bandwidth_Bps: float):
    """Per-rank time and memory of a weak-scaling series, from the measured per-rank costs.

    The model (each term from part 1's measurements):
    - memory of a rank > 0 = base + (bytes per owned DOF) x DOF per rank (fit over sizes, 2 ranks);
    - assembly, multigrid set-up and one CG iteration: seconds per owned DOF (one rank, the
      largest size);
    - per CG iteration 3 global reductions (two dot products and the norm) and ~2 neighbour
      exchanges per multigrid level, each costing the latency; the halo of a compact part of D
      DOF is ~6 D^(2/3) values;
    - iterations: the measured count, grown with log(DOF) at the fitted slope (flat if none);
    - rank 0 alone: meshing, the model stages and the partition grow with the whole model, at
      the measured seconds and bytes per DOF of its own stage peaks (above the base); its share
      of the solve is a rank's share. With a mesh file per rank (no meshing on rank 0) the
      meshing term goes and the merge of the parts comes instead (taken as the model stages').
    """
    one = [r for r in rows if r["ranks"] == 1]
    two = [r for r in rows if r["ranks"] == 2]
    big = max(one, key=lambda r: r["dofs"])
    d = big["dofs"]
    t_asm = big["timings"]["assembly"] / d
    t_setup = big["solver"]["setup_seconds"] / d
    t_it = big["solver"]["iteration_seconds"] / big["solver"]["iterations"] / d
    t_mesh = big["timings"]["mesh"] / d
    t_root = (big["timings"]["loads"] + big["timings"].get("partition", 0.0)) / d
    t_post = big["timings"]["post"] / d  # distributed: scales with the rank's share
    xs = [r["dofs"] / 2 for r in two]
    ys = [r["solver"]["peak_memory_mb_per_rank"][1] for r in two]
    base_mb, mb_per_dof = fit_line(xs, ys)
    # Rank 0's own stages (meshing; model and partition): the growth of their peaks with the whole
    # model's DOF (fit over sizes, 2 ranks), on top of the base.
    dofs = [r["dofs"] for r in two]
    _, mesh_mb = fit_line(dofs, [r["stage_peaks_mb"]["mesh"] for r in two])
    _, model_mb = fit_line(dofs, [max(r["stage_peaks_mb"].get(k, 0.0) for k in ("geometry", "partition"))
                                  for r in two])
    its_x = [math.log(r["dofs"]) for r in one]
    its_y = [r["solver"]["iterations"] for r in one]
    its0, its_slope = fit_line(its_x, its_y)
    if its_slope <= 0.0:  # flat (or falling): take the largest count measured, no growth
        its0, its_slope = float(max(its_y)), 0.0
    out = []
    for total in (1e6, 3e6, 1e7, 3e7, 1e8):
        P = max(1, round(total / dof_per_rank))
        D = total / P
        its = its0 + its_slope * math.log(total)
        levels = 2 + max(1, math.ceil(math.log(total / 15 / 1000) / math.log(30)))  # p-level + GAMG ~30x per level
        halo_values = 6 * D ** (2 / 3)
        comm_per_it = (3 * math.ceil(math.log2(max(P, 2))) + 2 * levels) * latency_s \
            + 2 * levels * halo_values * 8 / bandwidth_Bps
        t_solve = D * (t_setup + its * t_it) + its * comm_per_it
        rank_mb = base_mb + mb_per_dof * D
        out.append({"dofs": total, "ranks": P, "dof_per_rank": D, "iterations": its,
                    "assembly_s": D * t_asm, "solve_s": t_solve, "post_s": D * t_post,
                    "comm_share": its * comm_per_it / t_solve,
                    "rank0_mesh_s": total * t_mesh, "rank0_model_s": total * t_root,
                    "mem_rank_mb": rank_mb,
                    "mem_rank0_meshing_mb": base_mb + mesh_mb * total,
                    "mem_rank0_model_mb": base_mb + model_mb * total,
                    "mem_rank0_mb": max(rank_mb, base_mb + mesh_mb * total, base_mb + model_mb * total)})
    return out, {"assembly_s_per_dof": t_asm, "setup_s_per_dof": t_setup, "iteration_s_per_dof": t_it,
                 "rank0_mesh_s_per_dof": t_mesh, "rank0_model_s_per_dof": t_root, "post_s_per_dof": t_post,
                 "base_mb": base_mb, "mb_per_owned_dof": mb_per_dof, "rank0_meshing_mb_per_dof": mesh_mb,
                 "rank0_model_mb_per_dof": model_mb, "iterations_at_log_dof": [its0, its_slope]}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--worker", nargs=2)
    ap.add_argument("--sizes", default="1.6,0.8,0.55", help="element sizes of the cantilever (mm)")
    ap.add_argument("--ranks", default="1,2")
    ap.add_argument("--dof-per-rank", type=float, default=1e6)
    ap.add_argument("--latency", type=float, default=5e-6, help="assumed network latency per message (s)")
    ap.add_argument("--bandwidth", type=float, default=5e9, help="assumed network bandwidth (bytes/s)")
    ap.add_argument("--out", help="write the measured rows as JSON")
    ap.add_argument("--reuse", help="a JSON file of rows measured before: print part 2 from them only")
    a = ap.parse_args()
    if a.worker:
        worker(*a.worker)
        return
    if a.reuse:
        rows = json.loads(Path(a.reuse).read_text())
    else:
        rows = measure(a)
    series, k = weak_scaling(rows, a.dof_per_rank, a.latency, a.bandwidth)
    print(f"\nWeak scaling on paper: {a.dof_per_rank:.3g} DOF per rank, latency {a.latency * 1e6:.0f} us, "
          f"bandwidth {a.bandwidth / 1e9:.0f} GB/s (assumed), per-rank costs measured above:")
    print("  " + ", ".join(f"{key} {v:.3g}" if not isinstance(v, list) else f"{key} {v[0]:.3g} + {v[1]:.3g} ln N"
                           for key, v in k.items()))
    print(f"{'DOF':>8} {'ranks':>6} {'its':>5} {'asm s':>6} {'solve s':>8} {'post s':>7} {'comm %':>7} "
          f"{'r0 mesh s':>9} {'r0 model s':>10} {'MiB/rank':>9} {'r0 meshing':>10} {'r0 model':>9}")
    for w in series:
        print(f"{w['dofs']:>8.0e} {w['ranks']:>6} {w['iterations']:>5.0f} {w['assembly_s']:>6.1f} "
              f"{w['solve_s']:>8.1f} {w['post_s']:>7.1f} {100 * w['comm_share']:>6.2f}% {w['rank0_mesh_s']:>9.0f} "
              f"{w['rank0_model_s']:>10.0f} {w['mem_rank_mb']:>9.0f} {w['mem_rank0_meshing_mb']:>10.0f} "
              f"{w['mem_rank0_model_mb']:>9.0f}")


def measure(a) -> list[dict]:
    from tests.conftest import write_step

    d = Path(tempfile.mkdtemp(prefix="elastofe-mpi-bench-"))
    step = write_step(d / "bar.step", lambda occ: occ.addBox(0, -5, -5, 100, 10, 10))
    ranks = [int(r) for r in a.ranks.split(",")]
    rows = []
    print(f"load average at start: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    print(f"{'size':>5} {'DOF':>9} {'run':>8} {'mesh':>6} {'asm':>6} {'setup':>6} {'iter':>6} {'its':>4} "
          f"{'solve':>6} {'post':>6} {'total':>7} {'speed-up':>8} {'r0/serial':>9} {'r0/1 rank':>9}  peak MiB per rank")
    for size in [float(s) for s in a.sizes.split(",")]:
        serial = d / f"serial-{size}.toml"
        # "amg" is what "auto" picks for one load case past 50k DOF; named here because the
        # check before meshing estimates "auto" as a direct solve and refuses ~1.4M DOF on 24 GiB.
        serial.write_text(CASE.format(step=step, size=size, backend="amg"))
        ref = launch(serial, None, d / "out")
        ref.update(ranks=0, size=size)
        rows.append(ref)
        print(f"{size:>5} {ref['dofs']:>9,} {ref['backend']:>8} {ref['timings']['mesh']:>6.2f} "
              f"{ref['timings']['assembly']:>6.2f} {'':>6} {'':>6} {'':>4} {ref['timings']['solve']:>6.2f} "
              f"{ref['timings']['recovery'] + ref['timings']['post']:>6.2f} {ref['wall']:>7.2f} {'':>8} {'':>9} "
              f"{'':>9}  {ref['peak_mb']:.0f}", flush=True)
        case = d / f"petsc-{size}.toml"
        case.write_text(CASE.format(step=step, size=size, backend="petsc"))
        base, one = None, None
        for P in ranks:
            r = launch(case, P, d / "out")
            r.update(ranks=P, size=size, serial_peak_mb=ref["peak_mb"])
            mem = list(r["solver"]["peak_memory_mb_per_rank"])
            mem[0] = r["peak_mb"]  # rank 0: the maximum of its stage peaks (its VmHWM is reset per stage)
            r["solver"]["peak_memory_mb_per_rank"] = mem
            rows.append(r)
            s = r["solver"]
            t_solve = r["timings"]["assembly"] + r["timings"]["solve"]
            base = base or t_solve
            one = one or mem[0]
            print(f"{size:>5} {r['dofs']:>9,} {'petsc/' + str(P):>8} {r['timings']['mesh']:>6.2f} "
                  f"{r['timings']['assembly']:>6.2f} {s['setup_seconds']:>6.2f} {s['iteration_seconds']:>6.2f} "
                  f"{s['iterations']:>4} {r['timings']['solve']:>6.2f} {r['timings']['post']:>6.2f} {r['wall']:>7.2f} "
                  f"{base / t_solve:>8.2f} {mem[0] / ref['peak_mb']:>9.2f} {mem[0] / one:>9.2f}  "
                  f"{', '.join(f'{m:.0f}' for m in mem)}", flush=True)
            print(f"{'':>16} rank 0 per stage (MiB): "
                  + ", ".join(f"{k} {v:.0f}" for k, v in r["stage_peaks_mb"].items()) + f"; fields {r['fields']}",
                  flush=True)
            if a.out:  # after every run, so that a long series interrupted keeps what it measured
                Path(a.out).write_text(json.dumps(rows, indent=1))
    print(f"load average at end: {os.getloadavg()[0]:.2f}")
    print("speed-up: (assembly + solve) of one rank over P ranks, same mesh; r0/serial: rank 0's peak over the "
          "single-process run's; r0/1 rank: over the petsc run's on one rank")
    if a.out:
        Path(a.out).write_text(json.dumps(rows, indent=1))
    return rows


if __name__ == "__main__":
    main()
