"""Pictures of a result: von Mises on the deformed shape and the displacement magnitude, and for a
part of several bodies the bodies in colour.

Rendered off-screen with pyvista (VTK) in a child process, so that a machine without a working
OpenGL stack (no X server, no EGL, no OSMesa) costs a fallback, never a crash of the run: VTK
may abort the process when it cannot create a render window. The child tries VTK's default
window (X, then EGL in the VTK >= 9.4 wheels) and OSMesa (first when there is no display and
libOSMesa is installed); when both fail, the pictures are
drawn with matplotlib's 3D axes instead and the report says so.

The view of each picture is chosen so its peak is visible: candidate directions around the outward
normal at the peak are tried in turn and the first from which a ray to the peak meets no other part
of the surface is kept.

Run as ``python -m elastofe.report.render VTU OUT_DIR PARAMS_JSON`` (the child); the parent calls
:func:`render_pictures`.
"""
from __future__ import annotations

import json
import logging
import math
import os
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np

from ..plotting import COLORMAP, body_color

log = logging.getLogger(__name__)

#: Deformed shapes are drawn with the largest displacement at this share of the part size.
DEFORMED_SHARE = 0.06
#: Colour of the peak marker and its label frame (stands apart from every viridis colour).
MARK = "#ff2e88"
WINDOW = (960, 640)


def nice_scale(raw: float) -> float:
    """The largest of 1, 2, 5 x 10^k not above ``raw`` (a readable displacement scale factor)."""
    if not raw > 0 or not math.isfinite(raw):
        return 1.0
    k = math.floor(math.log10(raw))
    for m in (5.0, 2.0, 1.0):
        if m * 10 ** k <= raw:
            return m * 10 ** k
    return 10.0 ** k  # pragma: no cover


def deformation_scale(size: float, umax: float) -> float:
    """Scale factor so the largest displacement is drawn at about :data:`DEFORMED_SHARE` of ``size``."""
    if umax <= 0:
        return 1.0
    raw = DEFORMED_SHARE * size / umax
    return nice_scale(raw) if raw >= 1 else 1.0  # never shrink a displacement that is already large


def color_limits(values: np.ndarray) -> tuple[float, float]:
    """Colour range of a field: its min and max, or from zero when it is constant to round-off
    (so a uniform field shows as one colour, not as magnified noise)."""
    lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
    big = max(abs(lo), abs(hi))
    if big == 0:
        return 0.0, 1.0
    if hi - lo <= 1e-6 * big:
        return min(0.0, lo), max(0.0, hi) if hi > 0 else 0.0
    return lo, hi


def candidate_directions(normal: np.ndarray) -> list[np.ndarray]:
    """View directions (from the focus toward the camera) to try, best first.

    The outward normal at the peak tilted toward each of the eight octant diagonals, then the
    diagonals themselves, then the normal alone.
    """
    n = np.asarray(normal, dtype=float)
    n = n / (np.linalg.norm(n) or 1.0)
    diag = [np.array([sx, sy, sz], dtype=float) / math.sqrt(3) for sz in (1, -1) for sy in (-1, 1) for sx in (1, -1)]
    out = []
    for d in sorted(diag, key=lambda d: -float(d @ n)):
        v = n + 0.7 * d
        if np.linalg.norm(v) > 1e-6:
            out.append(v / np.linalg.norm(v))
    out += sorted(diag, key=lambda d: -float(d @ n))
    out.append(n)
    return out


def view_up(direction: np.ndarray) -> tuple[float, float, float]:
    """z up unless the view looks along z, then y."""
    return (0.0, 1.0, 0.0) if abs(direction[2]) > 0.9 else (0.0, 0.0, 1.0)


