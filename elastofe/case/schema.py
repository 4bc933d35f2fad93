"""The validated case: frozen dataclasses in one consistent unit system.

Every length, force and stress here is already in :attr:`Case.units`; the numerics never see a
unit. Build a :class:`Case` from a file with :func:`elastofe.case.load_case` or in code with the
constructors below (then call :func:`elastofe.case.validate` to get the same checks).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional, Union

import numpy as np

from ..units import SYSTEMS, UnitSystem


def _vec(v) -> tuple[float, float, float]:
    a = np.asarray(v, dtype=float).reshape(3)
    return (float(a[0]), float(a[1]), float(a[2]))


# ----------------------------------------------------------------------------- selectors
@dataclass(frozen=True)
class Plane:
    """Boundary surfaces lying in the plane through ``point`` with normal ``normal``."""

    point: tuple[float, float, float]
    normal: tuple[float, float, float]
    tol: Optional[float] = None


@dataclass(frozen=True)
class Cylinder:
    """Cylindrical boundary surfaces of ``radius`` (optionally with this axis direction / a point on it)."""

    radius: float
    axis: Optional[tuple[float, float, float]] = None
    point: Optional[tuple[float, float, float]] = None
    tol: Optional[float] = None


@dataclass(frozen=True)
class At:
    """The boundary surface(s) on which ``point`` lies."""

    point: tuple[float, float, float]
    tol: Optional[float] = None


@dataclass(frozen=True)
class Box:
    """Boundary surfaces whose bounding box lies inside [min, max]."""

    min: tuple[float, float, float]
    max: tuple[float, float, float]


@dataclass(frozen=True)
class Surfaces:
    """Boundary surfaces by id, as ``elastofe surfaces`` lists them."""

    ids: tuple[int, ...]


@dataclass(frozen=True)
class Group:
    """A named physical group of a mesh file."""

    name: str


Selector = Union[Plane, Cylinder, At, Box, Surfaces, Group]


# ----------------------------------------------------------------------------- case parts
@dataclass(frozen=True)
class Material:
    """Isotropic linear-elastic material.

    Attributes
    ----------
    E : float
        Young's modulus [stress].
    nu : float
        Poisson's ratio [-].
    density : float or None
        Mass density [system density unit]; needed for gravity loads.
    yield_strength : float or None
        Yield strength [stress], used by plausibility checks.
    """

    E: float
    nu: float
    density: Optional[float] = None
    yield_strength: Optional[float] = None

    @property
    def lame(self) -> tuple[float, float]:
        """Lamé parameters (lambda, mu) [stress]."""
        lam = self.E * self.nu / ((1 + self.nu) * (1 - 2 * self.nu))
        mu = self.E / (2 * (1 + self.nu))
        return lam, mu


@dataclass(frozen=True)
class Refinement:
    """A local element size on a region."""

    region: str
    size: float


@dataclass(frozen=True)
class MeshSpec:
    """Meshing parameters: element order (1: 4-node, 2: 10-node), target size, local sizes."""

    order: int = 2
    size: Optional[float] = None
    refine: tuple[Refinement, ...] = ()

    def scaled(self, factor: float) -> "MeshSpec":
        """The same spec with the global and every local size multiplied by ``factor``."""
        return MeshSpec(
            order=self.order,
            size=None if self.size is None else self.size * factor,
            refine=tuple(Refinement(r.region, r.size * factor) for r in self.refine),
        )


@dataclass(frozen=True)
class Geometry:
    """Where the part comes from: a CAD file (STEP/BREP/IGES) or a mesh file (.msh/.vtu/.vtk)."""

    file: Path


@dataclass(frozen=True)
class Support:
    """Held displacement components on a region.

    Attributes
    ----------
    region : str
    fix : str
        Components held, any of ``"x"``, ``"y"``, ``"z"`` (for example ``"xyz"``).
    value : tuple of 3 floats
        Prescribed displacement of the held components [length] (others ignored).
    """

    region: str
    fix: str = "xyz"
    value: tuple[float, float, float] = (0.0, 0.0, 0.0)

    @property
    def components(self) -> tuple[int, ...]:
        """Indices (0, 1, 2) of the held components."""
        return tuple(i for i, c in enumerate("xyz") if c in self.fix)


@dataclass(frozen=True)
class ForceLoad:
    """Total force on a region, applied as the uniform traction F/A [force]."""

    region: str
    force: tuple[float, float, float]


@dataclass(frozen=True)
class PressureLoad:
    """Normal pressure on a region [stress]; positive pushes into the material."""

    region: str
    pressure: float


@dataclass(frozen=True)
class GravityLoad:
    """Acceleration of the whole part in multiples of standard gravity (a (3,) vector)."""

    gravity: tuple[float, float, float]


Load = Union[ForceLoad, PressureLoad, GravityLoad]


@dataclass(frozen=True)
class Probe:
    """A named point at which results are reported [length]."""

    name: str
    at: tuple[float, float, float]


@dataclass(frozen=True)
class Line:
    """A named straight line sampled at ``samples`` evenly spaced points [length]."""

    name: str
    start: tuple[float, float, float]
    end: tuple[float, float, float]
    samples: int = 41


@dataclass(frozen=True)
class SolverSpec:
    """Which linear solver backend to use (``"auto"`` picks the fastest available)."""

    backend: str = "auto"
    tol: float = 1e-10
    maxiter: int = 2000


@dataclass(frozen=True)
class Case:
    """A complete, validated analysis case in one unit system.

    ``source`` is the case file the case came from (None when built in code); relative paths
    were resolved against its folder.
    """

    geometry: Geometry
    material: Material
    title: str = ""
    units: UnitSystem = SYSTEMS["mm-N"]
    mesh: MeshSpec = MeshSpec()
    regions: dict = field(default_factory=dict)  # name -> Selector
    supports: tuple[Support, ...] = ()
    loads: tuple[Load, ...] = ()
    points: tuple[Probe, ...] = ()
    lines: tuple[Line, ...] = ()
    solver: SolverSpec = SolverSpec()
    source: Optional[Path] = None
    reference: Optional["ReferenceSpec"] = None  # [reference]: another solver's results (case/reference.py)

    def with_mesh(self, mesh: MeshSpec) -> "Case":
        """The same case with other meshing parameters."""
        from dataclasses import replace

        return replace(self, mesh=mesh)
