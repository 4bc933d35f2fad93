"""Stress concentration at a circular hole in a plate under tension.

Units: stresses ``[F/L^2]``, lengths ``[L]``, angles ``[rad]``;
concentration factors are dimensionless. Any consistent system.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "kirsch_stresses",
    "kirsch_hole_edge_stress",
    "kt_net_central_hole",
    "kt_gross_from_net",
    "kt_net_from_gross",
]


def kirsch_stresses(
    r: ArrayLike, theta: ArrayLike, a: float, sigma: float
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Kirsch solution: infinite plate with a circular hole, uniaxial tension.

    Remote stress ``sigma`` along ``x``; polar angle ``theta`` measured from
    the ``x`` (load) axis; hole radius ``a``::

        sigma_r   = s/2 (1 - a^2/r^2) + s/2 (1 - 4 a^2/r^2 + 3 a^4/r^4) cos 2t
        sigma_t   = s/2 (1 + a^2/r^2) - s/2 (1 + 3 a^4/r^4) cos 2t
        tau_rt    = -s/2 (1 + 2 a^2/r^2 - 3 a^4/r^4) sin 2t

    Source: G. Kirsch (1898); Timoshenko & Goodier, Theory of Elasticity,
    3rd ed. 1970, section 35 "The effect of circular holes on stress
    distributions in plates" (from memory). The hoop stress at the hole edge
    reaches ``3 sigma`` at ``theta = +-pi/2`` (Kt = 3).

    Parameters
    ----------
    r : array_like
        Radius ``[L]``, ``>= a``; broadcast with ``theta``.
    theta : array_like
        Angle from the load axis ``[rad]``.
    a : float
        Hole radius ``[L]``, > 0.
    sigma : float
        Remote uniaxial stress ``[F/L^2]``.

    Returns
    -------
    sigma_r, sigma_theta, tau_r_theta : ndarray
        Polar stress components ``[F/L^2]``, broadcast shape of ``r`` and
        ``theta``.
    """
    a_ = float(a)
    if not np.isfinite(a_) or a_ <= 0.0:
        raise ValueError(f"a (hole radius) must be a finite number > 0, got {a!r}")
    rr = np.asarray(r, dtype=float)
    if np.any(~np.isfinite(rr)) or np.any(rr < a_ * (1.0 - 1e-12)):
        raise ValueError(f"r must be finite and >= a={a_} (outside the hole)")
    t = np.asarray(theta, dtype=float)
    s = float(sigma)
    q2 = (a_ / rr) ** 2
    q4 = q2 * q2
    c2, s2 = np.cos(2.0 * t), np.sin(2.0 * t)
    sr = 0.5 * s * (1.0 - q2) + 0.5 * s * (1.0 - 4.0 * q2 + 3.0 * q4) * c2
    st = 0.5 * s * (1.0 + q2) - 0.5 * s * (1.0 + 3.0 * q4) * c2
    trt = -0.5 * s * (1.0 + 2.0 * q2 - 3.0 * q4) * s2
    return sr, st, trt


def kirsch_hole_edge_stress(theta: ArrayLike, sigma: float) -> NDArray[np.float64]:
    """Hoop stress on the edge of the hole, ``sigma (1 - 2 cos 2 theta)``.

    The Kirsch solution at ``r = a`` (see :func:`kirsch_stresses`; source
    Timoshenko & Goodier 3rd ed. section 35, from memory).

    Parameters
    ----------
    theta : array_like
        Angle from the load axis ``[rad]``.
    sigma : float
        Remote uniaxial stress ``[F/L^2]``.

    Returns
    -------
    ndarray
        Hoop stress ``[F/L^2]``, shape of ``theta``.
    """
    return float(sigma) * (1.0 - 2.0 * np.cos(2.0 * np.asarray(theta, dtype=float)))


def _ratio(d_over_W: ArrayLike) -> NDArray[np.float64]:
    x = np.asarray(d_over_W, dtype=float)
    if np.any(~np.isfinite(x)) or np.any(x < 0.0) or np.any(x >= 1.0):
        raise ValueError(f"d_over_W (hole diameter / plate width) must lie in [0, 1), got {d_over_W!r}")
    return x


def kt_net_central_hole(d_over_W: ArrayLike) -> NDArray[np.float64]:
    """Net-section Kt of a finite-width plate with a central hole in tension.

    ``Kt_n = 3 - 3.13 (d/W) + 3.66 (d/W)^2 - 1.53 (d/W)^3`` with the nominal
    stress on the net section, ``sigma_nom = P / ((W - d) t)``.

    Source: Howland (1930), as fitted in Roark's Formulas for Stress and
    Strain (Young & Budynas, 7th ed.), Table 17.1 -- the citation as named
    in the project's issue; the coefficients were not checked against the
    book here. Validity: the fit is quoted for ``0 <= d/W <= 1`` (from
    memory); Howland's own series results cover roughly ``d/W <= 0.5``, so
    values for larger holes rest on the fit alone. At ``d/W = 0`` it gives
    the Kirsch value 3. This function accepts ``0 <= d/W < 1``.

    Parameters
    ----------
    d_over_W : array_like
        Hole diameter over plate width, in ``[0, 1)``.

    Returns
    -------
    ndarray
        ``Kt_n`` (dimensionless), shape of ``d_over_W``.
    """
    x = _ratio(d_over_W)
    return 3.0 - 3.13 * x + 3.66 * x**2 - 1.53 * x**3


def kt_gross_from_net(kt_net: ArrayLike, d_over_W: ArrayLike) -> NDArray[np.float64]:
    """Convert a net-section Kt to a gross-section Kt.

    ``sigma_max = Kt_n P/((W - d) t) = Kt_g P/(W t)`` hence
    ``Kt_g = Kt_n / (1 - d/W)`` (definition of the nominal stresses; common
    practice).

    Parameters
    ----------
    kt_net : array_like
        Net-section factor; broadcast with ``d_over_W``.
    d_over_W : array_like
        Hole diameter over plate width, in ``[0, 1)``.

    Returns
    -------
    ndarray
        Gross-section factor (dimensionless).
    """
    return np.asarray(kt_net, dtype=float) / (1.0 - _ratio(d_over_W))


def kt_net_from_gross(kt_gross: ArrayLike, d_over_W: ArrayLike) -> NDArray[np.float64]:
    """Convert a gross-section Kt to a net-section Kt, ``Kt_n = Kt_g (1 - d/W)``.

    Inverse of :func:`kt_gross_from_net` (common practice).

    Parameters
    ----------
    kt_gross : array_like
        Gross-section factor; broadcast with ``d_over_W``.
    d_over_W : array_like
        Hole diameter over plate width, in ``[0, 1)``.

    Returns
    -------
    ndarray
        Net-section factor (dimensionless).
    """
    return np.asarray(kt_gross, dtype=float) * (1.0 - _ratio(d_over_W))