# ----------------------------------------------------------------------------- child: pyvista
def _render_child(vtu: str, out_dir: str, params: dict) -> dict:
    import pyvista as pv

    pv.OFF_SCREEN = True
    grid = pv.read(vtu)
    with warnings.catch_warnings():  # the child's own filters: a notice about a future default
        warnings.simplefilter("ignore")
        surf = grid.extract_surface(nonlinear_subdivision=2)
    surf = surf.compute_normals(
        cell_normals=False, point_normals=True, auto_orient_normals=True, split_vertices=False)
    u = np.asarray(surf.point_data["displacement"])
    umag = np.linalg.norm(u, axis=1)
    surf.point_data["|u|"] = umag
    size = float(np.linalg.norm(np.ptp(surf.points, axis=0)))
    sf = params.get("scale") or deformation_scale(size, float(umag.max()))
    warped = surf.warp_by_vector("displacement", factor=sf)
    edges = surf.extract_feature_edges(feature_angle=35, boundary_edges=True, non_manifold_edges=False,
                                       manifold_edges=False)
    out = {"renderer": f"pyvista {pv.__version__} (VTK off-screen)", "scale": sf, "pictures": []}

    def one(field: str, peak_xyz, label: str, title: str, fname: str, deformed: bool):
        mesh = warped if deformed else surf
        ip = int(np.argmin(np.linalg.norm(surf.points - np.asarray(peak_xyz), axis=1)))
        peak = np.asarray(mesh.points[ip])
        normal = np.asarray(surf.point_data["Normals"][ip])
        centre = np.asarray(mesh.center)
        dist = 2.6 * size
        chosen, visible = None, False
        for d in candidate_directions(normal):
            cam = centre + d * dist
            hits, _ = mesh.ray_trace(cam, peak, first_point=True)
            if len(hits) == 0 or np.linalg.norm(np.asarray(hits) - peak) <= 0.01 * size:
                chosen, visible = d, True
                break
        if chosen is None:
            chosen = candidate_directions(normal)[0]
        p = pv.Plotter(off_screen=True, window_size=WINDOW)
        out["renderer"] = f"pyvista {pv.__version__} (VTK off-screen, {type(p.ren_win).__name__})"
        p.set_background("white")
        if deformed:
            p.add_mesh(edges, color="#9a9a9a", line_width=1.0, opacity=0.6)
        sargs = dict(title=label, n_labels=6, fmt="%.4g", color="#222222", vertical=True,
                     position_x=0.86, position_y=0.12, height=0.72, width=0.05, title_font_size=14,
                     label_font_size=12)
        vals = np.asarray(mesh.point_data[field])
        clim = color_limits(vals)
        p.add_mesh(mesh, scalars=field, cmap=COLORMAP, smooth_shading=True, scalar_bar_args=sargs,
                   show_scalar_bar=True, clim=clim)
        r = 0.018 * size
        ring = pv.Disc(center=peak, inner=0.9 * r, outer=1.6 * r, normal=chosen, c_res=48)
        p.add_mesh(ring, color=MARK, lighting=False)
        p.add_mesh(pv.Sphere(radius=0.45 * r, center=peak), color=MARK, lighting=False)
        val = float(mesh.point_data[field][ip])
        p.add_point_labels([peak + chosen * 2 * r], [f"peak {val:.4g}"], font_size=14, text_color="#222222",
                           shape_color="white", shape_opacity=0.85, point_size=1, show_points=False,
                           always_visible=True, margin=4)
        p.add_text(title, position="upper_left", font_size=10, color="#222222")
        p.camera.focal_point = centre
        p.camera.position = centre + chosen * dist
        p.camera.up = view_up(chosen)
        p.reset_camera()
        p.camera.zoom(1.15)
        tmp = Path(out_dir) / f".{fname}.part.png"
        p.screenshot(str(tmp))
        p.close()
        os.replace(tmp, Path(out_dir) / fname)
        return {"file": fname, "field": field, "peak": peak.tolist(), "peak_value": val,
                "view_direction": chosen.tolist(), "peak_visible": visible, "deformed": deformed}

    lab = params["labels"]
    out["pictures"].append(one("von_mises", params["peak_von_mises"], f"von Mises [{lab['stress']}]",
                               f"von Mises stress on the deformed shape (displacements x {sf:g})",
                               "picture-von-mises.png", True))
    out["pictures"].append(one("|u|", params["peak_displacement"], f"displacement [{lab['length']}]",
                               f"Displacement magnitude on the deformed shape (displacements x {sf:g})",
                               "picture-displacement.png", True))
    if "body" in surf.cell_data and np.unique(np.asarray(surf.cell_data["body"])).size > 1:
        ids = np.unique(np.asarray(surf.cell_data["body"]))
        pos = np.searchsorted(ids, np.asarray(surf.cell_data["body"]))
        rgb = np.array([[int(body_color(i)[k:k + 2], 16) for k in (1, 3, 5)] for i in range(ids.size)], dtype=np.uint8)
        surf.cell_data["body colour"] = rgb[pos]
        p = pv.Plotter(off_screen=True, window_size=WINDOW)
        p.set_background("white")
        p.add_mesh(surf, scalars="body colour", rgb=True, smooth_shading=False)
        p.add_mesh(edges, color="#333333", line_width=1.2)
        p.add_text("Bodies, one colour each (undeformed)", position="upper_left", font_size=10, color="#222222")
        p.camera_position = "iso"
        p.reset_camera()
        p.camera.zoom(1.15)
        tmp = Path(out_dir) / ".picture-bodies.png.part.png"
        p.screenshot(str(tmp))
        p.close()
        os.replace(tmp, Path(out_dir) / "picture-bodies.png")
        out["pictures"].append({"file": "picture-bodies.png", "field": "body",
                                "bodies": {str(int(b)): body_color(i) for i, b in enumerate(ids)}})
    return out


