"""Frozen records passed between the stages of a run: the prepared model and the run's results.

Built once with keywords and never changed afterwards (``dataclasses.replace`` makes a changed
copy). Every array is in the case's consistent unit system (see :mod:`elastofe.units`); shapes use
``n`` nodes, ``m`` cells, ``k`` load cases.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

import numpy as np

from .bc import AppliedLoad, Foundation, Held
from .bodies import MaterialMap
from .case.schema import Case
from .mesh import BodyNodes, Mesh, SurfaceInfo

__all__ = ["LINE_COLUMNS", "line_header", "Model", "LineResult", "CaseResult", "Modes", "BucklingModes",
           "NearRegions", "Check", "WholeModel", "Result", "STATUSES"]

#: Status words of a check in increasing severity. ``skip``: the check does not apply or has too
#: little information to judge (its ``why`` says which).
STATUSES = ("pass", "skip", "warn", "fail")


@dataclass(frozen=True)
class Model:
    """The model as prepared for the solve: mesh, regions, supports and loads.

    Attributes
    ----------
    mesh : Mesh
    catalogue : list of SurfaceInfo
        The boundary surfaces (kind, area, fitted plane or cylinder).
    region_ids : {region name: [surface ids]}
    held : Held
        Held DOFs (in their nodal frames) and prescribed values.
    foundations : list of Foundation
        Elastic supports, each with its surface stiffness ``K (3n, 3n)``.
    loads : list of AppliedLoad
        Every load's nodal force vector ``f (3n,)`` [force] and resultants.
    groups : list of (name, load indices)
        The load cases (one unnamed case of every load when the case names none).
    F : (3n, k) [force]
        Load vector of each load case.
    temperatures : list of (n,) [K] or None
        Nodal temperature change of each load case.
    materials : MaterialMap or None
        The bodies and the material of each (None: one material, found again where needed).
    """

    mesh: Mesh
    catalogue: list[SurfaceInfo]
    region_ids: dict[str, list[int]]
    held: Held
    foundations: list[Foundation]
    loads: list[AppliedLoad]
    groups: list[tuple[str, tuple[int, ...]]]
    F: np.ndarray
    temperatures: list[Optional[np.ndarray]]
    materials: Optional[MaterialMap] = None
    #: What each region matched (:func:`elastofe.regions.describe_matches`).
    matches: dict = field(default_factory=dict)
    #: The element formulation: "displacement" or "mixed" (:func:`elastofe.fem.mixed.choose_formulation`).
    formulation: str = "displacement"
    #: Warnings about the inputs found while preparing (a region matching several patches, a load
    #: on held DOFs, a line partly outside the part).
    warnings: tuple = ()


#: Columns of a line's table (the line CSV and :meth:`LineResult.to_frame`) and the kind of unit of
#: each; ``s`` is the distance from the line's start.
LINE_COLUMNS = (("s", "length"), ("x", "length"), ("y", "length"), ("z", "length"),
                ("ux", "length"), ("uy", "length"), ("uz", "length"),
                ("sxx", "stress"), ("syy", "stress"), ("szz", "stress"),
                ("sxy", "stress"), ("syz", "stress"), ("sxz", "stress"), ("von_mises", "stress"))


def line_header(labels: Optional[dict] = None) -> list[str]:
    """Column names of a line's table in the inputs' ``name [unit]`` form (``x [mm]``, ``sxx [MPa]``);
    ``labels`` are the case's unit labels (``UnitSystem.labels``); without them the bare names."""
    if labels is None:
        return [name for name, _ in LINE_COLUMNS]
    return [f"{name} [{labels[kind]}]" for name, kind in LINE_COLUMNS]


