"""Results in Python and in notebooks: solve, look, probe, read back.

What :func:`elastofe.solve_case` and :func:`elastofe.run` return is a :class:`RunResult`: the run's
:class:`~elastofe.result.Result` (every field and array as before) with views for interactive
work. :func:`read_results` gives a :class:`ResultsFolder` back from a run's output folder with the
same views. Both have

- ``summary``: the summary.json document (a dict);
- ``lines``: ``{line name: LineResult}`` (arrays ``s (k,)``, ``xyz (k, 3)``, ``u (k, 3)``,
  ``stress (k, 6)``, ``von_mises (k,)``) and ``tables``: ``{line name: pandas.DataFrame}`` with the
  columns of the line CSVs (``s [mm]``, ``x [mm]``, ..., ``von_mises [MPa]``);
- ``to_pyvista()``: a ``pyvista.UnstructuredGrid`` with the point arrays of result.vtu;
- ``probe(points)``: displacement, stress, von Mises and principal stresses at any points;
- a one-line ``repr`` (title, DOF, peaks, verdicts) and an HTML table in Jupyter.

These views live here, in the package's public face, and not on :class:`Result` itself, because
they use the output and post-processing layers that sit above the result records (the layer map
in DEVELOPERS.md); ``RunResult`` is a subclass, so code that takes a ``Result`` takes it unchanged.
Every array is in the case's unit system (``units`` gives the labels).
"""
from __future__ import annotations

import html
import json
import logging
from collections.abc import Mapping
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Iterator, Optional, Union

import numpy as np

from .case import load_case
from .case.schema import Case
from .errors import CaseError
from .files import safe_name
from .job import run_case
from .mesh import Mesh, boundary_faces
from .output import (
    array_components,
    line_file_names,
    point_fields,
    read_units_field,
    summary,
    verify_results,
    vtu_field_data,
)
from .pipeline import solve_case as _pipeline_solve_case
from .post.probe import locate
from .post.sampling import fields_at, on_part_tolerance
from .progress import Progress, quiet
from .report.plots import read_line_csv
from .result import LineResult, Result

__all__ = ["RunResult", "ResultsFolder", "Probe", "LineTables", "solve_case", "run", "read_results", "demo_case",
           "to_grid", "probe_mesh", "ResultViews", "TO_PYVISTA_DOC"]

log = logging.getLogger(__name__)


def demo_case() -> Path:
    """The path of the demo's case file (the lever bracket shipped with the package)."""
    from .cli import MODELS

    return MODELS / "lever" / "lever.toml"


# ----------------------------------------------------------------------------- shared pieces
@dataclass(frozen=True)
class Probe:
    """Fields at given points, interpolated with the elements' shape functions.

    Attributes
    ----------
    xyz : (k, 3) the points [length].
    u : (k, 3) displacement [length].
    stress : (k, 6) stress (xx, yy, zz, xy, yz, xz) [stress], from the nodally averaged field.
    von_mises : (k,) [stress].
    principal : (k, 3) principal stresses, largest first [stress].
    outside : (k,) distance from each point to the part [length] (0 inside). Points farther out
        than 1e-4 of the part's size get NaN values.
    units : {"length": ..., "stress": ...} unit labels.
    load_case : the load case or combination the values belong to (None: the first, or the only one).
    """

    xyz: np.ndarray
    u: np.ndarray
    stress: np.ndarray
    von_mises: np.ndarray
    principal: np.ndarray
    outside: np.ndarray
    units: dict
    load_case: Optional[str] = None

    def to_frame(self):
        """The values as a ``pandas.DataFrame`` (one row per point; columns ``x [mm]``, ...,
        ``s1 [MPa]``, ``outside [mm]``). Needs pandas."""
        try:
            import pandas as pd
        except ImportError:
            raise ImportError("tables need pandas: pip install pandas (or pip install 'elastofe[notebook]')") from None
        L, S = self.units["length"], self.units["stress"]
        cols = {}
        for j, c in enumerate("xyz"):
            cols[f"{c} [{L}]"] = self.xyz[:, j]
        for j, c in enumerate("xyz"):
            cols[f"u{c} [{L}]"] = self.u[:, j]
        for j, c in enumerate(("xx", "yy", "zz", "xy", "yz", "xz")):
            cols[f"s{c} [{S}]"] = self.stress[:, j]
        cols[f"von_mises [{S}]"] = self.von_mises
        for j in range(3):
            cols[f"s{j + 1} [{S}]"] = self.principal[:, j]
        cols[f"outside [{L}]"] = self.outside
        return pd.DataFrame(cols)

    def __repr__(self) -> str:
        out = int(np.count_nonzero(np.isnan(self.von_mises)))
        return (f"<Probe: {self.xyz.shape[0]} point(s), von Mises {np.array2string(self.von_mises, precision=4)} "
                f"{self.units['stress']}{f', {out} outside the part' if out else ''}>")