# ----------------------------------------------------------------------------- fallback: matplotlib
def _render_matplotlib(vtu: Path, out_dir: Path, params: dict, reason: str) -> dict:
    import matplotlib

    import matplotlib.pyplot as plt
    import meshio
    from mpl_toolkits.mplot3d.art3d import Poly3DCollection

    from ..mesh import boundary_faces
    from ..plotting import RC, save_figure

    m = meshio.read(str(vtu))
    cells = max((c.data for c in m.cells if c.type in ("tetra", "tetra10")), key=lambda a: a.shape[1])
    pts = np.asarray(m.points, dtype=float)
    faces = boundary_faces(cells)[:, :3]
    u = np.asarray(m.point_data["displacement"])
    umag = np.linalg.norm(u, axis=1)
    size = float(np.linalg.norm(np.ptp(pts, axis=0)))
    sf = params.get("scale") or deformation_scale(size, float(umag.max()))
    X = pts + sf * u
    out = {"renderer": f"matplotlib {matplotlib.__version__} 3D axes (fallback: {reason})", "scale": sf,
           "pictures": []}
    lab = params["labels"]
    # Outward normal at each node from its boundary faces, to choose the view.
    fn = np.cross(pts[faces[:, 1]] - pts[faces[:, 0]], pts[faces[:, 2]] - pts[faces[:, 0]])
    nn = np.zeros_like(pts)
    for k in range(3):
        np.add.at(nn, faces[:, k], fn)

    def one(values, peak_xyz, label, title, fname):
        ip = int(np.argmin(np.linalg.norm(pts - np.asarray(peak_xyz), axis=1)))
        d = candidate_directions(nn[ip])[0]
        elev = math.degrees(math.asin(max(-1.0, min(1.0, d[2]))))
        azim = math.degrees(math.atan2(d[1], d[0]))
        with matplotlib.rc_context(RC):
            fig = plt.figure(figsize=(8.7, 5.8))
            ax = fig.add_subplot(111, projection="3d")
            fv = values[faces].mean(axis=1)
            norm = matplotlib.colors.Normalize(*color_limits(values))
            cmap = matplotlib.colormaps[COLORMAP]
            coll = Poly3DCollection(X[faces], facecolors=cmap(norm(fv)), edgecolors="none", linewidths=0)
            ax.add_collection3d(coll)
            lo, hi = X.min(axis=0), X.max(axis=0)
            c, half = 0.5 * (lo + hi), 0.5 * (hi - lo).max()
            ax.set_xlim(c[0] - half, c[0] + half)
            ax.set_ylim(c[1] - half, c[1] + half)
            ax.set_zlim(c[2] - half, c[2] + half)
            ax.view_init(elev=elev, azim=azim)
            ax.set_axis_off()
            pk = X[ip]
            ax.scatter([pk[0]], [pk[1]], [pk[2]], s=160, facecolors="none", edgecolors=MARK, linewidths=2.2,
                       depthshade=False)
            ax.text(pk[0], pk[1], pk[2], f"  peak {values[ip]:.4g}", color="#222222", fontsize=9)
            sm = matplotlib.cm.ScalarMappable(norm=norm, cmap=cmap)
            fig.colorbar(sm, ax=ax, shrink=0.7, label=label)
            ax.set_title(title, fontsize=10)
            save_figure(fig, out_dir / fname)
        return {"file": fname, "peak": X[ip].tolist(), "peak_value": float(values[ip]),
                "view_direction": d.tolist(), "peak_visible": None, "deformed": True}

    vm = np.asarray(m.point_data["von_mises"])
    out["pictures"].append(one(vm, params["peak_von_mises"], f"von Mises [{lab['stress']}]",
                               f"von Mises stress on the deformed shape (displacements x {sf:g})",
                               "picture-von-mises.png"))
    out["pictures"].append(one(umag, params["peak_displacement"], f"displacement [{lab['length']}]",
                               f"Displacement magnitude on the deformed shape (displacements x {sf:g})",
                               "picture-displacement.png"))
    body = m.cell_data.get("body")
    if body is not None:
        cb = np.concatenate([np.asarray(b).ravel() for b, c in zip(body, m.cells) if c.type in ("tetra", "tetra10")])
        ids = np.unique(cb)
        if ids.size > 1 and cb.size == cells.shape[0]:
            # Each node of result.vtu lies in one body (it is written broken at the interfaces).
            node_body = np.zeros(pts.shape[0], dtype=np.int64)
            node_body[cells.ravel()] = np.repeat(np.searchsorted(ids, cb), cells.shape[1])
            colours = [body_color(i) for i in range(ids.size)]
            with matplotlib.rc_context(RC):
                fig = plt.figure(figsize=(8.7, 5.8))
                ax = fig.add_subplot(111, projection="3d")
                coll = Poly3DCollection(pts[faces], facecolors=[colours[k] for k in node_body[faces[:, 0]]],
                                        edgecolors="none", linewidths=0)
                ax.add_collection3d(coll)
                lo, hi = pts.min(axis=0), pts.max(axis=0)
                c, half = 0.5 * (lo + hi), 0.5 * (hi - lo).max()
                ax.set_xlim(c[0] - half, c[0] + half)
                ax.set_ylim(c[1] - half, c[1] + half)
                ax.set_zlim(c[2] - half, c[2] + half)
                ax.set_axis_off()
                ax.set_title("Bodies, one colour each (undeformed)", fontsize=10)
                save_figure(fig, out_dir / "picture-bodies.png")
            out["pictures"].append({"file": "picture-bodies.png", "field": "body",
                                    "bodies": {str(int(b)): colours[i] for i, b in enumerate(ids)}})
    return out


