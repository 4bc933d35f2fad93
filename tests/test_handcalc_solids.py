"""Checks of elastofe.handcalc.solids."""

import math

import numpy as np
import pytest

from elastofe.handcalc import solids as S

a, b, p = 3.0, 9.0, 1.0
E, nu = 1000.0, 0.3


def test_lame_bore_values():
    res = S.thick_cylinder([a, b], a, b, p_i=p, E=E, nu=nu, end_condition="plane_strain")
    # hoop at bore p(b^2+a^2)/(b^2-a^2) = 90/72 = 1.25 (Timoshenko & Goodier sec. 28, from memory)
    assert res.sigma_theta[0] == pytest.approx(1.25, rel=1e-14)
    # boundary conditions sigma_r(a) = -p_i, sigma_r(b) = -p_o (problem statement)
    assert res.sigma_r == pytest.approx([-p, 0.0], abs=1e-14)
    # u_r(a), plane strain: p a (1+nu)[(1-2nu)a^2+b^2]/[E(b^2-a^2)] = 4.5825e-3 (hand evaluation)
    assert res.u_r[0] == pytest.approx(4.5825e-3, rel=1e-12)
    # plane strain axial stress nu(sigma_r + sigma_theta)
    assert res.sigma_z == pytest.approx(nu * (res.sigma_r + res.sigma_theta), rel=1e-13)


def test_lame_external_pressure_and_closed_end_axial():
    res = S.thick_cylinder(np.array([a, b]), a, b, p_i=2.0, p_o=5.0, end_condition="closed")
    assert res.sigma_r == pytest.approx([-2.0, -5.0], rel=1e-13)
    # closed ends: axial force balance sigma_z pi (b^2-a^2) = p_i pi a^2 - p_o pi b^2 (statics)
    assert res.sigma_z[0] == pytest.approx((2.0 * a**2 - 5.0 * b**2) / (b**2 - a**2), rel=1e-14)
    # external pressure only: hoop at bore -2 p_o b^2/(b^2-a^2) (T&G sec. 28, from memory)
    res2 = S.thick_cylinder(a, a, b, p_o=1.0, end_condition="open")
    assert float(res2.sigma_theta) == pytest.approx(-2 * b**2 / (b**2 - a**2), rel=1e-14)


@pytest.mark.parametrize("end", ["plane_strain", "open", "closed"])
def test_lame_equilibrium_and_strain_compatibility(end):
    # radial equilibrium d(sigma_r)/dr + (sigma_r - sigma_theta)/r = 0 and Hooke's law
    # eps_r = du/dr, eps_theta = u/r (T&G sec. 27/30 governing equations, from memory)
    r = np.linspace(a, b, 20001)
    res = S.thick_cylinder(r, a, b, p_i=1.0, p_o=0.2, E=E, nu=nu, end_condition=end)
    dsr = np.gradient(res.sigma_r, r, edge_order=2)
    resid = dsr + (res.sigma_r - res.sigma_theta) / r
    assert np.max(np.abs(resid[5:-5])) < 1e-7
    du = np.gradient(res.u_r, r, edge_order=2)
    eps_r = (res.sigma_r - nu * (res.sigma_theta + res.sigma_z)) / E
    eps_t = (res.sigma_theta - nu * (res.sigma_r + res.sigma_z)) / E
    assert np.max(np.abs(du[5:-5] - eps_r[5:-5])) < 1e-10
    assert res.u_r == pytest.approx(r * eps_t, rel=1e-12)
    if end == "plane_strain":
        eps_z = (res.sigma_z - nu * (res.sigma_r + res.sigma_theta)) / E
        assert np.max(np.abs(eps_z)) < 1e-16


def test_sphere():
    r = np.linspace(a, b, 20001)
    res = S.thick_sphere(r, a, b, p_i=p, E=E, nu=nu)
    assert res.sigma_r[[0, -1]] == pytest.approx([-p, 0.0], abs=1e-14)
    # tangential at bore p(b^3 + 2a^3)/(2(b^3 - a^3)) (T&G sec. 137, from memory) = 783/1404
    assert res.sigma_t[0] == pytest.approx(p * (b**3 + 2 * a**3) / (2 * (b**3 - a**3)), rel=1e-14)
    assert res.sigma_t[0] == pytest.approx(783.0 / 1404.0, rel=1e-14)
    # equilibrium d(sigma_r)/dr + 2(sigma_r - sigma_t)/r = 0 and Hooke's law
    resid = np.gradient(res.sigma_r, r, edge_order=2) + 2 * (res.sigma_r - res.sigma_t) / r
    assert np.max(np.abs(resid[5:-5])) < 1e-7
    du = np.gradient(res.u_r, r, edge_order=2)
    assert np.max(np.abs(du[5:-5] - (res.sigma_r - 2 * nu * res.sigma_t)[5:-5] / E)) < 1e-10
    assert res.u_r == pytest.approx(r * ((1 - nu) * res.sigma_t - nu * res.sigma_r) / E, rel=1e-12)


def test_shaft_torsion():
    # J = pi d^4/32, tau = T r/J, theta = T L/(G J) (common practice)
    J = S.shaft_polar_moment(20.0)
    assert J == pytest.approx(math.pi * 20.0**4 / 32.0, rel=1e-15)
    # solid shaft: tau_max = 16 T / (pi d^3) (common practice)
    assert S.shaft_shear_stress(1.0e5, 10.0, J) == pytest.approx(16e5 / (math.pi * 8000.0), rel=1e-14)
    Jh = S.shaft_polar_moment(20.0, 16.0)
    assert Jh == pytest.approx(math.pi * (20.0**4 - 16.0**4) / 32.0, rel=1e-15)
    assert S.shaft_twist_angle(1.0e5, 500.0, 80e3, Jh) == pytest.approx(1e5 * 500.0 / (80e3 * Jh), rel=1e-15)


def test_invalid():
    with pytest.raises(ValueError, match="outer radius"):
        S.thick_cylinder(1.0, 2.0, 1.0)
    with pytest.raises(ValueError, match="r must"):
        S.thick_cylinder(10.0, a, b, nu=0.3)
    with pytest.raises(ValueError, match="end_condition"):
        S.thick_cylinder(a, a, b, end_condition="capped")
    with pytest.raises(ValueError, match="d_in"):
        S.shaft_polar_moment(10.0, 12.0)