def probe_mesh(mesh: Mesh, u: np.ndarray, stress: np.ndarray, points, units: dict,
               load_case: Optional[str] = None) -> Probe:
    """:class:`Probe` of nodal ``u (n, 3)`` and ``stress (n, 6)`` at ``points (k, 3)`` [length]."""
    pts = np.asarray(points, dtype=float)
    if pts.ndim == 1:
        pts = pts.reshape(1, -1)
    if pts.ndim != 2 or pts.shape[1] != 3 or not np.isfinite(pts).all():
        raise CaseError("points", np.asarray(points).tolist() if np.size(points) < 20 else f"array {pts.shape}",
                        "coordinates as a (k, 3) array or a list of [x, y, z] in the case's length unit")
    loc = locate(mesh.points, mesh.cells, pts)
    v = fields_at(mesh, loc, u, stress)
    far = loc.outside > on_part_tolerance(mesh)
    for key in ("u", "stress", "von_mises", "principal"):
        v[key] = np.where(far.reshape((-1,) + (1,) * (v[key].ndim - 1)), np.nan, v[key])
    return Probe(xyz=pts, u=v["u"], stress=v["stress"], von_mises=v["von_mises"], principal=v["principal"],
                 outside=np.asarray(loc.outside, dtype=float), units=dict(units), load_case=load_case)


class LineTables(Mapping):
    """``{line name: pandas.DataFrame}``, each table made when asked for (see :meth:`LineResult.to_frame`)."""

    def __init__(self, lines: dict, labels: dict):
        self._lines = lines
        self._labels = labels

    def __getitem__(self, name: str):
        if name not in self._lines:
            raise KeyError(f"no line {name!r}; the run's lines: {', '.join(map(repr, self._lines)) or 'none'}")
        return self._lines[name].to_frame(self._labels)

    def __iter__(self) -> Iterator[str]:
        return iter(self._lines)

    def __len__(self) -> int:
        return len(self._lines)

    def __repr__(self) -> str:
        return f"<LineTables {list(self._lines)}>"


def to_grid(mesh: Mesh, point_data: dict, cell_data: dict, field_data: Optional[dict] = None):
    """A ``pyvista.UnstructuredGrid`` of the mesh with point, cell and field arrays; component names
    of the multi-component arrays set as result.vtu states them (:func:`elastofe.output.array_components`)."""
    import pyvista as pv

    ctype = pv.CellType.TETRA if mesh.cells.shape[1] == 4 else pv.CellType.QUADRATIC_TETRA
    grid = pv.UnstructuredGrid({ctype: np.asarray(mesh.cells)}, np.asarray(mesh.points, dtype=float))
    for name, arr in point_data.items():
        grid.point_data[name] = np.asarray(arr)
    for name, arr in cell_data.items():
        grid.cell_data[name] = np.asarray(arr)
    for name, comps in array_components(point_data).items():
        vtk_array = grid.GetPointData().GetArray(name)
        for i, c in enumerate(comps):
            vtk_array.SetComponentName(i, c)
    for name, arr in (field_data or {}).items():
        grid.field_data[name] = np.asarray(arr)
    return grid


def _html(d: dict) -> str:
    """A small HTML table of a run's digest (see ``_digest``) for Jupyter."""
    e = html.escape
    L, S = d["units"]["length"], d["units"]["stress"]
    rows = [("mesh", f"{d['nodes']:,} nodes, {d['elements']:,} elements, {d['dofs']:,} DOF"),
            ("max |u|", f"{d['max_u']:.4g} {L}"), ("max von Mises (nodal avg.)", f"{d['max_vm']:.4g} {S}")]
    rows = [(k, e(v)) for k, v in rows]
    gov = d.get("governing") or {}
    if gov.get("value") is not None:
        basis = "away from supports and loads" if gov.get("basis") == "away" else "overall peak"
        rows.append(("governing von Mises", e(f"{float(gov['value']):.4g} {S} ({basis})")))
    for name, (status, why) in d["checks"].items():
        rows.append((f"check {name}", f"<b>{e(status.upper())}</b> {e(why)}"))
    if d.get("comparison"):
        rows.append(("comparison", e(str(d["comparison"]))))
    if d.get("where"):
        rows.append(("results", e(d["where"])))
    body = "".join(f"<tr><td style='text-align:left'>{e(k)}</td><td style='text-align:left'>{v}</td></tr>"
                   for k, v in rows)
    return f"<div><b>{e(d['title'] or '(untitled)')}</b><table>{body}</table></div>"


