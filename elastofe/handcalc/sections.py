"""Cross-section properties of straight beams.

Axes
----
The beam axis is ``x``. The cross-section lies in the ``y``-``z`` plane:
``y`` is the depth direction (the "height" ``h`` of a rectangle) and ``z``
is the width direction (the "width" ``b`` of a rectangle). All second
moments are taken about axes through the centroid:

* ``I_zz = integral of y**2 dA`` -- second moment about the ``z`` axis,
  the one used for bending in the ``x``-``y`` plane (moment vector along z);
* ``I_yy = integral of z**2 dA`` -- second moment about the ``y`` axis;
* ``I_yz = integral of y*z dA`` -- product of area (zero for sections with a
  symmetry axis parallel to ``y`` or ``z``).

Extreme-fibre distances are positive lengths measured from the centroid:
``c_y_max = max(y) - y_c``, ``c_y_min = y_c - min(y)`` and likewise for z.

Units are those of the input lengths ``[L]``: area ``[L^2]``, second
moments and torsion constant ``[L^4]``. Any consistent system is valid.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "Section",
    "rectangle",
    "circle",
    "hollow_circle",
    "polygon",
    "principal_second_moments",
    "rectangle_torsion_constant",
    "cowper_shear_coefficient_rectangle",
    "cowper_shear_coefficient_solid_circle",
    "cowper_shear_coefficient_hollow_circle",
    "cowper_shear_coefficient_thin_tube",
]


@dataclass(frozen=True)
class Section:
    """Centroidal properties of a beam cross-section (axes: module docstring).

    Attributes
    ----------
    area : float
        Cross-sectional area ``[L^2]``.
    centroid : tuple of float
        Centroid ``(y_c, z_c)`` in the coordinates the section was defined
        in ``[L]``; shape (2,).
    I_yy : float
        ``integral z**2 dA`` about the centroidal ``y`` axis ``[L^4]``.
    I_zz : float
        ``integral y**2 dA`` about the centroidal ``z`` axis ``[L^4]``.
    I_yz : float
        Product of area ``integral y z dA`` about the centroid ``[L^4]``.
    c_y_max, c_y_min : float
        Distance from the centroid to the extreme fibre at largest / smallest
        ``y`` (both positive) ``[L]``.
    c_z_max, c_z_min : float
        Same for ``z`` ``[L]``.
    J_torsion : float or None
        Saint-Venant torsion constant ``[L^4]`` (``T = G J dtheta/dx``), or
        None when not computed (general polygons).
    shear_coefficient : float or None
        Timoshenko shear coefficient ``k`` (Cowper 1966) for shear in the
        ``y`` direction, computed when a Poisson's ratio was supplied,
        otherwise None. Dimensionless.
    """

    area: float
    centroid: tuple[float, float]
    I_yy: float
    I_zz: float
    I_yz: float
    c_y_max: float
    c_y_min: float
    c_z_max: float
    c_z_min: float
    J_torsion: float | None = None
    shear_coefficient: float | None = None


def _positive(name: str, value: float) -> float:
    v = float(value)
    if not np.isfinite(v) or v <= 0.0:
        raise ValueError(f"{name} must be a finite number > 0, got {value!r}")
    return v


def _check_nu(nu: float) -> float:
    v = float(nu)
    if not np.isfinite(v) or not (-1.0 < v < 0.5):
        raise ValueError(f"nu (Poisson's ratio) must lie in (-1, 0.5), got {nu!r}")
    return v


# --------------------------------------------------------------------------
# Cowper shear coefficients
# --------------------------------------------------------------------------
def cowper_shear_coefficient_rectangle(nu: float) -> float:
    """Timoshenko shear coefficient of a solid rectangle.

    ``k = 10 (1 + nu) / (12 + 11 nu)``.

    Source: G. R. Cowper, "The shear coefficient in Timoshenko's beam
    theory", J. Appl. Mech. 33 (1966) 335-340, Table 1.

    Parameters
    ----------
    nu : float
        Poisson's ratio, in (-1, 0.5). Dimensionless.

    Returns
    -------
    float
        Shear coefficient ``k`` (dimensionless).
    """
    v = _check_nu(nu)
    return 10.0 * (1.0 + v) / (12.0 + 11.0 * v)


def cowper_shear_coefficient_solid_circle(nu: float) -> float:
    """Timoshenko shear coefficient of a solid circle.

    ``k = 6 (1 + nu) / (7 + 6 nu)``.

    Source: Cowper, J. Appl. Mech. 33 (1966) 335-340, Table 1.

    Parameters
    ----------
    nu : float
        Poisson's ratio, in (-1, 0.5).

    Returns
    -------
    float
        Shear coefficient ``k`` (dimensionless).
    """
    v = _check_nu(nu)
    return 6.0 * (1.0 + v) / (7.0 + 6.0 * v)


def cowper_shear_coefficient_hollow_circle(nu: float, m: float) -> float:
    """Timoshenko shear coefficient of a hollow circle (tube).

    ``k = 6 (1+nu)(1+m^2)^2 / [(7+6 nu)(1+m^2)^2 + (20+12 nu) m^2]`` with
    ``m = d_in / d_out``. Reduces to the solid circle at ``m = 0`` and to
    the thin-walled tube ``2(1+nu)/(4+3nu)`` at ``m = 1``.

    Source: Cowper, J. Appl. Mech. 33 (1966) 335-340, Table 1 (recalled from
    memory; the two limits above were checked against the other entries).

    Parameters
    ----------
    nu : float
        Poisson's ratio, in (-1, 0.5).
    m : float
        Diameter ratio ``d_in / d_out`` in [0, 1].

    Returns
    -------
    float
        Shear coefficient ``k`` (dimensionless).
    """
    v = _check_nu(nu)
    mm = float(m)
    if not (0.0 <= mm <= 1.0):
        raise ValueError(f"m (d_in/d_out) must lie in [0, 1], got {m!r}")
    q = (1.0 + mm * mm) ** 2
    return 6.0 * (1.0 + v) * q / ((7.0 + 6.0 * v) * q + (20.0 + 12.0 * v) * mm * mm)


def cowper_shear_coefficient_thin_tube(nu: float) -> float:
    """Timoshenko shear coefficient of a thin-walled round tube.

    ``k = 2 (1 + nu) / (4 + 3 nu)``.

    Source: Cowper, J. Appl. Mech. 33 (1966) 335-340, Table 1.

    Parameters
    ----------
    nu : float
        Poisson's ratio, in (-1, 0.5).

    Returns
    -------
    float
        Shear coefficient ``k`` (dimensionless).
    """
    v = _check_nu(nu)
    return 2.0 * (1.0 + v) / (4.0 + 3.0 * v)


# --------------------------------------------------------------------------
# Standard shapes
# --------------------------------------------------------------------------
def rectangle_torsion_constant(b: float, h: float, n_terms: int = 200) -> float:
    """Saint-Venant torsion constant of a solid rectangle.

    With long side ``p = max(b, h)`` and short side ``q = min(b, h)``::

        J = (p q^3 / 3) [1 - (192 / pi^5)(q / p) sum_{n=1,3,5..} tanh(n pi p / (2 q)) / n^5]

    Source: Timoshenko & Goodier, Theory of Elasticity, 3rd ed. (1970),
    section 109 "Torsion of rectangular bars" (from memory; section number
    not checked against the book).

    Parameters
    ----------
    b, h : float
        Side lengths ``[L]``, > 0.
    n_terms : int, optional
        Number of odd terms of the series (default 200; the terms fall as
        ``n**-5``).

    Returns
    -------
    float
        Torsion constant ``J`` ``[L^4]``.
    """
    bb = _positive("b", b)
    hh = _positive("h", h)
    if int(n_terms) < 1:
        raise ValueError(f"n_terms must be >= 1, got {n_terms!r}")
    p, q = max(bb, hh), min(bb, hh)
    n = np.arange(1, 2 * int(n_terms), 2, dtype=float)
    series = np.sum(np.tanh(n * np.pi * p / (2.0 * q)) / n**5)
    return p * q**3 / 3.0 * (1.0 - 192.0 / np.pi**5 * (q / p) * series)


def rectangle(b: float, h: float, nu: float | None = None) -> Section:
    """Solid rectangle of width ``b`` (along z) and depth ``h`` (along y).

    ``I_zz = b h^3 / 12``, ``I_yy = h b^3 / 12`` (common practice, e.g.
    Roark's Formulas for Stress and Strain, Table A.1). Centroid at the
    origin (the rectangle spans ``[-h/2, h/2] x [-b/2, b/2]``).

    Parameters
    ----------
    b : float
        Width along ``z`` ``[L]``, > 0.
    h : float
        Depth along ``y`` ``[L]``, > 0.
    nu : float, optional
        Poisson's ratio; when given, ``shear_coefficient`` is Cowper's
        rectangle value.

    Returns
    -------
    Section
    """
    bb = _positive("b", b)
    hh = _positive("h", h)
    k = None if nu is None else cowper_shear_coefficient_rectangle(nu)
    return Section(
        area=bb * hh,
        centroid=(0.0, 0.0),
        I_yy=hh * bb**3 / 12.0,
        I_zz=bb * hh**3 / 12.0,
        I_yz=0.0,
        c_y_max=hh / 2.0,
        c_y_min=hh / 2.0,
        c_z_max=bb / 2.0,
        c_z_min=bb / 2.0,
        J_torsion=rectangle_torsion_constant(bb, hh),
        shear_coefficient=k,
    )


def circle(d: float, nu: float | None = None) -> Section:
    """Solid circle of diameter ``d`` centred at the origin.

    ``A = pi d^2 / 4``, ``I = pi d^4 / 64``, ``J = pi d^4 / 32`` (common
    practice, e.g. Roark's Formulas for Stress and Strain, Table A.1).

    Parameters
    ----------
    d : float
        Diameter ``[L]``, > 0.
    nu : float, optional
        Poisson's ratio; when given, ``shear_coefficient`` is Cowper's solid
        circle value.

    Returns
    -------
    Section
    """
    return hollow_circle(d, 0.0, nu=nu)


def hollow_circle(d_out: float, d_in: float, nu: float | None = None) -> Section:
    """Round tube of outer diameter ``d_out`` and inner diameter ``d_in``.

    ``A = pi (d_out^2 - d_in^2) / 4``, ``I = pi (d_out^4 - d_in^4) / 64``,
    ``J = pi (d_out^4 - d_in^4) / 32`` (common practice).

    Parameters
    ----------
    d_out : float
        Outer diameter ``[L]``, > 0.
    d_in : float
        Inner diameter ``[L]``, in [0, d_out).
    nu : float, optional
        Poisson's ratio; when given, ``shear_coefficient`` is Cowper's hollow
        circle value.

    Returns
    -------
    Section
    """
    do = _positive("d_out", d_out)
    di = float(d_in)
    if not np.isfinite(di) or not (0.0 <= di < do):
        raise ValueError(f"d_in must lie in [0, d_out={do}), got {d_in!r}")
    i = np.pi * (do**4 - di**4) / 64.0
    k = None if nu is None else cowper_shear_coefficient_hollow_circle(nu, di / do)
    return Section(
        area=np.pi * (do**2 - di**2) / 4.0,
        centroid=(0.0, 0.0),
        I_yy=i,
        I_zz=i,
        I_yz=0.0,
        c_y_max=do / 2.0,
        c_y_min=do / 2.0,
        c_z_max=do / 2.0,
        c_z_min=do / 2.0,
        J_torsion=2.0 * i,
        shear_coefficient=k,
    )


def polygon(points: ArrayLike) -> Section:
    """Properties of a simple (non self-intersecting) polygon by Green's theorem.

    With vertices ``(y_i, z_i)`` and ``a_i = y_i z_{i+1} - y_{i+1} z_i``::

        A      = (1/2)  sum a_i
        A y_c  = (1/6)  sum a_i (y_i + y_{i+1})
        int y^2  = (1/12) sum a_i (y_i^2 + y_i y_{i+1} + y_{i+1}^2)
        int yz   = (1/24) sum a_i (y_i z_{i+1} + 2 y_i z_i + 2 y_{i+1} z_{i+1} + y_{i+1} z_i)

    then shifted to the centroid by the parallel-axis theorem. The signed
    area is negative for clockwise vertices; all integrals change sign
    together, so the result is made orientation-independent by dividing out
    the sign. Source: Green's theorem applied edge by edge (common practice;
    e.g. W. D. Pilkey, Analysis and Design of Elastic Beams, Wiley 2002,
    ch. 1 -- from memory).

    Parameters
    ----------
    points : array_like, shape (n, 2)
        Vertices ``(y, z)`` in order (either orientation), ``n >= 3``, the
        last vertex not repeating the first (a repeat is tolerated) ``[L]``.

    Returns
    -------
    Section
        ``J_torsion`` and ``shear_coefficient`` are None.
    """
    p = np.asarray(points, dtype=float)
    if p.ndim != 2 or p.shape[1] != 2 or p.shape[0] < 3:
        raise ValueError(f"points must have shape (n, 2) with n >= 3, got shape {p.shape}")
    if not np.all(np.isfinite(p)):
        raise ValueError("points must be finite numbers")
    if np.allclose(p[0], p[-1]) and p.shape[0] > 3:
        p = p[:-1]
    y, z = p[:, 0], p[:, 1]
    y1, z1 = np.roll(y, -1), np.roll(z, -1)
    a = y * z1 - y1 * z
    area_signed = 0.5 * np.sum(a)
    scale = np.max(np.abs(p)) ** 2 if np.max(np.abs(p)) > 0 else 1.0
    if abs(area_signed) <= 1e-14 * scale:
        raise ValueError("points enclose zero area; give a simple polygon with non-zero area")
    sgn = np.sign(area_signed)
    area = abs(area_signed)
    yc = np.sum(a * (y + y1)) / (6.0 * area_signed)
    zc = np.sum(a * (z + z1)) / (6.0 * area_signed)
    iy2 = sgn * np.sum(a * (y * y + y * y1 + y1 * y1)) / 12.0
    iz2 = sgn * np.sum(a * (z * z + z * z1 + z1 * z1)) / 12.0
    iyz = sgn * np.sum(a * (y * z1 + 2.0 * y * z + 2.0 * y1 * z1 + y1 * z)) / 24.0
    return Section(
        area=float(area),
        centroid=(float(yc), float(zc)),
        I_yy=float(iz2 - area * zc * zc),
        I_zz=float(iy2 - area * yc * yc),
        I_yz=float(iyz - area * yc * zc),
        c_y_max=float(np.max(y) - yc),
        c_y_min=float(yc - np.min(y)),
        c_z_max=float(np.max(z) - zc),
        c_z_min=float(zc - np.min(z)),
        J_torsion=None,
        shear_coefficient=None,
    )


def principal_second_moments(I_yy: float, I_zz: float, I_yz: float) -> tuple[float, float, float]:
    """Principal centroidal second moments and the principal-axis angle.

    ``I_1,2 = (I_yy + I_zz)/2 +- sqrt(((I_zz - I_yy)/2)^2 + I_yz^2)`` and
    ``theta = 0.5 atan2(2 I_yz, I_zz - I_yy)`` (Mohr's circle for second
    moments; common practice, e.g. Pilkey 2002 ch. 1 -- from memory).

    Rotating the axes by ``theta`` (counter-clockwise, from ``y`` toward
    ``z``) gives ``y' = y cos(theta) + z sin(theta)``; then
    ``integral y'^2 dA = I_1`` (the larger) and ``integral z'^2 dA = I_2``,
    with zero product ``integral y' z' dA``.

    Parameters
    ----------
    I_yy, I_zz, I_yz : float
        Centroidal second moments and product of area ``[L^4]``
        (definitions in the module docstring).

    Returns
    -------
    I_1 : float
        Larger principal value ``[L^4]``.
    I_2 : float
        Smaller principal value ``[L^4]``.
    theta : float
        Angle ``[rad]`` in (-pi/2, pi/2] from the ``y`` axis to the ``y'``
        axis, whose coordinate gives ``integral y'^2 dA = I_1``.
    """
    iyy, izz, iyz = float(I_yy), float(I_zz), float(I_yz)
    for name, v in (("I_yy", iyy), ("I_zz", izz), ("I_yz", iyz)):
        if not np.isfinite(v):
            raise ValueError(f"{name} must be finite, got {v!r}")
    mean = 0.5 * (iyy + izz)
    radius = float(np.hypot(0.5 * (izz - iyy), iyz))
    theta = 0.5 * float(np.arctan2(2.0 * iyz, izz - iyy))
    return mean + radius, mean - radius, theta
