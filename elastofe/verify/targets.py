"""Closed-form targets the catalogue may name instead of a number: ``target = { formula = ..., ...}``.

Each formula comes from :mod:`elastofe.handcalc` (which carries its source) or is a handbook
coefficient formula written out here with its source.
"""
from __future__ import annotations

from typing import Callable

from ..handcalc.concentration import kt_net_central_hole
from ..handcalc.solids import thick_cylinder
from ..handcalc.stability import euler_buckling_load
from ..handcalc.vibration import bar_axial_frequencies, euler_bernoulli_frequencies, shaft_torsion_frequencies


def _thick_cylinder(*, r, a, b, p_i=0.0, p_o=0.0, E, nu, end_condition="plane_strain", field="u_r") -> float:
    """Lamé thick-walled cylinder (Timoshenko & Goodier, Theory of Elasticity, 3rd ed. 1970)."""
    res = thick_cylinder(r, a, b, p_i, p_o, E=E, nu=nu, end_condition=end_condition)
    return float(getattr(res, field))


def _kt_net(*, d_over_W) -> float:
    """Howland (1930) as fitted in Roark's Formulas, 7th ed., Table 17.1."""
    return float(kt_net_central_hole(d_over_W))


def _plate_deflection(*, coefficient, q, b, E, t) -> float:
    """Roark's Formulas, 7th ed., Table 11.4: y_max = α q b⁴ / (E t³)."""
    return coefficient * q * b ** 4 / (E * t ** 3)


def _plate_stress(*, coefficient, q, b, t) -> float:
    """Roark's Formulas, 7th ed., Table 11.4: σ_max = β q b² / t²."""
    return coefficient * q * b ** 2 / t ** 2


def _beam_frequency(*, E, I, rho, A, L, ends="clamped-free", mode=1) -> float:
    """Euler-Bernoulli bending frequency [Hz] (Blevins, Formulas for Natural Frequency and Mode
    Shape, 1979, table 8-1)."""
    return float(euler_bernoulli_frequencies(E, I, rho, A, L, ends, count=int(mode))[int(mode) - 1])


def _bar_axial_frequency(*, E, rho, L, ends="clamped-free", mode=1) -> float:
    """Longitudinal frequency of a bar [Hz], clamped-free (2n - 1)/(4L) sqrt(E/rho) (wave equation;
    Blevins, Formulas for Natural Frequency and Mode Shape, 1979)."""
    return float(bar_axial_frequencies(E, rho, L, ends, count=int(mode))[int(mode) - 1])


def _round_shaft_torsion_frequency(*, G, rho, L, ends="clamped-free", mode=1) -> float:
    """Torsional frequency of a round shaft [Hz] (J = I_p): clamped-free (2n - 1)/(4L) sqrt(G/rho)
    (wave equation; Blevins, Formulas for Natural Frequency and Mode Shape, 1979)."""
    return float(shaft_torsion_frequencies(G, 1.0, rho, 1.0, L, ends, count=int(mode))[int(mode) - 1])


def _euler_factor(*, E, I, L, ends="clamped-free", load) -> float:
    """Euler critical load over the applied load (Timoshenko & Gere, Theory of Elastic Stability, 1961)."""
    return euler_buckling_load(E, I, L, ends) / load


FORMULAS: dict[str, Callable[..., float]] = {
    "beam_frequency": _beam_frequency,
    "bar_axial_frequency": _bar_axial_frequency,
    "round_shaft_torsion_frequency": _round_shaft_torsion_frequency,
    "euler_buckling_factor": _euler_factor,
    "thick_cylinder": _thick_cylinder,
    "kt_net_central_hole": _kt_net,
    "plate_deflection": _plate_deflection,
    "plate_stress": _plate_stress,
}