TO_PYVISTA_DOC = """A ``pyvista.UnstructuredGrid``: the mesh (4- or 10-node tetrahedra) with the point arrays
        of result.vtu (:func:`elastofe.output.point_fields`: ``displacement (n, 3)`` [length],
        ``von_mises (n,)``, ``stress (n, 6)``, ``principal (n, 3)``, ``stress_xx``... [stress], per load
        case the same suffixed ``-NAME``), the cell array ``quality`` and the field data ``units_json``
        (UTF-8 bytes of a JSON object naming each array's unit and components; decoded by
        :func:`elastofe.output.read_units_field`)."""


class ResultViews:
    """The views shared by :class:`RunResult` and :class:`ResultsFolder` (see the module notes).

    A subclass gives ``lines``, ``units``, ``to_pyvista()`` and the fields to probe."""

    @property
    def tables(self) -> LineTables:
        """``{line name: pandas.DataFrame}`` of the line samples, unit-labelled columns."""
        return LineTables(self.lines, self.units)

    def probe(self, points, load_case: Optional[str] = None) -> Probe:
        """Values at ``points`` ``(k, 3)`` [length] (or one point ``[x, y, z]``) after the solve.

        ``load_case`` names a load case or combination (default: the first or only one).
        Returns a :class:`Probe`; points outside the part get NaN values and their distance.
        """
        u, stress = self._fields_of(load_case)
        return probe_mesh(self._probe_mesh(), u, stress, points, self.units, load_case)

    def _repr_html_(self) -> str:
        return _html(self._digest())


def load_case_choice(names) -> str:
    """What a ``load_case`` argument may be: one of the run's load cases and combinations."""
    names = list(names)
    if not names:
        return "the run has no named load cases: leave load_case out"
    return f"one of {', '.join(repr(n) for n in names)}"


# ----------------------------------------------------------------------------- a run in this process
@dataclass(frozen=True, repr=False, eq=False)
class RunResult(Result, ResultViews):
    """A :class:`~elastofe.result.Result` with the notebook views (see the module notes).

    Extra attributes: ``comparison`` the comparison document when the case has a ``[reference]``
    (its ``verdict``, ``compared``, ``within_tolerance``, ``scalars``, ``sets``), ``out`` the results
    folder when the run wrote one.
    """

    comparison: Optional[dict] = None
    out: Optional[Path] = None

    @classmethod
    def of(cls, res: Result, *, comparison: Optional[dict] = None, out: Optional[Path] = None) -> RunResult:
        """The same result (its arrays shared, not copied) with the views."""
        values = {f.name: getattr(res, f.name) for f in fields(Result) if f.init}
        return cls(**values, comparison=comparison, out=None if out is None else Path(out))

    @property
    def units(self) -> dict:
        """Unit labels of the case's system: ``length``, ``force``, ``stress``, ``moment``, ``energy``."""
        return dict(self.case.units.labels)

    @property
    def summary(self) -> dict:
        """The summary.json document of this run (as :func:`elastofe.output.write_results` writes it,
        computed afresh; without ``run_id``)."""
        line_files, case_files = line_file_names(self)
        doc = summary(self, line_files, case_files)
        if self.comparison is not None:
            doc["comparison"] = {k: self.comparison.get(k) for k in ("label", "verdict", "compared",
                                                                      "within_tolerance", "points_outside")}
        return doc

    def to_pyvista(self):
        pd_ = point_fields(self)
        return to_grid(self.mesh, pd_, {"quality": self.quality}, vtu_field_data(self, pd_))

    to_pyvista.__doc__ = TO_PYVISTA_DOC

    def _fields_of(self, load_case: Optional[str]):
        if load_case is None:
            return self.u, self.stress
        if load_case not in self.load_cases:
            raise CaseError("load_case", load_case, load_case_choice(self.load_cases))
        cr = self.load_cases[load_case]
        return cr.u, cr.stress

    def _probe_mesh(self) -> Mesh:
        return self.mesh

    def _digest(self) -> dict:
        gov = self.governing or {}
        comp = None
        if self.comparison is not None:
            comp = (f"{self.comparison.get('verdict')}: {self.comparison.get('within_tolerance')} of "
                    f"{self.comparison.get('compared')} values within tolerance")
        return {"title": self.case.title, "units": self.units, "nodes": self.mesh.nodes,
                "elements": int(self.mesh.cells.shape[0]), "dofs": self.dofs,
                "max_u": float(np.linalg.norm(self.u, axis=1).max()), "max_vm": float(np.max(self.von_mises)),
                "governing": gov, "checks": {c.name: (c.status, c.why) for c in self.checks},
                "comparison": comp, "where": str(self.out) if self.out else None}