@dataclass(frozen=True)
class LineResult:
    """Samples along a line: ``s (k,)`` distance from start [length], ``xyz (k, 3)``, ``u (k, 3)``
    [length], ``stress (k, 6)`` and ``von_mises (k,)`` [stress]; NaN where a sample lies outside the
    part (``outside`` counts them). For a part of several bodies, ``body (k,)`` is the body whose
    stress each sample reports (0 outside the part) and ``on_interface (k,)`` says which samples
    lie on an interface between bodies (None for one body)."""

    name: str
    s: np.ndarray
    xyz: np.ndarray
    u: np.ndarray
    stress: np.ndarray
    von_mises: np.ndarray
    outside: int
    body: Optional[np.ndarray] = None
    on_interface: Optional[np.ndarray] = None
    #: The case's unit labels ({"length": "mm", "stress": "MPa", ...}) for the table's column names.
    units: Optional[dict] = None

    def table(self) -> np.ndarray:
        """The samples as one array ``(k, 14)`` in the order of :data:`LINE_COLUMNS`."""
        return np.column_stack([self.s, self.xyz, self.u, self.stress, self.von_mises])

    def to_frame(self, labels: Optional[dict] = None):
        """The samples as a ``pandas.DataFrame``, one row per sample, columns :func:`line_header`
        (``s [mm]``, ``x [mm]``, ..., ``von_mises [MPa]`` with the case's unit ``labels``; bare
        names without them). Needs pandas (``pip install pandas``, or the ``notebook`` extra)."""
        try:
            import pandas as pd
        except ImportError:
            raise ImportError("tables of line samples need pandas: pip install pandas "
                              "(or pip install 'elastofe[notebook]')") from None
        frame = pd.DataFrame(self.table(), columns=line_header(labels if labels is not None else self.units))
        frame.attrs["line"] = self.name
        return frame

    # A line result reads as its table too (as a pandas DataFrame would): ``line["sxx [MPa]"]``,
    # ``line.columns``, ``line.plot(...)``; the arrays above stay its own attributes.
    def __getitem__(self, column):
        return self.to_frame()[column]

    def __getattr__(self, name: str):
        if name.startswith("_"):
            raise AttributeError(name)
        return getattr(self.to_frame(), name)

    def _repr_html_(self) -> str:
        return self.to_frame()._repr_html_()

    def __repr__(self) -> str:
        return (f"<LineResult {self.name!r}: {self.s.shape[0]} samples over {float(self.s[-1]):.4g}"
                f"{f', {self.outside} outside the part' if self.outside else ''}>")


@dataclass(frozen=True)
class CaseResult:
    """Results of one load case or combination.

    ``kind`` is ``"load case"`` or ``"combination"``; ``factors`` {load case: factor} (a load case is
    itself with factor 1); ``loads`` the indices of its loads in ``case.loads``. Arrays: ``u (n, 3)``
    [length]; ``stress (n, 6)`` (xx, yy, zz, xy, yz, xz), ``von_mises (n,)``, ``principal (n, 3)``
    largest first [stress]; ``temperature (n,)`` [K] or None; ``reaction_nodal (n, 3)`` [force];
    ``reactions`` {support region or point support name: {"force": (3,), "moment": (3,)}} about
    the origin (and ``"moment_about"`` about a given point); ``points`` {name: dict}; ``lines``
    {name: LineResult}. ``body_stress (q, 6)`` [stress] is the stress at the nodes split at the
    interfaces between bodies (:class:`~elastofe.mesh.BodyNodes`), averaged within each body;
    ``stress`` takes at an interface node the side with the larger von Mises (for one body the
    two are the same array).
    """

    name: str
    kind: str
    factors: dict[str, float]
    loads: tuple[int, ...]
    u: np.ndarray
    stress: np.ndarray
    von_mises: np.ndarray
    principal: np.ndarray
    temperature: Optional[np.ndarray]
    reaction_nodal: np.ndarray
    reactions: dict
    applied_force: np.ndarray
    applied_moment: np.ndarray
    equilibrium_error: float
    moment_equilibrium_error: float
    strain_energy: float
    points: dict = field(default_factory=dict)
    lines: dict = field(default_factory=dict)
    #: {"value", "at", "nodes", "node"}: largest von Mises more than two element sizes from every
    #: support and load (value None when no node lies that far).
    peak_away: dict = field(default_factory=dict)
    body_stress: Optional[np.ndarray] = None

    @property
    def stress_by_body(self) -> np.ndarray:
        """``(q, 6)`` stress at the split nodes (``stress`` itself for a part of one body)."""
        return self.stress if self.body_stress is None else self.body_stress


@dataclass(frozen=True)
class Modes:
    """Natural modes of the supported part (``[modes]``).

    ``frequencies (p,)`` [Hz] ascending (rigid-body modes of a free part at 0); ``omega2 (p,)``
    [1/s²] as solved; ``shapes (p, n, 3)`` scaled to a largest displacement of 1;
    ``effective_mass (p, 3)`` effective modal mass fractions along x, y, z of the mass that can move
    (``moving_mass (3,)`` [mass]) and ``cumulative (p, 3)`` their running sums; ``rigid`` a name per
    mode for rigid-body modes (None for elastic ones).
    """

    frequencies: np.ndarray
    omega2: np.ndarray
    shapes: np.ndarray
    effective_mass: np.ndarray
    cumulative: np.ndarray
    moving_mass: np.ndarray
    rigid: tuple
    method: str
    info: dict = field(default_factory=dict)


@dataclass(frozen=True)
class BucklingModes:
    """Linear buckling of a load case (``[buckling]``): ``factors (p,)`` ascending load factors (the
    loads times a factor buckle the part), ``shapes (p, n, 3)`` scaled to a largest displacement of
    1, the ``load_case`` scaled (None: the case's loads), ``note`` when fewer factors exist than asked."""

    factors: np.ndarray
    shapes: np.ndarray
    load_case: Optional[str]
    method: str
    note: Optional[str] = None
    info: dict = field(default_factory=dict)


