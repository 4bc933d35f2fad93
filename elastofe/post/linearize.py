"""Stress linearization along a line through a wall.

Source: ASME Boiler and Pressure Vessel Code, Section VIII, Division 2,
Part 5, Annex 5-A "Linearization of stress results for stress
classification" (equations recalled from memory, not checked against the
current edition). With ``t`` the line length and ``s`` the distance from its
start, for every stress component::

    membrane            sigma_m = (1/t)     integral_0^t sigma ds
    bending (at s = 0)  sigma_b = (6/t^2)   integral_0^t sigma (t/2 - s) ds
    bending (at s = t)          = -sigma_b
    peak                sigma_F = sigma - sigma_m - sigma_b   (at each end)

The bending part is the linear part about the mid-point. Common practice
(the Annex's recommendation) takes the bending part only for the
components normal to the line and the in-plane tangential ones, and treats
the through-thickness normal and the shear along the line as membrane plus
peak; this module keeps the simple form and linearizes all six components
alike -- set the unwanted bending components to zero afterwards if needed.

Component order everywhere: ``xx, yy, zz, xy, yz, xz``. Stress unit
``[F/L^2]`` and length unit ``[L]`` are free (any consistent system).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import integrate

from .recovery import tensor
from .recovery import von_mises as equivalent

__all__ = ["LinearizedStress", "linearize", "von_mises", "tresca", "linearize_samples", "as_dict"]


def _check6(stress: ArrayLike) -> NDArray[np.float64]:
    s = np.asarray(stress, dtype=float)
    if s.ndim < 1 or s.shape[-1] != 6:
        raise ValueError(f"stress must have shape (..., 6) in order xx, yy, zz, xy, yz, xz; got {s.shape}")
    return s


def von_mises(stress: ArrayLike) -> NDArray[np.float64]:
    """Von Mises equivalent stress.

    ``sqrt(((sxx-syy)^2 + (syy-szz)^2 + (szz-sxx)^2)/2 + 3 (sxy^2 + syz^2 + sxz^2))``
    (common practice; ASME VIII-2 Part 5 eq. for the equivalent stress, from
    memory).

    Parameters
    ----------
    stress : array_like, shape (..., 6)
        Components ``xx, yy, zz, xy, yz, xz`` ``[F/L^2]``.

    Returns
    -------
    ndarray, shape (...)
        Equivalent stress ``[F/L^2]``.
    """
    return equivalent(_check6(stress))


def tresca(stress: ArrayLike) -> NDArray[np.float64]:
    """Tresca equivalent stress (stress intensity): largest minus smallest principal stress.

    Common practice (maximum shear theory; twice the maximum shear stress).

    Parameters
    ----------
    stress : array_like, shape (..., 6)
        Components ``xx, yy, zz, xy, yz, xz`` ``[F/L^2]``.

    Returns
    -------
    ndarray, shape (...)
        ``sigma_1 - sigma_3`` ``[F/L^2]``.
    """
    s = _check6(stress)
    ev = np.linalg.eigvalsh(tensor(s))
    return ev[..., -1] - ev[..., 0]


@dataclass(frozen=True)
class LinearizedStress:
    """Membrane, bending and peak parts of the stress along a line.

    All tensors have shape (6,) in order ``xx, yy, zz, xy, yz, xz``
    ``[F/L^2]``; "start" is ``s = s[0]``, "end" is ``s = s[-1]``.

    Attributes
    ----------
    thickness : float
        Line length ``t = s[-1] - s[0]`` ``[L]``.
    membrane : ndarray, shape (6,)
        Average over the line.
    bending_start, bending_end : ndarray, shape (6,)
        Linear part at the two ends (``bending_end = -bending_start``).
    peak_start, peak_end : ndarray, shape (6,)
        Total minus membrane minus bending at each end.
    total_start, total_end : ndarray, shape (6,)
        The input stress at each end.
    von_mises_membrane : float
        Von Mises of ``membrane``.
    von_mises_membrane_bending_start, von_mises_membrane_bending_end : float
        Von Mises of ``membrane + bending`` at each end.
    von_mises_total_start, von_mises_total_end : float
        Von Mises of the total stress at each end.
    tresca_membrane, tresca_membrane_bending_start, tresca_membrane_bending_end,
    tresca_total_start, tresca_total_end : float
        The same with the Tresca equivalent.
    """

    thickness: float
    membrane: NDArray[np.float64]
    bending_start: NDArray[np.float64]
    bending_end: NDArray[np.float64]
    peak_start: NDArray[np.float64]
    peak_end: NDArray[np.float64]
    total_start: NDArray[np.float64]
    total_end: NDArray[np.float64]
    von_mises_membrane: float
    von_mises_membrane_bending_start: float
    von_mises_membrane_bending_end: float
    von_mises_total_start: float
    von_mises_total_end: float
    tresca_membrane: float
    tresca_membrane_bending_start: float
    tresca_membrane_bending_end: float
    tresca_total_start: float
    tresca_total_end: float


def _integrate(y: NDArray[np.float64], x: NDArray[np.float64]) -> NDArray[np.float64]:
    """Integrate the columns of ``y`` (n, k) over ``x`` (n,) with Simpson's rule.

    Used only for evenly spaced points, ``n >= 3``.
    """
    return integrate.simpson(y, x=x, axis=0)


def _piecewise_linear_moments(sig: NDArray[np.float64], xi: NDArray[np.float64],
                              t: float) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Exact integrals of ``sig`` and ``sig (t/2 - xi)`` for piecewise-linear ``sig``.

    On a segment of length ``h`` with linear ``f`` and ``w`` the product
    integrates exactly to ``h/6 (2 f0 w0 + f0 w1 + f1 w0 + 2 f1 w1)``; the
    first moment reduces to the trapezoid rule.
    """
    h = np.diff(xi)[:, None]
    f0, f1 = sig[:-1], sig[1:]
    w = (0.5 * t - xi)[:, None]
    w0, w1 = w[:-1], w[1:]
    m0 = np.sum(0.5 * h * (f0 + f1), axis=0)
    m1 = np.sum(h / 6.0 * (2.0 * f0 * w0 + f0 * w1 + f1 * w0 + 2.0 * f1 * w1), axis=0)
    return m0, m1


