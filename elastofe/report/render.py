"""The report's pictures, drawn from the plan of :mod:`.scene`.

Rendered off-screen with pyvista (VTK) in a child process, so that a machine without a working
OpenGL stack (no X server, no EGL, no OSMesa) costs a fallback, never a crash of the run: VTK
may abort the process when it cannot create a render window. The child tries VTK's default
window (X, then EGL in the VTK >= 9.4 wheels) and OSMesa (first when there is no display and
libOSMesa is installed); when both fail, the same plan is drawn with matplotlib's 3D axes and the
report says so.

Every picture uses parallel projection, a view from :mod:`.scene` (isometric, or one that shows a
peak), the part filling the frame, an axis triad in the lower left corner whose colours are those
of the held-direction symbols, and peak marks of our own (a black ring with a white halo and a tag).

Run as ``python -m elastofe.report.render OUT_DIR PARAMS_JSON`` (the child); the parent calls
:func:`render_pictures`.
"""
from __future__ import annotations

import json
import logging
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np

from ..plotting import COLORMAP, DIRECTION_COLORS, LOAD_COLOR, MOMENT_COLOR, OVER_RANGE, PART_COLOR, SIZE_COLORMAP
from .scene import candidate_directions, color_limits, deformation_scale, nice_scale, plan, record, unit, view_up  # noqa: F401

log = logging.getLogger(__name__)

WINDOW = (1000, 660)
MODEL_WINDOW = (1300, 620)
#: Share of a model view's width kept free at its right for load labels ("load[12] pressure", font 12).
MODEL_LABEL_ROOM = 0.2
#: Picture text and marks.
INK = "#1f2327"


def _fmt(v: float) -> str:
    return f"{v:.4g}"


# ----------------------------------------------------------------------------- child: pyvista
def _poly(points: np.ndarray, tri: np.ndarray):
    import pyvista as pv

    return pv.PolyData(points, np.column_stack([np.full(tri.shape[0], 3), tri]).ravel())


def _camera(p, view: dict, aspect: float, reserve_right: float, pts: np.ndarray) -> dict:
    from .scene import fit_view

    v = fit_view(pts, view["direction"], aspect, reserve_right)
    cam = p.camera
    cam.parallel_projection = True
    cam.focal_point = v["focal"]
    cam.position = v["position"]
    cam.up = v["up"]
    cam.parallel_scale = v["parallel_scale"]
    p.renderer.ResetCameraClippingRange()
    return v


def _triad(p) -> None:
    p.add_axes(line_width=3, x_color=DIRECTION_COLORS["x"], y_color=DIRECTION_COLORS["y"],
               z_color=DIRECTION_COLORS["z"], xlabel="x", ylabel="y", zlabel="z", viewport=(0.0, 0.0, 0.14, 0.2))


#: Share of a field picture's height at its top that holds the title (fit_view's reserve_top, plus the
#: height of a tag line).
TITLE_ROOM = 0.16


def tag_below(height: float, parallel_scale: float) -> bool:
    """Whether a peak's tag, ``height`` above the view's centre (length unit) when put above the peak,
    would reach the title at the top of the picture (half the view's height is ``parallel_scale``)."""
    return height > parallel_scale * (1.0 - 2.0 * TITLE_ROOM)


