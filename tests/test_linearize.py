"""Checks of elastofe.post.linearize."""

import math

import numpy as np
import pytest

from elastofe.handcalc.solids import thick_cylinder
from elastofe.post.linearize import linearize, tresca, von_mises


def test_pure_bending_linear_distribution():
    # sigma_xx = S (1 - 2 s/t): pure bending about the mid-point -> membrane 0, bending = end
    # values, peak 0 (definition of the linearization, ASME VIII-2 Annex 5-A, from memory)
    t, S = 12.0, 150.0
    for n in (2, 7, 8, 41):  # trapezoid (n=2) and Simpson paths
        s = np.linspace(0.0, t, n)
        sig = np.zeros((n, 6))
        sig[:, 0] = S * (1 - 2 * s / t)
        sig[:, 3] = -0.4 * S * (1 - 2 * s / t)
        res = linearize(s, sig)
        assert np.max(np.abs(res.membrane)) < 1e-12 * S
        assert res.bending_start == pytest.approx(sig[0], abs=1e-12 * S)
        assert res.bending_end == pytest.approx(sig[-1], abs=1e-12 * S)
        assert np.max(np.abs(res.peak_start)) < 1e-12 * S
        assert np.max(np.abs(res.peak_end)) < 1e-12 * S


def test_membrane_plus_bending_uneven_points_and_offset_start():
    # linear field sigma = m + b (1 - 2 xi/t) on unevenly spaced points, line starting at s = 5
    # (trapezoid is exact for a linear integrand -- common practice)
    rng = np.random.default_rng(1)
    s = 5.0 + np.sort(np.concatenate([[0.0, 10.0], rng.uniform(0, 10, 20)]))
    m = np.array([10.0, -3.0, 2.0, 1.0, 0.5, -0.25])
    bb = np.array([4.0, 1.0, 0.0, -2.0, 0.0, 3.0])
    xi = (s - 5.0) / 10.0
    sig = m + bb * (1 - 2 * xi)[:, None]
    res = linearize(s, sig)
    assert res.thickness == pytest.approx(10.0, rel=1e-15)
    assert res.membrane == pytest.approx(m, rel=1e-12, abs=1e-12)
    assert res.bending_start == pytest.approx(bb, rel=1e-12, abs=1e-12)
    assert res.von_mises_membrane == pytest.approx(float(von_mises(m)), rel=1e-12)
    assert res.von_mises_membrane_bending_end == pytest.approx(float(von_mises(m - bb)), rel=1e-12)


def test_quadratic_peak():
    # sigma = s^2 on [0, t]: membrane t^2/3, bending at start (6/t^2) int s^2 (t/2 - s) ds = -t^2/2,
    # peak at start 0 - t^2/3 + t^2/2 = t^2/6 (hand integration; Simpson exact for a quadratic)
    t = 3.0
    s = np.linspace(0, t, 11)
    sig = np.zeros((11, 6))
    sig[:, 1] = s**2
    res = linearize(s, sig)
    assert res.membrane[1] == pytest.approx(t**2 / 3, rel=1e-13)
    assert res.bending_start[1] == pytest.approx(-t**2 / 2, rel=1e-13)
    assert res.peak_start[1] == pytest.approx(t**2 / 6, rel=1e-12)
    assert res.peak_end[1] == pytest.approx(t**2 - t**2 / 3 - t**2 / 2, rel=1e-12)


def test_lame_hoop_stress_through_wall():
    # Lame cylinder a=3, b=9, p=1, open ends. Analytic (hand integration of A + B/r^2):
    # membrane hoop = A + B/(ab) = p a/(b - a)  (equals the hoop-force balance p a / t)
    # membrane radial = A - B/(ab) = -p a/(a + b)
    # bending hoop at bore = 6B/t^2 [ (b^2 - a^2)/(2ab) - ln(b/a) ]
    a, b, p = 3.0, 9.0, 1.0
    r = np.linspace(a, b, 2001)
    cyl = thick_cylinder(r, a, b, p_i=p, end_condition="open")
    sig = np.zeros((r.size, 6))
    sig[:, 0] = cyl.sigma_r
    sig[:, 1] = cyl.sigma_theta
    res = linearize(r - a, sig)
    t = b - a
    B = p * a**2 * b**2 / (b**2 - a**2)
    assert res.membrane[1] == pytest.approx(p * a / (b - a), rel=1e-6)
    assert res.membrane[0] == pytest.approx(-p * a / (a + b), rel=1e-6)
    bend = 6 * B / t**2 * ((b**2 - a**2) / (2 * a * b) - math.log(b / a))
    assert res.bending_start[1] == pytest.approx(bend, rel=1e-6)
    assert res.bending_start[0] == pytest.approx(-bend, rel=1e-6)
    assert res.peak_start[1] == pytest.approx(1.25 - p * a / (b - a) - bend, rel=1e-6)


def test_equivalent_stresses():
    # uniaxial: von Mises = Tresca = |sigma|; pure shear tau: von Mises = sqrt(3) tau,
    # Tresca = 2 tau (common practice)
    assert von_mises([5, 0, 0, 0, 0, 0]) == pytest.approx(5.0, rel=1e-15)
    assert tresca([5, 0, 0, 0, 0, 0]) == pytest.approx(5.0, rel=1e-14)
    assert von_mises([0, 0, 0, 0, 2, 0]) == pytest.approx(2 * math.sqrt(3), rel=1e-15)
    assert tresca([0, 0, 0, 0, 0, 2]) == pytest.approx(4.0, rel=1e-14)
    # hydrostatic: both zero
    assert von_mises([7, 7, 7, 0, 0, 0]) == pytest.approx(0.0, abs=1e-14)
    assert tresca([7, 7, 7, 0, 0, 0]) == pytest.approx(0.0, abs=1e-13)
    st = np.zeros((4, 3, 6))
    assert von_mises(st).shape == (4, 3)


def test_invalid():
    with pytest.raises(ValueError, match="shape"):
        linearize([0, 1, 2], np.zeros((3, 5)))
    with pytest.raises(ValueError, match="increasing"):
        linearize([0, 2, 1], np.zeros((3, 6)))


def test_lame_uneven_points_piecewise_linear_rule():
    # same analytic membrane p a/(b - a) as above, on points clustered at the bore
    # (piecewise-linear rule, error ~ n^-2)
    a, b, p = 3.0, 9.0, 1.0
    r = a + (b - a) * np.linspace(0.0, 1.0, 4001) ** 2
    cyl = thick_cylinder(r, a, b, p_i=p, end_condition="open")
    sig = np.zeros((r.size, 6))
    sig[:, 1] = cyl.sigma_theta
    res = linearize(r - a, sig)
    assert res.membrane[1] == pytest.approx(p * a / (b - a), rel=1e-6)
