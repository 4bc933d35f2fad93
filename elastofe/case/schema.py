"""The validated case: frozen dataclasses in one consistent unit system.

Every length, force and stress here is already in :attr:`Case.units`; the numerics never see a
unit. Build a :class:`Case` from a file with :func:`elastofe.case.load_case` or in code with the
constructors below (then call :func:`elastofe.case.validate` to get the same checks).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Optional, Union

import numpy as np

from ..units import SYSTEMS, UnitSystem

if TYPE_CHECKING:  # the [reference] section's record; imported for the annotation only
    from .reference import ReferenceSpec


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


@dataclass(frozen=True)
class Edge:
    """Boundary nodes along a line, for supports only (a line support such as NAFEMS LE10's EE').

    Either a straight segment ``start``..``end`` (nodes within ``tol`` of it), or the curve where a
    plane cuts another region: nodes of region ``region`` within ``tol`` of the plane through
    ``point`` with ``normal``.
    """

    start: Optional[tuple[float, float, float]] = None
    end: Optional[tuple[float, float, float]] = None
    region: Optional[str] = None
    point: Optional[tuple[float, float, float]] = None
    normal: Optional[tuple[float, float, float]] = None
    tol: Optional[float] = None


Selector = Union[Plane, Cylinder, At, Box, Surfaces, Group, Edge]


# ----------------------------------------------------------------------------- case parts
@dataclass(frozen=True)
class Material:
    """Isotropic linear-elastic material.

    One ``[material]`` table, or one entry of ``[[material]]`` with the bodies it applies to
    (``bodies``, ``at`` or ``groups``; a single material without them applies to every body).

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
    expansion : float or None
        Coefficient of linear thermal expansion [1/K]; needed for temperature loads.
    """

    E: float
    nu: float
    density: Optional[float] = None
    yield_strength: Optional[float] = None
    #: Coefficient of thermal expansion [1/K]; needed for temperature loads.
    expansion: Optional[float] = None
    #: Name of the material (``[[material]] name``), as results and messages call it.
    name: str = "material"
    #: The bodies it applies to, by id as ``elastofe surfaces`` lists them (``bodies = [...]``).
    bodies: tuple[int, ...] = ()
    #: The bodies it applies to, by a point [length] inside each (``at = [[x, y, z], ...]``).
    at: tuple[tuple[float, float, float], ...] = ()
    #: The bodies it applies to, by volume physical groups of a mesh file (``groups = [...]``).
    groups: tuple[str, ...] = ()
    #: Key path of its table in the case file (``material`` or ``material[2]``), for messages.
    key: str = field(default="material", compare=False)

    @property
    def selects(self) -> bool:
        """Whether the material names its bodies (else, as the only material, it takes every body)."""
        return bool(self.bodies or self.at or self.groups)

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

    def scaled(self, factor: float) -> MeshSpec:
        """The same spec with the global and every local size multiplied by ``factor``."""
        return MeshSpec(
            order=self.order,
            size=None if self.size is None else self.size * factor,
            refine=tuple(Refinement(r.region, r.size * factor) for r in self.refine),
        )


@dataclass(frozen=True)
class Geometry:
    """Where the part comes from: a CAD file (STEP/BREP/IGES) or a mesh file (.msh/.vtu/.vtk/.xdmf/.xmf).

    ``unit`` (``geometry.unit``) is the length unit the file's numbers are in ("mm", "in", "m",
    ...), overriding the unit a STEP/IGES file states; None: the file's own unit, or for files
    that state none (BREP, meshes) the case's length unit.
    """

    file: Path
    unit: Optional[str] = None


@dataclass(frozen=True)
class Support:
    """Held displacement components on a region, or at one node (a point support).

    Attributes
    ----------
    region : str
        The region held; empty for a point support.
    fix : str
        Components held, in one frame: global ``x``, ``y``, ``z`` (for example ``"xyz"``); ``n`` the
        normal of a planar region (sliding on the plane, a symmetry plane); or ``r``, ``t``, ``a``
        radial, tangential and axial in the cylindrical frame of a cylindrical region.
    value : tuple of 3 floats
        Prescribed displacement of the held components [length] (others ignored): (x, y, z) for
        the global frame, (r, t, a) for the cylindrical frame, (n, -, -) for the normal frame.
    moment_about : tuple of 3 floats or None
        A point [length] about which the reaction moment is reported as well as about the origin.
    at : tuple of 3 floats or None
        A point support: the point [length] whose node (a vertex, or the nearest node within
        ``tol``) is held; global components only.
    name : str or None
        The point support's name in reactions and results (default ``point support N``).
    tol : float or None
        How far [length] the held node may lie from ``at`` (default: one local element size).
    """

    region: str
    fix: str = "xyz"
    value: tuple[float, float, float] = (0.0, 0.0, 0.0)
    moment_about: Optional[tuple[float, float, float]] = None
    at: Optional[tuple[float, float, float]] = None
    name: Optional[str] = None
    tol: Optional[float] = None

    @property
    def label(self) -> str:
        """What reactions and results call the support: its region, or a point support's name."""
        return self.region if self.at is None else (self.name or "point support")

    @property
    def frame(self) -> str:
        """``"global"``, ``"normal"`` or ``"cylindrical"``, from the letters of :attr:`fix`."""
        if set(self.fix) <= set("xyz"):
            return "global"
        if self.fix == "n":
            return "normal"
        return "cylindrical"

    @property
    def components(self) -> tuple[int, ...]:
        """Indices (0, 1, 2) of the held components in the support's frame."""
        letters = {"global": "xyz", "normal": "n", "cylindrical": "rta"}[self.frame]
        return tuple(i for i, c in enumerate(letters) if c in self.fix)


