"""Convergence plots (matplotlib, off-screen through a figure's own Agg canvas): value against DOF count
with the Richardson value and the GCI band; line profiles per level. Colours from the perceptually uniform
cividis map; our own layout."""
from __future__ import annotations

import math

import numpy as np


def _figure(width: float = 6.0, height: float = 3.6):
    """A figure with its own Agg canvas: no pyplot, no global backend or state touched."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=110)
    FigureCanvasAgg(fig)
    return fig, fig.add_subplot(1, 1, 1)


def _cmap(name: str):
    import matplotlib

    return matplotlib.colormaps[name]


_INK = "#222222"


def _style(ax) -> None:
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.grid(True, which="both", color="#dddddd", linewidth=0.6)
    ax.tick_params(colors=_INK, labelsize=8)


def quantity_plot(name: str, q: dict, study: dict, path) -> None:
    """One quantity: value per level against DOFs (log axis), Richardson value, GCI band."""
    cmap = _cmap("cividis")
    dofs = np.asarray(q["dofs"], dtype=float)
    v = np.asarray([np.nan if x is None else x for x in q["values"]], dtype=float)
    fig, ax = _figure()
    u = f" {q['unit']}" if q.get("unit") else ""
    band = q.get("band")
    if band is not None and all(b is not None and math.isfinite(b) for b in band):
        fs, pu = q.get("safety_factor"), q.get("order_used")
        how = f", p = {pu:.2g}, Fs = {fs:g}" if fs is not None and pu is not None and math.isfinite(pu) else ""
        ax.axhspan(band[0], band[1], color=cmap(0.85), alpha=0.35, lw=0,
                   label=f"GCI band on finest (±{(band[1] - band[0]) / 2:.3g}{u}{how})")
    ext = q.get("extrapolated")
    if ext is not None and math.isfinite(ext):
        ax.axhline(ext, color=cmap(0.55), ls="--", lw=1.2, label=f"Richardson value {ext:.5g}{u}")
    colours = [cmap(0.05 + 0.6 * i / max(len(v) - 1, 1)) for i in range(len(v))]
    ax.plot(dofs, v, color=cmap(0.1), lw=1.0, zorder=2)
    ax.scatter(dofs, v, c=colours, s=28, zorder=3, edgecolors="white", linewidths=0.6, label="levels")
    ax.set_xscale("log")
    ax.set_xlabel("degrees of freedom", color=_INK, fontsize=9)
    ax.set_ylabel(f"{q['kind']} [{q['unit']}]", color=_INK, fontsize=9)
    loc = q.get("location")
    where = f" at ({', '.join(f'{float(c):.3g}' for c in loc)})" if q.get("singular") and loc is not None else ""
    verdict = (f"SINGULAR{where} - read stress away from this point" if q.get("singular")
               else str(q.get("convergence", "")))
    p = q.get("observed_order")
    ptxt = f"p = {p:.2f}" if p is not None and math.isfinite(p) else "p = n/a"
    alpha = q.get("growth_exponent")
    if q.get("singular") and alpha is not None and math.isfinite(alpha):
        ptxt = f"grows like h^-{alpha:.2g}"
    if q.get("asymptotic") is True:
        ptxt += ", asymptotic"
    elif q.get("asymptotic") is False and not q.get("singular"):
        ptxt += ", not asymptotic"
    ax.set_title(f"{name}\n{verdict}, {ptxt}", fontsize=9, color=_INK, loc="left")
    _style(ax)
    ax.legend(fontsize=7, frameon=False, loc="best")
    fig.tight_layout()
    fig.savefig(path, format="png")


def line_plot(name: str, prof: dict, study: dict, path) -> None:
    """Von Mises along a line on every level, with the per-sample Richardson value and GCI band."""
    cmap = _cmap("viridis")
    s = np.asarray(prof["s"], dtype=float)
    vm = np.asarray(prof["von_mises"], dtype=float)
    fig, ax = _figure()
    n = vm.shape[0]
    for i in range(n):
        ax.plot(s, vm[i], color=cmap(0.1 + 0.75 * i / max(n - 1, 1)), lw=1.0,
                label=f"level {i + 1} ({study['levels'][i]['dofs']:,} DOF)")
    ext = np.asarray(prof["extrapolated"], dtype=float)
    gci = np.asarray(prof["gci_fine"], dtype=float)
    ok = np.isfinite(ext) & np.isfinite(gci)
    if ok.any():
        half = gci * np.abs(vm[-1])
        ax.fill_between(s, np.where(ok, vm[-1] - half, np.nan), np.where(ok, vm[-1] + half, np.nan),
                        color=cmap(0.9), alpha=0.3, lw=0, label="GCI band on finest")
        ax.plot(s, np.where(ok, ext, np.nan), color=_INK, ls=":", lw=1.2, label="Richardson value")
    ax.set_xlabel(f"distance along the line [{study['units']['length']}]", color=_INK, fontsize=9)
    ax.set_ylabel(f"von Mises stress [{study['units']['stress']}]", color=_INK, fontsize=9)
    ax.set_title(f"line {name}: von Mises stress per level", fontsize=9, color=_INK, loc="left")
    _style(ax)
    ax.legend(fontsize=7, frameon=False, loc="best")
    fig.tight_layout()
    fig.savefig(path, format="png")