# ----------------------------------------------------------------------------- a folder on disk
class ResultsFolder(ResultViews):
    """The results of an earlier run, read back from its output folder (see :func:`read_results`).

    Attributes
    ----------
    folder : Path
    summary : dict, the folder's summary.json.
    units : {"length", "force", "stress", ...} unit labels of the run.
    lines : {line name: LineResult} from the line CSVs (the first load case's when there are several;
        :meth:`lines_of` gives another's).
    load_cases : list of load case and combination names (empty when the case named none).
    comparison : the comparison.json document, or None.
    changed : names of result files that no longer match the run's record (empty: a consistent set).
    """

    def __init__(self, folder: Union[str, Path]):
        folder = Path(folder)
        path = folder / "summary.json"
        if not path.is_file():
            what = "does not exist" if not folder.exists() else "is not a folder" if not folder.is_dir() else \
                "holds no summary.json"
            raise CaseError("folder", str(folder), f"{what}: give the results folder of an elastofe run")
        try:
            self.summary: dict = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError) as err:
            raise CaseError("folder", str(path), f"cannot be read as JSON ({err})") from None
        self.folder = folder
        self.units: dict = dict(self.summary.get("units") or {})
        self.load_cases: list[str] = list(self.summary.get("load_cases") or {})
        self.lines: dict[str, LineResult] = self._read_lines(self.summary.get("lines") or {})
        comp = folder / "comparison.json"
        self.comparison: Optional[dict] = json.loads(comp.read_text(encoding="utf-8")) if comp.is_file() else None
        self.changed: list[str] = verify_results(folder)
        if self.changed:
            log.warning("results in %s do not match their record: %s", folder, ", ".join(self.changed))
        self._arrays = None  # (Mesh, point_data, cell_data) read from result.vtu when first needed

    @property
    def title(self) -> Optional[str]:
        return self.summary.get("title")

    def lines_of(self, load_case: str) -> dict[str, LineResult]:
        """``{line name: LineResult}`` of one named load case or combination."""
        cases = self.summary.get("load_cases") or {}
        if load_case not in cases:
            raise CaseError("load_case", load_case, load_case_choice(cases))
        return self._read_lines(cases[load_case].get("lines") or {})

    def _read_lines(self, files: dict) -> dict[str, LineResult]:
        out = {}
        for name, fname in files.items():
            cols = read_line_csv(self.folder / fname)
            xyz = np.column_stack([cols["x"], cols["y"], cols["z"]])
            out[name] = LineResult(
                name=name, s=cols["s"], xyz=xyz, u=np.column_stack([cols["ux"], cols["uy"], cols["uz"]]),
                stress=np.column_stack([cols[c] for c in ("sxx", "syy", "szz", "sxy", "syz", "sxz")]),
                von_mises=cols["von_mises"], outside=int(np.count_nonzero(np.isnan(cols["von_mises"]))),
                units=self.summary.get("units"))
        return out

    def _read_vtu(self):
        if self._arrays is None:
            import meshio

            m = meshio.read(str(self.folder / "result.vtu"))
            block = next(b for b in m.cells if b.type in ("tetra", "tetra10"))
            cells = np.asarray(block.data, dtype=np.int64)
            faces = boundary_faces(cells)
            mesh = Mesh(points=np.asarray(m.points, dtype=float), cells=cells, faces=faces,
                        face_surface=np.ones(faces.shape[0], dtype=np.int64))
            cell_data = {k: v[0] for k, v in m.cell_data.items()}
            self._arrays = (mesh, dict(m.point_data), cell_data, dict(m.field_data))
        return self._arrays

    @property
    def mesh(self) -> Mesh:
        """The mesh of result.vtu (boundary faces recomputed; surface ids are not stored there)."""
        return self._read_vtu()[0]

    @property
    def point_data(self) -> dict[str, np.ndarray]:
        """The point arrays of result.vtu, ``{name: (n,) or (n, c)}``."""
        return self._read_vtu()[1]

    @property
    def array_units(self) -> dict[str, str]:
        """``{array name: unit}`` as result.vtu states it."""
        return read_units_field(self._read_vtu()[3]).get("units", {})

    def to_pyvista(self):
        import pyvista as pv

        return pv.read(str(self.folder / "result.vtu"))

    to_pyvista.__doc__ = TO_PYVISTA_DOC

    def _fields_of(self, load_case: Optional[str]):
        pd_ = self.point_data
        sfx = ""
        if load_case is not None:
            if load_case not in self.load_cases:
                raise CaseError("load_case", load_case, load_case_choice(self.load_cases))
            sfx = f"-{safe_name(load_case)}"
        return pd_["displacement" + sfx], pd_["stress" + sfx]

    def _probe_mesh(self) -> Mesh:
        return self.mesh

    def _digest(self) -> dict:
        s = self.summary
        checks = {k: (c.get("status", "?"), c.get("why", "")) for k, c in (s.get("checks") or {}).items()}
        comp = s.get("comparison")
        return {"title": s.get("title"), "units": self.units, "nodes": s["mesh"]["nodes"],
                "elements": s["mesh"]["elements"], "dofs": s["mesh"]["dofs"],
                "max_u": s["max_displacement"]["value"], "max_vm": s["max_von_mises"]["value"],
                "governing": s.get("governing_peak") or {}, "checks": checks,
                "comparison": None if not comp else (f"{comp.get('verdict')}: {comp.get('within_tolerance')} of "
                                                     f"{comp.get('compared')} values within tolerance"),
                "where": str(self.folder)}

    def __repr__(self) -> str:
        d = self._digest()
        counts: dict[str, int] = {}
        for status, _ in d["checks"].values():
            counts[status] = counts.get(status, 0) + 1
        text = (f"<elastofe ResultsFolder {d['title'] or '(untitled)'!r}: {d['dofs']:,} DOF, max |u| "
                f"{d['max_u']:.4g} {d['units'].get('length', '')}, max von Mises {d['max_vm']:.4g} "
                f"{d['units'].get('stress', '')}")
        if counts:
            text += "; checks: " + ", ".join(f"{n} {s}" for s, n in counts.items())
        if self.changed:
            text += f"; CHANGED since the run: {', '.join(self.changed)}"
        return text + f"; {self.folder}>"


