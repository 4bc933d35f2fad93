"""The side-by-side benchmark at its smallest size: it runs, writes its table, and both libraries
agree on the tip deflection.

Reference: scikit-fem (PyPI), its own elasticity form and 10-node element on the same mesh and
loads. Timings are printed in the table, never asserted.
"""
import json
import subprocess
import sys
from pathlib import Path

import pytest

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

ROOT = Path(__file__).resolve().parent.parent


def test_benchmark_smoke(tmp_path):
    pytest.importorskip("skfem")
    rdir = tmp_path / "results"
    p = subprocess.run([sys.executable, str(ROOT / "benchmarks" / "compare.py"), "--sizes", "smoke",
                        "--results-dir", str(rdir)], capture_output=True, text=True, timeout=300)
    assert p.returncode == 0, p.stderr[-2000:]
    print(p.stdout)
    text = (tmp_path / "RESULTS.md").read_text()
    assert "| smoke |" in text and "scikit-fem" in text
    run = json.loads((rdir / "cantilever-smoke.json").read_text())
    ours, ref = run["elastofe"], run["reference"]
    assert ours["dofs"] == ref["dofs"]
    # Same mesh, loads and supports; direct solves of the same discrete system: 1e-6 relative.
    assert ours["tip_mean_uy"] == pytest.approx(ref["tip_mean_uy"], rel=1e-6)