def _marks(p, X: np.ndarray, marks: list, fit: dict, size: float, unit_label: str) -> None:
    """Each peak: a black ring on a white halo in front of the surface, and a tag joined to it by a
    leader line (tags of several peaks stacked apart so none hides another)."""
    import pyvista as pv

    d, up, right = unit(fit["direction"]), fit["up"], fit["right"]
    r = 0.011 * size
    for k, m in enumerate(marks):
        at = X[m["node"]] + d * 0.15 * size        # toward the viewer: same place on the screen, never hidden
        p.add_mesh(pv.Disc(center=at, inner=1.2 * r, outer=1.8 * r, normal=d, c_res=48), color="white", lighting=False)
        p.add_mesh(pv.Disc(center=at + d * 0.002 * size, inner=0.75 * r, outer=1.2 * r, normal=d, c_res=48),
                   color="black", lighting=False)
        side = -1.0 if (at - fit["focal"]) @ right > 0 else 1.0   # tags lean toward the middle of the picture
        rise = (0.09 + 0.08 * k) * fit["parallel_scale"] * 2
        tag = at + up * rise + side * right * 0.1 * size
        below = tag_below(float((tag - fit["focal"]) @ up), fit["parallel_scale"])
        if below:   # above it the tag would run into the picture's title: hang it below the peak
            tag = tag - up * 2 * rise
        p.add_mesh(pv.Line(at + up * (-1.8 if below else 1.8) * r, tag), color="black", line_width=1.2)
        p.add_point_labels([tag], [f"{m['name']}: {_fmt(m['value'])} {unit_label}"], font_size=13, text_color=INK,
                           shape_color="white", shape_opacity=0.92, point_size=1, show_points=False,
                           always_visible=True, margin=3)


def _glyphs(p, model: dict, size: float) -> None:
    import pyvista as pv

    by_color: dict[str, list] = {}
    r = 0.004 * size
    for sp in model["supports"]:
        for s in sp["symbols"]:
            d = s["to"] - s["at"]
            L = float(np.linalg.norm(d))
            if L <= 0:
                continue
            c = DIRECTION_COLORS.get(s["letter"], DIRECTION_COLORS["elastic"])
            by_color.setdefault(c, []).append(pv.Cylinder(center=s["at"] + 0.5 * d, direction=d, radius=r,
                                                          height=L, resolution=12))
            by_color.setdefault(c, []).append(pv.Cylinder(center=s["to"], direction=d, radius=3.2 * r,
                                                          height=0.9 * r, resolution=24))
    for col, parts in by_color.items():
        p.add_mesh(pv.merge(parts), color=col, smooth_shading=True)
    arrows, moments, lines, labels, where = [], [], [], [], []
    for ld in model["loads"]:
        for tail, tip in ld["arrows"]:
            d = np.asarray(tip) - np.asarray(tail)
            if np.linalg.norm(d) > 0:
                arrows.append(pv.Arrow(start=tail, direction=d, scale=float(np.linalg.norm(d)), tip_length=0.25,
                                       tip_radius=0.07, shaft_radius=0.025))
        for at, end in ld["moments"]:
            d = np.asarray(end) - np.asarray(at)
            L = float(np.linalg.norm(d))
            moments.append(pv.Arrow(start=at, direction=d, scale=L, tip_length=0.2, tip_radius=0.07,
                                    shaft_radius=0.02))
            moments.append(pv.Cone(center=np.asarray(at) + d * 0.72, direction=d, height=0.16 * L, radius=0.07 * L,
                                   resolution=24))
        for a, b in ld["lines"]:
            lines.append(pv.Line(a, b))
        if ld["label_at"] is not None:
            labels.append(f"{ld['label'].split(' ')[0]} {ld['kind']}")   # short; the table beside says the rest
            where.append(ld["label_at"])
    if arrows:
        p.add_mesh(pv.merge(arrows), color=LOAD_COLOR, smooth_shading=True)
    if moments:
        p.add_mesh(pv.merge(moments), color=MOMENT_COLOR, smooth_shading=True)
    if lines:
        p.add_mesh(pv.merge(lines), color=LOAD_COLOR, line_width=1.5)
    if labels:
        p.add_point_labels(np.asarray(where), labels, font_size=12, text_color=LOAD_COLOR, shape_color="white",
                           shape_opacity=0.85, point_size=1, show_points=False, always_visible=True, margin=3)


