"""Checks of elastofe.handcalc.concentration."""

import numpy as np
import pytest

from elastofe.handcalc import concentration as C


def test_kirsch_edge_and_far_field():
    sig, a = 10.0, 2.0
    th = np.linspace(0, np.pi, 721)
    sr, st, trt = C.kirsch_stresses(a, th, a, sig)
    # traction-free hole: sigma_r = tau_rtheta = 0 at r = a (boundary condition)
    assert np.max(np.abs(sr)) < 1e-13 and np.max(np.abs(trt)) < 1e-13
    # Kt = 3 at theta = 90 deg, -sigma at theta = 0 (Kirsch; T&G sec. 35, from memory)
    assert np.max(st) == pytest.approx(3.0 * sig, rel=1e-14)
    assert st[0] == pytest.approx(-sig, rel=1e-14)
    assert C.kirsch_hole_edge_stress(th, sig) == pytest.approx(st, rel=1e-13, abs=1e-13)
    # far field: Cartesian sigma_x = sig, sigma_y = tau = 0 (remote load, problem statement)
    r = 1e5 * a
    for t in (0.3, 1.1, 2.5):
        sr, st, trt = C.kirsch_stresses(r, t, a, sig)
        c, s = np.cos(t), np.sin(t)
        sx = sr * c * c + st * s * s - 2 * trt * s * c
        sy = sr * s * s + st * c * c + 2 * trt * s * c
        assert sx == pytest.approx(sig, rel=1e-8)
        assert sy == pytest.approx(0.0, abs=1e-8 * sig)


def test_kirsch_hoop_decay_at_section():
    # along theta = 90 deg: sigma_theta = s/2 (2 + a^2/r^2 + 3 a^4/r^4); at r = 2a: 1.22 s
    # (T&G sec. 35, from memory: "1.22")
    _, st, _ = C.kirsch_stresses(4.0, np.pi / 2, 2.0, 1.0)
    assert float(st) == pytest.approx(0.5 * (2 + 0.25 + 3 / 16), rel=1e-14)
    assert float(st) == pytest.approx(1.22, abs=0.005)


def test_kt_net_fit_values():
    # Howland 1930 fit as in Roark Table 17.1 (coefficients as named in the project issue);
    # hand evaluation of the polynomial
    assert C.kt_net_central_hole(0.0) == pytest.approx(3.0, rel=1e-15)  # = Kirsch Kt
    assert C.kt_net_central_hole(0.2) == pytest.approx(3 - 0.626 + 0.1464 - 0.01224, rel=1e-14)
    assert C.kt_net_central_hole(0.5) == pytest.approx(2.15875, rel=1e-14)
    # cross-check with Heywood's fit 2 + (1 - d/W)^3 (Peterson's Stress Concentration
    # Factors, from memory): agreement within 2 %
    for x in (0.1, 0.2, 0.3, 0.5):
        assert C.kt_net_central_hole(x) == pytest.approx(2 + (1 - x) ** 3, rel=0.02)


def test_net_gross_conversion():
    # Kt_g = Kt_n / (1 - d/W): nominal stresses P/((W-d)t) vs P/(W t) (common practice)
    kn = C.kt_net_central_hole(0.5)
    assert C.kt_gross_from_net(kn, 0.5) == pytest.approx(2 * 2.15875, rel=1e-14)
    assert C.kt_net_from_gross(C.kt_gross_from_net(kn, 0.3), 0.3) == pytest.approx(kn, rel=1e-15)


def test_invalid():
    with pytest.raises(ValueError, match="d_over_W"):
        C.kt_net_central_hole(1.0)
    with pytest.raises(ValueError, match="r must"):
        C.kirsch_stresses(1.0, 0.0, 2.0, 1.0)
