"""Checks of elastofe.handcalc.sections against hand computations."""

import math

import numpy as np
import pytest

from elastofe.handcalc import sections as S


def test_rectangle_second_moments():
    sec = S.rectangle(b=30.0, h=50.0)
    # I = b h^3 / 12 about the axis along the width (common practice)
    assert sec.I_zz == pytest.approx(30.0 * 50.0**3 / 12.0, rel=1e-14)
    assert sec.I_yy == pytest.approx(50.0 * 30.0**3 / 12.0, rel=1e-14)
    assert sec.area == pytest.approx(1500.0, rel=1e-14)
    assert sec.c_y_max == pytest.approx(25.0) and sec.c_z_min == pytest.approx(15.0)


def test_rectangle_torsion_constant_square_and_slender():
    # Timoshenko & Goodier 3rd ed. sec. 109 table: k1 = 0.141 for a/b = 1,
    # 0.312 for a/b = 10 (J = k1 a b^3) -- from memory; table gives 3 digits
    assert S.rectangle_torsion_constant(1.0, 1.0) == pytest.approx(0.1406, abs=6e-4)
    assert S.rectangle_torsion_constant(10.0, 1.0) / 10.0 == pytest.approx(0.312, abs=6e-4)


def test_circle_and_tube():
    d = 40.0
    sec = S.circle(d)
    # pi d^4/64 and pi d^4/32 (common practice)
    assert sec.I_zz == pytest.approx(math.pi * d**4 / 64.0, rel=1e-14)
    assert sec.J_torsion == pytest.approx(math.pi * d**4 / 32.0, rel=1e-14)
    tube = S.hollow_circle(40.0, 30.0)
    assert tube.I_yy == pytest.approx(math.pi * (40.0**4 - 30.0**4) / 64.0, rel=1e-14)
    assert tube.area == pytest.approx(math.pi * (40.0**2 - 30.0**2) / 4.0, rel=1e-14)


def test_cowper_coefficients():
    nu = 0.3
    # Cowper 1966 Table 1: rectangle 10(1+nu)/(12+11nu), circle 6(1+nu)/(7+6nu)
    assert S.cowper_shear_coefficient_rectangle(nu) == pytest.approx(13.0 / 15.3, rel=1e-14)
    assert S.cowper_shear_coefficient_solid_circle(nu) == pytest.approx(7.8 / 8.8, rel=1e-14)
    # hollow circle formula must reduce to the solid circle (m=0) and to the
    # thin tube 2(1+nu)/(4+3nu) (m=1), both in Cowper 1966 Table 1
    assert S.cowper_shear_coefficient_hollow_circle(nu, 0.0) == pytest.approx(7.8 / 8.8, rel=1e-14)
    assert S.cowper_shear_coefficient_hollow_circle(nu, 1.0) == pytest.approx(2.6 / 4.9, rel=1e-14)
    assert S.cowper_shear_coefficient_thin_tube(nu) == pytest.approx(2.6 / 4.9, rel=1e-14)
    assert S.rectangle(1.0, 2.0, nu=nu).shear_coefficient == pytest.approx(13.0 / 15.3, rel=1e-14)


def test_polygon_rectangle_both_orientations():
    pts = np.array([[0.0, 0.0], [4.0, 0.0], [4.0, 2.0], [0.0, 2.0]])  # (y, z)
    for p in (pts, pts[::-1]):
        sec = S.polygon(p)
        # rectangle depth 4 along y, width 2 along z: I_zz = 2*4^3/12 (common practice)
        assert sec.area == pytest.approx(8.0, rel=1e-14)
        assert sec.centroid == pytest.approx((2.0, 1.0), rel=1e-14)
        assert sec.I_zz == pytest.approx(2.0 * 4.0**3 / 12.0, rel=1e-13)
        assert sec.I_yy == pytest.approx(4.0 * 2.0**3 / 12.0, rel=1e-13)
        assert sec.I_yz == pytest.approx(0.0, abs=1e-12)


