"""Builds lever.step: the demo part, a tapered steel lever arm with a pin hole (our own scenario).

Arm length 150 mm along x, depth 40 mm at the root (x = 0) tapering linearly to 24 mm at the
free end (x = 150), thickness 12 mm (z from 0 to 12), pin hole of radius 5 mm at x = 135.
Run: python scripts/lever/make_lever.py   (writes elastofe/models/lever/lever.step)
"""
from pathlib import Path

import gmsh

L, H0, H1, T, XH, RH = 150.0, 40.0, 24.0, 12.0, 135.0, 5.0


def build(path: Path) -> None:
    gmsh.initialize(readConfigFiles=False)
    gmsh.option.setNumber("General.Terminal", 0)
    occ = gmsh.model.occ
    p = [occ.addPoint(0, -H0 / 2, 0), occ.addPoint(L, -H1 / 2, 0), occ.addPoint(L, H1 / 2, 0),
         occ.addPoint(0, H0 / 2, 0)]
    lines = [occ.addLine(p[i], p[(i + 1) % 4]) for i in range(4)]
    face = occ.addPlaneSurface([occ.addCurveLoop(lines)])
    arm = occ.extrude([(2, face)], 0, 0, T)
    vol = [e for e in arm if e[0] == 3]
    hole = occ.addCylinder(XH, 0, 0, 0, 0, T, RH)
    occ.cut(vol, [(3, hole)])
    occ.synchronize()
    gmsh.write(str(path))
    gmsh.finalize()


if __name__ == "__main__":
    build(Path(__file__).resolve().parents[2] / "elastofe" / "models" / "lever" / "lever.step")
