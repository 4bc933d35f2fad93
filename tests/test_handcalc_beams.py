"""Checks of elastofe.handcalc.beams."""

import math

import numpy as np
import pytest
from scipy import integrate

from elastofe.handcalc import beams as B

E, I, L, P, w = 200e3, 8.0e5, 1000.0, 1500.0, 2.0
G, A, k = 76.9e3, 2400.0, 0.85


def test_bending_stress():
    # sigma = M y / I (flexure formula, common practice): 1e6 * 50 / 8e5 = 62.5
    assert B.bending_stress(1.0e6, 50.0, 8.0e5) == pytest.approx(62.5, rel=1e-15)
    out = B.bending_stress(np.array([1.0, -2.0]), np.array([[1.0], [3.0]]), 2.0)
    assert out.shape == (2, 2)
    assert out[1, 1] == pytest.approx(-3.0, rel=1e-15)


def test_deflections_bending_only():
    # Roark 7th ed. Table 8.1 (closed forms, evaluated by hand here)
    assert B.cantilever_tip_deflection_point_load(P, L, E, I) == pytest.approx(
        1500 * 1e9 / (3 * 200e3 * 8e5), rel=1e-14)
    assert B.cantilever_tip_deflection_uniform_load(w, L, E, I) == pytest.approx(
        2 * 1e12 / (8 * 200e3 * 8e5), rel=1e-14)
    assert B.simply_supported_midspan_deflection_point_load(P, L, E, I) == pytest.approx(
        1500 * 1e9 / (48 * 200e3 * 8e5), rel=1e-14)
    assert B.simply_supported_midspan_deflection_uniform_load(w, L, E, I) == pytest.approx(
        5 * 2 * 1e12 / (384 * 200e3 * 8e5), rel=1e-14)


def test_shear_terms_by_independent_unit_load_integration():
    # Shear term delta_s = int V v / (k G A) dx, integrated numerically here
    # (unit-load method; Timoshenko, Strength of Materials Part I -- from memory)
    kGA = k * G * A
    base = B.cantilever_tip_deflection_point_load(P, L, E, I)
    full = B.cantilever_tip_deflection_point_load(P, L, E, I, G=G, A=A, k=k)
    assert full - base == pytest.approx(integrate.quad(lambda x: P * 1.0, 0, L)[0] / kGA, rel=1e-12)
    base = B.cantilever_tip_deflection_uniform_load(w, L, E, I)
    full = B.cantilever_tip_deflection_uniform_load(w, L, E, I, G=G, A=A, k=k)
    assert full - base == pytest.approx(integrate.quad(lambda x: w * (L - x), 0, L)[0] / kGA, rel=1e-12)
    base = B.simply_supported_midspan_deflection_point_load(P, L, E, I)
    full = B.simply_supported_midspan_deflection_point_load(P, L, E, I, G=G, A=A, k=k)
    v = lambda x: 0.5 if x < L / 2 else -0.5  # noqa: E731
    ss = integrate.quad(lambda x: (P * v(x)) * v(x), 0, L, points=[L / 2])[0] / kGA
    assert full - base == pytest.approx(ss, rel=1e-12)
    base = B.simply_supported_midspan_deflection_uniform_load(w, L, E, I)
    full = B.simply_supported_midspan_deflection_uniform_load(w, L, E, I, G=G, A=A, k=k)
    ss = integrate.quad(lambda x: w * (L / 2 - x) * v(x), 0, L, points=[L / 2])[0] / kGA
    assert full - base == pytest.approx(ss, rel=1e-12)


def test_shear_term_needs_all_three():
    with pytest.raises(ValueError, match="G, A and k"):
        B.cantilever_tip_deflection_point_load(P, L, E, I, G=G)


def test_constant_section_reduces_to_prismatic():
    # variable-section routine with constant I must give P a^3/(3 E I) (Roark Table 8.1 case 1a)
    res = B.cantilever_variable_section(L, lambda x: np.full_like(x, I), lambda x: np.full_like(x, 40.0), P, E, a=600.0)
    assert res.deflection == pytest.approx(P * 600.0**3 / (3 * E * I), rel=1e-10)
    # stress at root M c / I = P a c / I
    assert res.stress[0] == pytest.approx(P * 600.0 * 40.0 / I, rel=1e-14)
    assert res.stress[-1] == 0.0