@dataclass(frozen=True)
class NearRegions:
    """How far each node lies from the idealised supports and loads.

    ``distance (n,)`` [length] to the nearest node of a support or load region (inf without any),
    ``which (n,)`` its index into ``names`` (-1 without any), ``kinds`` {region: "support" | "load"},
    ``local_size (n,)`` [length] mean corner-edge length of the elements around each node.
    """

    distance: np.ndarray
    which: np.ndarray
    names: list[str]
    kinds: dict[str, str]
    local_size: np.ndarray


@dataclass(frozen=True)
class Check:
    """One plausibility check: ``status`` in :data:`STATUSES`, ``why`` a sentence for a person,
    ``value``/``limit`` the number tested and its threshold where there is one, ``details`` extra data."""

    name: str
    status: str
    why: str
    value: Optional[float] = None
    limit: Optional[float] = None
    details: dict = field(default_factory=dict)


@dataclass(frozen=True)
class WholeModel:
    """What stands for the whole model when a :class:`Result` keeps only part of the mesh.

    On rank 0 of a distributed run no process holds every node's fields: ``Result.mesh`` is the
    *kept part*, made of every boundary face and the cells around the nodes that the summary and
    the checks look at (each load case's and combination's largest displacement and von Mises,
    its peak away from supports and loads, the envelope's peak, and the cells holding the beams'
    load points), and the node arrays of the Result and of its CaseResults cover those nodes
    only (``Result.near`` too). Everything that needs every node or cell is reduced across the
    ranks into this record. ``None`` in a single-process run, whose ``Result.mesh`` is the mesh.

    Attributes
    ----------
    nodes, elements : counts of the whole mesh.
    min_quality : smallest element quality of the whole mesh.
    pieces : summary.json's ``geometry.pieces`` entries (the face-connected pieces).
    element_shape : :func:`elastofe.post.checks.element_shape_figures` over every cell.
    nodes_above_yield : nodes above the yield strength, summed over the load cases and
        combinations (None without a yield strength).
    node_ids : (p,) the whole mesh's number of each node of ``Result.mesh``.
    vtu : the whole mesh and its fields gathered for result.vtu (small models): ``(points (n, 3),
        cells (m, k), point_data, cell_data)``, or None.
    vtu_pieces : the field pieces the ranks wrote (large models): ``{"files": [(staged path,
        final name)], "point_data": [(name, VTK type, components)], "cell_data": [...]}``, or None.
    """

    nodes: int
    elements: int
    min_quality: float
    pieces: list
    element_shape: dict
    nodes_above_yield: Optional[int]
    node_ids: np.ndarray
    vtu: Optional[tuple] = None
    vtu_pieces: Optional[dict] = None
    #: The bodies of the whole mesh and their material (:class:`~elastofe.bodies.MaterialMap`).
    materials: Optional[object] = None


