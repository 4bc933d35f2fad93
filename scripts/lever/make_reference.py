"""Builds lever-reference-fine.csv: reference points for the demo's comparison section.

The values come from a FINER RUN OF ELASTOFE ITSELF (every element size halved), not from
another analysis program: the demo uses them to show how a comparison reads, and how far the
demo's own mesh is from a finer one. The file says so in its header notes.

Points: the demo's mid-span line (tagged with its name), the top fibre along the arm, the two
named points and eight points on the pin hole's surface.
Run: python scripts/lever/make_reference.py   (about a minute and 2 GiB of memory)
"""
from dataclasses import replace
from pathlib import Path

import numpy as np

import elastofe
from elastofe.studies.compare import evaluate_at

HERE = Path(__file__).resolve().parents[2] / "elastofe" / "models" / "lever"
FACTOR = 0.5          # element sizes of the finer run, as a share of the demo's
L, H0, H1, T, XH, RH = 150.0, 40.0, 24.0, 12.0, 135.0, 5.0
QUANTITIES = ("ux", "uy", "von_mises", "sxx")
UNITS = {"ux": "mm", "uy": "mm", "uz": "mm", "von_mises": "MPa", "sxx": "MPa"}


def points(case) -> tuple[np.ndarray, list[str], list[str]]:
    xyz, names, lines = [], [], []
    ln = next(li for li in case.lines if li.name == "mid-span")
    for k, t in enumerate(np.linspace(0, 1, ln.samples)):
        xyz.append(np.asarray(ln.start) + t * (np.asarray(ln.end) - np.asarray(ln.start)))
        names.append(f"mid-span-{k:02d}")
        lines.append("mid-span")
    for x in np.arange(10.0, 130.0, 10.0):
        xyz.append([x, H0 / 2 - (H0 - H1) / 2 * x / L, T / 2])  # top fibre of the tapered arm
        names.append(f"top-fibre-x{int(x):03d}")
        lines.append("")
    for p in case.points:
        xyz.append(p.at)
        names.append(p.name)
        lines.append("")
    for a in np.linspace(0, 2 * np.pi, 8, endpoint=False):
        xyz.append([XH + RH * np.cos(a), RH * np.sin(a), T / 2])
        names.append(f"hole-{int(round(np.degrees(a))):03d}deg")
        lines.append("")
    return np.asarray(xyz, dtype=float), names, lines


def main() -> None:
    case = elastofe.load_case(HERE / "lever.toml")
    fine = replace(case, mesh=case.mesh.scaled(FACTOR), reference=None)
    res = elastofe.solve_case(fine)
    xyz, names, lines = points(case)
    ev = evaluate_at(res, xyz, snap=0.05)
    assert (ev.status == 0).all() or (ev.distance < 0.05).all(), "a reference point lies off the part"
    rows = [
        "# Reference points for the lever demo's [reference] section.",
        "# MADE BY A FINER RUN OF ELASTOFE ITSELF, not by another analysis program: every element size",
        f"# of lever.toml multiplied by {FACTOR} ({res.mesh.nodes} nodes, {res.mesh.cells.shape[0]} 10-node "
        f"elements, elastofe {elastofe.__version__}).",
        "# It shows how a comparison reads and how far the demo's mesh is from a finer one.",
        "# Rebuild with: python scripts/lever/make_reference.py",
        "name,line,x [mm],y [mm],z [mm]," + ",".join(f"{q} [{UNITS[q]}]" for q in QUANTITIES),
    ]
    for i in range(xyz.shape[0]):
        vals = ",".join(f"{ev.values[q][i]:.6g}" for q in QUANTITIES)
        rows.append(f"{names[i]},{lines[i]},{xyz[i, 0]:.6g},{xyz[i, 1]:.6g},{xyz[i, 2]:.6g},{vals}")
    (HERE / "lever-reference-fine.csv").write_text("\n".join(rows) + "\n")
    umax = float(np.linalg.norm(res.u, axis=1).max())
    print(f"finer run: {res.mesh.nodes} nodes; max |u| {umax:.6g} mm, max von Mises {res.von_mises.max():.6g} MPa, "
          f"reaction on root {res.reactions['root']['force']}")
    print(f"wrote {HERE / 'lever-reference-fine.csv'} ({xyz.shape[0]} points)")


if __name__ == "__main__":
    main()