def linearize(s: ArrayLike, stress: ArrayLike) -> LinearizedStress:
    """Split stresses along a line into membrane, bending and peak parts.

    Formulas in the module docstring (ASME BPVC VIII-2 Part 5 Annex 5-A,
    from memory). Integration: composite Simpson's rule
    (``scipy.integrate.simpson``) when the points are evenly spaced and
    there are at least 3; otherwise the stress is taken as piecewise linear
    between the points and integrated exactly (for the membrane part this is
    the trapezoid rule). Both are exact for a linear stress distribution;
    for curved distributions use enough points (errors fall as ``n**-2``
    for the piecewise-linear rule and ``n**-4`` for Simpson's).

    Parameters
    ----------
    s : array_like, shape (n,)
        Distances along the line, strictly increasing, ``n >= 2`` ``[L]``
        (usually from 0 at the start; only differences matter).
    stress : array_like, shape (n, 6)
        Stress components ``xx, yy, zz, xy, yz, xz`` at the points ``s``
        ``[F/L^2]``, in one fixed coordinate system (e.g. rotated to the
        line's local axes beforehand).

    Returns
    -------
    LinearizedStress
    """
    x = np.asarray(s, dtype=float)
    sig = np.asarray(stress, dtype=float)
    if x.ndim != 1 or x.size < 2:
        raise ValueError(f"s must be 1-D with at least 2 points, got shape {x.shape}")
    if sig.shape != (x.size, 6):
        raise ValueError(f"stress must have shape (n, 6) = ({x.size}, 6), got {sig.shape}")
    if np.any(~np.isfinite(x)) or np.any(~np.isfinite(sig)):
        raise ValueError("s and stress must be finite")
    if np.any(np.diff(x) <= 0.0):
        raise ValueError("s must be strictly increasing")
    xi = x - x[0]
    t = float(xi[-1])
    dx = np.diff(xi)
    if xi.size >= 3 and np.allclose(dx, dx[0], rtol=1e-9, atol=0.0):
        m0 = _integrate(sig, xi)
        m1 = _integrate(sig * (0.5 * t - xi)[:, None], xi)
    else:
        m0, m1 = _piecewise_linear_moments(sig, xi, t)
    mem = m0 / t
    bend = 6.0 / t**2 * m1
    tot0, tot1 = sig[0].copy(), sig[-1].copy()
    mb0, mb1 = mem + bend, mem - bend
    return LinearizedStress(
        thickness=t,
        membrane=mem,
        bending_start=bend,
        bending_end=-bend,
        peak_start=tot0 - mb0,
        peak_end=tot1 - mb1,
        total_start=tot0,
        total_end=tot1,
        von_mises_membrane=float(von_mises(mem)),
        von_mises_membrane_bending_start=float(von_mises(mb0)),
        von_mises_membrane_bending_end=float(von_mises(mb1)),
        von_mises_total_start=float(von_mises(tot0)),
        von_mises_total_end=float(von_mises(tot1)),
        tresca_membrane=float(tresca(mem)),
        tresca_membrane_bending_start=float(tresca(mb0)),
        tresca_membrane_bending_end=float(tresca(mb1)),
        tresca_total_start=float(tresca(tot0)),
        tresca_total_end=float(tresca(tot1)),
    )


