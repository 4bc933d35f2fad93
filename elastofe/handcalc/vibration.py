"""Natural frequencies of beams, bars and shafts.

Conventions: frequencies in Hz (cycles per unit time of the unit system); any consistent units:
modulus ``E``, ``G`` [F/L^2], density ``rho`` [mass/L^3], area ``A`` [L^2], second moment ``I`` and
torsion constants ``J``, ``I_p`` [L^4], length ``L`` [L]. In the m-N-s system (kg/m^3) Hz come out
directly; in the mm-N-s system the density must be in t/mm^3.

End conditions of a beam are named by its two ends: ``"clamped-free"`` (cantilever),
``"free-free"``, ``"pinned-pinned"`` (simply supported), ``"clamped-clamped"``, ``"clamped-pinned"``.

Sources: R. D. Blevins, *Formulas for Natural Frequency and Mode Shape*, Van Nostrand Reinhold
1979, table 8-1 (Euler-Bernoulli beams: frequency equations, roots β_n L, mode shapes) and
chapter 8 on shear and rotary inertia; S. P. Timoshenko, "On the correction for shear of the
differential equation for transverse vibrations of prismatic bars", Phil. Mag. 41 (1921) 744-746
(the beam equations behind :func:`timoshenko_frequencies`); axial and torsional bars: the wave
equation with the fixed/free end conditions (common practice; Blevins table 8-16, from memory).
"""
from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq

__all__ = [
    "BEAM_ENDS",
    "BETA_L_TABLE",
    "bar_axial_effective_mass_fractions",
    "bar_axial_frequencies",
    "beam_roots",
    "cantilever_effective_mass_fractions",
    "euler_bernoulli_frequencies",
    "shaft_torsion_frequencies",
    "timoshenko_frequencies",
]

BEAM_ENDS = ("clamped-free", "free-free", "pinned-pinned", "clamped-clamped", "clamped-pinned")

#: β_n L as tabulated (Blevins 1979, table 8-1; the values as /work/shared/reference/benchmarks.md
#: 5.1 gives them for the first three rows, from memory for the last two). :func:`beam_roots`
#: computes them from the frequency equations; the tests compare the two.
BETA_L_TABLE = {
    "clamped-free": (1.87510407, 4.69409113, 7.85475744, 10.99554073),
    "free-free": (4.73004074, 7.85320462, 10.99560784),
    "pinned-pinned": (math.pi, 2 * math.pi, 3 * math.pi, 4 * math.pi),
    "clamped-clamped": (4.73004074, 7.85320462, 10.99560784),
    "clamped-pinned": (3.92660231, 7.06858275, 10.21017612),
}


def _positive(name: str, value: float) -> float:
    v = float(value)
    if not math.isfinite(v) or v <= 0.0:
        raise ValueError(f"{name} must be a finite number > 0, got {value!r}")
    return v


def _ends(ends: str) -> str:
    if ends == "pinned-clamped":
        return "clamped-pinned"
    if ends not in BEAM_ENDS:
        raise ValueError(f"unknown end conditions {ends!r}; known: {', '.join(BEAM_ENDS)}")
    return ends


def beam_roots(ends: str, count: int = 4) -> np.ndarray:
    """Roots β_n L ``(count,)`` of the Euler-Bernoulli frequency equation (Blevins table 8-1).

    clamped-free: cos x cosh x = −1; free-free and clamped-clamped: cos x cosh x = 1 (x > 0; a
    free-free beam also has two rigid-body modes at x = 0, not counted); clamped-pinned:
    tan x = tanh x; pinned-pinned: sin x = 0. Each equation is divided by cosh x so it stays finite
    and solved by bisection in a bracket of ±1 about its asymptotic root.
    """
    ends = _ends(ends)
    n = np.arange(1, int(count) + 1)
    if ends == "pinned-pinned":
        return n * math.pi
    if ends == "clamped-free":
        f, guess = (lambda x: math.cos(x) + 1.0 / math.cosh(x)), (2 * n - 1) * math.pi / 2
    elif ends in ("free-free", "clamped-clamped"):
        f, guess = (lambda x: math.cos(x) - 1.0 / math.cosh(x)), (2 * n + 1) * math.pi / 2
    else:  # clamped-pinned
        f, guess = (lambda x: math.sin(x) - math.cos(x) * math.tanh(x)), (4 * n + 1) * math.pi / 4
    return np.array([brentq(f, g - 1.0, g + 1.0, xtol=1e-15, rtol=4 * np.finfo(float).eps) for g in guess])


def euler_bernoulli_frequencies(E: float, I: float, rho: float, A: float, L: float,
                                ends: str = "clamped-free", count: int = 4) -> np.ndarray:
    """Bending frequencies ``f_n = (β_n L)² / (2π L²) √(E I / (ρ A))`` [Hz], ``(count,)``.

    Euler-Bernoulli beam (no shear deformation, no rotary inertia); Blevins 1979, table 8-1.
    For a free-free beam these are the elastic modes after the rigid-body ones.
    """
    E, I, rho, A, L = (_positive(k, v) for k, v in (("E", E), ("I", I), ("rho", rho), ("A", A), ("L", L)))
    bl = beam_roots(ends, count)
    return bl**2 / (2 * math.pi * L**2) * math.sqrt(E * I / (rho * A))