@dataclass(frozen=True)
class ElasticSupport:
    """A foundation of given stiffness per unit area under a region (an elastic bedding).

    The surface traction is ``t = -(k_n (u.n) n + k_t (u - (u.n) n))``.

    Attributes
    ----------
    region : str
    normal : float
        Normal stiffness per unit area [force/length^3].
    tangential : float
        Tangential stiffness per unit area [force/length^3].
    moment_about : tuple of 3 floats or None
        Extra point for the reported reaction moment [length].
    """

    region: str
    normal: float
    tangential: float = 0.0
    moment_about: Optional[tuple[float, float, float]] = None
    # Compatibility with code that reads held components of every support.
    fix: str = ""
    value: tuple[float, float, float] = (0.0, 0.0, 0.0)
    frame: str = "elastic"
    components: tuple[int, ...] = ()
    at: None = None

    @property
    def label(self) -> str:
        """What reactions and results call the support: its region."""
        return self.region


@dataclass(frozen=True)
class ForceLoad:
    """Total force on a region [force].

    ``distribution = "uniform"`` applies it as the uniform traction F/A; ``"bearing"`` (a pin or
    bolt in a cylindrical hole) as a radial pressure varying as the cosine of the angle from the
    load direction over the half of the hole facing the load, zero on the other half, scaled so
    that its resultant equals the force exactly.
    """

    region: str
    force: tuple[float, float, float]
    distribution: str = "uniform"


@dataclass(frozen=True)
class PressureLoad:
    """Normal pressure on a region [stress]; positive pushes into the material.

    With ``gradient`` the pressure varies linearly, ``p(x) = pressure + gradient . (x - origin)``
    (a hydrostatic head: ``gradient = -rho g`` along the vertical); ``clip`` sets negative values to
    zero (above a free liquid surface).
    """

    region: str
    pressure: float
    gradient: Optional[tuple[float, float, float]] = None
    origin: tuple[float, float, float] = (0.0, 0.0, 0.0)
    clip: bool = False


@dataclass(frozen=True)
class GravityLoad:
    """Acceleration of the whole part in multiples of standard gravity (a (3,) vector)."""

    gravity: tuple[float, float, float]


@dataclass(frozen=True)
class SpreadLoad:
    """Force [force] and moment [force*length] at a point ``at`` [length], possibly off the part,
    passed from that point to a region, spread by nodal area (nodal forces weighted by nodal area
    whose resultant force and moment about ``at`` equal the given ones; no stiffness added)."""

    region: str
    at: tuple[float, float, float]
    force: tuple[float, float, float] = (0.0, 0.0, 0.0)
    moment: tuple[float, float, float] = (0.0, 0.0, 0.0)


@dataclass(frozen=True)
class TemperatureLoad:
    """A temperature change of the whole part [K], with ``material.expansion``.

    Exactly one of ``delta`` (uniform), ``formula`` (a formula in x, y, z, see
    :mod:`elastofe.formula`) or ``file`` (point data in a CSV or VTU file, interpolated to the nodes;
    ``field`` names the column or point array) is set. ``reference`` is subtracted from formula and
    file values.
    """

    delta: Optional[float] = None
    formula: Optional[str] = None
    file: Optional[Path] = None
    field: Optional[str] = None
    reference: float = 0.0


Load = Union[ForceLoad, PressureLoad, GravityLoad, SpreadLoad, TemperatureLoad]


@dataclass(frozen=True)
class LoadCase:
    """A named load case: indices into :attr:`Case.loads` (counted from 0)."""

    name: str
    loads: tuple[int, ...]


