"""Hand calculations of natural frequencies and column buckling (handcalc.vibration, .stability)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from elastofe.handcalc.stability import (
    effective_length_factor,
    engesser_buckling_load,
    euler_buckling_load,
)
from elastofe.handcalc.vibration import (
    BEAM_ENDS,
    BETA_L_TABLE,
    bar_axial_effective_mass_fractions,
    bar_axial_frequencies,
    beam_roots,
    cantilever_effective_mass_fractions,
    euler_bernoulli_frequencies,
    shaft_torsion_frequencies,
    timoshenko_frequencies,
)

E, G, RHO = 210e9, 80.77e9, 7850.0


@pytest.mark.parametrize("ends", BEAM_ENDS)
def test_roots_of_the_frequency_equations_match_the_table(ends):
    # Tabulated β_n L (Blevins 1979, table 8-1; benchmarks.md 5.1, clamped-pinned from memory).
    table = np.array(BETA_L_TABLE[ends])
    assert beam_roots(ends, table.size) == pytest.approx(table, abs=2e-8)


def test_roots_approach_their_asymptotes():
    # (2n - 1) pi / 2 for the cantilever, (2n + 1) pi / 2 clamped-clamped (Blevins 1979, table 8-1)
    n = np.arange(1, 9)
    assert beam_roots("clamped-free", 8)[4:] == pytest.approx((2 * n[4:] - 1) * math.pi / 2, rel=1e-6)
    assert beam_roots("clamped-clamped", 8)[4:] == pytest.approx((2 * n[4:] + 1) * math.pi / 2, rel=1e-6)


def test_euler_bernoulli_cantilever_example():
    # A steel cantilever 1 m x 50 mm square: f1 = 1.8751² / (2π) √(EI/(ρA)) / L² by hand.
    h, L = 0.05, 1.0
    I, A = h**4 / 12, h * h
    f1 = 1.87510407**2 / (2 * math.pi * L**2) * math.sqrt(E * I / (RHO * A))
    f = euler_bernoulli_frequencies(E, I, RHO, A, L, "clamped-free", 4)
    assert f[0] == pytest.approx(f1, rel=1e-8) and f[0] == pytest.approx(41.77, abs=0.01)
    # frequency ratios are (β_n L / β_1 L)² (Blevins 1979): 6.267, 17.55, 34.39
    assert f[1:] / f[0] == pytest.approx([6.2669, 17.5475, 34.3861], rel=1e-4)


def test_timoshenko_limits_and_pinned_value():
    h, L = 0.05, 0.5
    I, A, kappa = h**4 / 12, h * h, 5 / 6
    eb = euler_bernoulli_frequencies(E, I, RHO, A, L, "pinned-pinned", 3)
    # Infinitely stiff in shear, Timoshenko's beam is Rayleigh's: ω² = E I k⁴ / (ρ A + ρ I k²)
    # (rotary inertia only; common practice).
    k = np.arange(1, 4) * math.pi / L
    rayleigh = np.sqrt(E * I * k**4 / (RHO * A + RHO * I * k**2)) / (2 * math.pi)
    assert timoshenko_frequencies(E, 1e9 * G, I, RHO, A, L, kappa, "pinned-pinned", 3) == pytest.approx(
        rayleigh, rel=1e-8)
    # A very slender beam (L/h = 1000) tends to Euler-Bernoulli: differences of order (k r)², 1e-5.
    slender = timoshenko_frequencies(E, G, I, RHO, A, 100 * L, kappa, "clamped-free", 3)
    assert slender == pytest.approx(euler_bernoulli_frequencies(E, I, RHO, A, 100 * L, "clamped-free", 3), rel=5e-5)
    # Stocky (L/h = 10): shear and rotary inertia lower mode n by about
    # (n π r / L)² (1 + E/(κ G)) / 2 to first order (r² = I/A; Blevins 1979 ch. 8, from memory):
    # 7 % for the first mode, where that order is good to a few tenths of a percent.
    t = timoshenko_frequencies(E, G, I, RHO, A, L, kappa, "pinned-pinned", 3)
    first_order = 1 - 0.5 * (k**2 * I / A) * (1 + E / (kappa * G))
    assert t[0] / eb[0] == pytest.approx(first_order[0], abs=0.005)
    assert np.all(t < eb) and np.all(np.diff(t / eb) < 0)  # the higher the mode, the larger the effect


def test_bars_and_shafts():
    L = 2.0
    c = math.sqrt(E / RHO)
    assert bar_axial_frequencies(E, RHO, L, "clamped-free", 3) == pytest.approx(c / (4 * L) * np.array([1, 3, 5]))
    assert bar_axial_frequencies(E, RHO, L, "free-free", 2) == pytest.approx(c / (2 * L) * np.array([1, 2]))
    # a circular shaft (J = I_p) has the shear wave speed √(G/ρ)
    assert shaft_torsion_frequencies(G, 1.0, RHO, 1.0, L, count=2) == pytest.approx(
        math.sqrt(G / RHO) / (4 * L) * np.array([1, 3]))
    with pytest.raises(ValueError, match="end conditions"):
        bar_axial_frequencies(E, RHO, L, "pinned-pinned")


def test_effective_mass_fractions():
    # Cantilever: 0.6131, 0.1883, 0.0647, 0.0331 of the mass (benchmarks.md 5.1, from memory),
    # computed from Blevins's mode shapes.
    assert cantilever_effective_mass_fractions(4) == pytest.approx([0.6131, 0.1883, 0.0647, 0.0331], abs=1e-4)
    # Completeness (common practice: all modes together carry the whole mass): the fractions
    # fall off as 1/n², so 40 modes carry 99 % and never more than 1.
    fr = cantilever_effective_mass_fractions(40)
    assert 0.985 < fr.sum() < 1.0 and np.all(np.diff(fr) < 0)
    assert bar_axial_effective_mass_fractions(1)[0] == pytest.approx(8 / math.pi**2)
    assert bar_axial_effective_mass_fractions(2000).sum() == pytest.approx(1.0, abs=1e-3)


def test_euler_loads_and_engesser():
    I, L = 1e-6, 3.0
    P1 = euler_buckling_load(E, I, L, "pinned-pinned")
    assert P1 == pytest.approx(math.pi**2 * E * I / L**2)
    # K = 2, 1, 0.5, 0.699 (Timoshenko & Gere 1961, ch. 2): loads in the ratios 1/4, 1, 4, 2.046
    ratios = [euler_buckling_load(E, I, L, e) / P1 for e in ("clamped-free", "clamped-clamped", "clamped-pinned")]
    assert ratios == pytest.approx([0.25, 4.0, 2.0457], rel=1e-4)
    assert effective_length_factor("clamped-pinned") == pytest.approx(0.6992, abs=1e-4)
    # Engesser: shear softens; infinitely stiff in shear it is Euler's load.
    assert engesser_buckling_load(P1, 1e12 * G, 1e-3, 5 / 6) == pytest.approx(P1, rel=1e-9)
    Pg = engesser_buckling_load(P1, G, 1e-3, 5 / 6)
    assert Pg == pytest.approx(P1 / (1 + P1 / (5 / 6 * G * 1e-3)), rel=1e-12)
    with pytest.raises(ValueError, match="end conditions"):
        effective_length_factor("free-free")
