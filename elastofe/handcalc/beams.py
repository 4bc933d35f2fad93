"""Straight-beam expectations: bending stress and deflections.

Conventions: beam axis ``x``; bending in the ``x``-``y`` plane; ``I`` is the
second moment about the neutral axis (``I_zz`` of :mod:`.sections`).
Deflections are returned as positive magnitudes in the direction of the
load. Any consistent unit system: force ``[F]``, length ``[L]``, modulus
``[F/L^2]``, distributed load ``[F/L]``.

Shear deflection (Timoshenko beam) is added when ``G``, ``A`` and ``k`` are
all given; it follows from the unit-load (virtual work) integral
``delta_s = integral V v / (k G A) dx`` with the shear forces ``V`` of the
load and ``v`` of a unit load at the point of interest. ``k`` is the
shear coefficient, e.g. Cowper's values in :mod:`.sections`
(G. R. Cowper, J. Appl. Mech. 33 (1966) 335-340).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Union

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import integrate

__all__ = [
    "bending_stress",
    "cantilever_tip_deflection_point_load",
    "cantilever_tip_deflection_uniform_load",
    "simply_supported_midspan_deflection_point_load",
    "simply_supported_midspan_deflection_uniform_load",
    "VariableSectionCantilever",
    "cantilever_variable_section",
    "cantilever_tapered_rectangle",
    "cantilever_variable_section_deflection_at",
    "bimetal_curvature",
]

#: Section property along the axis: a callable ``f(x) -> values`` taking an
#: array of positions (m,) and returning (m,), or a pair ``(stations, values)``
#: interpolated piecewise-linearly.
AxialProperty = Union[Callable[[NDArray[np.float64]], ArrayLike], tuple[ArrayLike, ArrayLike]]


def _positive(name: str, value: float) -> float:
    v = float(value)
    if not np.isfinite(v) or v <= 0.0:
        raise ValueError(f"{name} must be a finite number > 0, got {value!r}")
    return v


def _shear_compliance(G: float | None, A: float | None, k: float | None) -> float:
    """Return ``1/(k G A)``, or 0 when no shear term was requested."""
    given = [v is not None for v in (G, A, k)]
    if not any(given):
        return 0.0
    if not all(given):
        raise ValueError(
            "for the shear term give all of G, A and k (got "
            f"G={G!r}, A={A!r}, k={k!r}); give none of them for Euler-Bernoulli only"
        )
    return 1.0 / (_positive("k", k) * _positive("G", G) * _positive("A", A))  # type: ignore[arg-type]


def bending_stress(M: ArrayLike, y: ArrayLike, I: ArrayLike) -> NDArray[np.float64]:
    """Normal bending stress ``sigma = M y / I``.

    Source: Euler-Bernoulli flexure formula (common practice; Timoshenko &
    Gere, Mechanics of Materials, ch. 5). Sign: a positive ``M`` puts the
    fibres at positive ``y`` in tension; flip the sign of ``M`` for the other
    convention.

    Parameters
    ----------
    M : array_like
        Bending moment ``[F L]``; broadcast with ``y`` and ``I``.
    y : array_like
        Distance from the neutral axis ``[L]``.
    I : array_like
        Second moment about the neutral axis ``[L^4]``, > 0.

    Returns
    -------
    ndarray
        Stress ``[F/L^2]``, broadcast shape of the inputs.
    """
    Ia = np.asarray(I, dtype=float)
    if np.any(~np.isfinite(Ia)) or np.any(Ia <= 0.0):
        raise ValueError(f"I must be finite and > 0 everywhere, got {I!r}")
    return np.asarray(M, dtype=float) * np.asarray(y, dtype=float) / Ia


def cantilever_tip_deflection_point_load(
    P: float, L: float, E: float, I: float, *, G: float | None = None,
    A: float | None = None, k: float | None = None,
) -> float:
    """Tip deflection of a cantilever with an end force.

    ``delta = P L^3 / (3 E I) + P L / (k G A)``. Source: Roark's Formulas
    for Stress and Strain, 7th ed., Table 8.1 case 1a (case number from memory) (bending term); shear
    term from the unit-load integral with ``V = v = 1`` along the span
    (Timoshenko, Strength of Materials Part I, shear deflection -- from
    memory).

    Parameters
    ----------
    P : float
        End force ``[F]``.
    L : float
        Span ``[L]``, > 0.
    E : float
        Young's modulus ``[F/L^2]``, > 0.
    I : float
        Second moment ``[L^4]``, > 0.
    G, A, k : float, optional
        Shear modulus ``[F/L^2]``, area ``[L^2]``, shear coefficient (-);
        give all three to add the shear term.

    Returns
    -------
    float
        Tip deflection ``[L]`` (sign of ``P``).
    """
    L_ = _positive("L", L)
    return float(P) * L_**3 / (3.0 * _positive("E", E) * _positive("I", I)) + float(P) * L_ * _shear_compliance(G, A, k)


def cantilever_tip_deflection_uniform_load(
    w: float, L: float, E: float, I: float, *, G: float | None = None,
    A: float | None = None, k: float | None = None,
) -> float:
    """Tip deflection of a cantilever under a uniform load.

    ``delta = w L^4 / (8 E I) + w L^2 / (2 k G A)``. Source: Roark's
    Formulas for Stress and Strain, 7th ed., Table 8.1 case 2a (case number from memory) (bending
    term, uniform load over the whole span); shear term from the unit-load
    integral ``integral_0^L w (L - x) dx / (k G A)``.

    Parameters
    ----------
    w : float
        Load per length ``[F/L]``.
    L, E, I, G, A, k
        As :func:`cantilever_tip_deflection_point_load`.

    Returns
    -------
    float
        Tip deflection ``[L]``.
    """
    L_ = _positive("L", L)
    return (float(w) * L_**4 / (8.0 * _positive("E", E) * _positive("I", I))
            + float(w) * L_**2 / 2.0 * _shear_compliance(G, A, k))


def simply_supported_midspan_deflection_point_load(
    P: float, L: float, E: float, I: float, *, G: float | None = None,
    A: float | None = None, k: float | None = None,
) -> float:
    """Midspan deflection of a simply supported beam with a centre force.

    ``delta = P L^3 / (48 E I) + P L / (4 k G A)``. Source: Roark's
    Formulas for Stress and Strain, 7th ed., Table 8.1 case 1e (case number from memory) with the
    load at midspan (bending term); shear term from the unit-load integral
    with ``V = +-P/2``, ``v = +-1/2``.

    Parameters
    ----------
    P : float
        Centre force ``[F]``.
    L, E, I, G, A, k
        As :func:`cantilever_tip_deflection_point_load`.

    Returns
    -------
    float
        Midspan deflection ``[L]``.
    """
    L_ = _positive("L", L)
    return (float(P) * L_**3 / (48.0 * _positive("E", E) * _positive("I", I))
            + float(P) * L_ / 4.0 * _shear_compliance(G, A, k))


def simply_supported_midspan_deflection_uniform_load(
    w: float, L: float, E: float, I: float, *, G: float | None = None,
    A: float | None = None, k: float | None = None,
) -> float:
    """Midspan deflection of a simply supported beam under a uniform load.

    ``delta = 5 w L^4 / (384 E I) + w L^2 / (8 k G A)``. Source: Roark's
    Formulas for Stress and Strain, 7th ed., Table 8.1 case 2e (case number from memory) (bending
    term); shear term from the unit-load integral with
    ``V = w (L/2 - x)``, ``v = +-1/2``.

    Parameters
    ----------
    w : float
        Load per length ``[F/L]``.
    L, E, I, G, A, k
        As :func:`cantilever_tip_deflection_point_load`.

    Returns
    -------
    float
        Midspan deflection ``[L]``.
    """
    L_ = _positive("L", L)
    return (5.0 * float(w) * L_**4 / (384.0 * _positive("E", E) * _positive("I", I))
            + float(w) * L_**2 / 8.0 * _shear_compliance(G, A, k))


# --------------------------------------------------------------------------
# Section varying along the axis
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class VariableSectionCantilever:
    """Expectations for a cantilever of varying section with one force.

    Attributes
    ----------
    x : ndarray, shape (m,)
        Stations from the root ``[L]``.
    moment : ndarray, shape (m,)
        Bending moment magnitude ``M(x) = P (a - x)`` for ``x < a``, 0
        beyond ``[F L]``.
    stress : ndarray, shape (m,)
        Extreme-fibre bending stress ``M(x) c(x) / I(x)`` ``[F/L^2]``.
    deflection : float
        Deflection at the load point ``[L]`` from the unit-load integral.
    deflection_stiff_bound : float
        ``P a^3 / (3 E I_max)``: constant section with the largest ``I`` on
        ``[0, a]``; a lower bound ``[L]``.
    deflection_soft_bound : float
        ``P a^3 / (3 E I_min)``: constant section with the smallest ``I`` on
        ``[0, a]``; an upper bound ``[L]``.
    I_min, I_max : float
        Smallest and largest ``I`` found on ``[0, a]`` ``[L^4]``.
    """

    x: NDArray[np.float64]
    moment: NDArray[np.float64]
    stress: NDArray[np.float64]
    deflection: float
    deflection_stiff_bound: float
    deflection_soft_bound: float
    I_min: float
    I_max: float


def _as_function(name: str, prop: AxialProperty,
                 length: float) -> tuple[Callable[[NDArray[np.float64]], NDArray[np.float64]], NDArray[np.float64]]:
    """Return a vectorised evaluator and the break points of ``prop``."""
    if callable(prop):
        def f(x: NDArray[np.float64]) -> NDArray[np.float64]:
            x = np.asarray(x, dtype=float)
            out = np.asarray(prop(x), dtype=float)
            return np.broadcast_to(out, x.shape).astype(float)

        return f, np.empty(0)
    try:
        st, val = prop
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a callable f(x) or a pair (stations, values), got {prop!r}") from None
    st = np.asarray(st, dtype=float)
    val = np.asarray(val, dtype=float)
    if st.ndim != 1 or val.shape != st.shape or st.size < 2:
        raise ValueError(f"{name}: stations and values must be 1-D of equal length >= 2, "
                         f"got shapes {st.shape} and {val.shape}")
    if np.any(np.diff(st) <= 0):
        raise ValueError(f"{name}: stations must be strictly increasing, got {st}")
    if st[0] > 0.0 or st[-1] < length:
        raise ValueError(f"{name}: stations must cover [0, length={length}], got [{st[0]}, {st[-1]}]")

    def g(x: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.interp(np.asarray(x, dtype=float), st, val)

    return g, st


def cantilever_variable_section(
    length: float,
    I: AxialProperty,
    c: AxialProperty,
    P: float,
    E: float,
    a: float | None = None,
    x: ArrayLike | None = None,
    n_sample: int = 4097,
) -> VariableSectionCantilever:
    """Cantilever (fixed at ``x = 0``) of varying section with a force at ``x = a``.

    Bending moment ``M(x) = P (a - x)`` on ``[0, a]``; stress
    ``sigma(x) = M(x) c(x) / I(x)``. The load-point deflection is the
    unit-load (virtual work) integral, with ``m(x) = a - x`` the moment of a
    unit force at ``a``::

        delta = integral_0^a M(x) m(x) / (E I(x)) dx
              = (P / E) integral_0^a (a - x)^2 / I(x) dx

    evaluated with ``scipy.integrate.quad`` (relative tolerance 1e-12;
    tabulated break points passed to it). Source: unit-load method,
    Timoshenko & Gere, Mechanics of Materials, ch. 9 (from memory).

    Bounds: since the integrand is decreasing in ``I``, the deflection lies
    between those of constant-section cantilevers with the largest and the
    smallest ``I`` on ``[0, a]``, ``P a^3 / (3 E I)`` (Roark Table 8.1 case
    1a); this bracketing is common practice. For a callable ``I`` the extremes
    are searched on ``n_sample`` evenly spaced points plus the ends, so a
    narrower extreme between samples can be missed.

    Parameters
    ----------
    length : float
        Beam length ``[L]``, > 0.
    I : callable or (stations, values)
        Second moment about the neutral axis ``I(x)`` ``[L^4]``, > 0 on
        ``[0, length]``. A callable takes positions of shape (m,) and returns
        shape (m,); a pair of arrays of shape (s,) is interpolated linearly
        and must cover ``[0, length]``.
    c : callable or (stations, values)
        Extreme-fibre distance ``c(x)`` ``[L]``, same forms as ``I``.
    P : float
        Transverse force ``[F]``.
    E : float
        Young's modulus ``[F/L^2]``, > 0.
    a : float, optional
        Load position from the root, ``0 < a <= length`` (default: tip).
    x : array_like, shape (m,), optional
        Stations for the stress (default: 101 evenly spaced on
        ``[0, length]``) ``[L]``.
    n_sample : int, optional
        Samples used to find ``I_min`` / ``I_max`` of a callable.

    Returns
    -------
    VariableSectionCantilever
    """
    L_ = _positive("length", length)
    E_ = _positive("E", E)
    a_ = L_ if a is None else float(a)
    if not np.isfinite(a_) or not (0.0 < a_ <= L_):
        raise ValueError(f"a must lie in (0, length={L_}], got {a!r}")
    if int(n_sample) < 2:
        raise ValueError(f"n_sample must be >= 2, got {n_sample!r}")
    P_ = float(P)
    f_I, st_I = _as_function("I", I, L_)
    f_c, _ = _as_function("c", c, L_)

    xs = np.linspace(0.0, L_, 101) if x is None else np.asarray(x, dtype=float)
    if xs.ndim != 1 or np.any(xs < 0.0) or np.any(xs > L_):
        raise ValueError(f"x must be 1-D with values in [0, length={L_}]")

    samples = np.linspace(0.0, a_, int(n_sample))
    if st_I.size:
        samples = np.union1d(samples, st_I[(st_I >= 0.0) & (st_I <= a_)])
    I_samples = f_I(samples)
    if np.any(~np.isfinite(I_samples)) or np.any(I_samples <= 0.0):
        raise ValueError("I(x) must be finite and > 0 on [0, a]")
    I_min, I_max = float(np.min(I_samples)), float(np.max(I_samples))

    I_x = f_I(xs)
    if np.any(I_x <= 0.0):
        raise ValueError("I(x) must be > 0 at the stress stations")
    moment = np.where(xs < a_, P_ * (a_ - xs), 0.0)
    stress = moment * f_c(xs) / I_x

    pts = st_I[(st_I > 0.0) & (st_I < a_)] if st_I.size else None
    integral, _err = integrate.quad(
        lambda t: (a_ - t) ** 2 / float(f_I(np.array([t]))[0]),
        0.0, a_, epsabs=0.0, epsrel=1e-12, limit=500,
        points=pts if pts is not None and pts.size else None,
    )
    deflection = P_ * integral / E_
    return VariableSectionCantilever(
        x=xs,
        moment=moment,
        stress=stress,
        deflection=float(deflection),
        deflection_stiff_bound=P_ * a_**3 / (3.0 * E_ * I_max),
        deflection_soft_bound=P_ * a_**3 / (3.0 * E_ * I_min),
        I_min=I_min,
        I_max=I_max,
    )


def cantilever_tapered_rectangle(
    length: float,
    b: float,
    h0: float,
    h1: float,
    P: float,
    E: float,
    a: float | None = None,
    x: ArrayLike | None = None,
) -> VariableSectionCantilever:
    """Cantilever of rectangular section, constant width, linearly tapered depth.

    Depth ``h(x) = h0 + (h1 - h0) x / length``; ``I(x) = b h(x)^3 / 12`` and
    ``c(x) = h(x) / 2`` (common practice), then
    :func:`cantilever_variable_section`.

    Parameters
    ----------
    length : float
        Beam length ``[L]``, > 0.
    b : float
        Width ``[L]``, > 0.
    h0, h1 : float
        Depth at the root and at the tip ``[L]``, > 0.
    P, E, a, x
        As :func:`cantilever_variable_section`.

    Returns
    -------
    VariableSectionCantilever
    """
    L_ = _positive("length", length)
    b_ = _positive("b", b)
    h0_ = _positive("h0", h0)
    h1_ = _positive("h1", h1)

    def depth(t: NDArray[np.float64]) -> NDArray[np.float64]:
        return h0_ + (h1_ - h0_) * np.asarray(t, dtype=float) / L_

    return cantilever_variable_section(
        L_,
        lambda t: b_ * depth(t) ** 3 / 12.0,
        lambda t: depth(t) / 2.0,
        P, E, a=a, x=x,
    )


def cantilever_variable_section_deflection_at(
    I: AxialProperty,
    P: float,
    E: float,
    a: float,
    at: float,
    kGA: AxialProperty | None = None,
) -> tuple[float, float]:
    """Deflection at any station of a varying-section cantilever with one force at ``x = a``.

    Unit-load (virtual work) integral with the moment ``M(x) = P (a - x)`` of the load and
    ``m(x) = at - x`` of a unit force at the station, both zero beyond their points, and the
    shear forces ``V = P`` on ``[0, a]`` and ``v = 1`` on ``[0, at]``::

        delta_b = (P / E) integral_0^min(a, at) (a - x)(at - x) / I(x) dx
        delta_s =  P      integral_0^min(a, at) 1 / (k G A)(x) dx

    Source: unit-load method (Timoshenko & Gere, Mechanics of Materials, ch. 9, from memory);
    for a constant section it reduces to ``P at^2 (3a - at) / (6 E I)`` for ``at <= a`` and
    ``P a^2 (3 at - a) / (6 E I)`` beyond (Roark's Formulas, 7th ed., Table 8.1 case 1a, case
    number from memory). Evaluated with ``scipy.integrate.quad`` (relative tolerance 1e-12).

    Parameters
    ----------
    I : callable or (stations, values)
        Second moment ``I(x)`` ``[L^4]`` on ``[0, min(a, at)]``; forms as in
        :func:`cantilever_variable_section`.
    P : float
        Transverse force ``[F]``.
    E : float
        Young's modulus ``[F/L^2]``, > 0.
    a : float
        Load position from the root ``[L]``, > 0.
    at : float
        Station of the deflection from the root ``[L]``, >= 0.
    kGA : callable or (stations, values), optional
        Shear stiffness ``k G A(x)`` ``[F]``; when given the shear part is computed.

    Returns
    -------
    delta_b, delta_s : float
        Bending and shear parts of the deflection in the direction of ``P`` ``[L]``
        (``delta_s = 0`` without ``kGA``).
    """
    a_ = _positive("a", a)
    E_ = _positive("E", E)
    xp = float(at)
    if not np.isfinite(xp) or xp < 0.0:
        raise ValueError(f"at must be a finite station >= 0, got {at!r}")
    m = min(a_, xp)
    if m == 0.0:
        return 0.0, 0.0
    f_I, st_I = _as_function("I", I, m)
    pts = st_I[(st_I > 0.0) & (st_I < m)] if st_I.size else None
    kw = dict(epsabs=0.0, epsrel=1e-12, limit=500)
    bend, _ = integrate.quad(lambda t: (a_ - t) * (xp - t) / float(f_I(np.array([t]))[0]), 0.0, m,
                             points=pts if pts is not None and pts.size else None, **kw)
    shear = 0.0
    if kGA is not None:
        f_s, st_s = _as_function("kGA", kGA, m)
        pts_s = st_s[(st_s > 0.0) & (st_s < m)] if st_s.size else None
        shear, _ = integrate.quad(lambda t: 1.0 / float(f_s(np.array([t]))[0]), 0.0, m,
                                  points=pts_s if pts_s is not None and pts_s.size else None, **kw)
    return float(P) * bend / E_, float(P) * shear


def bimetal_curvature(t1: float, t2: float, E1: float, E2: float, alpha1: float, alpha2: float,
                      delta_t: float) -> float:
    """Curvature of a free bimetal strip under a uniform temperature change ``[1/L]``.

    Two layers of thicknesses ``t1``, ``t2`` ``[L]``, moduli ``E1``, ``E2`` ``[F/L^2]`` and
    expansion coefficients ``alpha1``, ``alpha2`` ``[1/K]``, bonded along their length, heated by
    ``delta_t`` ``[K]``::

        kappa = 6 (alpha2 - alpha1) dT (1 + m)^2 / (h [3 (1 + m)^2 + (1 + m n)(m^2 + 1/(m n))])

    with ``m = t1 / t2``, ``n = E1 / E2``, ``h = t1 + t2``. Positive when layer 2 expands more:
    the strip then bends with layer 2 on the convex side. Beam theory (plane sections, uniaxial
    stress); a strip much wider than it is thick bends as a plate and is stiffer, by about
    ``1 / (1 - nu)`` in ``E`` (from memory), so compare it with narrow strips.

    Source: S. Timoshenko, "Analysis of bi-metal thermostats", J. Opt. Soc. Am. 11 (1925)
    233-255 (the formula as /work/shared/reference/benchmarks.md section 5.3 states it).
    """
    t1_, t2_ = _positive("t1", t1), _positive("t2", t2)
    E1_, E2_ = _positive("E1", E1), _positive("E2", E2)
    m, n, h = t1_ / t2_, E1_ / E2_, t1_ + t2_
    return float(6.0 * (float(alpha2) - float(alpha1)) * float(delta_t) * (1 + m) ** 2
                 / (h * (3 * (1 + m) ** 2 + (1 + m * n) * (m * m + 1.0 / (m * n)))))
