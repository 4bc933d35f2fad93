"""Builds bracket.step: the quick start's part, an aluminium angle bracket of our own design.

A base plate 60 x 40 x 6 mm (x 0..60, y 0..40, z 0..6) with two bolt holes of radius 4.5 mm at
x = 15 and x = 45, y = 25; an upright 60 x 6 x 50 mm (y 0..6, z 6..56) with a load hole of radius
5 mm at x = 30, z = 45; a fillet of radius 4 mm where the upright meets the base.
Run: python docs/quickstart/make_bracket.py   (needs gmsh: pip install gmsh)
"""
from pathlib import Path

import gmsh


def build(path: Path) -> None:
    gmsh.initialize(readConfigFiles=False)
    gmsh.option.setNumber("General.Terminal", 0)
    occ = gmsh.model.occ
    base = occ.addBox(0, 0, 0, 60, 40, 6)
    upright = occ.addBox(0, 0, 6, 60, 6, 50)
    body, _ = occ.fuse([(3, base)], [(3, upright)])
    occ.synchronize()
    # The inner edge where the upright meets the base: along x at y = 6, z = 6.
    edges = gmsh.model.getEntitiesInBoundingBox(-1, 5.9, 5.9, 61, 6.1, 6.1, dim=1)
    body = occ.fillet([body[0][1]], [e[1] for e in edges], [4.0])
    holes = [occ.addCylinder(x, 25, -1, 0, 0, 8, 4.5) for x in (15.0, 45.0)]
    holes.append(occ.addCylinder(30, -1, 45, 0, 8, 0, 5.0))
    occ.cut(body, [(3, h) for h in holes])
    occ.synchronize()
    gmsh.write(str(path))
    gmsh.finalize()


if __name__ == "__main__":
    build(Path(__file__).with_name("bracket.step"))
