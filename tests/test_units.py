"""Unit conversion at the case boundary (conversion factors: NIST SP 811, via pint)."""
import pytest

from elastofe.errors import CaseError
from elastofe.units import SYSTEMS, convert_quantity


def test_modulus_in_each_system():
    assert convert_quantity("200 GPa", "stress", SYSTEMS["mm-N"], key="E") == pytest.approx(200000.0)
    assert convert_quantity("200 GPa", "stress", SYSTEMS["m-N"], key="E") == pytest.approx(2e11)
    # 1 psi = 6894.757 Pa (NIST SP 811)
    assert convert_quantity("6894.757 Pa", "stress", SYSTEMS["in-lbf"], key="E") == pytest.approx(1.0, rel=1e-6)


def test_force_and_density():
    # 1 lbf = 4.4482216 N (NIST SP 811)
    assert convert_quantity("450 lbf", "force", SYSTEMS["mm-N"], key="F") == pytest.approx(2001.6997, rel=1e-6)
    # 7850 kg/m^3 in mm-N-s: 7.85e-9 t/mm^3 (1 t = 1 N s^2 / mm)
    assert convert_quantity("7850 kg/m^3", "density", SYSTEMS["mm-N"], key="rho") == pytest.approx(7.85e-9)
    assert SYSTEMS["mm-N"].gravity() == pytest.approx(9806.65)
    assert SYSTEMS["in-lbf"].gravity() == pytest.approx(386.0886, rel=1e-6)


def test_plain_numbers_pass_through():
    assert convert_quantity(4, "length", SYSTEMS["mm-N"], key="size") == 4.0


@pytest.mark.parametrize("value,fragment", [("200 N", "wrong dimension"), ("abc GPa", "cannot read"),
                                            (True, "true/false"), ([1], "expected")])
def test_bad_quantities(value, fragment):
    with pytest.raises(CaseError) as e:
        convert_quantity(value, "stress", SYSTEMS["mm-N"], key="material.E")
    assert "material.E" in str(e.value) and fragment in str(e.value)
