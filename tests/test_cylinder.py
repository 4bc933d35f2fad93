"""Thick-walled cylinder under internal pressure against Lamé's solution
(Timoshenko & Goodier, Theory of Elasticity, 3rd ed. 1970, thick-walled cylinder)."""
import numpy as np
import pytest

import elastofe
from tests.conftest import ring_case

A, B, PR, E, NU = 10.0, 20.0, 10.0, 200000.0, 0.3


def lame_plane_strain(r):
    """Radial displacement and hoop stress at radius r, internal pressure, plane strain (u_z = 0)."""
    c = PR * A ** 2 / (B ** 2 - A ** 2)
    hoop = c * (1 + B ** 2 / r ** 2)
    radial = c * (1 - B ** 2 / r ** 2)
    u = (1 + NU) / E * c * ((1 - 2 * NU) * r + B ** 2 / r)
    return u, hoop, radial


@pytest.fixture(scope="module")
def res(parts, tmp_path_factory):
    d = tmp_path_factory.mktemp("cyl")
    assert A == 10.0  # the bore radius of the shared quarter-ring part
    case = ring_case(d / "ring.toml", parts["ring"], E=E, nu=NU, pressure=PR, size=2.0, extra=f"""
        [[point]]
        name = "bore"
        at = [{A / np.sqrt(2)}, {A / np.sqrt(2)}, 2.5]
        [[point]]
        name = "mid"
        at = [{15 / np.sqrt(2)}, {15 / np.sqrt(2)}, 2.5]
        """)
    return elastofe.run(case, out=d / "out")


def test_radial_displacement_against_lame(res):
    for name, r in (("bore", A), ("mid", 15.0)):
        u = res.points[name]["displacement"]
        ur = np.hypot(u[0], u[1])
        assert ur == pytest.approx(lame_plane_strain(r)[0], rel=0.005)


def test_hoop_stress_against_lame(res):
    # At 45 degrees the hoop direction is (-1, 1)/sqrt(2): s_hoop = (sxx + syy)/2 - sxy.
    for name, r, tol in (("bore", A, 0.02), ("mid", 15.0, 0.01)):
        s = res.points[name]["stress"]
        hoop = 0.5 * (s[0] + s[1]) - s[3]
        assert hoop == pytest.approx(lame_plane_strain(r)[1], rel=tol)


def test_pressure_resultant_and_equilibrium(res):
    # Internal pressure on a quarter bore (0..90 deg) pushes the material away from the axis:
    # resultant p a h (1, 1, 0) (common practice: the projected area of each half is a h).
    F = res.loads[0].force
    assert F == pytest.approx([PR * A * 5, PR * A * 5, 0.0], rel=2e-3, abs=1e-6)
    assert res.equilibrium_error < 1e-8
