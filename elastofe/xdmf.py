"""Reading XDMF mesh files (.xdmf/.xmf): the XML file, its arrays ("heavy data") inline in the XML
or in an HDF5 file beside it.

XDMF is an open format (https://www.xdmf.org): an XML ``<Xdmf><Domain><Grid>`` holding the
``Geometry`` (node coordinates), the ``Topology`` (cells: one type, or ``Mixed``, where each cell is
preceded by its type number) and ``Attribute`` arrays on nodes or cells. elastofe reads one uniform
grid of unstructured cells; its own reader (rather than meshio's) because meshio 5.3 cannot read a
mixed topology holding 10-node tetrahedra or 6-node triangles (the usual quadratic mesh with its
boundary triangles) and walks mixed cells one at a time in Python; here runs of cells of one type
are found with array operations.

Cell type names are meshio's (``tetra``, ``tetra10``, ``triangle6``, ``hexahedron``, ...), so the
blocks go through the same checks as those of a .vtu file (:func:`elastofe.mesh.volume_cells`).
Node order of the quadratic cells is XDMF's, the same as VTK's for 10-node tetrahedra.
"""
from __future__ import annotations

import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import CaseError

#: XDMF topology numbers of a mixed topology (XdmfTopologyType): ``{number: (meshio name, nodes)}``;
#: nodes 0 for the types whose cells state their own node count after the type number.
MIXED_TYPES: dict[int, tuple[str, int]] = {
    1: ("vertex", 0), 2: ("line", 0), 3: ("polygon", 0), 4: ("triangle", 3), 5: ("quad", 4), 6: ("tetra", 4),
    7: ("pyramid", 5), 8: ("wedge", 6), 9: ("hexahedron", 8), 34: ("line3", 3), 35: ("quad9", 9),
    36: ("triangle6", 6), 37: ("quad8", 8), 38: ("tetra10", 10), 39: ("pyramid13", 13), 40: ("wedge15", 15),
    41: ("wedge18", 18), 48: ("hexahedron20", 20), 49: ("hexahedron24", 24), 50: ("hexahedron27", 27),
}
#: XDMF topology names of one cell type (either spelling) to meshio's base names; a suffix ``_N``
#: (nodes) is appended as ``N``: Tetrahedron_10 -> tetra10, Hexahedron_27 -> hexahedron27.
SINGLE_TYPES = {"polyvertex": "vertex", "polyline": "line", "polygon": "polygon", "triangle": "triangle",
                "tri": "triangle", "quadrilateral": "quad", "quad": "quad", "tetrahedron": "tetra", "tet": "tetra",
                "pyramid": "pyramid", "wedge": "wedge", "hexahedron": "hexahedron", "hex": "hexahedron",
                "edge": "line", "polyhedron": "polyhedron"}
#: Nodes of a cell by meshio base name, where the XDMF type name alone says it.
BASE_NODES = {"vertex": 1, "line": 2, "triangle": 3, "quad": 4, "tetra": 4, "pyramid": 5, "wedge": 6,
              "hexahedron": 8}
#: XDMF number types to numpy kinds.
KINDS = {"float": "f", "int": "i", "uint": "u", "char": "i", "uchar": "u"}

KEY = "geometry.file"


@dataclass
class XdmfMesh:
    """One grid of an XDMF file.

    Attributes
    ----------
    points : (p, 3) float64
        Node coordinates in the file's numbers.
    blocks : list of (str, (c, k) int64)
        Cells by type, in file order (meshio type names), node indices from 0.
    point_data : dict of str to (p, ...) array
        Node attributes by name.
    cell_data : dict of str to list of arrays
        Cell attributes by name, split as ``blocks`` (one (c, ...) array per block).
    heavy_files : list of Path
        HDF5 files the arrays were read from.
    """

    points: np.ndarray
    blocks: list
    point_data: dict = field(default_factory=dict)
    cell_data: dict = field(default_factory=dict)
    heavy_files: list = field(default_factory=list)


def _fail(path: Path, why: str) -> CaseError:
    return CaseError(KEY, str(path), why)