def linearize_samples(s: ArrayLike, stress: ArrayLike) -> tuple[LinearizedStress | None, dict]:
    """:func:`linearize` on sampled line data that may hold NaN rows (samples outside the part).

    Samples outside the part at either end are dropped, so the line is linearized over the part
    of it that lies in the material (the wall). A gap inside (the line leaves and re-enters the
    part) makes the split meaningless; then no result is returned and ``info["reason"]`` says why.

    Parameters
    ----------
    s : array_like, shape (n,)
        Distance from the line's start ``[L]``.
    stress : array_like, shape (n, 6)
        Stress components (xx, yy, zz, xy, yz, xz), NaN outside the part ``[F/L^2]``.

    Returns
    -------
    LinearizedStress or None, dict
        The split, and ``{"s_start", "s_end", "samples"}`` of the part used (or ``{"reason"}``).
    """
    x = np.asarray(s, dtype=float)
    sig = np.asarray(stress, dtype=float)
    ok = np.all(np.isfinite(sig), axis=1)
    idx = np.flatnonzero(ok)
    if idx.size < 2:
        return None, {"reason": "fewer than two samples of the line lie inside the part"}
    i0, i1 = int(idx[0]), int(idx[-1])
    if not ok[i0:i1 + 1].all():
        return None, {"reason": "the line leaves the part and enters it again; linearize across one wall only"}
    return linearize(x[i0:i1 + 1], sig[i0:i1 + 1]), {"s_start": float(x[i0]), "s_end": float(x[i1]),
                                                     "samples": i1 - i0 + 1}


def as_dict(lin: LinearizedStress, components: tuple[str, ...] = ("xx", "yy", "zz", "xy", "yz", "xz")) -> dict:
    """A JSON-ready dict of a :class:`LinearizedStress` (tensors as {component: value})."""
    def t(v):
        return {c: float(x) for c, x in zip(components, v)}

    return {
        "thickness": lin.thickness,
        "membrane": t(lin.membrane),
        "bending": {"start": t(lin.bending_start), "end": t(lin.bending_end)},
        "peak": {"start": t(lin.peak_start), "end": t(lin.peak_end)},
        "total": {"start": t(lin.total_start), "end": t(lin.total_end)},
        "von_mises": {"membrane": lin.von_mises_membrane,
                      "membrane_plus_bending": {"start": lin.von_mises_membrane_bending_start,
                                                "end": lin.von_mises_membrane_bending_end},
                      "total": {"start": lin.von_mises_total_start, "end": lin.von_mises_total_end}},
        "tresca": {"membrane": lin.tresca_membrane,
                   "membrane_plus_bending": {"start": lin.tresca_membrane_bending_start,
                                             "end": lin.tresca_membrane_bending_end},
                   "total": {"start": lin.tresca_total_start, "end": lin.tresca_total_end}},
    }