def _draw_pyvista(pl: dict, spec: dict, out_dir: Path) -> dict:
    import pyvista as pv

    from .scene import model_points

    data, size = pl["data"], pl["size"]
    X = spec["warp"] if spec.get("warp") is not None else (pl["warped"] if spec["deformed"] else data["points"])
    kind = spec["kind"]
    window = MODEL_WINDOW if kind == "model" else WINDOW
    ncol = len(spec["views"])
    p = pv.Plotter(off_screen=True, window_size=window, shape=(1, ncol), border=False)
    p.set_background("white")
    for j, vname in enumerate(spec["views"]):
        view = pl["views"][vname]
        p.subplot(0, j)
        if kind == "model":
            p.add_mesh(_poly(data["points"], data["tri"]), color=PART_COLOR, smooth_shading=False)
            _glyphs(p, pl["model"], size)
            # Load labels are written rightward from their anchor: keep room for them at the right edge
            # (the label of an arrow ending at the right of the part ran into the next view).
            reserve = MODEL_LABEL_ROOM
            p.add_text(f"{spec['title']}: view from {_dir_text(view['direction'])}", position="upper_left",
                       font_size=9, color=INK)
        else:
            surf = _poly(X, data["tri"] if kind == "field" else data["faces"][:, :3])
            vals = spec["values"]
            surf.point_data[spec["field"]] = vals
            lo, hi = spec["clim"]
            sargs = dict(title=spec["bar"] + "\n", n_labels=6, fmt="%.4g", color=INK, vertical=True,
                         position_x=0.88, position_y=0.14, height=0.68, width=0.04, title_font_size=13,
                         label_font_size=12)
            kw = {}
            if spec.get("over"):
                kw["above_color"] = OVER_RANGE
            if spec.get("colors"):  # categories (bodies): their own colours, named in the caption
                kw["show_scalar_bar"] = False
            p.add_mesh(surf, scalars=spec["field"], cmap=_cmap(spec), clim=(lo, hi), scalar_bar_args=sargs,
                       show_edges=kind == "mesh", edge_color="#2b2b2b", line_width=0.6,
                       smooth_shading=kind != "mesh", **kw)
            if spec["deformed"]:
                edges = _poly(data["points"], data["faces"][:, :3]).extract_feature_edges(
                    feature_angle=35, boundary_edges=True, non_manifold_edges=False, manifold_edges=False)
                p.add_mesh(edges, color="#3c3c3c", line_width=1.3, opacity=0.85)
            reserve = 0.16
            aspect = (window[0] / ncol) / window[1]
            fit = _camera(p, view, aspect, reserve, X)
            _marks(p, X, spec["marks"], fit, size, spec["bar"].split("[")[-1].rstrip("]"))
            p.add_text(spec["title"], position="upper_left", font_size=10, color=INK)
            if spec.get("over"):
                p.add_text("red: above the top of the scale", position="lower_right", font_size=9, color=OVER_RANGE)
        _triad(p)
        aspect = (window[0] / ncol) / window[1]
        _camera(p, view, aspect, reserve, model_points(pl["model"], X) if kind == "model" else X)
    tmp = Path(out_dir) / f".{spec['file']}.part.png"
    p.screenshot(str(tmp))
    p.close()
    os.replace(tmp, Path(out_dir) / spec["file"])
    return {}


def _cmap(spec: dict):
    """The colour map of a picture: its own categories' colours, or the size or field map by name."""
    if spec.get("colors"):
        from matplotlib.colors import ListedColormap

        return ListedColormap(spec["colors"])
    return SIZE_COLORMAP if spec["kind"] == "mesh" else COLORMAP


def _dir_text(d) -> str:
    return "(" + ", ".join(f"{c:.2f}" for c in d) + ")"


def _render_child(out_dir: str, params: dict) -> dict:
    import pyvista as pv

    pv.OFF_SCREEN = True
    summary = json.loads((Path(out_dir) / "summary.json").read_text(encoding="utf-8"))
    pl = plan(Path(out_dir), summary, params.get("scale"))
    drawn = []
    window_name = "?"
    for spec in pl["pictures"]:
        drawn.append(_draw_pyvista(pl, spec, Path(out_dir)))
    try:
        window_name = type(pv.Plotter(off_screen=True).ren_win).__name__
    except Exception:  # the name is for the record only
        pass
    return record(pl, drawn, f"pyvista {pv.__version__} (VTK off-screen, {window_name})")


