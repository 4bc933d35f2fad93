"""Line plots and convergence plots of the report (matplotlib, our own style).

Each function writes one PNG atomically and returns its file name; inputs are the plain documents
a run writes (``summary.json``, the line CSVs, ``study.json``), never the solver's objects.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ..plotting import COLORMAP, ESTIMATE, OURS, save_figure, styled, tidy_axis


def read_line_csv(path: Path) -> dict[str, np.ndarray]:
    """A line CSV (``s [mm],x [mm],...,von_mises [MPa]``) as columns keyed by name without the unit
    (``s``, ``x``, ..., ``von_mises``); blank fields (outside the part) as NaN."""
    with open(path, encoding="utf-8") as f:
        header = [h.split("[")[0].strip() for h in f.readline().strip().split(",")]
        rows = [[float(c) if c.strip() else np.nan for c in ln.rstrip("\n").split(",")] for ln in f if ln.strip()]
    data = np.array(rows, dtype=float).reshape(-1, len(header))
    return {h: data[:, j] for j, h in enumerate(header)}


def beam_lines(summary: dict) -> dict[str, list[tuple[str, dict]]]:
    """``{line name: [(beam name, line entry)]}`` of the beam-theory estimates in a summary, if any."""
    out: dict[str, list] = {}
    for bname, est in (summary.get("estimates") or {}).items():
        if not isinstance(est, dict):
            continue
        for lname, entry in (est.get("lines") or {}).items():
            if isinstance(entry, dict) and isinstance(entry.get("samples"), dict):
                out.setdefault(lname, []).append((bname, entry))
    return out


COMPONENTS = ("xx", "yy", "zz", "xy", "yz", "xz")


def tensor(c: dict | np.ndarray) -> np.ndarray:
    """3 x 3 symmetric tensors ``(..., 3, 3)`` from components xx, yy, zz, xy, yz, xz (a dict of
    them, or an array ``(..., 6)`` in that order)."""
    if isinstance(c, dict):
        v = np.array([float(c.get(k, 0.0)) for k in COMPONENTS])
    else:
        v = np.asarray(c, dtype=float)
    xx, yy, zz, xy, yz, xz = np.moveaxis(v, -1, 0)
    return np.stack([np.stack([xx, xy, xz], -1), np.stack([xy, yy, yz], -1), np.stack([xz, yz, zz], -1)], -2)


def section_frame(cols: dict, prefer: np.ndarray | None = None) -> dict:
    """The cutting plane of a line and its own axes.

    The plane contains the line (direction ``t``, start to end); its normal ``n`` is ``prefer`` made
    perpendicular to ``t`` when given (a beam's axis), else the direction perpendicular to ``t`` that
    carries the largest normal stress along the line (the maximum of the sum of squares of ``n·σ·n``
    over the samples, searched to 0.0025 degrees). ``b = n × t`` completes the frame. Returns
    ``{"t", "n", "b"}`` (unit vectors (3,)) and, per sample, ``normal`` (σ_nn), ``shear`` (σ_nt: in
    the plane, along the line) and ``shear_b`` (σ_nb), shapes ``(k,)``.
    """
    xyz = np.column_stack([cols["x"], cols["y"], cols["z"]])
    t = xyz[-1] - xyz[0]
    t = t / (np.linalg.norm(t) or 1.0)
    S = tensor(np.column_stack([cols["s" + c] for c in COMPONENTS]))
    ok = np.isfinite(S).all(axis=(1, 2))
    e1 = np.cross(t, [1.0, 0.0, 0.0] if abs(t[0]) < 0.9 else [0.0, 1.0, 0.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(t, e1)
    n = None
    if prefer is not None:
        v = np.asarray(prefer, dtype=float) - (np.asarray(prefer, dtype=float) @ t) * t
        if np.linalg.norm(v) > 1e-6:
            n = v / np.linalg.norm(v)
    if n is None:
        def best(th):
            cand = np.cos(th)[:, None] * e1 + np.sin(th)[:, None] * e2            # (a, 3)
            snn = np.einsum("ai,kij,aj->ak", cand, S[ok], cand) if ok.any() else np.zeros((th.size, 1))
            j = int(np.argmax((snn ** 2).sum(axis=1)))
            return th[j], cand[j]

        th0, _ = best(np.radians(np.arange(0.0, 180.0, 0.5)))
        _, n = best(th0 + np.radians(np.linspace(-0.5, 0.5, 401)))     # to 0.0025 degrees
    # a readable sign: the normal's largest component positive
    if n[int(np.argmax(np.abs(n)))] < 0:
        n = -n
    b = np.cross(n, t)
    return {"t": t, "n": n, "b": b, "normal": np.einsum("i,kij,j->k", n, S, n),
            "shear": np.einsum("i,kij,j->k", t, S, n), "shear_b": np.einsum("i,kij,j->k", b, S, n)}


def in_frame(components: dict, frame: dict) -> dict:
    """A tensor given by its components (a dict xx..xz) as ``normal``, ``shear`` and ``shear_b`` in the
    section frame of :func:`section_frame`."""
    T = tensor(components)
    n, t, b = frame["n"], frame["t"], frame["b"]
    return {"normal": float(n @ T @ n), "shear": float(t @ T @ n), "shear_b": float(b @ T @ n)}


@styled
def line_plot(name: str, cols: dict, summary: dict, target: Path, frame: dict | None = None) -> dict:
    """von Mises, stress components, and the stresses in the section's own frame (``frame`` from
    :func:`section_frame`) along one line, with the beam-theory estimate when present.

    Returns what was drawn: ``{"file", "estimate": bool}``.
    """
    import matplotlib
    import matplotlib.pyplot as plt

    lab = summary["units"]
    est = beam_lines(summary).get(name, [])
    panels = 4 if est else 3
    fig, axes = plt.subplots(panels, 1, figsize=(7.2, 2.1 * panels + 0.5), sharex=True)
    s = cols["s"]
    ax = axes[0]
    ax.plot(s, cols["von_mises"], color=OURS, lw=2.0)
    ax.set_ylabel(f"von Mises [{lab['stress']}]")
    tidy_axis(ax, cols["von_mises"])
    ax = axes[1]
    comps = ["sxx", "syy", "szz", "sxy", "syz", "sxz"]
    cmap = matplotlib.colormaps[COLORMAP]
    big = max(np.nanmax(np.abs(cols[c])) if np.isfinite(cols[c]).any() else 0.0 for c in comps)
    for k, c in enumerate(comps):
        y = cols[c]
        if big > 0 and np.nanmax(np.abs(y)) >= 0.02 * big:
            ax.plot(s, y, color=cmap(k / 5.5), lw=1.6, label=f"σ{c[1:]}")
    ax.axhline(0.0, color="0.6", lw=0.8)
    ax.set_ylabel(f"stress [{lab['stress']}]")
    tidy_axis(ax, np.concatenate([cols[c] for c in comps]))
    ax.legend(loc="best", fontsize=8, ncol=3)
    fr = frame if frame is not None else section_frame(cols)
    ax = axes[2]
    ax.plot(s, fr["normal"], color=cmap(0.15), lw=2.0, label="σn: normal to the cutting plane")
    ax.plot(s, fr["shear"], color=cmap(0.7), lw=1.8, ls="-.", label="τ: in the plane, along the line")
    if np.nanmax(np.abs(fr["shear_b"])) >= 0.02 * max(np.nanmax(np.abs(fr["normal"])), 1e-300):
        ax.plot(s, fr["shear_b"], color=cmap(0.9), lw=1.2, ls=":", label="τ across the line")
    ax.axhline(0.0, color="0.6", lw=0.8)
    ax.set_ylabel(f"section frame [{lab['stress']}]")
    tidy_axis(ax, np.concatenate([fr["normal"], fr["shear"]]))
    ax.legend(loc="best", fontsize=8)
    if est:
        ax = axes[3]
        for bname, entry in est:
            smp = entry["samples"]
            ss = np.asarray(smp.get("s", s), dtype=float)
            fe = np.array([np.nan if v is None else v for v in smp.get("fe", [])], dtype=float)
            es = np.array([np.nan if v is None else v for v in smp.get("estimate", [])], dtype=float)
            if fe.size == ss.size:
                ax.plot(ss, fe, color=OURS, lw=2.0, label=f"this run: normal stress along beam '{bname}' axis")
            if es.size == ss.size:
                ax.plot(ss, es, color=ESTIMATE, lw=1.6, ls="--", label=f"beam theory M·y/I ('{bname}')")
        ax.axhline(0.0, color="0.6", lw=0.8)
        ax.set_ylabel(f"bending stress [{lab['stress']}]")
        tidy_axis(ax, [])
        ax.legend(loc="best", fontsize=8)
    axes[-1].set_xlabel(f"distance along line '{name}' [{lab['length']}]")
    fig.suptitle(f"Line '{name}'", fontsize=11)
    fig.tight_layout()
    save_figure(fig, target)
    return {"file": Path(target).name, "estimate": bool(est)}


@styled
def convergence_plot(name: str, q: dict, study: dict, target: Path) -> str:
    """One tracked quantity of a study: value against DOF, with the extrapolated value and GCI band."""
    import matplotlib.pyplot as plt

    vals = np.array([np.nan if v is None else v for v in q.get("values", [])], dtype=float)
    dofs = np.array(q.get("dofs") or [lv.get("dofs") for lv in study.get("levels", [])], dtype=float)
    fig, ax = plt.subplots(figsize=(5.6, 3.6))
    if dofs.size == vals.size and vals.size:
        ax.plot(dofs, vals, marker="o", color=OURS, lw=1.8, label="levels")
        ex = q.get("extrapolated")
        band = q.get("band")
        if ex is not None:
            ax.axhline(ex, color=ESTIMATE, ls="--", lw=1.3, label="extrapolated")
        if band and None not in band:
            ax.axhspan(band[0], band[1], color="#b8de29", alpha=0.35, lw=0, label="finest ± GCI")
        ax.set_xscale("log")
    ax.set_xlabel("degrees of freedom")
    ax.set_ylabel(f"{name} [{q.get('unit', '')}]")
    tidy_axis(ax, [])
    ax.set_title(name, fontsize=10)
    ax.legend(loc="best", fontsize=8)
    fig.tight_layout()
    save_figure(fig, target)
    return Path(target).name
