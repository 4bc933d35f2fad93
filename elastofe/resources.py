"""Memory estimate of a run and the check that refuses a run the machine cannot hold.

A run that needs more memory than the machine has is killed part-way by the operating system,
often after minutes of meshing and with nothing said. :func:`check_memory` estimates the peak from
the DOF count, the element type and the solver backend before anything large is allocated, and
raises :class:`~elastofe.errors.ModelError` with the estimate and what to change.

The coefficients were measured on this project's own meshes (Gmsh, uniform size ``h``):

- elements per volume: 4.6-5.0 / h³ (cube and the demo lever, 37k-111k elements);
- nodes per volume: 0.9 / h³ for 4-node, 6.8-7.8 / h³ for 10-node meshes;
- stiffness non-zeros per DOF: 37 (4-node) and 77 (10-node) at 1k-8k nodes, rising slowly with size,
  taken here as 45 and 81 (interior nodes dominate large meshes);
- direct factorisation: MKL PARDISO in SPD mode peaked at 0.8, 3.0 and 14.0 GiB at 100k, 300k and
  1M DOF of a 10-node mesh (``/work/shared/reference/solvers.md``), i.e. about 150 B x DOF^(4/3);
  SuperLU took 2.4 x as much at 100k DOF.

Estimates are deliberately rounded up: a compact part fills its factor more than the slender
cantilever those figures came from.
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from .errors import CaseError, ModelError

#: Environment variable that overrides the memory available to a run: a number of bytes or a
#: string with a unit ("2 GiB", "500 MB"); "off" disables the check.
LIMIT_ENV = "ELASTOFE_MEMORY_LIMIT"

_NNZ_PER_DOF = {4: 45.0, 10: 81.0}
_NODES_PER_H3 = {4: 0.9, 10: 7.8}
_CELLS_PER_H3 = 5.0
#: Factor memory [bytes] = coefficient x DOF^(4/3), per direct backend (10-node meshes).
_FACTOR_COEFF = {"pardiso": 150.0, "scipy": 375.0}
#: 4-node meshes have sparser graphs: smaller separators and less fill per DOF.
_FACTOR_ORDER1 = 0.6

GiB = float(1 << 30)


@dataclass(frozen=True)
class MemoryEstimate:
    """Estimated peak memory of the numerical stages [bytes] and its parts."""

    dofs: int
    nodes_per_element: int
    backend: str
    assembly: float
    matrix: float
    solver: float
    recovery: float
    elements: int = 0

    @property
    def peak(self) -> float:
        """The larger of assembly and solve (assembly triplets are freed before the solve)."""
        return max(self.assembly + self.matrix, 2.0 * self.matrix + self.solver, self.matrix + self.recovery)

    def describe(self) -> str:
        return (f"about {self.peak / GiB:.1f} GiB for {self.dofs:,} DOF of "
                f"{self.nodes_per_element}-node tetrahedra with the {self.backend} solver")


def estimate(dofs: int, elements: int, nodes_per_element: int, backend: str) -> MemoryEstimate:
    """Estimate the memory of assembly, solve and recovery.

    Parameters
    ----------
    dofs : int
        Number of unknowns (3 x nodes).
    elements : int
        Number of tetrahedra.
    nodes_per_element : int
        4 or 10.
    backend : str
        Solver backend name; names other than the direct ones are treated as iterative (matrix,
        preconditioner hierarchy and a few vectors).
    """
    k = int(nodes_per_element)
    ek = (3 * k) ** 2
    # COO values (8 B) and row/column indices (4 B each), then the CSR copy made from them.
    assembly = elements * ek * (8.0 + 8.0 + 12.0)
    nnz = _NNZ_PER_DOF.get(k, 81.0) * dofs
    matrix = nnz * 12.0 + dofs * 4.0
    if backend in _FACTOR_COEFF:
        solver = _FACTOR_COEFF[backend] * dofs ** (4.0 / 3.0) * (_FACTOR_ORDER1 if k == 4 else 1.0)
    else:  # iterative: preconditioner about twice the matrix, plus work vectors
        solver = 2.0 * matrix + 20.0 * dofs * 8.0
    # Element stresses at element nodes (m, k, 6) and a few nodal fields.
    recovery = elements * k * 6 * 8.0 * 3 + dofs * 8.0 * 10
    return MemoryEstimate(int(dofs), k, backend, assembly, matrix, solver, recovery, int(elements))


def estimate_from_volume(volume: float, size: float, nodes_per_element: int, backend: str) -> MemoryEstimate:
    """Estimate before meshing, from the part's volume [length³] and the element size [length]."""
    h3 = max(size, 1e-300) ** 3
    nodes = _NODES_PER_H3.get(nodes_per_element, 7.8) * volume / h3
    elements = _CELLS_PER_H3 * volume / h3
    return estimate(int(min(3 * nodes, 1e15)), int(min(elements, 1e15)), nodes_per_element, backend)


