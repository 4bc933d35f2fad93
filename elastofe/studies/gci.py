"""Richardson extrapolation and the Grid Convergence Index (GCI).

Sources
-------
* P. J. Roache, "Perspective: A method for uniform reporting of grid
  refinement studies", J. Fluids Eng. 116 (1994) 405-413 -- GCI with
  safety factor 1.25 for three grids, fine and coarse GCI, and the
  asymptotic-range check ``GCI_23 / (r^p GCI_12) ~ 1``.
* I. B. Celik, U. Ghia, P. J. Roache, C. J. Freitas, H. Coleman,
  P. E. Raad, "Procedure for Estimation and Reporting of Uncertainty Due to
  Discretization in CFD Applications", J. Fluids Eng. 130 (2008) 078001 --
  the five-step procedure: representative size ``h = (V/N)^(1/dim)``
  (eq. 1), observed order ``p`` for a non-constant refinement ratio by
  fixed-point iteration (eqs. 3a-3c), extrapolated value (eq. 4) and the
  error estimates (eqs. 5a-5c).

Notation: index 1 is the finest grid. ``eps21 = phi2 - phi1``,
``eps32 = phi3 - phi2``, ``r21 = h2/h1``, ``r32 = h3/h2``.
The quantity ``phi`` has any unit; relative errors and GCI are fractions
(multiply by 100 for percent).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy import optimize

__all__ = ["GridConvergence", "grid_convergence", "representative_size"]

ConvergenceType = Literal["monotonic", "oscillatory", "divergent", "converged"]


@dataclass(frozen=True)
class GridConvergence:
    """Result of a three-grid (finest triplet) convergence study.

    Attributes
    ----------
    observed_order : float
        Observed order ``p`` (Celik et al. 2008 eq. 3). For
        ``"divergent"`` it is the solution of the same equation without the
        absolute value, so ``p <= 0``; nan for ``"converged"``.
    extrapolated : float
        Richardson value ``phi_ext21 = (r21^p phi1 - phi2)/(r21^p - 1)``
        (unit of ``phi``); ``phi1`` for ``"converged"``, nan for
        ``"divergent"``.
    approx_rel_error : float
        ``e_a21 = |(phi1 - phi2)/phi1|`` (fraction).
    extrap_rel_error : float
        ``e_ext21 = |(phi_ext21 - phi1)/phi_ext21|`` (fraction).
    gci_fine : float
        ``GCI_fine21 = Fs e_a21 / (r21^p - 1)`` (fraction): error band on
        the finest value.
    gci_coarse : float
        ``GCI_coarse21 = Fs e_a21 r21^p / (r21^p - 1)`` (Roache 1994): band on
        the medium-grid value ``phi2``.
    gci_fine_32 : float
        ``GCI_fine32 = Fs e_a32 / (r32^p - 1)``, ``e_a32 = |(phi2-phi3)/phi2|``:
        the fine-grid GCI of the coarser pair (grids 2 and 3).
    asymptotic_ratio : float
        ``GCI_fine32 / (r21^p GCI_fine21)`` (Roache 1994): near 1 in the
        asymptotic range; for an exact power law it equals ``|phi1/phi2|``.
    convergence : {"monotonic", "oscillatory", "divergent", "converged"}
        ``"converged"``: ``|eps21|`` at round-off; ``"oscillatory"``:
        ``eps32/eps21 < 0``; ``"divergent"``: same-sign differences with
        ``p <= 0`` (for constant ``r`` this is ``|eps21| >= |eps32|``);
        otherwise ``"monotonic"``.
    likely_singular : bool
        True when all values change in the same direction with growing
        magnitude under refinement and the finest triplet is divergent or has
        ``p <=`` the ``singular_order`` threshold -- the mark of a quantity
        that grows without bound (e.g. stress at a re-entrant corner).
    refinement_ratios : tuple of float
        ``(r21, r32)``.
    orders_all : tuple of float
        ``observed_order`` for each consecutive triplet, finest first; shape
        ``(n - 2,)`` for ``n`` values.
    safety_factor : float
        ``Fs`` used.
    """

    observed_order: float
    extrapolated: float
    approx_rel_error: float
    extrap_rel_error: float
    gci_fine: float
    gci_coarse: float
    gci_fine_32: float
    asymptotic_ratio: float
    convergence: ConvergenceType
    likely_singular: bool
    refinement_ratios: tuple[float, float]
    orders_all: tuple[float, ...]
    safety_factor: float


def representative_size(n_cells: ArrayLike, dim: int, total_measure: float = 1.0) -> np.ndarray:
    """Representative grid size ``h = (V / N)^(1/dim)``.

    Source: Celik et al. 2008, eq. (1) (for unstructured grids
    ``h = [(1/N) sum dV_i]^(1/3)``; with a fixed domain that is
    ``(V/N)^(1/dim)``).

    Parameters
    ----------
    n_cells : array_like, shape (n,)
        Cell (element) counts, > 0.
    dim : int
        Spatial dimension, 1, 2 or 3.
    total_measure : float, optional
        Domain length, area or volume ``[L^dim]`` (default 1).

    Returns
    -------
    ndarray, shape (n,)
        ``h`` ``[L]``.
    """
    n = np.asarray(n_cells, dtype=float)
    if dim not in (1, 2, 3):
        raise ValueError(f"dim must be 1, 2 or 3, got {dim!r}")
    if np.any(~np.isfinite(n)) or np.any(n <= 0):
        raise ValueError(f"n_cells must be finite and > 0, got {n_cells!r}")
    if not (np.isfinite(total_measure) and total_measure > 0):
        raise ValueError(f"total_measure must be finite and > 0, got {total_measure!r}")
    return (float(total_measure) / n) ** (1.0 / dim)


def _q_ratio(p: float, r21: float, r32: float, s: float) -> float:
    """``ln((r21^p - s)/(r32^p - s))`` with the ``p -> 0`` limit for ``s = 1``."""
    if s > 0:
        if abs(p) < 1e-12:
            return math.log(math.log(r21) / math.log(r32))
        return math.log(math.expm1(p * math.log(r21)) / math.expm1(p * math.log(r32)))
    return math.log((r21**p + 1.0) / (r32**p + 1.0))


def _observed_order(ratio: float, r21: float, r32: float, s: float,
                    tol: float = 1e-13, max_iter: int = 1000) -> float:
    """Celik et al. 2008 eq. (3): fixed-point iteration, Brent's method as a fallback."""
    lr = math.log(r21)
    la = math.log(abs(ratio))

    def fixed(p: float) -> float:
        return abs(la + _q_ratio(p, r21, r32, s)) / lr

    p = abs(la) / lr
    if p < 1e-6:
        p = 1.0
    for _ in range(max_iter):
        try:
            p_new = fixed(p)
        except (ValueError, OverflowError, ZeroDivisionError):
            break
        if abs(p_new - p) <= tol * max(1.0, abs(p)):
            return p_new
        p = p_new
    # Fallback (not in the paper): bracket the root of p - fixed(p).
    try:
        return float(optimize.brentq(lambda t: t - fixed(t), 1e-9, 60.0, xtol=1e-14, rtol=1e-14))
    except (ValueError, RuntimeError):
        return float("nan")