def timoshenko_frequencies(E: float, G: float, I: float, rho: float, A: float, L: float, kappa: float,
                           ends: str = "clamped-free", count: int = 4) -> np.ndarray:
    """Bending frequencies with shear deformation and rotary inertia (Timoshenko beam) [Hz].

    For a beam with the wavenumber ``k`` (``k = n π / L`` pinned-pinned), Timoshenko's equations
    give ``ρ² I/(κ G) ω⁴ − [ρ A + ρ I k² (1 + E/(κ G))] ω² + E I k⁴ = 0`` (lower root), exact for
    the pinned-pinned beam (Timoshenko 1921; quoted in Blevins 1979, chapter 8, from memory). For
    the other end conditions this uses ``k = β_n / L`` of the Euler-Bernoulli mode, the usual
    equivalent-wavenumber estimate: exact in the beam's interior, approximate near its ends, so a
    few tenths of a percent off for the first mode of a stocky cantilever (from memory).

    Parameters
    ----------
    kappa : shear coefficient (e.g. Cowper's, :mod:`.sections`).
    """
    E, G, I, rho, A, L, kappa = (_positive(k, v) for k, v in (("E", E), ("G", G), ("I", I), ("rho", rho),
                                                              ("A", A), ("L", L), ("kappa", kappa)))
    k = beam_roots(ends, count) / L
    a = rho**2 * I / (kappa * G)
    b = rho * A + rho * I * k**2 * (1.0 + E / (kappa * G))
    c = E * I * k**4
    # lower root of a x² − b x + c = 0, written to avoid cancellation
    omega2 = 2.0 * c / (b + np.sqrt(b**2 - 4.0 * a * c))
    return np.sqrt(omega2) / (2 * math.pi)


def bar_axial_frequencies(E: float, rho: float, L: float, ends: str = "clamped-free", count: int = 3) -> np.ndarray:
    """Longitudinal frequencies of a bar [Hz]: clamped-free ``(2n − 1)/(4L) √(E/ρ)``; clamped-clamped
    and free-free ``n/(2L) √(E/ρ)`` (wave equation; common practice). No lateral inertia (Poisson)."""
    E, rho, L = (_positive(k, v) for k, v in (("E", E), ("rho", rho), ("L", L)))
    return _wave(math.sqrt(E / rho), L, ends, count)


def shaft_torsion_frequencies(G: float, J: float, rho: float, Ip: float, L: float,
                              ends: str = "clamped-free", count: int = 3) -> np.ndarray:
    """Torsional frequencies of a shaft [Hz]: the wave speed ``√(G J / (ρ I_p))`` with the bar's end
    factors (clamped-free ``(2n − 1)/(4L)``); ``J`` the torsion constant, ``I_p`` the polar second
    moment (``J = I_p`` for a circle; other sections neglect warping inertia). Common practice."""
    G, J, rho, Ip, L = (_positive(k, v) for k, v in (("G", G), ("J", J), ("rho", rho), ("Ip", Ip), ("L", L)))
    return _wave(math.sqrt(G * J / (rho * Ip)), L, ends, count)


def _wave(c: float, L: float, ends: str, count: int) -> np.ndarray:
    n = np.arange(1, int(count) + 1)
    if ends == "clamped-free":
        return (2 * n - 1) * c / (4 * L)
    if ends in ("clamped-clamped", "free-free"):
        return n * c / (2 * L)
    raise ValueError(f"unknown end conditions {ends!r} for a bar; known: clamped-free, clamped-clamped, free-free")


def cantilever_effective_mass_fractions(count: int = 4) -> np.ndarray:
    """Effective modal mass of the first ``count`` bending modes of a uniform cantilever, as a
    fraction of its mass, ``(∫ φ dx)² / (L ∫ φ² dx)``.

    Mode shapes ``φ = cosh βx − cos βx − σ (sinh βx − sin βx)``,
    ``σ = (cosh βL + cos βL) / (sinh βL + sin βL)`` (Blevins 1979, table 8-1), integrated by
    Gauss-Legendre quadrature; ``cosh − σ sinh`` is evaluated as a sum of decaying exponentials so
    that higher modes lose no digits.
    """
    x, w = np.polynomial.legendre.leggauss(200)
    s = 0.5 * (x + 1.0)  # x / L on [0, 1]
    w = 0.5 * w
    out = []
    for bl in beam_roots("clamped-free", count):
        z = bl * s
        den = math.sinh(bl) + math.sin(bl)
        sigma = (math.cosh(bl) + math.cos(bl)) / den
        one_minus = (math.sin(bl) - math.cos(bl) - math.exp(-bl)) / den  # 1 − σ without cancellation
        hyper = 0.5 * (one_minus * np.exp(z) + (1.0 + sigma) * np.exp(-z))  # cosh z − σ sinh z
        phi = hyper - np.cos(z) + sigma * np.sin(z)
        out.append((w @ phi) ** 2 / (w @ phi**2))
    return np.array(out)


def bar_axial_effective_mass_fractions(count: int = 3) -> np.ndarray:
    """Effective modal mass of the axial modes of a clamped-free bar as a fraction of its mass:
    ``8 / ((2n − 1)² π²)`` (from the mode shapes ``sin((2n − 1) π x / (2L))``; common practice)."""
    n = np.arange(1, int(count) + 1)
    return 8.0 / ((2 * n - 1) ** 2 * math.pi**2)