def _attr(el, *names: str, default: str = "") -> str:
    """The first of the attributes ``names`` that ``el`` has (XDMF 2 and 3 spell some differently)."""
    for n in names:
        if n in el.attrib:
            return str(el.attrib[n])
    return default


class _Reader:
    def __init__(self, path: Path):
        self.path = path
        self.h5: dict[Path, object] = {}

    def close(self) -> None:
        for f in self.h5.values():
            try:
                f.close()  # type: ignore[attr-defined]
            except Exception:  # closing a half-read file: nothing more to do
                pass

    def _h5file(self, name: str):
        from .files import check_input_file
        from .resources import file_read_limit

        h5 = self.path.parent / name  # relative to the XDMF file, as the format has it
        if h5 in self.h5:
            return self.h5[h5]
        if not h5.exists():
            raise _fail(self.path, f"keeps its arrays in the HDF5 file {name!r}, which is missing: an XDMF file "
                        "with HDF5 data is two files; copy the .h5 file beside it")
        limit, why = file_read_limit(h5)
        check_input_file(h5, KEY, max_bytes=limit, limit_reason=why)
        try:
            import h5py
        except ImportError:
            raise _fail(self.path, "keeps its arrays in HDF5, which needs the h5py package (pip install "
                        "h5py)") from None
        try:
            f = h5py.File(str(h5), "r")
        except Exception as err:
            raise _fail(self.path, f"keeps its arrays in the HDF5 file {name!r}, which cannot be read "
                        f"({' '.join(str(err).split())}); the file may be truncated: write the mesh again") from None
        self.h5[h5] = f
        return f

    def data(self, item, what: str) -> np.ndarray:
        """The array of a ``DataItem`` element, shaped by its ``Dimensions``."""
        if item is None or item.tag != "DataItem":
            raise _fail(self.path, f"has no DataItem for its {what}")
        kind = _attr(item, "ItemType", default="Uniform")
        if kind.lower() != "uniform" or "Reference" in item.attrib:
            raise _fail(self.path, f"gives its {what} as a {kind if kind.lower() != 'uniform' else 'reference'} "
                        "data item, which elastofe does not read: write the arrays out (XML or HDF5)")
        try:
            dims = tuple(int(d) for d in _attr(item, "Dimensions", default="").split())
        except ValueError:
            dims = ()
        if not dims or min(dims) < 0:
            raise _fail(self.path, f"has no valid Dimensions for its {what}")
        count = int(np.prod(dims))
        ntype = _attr(item, "DataType", "NumberType", default="Float").lower()
        prec = _attr(item, "Precision", default="4")
        if ntype not in KINDS or prec not in ("1", "2", "4", "8"):
            raise _fail(self.path, f"gives its {what} as numbers of type {ntype} precision {prec}, which "
                        "elastofe does not read")
        dtype = np.dtype(f"{KINDS[ntype]}{prec}")
        fmt = _attr(item, "Format", default="XML")
        text = (item.text or "").strip()
        if fmt == "XML":
            with warnings.catch_warnings():
                # a number cut short or a stray word: fromstring stops there (counted below)
                warnings.simplefilter("ignore", DeprecationWarning)
                arr = np.fromstring(text, dtype=dtype, sep=" ") if text else np.zeros(0, dtype)
        elif fmt == "HDF":
            name, _, dset = text.rpartition(":")
            if not name:
                raise _fail(self.path, f"gives its {what} in HDF5 as {text!r}, not FILE:/DATASET")
            f = self._h5file(name)
            try:
                arr = np.asarray(f[dset.lstrip("/")][()])
            except KeyError:
                raise _fail(self.path, f"names the dataset {dset!r} of {name!r} for its {what}, which that file "
                            "does not hold: the two files do not belong together") from None
            except Exception as err:
                raise _fail(self.path, f"cannot read its {what} from {name!r} ({' '.join(str(err).split())}); "
                            "the file may be truncated: write the mesh again") from None
        else:
            raise _fail(self.path, f"keeps its {what} in {fmt} form, which elastofe does not read: write the mesh "
                        "with its arrays inline (XML) or in HDF5")
        if arr.size != count:
            raise _fail(self.path, f"holds {arr.size:,} numbers for its {what} where its Dimensions say "
                        f"{count:,}; the file may be truncated: write the mesh again")
        return arr.reshape(dims)

    def grid(self):
        import xml.etree.ElementTree as ET

        try:
            root = ET.parse(str(self.path)).getroot()
        except ET.ParseError as err:
            raise _fail(self.path, f"cannot be read as an XDMF mesh (XML: {err}); the file may be truncated: "
                        "write the mesh again") from None
        except OSError as err:
            raise _fail(self.path, f"cannot be read ({err.strerror or err})") from None
        if root.tag != "Xdmf":
            raise _fail(self.path, f"is not an XDMF file (its XML root is <{root.tag}>, not <Xdmf>)")
        grids = [g for d in root.findall("Domain") for g in d.findall("Grid")]
        if len(grids) != 1 or _attr(grids[0], "GridType", default="Uniform").lower() != "uniform":
            raise _fail(self.path, "holds more than one grid (a time series or a collection of pieces); "
                        "elastofe reads an XDMF file of one uniform grid: write the mesh alone")
        return grids[0]

    def read(self) -> XdmfMesh:
        grid = self.grid()
        geo = grid.find("Geometry")
        topo = grid.find("Topology")
        if geo is None or topo is None:
            raise _fail(self.path, "has no Geometry or no Topology: not a mesh")
        gtype = _attr(geo, "GeometryType", "Type", default="XYZ").upper()
        items = geo.findall("DataItem")
        if gtype == "XYZ":
            points = self.data(items[0] if items else None, "node coordinates").reshape(-1, 3)
        elif gtype == "X_Y_Z" and len(items) == 3:
            points = np.column_stack([self.data(it, "node coordinates").ravel() for it in items])
        else:
            raise _fail(self.path, f"gives node coordinates as {gtype}; a 3D mesh with XYZ or X_Y_Z "
                        "coordinates is needed")
        points = np.asarray(points, dtype=np.float64)
        ttype = _attr(topo, "TopologyType", "Type", default="")
        conn = self.data(topo.find("DataItem"), "cells").astype(np.int64, copy=False)
        offset = _attr(topo, "BaseOffset", default="0").strip()
        if not offset.lstrip("-").isdigit():
            raise _fail(self.path, f"has a Topology BaseOffset of {offset!r}, not a whole number")
        base = int(offset)
        if ttype.lower() == "mixed":
            blocks = mixed_blocks(conn.ravel(), self.path)
        else:
            name = single_type(ttype, self.path)
            given = _attr(topo, "NodesPerElement")
            digits = re.sub(r"^[a-z]+", "", name)
            implied = int(digits) if digits else BASE_NODES.get(name, 0)
            k = int(given) if given.isdigit() else implied or (conn.shape[-1] if conn.ndim > 1 else 0)
            if k < 1 or conn.size % k:
                raise _fail(self.path, f"holds {conn.size:,} node numbers, not a whole number of {ttype} cells")
            blocks = [(name, conn.reshape(-1, k))]
        if base:
            blocks = [(n, c - base) for n, c in blocks]
        n = points.shape[0]
        for name, c in blocks:
            if c.size and (c.min() < 0 or c.max() >= n):
                raise _fail(self.path, f"has {name} cells with node numbers outside 0 to {n - 1}; the file "
                            "may be damaged: write the mesh again")
        sizes = [len(c) for _, c in blocks]
        point_data, cell_data = {}, {}
        for att in grid.findall("Attribute"):
            center = _attr(att, "Center", default="Node")
            name = _attr(att, "Name", default="")
            if center not in ("Node", "Cell") or not name:
                continue  # face, edge and grid attributes carry nothing elastofe reads
            arr = self.data(att.find("DataItem"), f"{center.lower()} array {name!r}")
            if center == "Node":
                point_data[name] = arr
            elif len(arr) == sum(sizes):
                cell_data[name] = np.split(arr, np.cumsum(sizes)[:-1])
        return XdmfMesh(points, blocks, point_data, cell_data, list(self.h5))