def _divergent_order(ratio: float, r21: float, r32: float) -> float:
    """Signed solution ``p <= 0`` of ``p ln r21 = ln(eps32/eps21) + q(p)`` (s = 1)."""
    lr = math.log(r21)
    la = math.log(ratio)

    def g(t: float) -> float:
        return t * lr - la - _q_ratio(t, r21, r32, 1.0)

    g0 = g(0.0)
    if abs(g0) <= 1e-12:
        return 0.0
    try:
        return float(optimize.brentq(g, -60.0, 0.0, xtol=1e-14, rtol=1e-14))
    except (ValueError, RuntimeError):
        return float("nan")


def _triplet(f: np.ndarray, h: np.ndarray, fs: float, rtol: float) -> dict:
    f1, f2, f3 = (float(v) for v in f)
    r21, r32 = float(h[1] / h[0]), float(h[2] / h[1])
    e21, e32 = f2 - f1, f3 - f2
    scale = max(abs(f1), abs(f2), abs(f3))
    nan = float("nan")
    out = dict(refinement_ratios=(r21, r32))
    ea = abs(e21 / f1) if f1 != 0.0 else nan
    ea32 = abs(e32 / f2) if f2 != 0.0 else nan
    if abs(e21) <= rtol * scale:
        out.update(convergence="converged", observed_order=nan, extrapolated=f1,
                   approx_rel_error=0.0, extrap_rel_error=0.0, gci_fine=0.0,
                   gci_coarse=0.0, gci_fine_32=0.0 if abs(e32) <= rtol * scale else nan,
                   asymptotic_ratio=nan)
        return out
    if abs(e32) <= rtol * scale:
        ratio = 0.0
    else:
        ratio = e32 / e21
    divergent_limit = math.log(r32) / math.log(r21)  # ratio <= this  <=>  p <= 0
    if ratio < 0.0:
        conv: ConvergenceType = "oscillatory"
        p = _observed_order(ratio, r21, r32, -1.0)
    elif ratio <= divergent_limit:
        conv = "divergent"
        p = _divergent_order(ratio, r21, r32) if ratio > 0.0 else nan
        out.update(convergence=conv, observed_order=p, extrapolated=nan,
                   approx_rel_error=ea, extrap_rel_error=nan, gci_fine=nan,
                   gci_coarse=nan, gci_fine_32=nan, asymptotic_ratio=nan)
        return out
    else:
        conv = "monotonic"
        p = _observed_order(ratio, r21, r32, 1.0)
    rp21 = r21**p
    rp32 = r32**p
    ext = (rp21 * f1 - f2) / (rp21 - 1.0)
    eext = abs((ext - f1) / ext) if ext != 0.0 else nan
    gf = fs * ea / (rp21 - 1.0)
    gc = fs * ea * rp21 / (rp21 - 1.0)
    g32 = fs * ea32 / (rp32 - 1.0)
    out.update(convergence=conv, observed_order=p, extrapolated=ext,
               approx_rel_error=ea, extrap_rel_error=eext, gci_fine=gf,
               gci_coarse=gc, gci_fine_32=g32,
               asymptotic_ratio=g32 / (rp21 * gf) if gf > 0 else nan)
    return out


