"""The look of elastofe's plots and pictures: our own colours and a perceptually uniform colour map.

Plot functions wrap themselves in :func:`styled`, which sets matplotlib's parameters only for
their own duration (nothing global is changed for the caller).
"""
from __future__ import annotations

import functools
from pathlib import Path

#: Colour map of every field picture and contour: perceptually uniform.
COLORMAP = "viridis"
#: This run's lines and markers (a deep blue of the viridis range).
OURS = "#31688e"
#: Reference (other solver's) markers: a warm orange, far from every viridis colour.
THEIRS = "#d95f02"
#: Estimates from hand calculation (beam theory).
ESTIMATE = "#7b3294"
#: Tolerance bands.
BAND = "#b8de29"
#: Colour map of the element-size picture (perceptually uniform, unlike the field pictures' own).
SIZE_COLORMAP = "cividis"
#: Colour of the directions x, y, z (axis triad and the held-direction symbols) and of the local
#: directions n (normal), r, t, a (radial, tangential, axial): ColorBrewer's Dark2 set.
DIRECTION_COLORS = {"x": "#1b9e77", "y": "#d95f02", "z": "#7570b3", "n": "#e7298a", "r": "#66a61e",
                    "t": "#a6761d", "a": "#e6ab02", "elastic": "#666666"}
#: Load arrows and moment arrows of the model picture.
LOAD_COLOR = "#b2182b"
MOMENT_COLOR = "#2166ac"
#: The part's surface where no field is drawn.
PART_COLOR = "#d9dcd3"
#: Values above the top of a capped colour scale (e.g. the artefact at an idealised support): a red
#: that no viridis colour comes near.
OVER_RANGE = "#e8212b"
#: Status colours of the checks table.
STATUS_COLORS = {"pass": "#1a9850", "skip": "#878787", "warn": "#d98c00", "fail": "#c0262d"}

RC = {
    "figure.facecolor": "white",
    "axes.facecolor": "#fbfbf8",
    "axes.edgecolor": "#55575b",
    "axes.grid": True,
    "grid.color": "#dcdcd6",
    "grid.linewidth": 0.6,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.titleweight": "bold",
    "font.size": 9.5,
    "legend.frameon": False,
    "savefig.dpi": 110,
}


def styled(fn):
    """Decorator: run a plotting function inside matplotlib's Agg backend with our parameters."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        import matplotlib

        with matplotlib.rc_context(RC):
            return fn(*args, **kwargs)

    return wrapper


def save_figure(fig, target: Path) -> None:
    """Save a matplotlib figure as PNG atomically (temporary name, then rename) and close it."""
    import matplotlib.pyplot as plt

    from .files import atomic_path

    with atomic_path(Path(target)) as tmp:
        fig.savefig(tmp, format="png")
    plt.close(fig)


def tidy_axis(ax, values, axis: str = "y") -> None:
    """Readable limits and tick labels: no offset notation, and a nearly constant series shown
    from zero (or around its value) instead of magnifying round-off into a curve."""
    import numpy as np
    from matplotlib.ticker import MaxNLocator, ScalarFormatter

    fmt = ScalarFormatter(useOffset=False)
    fmt.set_powerlimits((-3, 4))
    getattr(ax, f"{axis}axis").set_major_formatter(fmt)
    getattr(ax, f"{axis}axis").set_major_locator(MaxNLocator(6))
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return
    lo, hi = float(v.min()), float(v.max())
    big = max(abs(lo), abs(hi))
    if big > 0 and hi - lo <= 1e-6 * big:
        lim = (min(0.0, 1.1 * lo), max(0.0, 1.1 * hi))
        getattr(ax, f"set_{axis}lim")(*lim)


def square_limits(values, tol: float = 0.0):
    """Common limits ``(lo, hi)`` for a 1:1 plot of ``values``, padded, never of zero width."""
    import numpy as np

    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return -1.0, 1.0
    lo, hi = float(v.min()), float(v.max())
    span = max(hi - lo, 0.1 * max(abs(lo), abs(hi)), 4 * tol, 1e-30)
    pad = 0.08 * span
    if hi - lo < span:
        mid = 0.5 * (lo + hi)
        lo, hi = mid - 0.5 * span, mid + 0.5 * span
    return lo - pad, hi + pad