def single_type(name: str, path: Path) -> str:
    """meshio's name of an XDMF topology type (``Tetrahedron_10`` -> ``tetra10``)."""
    m = re.fullmatch(r"([A-Za-z]+)(?:_(\d+))?", name.strip())
    base = SINGLE_TYPES.get(m.group(1).lower()) if m else None
    if base is None or m is None:
        raise _fail(path, f"has cells of topology type {name!r}, which elastofe does not know")
    return base + (m.group(2) or "")


def mixed_blocks(data: np.ndarray, path: Path) -> list[tuple[str, np.ndarray]]:
    """The cell blocks of a mixed topology stream (type number, [node count,] nodes, ...).

    A run of cells of one type (and, for polylines and polygons, one node count) is found at once:
    its headers lie at a fixed stride, compared in growing windows, so the work is a few array
    operations per run rather than a Python step per cell.

    Parameters
    ----------
    data : (s,) int64
        The topology's numbers.

    Returns
    -------
    list of (meshio type name, (c, k) int64)
    """
    out: list[tuple[str, np.ndarray]] = []
    r, n = 0, data.size
    while r < n:
        t = int(data[r])
        if t not in MIXED_TYPES:
            raise _fail(path, f"has a cell of mixed-topology type number {t}, which elastofe does not know "
                        "(or the cell list is damaged)")
        name, k = MIXED_TYPES[t]
        head = 1
        if k == 0:
            if r + 1 >= n:
                raise _fail(path, "has a cell list that ends inside a cell; the file may be truncated: write the "
                            "mesh again")
            k, head = int(data[r + 1]), 2
            if k < 1:
                raise _fail(path, f"has a {name} with {k} nodes")
        stride = head + k
        # Cells in this run: grow the window until a header differs or the data end.
        count, window = 0, 64
        while True:
            starts = r + stride * np.arange(count, count + window)
            starts = starts[starts + stride <= n]
            if starts.size == 0:
                break
            same = data[starts] == t
            if head == 2:
                same &= data[starts + 1] == k
            bad = np.flatnonzero(~same)
            if bad.size:
                count += int(bad[0])
                break
            count += starts.size
            window *= 4
        if count == 0:
            raise _fail(path, "has a cell list that ends inside a cell; the file may be truncated: write the "
                        "mesh again")
        cells = data[r:r + count * stride].reshape(count, stride)[:, head:]
        if out and out[-1][0] == name and out[-1][1].shape[1] == k:
            out[-1] = (name, np.vstack([out[-1][1], cells]))
        else:
            out.append((name, cells))
        r += count * stride
    return out


