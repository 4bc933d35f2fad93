"""Classical elasticity solutions: thick cylinder, thick sphere, round shafts.

Any consistent unit system: pressure and stress ``[F/L^2]``, lengths
``[L]``, torque ``[F L]``. Pressures are positive in compression of the
loaded surface (the usual sense of a fluid pressure); stresses are positive
in tension.

Source for the cylinder and sphere: S. P. Timoshenko & J. N. Goodier,
Theory of Elasticity, 3rd ed., McGraw-Hill 1970 -- thick cylinder in ch. 4
(section 28 "Stress distribution symmetrical about an axis" and section 30
"Displacements for symmetrical stress distributions"), sphere in ch. 11
(section 137, "Symmetrical stress distribution in a sphere"). These
section numbers are from memory, not checked against the book.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "ThickCylinder",
    "thick_cylinder",
    "CompoundCylinder",
    "compound_cylinder",
    "ThickSphere",
    "thick_sphere",
    "shaft_polar_moment",
    "shaft_shear_stress",
    "shaft_twist_angle",
]

EndCondition = Literal["plane_strain", "open", "closed"]


def _positive(name: str, value: float) -> float:
    v = float(value)
    if not np.isfinite(v) or v <= 0.0:
        raise ValueError(f"{name} must be a finite number > 0, got {value!r}")
    return v


def _radii(r: ArrayLike, a: float, b: float) -> tuple[NDArray[np.float64], float, float]:
    a_ = _positive("a (inner radius)", a)
    b_ = _positive("b (outer radius)", b)
    if not b_ > a_:
        raise ValueError(f"b (outer radius) must exceed a (inner radius); got a={a!r}, b={b!r}")
    rr = np.asarray(r, dtype=float)
    tol = 1e-12 * b_
    if np.any(~np.isfinite(rr)) or np.any(rr < a_ - tol) or np.any(rr > b_ + tol):
        raise ValueError(f"r must lie in [a={a_}, b={b_}]")
    return rr, a_, b_


@dataclass(frozen=True)
class ThickCylinder:
    """Lamé thick-cylinder fields at the requested radii.

    Attributes
    ----------
    sigma_r, sigma_theta, sigma_z : ndarray, shape of ``r``
        Radial, hoop and axial stress ``[F/L^2]``.
    u_r : ndarray or None, shape of ``r``
        Radial displacement ``[L]``; None when ``E`` was not given.
    """

    sigma_r: NDArray[np.float64]
    sigma_theta: NDArray[np.float64]
    sigma_z: NDArray[np.float64]
    u_r: NDArray[np.float64] | None


def thick_cylinder(
    r: ArrayLike,
    a: float,
    b: float,
    p_i: float = 0.0,
    p_o: float = 0.0,
    *,
    E: float | None = None,
    nu: float | None = None,
    end_condition: EndCondition = "plane_strain",
) -> ThickCylinder:
    """Lamé solution for a thick-walled cylinder under internal/external pressure.

    With ``A = (p_i a^2 - p_o b^2)/(b^2 - a^2)`` and
    ``B = (p_i - p_o) a^2 b^2 / (b^2 - a^2)``::

        sigma_r     = A - B / r^2
        sigma_theta = A + B / r^2

    Axial stress and radial displacement ``u = r eps_theta`` by end condition:

    * ``"plane_strain"`` (``eps_z = 0``): ``sigma_z = 2 nu A``,
      ``u = (1 + nu) r / E [(1 - 2 nu) A + B / r^2]``;
    * ``"open"`` (plane stress, ``sigma_z = 0``):
      ``u = r / E [(1 - nu) A + (1 + nu) B / r^2]``;
    * ``"closed"`` (end caps carry the pressures, ``sigma_z = A``):
      ``u = r / E [(1 - 2 nu) A + (1 + nu) B / r^2]``.

    Source: Timoshenko & Goodier, Theory of Elasticity, 3rd ed. 1970,
    sections 28 and 30 (from memory; see module docstring). The displacement
    expressions follow from Hooke's law with the stresses above.

    Parameters
    ----------
    r : array_like
        Radii in ``[a, b]`` ``[L]``; any shape.
    a, b : float
        Inner and outer radius, ``0 < a < b`` ``[L]``.
    p_i, p_o : float, optional
        Internal and external pressure ``[F/L^2]`` (default 0).
    E : float, optional
        Young's modulus ``[F/L^2]``; needed for ``u_r``.
    nu : float, optional
        Poisson's ratio in (-1, 0.5); needed for ``u_r`` and for
        ``sigma_z`` in plane strain.
    end_condition : {"plane_strain", "open", "closed"}
        Axial condition, see above.

    Returns
    -------
    ThickCylinder
    """
    rr, a_, b_ = _radii(r, a, b)
    if end_condition not in ("plane_strain", "open", "closed"):
        raise ValueError(f"end_condition must be 'plane_strain', 'open' or 'closed', got {end_condition!r}")
    nu_ = None
    if nu is not None:
        nu_ = float(nu)
        if not (-1.0 < nu_ < 0.5):
            raise ValueError(f"nu must lie in (-1, 0.5), got {nu!r}")
    if E is not None and nu_ is None:
        raise ValueError("nu is needed with E to compute the radial displacement")
    if end_condition == "plane_strain" and nu_ is None:
        raise ValueError("nu is needed for sigma_z with end_condition='plane_strain'")
    d = b_**2 - a_**2
    A = (float(p_i) * a_**2 - float(p_o) * b_**2) / d
    B = (float(p_i) - float(p_o)) * a_**2 * b_**2 / d
    sr = A - B / rr**2
    st = A + B / rr**2
    if end_condition == "plane_strain":
        sz = np.full_like(rr, 2.0 * nu_ * A)  # type: ignore[operator]
    elif end_condition == "open":
        sz = np.zeros_like(rr)
    else:
        sz = np.full_like(rr, A)
    u = None
    if E is not None:
        E_ = _positive("E", E)
        assert nu_ is not None
        if end_condition == "plane_strain":
            u = (1.0 + nu_) * rr / E_ * ((1.0 - 2.0 * nu_) * A + B / rr**2)
        elif end_condition == "open":
            u = rr / E_ * ((1.0 - nu_) * A + (1.0 + nu_) * B / rr**2)
        else:
            u = rr / E_ * ((1.0 - 2.0 * nu_) * A + (1.0 + nu_) * B / rr**2)
    return ThickCylinder(sigma_r=sr, sigma_theta=st, sigma_z=sz, u_r=u)


@dataclass(frozen=True)
class CompoundCylinder:
    """Two bonded thick cylinders (an inner one of radii ``a..c`` in an outer one of ``c..b``).

    Attributes
    ----------
    interface_pressure : float
        Pressure between the cylinders at ``r = c`` ``[F/L^2]`` (positive in compression).
    inner, outer : ThickCylinder
        Each cylinder's Lamé fields at the radii asked for (``r_inner`` in ``[a, c]``, ``r_outer``
        in ``[c, b]``); the hoop and axial stresses jump at ``r = c``, the radial stress and the
        radial displacement do not.
    """

    interface_pressure: float
    inner: ThickCylinder
    outer: ThickCylinder


def compound_cylinder(
    a: float,
    c: float,
    b: float,
    p_i: float = 0.0,
    p_o: float = 0.0,
    *,
    E_inner: float,
    nu_inner: float,
    E_outer: float,
    nu_outer: float,
    r_inner: ArrayLike | None = None,
    r_outer: ArrayLike | None = None,
    end_condition: EndCondition = "plane_strain",
) -> CompoundCylinder:
    """Lamé solution of a compound cylinder of two materials under internal/external pressure.

    Each cylinder follows :func:`thick_cylinder` with the interface pressure ``q`` as its outer
    (inner cylinder) or inner (outer cylinder) pressure; ``q`` makes the radial displacements of
    both equal at ``r = c`` (the cylinders are bonded, or fit without clearance). The radial
    displacement is linear in the pressures, ``u_in(c) = A p_i + B q`` and
    ``u_out(c) = C q + D p_o``, so ``q = (A p_i - D p_o) / (C - B)``.

    ``"plane_strain"`` (both held axially, ``eps_z = 0``) is exact for bonded cylinders;
    ``"open"`` (``sigma_z = 0`` in each) takes the cylinders as free to slide axially on each
    other (the usual press-fit idealisation); ``"closed"`` is not offered (the end-cap force would
    have to be shared between the two).

    Source: Lamé's solution for each cylinder with continuity of radial displacement at the
    interface, Timoshenko & Goodier, Theory of Elasticity, 3rd ed. 1970, thick-walled cylinders
    (section numbers from memory, see the module docstring).

    Parameters
    ----------
    a, c, b : float
        Inner radius, interface radius and outer radius, ``0 < a < c < b`` ``[L]``.
    p_i, p_o : float
        Internal and external pressure ``[F/L^2]``.
    E_inner, nu_inner, E_outer, nu_outer : float
        Each cylinder's Young's modulus ``[F/L^2]`` and Poisson's ratio.
    r_inner, r_outer : array_like, optional
        Radii at which to evaluate each cylinder (default ``(a, c)`` and ``(c, b)``).
    end_condition : {"plane_strain", "open"}
    """
    if end_condition not in ("plane_strain", "open"):
        raise ValueError(f"end_condition must be 'plane_strain' or 'open', got {end_condition!r}")
    a_, c_, b_ = _positive("a", a), _positive("c", c), _positive("b", b)
    if not a_ < c_ < b_:
        raise ValueError(f"the radii must satisfy a < c < b; got a={a!r}, c={c!r}, b={b!r}")

    def u_in(pi: float, q: float) -> float:
        u = thick_cylinder(c_, a_, c_, pi, q, E=E_inner, nu=nu_inner, end_condition=end_condition).u_r
        assert u is not None  # E given: the displacement is computed
        return float(u)

    def u_out(q: float, po: float) -> float:
        u = thick_cylinder(c_, c_, b_, q, po, E=E_outer, nu=nu_outer, end_condition=end_condition).u_r
        assert u is not None
        return float(u)

    A, B = u_in(1.0, 0.0), u_in(0.0, 1.0)
    C, D = u_out(1.0, 0.0), u_out(0.0, 1.0)
    q = (A * float(p_i) - D * float(p_o)) / (C - B)
    ri = np.array([a_, c_]) if r_inner is None else r_inner
    ro = np.array([c_, b_]) if r_outer is None else r_outer
    inner = thick_cylinder(ri, a_, c_, p_i, q, E=E_inner, nu=nu_inner, end_condition=end_condition)
    outer = thick_cylinder(ro, c_, b_, q, p_o, E=E_outer, nu=nu_outer, end_condition=end_condition)
    return CompoundCylinder(interface_pressure=float(q), inner=inner, outer=outer)


@dataclass(frozen=True)
class ThickSphere:
    """Lamé thick-sphere fields at the requested radii.

    Attributes
    ----------
    sigma_r : ndarray, shape of ``r``
        Radial stress ``[F/L^2]``.
    sigma_t : ndarray, shape of ``r``
        Tangential stress (equal in both tangential directions) ``[F/L^2]``.
    u_r : ndarray or None, shape of ``r``
        Radial displacement ``[L]``; None when ``E`` was not given.
    """

    sigma_r: NDArray[np.float64]
    sigma_t: NDArray[np.float64]
    u_r: NDArray[np.float64] | None


def thick_sphere(
    r: ArrayLike,
    a: float,
    b: float,
    p_i: float = 0.0,
    p_o: float = 0.0,
    *,
    E: float | None = None,
    nu: float | None = None,
) -> ThickSphere:
    """Lamé solution for a thick-walled hollow sphere under pressure.

    With ``A = (p_i a^3 - p_o b^3)/(b^3 - a^3)`` and
    ``B = (p_i - p_o) a^3 b^3 / (b^3 - a^3)``::

        sigma_r = A - B / r^3
        sigma_t = A + B / (2 r^3)
        u_r     = r / E [(1 - 2 nu) A + (1 + nu) B / (2 r^3)]

    Source: Timoshenko & Goodier, Theory of Elasticity, 3rd ed. 1970,
    section 137 (from memory; see module docstring).

    Parameters
    ----------
    r : array_like
        Radii in ``[a, b]`` ``[L]``; any shape.
    a, b : float
        Inner and outer radius, ``0 < a < b`` ``[L]``.
    p_i, p_o : float, optional
        Internal and external pressure ``[F/L^2]``.
    E, nu : float, optional
        Young's modulus ``[F/L^2]`` and Poisson's ratio; both needed for
        ``u_r``.

    Returns
    -------
    ThickSphere
    """
    rr, a_, b_ = _radii(r, a, b)
    if (E is None) != (nu is None):
        raise ValueError(f"give both E and nu for the displacement, or neither (got E={E!r}, nu={nu!r})")
    d = b_**3 - a_**3
    A = (float(p_i) * a_**3 - float(p_o) * b_**3) / d
    B = (float(p_i) - float(p_o)) * a_**3 * b_**3 / d
    u = None
    if E is not None:
        E_ = _positive("E", E)
        nu_ = float(nu)  # type: ignore[arg-type]
        if not (-1.0 < nu_ < 0.5):
            raise ValueError(f"nu must lie in (-1, 0.5), got {nu!r}")
        u = rr / E_ * ((1.0 - 2.0 * nu_) * A + (1.0 + nu_) * B / (2.0 * rr**3))
    return ThickSphere(sigma_r=A - B / rr**3, sigma_t=A + B / (2.0 * rr**3), u_r=u)


def shaft_polar_moment(d_out: float, d_in: float = 0.0) -> float:
    """Polar second moment of a solid or hollow round shaft.

    ``J = pi (d_out^4 - d_in^4) / 32`` (common practice; Timoshenko &
    Goodier 3rd ed., torsion of circular shafts, ch. 10 -- from memory).

    Parameters
    ----------
    d_out : float
        Outer diameter ``[L]``, > 0.
    d_in : float, optional
        Inner diameter ``[L]``, in ``[0, d_out)``; 0 for a solid shaft.

    Returns
    -------
    float
        ``J`` ``[L^4]``.
    """
    do = _positive("d_out", d_out)
    di = float(d_in)
    if not np.isfinite(di) or not (0.0 <= di < do):
        raise ValueError(f"d_in must lie in [0, d_out={do}), got {d_in!r}")
    return np.pi * (do**4 - di**4) / 32.0


def shaft_shear_stress(T: ArrayLike, r: ArrayLike, J: float) -> NDArray[np.float64]:
    """Torsional shear stress of a round shaft, ``tau = T r / J``.

    Source: Timoshenko & Goodier 3rd ed., torsion of circular shafts
    (ch. 10, from memory); exact in elasticity for solid and hollow circular
    sections.

    Parameters
    ----------
    T : array_like
        Torque ``[F L]``; broadcast with ``r``.
    r : array_like
        Radius of the point ``[L]``, >= 0.
    J : float
        Polar second moment ``[L^4]``, > 0 (:func:`shaft_polar_moment`).

    Returns
    -------
    ndarray
        Shear stress ``[F/L^2]``, broadcast shape of ``T`` and ``r``.
    """
    rr = np.asarray(r, dtype=float)
    if np.any(rr < 0.0):
        raise ValueError("r must be >= 0")
    return np.asarray(T, dtype=float) * rr / _positive("J", J)


def shaft_twist_angle(T: ArrayLike, L: float, G: float, J: float) -> NDArray[np.float64]:
    """Angle of twist of a uniform round shaft, ``theta = T L / (G J)``.

    Source: Timoshenko & Goodier 3rd ed., torsion of circular shafts
    (ch. 10, from memory).

    Parameters
    ----------
    T : array_like
        Torque ``[F L]``.
    L : float
        Shaft length ``[L]``, > 0.
    G : float
        Shear modulus ``[F/L^2]``, > 0.
    J : float
        Polar second moment ``[L^4]``, > 0.

    Returns
    -------
    ndarray
        Twist angle ``[rad]``, shape of ``T``.
    """
    return np.asarray(T, dtype=float) * _positive("L", L) / (_positive("G", G) * _positive("J", J))