def test_polygon_T_section_composite():
    # T: flange 100 wide (z) x 20 deep (y) on top of a web 20 wide x 80 deep.
    # y from 0 (web bottom) to 100 (flange top), z centred.
    pts = [(0, -10), (80, -10), (80, -50), (100, -50), (100, 50), (80, 50), (80, 10), (0, 10)]
    sec = S.polygon(pts)
    # composite-area hand computation (common practice, parallel-axis theorem)
    A1, y1 = 100 * 20, 90.0
    A2, y2 = 20 * 80, 40.0
    A = A1 + A2
    yc = (A1 * y1 + A2 * y2) / A  # = 67.777...
    Izz = 100 * 20**3 / 12 + A1 * (y1 - yc) ** 2 + 20 * 80**3 / 12 + A2 * (y2 - yc) ** 2
    Iyy = 20 * 100**3 / 12 + 80 * 20**3 / 12
    assert sec.area == pytest.approx(A, rel=1e-14)
    assert sec.centroid[0] == pytest.approx(yc, rel=1e-13)
    assert sec.centroid[1] == pytest.approx(0.0, abs=1e-12)
    assert sec.I_zz == pytest.approx(Izz, rel=1e-12)
    assert sec.I_yy == pytest.approx(Iyy, rel=1e-12)
    assert sec.I_yz == pytest.approx(0.0, abs=1e-6)
    assert sec.c_y_max == pytest.approx(100 - yc, rel=1e-13)
    assert sec.c_y_min == pytest.approx(yc, rel=1e-13)


def test_polygon_L_section_product_and_principal():
    # L: legs 0..60 along y and 0..40 along z, thickness 10.
    pts = [(0, 0), (60, 0), (60, 10), (10, 10), (10, 40), (0, 40)]
    sec = S.polygon(pts[::-1])  # clockwise on purpose
    # composite: rectangle 1 = y in [0,60], z in [0,10]; rectangle 2 = y in [0,10], z in [10,40]
    A1, c1 = 600.0, (30.0, 5.0)
    A2, c2 = 300.0, (5.0, 25.0)
    A = A1 + A2
    yc = (A1 * c1[0] + A2 * c2[0]) / A
    zc = (A1 * c1[1] + A2 * c2[1]) / A
    Izz = 10 * 60**3 / 12 + A1 * (c1[0] - yc) ** 2 + 30 * 10**3 / 12 + A2 * (c2[0] - yc) ** 2
    Iyy = 60 * 10**3 / 12 + A1 * (c1[1] - zc) ** 2 + 10 * 30**3 / 12 + A2 * (c2[1] - zc) ** 2
    Iyz = A1 * (c1[0] - yc) * (c1[1] - zc) + A2 * (c2[0] - yc) * (c2[1] - zc)
    assert sec.area == pytest.approx(A, rel=1e-14)
    assert sec.centroid == pytest.approx((yc, zc), rel=1e-13)
    assert sec.I_zz == pytest.approx(Izz, rel=1e-12)
    assert sec.I_yy == pytest.approx(Iyy, rel=1e-12)
    assert sec.I_yz == pytest.approx(Iyz, rel=1e-12)

    I1, I2, th = S.principal_second_moments(sec.I_yy, sec.I_zz, sec.I_yz)
    # principal values are the eigenvalues of [[int y^2, int yz],[int yz, int z^2]] (common practice)
    ev = np.linalg.eigvalsh(np.array([[Izz, Iyz], [Iyz, Iyy]]))
    assert (I1, I2) == pytest.approx((ev[1], ev[0]), rel=1e-12)
    # rotating the vertices by theta gives zero product of area (definition of principal axes)
    c, s = math.cos(th), math.sin(th)
    p = np.asarray(pts, float) - np.array([yc, zc])
    rot = np.column_stack([p[:, 0] * c + p[:, 1] * s, -p[:, 0] * s + p[:, 1] * c])
    sec_r = S.polygon(rot)
    assert sec_r.I_yz == pytest.approx(0.0, abs=1e-9 * I1)
    assert sec_r.I_zz == pytest.approx(I1, rel=1e-12)


def test_invalid_arguments():
    with pytest.raises(ValueError, match="b must"):
        S.rectangle(-1.0, 2.0)
    with pytest.raises(ValueError, match="d_in"):
        S.hollow_circle(2.0, 2.0)
    with pytest.raises(ValueError, match="shape"):
        S.polygon([[0, 0], [1, 1]])
    with pytest.raises(ValueError, match="zero area"):
        S.polygon([[0, 0], [1, 1], [2, 2]])
    with pytest.raises(ValueError, match="nu"):
        S.cowper_shear_coefficient_rectangle(0.5)