# ----------------------------------------------------------------------------- the functions users call
def solve_case(case: Union[Case, str, Path], progress: Progress = quiet, mesh: Optional[Mesh] = None, *,
               allow_locking: bool = False) -> Optional[RunResult]:
    """Solve a case (a :class:`~elastofe.case.schema.Case`, or the path of a case file) in this process.

    Writes nothing and makes no comparison (:func:`run` does both, as the ``run`` command).
    ``mesh`` replaces meshing the case's geometry; ``allow_locking`` solves a Poisson's ratio of
    0.49 or more on 4-node elements. Returns a :class:`RunResult` (None on MPI ranks other than 0).

    Raises
    ------
    CaseError, ModelError, SolverError
    """
    if isinstance(case, (str, Path)):
        case = load_case(case)
    res = _pipeline_solve_case(case, progress, mesh, allow_locking=allow_locking)
    return None if res is None else RunResult.of(res)


def run(case_or_path, out=None, progress=None, overwrite=False, *, solver=None, report=False) -> Optional[RunResult]:
    """Load (if given a path), solve, compare with the case's ``[reference]`` and, when ``out`` is
    given, write the results, as the ``elastofe run`` command does (the same function,
    :func:`elastofe.job.run_case`, runs both).

    ``out`` holding the results of a different case raises :class:`CaseError` unless
    ``overwrite``. Returns a :class:`RunResult` whose ``comparison`` holds the comparison (None
    without a ``[reference]``), or None on MPI ranks other than 0.
    """
    outcome = run_case(case_or_path, out, overwrite=overwrite, progress=progress or quiet, solver=solver,
                       report=report)
    if outcome.result is None:
        return None
    return RunResult.of(outcome.result, comparison=outcome.comparison, out=outcome.out)


def read_results(folder: Union[str, Path]) -> ResultsFolder:
    """The results of an earlier run from its output folder (summary.json, result.vtu, line CSVs).

    Raises :class:`CaseError` when the folder holds no summary.json. Files that no longer match
    the run's record are listed in ``changed`` (and logged), not refused.
    """
    return ResultsFolder(folder)