@dataclass(frozen=True)
class Result:
    """Everything a run computed, as arrays in the case's unit system.

    The top-level fields describe the first load case (the only one when the case names none);
    ``load_cases`` holds every load case and combination. In a distributed run (``whole`` set)
    ``mesh`` and every node or cell array cover the kept part of the mesh only (see
    :class:`WholeModel`); ``nodes`` and ``dofs`` are the whole model's.

    Attributes
    ----------
    u : (n, 3) nodal displacements [length].
    stress : (n, 6) nodally averaged stress (xx, yy, zz, xy, yz, xz) [stress].
    von_mises : (n,) ; principal : (n, 3) largest first [stress].
    element_stress : (m, nodes per cell, 6) unaveraged stress at each element's nodes [stress].
    quality : (m,) element shape quality in (0, 1].
    reaction_nodal : (n, 3) reaction forces [force].
    reactions : {support region or point support name: {"force": (3,), "moment": (3,)}} about the origin.
    applied_force, applied_moment : (3,) resultants of the applied loads [force], [moment].
    equilibrium_error : |Σ reactions + Σ loads| / force scale.
    moment_equilibrium_error : |Σ reaction moments + Σ load moments| / (force scale x part size).
    strain_energy : ½ uᵀ K u [energy].
    residual : largest relative residual of the solve.
    temperature : (n,) [K] nodal temperature change of the first load case, or None.
    points : {name: {"at", "displacement", "von_mises", "stress", "principal"}}.
    lines : {name: LineResult}.
    load_case : the first load case's name (None when the case names none).
    load_cases : {name: CaseResult} of every load case and combination (empty when none are named).
    envelope : {"von_mises": (n,), "governing": (n,) index into "names", "names": [...]} or None.
    linearized : {line: (LinearizedStress or None, info dict)}.
    estimates : {beam name: dict} beam-theory estimates next to the FE values.
    near : NearRegions, distances of the nodes to the supports and loads.
    peak_away : {"value", "at", "nodes"} largest von Mises more than two local element sizes
        from every support and load (value None when no node lies that far).
    checks : tuple of Check, the plausibility checks in order.
    """

    case: Case
    mesh: Mesh
    catalogue: list[SurfaceInfo]
    region_ids: dict[str, list[int]]
    held: Held
    loads: list[AppliedLoad]
    u: np.ndarray
    stress: np.ndarray
    von_mises: np.ndarray
    principal: np.ndarray
    element_stress: np.ndarray
    quality: np.ndarray
    reaction_nodal: np.ndarray
    reactions: dict
    applied_force: np.ndarray
    applied_moment: np.ndarray
    equilibrium_error: float
    strain_energy: float
    residual: float
    backend: str
    points: dict = field(default_factory=dict)
    lines: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    #: Backend details for summary.json's "solver" block (ranks, iterations, ...); may be empty.
    solver_info: dict = field(default_factory=dict)
    #: Estimated peak memory of assembly and solve [bytes] (see :mod:`elastofe.resources`).
    memory_estimate: Optional[float] = None
    temperature: Optional[np.ndarray] = None
    moment_equilibrium_error: float = 0.0
    load_case: Optional[str] = None
    load_cases: dict = field(default_factory=dict)
    envelope: Optional[dict] = None
    linearized: dict = field(default_factory=dict)
    estimates: dict = field(default_factory=dict)
    near: Optional[NearRegions] = None
    peak_away: dict = field(default_factory=dict)
    checks: tuple = ()
    #: The von Mises peak that governs (see :func:`elastofe.post.checks.governing_peak`):
    #: {"value", "at", "basis", "load_case", "why", "overall", "away"}.
    governing: dict = field(default_factory=dict)
    #: The element formulation that ran: "displacement" or "mixed" (nearly incompressible material).
    formulation: str = "displacement"
    #: Natural modes (``[modes]``) and buckling factors (``[buckling]``), None when not asked for.
    modes: Optional[Modes] = None
    buckling: Optional[BucklingModes] = None
    #: What each region matched (:func:`elastofe.regions.describe_matches`).
    matches: dict = field(default_factory=dict)
    #: Warnings about the inputs (regions, loads on held DOFs, lines partly outside the part).
    warnings: tuple = ()
    #: Peak resident memory of the run's process(es) [MiB] when the run finished.
    peak_memory_mb: Optional[float] = None
    #: The whole model's figures when ``mesh`` is only the kept part (a distributed run), else None.
    whole: Optional[WholeModel] = None

    @property
    def nodes(self) -> int:
        """Number of nodes of the whole mesh."""
        return self.whole.nodes if self.whole is not None else self.mesh.nodes

    #: The bodies and the material of each (:class:`~elastofe.bodies.MaterialMap`).
    materials: Optional[MaterialMap] = None
    #: The nodes split at the interfaces between bodies, where ``body_stress`` lives.
    body_nodes: Optional[BodyNodes] = None
    #: ``(q, 6)`` [stress] the first load case's stress averaged within each body (None: ``stress``).
    body_stress: Optional[np.ndarray] = None

    @property
    def stress_by_body(self) -> np.ndarray:
        """``(q, 6)`` stress at the split nodes (``stress`` itself for a part of one body)."""
        return self.stress if self.body_stress is None else self.body_stress

    @property
    def dofs(self) -> int:
        """Number of degrees of freedom (3 per node)."""
        return 3 * self.nodes

    def verdicts(self) -> dict[str, int]:
        """How many plausibility checks ended in each status: ``{"pass": 5, "warn": 1, ...}``."""
        out: dict[str, int] = {}
        for c in self.checks:
            out[c.status] = out.get(c.status, 0) + 1
        return {s: out[s] for s in STATUSES if s in out}

    def __repr__(self) -> str:
        title = self.case.title or "(untitled)"
        lab = self.case.units.labels
        text = (f"<elastofe {type(self).__name__} {title!r}: {self.nodes:,} nodes, {self.dofs:,} DOF, "
                f"max |u| {float(np.linalg.norm(self.u, axis=1).max()):.4g} {lab['length']}, "
                f"max von Mises {float(np.max(self.von_mises)):.4g} {lab['stress']}")
        gov = self.governing or {}
        if gov.get("value") is not None and gov.get("basis") == "away":
            text += f" (governing, away from supports and loads: {float(gov['value']):.4g} {lab['stress']})"
        counts = self.verdicts()
        if counts:
            text += "; checks: " + ", ".join(f"{n} {s}" for s, n in counts.items())
        return text + ">"