@dataclass(frozen=True)
class Combination:
    """A factored sum of load cases: ``factors`` as ((load case name, factor), ...)."""

    name: str
    factors: tuple[tuple[str, float], ...]


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
class BeamSection:
    """The idealised beam's cross-section at one station.

    Attributes
    ----------
    at : float
        Distance of the station from the held end along the beam axis [length].
    kind : {"rectangle", "circle", "polygon"}
    dims : tuple
        rectangle: ``(width, depth)``; circle: ``(diameter, bore)`` (bore 0 for a solid round);
        polygon: vertices ``((y, z), ...)`` in the section frame (y along the depth direction,
        z = axis x depth), measured from the beam axis [length].
    """

    at: float
    kind: str
    dims: tuple


@dataclass(frozen=True)
class Beam:
    """An idealised cantilever whose beam-theory estimates each run compares with the FE values.

    Attributes
    ----------
    name : str
    held_end, load_point : (3,) tuples
        The axis runs from the held end (station 0) to the loaded point [length].
    sections : tuple of BeamSection
        Two or more stations in increasing order, linear between them (dimensions, or vertices of
        polygons with equal vertex counts, interpolated).
    force : (3,) tuple or None
        The force at the loaded point [force]; None: taken from ``load``.
    load : str or int or None
        The region name (or 1-based index) of the ``[[load]]`` whose force is used.
    depth_direction : (3,) tuple or None
        The section's depth direction (the y of M·y/I); default: the force's part across the axis.
    points, lines : tuples of str
        Names of the ``[[point]]`` and ``[[line]]`` entries the estimates are compared with.
    """

    name: str
    held_end: tuple[float, float, float]
    load_point: tuple[float, float, float]
    sections: tuple[BeamSection, ...]
    force: Optional[tuple[float, float, float]] = None
    load: Optional[Union[str, int]] = None
    depth_direction: Optional[tuple[float, float, float]] = None
    points: tuple[str, ...] = ()
    lines: tuple[str, ...] = ()


@dataclass(frozen=True)
class ModesSpec:
    """``[modes]``: natural frequencies and mode shapes.

    ``count`` modes (zero-frequency rigid-body modes of a free part included); ``above`` [Hz] an
    excitation frequency the first elastic mode must lie above (a check with a margin), or None.
    """

    count: int = 6
    above: Optional[float] = None


@dataclass(frozen=True)
class BucklingSpec:
    """``[buckling]``: linear buckling load factors of a load case (or combination).

    ``count`` factors; ``load_case`` the load case or combination whose loads are scaled (None:
    the case's loads, or its first load case); ``above`` the factor the first one must exceed, or None.
    """

    count: int = 3
    load_case: Optional[str] = None
    above: Optional[float] = None


@dataclass(frozen=True)
class SolverSpec:
    """Which linear solver backend to use (``"auto"`` picks by size and memory).

    ``tol`` is the relative accuracy of the stress field (the energy norm of the displacement error)
    at which the iterative backend stops; direct backends are exact to round-off.
    """

    backend: str = "auto"
    tol: float = 1e-6
    maxiter: int = 2000


@dataclass(frozen=True)
class Case:
    """A complete, validated analysis case in one unit system.

    ``source`` is the case file the case came from (None when built in code); relative paths
    were resolved against its folder.
    """

    geometry: Geometry
    #: The first (for a part of one material, the only) material.
    material: Material
    title: str = ""
    units: UnitSystem = SYSTEMS["mm-N"]
    mesh: MeshSpec = MeshSpec()
    regions: dict = field(default_factory=dict)  # name -> Selector
    #: Regions allowed to match several separate patches (``several = true`` under [regions]).
    several_regions: frozenset = frozenset()
    supports: tuple[Support, ...] = ()
    loads: tuple[Load, ...] = ()
    points: tuple[Probe, ...] = ()
    lines: tuple[Line, ...] = ()
    solver: SolverSpec = SolverSpec()
    source: Optional[Path] = None
    #: Named load cases; empty means one implicit load case made of every load.
    load_cases: tuple[LoadCase, ...] = ()
    combinations: tuple[Combination, ...] = ()
    reference: Optional[ReferenceSpec] = None  # [reference]: another solver's results (case/reference.py)
    beams: tuple[Beam, ...] = ()
    modes: Optional[ModesSpec] = None
    buckling: Optional[BucklingSpec] = None
    #: The materials after the first of a part of several (``[[material]]``); see :attr:`materials`.
    more_materials: tuple[Material, ...] = ()

    @property
    def materials(self) -> tuple[Material, ...]:
        """Every material, in the order of the case file: :attr:`material` first."""
        return (self.material,) + tuple(self.more_materials)

    def with_mesh(self, mesh: MeshSpec) -> Case:
        """The same case with other meshing parameters."""
        from dataclasses import replace

        return replace(self, mesh=mesh)
