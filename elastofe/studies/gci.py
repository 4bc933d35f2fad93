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

* P. J. Roache, "Verification and Validation in Computational Science and
  Engineering", Hermosa (1998) -- the GCI with a bounded order: the order
  used is capped at the formal order of the method, and where the observed
  order cannot be relied on (outside a plausible band, oscillation, a single
  triplet that cannot be checked) the safety factor is 3 instead of 1.25;
  P. J. Roache, J. Fluids Eng. 133 (2011) 115501 restates it ("if p_RE is
  unreasonable one at least reverts to using p_th and F_S = 3").
* ASME V&V 20-2009, section 2 -- the same GCI as an estimate of the numerical
  uncertainty.

:func:`grid_convergence` is the plain arithmetic of Celik et al. (it
reproduces their worked example); :func:`assess_levels` is the judgement built
on it: changes within a noise tolerance, bounded orders, every consecutive
triplet, growth that marks a singular point.

Notation: index 1 is the finest grid. ``eps21 = phi2 - phi1``,
``eps32 = phi3 - phi2``, ``r21 = h2/h1``, ``r32 = h3/h2``.
The quantity ``phi`` has any unit; relative errors and GCI are fractions
(multiply by 100 for percent).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy import optimize

__all__ = ["GridConvergence", "LevelAssessment", "Triplet", "assess_levels", "grid_convergence",
           "order_band", "representative_size", "triplet_order"]

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


def triplet_order(f1: float, f2: float, f3: float, r21: float, r32: float) -> tuple[str, float]:
    """Pattern and observed order of one triplet of values (finest first).

    Parameters
    ----------
    f1, f2, f3 : float
        The quantity on the fine, medium and coarse grid; ``f2 != f1`` and ``f3 != f2``.
    r21, r32 : float
        Refinement ratios ``h2/h1`` and ``h3/h2`` (> 1).

    Returns
    -------
    pattern : {"monotonic", "oscillatory", "divergent"}
        ``"oscillatory"`` when the two changes differ in sign; ``"divergent"`` when they
        share it and the order is ``<= 0`` (the finer change is not smaller, allowing for the
        ratios); otherwise ``"monotonic"``.
    order : float
        Celik et al. (2008) eq. (3) with ``s = sign(eps32/eps21)``; for ``"divergent"`` the
        signed solution ``p <= 0`` of the same equation without the absolute value, so that a
        value growing like ``h^-a`` gives ``p = -a`` and one growing like ``ln(1/h)`` (constant
        ratio) gives ``p = 0``. nan when the equation has no root.
    """
    e21, e32 = f2 - f1, f3 - f2
    if e21 == 0.0 or e32 == 0.0:
        raise ValueError("triplet_order needs two non-zero changes")
    ratio = e32 / e21
    if ratio < 0.0:
        return "oscillatory", _observed_order(ratio, r21, r32, -1.0)
    if ratio <= math.log(r32) / math.log(r21):  # ratio <= this  <=>  p <= 0
        return "divergent", _divergent_order(ratio, r21, r32)
    return "monotonic", _observed_order(ratio, r21, r32, 1.0)


def _triplet(f: np.ndarray, h: np.ndarray, fs: float, rtol: float) -> dict:
    f1, f2, f3 = (float(v) for v in f)
    r21, r32 = float(h[1] / h[0]), float(h[2] / h[1])
    e21, e32 = f2 - f1, f3 - f2
    scale = max(abs(f1), abs(f2), abs(f3))
    nan = float("nan")
    out: dict = {"refinement_ratios": (r21, r32)}
    ea = abs(e21 / f1) if f1 != 0.0 else nan
    ea32 = abs(e32 / f2) if f2 != 0.0 else nan
    if abs(e21) <= rtol * scale:
        out.update(convergence="converged", observed_order=nan, extrapolated=f1,
                   approx_rel_error=0.0, extrap_rel_error=0.0, gci_fine=0.0,
                   gci_coarse=0.0, gci_fine_32=0.0 if abs(e32) <= rtol * scale else nan,
                   asymptotic_ratio=nan)
        return out
    if abs(e32) <= rtol * scale:
        conv: ConvergenceType = "divergent"
        p = nan
    else:
        conv, p = triplet_order(f1, f2, f3, r21, r32)  # type: ignore[assignment]
    if conv == "divergent":
        out.update(convergence=conv, observed_order=p, extrapolated=nan,
                   approx_rel_error=ea, extrap_rel_error=nan, gci_fine=nan,
                   gci_coarse=nan, gci_fine_32=nan, asymptotic_ratio=nan)
        return out
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


# ------------------------------------------------------------------ the judgement on top of Celik's arithmetic
#: Safety factor of a study whose observed order is verified (three or more grids, order in the plausible band
#: and, with four or more, consistent across triplets): Roache (1998); Celik et al. (2008); ASME V&V 20-2009.
SAFETY_FACTOR = 1.25
#: Safety factor where the order is not verified (two grids in effect, an order outside the plausible band, an
#: oscillating sequence, triplets that disagree): Roache (1998); Roache, J. Fluids Eng. 133 (2011) 115501.
SAFETY_FACTOR_UNVERIFIED = 3.0
#: Triplet orders agree when they lie within this of each other (our own threshold: on unstructured meshes
#: orders scatter by a few tenths even in the asymptotic range; at r = 1.5 a difference of 0.5 in p changes
#: the predicted error ratio by a factor 1.5^0.5 = 1.22, the same as ASYMPTOTIC_TOL below).
ORDER_AGREE = 0.5
#: Roache's ratio GCI_32 / (r21^p GCI_21), with the common order of all triplets, must lie within 1 +- this for
#: every consecutive pair of steps (Roache 1994 asks for "approximately one"; 0.25 is our own choice, matched
#: to ORDER_AGREE above).
ASYMPTOTIC_TOL = 0.25
#: A finest-triplet order at or below this means the changes do not shrink at a convergent rate (a value that
#: grows like ln(1/h) has p = 0, one that grows like h^-a has p = -a): together with growth on every step this
#: marks a singular value (our own threshold; a slowly converging value with p in (0.5, formal/2) is reported
#: as below the plausible band instead).
SINGULAR_ORDER = 0.5


def order_band(formal_order: float) -> tuple[float, float]:
    """Plausible band of observed orders around a method's formal order ``[formal/2, formal + 1]``.

    Our own band: an observed order above ``formal + 1`` means the coarse levels are not in the asymptotic
    range or errors of opposite sign cancel (a GCI with it would be far too narrow); below ``formal/2`` the
    levels are pre-asymptotic or polluted by a singularity (a GCI with it is honest but wide).
    """
    return 0.5 * formal_order, formal_order + 1.0


@dataclass(frozen=True)
class Triplet:
    """One consecutive triplet of levels (finest first within the triplet).

    Attributes
    ----------
    levels : tuple of int
        Indices of its three levels in the fine-to-coarse arrays given to :func:`assess_levels`.
    pattern : str
        ``"converged"`` (both changes within the noise tolerance), ``"settled"`` (the finer change within it),
        ``"not settled"`` (the coarser change within it, the finer not), or :func:`triplet_order`'s
        ``"monotonic"``, ``"oscillatory"``, ``"divergent"``.
    order : float
        Observed (signed for ``"divergent"``) order; nan where the pattern gives none.
    ratios : tuple of float
        ``(r21, r32)`` of the triplet.
    """

    levels: tuple[int, int, int]
    pattern: str
    order: float
    ratios: tuple[float, float]


@dataclass(frozen=True)
class LevelAssessment:
    """Verdict on one quantity computed on three or more levels (see :func:`assess_levels`).

    Attributes
    ----------
    verdict : str
        ``"converged"``: the finest change is within the noise tolerance (the coarser may not be);
        ``"monotonic"`` / ``"oscillatory"``: both finest changes exceed it, with the pattern named;
        ``"not settled"``: the finest change exceeds it after a change within it, or two small changes grow;
        ``"divergent"``: the finest change is larger than the one before (allowing for the ratios) and not
        small; ``"singular"``: the magnitude grows
        by more than ``growth_tol`` on every step and the changes do not shrink at a convergent rate.
    changes : ndarray, shape (n - 1,)
        ``f[k] - f[k+1]``, the change on refining from level k+1 to level k (fine-to-coarse indexing;
        unit of the quantity).
    triplets : tuple of Triplet
        Every consecutive triplet, finest first.
    observed_order : float
        Order of the finest triplet (signed when divergent), nan when it has none.
    formal_order, order_low, order_high : float
        The method's formal order and the plausible band around it (:func:`order_band`).
    order_plausible : bool or None
        Whether ``observed_order`` lies in the band; None when there is no order.
    order_used : float
        The order the band and the extrapolation use: the observed order bounded to
        ``[order_low, formal_order]`` (capped at the formal order as Roache 1998 recommends); the formal
        order for ``"converged"`` and ``"not settled"`` (two-level estimates); nan without a band.
    safety_factor : float
        ``SAFETY_FACTOR`` when the order is verified, ``SAFETY_FACTOR_UNVERIFIED`` otherwise; nan without a
        band.
    extrapolated : float
        Richardson value with ``order_used``; nan where none is made.
    extrapolated_observed : float
        Richardson value with the observed order (Celik et al. 2008 eq. 4), for comparison; nan if none.
    half_width : float
        ``Fs |f1 - f2| / (r21^p - 1)`` with ``p = order_used`` (unit of the quantity), at least ``noise``
        for ``"converged"``; nan without a band.
    gci_fine : float
        ``half_width / |f1|`` (fraction); nan without a band or for ``f1 = 0``.
    asymptotic : bool or None
        True only with four or more levels whose triplets are all monotonic with plausible, agreeing orders
        and Roache's ratio near 1 for every pair of steps; None where it cannot be judged (three levels with
        a monotonic, plausible order, or a converged value); False otherwise.
    asymptotic_reason : str
        Why ``asymptotic`` is what it is.
    roache_ratios : tuple of float
        ``GCI_(k+1) / (r_k^p GCI_k)`` for each consecutive pair of steps, finest first, with ``p`` the mean
        order of the triplets; empty where not all steps are significant.
    singular : bool
        See ``verdict``.
    growth_exponent : float
        ``-observed_order`` for a singular value: ``a`` in ``f ~ h^-a`` (0 for logarithmic growth); nan
        otherwise.
    notes : tuple of str
        Plain-language remarks (implausible orders, disagreeing triplets, the noise tolerance).
    """

    verdict: str
    changes: np.ndarray
    triplets: tuple[Triplet, ...]
    observed_order: float
    formal_order: float
    order_low: float
    order_high: float
    order_plausible: bool | None
    order_used: float
    safety_factor: float
    extrapolated: float
    extrapolated_observed: float
    half_width: float
    gci_fine: float
    asymptotic: bool | None
    asymptotic_reason: str
    roache_ratios: tuple[float, ...]
    singular: bool
    growth_exponent: float
    notes: tuple[str, ...]


def _richardson(f1: float, f2: float, r21: float, p: float) -> float:
    return f1 + (f1 - f2) / (r21**p - 1.0)


def assess_levels(values: ArrayLike, h: ArrayLike, *, noise: float, formal_order: float,
                  growth_tol: float = 0.005, may_be_singular: bool = True, min_ratio: float = 1.3,
                  level_numbers: Sequence[int] | None = None) -> LevelAssessment:
    """Judge one quantity from its values on three or more levels.

    The rules, in order (fine-to-coarse indexing, ``d_k = f_k - f_(k+1)``):

    1. A change ``|d_k| <= noise`` is no change. The finest change within it makes the value
       ``"converged"``, whatever the sign pattern of the tiny differences: no order is computed and the
       band is the two-level GCI with the formal order and ``Fs = 3``, at least ``noise`` wide each side
       and, when the change before was larger, at least ``|d_1| / r21^formal`` (the finest change the
       formal order predicts from it).
    2. ``"singular"`` when ``may_be_singular``, ``|f|`` grows on every step by more than
       ``max(noise, growth_tol |f|)`` and the finest triplet is divergent or has an order
       ``<= SINGULAR_ORDER``; no band.
    3. The finest change above the tolerance after one within it, or two small changes (within
       ``growth_tol`` of the value) whose ratio says divergent: ``"not settled"`` (two-level band with the
       formal order and ``Fs = 3``).
    4. Otherwise Celik's pattern and order of the finest triplet. A divergent triplet gets no band. For
       monotonic and oscillatory triplets the band uses the observed order bounded to
       ``[formal/2, formal]`` and ``Fs = 1.25``
       when the order is verified (monotonic, inside :func:`order_band`, both ratios at least
       ``min_ratio`` and, with four or more levels, asymptotic), else ``Fs = 3``; an order above the band
       falls back to the formal order.
    5. Asymptotic only with four or more levels: every triplet monotonic with a plausible order, the orders
       within ``ORDER_AGREE`` of each other, and Roache's ratio within ``1 +- ASYMPTOTIC_TOL`` for every
       pair of steps.

    Parameters
    ----------
    values : array_like, shape (n,)
        The quantity on each level, fine to coarse, ``n >= 3`` (any unit).
    h : array_like, shape (n,)
        Representative sizes, strictly increasing (fine to coarse) ``[L]``.
    noise : float
        Absolute change below which two levels count as equal (unit of the quantity), >= 0.
    formal_order : float
        Formal order of convergence of this quantity for the element used (> 0).
    growth_tol : float, optional
        Relative growth per step a singular value must exceed on every step.
    may_be_singular : bool, optional
        False for quantities that cannot grow without bound (a growing one is then ``"divergent"``).
    min_ratio : float, optional
        A finest triplet refined by less than this on either step does not verify its order (Celik et al.
        2008 recommend ratios above 1.3).
    level_numbers : sequence of int, optional
        How to name the levels in the texts, fine to coarse (default Celik's 1, 2, 3, ... from the finest).

    Returns
    -------
    LevelAssessment
    """
    f = np.asarray(values, dtype=float)
    hh = np.asarray(h, dtype=float)
    if f.ndim != 1 or f.size < 3 or hh.shape != f.shape:
        raise ValueError(f"values and h must be 1-D of the same length >= 3, got {f.shape} and {hh.shape}")
    if not (np.all(np.isfinite(f)) and np.all(np.isfinite(hh)) and np.all(np.diff(hh) > 0) and hh[0] > 0):
        raise ValueError("values and h must be finite, h > 0 and strictly increasing (fine to coarse)")
    if not (noise >= 0.0 and formal_order > 0.0):
        raise ValueError(f"noise must be >= 0 and formal_order > 0, got {noise!r}, {formal_order!r}")
    nan = float("nan")
    n = f.size
    d = f[:-1] - f[1:]
    sig = np.abs(d) > noise
    r = hh[1:] / hh[:-1]
    lo, hi = order_band(formal_order)
    trips = []
    for k in range(n - 2):
        if not sig[k] and not sig[k + 1]:
            pat, p = "converged", nan
        elif not sig[k]:
            pat, p = "settled", nan
        elif not sig[k + 1]:
            pat, p = "not settled", nan
        else:
            pat, p = triplet_order(f[k], f[k + 1], f[k + 2], r[k], r[k + 1])
        trips.append(Triplet((k, k + 1, k + 2), pat, float(p), (float(r[k]), float(r[k + 1]))))
    t0 = trips[0]
    names = list(level_numbers) if level_numbers is not None else list(range(1, n + 1))
    notes: list[str] = []
    f1, f2, r21 = float(f[0]), float(f[1]), float(r[0])

    def two_level(verdict: str, floor: float, reason: str = "") -> LevelAssessment:
        half = max(SAFETY_FACTOR_UNVERIFIED * abs(f1 - f2) / (r21**formal_order - 1.0), floor)
        return LevelAssessment(
            verdict=verdict, changes=d, triplets=tuple(trips), observed_order=nan, formal_order=formal_order,
            order_low=lo, order_high=hi, order_plausible=None, order_used=float(formal_order),
            safety_factor=SAFETY_FACTOR_UNVERIFIED,
            extrapolated=_richardson(f1, f2, r21, formal_order) if verdict == "not settled" else nan,
            extrapolated_observed=nan, half_width=half, gci_fine=half / abs(f1) if f1 != 0.0 else nan,
            asymptotic=None if verdict == "converged" else False,
            asymptotic_reason=reason or ("no order to judge: the finest change is within the noise tolerance"
                                         if verdict == "converged" else
                                         "the finest change follows a change within the noise tolerance: no order"),
            roache_ratios=(), singular=False, growth_exponent=nan, notes=tuple(notes))

    if t0.pattern == "converged":
        return two_level("converged", noise)
    if t0.pattern == "settled":
        # A large change followed by a tiny one may be a coincidence of the meshes: the band covers at least
        # the finest change the formal order predicts from the change before.
        predicted = abs(float(d[1])) / r21**formal_order
        notes.append(f"the step before the finest was larger than the tolerance; the band covers the "
                     f"{predicted:.3g} the formal order predicts for the finest step")
        return two_level("converged", max(noise, predicted))

    # Growth of the magnitude on every step, each by more than the noise and growth_tol of the value.
    mag = np.abs(f)
    same_sign = bool(np.all(f > 0) or np.all(f < 0))
    grows = same_sign and bool(np.all(mag[:-1] - mag[1:] > np.maximum(noise, growth_tol * mag[1:])))
    slow = t0.pattern == "divergent" or (t0.pattern == "monotonic" and t0.order <= SINGULAR_ORDER)
    if may_be_singular and grows and slow:
        alpha = -t0.order if math.isfinite(t0.order) else nan
        return LevelAssessment(
            verdict="singular", changes=d, triplets=tuple(trips), observed_order=t0.order,
            formal_order=formal_order, order_low=lo, order_high=hi, order_plausible=False, order_used=nan,
            safety_factor=nan, extrapolated=nan, extrapolated_observed=nan, half_width=nan, gci_fine=nan,
            asymptotic=False, asymptotic_reason="grows on every level: no limit to approach",
            roache_ratios=(), singular=True, growth_exponent=alpha, notes=tuple(notes))
    if t0.pattern == "not settled":
        return two_level("not settled", 0.0)
    if t0.pattern == "divergent" and abs(f1 - f2) <= max(growth_tol * float(mag.max()), noise):
        # Two small changes whose ratio says "divergent" are no alarm: their ratio is at the mercy of noise.
        notes.append(f"the finest change is not smaller than the one before, but both are small (within "
                     f"{growth_tol:.2%} of the value)")
        return two_level("not settled", 0.0, "two small changes give no reliable order")
    if t0.pattern == "divergent":
        return LevelAssessment(
            verdict="divergent", changes=d, triplets=tuple(trips), observed_order=t0.order,
            formal_order=formal_order, order_low=lo, order_high=hi, order_plausible=False, order_used=nan,
            safety_factor=nan, extrapolated=nan, extrapolated_observed=nan, half_width=nan, gci_fine=nan,
            asymptotic=False, asymptotic_reason="the finest change is not smaller than the one before",
            roache_ratios=(), singular=False, growth_exponent=nan, notes=tuple(notes))

    p_obs = t0.order
    plausible = bool(math.isfinite(p_obs) and lo <= p_obs <= hi)
    # Asymptotic range: only four or more levels can show it (with three, the one order is fitted exactly
    # to the three values and Roache's ratio is |f1/f2| whatever the values are).
    ratios: tuple[float, ...] = ()
    if n == 3 and t0.pattern == "monotonic" and plausible:
        asym: bool | None = None
        why = "three levels give one order and cannot check it; a fourth level would"
    elif n == 3:
        # Three levels cannot show the range, but an implausible order or an oscillation shows it is not reached.
        asym = False
        why = (f"order {p_obs:.3g}, outside the plausible {lo:g}-{hi:g}" if t0.pattern == "monotonic"
               else f"{t0.pattern} (order {p_obs:.3g})")
    else:
        orders = np.array([t.order for t in trips])
        bad = [t for t in trips if t.pattern != "monotonic" or not (lo <= t.order <= hi)]
        if np.all(sig):
            pbar = float(np.mean(orders)) if np.all(np.isfinite(orders)) and np.all(orders > 0) else nan
            if math.isfinite(pbar):
                g = np.abs(d / f[:-1]) / (r**pbar - 1.0)
                ratios = tuple(float(g[k + 1] / (r[k] ** pbar * g[k])) for k in range(n - 2))
        if bad:
            t = bad[0]
            a, c = sorted((names[t.levels[0]], names[t.levels[2]]))
            if t.pattern != "monotonic":
                desc = t.pattern + (f" (order {t.order:.3g})" if math.isfinite(t.order) else "")
            else:
                desc = f"order {t.order:.3g}, outside the plausible {lo:g}-{hi:g}"
            asym, why = False, f"levels {a}-{c}: {desc}"
        elif float(orders.max() - orders.min()) > ORDER_AGREE:
            asym, why = False, (f"triplet orders {', '.join(f'{o:.3g}' for o in orders)} (finest first) differ "
                                f"by more than {ORDER_AGREE:g}")
        elif not ratios or any(abs(x - 1.0) > ASYMPTOTIC_TOL for x in ratios):
            asym, why = False, ("Roache's ratio GCI_coarse / (r^p GCI_fine) is "
                                f"{', '.join(f'{x:.3g}' for x in ratios)}, not within {ASYMPTOTIC_TOL:g} of 1")
        else:
            asym, why = True, (f"{n - 2} triplets, orders {', '.join(f'{o:.3g}' for o in orders)} (finest first), "
                               f"Roache's ratio {', '.join(f'{x:.3g}' for x in ratios)}")
    if not math.isfinite(p_obs) or p_obs <= 0.0:
        # An oscillating triplet whose order equation has no positive root: no band.
        return LevelAssessment(
            verdict=t0.pattern, changes=d, triplets=tuple(trips), observed_order=p_obs, formal_order=formal_order,
            order_low=lo, order_high=hi, order_plausible=False, order_used=nan, safety_factor=nan,
            extrapolated=nan, extrapolated_observed=nan, half_width=nan, gci_fine=nan, asymptotic=False,
            asymptotic_reason=why, roache_ratios=ratios, singular=False, growth_exponent=nan, notes=tuple(notes))
    # Bounded order: never above the formal order (Roache 1998), never below the plausible band's low end
    # (an order near 0 would make the band arbitrarily wide; a lower order than that is reported as not
    # asymptotic, with Fs = 3).
    p_used = min(max(p_obs, lo), float(formal_order))
    coarse_steps = min(t0.ratios) < min_ratio
    verified = t0.pattern == "monotonic" and plausible and asym is not False and not coarse_steps
    fs = SAFETY_FACTOR if verified else SAFETY_FACTOR_UNVERIFIED
    if coarse_steps:
        notes.append(f"a step between the three finest levels refines by only {min(t0.ratios):.3g} (below "
                     f"{min_ratio:g}): the order is not reliable; Fs = {fs:g}")
    if p_obs > hi:
        notes.append(f"observed order {p_obs:.3g} is above the plausible {lo:g}-{hi:g} for a formal order "
                     f"{formal_order:g}: the band uses the formal order and Fs = {fs:g}")
    elif p_obs < lo:
        notes.append(f"observed order {p_obs:.3g} is below the plausible {lo:g}-{hi:g}: not yet in the "
                     f"asymptotic range; the band uses order {p_used:.3g} and Fs = {fs:g}")
    elif p_obs > formal_order:
        notes.append(f"observed order {p_obs:.3g} is capped at the formal order {formal_order:g} for the band")
    if t0.pattern == "oscillatory":
        # Celik's order takes |ln|e32/e21| + q|, so a swing that grows also gets a positive order: say so.
        grew = abs(float(d[0])) > abs(float(d[1]))
        notes.append("the changes alternate in sign" + (" and the finest swing is the larger: the band is "
                                                         "indicative" if grew else ""))
    half = fs * abs(f1 - f2) / (r21**p_used - 1.0)
    return LevelAssessment(
        verdict=t0.pattern, changes=d, triplets=tuple(trips), observed_order=p_obs, formal_order=formal_order,
        order_low=lo, order_high=hi, order_plausible=plausible, order_used=p_used, safety_factor=fs,
        extrapolated=_richardson(f1, f2, r21, p_used), extrapolated_observed=_richardson(f1, f2, r21, p_obs),
        half_width=half, gci_fine=half / abs(f1) if f1 != 0.0 else nan, asymptotic=asym, asymptotic_reason=why,
        roache_ratios=ratios, singular=False, growth_exponent=nan, notes=tuple(notes))