#: Tetrahedra of a Gmsh mesh of uniform size h, measured here: 4.5-4.6 per h³ of volume in a cube
#: (73k-290k elements), and 3.6-4.0 per h² of boundary area in plates thinner than h (100 x 100 x
#: 0.1 at h = 1 and 0.5: 72k and 286k elements, where volume/h³ predicted 5k and 40k). The larger
#: of the two counts; rounded up.
CELLS_PER_H3 = _CELLS_PER_H3
CELLS_PER_H2 = 4.5
#: Peak memory of Gmsh while meshing, per tetrahedron [bytes]: measured 560-590 B in a cube and
#: 1.7 kB in thin plates (slivers); taken as 2 kB, and 1.5 x that for 10-node elements.
MESH_BYTES_PER_CELL = 2048.0


@dataclass(frozen=True)
class MeshDemand:
    """What a mesh will hold, known before meshing.

    Attributes
    ----------
    volume : float
        Volume of the part [length³].
    area : float
        Area of its boundary [length²].
    size : float
        Global element size [length].
    zones : tuple of (area [length²], size [length])
        Boundary surfaces meshed with a smaller local size (``mesh.refine``).
    points : tuple of (size [length], growth [-])
        Refinements around points: size ``size`` at the point, growing by ``growth`` per length.
    lines : tuple of (length [length], size [length], growth [-])
        Refinements along edges, the size growing with the distance from the edge.
    diagonal : float
        The part's bounding-box diagonal [length] (0 when not known).
    """

    volume: float
    area: float
    size: float
    zones: tuple = ()
    points: tuple = ()
    lines: tuple = ()
    diagonal: float = 0.0


def _per_power(q: float, h: float, p: int) -> float:
    """``q / h**p`` without overflow or division by zero (inf when it is beyond floating point)."""
    if not q > 0:
        return 0.0
    if not h > 0:
        return math.inf
    if not (math.isfinite(q) and math.isfinite(h)):
        return math.inf if not math.isfinite(q) else 0.0
    e = math.log(q) - p * math.log(h)
    return math.exp(e) if e < 700.0 else math.inf


def cells_estimate(d: MeshDemand) -> float:
    """Tetrahedra a mesh of ``d`` will have (may be inf): the larger of the volume count
    (:data:`CELLS_PER_H3` per h³) and the boundary count (:data:`CELLS_PER_H2` per h² of area,
    which governs thin parts), plus for each refined zone the graded layer the local size makes
    (Gmsh's threshold field: size ``s`` within ``s/2`` of the surfaces, growing linearly to the
    global size over ``4 (h - s)``, i.e. ``2.5 / s²`` per unit area times the volume count), and
    around each refined point ``4π/g³ (ln(h/s) + 1.5)`` and along each refined edge of length
    ``L`` ``π L / (g² s)`` times the volume count (the integrals of ``1/size³`` about them)."""
    h = d.size
    total = max(CELLS_PER_H3 * _per_power(d.volume, h, 3), CELLS_PER_H2 * _per_power(d.area, h, 2))
    for area, s in d.zones:
        if s < h:
            total += max(CELLS_PER_H3 * 2.5, CELLS_PER_H2) * _per_power(area, s, 2)
    for s, g in d.points:
        if s < h:
            layer = 4.0 * math.pi * _per_power(1.0, g, 3) * (math.log(h / s) + 1.5) if s > 0 else math.inf
            total += CELLS_PER_H3 * layer
    for length, s, g in d.lines:
        if s < h:
            total += CELLS_PER_H3 * math.pi * _per_power(length, g, 2) / s if s > 0 else math.inf
    return total


