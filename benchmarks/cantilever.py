"""The benchmark model: a 10 x 1 x 1 cantilever of 10-node tetrahedra (our own scenario).

Steel-like bar in the m-N system, root face x = 0 held in x, y, z, a total shear force of
1 kN pulling down (-y) on the free end face x = 10, spread as a uniform traction.
"""
from __future__ import annotations

import textwrap
from pathlib import Path

L, B, H = 10.0, 1.0, 1.0
E, NU = 200e9, 0.3
FORCE = -1000.0

#: Element sizes giving roughly the named DOF counts (scaled as DOF ~ h^-3 from 20,427 DOF at
#: h = 0.25, 110,664 at h = 0.128 with Gmsh's default 3D algorithm; above ~150k estimated cells the
#: mesher switches to its parallel HXT algorithm, which gave 892,299 DOF at h = 0.0588, hence 1M at
#: 0.0565; the benchmark prints the DOF it got).
SIZES = {"30k": 0.22, "100k": 0.132, "300k": 0.092, "1M": 0.0565}


def write_step(path: Path) -> Path:
    """Write the bar as STEP with Gmsh's OpenCASCADE kernel."""
    from elastofe.geometry import gmsh_session

    with gmsh_session() as gmsh:
        gmsh.model.occ.addBox(0, -B / 2, -H / 2, L, B, H)
        gmsh.model.occ.synchronize()
        gmsh.write(str(path))
    return path


def write_case(folder: Path, h: float, extra: str = "") -> Path:
    """A case file for the bar meshed with element size ``h``."""
    step = folder / "bar.step"
    if not step.exists():
        write_step(step)
    path = folder / f"bar-{h:g}.toml"
    path.write_text(textwrap.dedent(f"""\
        title = "benchmark cantilever 10 x 1 x 1, h = {h:g}"
        units = "m-N"
        [geometry]
        file = "bar.step"
        unit = "m"   # the STEP is written by Gmsh, which labels it mm; its numbers are metres
        [material]
        E = {E}
        nu = {NU}
        [mesh]
        order = 2
        size = {h}
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip = {{ plane = {{ point = [{L}, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        fix = "xyz"
        [[load]]
        region = "tip"
        force = [0, {FORCE}, 0]
        [[point]]
        name = "tip"
        at = [{L}, 0, 0]
        [[line]]
        name = "mid-span"
        start = [{L / 2}, {-B / 2}, 0]
        end = [{L / 2}, {B / 2}, 0]
        samples = 41
        """) + extra)
    return path