def read_xdmf(path: Path) -> XdmfMesh:
    """Read one uniform grid of an XDMF file (arrays inline or in HDF5; see the module notes).

    Raises
    ------
    CaseError
        (key ``geometry.file``, one line) for malformed or cut-short XML, a root other than
        ``<Xdmf>``, more than one grid, a missing, unreadable or mismatched HDF5 file, arrays
        shorter than their ``Dimensions``, raw binary or referenced data items, or unknown cell
        types.
    """
    path = Path(path)
    rd = _Reader(path)
    try:
        return rd.read()
    finally:
        rd.close()


def heavy_data_files(path: Path) -> list[Path]:
    """The HDF5 files an XDMF file keeps its arrays in (beside it, as the format has them), so a
    run's record can hash them with the XDMF file; empty for inline arrays or an unreadable file."""
    import xml.etree.ElementTree as ET

    path = Path(path)
    out: list[Path] = []
    try:  # streamed, each element dropped once read: inline arrays are never held as a tree
        for _, item in ET.iterparse(str(path), events=("end",)):
            if item.tag == "DataItem" and _attr(item, "Format").upper() == "HDF":
                name = (item.text or "").strip().rpartition(":")[0]
                if name and (path.parent / name) not in out:
                    out.append(path.parent / name)
            item.clear()
    except (ET.ParseError, OSError):
        return []
    return out