def estimate_from_cells(cells: float, nodes_per_element: int, backend: str) -> MemoryEstimate:
    """Estimate before meshing from an expected number of tetrahedra (see :func:`cells_estimate`)."""
    per_cell = _NODES_PER_H3.get(nodes_per_element, 7.8) / _CELLS_PER_H3
    cells = min(cells, 1e15) if cells == cells else 1e15
    return estimate(int(3 * per_cell * cells), int(cells), nodes_per_element, backend)


def mesh_memory(cells: float, nodes_per_element: int) -> float:
    """Peak memory of Gmsh making ``cells`` tetrahedra [bytes] (:data:`MESH_BYTES_PER_CELL`)."""
    return cells * MESH_BYTES_PER_CELL * (1.5 if nodes_per_element == 10 else 1.0)


#: Peak memory of reading a file, as a multiple of its size, measured here on a 10-node cube mesh
#: written at 5-12 MB: meshio reading binary VTU 5.5 x and ASCII VTU 10 x, Gmsh opening .msh 3.6-4.2 x,
#: the reference CSV reader 11 x; XDMF (elastofe.xdmf, a 10-node cube of 179k cells and its boundary
#: triangles, 2026-12-05) with its arrays inline 2.7 x (one cell type) to 7.4 x (mixed topology) the
#: .xdmf file, with them in HDF5 4.3-4.6 x the .h5 file (gzip, as meshio writes it; 1.9 x
#: uncompressed; the HDF5 file is what is checked). Rounded up. CAD files (OpenCASCADE) are taken as
#: 20 x (not measured: STEP files of single parts are small).
READ_FACTORS = {".vtu": 12.0, ".vtk": 12.0, ".csv": 12.0, ".msh": 6.0, ".xdmf": 10.0, ".xmf": 10.0, ".h5": 8.0}
CAD_READ_FACTOR = 20.0


def file_read_limit(path) -> tuple[Optional[float], str]:
    """The largest file of ``path``'s kind that can be read in the memory available [bytes], and
    why (for messages); ``(None, "")`` when memory is unknown or the check is off."""
    factor = READ_FACTORS.get(Path(str(path)).suffix.lower(), CAD_READ_FACTOR)
    try:
        avail, source = available_memory()
    except CaseError:
        avail, source = None, ""
    if avail is None:
        return None, ""
    measured = meminfo_available()
    if os.environ.get(LIMIT_ENV) is not None and measured is not None and measured > avail:
        # The override is for the solve; reading a file is limited by the memory actually free
        # (or by a larger override).
        avail, source = measured, "available memory"
    return avail / factor, (f"reading it needs about {factor:g} x its size in memory; {avail / GiB:.1f} GiB is "
                            f"available ({source})")


