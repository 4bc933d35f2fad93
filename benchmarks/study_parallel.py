"""Convergence study of the demo lever: levels in parallel worker processes against one at a time.

Prints the wall time of each mode, the per-level times and peak memory, and the ratio. A figure, not
a test: the machine may be shared. Run: python benchmarks/study_parallel.py [--levels 3] [--ratio 1.3]
"""
import argparse
import time
from pathlib import Path

import elastofe
from elastofe.studies.convergence import run_study

ROOT = Path(__file__).resolve().parent.parent


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--levels", type=int, default=3)
    ap.add_argument("--ratio", type=float, default=1.3)
    a = ap.parse_args()
    case = elastofe.load_case(ROOT / "elastofe" / "models" / "lever" / "lever.toml")
    walls = {}
    for label, jobs in (("one process, in-process", 1), ("worker processes (auto)", None)):
        t = time.perf_counter()
        st = run_study(case, levels=a.levels, ratio=a.ratio, jobs=jobs)
        walls[label] = time.perf_counter() - t
        ex = st["execution"]
        print(f"{label}: wall {walls[label]:.1f} s, jobs {ex['jobs']} ({ex['reason']})")
        for lv in st["levels"]:
            print(f"   level {lv['level']}: {lv['dofs']:>8,} DOF  {lv['wall_s']:6.1f} s  peak {lv['peak_mb']:7.0f} MiB")
    one, par = walls.values()
    print(f"speed-up of parallel levels: {one / par:.2f}x")


if __name__ == "__main__":
    main()