def grid_convergence(
    values: ArrayLike,
    h: ArrayLike,
    safety_factor: float = 1.25,
    rtol_converged: float = 1e-12,
    singular_order: float = 0.1,
) -> GridConvergence:
    """Observed order, Richardson extrapolation and GCI from three or more grids.

    The finest three grids give the reported quantities (Celik et al. 2008,
    steps 3-5). With ``s = sign(eps32/eps21)`` the observed order solves::

        p    = |ln|eps32/eps21| + q(p)| / ln r21
        q(p) = ln((r21^p - s)/(r32^p - s))

    by fixed-point iteration from ``q = 0`` (Brent's method is used only if
    the iteration fails to settle). Then ``phi_ext21``, ``e_a21``,
    ``e_ext21``, ``GCI_fine21`` as in Celik et al. 2008 eqs. (4)-(5), with
    ``GCI_coarse21`` and the asymptotic-range ratio from Roache 1994. See
    :class:`GridConvergence` for every field and the classification.

    Parameters
    ----------
    values : array_like, shape (n,)
        The quantity on each grid, ordered fine to coarse, ``n >= 3`` (unit
        of the quantity).
    h : array_like, shape (n,)
        Representative grid sizes, strictly increasing (fine to coarse)
        ``[L]``; see :func:`representative_size`.
    safety_factor : float, optional
        ``Fs``; 1.25 for three or more grids (Roache 1994).
    rtol_converged : float, optional
        ``|eps21| <= rtol_converged * max|phi|`` counts as round-off.
    singular_order : float, optional
        Observed-order threshold for ``likely_singular`` (default 0.1).

    Returns
    -------
    GridConvergence
    """
    f = np.asarray(values, dtype=float)
    hh = np.asarray(h, dtype=float)
    if f.ndim != 1 or f.size < 3:
        raise ValueError(f"values must be 1-D with at least 3 entries, got shape {f.shape}")
    if hh.shape != f.shape:
        raise ValueError(f"h must have the same shape as values {f.shape}, got {hh.shape}")
    if np.any(~np.isfinite(f)) or np.any(~np.isfinite(hh)):
        raise ValueError("values and h must be finite")
    if np.any(hh <= 0.0) or np.any(np.diff(hh) <= 0.0):
        raise ValueError(f"h must be > 0 and strictly increasing (fine to coarse), got {hh}")
    fs = float(safety_factor)
    if not (np.isfinite(fs) and fs > 0):
        raise ValueError(f"safety_factor must be > 0, got {safety_factor!r}")
    if not (0.0 <= rtol_converged < 1.0):
        raise ValueError(f"rtol_converged must lie in [0, 1), got {rtol_converged!r}")

    trips = [_triplet(f[i:i + 3], hh[i:i + 3], fs, rtol_converged) for i in range(f.size - 2)]
    best = trips[0]
    d = np.diff(f)
    same_direction = bool(np.all(d > 0) or np.all(d < 0))
    growing = bool(np.all(np.diff(np.abs(f)) < 0))  # |phi| larger on finer grids
    p0 = best["observed_order"]
    low_order = best["convergence"] == "divergent" or (
        best["convergence"] == "monotonic" and p0 <= singular_order
    )
    return GridConvergence(
        observed_order=float(p0),
        extrapolated=float(best["extrapolated"]),
        approx_rel_error=float(best["approx_rel_error"]),
        extrap_rel_error=float(best["extrap_rel_error"]),
        gci_fine=float(best["gci_fine"]),
        gci_coarse=float(best["gci_coarse"]),
        gci_fine_32=float(best["gci_fine_32"]),
        asymptotic_ratio=float(best["asymptotic_ratio"]),
        convergence=best["convergence"],
        likely_singular=bool(same_direction and growing and low_order),
        refinement_ratios=best["refinement_ratios"],
        orders_all=tuple(float(t["observed_order"]) for t in trips),
        safety_factor=fs,
    )