def meminfo_available() -> Optional[float]:
    """Memory the machine has available now [bytes] (Linux ``MemAvailable``; the free physical
    pages elsewhere), or None when it cannot be read."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024.0
    except OSError:
        pass
    try:
        return float(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return None


def _cgroup_available() -> Optional[float]:
    """Room left under a control-group memory limit (containers), if one is set."""
    pairs = [("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory.current"),
             ("/sys/fs/cgroup/memory/memory.limit_in_bytes", "/sys/fs/cgroup/memory/memory.usage_in_bytes")]
    for lim, cur in pairs:
        try:
            text = Path(lim).read_text().strip()
            if text == "max":
                return None
            limit = float(text)
            if limit > 1e18:  # "no limit" written as a huge number
                return None
            return max(limit - float(Path(cur).read_text().strip()), 0.0)
        except (OSError, ValueError):
            continue
    return None


def parse_limit(text: str) -> Optional[float]:
    """Bytes from the override text ("4 GiB", "500MB", "123456"); None for "off"."""
    t = text.strip()
    if t.lower() in ("off", "none", "no"):
        return None
    import re

    m = re.fullmatch(r"([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([KMGT]i?B?|B)?", t, re.I)
    if not m:
        raise CaseError(LIMIT_ENV, text,
                        "must be a number of bytes or a size such as \"4 GiB\" or \"500 MB\", or \"off\"")
    val = float(m.group(1))
    unit = (m.group(2) or "B").upper().rstrip("B").rstrip("I")
    scale = {"": 1, "K": 1 << 10, "M": 1 << 20, "G": 1 << 30, "T": 1 << 40}[unit]
    return val * scale


def available_memory() -> tuple[Optional[float], str]:
    """Memory a run may use [bytes] and where the figure came from (None: unknown or check off)."""
    env = os.environ.get(LIMIT_ENV)
    if env is not None:
        return parse_limit(env), f"{LIMIT_ENV}={env}"
    figures = [(v, src) for v, src in ((meminfo_available(), "available memory"),
                                       (_cgroup_available(), "the container's memory limit")) if v is not None]
    if not figures:
        return None, "unknown"
    return min(figures)


def coarsening_to_fit(est: MemoryEstimate, available: float) -> float:
    """By how much the element size must grow for ``est`` to fit in ``available`` bytes, with DOF and
    elements scaling as h^-3 (a bulky part): the estimate itself is solved for, since a direct
    factorisation grows like DOF^(4/3) (h^-4) and an iterative solve like DOF (h^-3)."""
    def fits(f: float) -> bool:
        e = estimate(max(int(est.dofs / f ** 3), 1), max(int(est.elements / f ** 3), 1),
                     est.nodes_per_element, est.backend)
        return e.peak <= available

    lo, hi = 1.0, 2.0
    while not fits(hi) and hi < 1e6:
        lo, hi = hi, 2.0 * hi
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if fits(mid) else (mid, hi)
    return hi


def check_memory(est: MemoryEstimate, *, available: Optional[float] = None, source: str = "",
                 alternatives: tuple[str, ...] = ()) -> None:
    """Raise :class:`ModelError` when ``est`` exceeds the memory available.

    Parameters
    ----------
    est : MemoryEstimate
    available : float, optional
        Bytes available; by default :func:`available_memory`.
    alternatives : tuple of str
        Other solver backends installed here (named in the advice).
    """
    if available is None:
        available, source = available_memory()
        if available is None:
            return
    if est.peak <= available:
        return
    factor = coarsening_to_fit(est, available)
    iterative = [b for b in alternatives if b not in _FACTOR_COEFF and b != est.backend]
    advice = [f"a coarser mesh.size (about {max(factor, 1.1):.1f} x the present size)"]
    if est.nodes_per_element == 10:
        advice.append("mesh.order = 1 (4-node tetrahedra: far fewer DOF, less accurate stresses)")
    if iterative:
        advice.append(f"an iterative solver (solver.backend = {iterative[0]!r})")
    elif est.backend in _FACTOR_COEFF:
        advice.append("an iterative solver backend, when one is installed (it needs a fraction of "
                      "the memory of a direct factorisation)")
    if est.backend == "scipy" and "pardiso" in alternatives:
        advice.append("solver.backend = \"pardiso\" (about 2.5 x less memory than scipy)")
    raise ModelError(f"the run would need {est.describe()}, but only about {available / GiB:.1f} GiB "
                     f"is available ({source}); refused before allocating. Reduce the problem: "
                     + "; ".join(advice) + f". (Set {LIMIT_ENV} to override the limit.)")


def peak_memory_mb() -> float:
    """Peak resident memory of this process so far [MiB].

    ``VmHWM`` on Linux (it starts afresh in a spawned worker, where ``ru_maxrss`` carries the
    parent's peak over the exec and would overstate); ``ru_maxrss`` elsewhere; 0 where neither exists.
    """
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    try:
        import resource  # not on Windows
    except ImportError:
        return 0.0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    # bytes on macOS, KiB on Linux and the BSDs
    import sys

    return peak / 2**20 if sys.platform == "darwin" else peak / 1024.0


def current_memory_mb() -> float:
    """Resident memory of this process now [MiB] (Linux ``/proc/self/statm``; 0 elsewhere)."""
    try:
        with open("/proc/self/statm") as fh:
            return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2 ** 20
    except (OSError, ValueError, AttributeError):
        return 0.0