# ----------------------------------------------------------------------------- parent
def _window_order() -> list[dict]:
    """VTK render windows to try, as environment overrides: without a display, OSMesa first when
    its library is installed (measured here: 1.5 s to the first picture against 3-4 s for EGL);
    otherwise VTK's default choice (X, then EGL), then OSMesa."""
    import ctypes.util

    osmesa = {"VTK_DEFAULT_OPENGL_WINDOW": "vtkOSOpenGLRenderWindow"}
    if not os.environ.get("DISPLAY") and ctypes.util.find_library("OSMesa"):
        return [osmesa, {}]
    return [{}, osmesa]


def render_pictures(vtu: Path, out_dir: Path, params: dict, timeout: float = 240.0) -> dict:
    """Render the pictures of ``vtu`` into ``out_dir``; returns what was drawn and how.

    ``params``: ``labels`` (unit labels), ``peak_von_mises`` and ``peak_displacement`` (3,) points,
    optional ``scale``. Set ``ELASTOFE_RENDER=matplotlib`` to skip VTK.
    """
    vtu, out_dir = Path(vtu), Path(out_dir)
    reasons = []
    if os.environ.get("ELASTOFE_RENDER", "").lower() != "matplotlib":
        # The child must import this very package (not another installed copy).
        pkg_root = str(Path(__file__).resolve().parents[2])
        path = os.pathsep.join([pkg_root] + [p for p in os.environ.get("PYTHONPATH", "").split(os.pathsep) if p])
        for extra in _window_order():
            env = dict(os.environ, PYTHONPATH=path, **extra)
            try:
                cp = subprocess.run([sys.executable, "-m", "elastofe.report.render", str(vtu), str(out_dir),
                                     json.dumps(params)], capture_output=True, text=True, timeout=timeout, env=env)
            except subprocess.TimeoutExpired:
                reasons.append(f"off-screen rendering timed out after {timeout:g} s")
                continue
            last = cp.stdout.strip().splitlines()[-1] if cp.stdout.strip() else ""
            if cp.returncode == 0 and last.startswith("{"):
                return json.loads(last)
            tail = (cp.stderr.strip().splitlines() or ["no message"])[-1]
            reasons.append(f"VTK window {extra.get('VTK_DEFAULT_OPENGL_WINDOW', 'default')}: exit {cp.returncode}, {tail[:160]}")
    else:
        reasons.append("ELASTOFE_RENDER=matplotlib")
    log.warning("pyvista rendering unavailable (%s); drawing with matplotlib", "; ".join(reasons))
    return _render_matplotlib(vtu, out_dir, params, "; ".join(reasons))


def _main(argv: list[str]) -> int:
    vtu, out_dir, params = argv[0], argv[1], json.loads(argv[2])
    print(json.dumps(_render_child(vtu, out_dir, params)))
    return 0


if __name__ == "__main__":  # pragma: no cover - the child process
    sys.exit(_main(sys.argv[1:]))
