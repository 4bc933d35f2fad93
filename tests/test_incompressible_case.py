"""Nearly incompressible material through the case file: the mixed displacement-pressure element is
selected automatically and keeps the bore stresses of a thick cylinder right up to nu = 0.4999.

Target: Lamé's thick-walled cylinder, plane strain (Timoshenko & Goodier, Theory of Elasticity,
3rd ed. 1970): sigma_theta(a) = p (b² + a²)/(b² − a²), sigma_r(a) = −p,
u_r(a) = (1 + nu) a p [(1 − 2 nu) a² + b²] / (E (b² − a²)).
"""
from __future__ import annotations

import numpy as np
import pytest

import elastofe
from tests.conftest import ring_case

pytestmark = pytest.mark.gmsh

A, B, PR, E = 10.0, 20.0, 10.0, 1000.0


def lame(nu):
    c = PR * A ** 2 / (B ** 2 - A ** 2)
    u = (1 + nu) * A * PR * ((1 - 2 * nu) * A ** 2 + B ** 2) / (E * (B ** 2 - A ** 2))
    return u, c * (1 + B ** 2 / A ** 2), -PR


@pytest.mark.parametrize("nu", [0.49, 0.499, 0.4999])
def test_bore_stresses_and_displacement_up_to_04999(parts, tmp_path, nu):
    case = ring_case(tmp_path / "ring.toml", parts["ring"], E=E, nu=nu, pressure=PR, size=1.5, extra=f"""
        [[point]]
        name = "bore"
        at = [{A / np.sqrt(2)}, {A / np.sqrt(2)}, 2.5]
        """)
    res = elastofe.solve_case(elastofe.load_case(case))
    assert res.formulation == "mixed"
    u, hoop, radial = lame(nu)
    p = res.points["bore"]
    ur = float(np.hypot(*p["displacement"][:2]))
    s = p["stress"]
    # At 45 degrees: hoop = (sxx + syy)/2 - sxy, radial = (sxx + syy)/2 + sxy.
    s_hoop = 0.5 * (s[0] + s[1]) - s[3]
    s_rad = 0.5 * (s[0] + s[1]) + s[3]
    assert ur == pytest.approx(u, rel=0.005)
    assert s_hoop == pytest.approx(hoop, rel=0.02)
    assert s_rad == pytest.approx(radial, rel=0.02)
    inc = {c.name: c for c in res.checks}["incompressibility"]
    assert inc.status == "pass" and "mixed" in inc.why


def test_ordinary_nu_keeps_the_displacement_element(parts, tmp_path):
    case = ring_case(tmp_path / "ring.toml", parts["ring"], E=E, nu=0.3, pressure=PR, size=3.0)
    res = elastofe.solve_case(elastofe.load_case(case))
    assert res.formulation == "displacement"