# ----------------------------------------------------------------------------- fallback: matplotlib
def _render_matplotlib(out_dir: Path, summary: dict, params: dict, reason: str) -> dict:
    import matplotlib
    import matplotlib.pyplot as plt
    from mpl_toolkits.mplot3d.art3d import Line3DCollection, Poly3DCollection

    from ..plotting import RC, save_figure

    pl = plan(out_dir, summary, params.get("scale"))
    data = pl["data"]
    drawn = []
    for spec in pl["pictures"]:
        X = spec["warp"] if spec.get("warp") is not None else (pl["warped"] if spec["deformed"] else data["points"])
        ncol = len(spec["views"])
        with matplotlib.rc_context(RC):
            fig = plt.figure(figsize=(6.2 * ncol if ncol > 1 else 9.0, 6.0))
            for j, vname in enumerate(spec["views"]):
                d = unit(pl["views"][vname]["direction"])
                ax = fig.add_subplot(1, ncol, j + 1, projection="3d")
                ax.set_proj_type("ortho")
                tri = data["tri"] if spec["kind"] != "mesh" else data["faces"][:, :3]
                if spec["values"] is None:
                    colors = np.tile(matplotlib.colors.to_rgba(PART_COLOR), (tri.shape[0], 1))
                else:
                    lo, hi = spec["clim"]
                    norm = matplotlib.colors.Normalize(lo, hi)
                    cmap = _cmap(spec)
                    cmap = matplotlib.colormaps[cmap] if isinstance(cmap, str) else cmap
                    fv = spec["values"][tri].mean(axis=1)
                    colors = cmap(norm(np.clip(fv, lo, hi)))
                    if spec.get("over"):
                        colors[fv > hi] = matplotlib.colors.to_rgba(OVER_RANGE)
                # light: shade by the angle to the view
                p0, p1, p2 = X[tri[:, 0]], X[tri[:, 1]], X[tri[:, 2]]
                nrm = np.cross(p1 - p0, p2 - p0)
                nrm /= np.maximum(np.linalg.norm(nrm, axis=1, keepdims=True), 1e-300)
                shade = 0.55 + 0.45 * np.abs(nrm @ d)
                colors[:, :3] *= shade[:, None]
                ax.add_collection3d(Poly3DCollection(X[tri], facecolors=colors,
                                                     edgecolors="#2b2b2b" if spec["kind"] == "mesh" else "none",
                                                     linewidths=0.2))
                if spec["kind"] == "model":
                    for sp in pl["model"]["supports"]:
                        for s in sp["symbols"]:
                            ax.add_collection3d(Line3DCollection([[s["at"], s["to"]]], colors=DIRECTION_COLORS.get(
                                s["letter"], DIRECTION_COLORS["elastic"]), linewidths=3))
                            ax.scatter(*s["to"], s=30, color=DIRECTION_COLORS.get(s["letter"], "#666666"),
                                       depthshade=False)
                    for ld in pl["model"]["loads"]:
                        for tail, tip in ld["arrows"]:
                            dd = np.asarray(tip) - np.asarray(tail)
                            ax.quiver(*tail, *dd, color=LOAD_COLOR, linewidth=2, arrow_length_ratio=0.25)
                        for at, end in ld["moments"]:
                            dd = np.asarray(end) - np.asarray(at)
                            ax.quiver(*at, *dd, color=MOMENT_COLOR, linewidth=2, arrow_length_ratio=0.3)
                        for a, b in ld["lines"]:
                            ax.add_collection3d(Line3DCollection([[a, b]], colors=LOAD_COLOR, linewidths=1))
                        if ld["label_at"] is not None:
                            ax.text(*ld["label_at"], f"{ld['label'].split(' ')[0]} {ld['kind']}", color=LOAD_COLOR,
                                    fontsize=8)
                for m in spec["marks"]:
                    pk = X[m["node"]]
                    ax.scatter([pk[0]], [pk[1]], [pk[2]], s=170, facecolors="white", edgecolors="black",
                               linewidths=2.2, depthshade=False)
                    ax.text(*pk, f"  {m['name']}: {_fmt(m['value'])}", color=INK, fontsize=8)
                lo3, hi3 = X.min(axis=0), X.max(axis=0)
                c, half = 0.5 * (lo3 + hi3), 0.5 * (hi3 - lo3).max()
                ax.set_xlim(c[0] - half, c[0] + half)
                ax.set_ylim(c[1] - half, c[1] + half)
                ax.set_zlim(c[2] - half, c[2] + half)
                ax.set_box_aspect((1, 1, 1))
                ax.view_init(elev=math.degrees(math.asin(max(-1.0, min(1.0, d[2])))),
                             azim=math.degrees(math.atan2(d[1], d[0])))
                ax.set_xlabel("x")
                ax.set_ylabel("y")
                ax.set_zlabel("z")
                ax.tick_params(labelsize=6)
                if spec["values"] is not None and not spec.get("colors"):
                    sm = matplotlib.cm.ScalarMappable(norm=matplotlib.colors.Normalize(*spec["clim"]),
                                                      cmap=SIZE_COLORMAP if spec["kind"] == "mesh" else COLORMAP)
                    fig.colorbar(sm, ax=ax, shrink=0.7, label=spec["bar"], extend="max" if spec.get("over") else None)
            fig.suptitle(spec["title"], fontsize=10)
            save_figure(fig, out_dir / spec["file"])
        drawn.append({})
    return record(pl, drawn, f"matplotlib {matplotlib.__version__} 3D axes (fallback: {reason})")


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