def _tapered_closed_form(P, E, b, h0, h1, Lb, a):
    # Derivation (ours): I(x) = b h(x)^3/12, h = h0 + s x, s = (h1-h0)/L.
    # delta = (12 P/(E b)) int_0^a (a-x)^2 / h^3 dx; with u = h(x), dx = du/s,
    # a - x = (h_a - u)/s, h_a = h(a):
    # delta = 12 P/(E b s^3) int_{h0}^{h_a} (h_a^2 u^-3 - 2 h_a u^-2 + u^-1) du
    #       = 12 P/(E b s^3) [3/2 + ln(h_a/h0) + h_a^2/(2 h0^2) - 2 h_a/h0].
    # (s -> 0 gives 4 P a^3/(E b h0^3) = P a^3/(3 E I0), the prismatic value.)
    s = (h1 - h0) / Lb
    ha = h0 + s * a
    return 12 * P / (E * b * s**3) * (1.5 + math.log(ha / h0) + ha**2 / (2 * h0**2) - 2 * ha / h0)


@pytest.mark.parametrize("a", [1000.0, 700.0])
def test_tapered_rectangle_against_closed_form_and_fine_rule(a):
    b, h0, h1 = 20.0, 80.0, 40.0
    res = B.cantilever_tapered_rectangle(L, b, h0, h1, P, E, a=a)
    assert res.deflection == pytest.approx(_tapered_closed_form(P, E, b, h0, h1, L, a), rel=1e-10)
    # very fine composite Simpson rule on 200001 points (independent of quad)
    x = np.linspace(0.0, a, 200001)
    hx = h0 + (h1 - h0) * x / L
    fine = integrate.simpson(P * (a - x) ** 2 / (E * b * hx**3 / 12.0), x=x)
    assert res.deflection == pytest.approx(fine, rel=1e-9)
    # bounds (common practice: between the stiffest and softest prismatic beams)
    assert res.deflection_stiff_bound < res.deflection < res.deflection_soft_bound
    ha = h0 + (h1 - h0) * a / L
    assert res.deflection_soft_bound == pytest.approx(P * a**3 / (3 * E * b * ha**3 / 12), rel=1e-12)
    assert res.deflection_stiff_bound == pytest.approx(P * a**3 / (3 * E * b * h0**3 / 12), rel=1e-12)


def test_tapered_rectangle_stress_at_stations():
    b, h0, h1 = 20.0, 80.0, 40.0
    x = np.array([0.0, 250.0, 500.0, 1000.0])
    res = B.cantilever_tapered_rectangle(L, b, h0, h1, P, E, x=x)
    h = h0 + (h1 - h0) * x / L
    # sigma = M c / I = 6 P (L - x) / (b h^2) for a rectangle (common practice)
    assert res.stress == pytest.approx(6 * P * (L - x) / (b * h**2), rel=1e-13)


def test_tabulated_section_matches_callable():
    # piecewise-linear I from stations; the integral splits exactly at the break point,
    # compared with an independent fine Simpson rule on each piece
    st = np.array([0.0, 400.0, 1000.0])
    Iv = np.array([9e5, 6e5, 3e5])
    cv = np.array([50.0, 45.0, 40.0])
    res = B.cantilever_variable_section(L, (st, Iv), (st, cv), P, E)
    total = 0.0
    for i in range(2):
        x = np.linspace(st[i], st[i + 1], 100001)
        Ix = np.interp(x, st, Iv)
        total += integrate.simpson(P * (L - x) ** 2 / (E * Ix), x=x)
    assert res.deflection == pytest.approx(total, rel=1e-9)
    assert res.I_min == 3e5 and res.I_max == 9e5
    assert res.stress[0] == pytest.approx(P * L * 50.0 / 9e5, rel=1e-14)


def test_variable_section_invalid():
    with pytest.raises(ValueError, match="a must"):
        B.cantilever_tapered_rectangle(L, 1.0, 2.0, 1.0, P, E, a=2 * L)
    with pytest.raises(ValueError, match="cover"):
        B.cantilever_variable_section(L, ([0.0, 500.0], [1.0, 1.0]), lambda x: x, P, E)
