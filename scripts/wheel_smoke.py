"""Smoke test of an installed wheel, run by .ci/run with a fresh venv's Python from outside the
source tree: the package imports from the venv (not the checkout), reads back the demo's results
folder as a notebook would, and its numbers agree with the folder's own files.

Run: VENV/bin/python scripts/wheel_smoke.py RESULTS_FOLDER   (exit 0 when all is well)
"""
from __future__ import annotations

import json
import sys
from pathlib import Path


def main(folder: Path) -> int:
    import numpy as np

    import elastofe

    here = Path(__file__).resolve().parents[1]
    where = Path(elastofe.__file__).resolve()
    assert here not in where.parents, f"elastofe imported from the checkout ({where}), not the wheel"
    assert elastofe.demo_case().is_file(), "the demo case is not in the installed package"
    res = elastofe.read_results(folder)
    doc = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    assert res.summary == doc and res.changed == [], res.changed
    assert len(repr(res)) < 400, repr(res)
    line = res.lines["mid-span"]
    assert line.s.shape == (33,) and np.isfinite(line.von_mises).all()
    at = np.asarray(doc["max_von_mises"]["at"])
    p = res.probe(at)  # at a node the interpolated value is the nodal one
    assert abs(p.von_mises[0] - doc["max_von_mises"]["value"]) <= 1e-9 * doc["max_von_mises"]["value"], p
    grid = res.to_pyvista()
    assert grid.n_points == doc["mesh"]["nodes"] and "von_mises" in grid.point_data
    assert res.array_units["von_mises"] == doc["units"]["stress"]
    try:
        import pandas  # noqa: F401
    except ImportError:
        print("wheel smoke: pandas not installed, tables not tried")
    else:
        table = res.tables["mid-span"]
        assert table.shape == (33, 14) and table.columns[-1] == f"von_mises [{doc['units']['stress']}]"
    print(f"wheel smoke: elastofe {elastofe.__version__} from {where.parent}: {res!r}")
    return 0


if __name__ == "__main__":
    sys.exit(main(Path(sys.argv[1])))
