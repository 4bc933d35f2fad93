"""Elastic buckling of columns.

Any consistent units: modulus ``E``, ``G`` [F/L^2], second moment ``I`` [L^4], area ``A`` [L^2],
length ``L`` [L]; loads [F].

Sources: S. P. Timoshenko and J. M. Gere, *Theory of Elastic Stability*, 2nd ed., McGraw-Hill 1961,
chapter 2 (Euler loads for the four end conditions; the effect of shear on the critical load,
Engesser's formula, section 2.17 from memory).
"""
from __future__ import annotations

import math

from scipy.optimize import brentq

__all__ = [
    "COLUMN_ENDS",
    "effective_length_factor",
    "engesser_buckling_load",
    "euler_buckling_load",
]

COLUMN_ENDS = ("clamped-free", "pinned-pinned", "clamped-clamped", "clamped-pinned")


def _positive(name: str, value: float) -> float:
    v = float(value)
    if not math.isfinite(v) or v <= 0.0:
        raise ValueError(f"{name} must be a finite number > 0, got {value!r}")
    return v


def effective_length_factor(ends: str) -> float:
    """Effective-length factor K of a column (Timoshenko & Gere 1961, ch. 2): clamped-free 2,
    pinned-pinned 1, clamped-clamped 0.5, clamped-pinned π / x₁ ≈ 0.699 with x₁ the first positive
    root of tan x = x (4.4934), computed here."""
    if ends == "pinned-clamped":
        ends = "clamped-pinned"
    if ends == "clamped-free":
        return 2.0
    if ends == "pinned-pinned":
        return 1.0
    if ends == "clamped-clamped":
        return 0.5
    if ends == "clamped-pinned":
        x1 = brentq(lambda x: math.sin(x) - x * math.cos(x), 4.0, 4.6, xtol=1e-15)
        return math.pi / x1
    raise ValueError(f"unknown column end conditions {ends!r}; known: {', '.join(COLUMN_ENDS)}")


def euler_buckling_load(E: float, I: float, L: float, ends: str = "pinned-pinned") -> float:
    """Euler's critical load ``P_cr = π² E I / (K L)²`` [F] of a straight elastic column
    (Timoshenko & Gere 1961, ch. 2); ``I`` the smaller second moment for a free choice of plane."""
    E, I, L = (_positive(k, v) for k, v in (("E", E), ("I", I), ("L", L)))
    return math.pi**2 * E * I / (effective_length_factor(ends) * L) ** 2


def engesser_buckling_load(P_euler: float, G: float, A: float, kappa: float) -> float:
    """Critical load with shear deformation, ``1/P = 1/P_E + 1/(κ G A)`` [F] (Engesser; Timoshenko
    & Gere 1961, section 2.17, written there as ``P_E / (1 + n P_E / (A G))`` with ``n = 1/κ``,
    from memory). Matters for stocky or built-up columns; below 1 % for a solid column of
    slenderness above ~25."""
    P, G, A, kappa = (_positive(k, v) for k, v in (("P_euler", P_euler), ("G", G), ("A", A), ("kappa", kappa)))
    return 1.0 / (1.0 / P + 1.0 / (kappa * G * A))