def render_pictures(out_dir: Path, params: dict | None = None, timeout: float = 300.0) -> dict:
    """Render the pictures of the output folder ``out_dir`` into it; returns what was drawn and how
    (the content of pictures.json).

    ``params``: optional ``scale`` (displacement scale factor). Set ``ELASTOFE_RENDER=matplotlib``
    to skip VTK.
    """
    out_dir = Path(out_dir)
    params = dict(params or {})
    reasons = []
    if os.environ.get("ELASTOFE_RENDER", "").lower() != "matplotlib":
        # The child must import this very package (not another installed copy).
        pkg_root = str(Path(__file__).resolve().parents[2])
        path = os.pathsep.join([pkg_root] + [p for p in os.environ.get("PYTHONPATH", "").split(os.pathsep) if p])
        for extra in _window_order():
            env = dict(os.environ, PYTHONPATH=path, **extra)
            try:
                cp = subprocess.run([sys.executable, "-m", "elastofe.report.render", str(out_dir), json.dumps(params)],
                                    capture_output=True, text=True, timeout=timeout, env=env)
            except subprocess.TimeoutExpired:
                reasons.append(f"off-screen rendering timed out after {timeout:g} s")
                continue
            last = cp.stdout.strip().splitlines()[-1] if cp.stdout.strip() else ""
            if cp.returncode == 0 and last.startswith("{"):
                return json.loads(last)
            tail = (cp.stderr.strip().splitlines() or ["no message"])[-1]
            reasons.append(f"VTK window {extra.get('VTK_DEFAULT_OPENGL_WINDOW', 'default')}: "
                           f"exit {cp.returncode}, {tail[:160]}")
    else:
        reasons.append("ELASTOFE_RENDER=matplotlib")
    log.warning("pyvista rendering unavailable (%s); drawing with matplotlib", "; ".join(reasons))
    summary = json.loads((out_dir / "summary.json").read_text(encoding="utf-8"))
    return _render_matplotlib(out_dir, summary, params, "; ".join(reasons))


def _main(argv: list[str]) -> int:
    out_dir, params = argv[0], json.loads(argv[1])
    print(json.dumps(_render_child(out_dir, params)))
    return 0


if __name__ == "__main__":  # pragma: no cover - the child process
    sys.exit(_main(sys.argv[1:]))
